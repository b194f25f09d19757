//! Interrupted runs: killed (SIGKILL) or stopped with Ctrl-C (SIGINT) at an arbitrary step,
//! then continued with `agarium resume`, end with the same files, bit for bit, as the run
//! that was never interrupted (same settings, same thread count).

use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

const STEM: &str = "colony_4species";

fn model() -> String {
    let p: PathBuf = [env!("CARGO_MANIFEST_DIR"), "models", "colony_4species.rhai"]
        .iter()
        .collect();
    p.display().to_string()
}

fn args(out: &Path, extra: &[&str]) -> Vec<String> {
    let mut a: Vec<String> = [
        "run",
        &model(),
        "--plate",
        "circle:4",
        "--size",
        "0.25",
        "--spot",
        "0,0,0.06",
        "--end",
        "8",
        "--every",
        "4",
        // Overridden initial data and compressed states must come back on a resume too.
        "--inoculum",
        "u@0.2,0,0.5,0.8,gaussian",
        "--initial",
        "n=0.9",
        "--compress",
        "3",
        "-q",
        "-o",
        out.to_str().unwrap(),
    ]
    .iter()
    .map(|s| s.to_string())
    .collect();
    a.extend(extra.iter().map(|s| s.to_string()));
    a
}

fn agarium() -> Command {
    let mut c = Command::new(env!("CARGO_BIN_EXE_agarium"));
    // One thread count for every run compared (results are reproducible per count).
    c.env("RAYON_NUM_THREADS", "1");
    c
}

fn spawn(out: &Path, extra: &[&str]) -> Child {
    agarium()
        .args(args(out, extra))
        .stderr(Stdio::piped())
        .spawn()
        .expect("start agarium")
}

/// Waits until the run has written a checkpoint past t = 0 (or ended).
/// Returns the time of that checkpoint, or `None` when the run ended first.
fn wait_for_checkpoint(child: &mut Child, out: &Path) -> Option<f64> {
    let deadline = Instant::now() + Duration::from_secs(120);
    while Instant::now() < deadline {
        if child.try_wait().unwrap().is_some() {
            return None;
        }
        if let Ok(text) = std::fs::read_to_string(out.join("run.json")) {
            let v: serde_json::Value = serde_json::from_str(&text).unwrap_or_default();
            if let Some(t) = v["checkpoint_time"].as_f64().filter(|&t| t > 0.0) {
                return Some(t);
            }
        }
        std::thread::sleep(Duration::from_millis(20));
    }
    panic!("no checkpoint within two minutes");
}

fn reference() -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    let o = agarium()
        .args(args(&dir.path().join("r"), &[]))
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    dir
}

fn same_files(a: &Path, b: &Path) {
    for f in [
        format!("{STEM}_0002.vtu"),
        format!("{STEM}_diagnostics.csv"),
        format!("{STEM}.pvd"),
    ] {
        let x = std::fs::read(a.join(&f)).unwrap();
        let y = std::fs::read(b.join(&f)).unwrap_or_else(|e| panic!("{f}: {e}"));
        assert!(x == y, "{f} differs after the resume");
    }
}

fn resume(out: &Path) {
    let o = agarium()
        .args(["resume", out.to_str().unwrap(), "-q"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let m: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("run.json")).unwrap()).unwrap();
    assert_eq!(m["exit"], "reached");
}

#[test]
fn a_killed_run_resumes_to_the_same_files_bit_for_bit() {
    let reference = reference();
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("k");
    let mut child = spawn(&out, &["--checkpoint-every", "3"]);
    wait_for_checkpoint(&mut child, &out);
    // A further pseudo-random delay so the kill lands at an arbitrary step.
    let jitter = u64::from(std::process::id() % 97) * 3;
    std::thread::sleep(Duration::from_millis(jitter));
    child.kill().unwrap();
    child.wait().unwrap();
    resume(&out);
    same_files(&reference.path().join("r"), &out);
}

#[test]
fn ctrl_c_exits_130_with_a_checkpoint_and_the_run_resumes() {
    stopped_by_signal_resumes("-INT");
}

/// SIGTERM is what a batch scheduler sends before it kills a job at its time limit: it stops
/// the run as Ctrl-C does, with a checkpoint to resume from.
#[test]
fn sigterm_exits_130_with_a_checkpoint_and_the_run_resumes() {
    stopped_by_signal_resumes("-TERM");
}

fn stopped_by_signal_resumes(signal: &str) {
    let reference = reference();
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("i");
    // Wall-clock checkpoints every ~0.01 s: when they are taken must not change the result.
    let mut child = spawn(&out, &["--checkpoint-minutes", "0.0002"]);
    if let Some(t) = wait_for_checkpoint(&mut child, &out) {
        // Without the wall-clock cadence the first checkpoint after t = 0 would be the
        // output time 4.
        assert!(
            t != 4.0 && t != 8.0,
            "first checkpoint at the output time {t}"
        );
    }
    if child.try_wait().unwrap().is_none() {
        let status = Command::new("kill")
            .args([signal, &child.id().to_string()])
            .status()
            .unwrap();
        assert!(status.success());
        let code = child.wait().unwrap().code();
        if code == Some(130) {
            let m: serde_json::Value =
                serde_json::from_str(&std::fs::read_to_string(out.join("run.json")).unwrap())
                    .unwrap();
            assert_eq!(m["exit"], "interrupted");
            assert!(out.join("checkpoint.bin").exists());
            assert!(out.join(format!("{STEM}_interrupted_0000.vtu")).exists());
        } else {
            // The signal arrived after the last step: the run simply finished.
            assert_eq!(code, Some(0));
        }
    }
    resume(&out);
    same_files(&reference.path().join("r"), &out);
}

#[test]
fn resume_refuses_folders_that_are_not_runs() {
    let dir = tempfile::tempdir().unwrap();
    let o = agarium()
        .args(["resume", dir.path().to_str().unwrap()])
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("run.json"));
}

/// Resuming a run that reached its end says so, exits 0 and leaves every file as it was.
#[test]
fn resuming_a_finished_run_changes_nothing() {
    let reference = reference();
    let out = reference.path().join("r");
    let snapshot = || -> Vec<(String, Vec<u8>)> {
        let mut v: Vec<(String, Vec<u8>)> = std::fs::read_dir(&out)
            .unwrap()
            .map(|e| {
                let p = e.unwrap().path();
                (p.display().to_string(), std::fs::read(&p).unwrap())
            })
            .collect();
        v.sort();
        v
    };
    let before = snapshot();
    let o = agarium()
        .args(["resume", out.to_str().unwrap()])
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(0));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains("already reached its end time"), "{err}");
    assert!(
        before == snapshot(),
        "files changed by resuming a finished run"
    );
}
