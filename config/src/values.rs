//! Checked numbers and names: each type refuses, while the file is parsed, a value outside
//! its range, so toml's error carries the key, its line and column and the offending text.
//!
//! Every type serializes as the plain value it wraps (the written file reads like the one an
//! engineer writes).

use serde::de::{self, Deserializer};
use serde::{Deserialize, Serialize, Serializer};
use steadycal_core::event::Severity;
use steadycal_core::transform::Rung;

/// Declares a newtype over a number that must pass `$ok`, refusing others with
/// "out of range: VALUE, expected EXPECTED".
macro_rules! checked_number {
    ($(#[$doc:meta])* $name:ident($inner:ty), |$value:ident| $ok:expr, $expected:literal) => {
        $(#[$doc])*
        #[derive(Clone, Copy, Debug, PartialEq, Serialize)]
        #[serde(transparent)]
        pub struct $name(pub $inner);

        impl<'de> Deserialize<'de> for $name {
            fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
                let $value = <$inner>::deserialize(deserializer)?;
                if $ok {
                    Ok($name($value))
                } else {
                    Err(de::Error::custom(format!(
                        "out of range: {}, expected {}",
                        $value, $expected
                    )))
                }
            }
        }
    };
}

checked_number!(
    /// A probability strictly between 0 and 1 (an α or a confidence level).
    Alpha(f64),
    |value| value > 0.0 && value < 1.0,
    "a probability strictly between 0 and 1"
);

checked_number!(
    /// A positive, finite number.
    Positive(f64),
    |value| value.is_finite() && value > 0.0,
    "a positive finite number"
);

checked_number!(
    /// A positive number or `inf` (which turns a check off).
    PositiveOrOff(f64),
    |value| value > 0.0,
    "a positive number, or inf to turn the check off"
);

checked_number!(
    /// A non-negative, finite number.
    NonNegative(f64),
    |value| value.is_finite() && value >= 0.0,
    "a non-negative finite number"
);

checked_number!(
    /// A finite number of any sign.
    Finite(f64),
    |value| value.is_finite(),
    "a finite number"
);

checked_number!(
    /// A fraction in [0, 1).
    Fraction(f64),
    |value| (0.0..1.0).contains(&value),
    "a fraction in [0, 1)"
);

checked_number!(
    /// A proportion in [0, 1].
    Proportion(f64),
    |value| (0.0..=1.0).contains(&value),
    "a proportion in [0, 1]"
);

checked_number!(
    /// The forgetting factor, in (0, 1].
    Forgetting(f64),
    |value| value > 0.0 && value <= 1.0,
    "a forgetting factor in (0, 1]"
);

checked_number!(
    /// An in-control average run length, in checks: above 1 and at most 10^12.
    RunLength(f64),
    |value| value > 1.0 && value <= 1e12,
    "a run length above 1 and at most 1e12 checks"
);

checked_number!(
    /// A count of at least 1.
    AtLeastOne(u32),
    |value| value >= 1,
    "at least 1"
);

checked_number!(
    /// A count of at least 2.
    AtLeastTwo(u32),
    |value| value >= 2,
    "at least 2"
);

/// A duration written as engineers write one (`"30d"`, `"2w"`, `"12h 30min"`), read by the
/// `humantime` crate; the text is kept so that a written file says what was read.
#[derive(Clone, Debug, PartialEq)]
pub struct Duration {
    /// The text as written.
    pub text: String,
    /// Its length in hours.
    pub hours: f64,
}

impl<'de> Deserialize<'de> for Duration {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        let text = String::deserialize(deserializer)?;
        let parsed = humantime::parse_duration(&text).map_err(|error| {
            de::Error::custom(format!(
                "not a duration: `{text}` ({error}); expected for example \"30d\", \"2w\" or \"12h\""
            ))
        })?;
        if parsed.is_zero() {
            return Err(de::Error::custom(format!(
                "out of range: `{text}`, expected a positive duration"
            )));
        }
        Ok(Duration {
            hours: parsed.as_secs_f64() / 3600.0,
            text,
        })
    }
}

