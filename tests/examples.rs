//! Every example scenario (`examples/*/*.toml`) runs to a short end time and its outputs
//! hold what the run file promises: every species and declared field in each state, the
//! pictures it asks for, a conserved combination that stays conserved, and no negative
//! density.

mod common;

use std::path::{Path, PathBuf};
use std::process::Command;

use common::{diagnostics, manifest};

fn run_files() -> Vec<PathBuf> {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("examples");
    let mut files = Vec::new();
    for dir in std::fs::read_dir(&root).unwrap() {
        let dir = dir.unwrap().path();
        if !dir.is_dir() {
            continue;
        }
        for f in std::fs::read_dir(&dir).unwrap() {
            let f = f.unwrap().path();
            if f.extension().is_some_and(|e| e == "toml") {
                files.push(f);
            }
        }
    }
    files.sort();
    files
}

#[test]
fn there_are_at_least_four_scenarios() {
    let files = run_files();
    let folders: std::collections::BTreeSet<_> = files
        .iter()
        .map(|f| f.parent().unwrap().to_owned())
        .collect();
    assert!(folders.len() >= 4, "{folders:?}");
    for f in &folders {
        let readme = f.join("README.md");
        assert!(readme.is_file(), "{} has no README.md", f.display());
    }
}

#[test]
fn every_example_runs_and_its_outputs_hold() {
    let tmp = tempfile::tempdir().unwrap();
    for file in run_files() {
        let name = format!(
            "{}-{}",
            file.parent()
                .unwrap()
                .file_name()
                .unwrap()
                .to_string_lossy(),
            file.file_stem().unwrap().to_string_lossy()
        );
        let out = tmp.path().join(&name);
        let o = Command::new(env!("CARGO_BIN_EXE_agarium"))
            .args(["run", "--run-file"])
            .arg(&file)
            .args(["--end", "0.5", "--every", "0.25", "-q", "-o"])
            .arg(&out)
            .output()
            .unwrap();
        assert!(
            o.status.success(),
            "{name}: {}",
            String::from_utf8_lossy(&o.stderr)
        );
        let m = manifest(&out);
        let stem = m["stem"].as_str().unwrap();
        // Every state holds every species and declared field (the names in the .vtu XML).
        let vtu = std::fs::read_to_string(out.join(format!("{stem}_0002.vtu"))).unwrap();
        let (header, rows) = diagnostics(&out);
        let species: Vec<&str> = header
            .iter()
            .filter_map(|c| c.strip_suffix("_integral"))
            .collect();
        assert!(!species.is_empty(), "{name}: {header:?}");
        for s in &species {
            assert!(
                vtu.contains(&format!("Name=\"{s}\"")),
                "{name}: no {s} in the state"
            );
        }
        let text = &m["model_text"].as_str().unwrap();
        for line in text
            .lines()
            .filter(|l| l.trim_start().starts_with("field(\""))
        {
            let field = line.split('"').nth(1).unwrap();
            assert!(
                vtu.contains(&format!("Name=\"{field}\"")),
                "{name}: no {field}"
            );
        }
        for p in m["pictures"].as_array().unwrap() {
            let png = out.join(format!("{stem}_{}_0002.png", p.as_str().unwrap()));
            assert!(png.is_file(), "{name}: {} missing", png.display());
        }
        // No negative density beyond round-off, at any accepted step.
        for s in &species {
            let lo = header
                .iter()
                .position(|c| c == &format!("{s}_min"))
                .unwrap();
            let hi = header
                .iter()
                .position(|c| c == &format!("{s}_max"))
                .unwrap();
            for r in &rows {
                assert!(
                    r[lo] >= -1e-9 * r[hi].abs().max(1.0),
                    "{name}: {s} min {} at t = {}",
                    r[lo],
                    r[0]
                );
            }
        }
        // Conserved combinations stay conserved to round-off (direct solver on these
        // meshes; the run warns above 1e-8).
        for (k, c) in header
            .iter()
            .enumerate()
            .filter(|(_, c)| c.ends_with("_drift"))
        {
            let worst = rows.iter().map(|r| r[k].abs()).fold(0.0, f64::max);
            assert!(worst < 1e-10, "{name}: {c} drifted by {worst:e}");
        }
    }
}
