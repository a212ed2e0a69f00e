//! steadycal-cli: the host side of steadycal, as a library the `steadycal` binary is a thin
//! layer over: feed reading ([`feed`]) and replay ([`replay`]).
#![forbid(unsafe_code)]

pub mod feed;
pub mod replay;
pub mod simulate;
