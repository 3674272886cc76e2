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

/// A JSON output of a table-writing command (`tunnels`, `run`), read back strictly.
#[derive(serde::Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TableFile {
    pub metadata: std::collections::BTreeMap<String, String>,
    pub tables: Vec<JsonTable>,
}

/// One table of a [`TableFile`].
#[derive(serde::Deserialize)]
#[serde(deny_unknown_fields)]
pub struct JsonTable {
    pub name: String,
    pub columns: Vec<String>,
    pub rows: Vec<Vec<serde_json::Value>>,
}

/// Reads a JSON table file written by the tool.
pub fn read_table(path: &Path) -> TableFile {
    serde_json::from_slice(&std::fs::read(path).unwrap()).unwrap()
}
