//! The outputs of a run, one module each: event lines, readings, checks, the summary.

pub mod checks;
pub mod events;
pub mod readings;
pub mod summary;
