//! steadycal-cli: the host side of steadycal, as a library the `steadycal` binary is a thin
//! layer over: feed reading ([`feed`]), replay ([`replay`]), simulation ([`simulate`]) and the
//! batch assessment of a lab calibration run ([`assess`]).
#![forbid(unsafe_code)]

pub mod assess;
pub mod feed;
pub mod replay;
pub mod simulate;