impl Serialize for Duration {
    fn serialize<S: Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        serializer.serialize_str(&self.text)
    }
}

/// The rung names accepted in config files.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Deserialize, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum RungName {
    /// λ = 1.
    Identity,
    /// λ = 1/2.
    Sqrt,
    /// λ = 0.
    Log,
    /// λ = −1/2.
    InvSqrt,
    /// λ = −1.
    Inverse,
}

impl RungName {
    /// The core's rung.
    pub fn rung(self) -> Rung {
        match self {
            RungName::Identity => Rung::Identity,
            RungName::Sqrt => Rung::Sqrt,
            RungName::Log => Rung::Log,
            RungName::InvSqrt => Rung::InvSqrt,
            RungName::Inverse => Rung::Inverse,
        }
    }

    /// The name of a core rung.
    pub fn of(rung: Rung) -> Self {
        match rung {
            Rung::Identity => RungName::Identity,
            Rung::Sqrt => RungName::Sqrt,
            Rung::Log => RungName::Log,
            Rung::InvSqrt => RungName::InvSqrt,
            Rung::Inverse => RungName::Inverse,
        }
    }
}

/// The severity names accepted in config files.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Deserialize, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum SeverityName {
    /// Information.
    Info,
    /// A warning.
    Warn,
    /// An alarm.
    Alarm,
}

impl SeverityName {
    /// The core's severity.
    pub fn severity(self) -> Severity {
        match self {
            SeverityName::Info => Severity::Info,
            SeverityName::Warn => Severity::Warn,
            SeverityName::Alarm => Severity::Alarm,
        }
    }

    /// The name of a core severity.
    pub fn of(severity: Severity) -> Self {
        match severity {
            Severity::Info => SeverityName::Info,
            Severity::Warn => SeverityName::Warn,
            Severity::Alarm => SeverityName::Alarm,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[derive(Debug, Deserialize)]
    struct One<T> {
        v: T,
    }

    fn read<T: for<'de> Deserialize<'de>>(text: &str) -> Result<T, String> {
        toml::from_str::<One<T>>(text)
            .map(|one| one.v)
            .map_err(|e| e.to_string())
    }

    #[test]
    fn ranges_are_enforced_with_the_value_named() {
        assert_eq!(read::<Positive>("v = 2").unwrap(), Positive(2.0));
        assert!(read::<Positive>("v = 0")
            .unwrap_err()
            .contains("out of range: 0"));
        assert!(read::<Positive>("v = inf").is_err());
        assert_eq!(
            read::<PositiveOrOff>("v = inf").unwrap(),
            PositiveOrOff(f64::INFINITY)
        );
        assert!(read::<PositiveOrOff>("v = nan").is_err());
        assert!(read::<Fraction>("v = 1.0").is_err());
        assert_eq!(read::<Fraction>("v = 0").unwrap(), Fraction(0.0));
        assert!(read::<NonNegative>("v = -0.1").is_err());
        assert!(read::<AtLeastTwo>("v = 1")
            .unwrap_err()
            .contains("at least 2"));
        assert!(read::<AtLeastOne>("v = -1").is_err());
        assert!(read::<RunLength>("v = 1").is_err());
        assert!(read::<Alpha>("v = 1").is_err());
        assert!(read::<Forgetting>("v = 1").is_ok());
    }

    #[test]
    fn durations_read_as_engineers_write_them() {
        assert_eq!(read::<Duration>("v = \"30d\"").unwrap().hours, 720.0);
        assert_eq!(read::<Duration>("v = \"2w\"").unwrap().hours, 336.0);
        assert_eq!(read::<Duration>("v = \"12h 30min\"").unwrap().hours, 12.5);
        let error = read::<Duration>("v = \"a month\"").unwrap_err();
        assert!(error.contains("not a duration"), "{error}");
        assert!(read::<Duration>("v = \"0s\"").is_err());
        assert!(read::<Duration>("v = 30").is_err());
    }
}
