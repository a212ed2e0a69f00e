//! The fast path of the feed reader: a row that is a plain line of unquoted numeric cells
//! (the usual row) is split and parsed straight from the read buffer. Any other row
//! (quotes, carriage returns, blank lines, blank or non-numeric cells, the wrong number of
//! fields, a row cut by the end of the buffer) returns `None` and goes to the record
//! reader, which words every error.

use super::decimal::{parse_cell, DecimalFloat};

/// What a feed column is used for.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Role {
    /// Not read.
    Skip,
    /// The time.
    Time,
    /// The raw output.
    Raw,
    /// The reference.
    Reference,
    /// The temperature.
    Temperature,
}

/// Cells of a row read by the fast path.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FastRow<T> {
    /// The time cell, when the feed has one.
    pub t: Option<f64>,
    /// The raw cell.
    pub raw: T,
    /// The reference cell (`None` when empty or absent).
    pub reference: Option<T>,
    /// The temperature cell (`None` when empty or absent).
    pub temperature: Option<T>,
    /// Bytes of the row, its `\n` included.
    pub len: usize,
}

/// Splits and parses one plain row at the start of `bytes`; `None` sends the row to the
/// general path.
#[inline(always)]
pub fn fast_row<T: DecimalFloat>(bytes: &[u8], roles: &[Role]) -> Option<FastRow<T>> {
    let mut row = FastRow {
        t: None,
        raw: T::ZERO,
        reference: None,
        temperature: None,
        len: 0,
    };
    if *bytes.first()? == b'\n' {
        // A blank line, which the record reader skips.
        return None;
    }
    let mut at = 0;
    let last = roles.len() - 1;
    for (index, role) in roles.iter().enumerate() {
        let delimiter = if index == last { b'\n' } else { b',' };
        let rest = &bytes[at..];
        match role {
            Role::Skip => {
                let length = rest
                    .iter()
                    .position(|&b| matches!(b, b',' | b'\n' | b'"' | b'\r'))?;
                if rest[length] != delimiter {
                    return None;
                }
                at += length + 1;
            }
            Role::Time => {
                let (value, length) = parse_cell::<f64>(rest, delimiter)?;
                row.t = Some(value);
                at += length;
            }
            Role::Raw => {
                let (value, length) = parse_cell::<T>(rest, delimiter)?;
                row.raw = value;
                at += length;
            }
            Role::Reference | Role::Temperature => {
                let (value, length) = if *rest.first()? == delimiter {
                    (None, 1)
                } else {
                    let (value, length) = parse_cell::<T>(rest, delimiter)?;
                    (Some(value), length)
                };
                if *role == Role::Reference {
                    row.reference = value;
                } else {
                    row.temperature = value;
                }
                at += length;
            }
        }
    }
    row.len = at;
    Some(row)
}
