//! The channel's configuration, compiled in: build.rs reads the TOML file named by
//! `STEADYCAL_CONFIG` (default `monitor.toml`), validates it with the host's code
//! (`steadycal-config`, refusals name the key) and writes these constants, every float as
//! its exact bits, so the board runs the configuration `steadycal replay --config FILE`
//! runs, bit for bit.

include!(concat!(env!("OUT_DIR"), "/board_config.rs"));
