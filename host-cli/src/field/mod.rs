//! Field data as loggers and reference stations write it: time forms and zones
//! ([`time`]), missing markers ([`missing`]), durations in options ([`duration`]).
//!
//! These modules know nothing of the replay engine; the feed readers and the commands use
//! them. None of them panics on any cell.

pub mod duration;
pub mod missing;
pub mod time;
