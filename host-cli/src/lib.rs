//! steadycal-cli: the host side of steadycal, as a library the `steadycal` binary is a thin
//! layer over: feed reading ([`feed`]), the configuration file ([`config`]), replay and the
//! engine shared by every command ([`replay`]), the simulator ([`simulate`]), the batch
//! assessment of a lab calibration run ([`assess`]), terminal conventions ([`terminal`]) and
//! the subcommands with their arguments ([`commands`]), snapshot files ([`snapshot_file`])
//! and device logs ([`device_log`]).
#![forbid(unsafe_code)]

pub mod assess;
pub mod baseline;
pub mod commands;
pub mod commission;
pub use steadycal_config as config;
pub mod device_log;
pub mod feed;
pub mod field;
pub mod io;
pub mod mqtt;
pub mod number;
pub mod precision;
pub mod replay;
pub mod report;
pub mod simulate;
pub mod snapshot_file;
pub mod stack_buffer;
pub mod terminal;
