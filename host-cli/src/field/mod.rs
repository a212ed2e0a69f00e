//! Field data as loggers and reference stations write it: time forms and zones
//! ([`time`]), missing markers ([`missing`]), durations in options ([`duration`]), the
//! census that notices undeclared markers ([`census`]), the time join of a sensor log and
//! a reference log ([`join`]), the reader of logs as loggers write them ([`reader`]), an
//! iterator run ahead on its own thread ([`prefetch`]), and the samples
//! they give the monitor with what was counted on the way ([`rows`]).
//!
//! These modules know nothing of the replay engine; the feed readers and the commands use
//! them. None of them panics on any cell.

pub mod census;
pub mod duration;
pub mod join;
pub mod missing;
pub mod prefetch;
pub mod reader;
pub mod rows;
pub mod time;
