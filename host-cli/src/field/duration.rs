//! Durations in options: `30s`, `5m`, `1h`, `1h 30m`, `250ms`, `-2s` (jiff's friendly
//! duration format). A bare number is refused: a tolerance without a unit is a guess.
//!
//! Invariant: a parsed duration is finite, in seconds.

/// Parses a duration option into seconds; `option` names the option in the message.
pub fn parse_duration(option: &str, text: &str) -> Result<f64, String> {
    let trimmed = text.trim();
    let expected = "expected a duration with a unit, such as 30s, 5m, 1h or 1h 30m";
    if trimmed.parse::<f64>().is_ok() {
        return Err(format!(
            "{option}: {trimmed:?} has no unit, {expected} (h, m, s, ms)"
        ));
    }
    let duration: jiff::SignedDuration = trimmed
        .parse()
        .map_err(|_| format!("{option}: {expected}, found {trimmed:?}"))?;
    Ok(duration.as_secs_f64())
}

/// [`parse_duration`] for a non-negative duration (windows and tolerances).
pub fn parse_positive_duration(option: &str, text: &str) -> Result<f64, String> {
    let seconds = parse_duration(option, text)?;
    if seconds < 0.0 {
        return Err(format!(
            "{option}: {:?} is negative, expected a duration of zero or more",
            text.trim()
        ));
    }
    Ok(seconds)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn units() {
        assert_eq!(parse_duration("--x", "30s"), Ok(30.0));
        assert_eq!(parse_duration("--x", "5m"), Ok(300.0));
        assert_eq!(parse_duration("--x", "1h"), Ok(3600.0));
        assert_eq!(parse_duration("--x", "1h 30m"), Ok(5400.0));
        assert_eq!(parse_duration("--x", "250ms"), Ok(0.25));
        assert_eq!(parse_duration("--x", "-2s"), Ok(-2.0));
    }

    #[test]
    fn bare_number_and_nonsense_are_refused() {
        assert_eq!(
            parse_duration("--match-within", "30").unwrap_err(),
            "--match-within: \"30\" has no unit, expected a duration with a unit, such as 30s, 5m, 1h or 1h 30m (h, m, s, ms)"
        );
        assert_eq!(
            parse_duration("--average-over", "soon").unwrap_err(),
            "--average-over: expected a duration with a unit, such as 30s, 5m, 1h or 1h 30m, found \"soon\""
        );
        assert!(parse_positive_duration("--match-within", "-5s").is_err());
    }
}
