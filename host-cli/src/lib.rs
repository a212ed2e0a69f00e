//! steadycal-cli: the host side of steadycal, as a library the `steadycal` binary is a thin
//! layer over.
#![forbid(unsafe_code)]

pub mod assess;
