//! The README's examples keep working: its model snippet passes `agarium check`, and its main
//! command (the bundled lobed dish) meshes and writes both files.

use std::process::Command;

fn readme() -> String {
    std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/README.md")).expect("README")
}

#[test]
fn readme_model_snippet_checks() {
    let text = readme();
    let start = text.find("```rhai\n").expect("rhai block") + 8;
    let end = start + text[start..].find("```").expect("end of block");
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("snippet.rhai");
    std::fs::write(&path, &text[start..end]).unwrap();
    let out = Command::new(env!("CARGO_BIN_EXE_agarium"))
        .arg("check")
        .arg(&path)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}

#[test]
fn readme_main_command_runs() {
    let text = readme();
    let line = text
        .lines()
        .find(|l| l.starts_with("cargo run --release -- run"))
        .expect("main command in README");
    let args: Vec<&str> = line.split_whitespace().skip(4).collect();
    let dir = tempfile::tempdir().unwrap();
    // Run from the repository so the bundled paths resolve; send the outputs to a temp dir.
    let mut fixed = Vec::new();
    let mut it = args.iter();
    while let Some(a) = it.next() {
        fixed.push(a.to_string());
        if *a == "-o" {
            it.next().expect("folder after -o");
            fixed.push(dir.path().join("run").to_string_lossy().into_owned());
        }
    }
    let out = Command::new(env!("CARGO_BIN_EXE_agarium"))
        .args(&fixed)
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "{err}");
    assert!(err.contains("reached t = 2.400000e1"), "{err}");
    // The README shows the last picture of the run; it must be the one the run draws.
    assert!(text.contains("(examples/cut-plate-twin-spots/all_cells_24h.png)"));
    // The README promises files _0000 to _0006.
    for k in 0..=6 {
        let f = dir
            .path()
            .join("run")
            .join(format!("colony_4species_{k:04}.vtu"));
        assert!(f.exists(), "{} missing", f.display());
    }
    for f in [
        "colony_4species.pvd",
        "colony_4species_all_cells_0006.png",
        "run.json",
    ] {
        assert!(dir.path().join("run").join(f).exists(), "{f} missing");
    }
}

#[test]
fn readme_run_file_is_accepted() {
    let text = readme();
    // The full run file (the plate section's own snippet comes earlier and is tested in
    // tests/outline_cli.rs).
    let start = text.find("```toml\nmodel = ").expect("run-file block") + 8;
    let end = start + text[start..].find("```").expect("end of block");
    let models = concat!(env!("CARGO_MANIFEST_DIR"), "/models/");
    // Same keys; a short end time and the outputs in a temporary folder.
    let dir = tempfile::tempdir().unwrap();
    let snippet = text[start..end]
        .replace("\"../models/", &format!("\"{models}"))
        .replace("end = 24.0", "end = 0.5")
        .replace("every = 4.0", "every = 0.5")
        .replace("size = 1.0", "size = 2.0");
    assert!(
        snippet.contains(models),
        "model path not found in the snippet"
    );
    let path = dir.path().join("run.toml");
    std::fs::write(&path, snippet).unwrap();
    let out = Command::new(env!("CARGO_BIN_EXE_agarium"))
        .args(["run", "--run-file", path.to_str().unwrap(), "-q"])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(dir
        .path()
        .join("out/cut-plate/colony_4species_u_0001.png")
        .exists());
}
