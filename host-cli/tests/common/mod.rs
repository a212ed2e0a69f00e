//! Helpers shared by the end-to-end tests: the built binary and the repository paths.
#![allow(dead_code)]

use std::path::PathBuf;

/// The repository root.
pub fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .parent()
        .expect("host-cli has a parent")
        .to_path_buf()
}

/// The shipped feeds.
pub fn feeds() -> PathBuf {
    root().join("simulated-feeds")
}

/// A command running the built `steadycal` binary.
pub fn steadycal() -> assert_cmd::Command {
    let mut command = assert_cmd::Command::cargo_bin("steadycal").expect("binary is built");
    command.env_remove("NO_COLOR");
    command
}

/// Path of the built binary (for std::process tests with live pipes).
pub fn binary() -> PathBuf {
    assert_cmd::cargo::cargo_bin("steadycal")
}

/// The scenario files of simulated-feeds (not the `.monitor.toml` configurations).
pub fn scenarios() -> Vec<PathBuf> {
    let mut list: Vec<PathBuf> = std::fs::read_dir(feeds())
        .expect("simulated-feeds exists")
        .map(|e| e.expect("entry").path())
        .filter(|p| {
            let name = p.file_name().unwrap().to_string_lossy().into_owned();
            name.ends_with(".toml") && !name.ends_with(".monitor.toml")
        })
        .collect();
    list.sort();
    list
}
