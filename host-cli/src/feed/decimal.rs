//! Numeric feed cells parsed without going through `str`, with results bit-identical to
//! `str::parse::<f32>()` / `str::parse::<f64>()`.
//!
//! A plain decimal cell (`[+-]digits[.digits][e[+-]digits]`, at most 19 significant
//! digits, power of ten 10^-22 to 10^22) is read into an integer significand `w` and a power
//! of ten. Its value is then found in one of two ways, each of which yields the correctly
//! rounded result:
//!
//! - `w` and the power of ten are both exact in the float type: one multiplication or
//!   division, rounded once by the hardware.
//! - otherwise (the 17-digit cells of the shipped feeds): a candidate is computed in `f64`
//!   (and narrowed to `f32`), then checked exactly in 128-bit integer arithmetic: with the
//!   candidate `a = m·2^q` and the cell's value `v = w/10^k`, `D = w·2^-q − m·10^k` is the
//!   error scaled by `10^k·2^-q`, and `a` is the correctly rounded value exactly when
//!   `|D| < 10^k/2` (or `|D| = 10^k/2` and `m` is even). A candidate that fails the check
//!   (about one cell in 10^8 for `f32`; none seen for `f64`) goes to `str::parse`.
//!
//! Everything else (`nan`, `inf`, spaces, more digits, large exponents, subnormal or huge
//! results) is parsed by `str::parse`, so the two always agree. The property tests in
//! `tests/fast_cells.rs` compare the two on random values printed in many formats.
//!
//! Why by hand: measured against `fast-float2` 0.2.4 (`parse_partial` for the plain cells,
//! `str::parse` for the rest) on 2 M rows of the gas-cell demo feed (`replay --events`, f32,
//! callgrind): this parser 1,677 instructions per row for the whole run, `fast-float2`
//! 1,947 (+16 %; the parsing thread then needs about 1,020 per row against the engine's
//! 930, so it becomes the slower of the two); `replay-throughput.sh`'s 10 M-row replay,
//! 11 runs each interleaved in one sitting on a shared 2-core machine: median 3.46 s
//! against 3.92 s, 12 % fewer rows per second with `fast-float2`.

use std::str::FromStr;

/// Powers of ten that are exact in `f64`.
const POW10_F64: [f64; 23] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16,
    1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
];

/// Powers of ten as integers, for the exact check.
const POW10_U128: [u128; 23] = {
    let mut table = [1u128; 23];
    let mut k = 1;
    while k < 23 {
        table[k] = table[k - 1] * 10;
        k += 1;
    }
    table
};

/// Most significant digits read into the `u64` significand (10^19 < 2^64).
const MAX_DIGITS: u32 = 19;

/// The float types with the fast path.
pub trait DecimalFloat: Copy + FromStr + std::ops::Neg<Output = Self> {
    /// Bits of the significand, the implicit one included.
    const SIGNIFICAND_BITS: u32;
    /// Largest `k` for which `10^k` is exact in this type.
    const MAX_EXACT_POWER: usize;
    /// Zero.
    const ZERO: Self;
    /// `w · 10^k`, both exact (`w ≤ 2^SIGNIFICAND_BITS`, `k ≤ MAX_EXACT_POWER`), rounded once.
    fn exact_product(w: u64, k: usize) -> Self;
    /// `w / 10^k`, both exact, rounded once.
    fn exact_quotient(w: u64, k: usize) -> Self;
    /// A value within a few units in the last place of `w / 10^k` (`k ≤ 22`).
    fn candidate(w: u64, k: usize) -> Self;
    /// `(m, q)` with `self = m · 2^q`, `m` holding the implicit bit, for a positive normal
    /// finite value; `None` otherwise.
    fn decompose(self) -> Option<(u64, i32)>;
}

impl DecimalFloat for f64 {
    const SIGNIFICAND_BITS: u32 = 53;
    const MAX_EXACT_POWER: usize = 22;
    const ZERO: Self = 0.0;
    #[inline(always)]
    fn exact_product(w: u64, k: usize) -> Self {
        w as f64 * POW10_F64[k]
    }
    #[inline(always)]
    fn exact_quotient(w: u64, k: usize) -> Self {
        w as f64 / POW10_F64[k]
    }
    #[inline(always)]
    fn candidate(w: u64, k: usize) -> Self {
        w as f64 / POW10_F64[k]
    }
    #[inline(always)]
    fn decompose(self) -> Option<(u64, i32)> {
        let bits = self.to_bits();
        let exponent = ((bits >> 52) & 0x7ff) as i32;
        if exponent == 0 || exponent == 0x7ff || bits >> 63 != 0 {
            return None;
        }
        Some(((bits & ((1 << 52) - 1)) | (1 << 52), exponent - 1075))
    }
}

