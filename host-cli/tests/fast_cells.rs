//! The fast numeric cell parser (`steadycal_cli::feed::decimal`) against `str::parse`: for random
//! finite values printed in many ways, random digit strings, and the `nan`/`inf` spellings,
//! the two give the same bits (or both refuse the text), for `f32` and for `f64`.

use proptest::prelude::*;
use steadycal_cli::feed::decimal::parse_whole;

/// Parses `text` both ways, in both types, and compares bit for bit.
fn check(text: &str) -> Result<(), TestCaseError> {
    let fast = parse_whole::<f32>(text.as_bytes()).map(f32::to_bits);
    let std = text.trim().parse::<f32>().ok().map(f32::to_bits);
    prop_assert_eq!(fast, std, "f32 {:?}", text);
    let fast = parse_whole::<f64>(text.as_bytes()).map(f64::to_bits);
    let std = text.trim().parse::<f64>().ok().map(f64::to_bits);
    prop_assert_eq!(fast, std, "f64 {:?}", text);
    Ok(())
}

/// Ways a value gets written into a feed.
fn printed(value: f64, digits: usize, style: u8) -> String {
    let single = value as f32;
    match style % 12 {
        0 => format!("{value}"),
        1 => format!("{single}"),
        2 => format!("{value:.digits$}"),
        3 => format!("{value:e}"),
        4 => format!("{value:.digits$e}"),
        5 => format!("{value:.16e}"),
        6 => format!("{:.digits$E}", single),
        7 => format!("{value:+}"),
        8 => format!("00{}", value.abs()),
        9 => format!("{:.17}", value),
        10 => format!("{value:?}"),
        _ => format!("{:.1$}", value, 17usize.saturating_sub(digits)),
    }
}

/// Finite values of every magnitude, and the values a sensor feed holds.
fn values() -> impl Strategy<Value = f64> {
    prop_oneof![
        any::<f64>().prop_filter("finite", |v| v.is_finite()),
        any::<f32>()
            .prop_filter("finite", |v| v.is_finite())
            .prop_map(f64::from),
        -1e6..1e6f64,
        0.0..200.0f64,
        (-30i32..30, 0.0..1.0f64).prop_map(|(e, m)| m * 10f64.powi(e)),
    ]
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(20_000))]

    #[test]
    fn printed_values_parse_like_std(value in values(), digits in 0usize..25, style in any::<u8>()) {
        check(&printed(value, digits, style))?;
    }

    #[test]
    fn digit_strings_parse_like_std(
        sign in prop::sample::select(vec!["", "-", "+"]),
        integer in "[0-9]{0,22}",
        point in any::<bool>(),
        fraction in "[0-9]{0,24}",
        exponent in prop::option::of((prop::sample::select(vec!["e", "E"]), prop::sample::select(vec!["", "-", "+"]), 0u32..400)),
    ) {
        let mut text = format!("{sign}{integer}");
        if point {
            text.push('.');
        }
        text.push_str(&fraction);
        if let Some((e, exponent_sign, power)) = exponent {
            text.push_str(&format!("{e}{exponent_sign}{power}"));
        }
        check(&text)?;
    }

    #[test]
    fn seventeen_digit_cells_parse_like_std(significand in 10_000_000_000_000_000u64..100_000_000_000_000_000, point in 0usize..18) {
        // The shipped feeds hold 17 significant digits (Python's repr of a float).
        let digits = significand.to_string();
        let text = format!("{}.{}", &digits[..point], &digits[point..]);
        check(&text)?;
    }

    #[test]
    fn cells_of_feed_characters_parse_like_std(text in "[-+0-9.eEnaifty ]{0,12}") {
        check(&text)?;
    }
}

#[test]
fn nan_and_inf_spellings() {
    for text in [
        "nan",
        "NaN",
        "NAN",
        "-nan",
        "+nan",
        "inf",
        "-inf",
        "+inf",
        "Inf",
        "INF",
        "infinity",
        "-Infinity",
        "infinit",
        "na",
        "in",
        " nan",
        "inf ",
    ] {
        check(text).unwrap();
    }
}

#[test]
fn edges_of_the_exact_paths() {
    for text in [
        // Largest significands exact in each type, and one past.
        "16777216",
        "16777217",
        "9007199254740992",
        "9007199254740993",
        // Powers of ten at the ends of the exact range.
        "1e10",
        "1e11",
        "1e22",
        "1e23",
        "1e-22",
        "1e-23",
        // Halfway between two f32 values (0x3f800000 and the next), written exactly.
        "1.000000059604644775390625",
        "1.00000005960464477539062",
        "1.00000005960464477539063",
        // Just below and above powers of two.
        "0.99999999999999994",
        "0.99999997",
        "1.9999999",
        "2.0000001",
        // Smallest normal and subnormal values.
        "1.1754943508222875e-38",
        "1.401298464324817e-45",
        "2.2250738585072014e-308",
        "4.9406564584124654e-324",
        // Nineteen and twenty significant digits.
        "1234567890123456789",
        "12345678901234567890",
        "0.1234567890123456789",
        "0.0001234567890123456789",
    ] {
        check(text).unwrap();
    }
}
