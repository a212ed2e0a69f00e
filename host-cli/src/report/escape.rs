//! Escaping of every string that reaches the report from a feed, a config file, a summary or
//! an event (file names, column names, error messages, config text).
//!
//! # Contract
//! - [`escape`] output contains no `<`, `>`, `&` (other than entities it wrote), `"` or `'`,
//!   so it is safe in element content and in quoted attribute values.
//! - Characters XML 1.0 forbids (C0 controls other than tab, line feed and carriage
//!   return) become U+FFFD, so the page stays well-formed XML as well as HTML.

/// Escapes text for HTML element content and quoted attributes.
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len() + text.len() / 8);
    for c in text.chars() {
        match c {
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '&' => out.push_str("&amp;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            '\t' | '\n' | '\r' => out.push(c),
            c if (c as u32) < 0x20 || c == '\u{7f}' || c == '\u{fffe}' || c == '\u{ffff}' => {
                out.push('\u{fffd}')
            }
            c => out.push(c),
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn markup_and_controls_are_neutralized() {
        assert_eq!(
            escape("<script>alert('x')</script> & \"q\""),
            "&lt;script&gt;alert(&#39;x&#39;)&lt;/script&gt; &amp; &quot;q&quot;"
        );
        assert_eq!(escape("a\u{0}b\u{1b}c\td"), "a\u{fffd}b\u{fffd}c\td");
        assert_eq!(escape("ppm · °C"), "ppm · °C");
    }
}