impl DecimalFloat for f32 {
    const SIGNIFICAND_BITS: u32 = 24;
    const MAX_EXACT_POWER: usize = 10;
    const ZERO: Self = 0.0;
    #[inline(always)]
    fn exact_product(w: u64, k: usize) -> Self {
        w as f32 * POW10_F64[k] as f32
    }
    #[inline(always)]
    fn exact_quotient(w: u64, k: usize) -> Self {
        w as f32 / POW10_F64[k] as f32
    }
    #[inline(always)]
    fn candidate(w: u64, k: usize) -> Self {
        (w as f64 / POW10_F64[k]) as f32
    }
    #[inline(always)]
    fn decompose(self) -> Option<(u64, i32)> {
        let bits = self.to_bits();
        let exponent = ((bits >> 23) & 0xff) as i32;
        if exponent == 0 || exponent == 0xff || bits >> 31 != 0 {
            return None;
        }
        Some((
            u64::from((bits & ((1 << 23) - 1)) | (1 << 23)),
            exponent - 150,
        ))
    }
}

/// What the plain reading of a cell found.
enum Plain<T> {
    /// The value and the cell's length with its delimiter.
    Value(T, usize),
    /// Plain syntax, but the value is left to `str::parse`; the cell's length without the
    /// delimiter.
    Std(usize),
    /// Not a plain cell (or not ended by the delimiter).
    Other,
    /// The bytes end inside the cell.
    Cut,
}

/// How many of the eight bytes of `word` (first byte lowest) are ASCII digits before the
/// first byte that is not.
#[inline(always)]
fn leading_digits(word: u64) -> u32 {
    // A byte's high bit is set in `flags` when the byte is below b'0' (the subtraction
    // wraps) or above b'9' (adding 0x46 reaches 0x80). Carries and borrows only move up,
    // so the lowest flagged byte is the first non-digit.
    let flags = (word.wrapping_sub(0x3030_3030_3030_3030)
        | word.wrapping_add(0x4646_4646_4646_4646))
        & 0x8080_8080_8080_8080;
    flags.trailing_zeros() / 8
}

/// The number the first `n` (1 to 8) bytes of `word` spell, all of them ASCII digits.
#[inline(always)]
fn digits_value(word: u64, n: u32) -> u64 {
    // Move the digits to the top and fill the bytes below with b'0', so the eight bytes
    // spell the same number with leading zeros.
    let word = if n == 8 {
        word
    } else {
        (word << (8 * (8 - n))) | (0x3030_3030_3030_3030 >> (8 * n))
    };
    let d = word - 0x3030_3030_3030_3030;
    // Pairs, then groups of four, then the two halves; the first digit is the lowest byte.
    let pairs = (d * 10 + (d >> 8)) & 0x00ff_00ff_00ff_00ff;
    let quads = (pairs * 100 + (pairs >> 16)) & 0x0000_ffff_0000_ffff;
    (quads * 10_000 + (quads >> 32)) & 0xffff_ffff
}

/// Powers of ten up to 10^8, for appending a group of digits.
const POW10_U64: [u64; 9] = [
    1,
    10,
    100,
    1_000,
    10_000,
    100_000,
    1_000_000,
    10_000_000,
    100_000_000,
];

/// Appends the run of digits at `rest[at..]` to `w`, counting them in `count`; returns
/// where the run ends, or `None` when `count` would pass [`MAX_DIGITS`].
#[inline(always)]
fn digit_run(rest: &[u8], mut at: usize, w: &mut u64, count: &mut u32) -> Option<usize> {
    loop {
        let Some(bytes) = rest.get(at..at + 8) else {
            // Fewer than eight bytes left: one at a time.
            while let Some(&byte) = rest.get(at) {
                let digit = byte.wrapping_sub(b'0');
                if digit >= 10 {
                    break;
                }
                *count += 1;
                if *count > MAX_DIGITS {
                    return None;
                }
                *w = *w * 10 + u64::from(digit);
                at += 1;
            }
            return Some(at);
        };
        let mut word = [0u8; 8];
        word.copy_from_slice(bytes);
        let word = u64::from_le_bytes(word);
        let n = leading_digits(word);
        if n == 0 {
            return Some(at);
        }
        *count += n;
        if *count > MAX_DIGITS {
            return None;
        }
        *w = *w * POW10_U64[n as usize] + digits_value(word, n);
        at += n as usize;
        if n < 8 {
            return Some(at);
        }
    }
}

