//! Writing simulated rows as a feed CSV.

use super::run::*;
use super::scenario::*;

/// Writes rows as a feed CSV (`t,raw,ref`, plus `temp` when the rows carry it), with
/// shortest round-trip numbers; missing rows are left out.
pub fn write_csv(rows: &[Row], out: &mut dyn std::io::Write) -> std::io::Result<()> {
    let with_temperature = rows.iter().any(|row| row.temperature.is_some());
    write_header(out, with_temperature)?;
    for row in rows {
        write_row(out, row, &row.t.to_string(), with_temperature)?;
    }
    Ok(())
}

fn write_header(out: &mut dyn std::io::Write, with_temperature: bool) -> std::io::Result<()> {
    if with_temperature {
        writeln!(out, "t,raw,ref,temp")
    } else {
        writeln!(out, "t,raw,ref")
    }
}

fn write_row(
    out: &mut dyn std::io::Write,
    row: &Row,
    t: &str,
    with_temperature: bool,
) -> std::io::Result<()> {
    if row.missing {
        return Ok(());
    }
    write!(out, "{t},{},", row.raw)?;
    if let Some(reference) = row.reference {
        write!(out, "{reference}")?;
    }
    if with_temperature {
        match row.temperature {
            Some(temperature) => write!(out, ",{temperature}")?,
            None => write!(out, ",")?,
        }
    }
    writeln!(out)
}

/// Streams a scenario's feed as CSV (memory flat in the row count) and returns its truth.
pub fn write_feed(
    scenario: &Scenario,
    out: &mut dyn std::io::Write,
) -> std::io::Result<GroundTruth> {
    let with_temperature = scenario.temperature.is_some_and(|m| m.record);
    write_header(out, with_temperature)?;
    let start = scenario.start();
    let mut simulation = Simulation::new(scenario);
    for row in simulation.by_ref() {
        let t = match (scenario.time_format, start) {
            (TimeFormat::Rfc3339, Some(start)) => {
                let time = start + time::Duration::seconds_f64(row.t);
                time.format(&time::format_description::well_known::Rfc3339)
                    .unwrap_or_else(|_| row.t.to_string())
            }
            _ => row.t.to_string(),
        };
        write_row(out, &row, &t, with_temperature)?;
    }
    Ok(simulation.truth())
}
