//! The working range of the monitored channel, shared by the firmware and its build
//! script (`#[path]`): build.rs validates the configuration built from it on the host,
//! naming any refused parameter, so the board runs only a configuration that passed.

/// Bottom of the working range (raw units above the origin; `steadycal replay`'s default
/// `--level-low 1`).
pub const LEVEL_LOW: f64 = 1.0;
/// Top of the working range (`steadycal replay`'s default `--level-high 1000`).
pub const LEVEL_HIGH: f64 = 1000.0;