/// Reads a plain decimal cell at the start of `rest`, ended by `delimiter`.
#[inline(always)]
fn plain<T: DecimalFloat>(rest: &[u8], delimiter: u8) -> Plain<T> {
    let mut i = 0;
    let negative = match rest.first() {
        None => return Plain::Cut,
        Some(b'-') => {
            i = 1;
            true
        }
        Some(b'+') => {
            i = 1;
            false
        }
        Some(_) => false,
    };
    let mut w: u64 = 0;
    // Digits read into `w`, leading zeros included (so at most 19 fit).
    let mut count: u32 = 0;
    let Some(end) = digit_run(rest, i, &mut w, &mut count) else {
        return Plain::Other;
    };
    i = end;
    let mut fraction_digits: i64 = 0;
    match rest.get(i) {
        None => return Plain::Cut,
        Some(b'.') => {
            let Some(end) = digit_run(rest, i + 1, &mut w, &mut count) else {
                return Plain::Other;
            };
            fraction_digits = (end - i - 1) as i64;
            i = end;
        }
        Some(_) => {}
    }
    if count == 0 {
        return Plain::Other;
    }
    let Some(&next) = rest.get(i) else {
        return Plain::Cut;
    };
    let mut exponent: i64 = 0;
    if next == b'e' || next == b'E' {
        i += 1;
        let negative_exponent = match rest.get(i) {
            None => return Plain::Cut,
            Some(b'-') => {
                i += 1;
                true
            }
            Some(b'+') => {
                i += 1;
                false
            }
            Some(_) => false,
        };
        let start = i;
        loop {
            let Some(&byte) = rest.get(i) else {
                return Plain::Cut;
            };
            let digit = byte.wrapping_sub(b'0');
            if digit >= 10 {
                break;
            }
            if i - start == 6 {
                return Plain::Other;
            }
            exponent = exponent * 10 + i64::from(digit);
            i += 1;
        }
        if i == start {
            return Plain::Other;
        }
        if negative_exponent {
            exponent = -exponent;
        }
    }
    match rest.get(i) {
        None => return Plain::Cut,
        Some(&byte) if byte != delimiter => return Plain::Other,
        Some(_) => {}
    }
    match value::<T>(w, exponent - fraction_digits) {
        Some(v) => Plain::Value(if negative { -v } else { v }, i + 1),
        None => Plain::Std(i),
    }
}

/// The correctly rounded `w · 10^power`, or `None` when it is left to `str::parse`.
#[inline(always)]
fn value<T: DecimalFloat>(w: u64, power: i64) -> Option<T> {
    if w == 0 {
        return Some(T::ZERO);
    }
    let exact_significand = w <= 1 << T::SIGNIFICAND_BITS;
    if power >= 0 {
        let k = power as usize;
        return (exact_significand && k <= T::MAX_EXACT_POWER).then(|| T::exact_product(w, k));
    }
    let k = power.unsigned_abs() as usize;
    if exact_significand && k <= T::MAX_EXACT_POWER {
        return Some(T::exact_quotient(w, k));
    }
    if k >= POW10_U128.len() {
        return None;
    }
    let candidate = T::candidate(w, k);
    let (m, q) = candidate.decompose()?;
    if q >= 0 {
        return None;
    }
    let shift = q.unsigned_abs();
    if shift > 63 + w.leading_zeros() {
        return None;
    }
    let scaled = u128::from(w) << shift;
    let product = u128::from(m) * POW10_U128[k];
    // Below a power of two the spacing halves: leave that case to `str::parse`.
    if m == 1 << (T::SIGNIFICAND_BITS - 1) && scaled < product {
        return None;
    }
    let error = scaled.abs_diff(product);
    let unit = POW10_U128[k];
    if error > unit {
        return None;
    }
    let twice = error * 2;
    (twice < unit || (twice == unit && m & 1 == 0)).then_some(candidate)
}

/// `str::trim`, skipped when the text starts and ends with a visible ASCII character.
fn trim(text: &str) -> &str {
    match (text.as_bytes().first(), text.as_bytes().last()) {
        (Some(first), Some(last)) if first.is_ascii_graphic() && last.is_ascii_graphic() => text,
        _ => text.trim(),
    }
}

/// The number in the cell at the start of `rest`, which `delimiter` ends, and the cell's
/// length with the delimiter: the value `str::parse` gives for the cell's trimmed text.
///
/// `None` when the cell is not a number, when `rest` ends inside it, or when it holds a
/// byte that needs the CSV reader (`"`, `\r`) or is ended by the wrong delimiter.
#[inline(always)]
pub fn parse_cell<T: DecimalFloat>(rest: &[u8], delimiter: u8) -> Option<(T, usize)> {
    match plain::<T>(rest, delimiter) {
        Plain::Value(value, length) => Some((value, length)),
        Plain::Cut => None,
        Plain::Std(length) => {
            let text = std::str::from_utf8(&rest[..length]).ok()?;
            Some((text.parse().ok()?, length + 1))
        }
        Plain::Other => by_std(rest, delimiter),
    }
}

