//! How the commands talk to a person: terminals, colour and the human summary.
//!
//! Policy (documented in the README, "Command-line conventions"):
//! - Human-readable text (the one-paragraph summary, the status line of `watch`) goes to
//!   standard error, and only when standard error is a terminal, unless asked for with
//!   `--human-summary` or silenced with `--quiet`. In a pipe the tool is quiet by default.
//! - Machine-readable output (JSON, CSV) goes wherever it is asked to go (`-` = stdout).
//! - Colour only on a terminal, and never when `NO_COLOR` is set to a non-empty value
//!   (the convention of no-color.org).
//! - Warnings about the input (skipped rows, time order) always go to standard error,
//!   unless `--quiet`.

use std::io::IsTerminal;

/// True when standard error is a terminal.
pub fn stderr_is_terminal() -> bool {
    std::io::stderr().is_terminal()
}

/// True when standard output is a terminal.
pub fn stdout_is_terminal() -> bool {
    std::io::stdout().is_terminal()
}

/// True when `NO_COLOR` asks for no colour (set and not empty).
pub fn no_color_requested() -> bool {
    std::env::var_os("NO_COLOR").is_some_and(|value| !value.is_empty())
}

/// True when text on standard error may be coloured.
pub fn colour_enabled() -> bool {
    stderr_is_terminal() && !no_color_requested()
}

/// Colours of the human output.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Colour {
    /// Alarms.
    Red,
    /// Warnings.
    Yellow,
    /// All well.
    Green,
    /// Names and headings.
    Bold,
}

/// `text` in `colour` when `enabled`, plain otherwise.
pub fn paint(text: &str, colour: Colour, enabled: bool) -> String {
    if !enabled {
        return text.to_string();
    }
    let code = match colour {
        Colour::Red => "31",
        Colour::Yellow => "33",
        Colour::Green => "32",
        Colour::Bold => "1",
    };
    format!("\x1b[{code}m{text}\x1b[0m")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn paint_is_plain_when_disabled() {
        assert_eq!(paint("alarm", Colour::Red, false), "alarm");
        assert_eq!(paint("alarm", Colour::Red, true), "\x1b[31malarm\x1b[0m");
    }
}
