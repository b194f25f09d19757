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
        .find(|l| l.starts_with("cargo run --release -- mesh"))
        .expect("main command in README");
    let args: Vec<&str> = line.split_whitespace().skip(4).collect();
    let dir = tempfile::tempdir().unwrap();
    // Run from the repository so the bundled example path resolves; send outputs to a temp dir.
    let mut fixed = Vec::new();
    let mut it = args.iter();
    while let Some(a) = it.next() {
        fixed.push(a.to_string());
        if *a == "-o" || *a == "--png" {
            let name = it.next().expect("file after flag");
            let file = std::path::Path::new(name).file_name().unwrap().to_owned();
            fixed.push(dir.path().join(file).to_string_lossy().into_owned());
        }
    }
    let out = Command::new(env!("CARGO_BIN_EXE_agarium"))
        .args(&fixed)
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let report = String::from_utf8_lossy(&out.stdout);
    assert!(
        report.contains("negative edge weights        0"),
        "{report}"
    );
    assert!(dir.path().join("lobed-dish.vtu").exists());
    assert!(dir.path().join("lobed-dish.png").exists());
}
