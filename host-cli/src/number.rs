//! JSON numbers as the host writes them: the shortest decimal that round-trips in the float
//! type the core ran in (an `f32` value prints as `0.1`, not `0.10000000149011612`); nan
//! and infinities are null.

use std::fmt::Display;
use std::str::FromStr;

use serde_json::Value;
use steadycal_core::real::Real;

use crate::stack_buffer::StackBuffer;

/// A JSON number that prints the shortest decimal that round-trips in the float type used
/// (so an f32 value prints as `0.1`, not `0.10000000149011612`).
pub fn number<R: Real + Display>(value: R) -> Value {
    shortest_f64(value)
        .and_then(serde_json::Number::from_f64)
        .map(Value::Number)
        .unwrap_or(Value::Null)
}

/// The `f64` that the shortest decimal of `value` in its own type reads as (`None` for
/// nan and infinities): what [`number`] writes.
pub fn shortest_f64<R: Real + Display>(value: R) -> Option<f64> {
    if !value.is_finite() {
        return None;
    }
    // In f64 the shortest decimal reads back as the value itself (`Display` round-trips).
    let probe = 1.0 + f64::EPSILON;
    if std::mem::size_of::<R>() == 8 && R::from_f64(probe).to_f64() == probe {
        return Some(value.to_f64());
    }
    // Otherwise format it, on the stack when it fits.
    let mut text = StackBuffer::<64>::default();
    if std::fmt::Write::write_fmt(&mut text, format_args!("{value}")).is_ok() {
        return std::str::from_utf8(text.as_bytes()).ok()?.parse().ok();
    }
    f64::from_str(&value.to_string()).ok()
}

/// A float in a typed document, written as [`number`] writes it: the shortest decimal in
/// the run's float type, null for nan and infinities.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
#[serde(transparent)]
pub struct Shortest(pub Option<f64>);

impl Shortest {
    /// `value` in its own float type.
    pub fn of<R: Real + Display>(value: R) -> Self {
        Shortest(shortest_f64(value))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_print_shortest_in_their_type() {
        assert_eq!(number(0.1f32).to_string(), "0.1");
        assert_eq!(number(0.1f64).to_string(), "0.1");
        assert_eq!(number(-0.0f32).to_string(), "-0.0");
        assert_eq!(number(f32::NAN), Value::Null);
        assert_eq!(number(f64::NEG_INFINITY), Value::Null);
        assert_eq!(number(f32::from_bits(1)).to_string(), "1e-45");
        assert_eq!(number(f32::MAX).to_string(), "3.4028235e+38");
    }

    #[test]
    fn typed_numbers_write_as_values_do() {
        for value in [0.1f32, -0.0, f32::NAN, f32::MAX, 1e-45, 123.456] {
            assert_eq!(
                serde_json::to_string(&Shortest::of(value)).unwrap(),
                serde_json::to_string(&number(value)).unwrap()
            );
        }
    }
}
