//! Helpers shared by the command-line tests: the built binary run in a given folder, and the
//! names of what a folder holds (to check that exactly the expected files, or none, were
//! written).
#![allow(dead_code)]

use assert_cmd::Command;
use std::path::Path;

/// The `tunnelcast` binary, run with `dir` as its working folder.
pub fn tunnelcast(dir: &Path) -> Command {
    let mut cmd = Command::cargo_bin("tunnelcast").unwrap();
    cmd.current_dir(dir);
    cmd
}

/// Names of the files and folders in `dir`, sorted.
pub fn listing(dir: &Path) -> Vec<String> {
    let mut names: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    names
}