#[inline(never)]
fn by_std<T: DecimalFloat>(rest: &[u8], delimiter: u8) -> Option<(T, usize)> {
    let length = rest
        .iter()
        .position(|&b| matches!(b, b',' | b'\n' | b'"' | b'\r'))?;
    if rest[length] != delimiter {
        return None;
    }
    let text = std::str::from_utf8(&rest[..length]).ok()?;
    Some((trim(text).parse().ok()?, length + 1))
}

/// A whole cell parsed as [`parse_cell`] does (for tests): `None` when `str::parse` of the
/// trimmed text would fail.
pub fn parse_whole<T: DecimalFloat>(cell: &[u8]) -> Option<T> {
    let mut text = cell.to_vec();
    text.push(b'\n');
    let (value, length) = parse_cell::<T>(&text, b'\n')?;
    (length == text.len()).then_some(value)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Both types, compared bit for bit with `str::parse` of the trimmed text.
    fn same(text: &str) {
        let fast = parse_whole::<f32>(text.as_bytes()).map(f32::to_bits);
        let std = text.trim().parse::<f32>().ok().map(f32::to_bits);
        assert_eq!(fast, std, "f32 {text:?}");
        let fast = parse_whole::<f64>(text.as_bytes()).map(f64::to_bits);
        let std = text.trim().parse::<f64>().ok().map(f64::to_bits);
        assert_eq!(fast, std, "f64 {text:?}");
    }

    fn word(text: &[u8]) -> u64 {
        let mut bytes = [0u8; 8];
        bytes.copy_from_slice(text);
        u64::from_le_bytes(bytes)
    }

    #[test]
    fn digit_groups() {
        assert_eq!(leading_digits(word(b"12345678")), 8);
        assert_eq!(leading_digits(word(b"1234:678")), 4);
        assert_eq!(leading_digits(word(b"123/5678")), 3);
        assert_eq!(leading_digits(word(b",1234567")), 0);
        assert_eq!(leading_digits(word(b"9\xff\x00\x80abcd")), 1);
        assert_eq!(digits_value(word(b"12345678"), 8), 12_345_678);
        assert_eq!(digits_value(word(b"0001234,"), 7), 1_234);
        assert_eq!(digits_value(word(b"7,000000"), 1), 7);
        let mut w = 0;
        let mut count = 0;
        assert_eq!(
            digit_run(b"825842377428792,", 0, &mut w, &mut count),
            Some(15)
        );
        assert_eq!((w, count), (825_842_377_428_792, 15));
        assert_eq!(digit_run(b"12345678901234567890,", 0, &mut 0, &mut 0), None);
        assert_eq!(digit_run(b"123", 0, &mut w, &mut count), Some(3));
    }

    #[test]
    fn plain_and_fallback_cells_match_std() {
        for text in [
            "0",
            "-0",
            "+0.0",
            "21.825842377428792",
            "-21.825842377428792",
            "107.4575958680741",
            "1e10",
            "1E-5",
            "1.",
            ".5",
            "-.5e+3",
            "000123.4500",
            "0.000000000000000000001234",
            "123456789012345678901234567890",
            "1e400",
            "1e-400",
            "3.4028235e38",
            "3.4028236e38",
            "1.17549435e-38",
            "1.4e-45",
            "9007199254740993",
            "0.1",
            "nan",
            "NaN",
            "-inf",
            "infinity",
            " 1.5",
            "1.5 ",
            "",
            ".",
            "e5",
            "1e",
            "1e+",
            "--1",
            "1.2.3",
            "0x10",
            "1_000",
        ] {
            same(text);
        }
    }

    #[test]
    fn feed_cells_take_the_plain_path() {
        for cell in [
            &b"21.825842377428792,"[..],
            b"107.4575958680741,",
            b"0,",
            b"-3.5e-2,",
        ] {
            assert!(matches!(plain::<f32>(cell, b','), Plain::Value(..)));
            assert!(matches!(plain::<f64>(cell, b','), Plain::Value(..)));
        }
    }

    #[test]
    fn cut_cells_and_other_delimiters() {
        assert_eq!(parse_cell::<f64>(b"1.25", b','), None);
        assert_eq!(parse_cell::<f64>(b"1.25,", b','), Some((1.25, 5)));
        assert_eq!(parse_cell::<f64>(b"1.25\n", b','), None);
        assert_eq!(parse_cell::<f64>(b"\"1.25\",", b','), None);
        assert_eq!(parse_cell::<f64>(b"1.25\r\n", b'\n'), None);
        assert_eq!(
            parse_cell::<f32>(b"nan,", b',').map(|(v, n)| (v.is_nan(), n)),
            Some((true, 4))
        );
        assert_eq!(parse_cell::<f32>(b"abc,", b','), None);
    }
}
