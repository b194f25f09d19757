//! Helpers shared by the end-to-end tests that include this module (`mod common;`).
#![allow(dead_code)]

use std::path::Path;
use std::process::{Command, Output};

/// Runs the binary with `args` in `dir`.
pub fn agarium(args: &[&str], dir: &Path) -> Output {
    Command::new(env!("CARGO_BIN_EXE_agarium"))
        .args(args)
        .current_dir(dir)
        .output()
        .expect("run agarium")
}

/// The manifest (`run.json`) of a run's output folder.
pub fn manifest(out: &Path) -> serde_json::Value {
    serde_json::from_str(&std::fs::read_to_string(out.join("run.json")).unwrap()).unwrap()
}

/// A parameter's value as the manifest records it (after overrides).
pub fn parameter(m: &serde_json::Value, name: &str) -> Option<f64> {
    m["parameters"].as_array()?.iter().find(|p| p[0] == name)?[1].as_f64()
}

/// The diagnostics table of a run's output folder: its header and rows of numbers.
pub fn diagnostics(out: &Path) -> (Vec<String>, Vec<Vec<f64>>) {
    let csv = std::fs::read_dir(out)
        .unwrap()
        .map(|e| e.unwrap().path())
        .find(|p| p.to_string_lossy().ends_with("_diagnostics.csv"))
        .expect("a diagnostics table");
    let text = std::fs::read_to_string(csv).unwrap();
    let mut lines = text.lines();
    let header = lines.next().unwrap().split(',').map(String::from).collect();
    let rows = lines
        .map(|l| l.split(',').map(|v| v.parse().unwrap()).collect())
        .collect();
    (header, rows)
}
