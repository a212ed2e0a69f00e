//! Assembly of the self-contained HTML page: a style sheet, headings, the figures (inline
//! SVG) with their legends and notes, tables, the configuration and the cautions. No
//! scripts, no external resources, no colour that carries meaning on its own.
//!
//! # Contract
//! - Every string that did not come from this module is passed through [`escape`].
//! - The page is well-formed XML (XHTML syntax) as well as HTML, so strict XML parsers and
//!   browsers read the same tree.

use super::escape::escape;
use super::plot::{Dash, Figure, Marker, Swatch};

const STYLE: &str = "
body { font-family: sans-serif; margin: 1.5em auto; max-width: 1000px; color: #000; background: #fff; line-height: 1.4; }
h1 { font-size: 1.5em; margin-bottom: 0.2em; }
h2 { font-size: 1.2em; margin-top: 1.6em; border-bottom: 1px solid #888; }
.caution { border: 2px solid #000; padding: 0.6em 0.9em; margin: 1em 0; }
figure { margin: 1em 0 2em 0; page-break-inside: avoid; break-inside: avoid; }
figure svg { max-width: 100%; height: auto; border: 1px solid #ccc; }
figcaption { font-size: 0.92em; }
ul.legend { list-style: none; padding-left: 0; margin: 0.4em 0; }
ul.legend li { margin: 0.15em 0; }
ul.legend svg { vertical-align: middle; margin-right: 0.4em; border: none; }
table { border-collapse: collapse; margin: 0.5em 0; font-size: 0.92em; }
th, td { border: 1px solid #999; padding: 0.2em 0.5em; text-align: left; vertical-align: top; }
td.number { text-align: right; font-variant-numeric: tabular-nums; }
pre { background: #f4f4f4; border: 1px solid #ccc; padding: 0.6em; overflow-x: auto; }
.ramp span { display: inline-block; width: 1.6em; height: 0.9em; border: 1px solid #666; vertical-align: middle; }
@media print { body { max-width: none; margin: 0.5cm; } figure svg { border: none; } }
";

/// A small SVG swatch for a legend entry.
fn swatch(swatch: Swatch) -> String {
    let shape = match swatch {
        Swatch::Marker(Marker::Dot) => {
            "<circle cx=\"9\" cy=\"9\" r=\"4\" fill=\"#000\"/>".to_string()
        }
        Swatch::Marker(Marker::Ring) => {
            "<circle cx=\"9\" cy=\"9\" r=\"4\" fill=\"none\" stroke=\"#000\"/>".to_string()
        }
        Swatch::Marker(Marker::Triangle) => {
            "<polygon points=\"9,3 15,14 3,14\" fill=\"none\" stroke=\"#000\"/>".to_string()
        }
        Swatch::Marker(Marker::Cross) => {
            "<path d=\"M4 4 L14 14 M14 4 L4 14\" stroke=\"#000\"/>".to_string()
        }
        Swatch::Marker(Marker::Square) => {
            "<rect x=\"5\" y=\"5\" width=\"8\" height=\"8\" fill=\"none\" stroke=\"#000\"/>"
                .to_string()
        }
        Swatch::Line(dash) => {
            let pattern = match dash {
                Dash::Solid => "",
                Dash::Dashed => " stroke-dasharray=\"6 4\"",
                Dash::Dotted => " stroke-dasharray=\"2 3\"",
            };
            format!("<path d=\"M1 9 L27 9\" stroke=\"#000\" stroke-width=\"2\"{pattern}/>")
        }
        Swatch::Band => {
            "<rect x=\"1\" y=\"4\" width=\"26\" height=\"10\" fill=\"#c8c8c8\" stroke=\"#888\"/>"
                .to_string()
        }
        Swatch::Span => {
            "<rect x=\"1\" y=\"3\" width=\"26\" height=\"12\" fill=\"#e6aa96\" stroke=\"#000\"/>"
                .to_string()
        }
    };
    format!(
        "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"28\" height=\"18\" viewBox=\"0 0 28 18\" aria-hidden=\"true\">{shape}</svg>"
    )
}

/// The HTML of one figure.
pub fn figure(figure: &Figure, time_ramp: bool) -> String {
    let mut out = format!(
        "<figure id=\"plot-{}\" class=\"figure\" data-plot=\"{}\">\n<h3>{}</h3>\n{}\n<figcaption>\n<ul class=\"legend\">\n",
        figure.id,
        figure.id,
        escape(&figure.title),
        figure.svg
    );
    for entry in &figure.legend {
        out.push_str(&format!(
            "<li>{}{}</li>\n",
            swatch(entry.swatch),
            escape(&entry.text)
        ));
    }
    if time_ramp {
        out.push_str("<li class=\"ramp\">colour shows time: ");
        for colour in super::plot::RAMP {
            out.push_str(&format!(
                "<span style=\"background: rgb({}, {}, {})\"></span>",
                colour.0, colour.1, colour.2
            ));
        }
        out.push_str(
            " dark = early, light = late (shape, not colour, tells the series apart)</li>\n",
        );
    }
    out.push_str(&format!(
        "</ul>\n<p>{}</p>\n</figcaption>\n</figure>\n",
        escape(&figure.note)
    ));
    out
}

/// A two-column table of key and value.
pub fn key_values(id: &str, rows: &[(String, String)]) -> String {
    let mut out = format!("<table id=\"{id}\">\n<tbody>\n");
    for (key, value) in rows {
        out.push_str(&format!(
            "<tr><th scope=\"row\">{}</th><td>{}</td></tr>\n",
            escape(key),
            escape(value)
        ));
    }
    out.push_str("</tbody>\n</table>\n");
    out
}

/// A table with a header row.
pub fn table(id: &str, header: &[&str], rows: &[Vec<String>]) -> String {
    let mut out = format!("<table id=\"{id}\">\n<thead><tr>");
    for name in header {
        out.push_str(&format!("<th scope=\"col\">{}</th>", escape(name)));
    }
    out.push_str("</tr></thead>\n<tbody>\n");
    for row in rows {
        out.push_str("<tr>");
        for cell in row {
            out.push_str(&format!("<td>{}</td>", escape(cell)));
        }
        out.push_str("</tr>\n");
    }
    out.push_str("</tbody>\n</table>\n");
    out
}

/// The whole page.
pub fn page(
    title: &str,
    subtitle: &str,
    cautions: &[String],
    sections: &[(String, String)],
) -> String {
    let mut out = String::with_capacity(1 << 20);
    out.push_str("<!DOCTYPE html>\n<html xmlns=\"http://www.w3.org/1999/xhtml\" lang=\"en\">\n<head>\n<meta charset=\"utf-8\"/>\n");
    out.push_str("<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\"/>\n");
    out.push_str(&format!(
        "<meta name=\"generator\" content=\"steadycal {}\"/>\n<title>{}</title>\n<style>{}</style>\n</head>\n<body>\n",
        env!("CARGO_PKG_VERSION"),
        escape(title),
        STYLE
    ));
    out.push_str(&format!(
        "<h1>{}</h1>\n<p class=\"subtitle\">{}</p>\n",
        escape(title),
        escape(subtitle)
    ));
    out.push_str("<div class=\"caution\" id=\"caution\"><strong>Caution.</strong> ");
    out.push_str(&escape(cautions.first().map(String::as_str).unwrap_or("")));
    out.push_str("</div>\n");
    out.push_str("<nav><ul>\n");
    for (heading, _) in sections {
        out.push_str(&format!(
            "<li><a href=\"#{}\">{}</a></li>\n",
            anchor(heading),
            escape(heading)
        ));
    }
    out.push_str("<li><a href=\"#cautions\">Cautions</a></li>\n</ul></nav>\n");
    for (heading, body) in sections {
        out.push_str(&format!(
            "<section id=\"{}\">\n<h2>{}</h2>\n{}</section>\n",
            anchor(heading),
            escape(heading),
            body
        ));
    }
    out.push_str("<section id=\"cautions\">\n<h2>Cautions</h2>\n<ul>\n");
    for caution in cautions {
        out.push_str(&format!("<li>{}</li>\n", escape(caution)));
    }
    out.push_str("</ul>\n</section>\n</body>\n</html>\n");
    out
}

/// A section anchor from its heading (ASCII letters and digits, dashes).
pub fn anchor(heading: &str) -> String {
    let mut out = String::new();
    for c in heading.chars() {
        if c.is_ascii_alphanumeric() {
            out.push(c.to_ascii_lowercase());
        } else if !out.ends_with('-') && !out.is_empty() {
            out.push('-');
        }
    }
    out.trim_end_matches('-').to_string()
}
