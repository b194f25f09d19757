//! Data integrity of run folders through the binary: a kill between a checkpoint on an output
//! time and that time's files, edited or damaged manifests and checkpoints, the folder lock,
//! output paths checked before anything is written, write errors, and settings that would
//! exhaust memory or time refused up front. Faults are injected with the debug build's
//! `AGARIUM_TEST_FAULT` hook.

mod common;

use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};
use std::time::{Duration, Instant};

const STEM: &str = "fisher_kpp";

fn model() -> String {
    let p: PathBuf = [env!("CARGO_MANIFEST_DIR"), "models", "fisher_kpp.rhai"]
        .iter()
        .collect();
    p.display().to_string()
}

fn run_args(out: &Path, extra: &[&str]) -> Vec<String> {
    let mut a: Vec<String> = [
        "run",
        &model(),
        "--plate",
        "circle:4",
        "--size",
        "0.5",
        "--end",
        "1",
        "--every",
        "0.25",
        "--picture",
        "u",
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

fn bin() -> Command {
    let mut c = Command::new(env!("CARGO_BIN_EXE_agarium"));
    c.env_remove("AGARIUM_TEST_FAULT");
    c
}

fn with_fault(fault: &str, args: &[String]) -> Output {
    bin()
        .env("AGARIUM_TEST_FAULT", fault)
        .args(args)
        .output()
        .unwrap()
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

fn resume(out: &Path) -> Output {
    bin()
        .args(["resume", out.to_str().unwrap(), "-q"])
        .output()
        .unwrap()
}

fn files(dir: &Path) -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(dir)
        .map(|r| {
            r.filter_map(|e| e.ok())
                .map(|e| e.file_name().to_string_lossy().into_owned())
                .collect()
        })
        .unwrap_or_default();
    v.sort();
    v
}

/// A folder whose run exited right after a step checkpoint on an output time, before that
/// time's outputs (exit 86 from the fault hook).
fn killed_at_an_output_time(out: &Path) -> f64 {
    let o = with_fault(
        "exit-after-output-time-checkpoint",
        &run_args(out, &["--checkpoint-every", "1"]),
    );
    assert_eq!(o.status.code(), Some(86), "{}", stderr(&o));
    let m = common::manifest(out);
    assert_eq!(m["exit"], "running");
    let t = m["checkpoint_time"].as_f64().unwrap();
    assert_eq!(t, 0.25, "the first output time after t = 0");
    assert_eq!(m["outputs_done"].as_f64(), Some(0.0));
    // The state and picture of that time were never written.
    assert!(!out.join(format!("{STEM}_0001.vtu")).exists());
    assert!(!out.join(format!("{STEM}_u_0001.png")).exists());
    t
}

fn pvd_files(out: &Path) -> Vec<String> {
    let text = std::fs::read_to_string(out.join(format!("{STEM}.pvd"))).unwrap();
    text.lines()
        .filter_map(|l| l.split("file=\"").nth(1))
        .map(|r| r.split('"').next().unwrap().to_string())
        .collect()
}

#[test]
fn a_kill_after_a_checkpoint_on_an_output_time_is_made_good_by_resume() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("o");
    killed_at_an_output_time(&out);
    // What a killed atomic write leaves behind, and the lock file of the dead process.
    std::fs::write(out.join(".agarium-Xy12ab.part"), "half").unwrap();
    std::fs::write(out.join(".agarium-Zz34cd.png"), "half").unwrap();
    assert!(out.join(".agarium.lock").exists());

    let o = resume(&out);
    assert!(o.status.success(), "{}", stderr(&o));
    let m = common::manifest(&out);
    assert_eq!(m["exit"], "reached");
    assert_eq!(m["format"], 2);
    assert_eq!(m["outputs_done"].as_f64(), Some(1.0));
    assert_eq!(m["resumed_unix"].as_array().map(Vec::len), Some(1));
    for k in 0..=4 {
        for f in [format!("{STEM}_{k:04}.vtu"), format!("{STEM}_u_{k:04}.png")] {
            assert!(out.join(&f).is_file(), "{f} missing after the resume");
        }
    }
    let expected: Vec<String> = (0..=4).map(|k| format!("{STEM}_{k:04}.vtu")).collect();
    assert_eq!(pvd_files(&out), expected, "each time listed once, in order");
    let names = files(&out);
    assert!(
        !names.iter().any(|n| n.starts_with(".agarium-")),
        "temporary files left: {names:?}"
    );
}

/// Copies the files of folder `from` into a new folder `to`.
fn copy_folder(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for name in files(from) {
        std::fs::copy(from.join(&name), to.join(&name)).unwrap();
    }
}

/// `resume` of `out` exits 2 with `expected` in its message and changes no file.
fn resume_refused(out: &Path, expected: &str) {
    let before: Vec<(String, Vec<u8>)> = files(out)
        .into_iter()
        .map(|n| (n.clone(), std::fs::read(out.join(&n)).unwrap()))
        .collect();
    let o = resume(out);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{expected}: {err}");
    assert!(err.contains(expected), "expected `{expected}` in: {err}");
    assert!(!err.contains("panicked"), "{err}");
    let after: Vec<(String, Vec<u8>)> = files(out)
        .into_iter()
        .map(|n| (n.clone(), std::fs::read(out.join(&n)).unwrap()))
        .collect();
    assert!(
        before == after,
        "{expected}: the refused resume changed the folder"
    );
}

fn edit_manifest(out: &Path, edit: impl FnOnce(&mut serde_json::Value)) {
    let mut m = common::manifest(out);
    edit(&mut m);
    std::fs::write(
        out.join("run.json"),
        serde_json::to_string_pretty(&m).unwrap(),
    )
    .unwrap();
}

#[test]
fn resume_refuses_edited_manifests_and_damaged_or_foreign_checkpoints() {
    let dir = tempfile::tempdir().unwrap();
    let good = dir.path().join("good");
    killed_at_an_output_time(&good);
    let case = |name: &str| {
        let p = dir.path().join(name);
        copy_folder(&good, &p);
        p
    };

    let out = case("every-negative");
    edit_manifest(&out, |m| m["every"] = (-1.0).into());
    resume_refused(&out, "every must be a positive number, got -1");

    let out = case("every-zero");
    edit_manifest(&out, |m| m["every"] = 0.0.into());
    resume_refused(&out, "every must be a positive number, got 0");

    let out = case("end-early");
    edit_manifest(&out, |m| m["end"] = 0.1.into());
    resume_refused(&out, "end = 0.1 is before the checkpoint's time 0.25");

    let out = case("parameters");
    edit_manifest(&out, |m| m["parameters"][0][1] = 7.0.into());
    resume_refused(
        &out,
        "the parameters (overrides, values, initial conditions) differ",
    );

    let out = case("solver");
    edit_manifest(&out, |m| m["solver"]["rtol"] = 0.5.into());
    resume_refused(&out, "the solver settings differ");

    // A mesh that does not match its plate is invalid input (2), not a failure (1).
    let out = case("mesh");
    edit_manifest(&out, |m| {
        let n = m["mesh_figures"]["nodes"].as_u64().unwrap();
        m["mesh_figures"]["nodes"] = (n + 1).into();
    });
    resume_refused(&out, "plate and mesh settings differ");

    let out = case("newer");
    edit_manifest(&out, |m| m["format"] = 99.into());
    resume_refused(&out, "manifest format 99 is newer");

    // One flipped bit in the checkpoint's states.
    let out = case("flipped");
    let path = out.join("checkpoint.bin");
    let mut bytes = std::fs::read(&path).unwrap();
    let k = bytes.len() - 40;
    bytes[k] ^= 0x01;
    std::fs::write(&path, &bytes).unwrap();
    resume_refused(&out, "checksum mismatch");

    // A checkpoint of the previous format is refused with what to do.
    let out = case("old-format");
    let path = out.join("checkpoint.bin");
    let mut bytes = std::fs::read(&path).unwrap();
    bytes[8..12].copy_from_slice(&1u32.to_le_bytes());
    std::fs::write(&path, &bytes).unwrap();
    resume_refused(&out, "format version 1");

    // A checkpoint from a run of another model (same species, other text).
    let other = dir.path().join("other");
    let other_model = dir.path().join("fisher_other.rhai");
    let text = std::fs::read_to_string(model()).unwrap();
    std::fs::write(&other_model, format!("// another model\n{text}")).unwrap();
    let mut args = run_args(&other, &["--checkpoint-every", "1"]);
    let k = args
        .iter()
        .position(|a| a.ends_with("fisher_kpp.rhai"))
        .unwrap();
    args[k] = other_model.display().to_string();
    let o = with_fault("exit-after-output-time-checkpoint", &args);
    assert_eq!(o.status.code(), Some(86), "{}", stderr(&o));
    let out = case("foreign");
    std::fs::copy(other.join("checkpoint.bin"), out.join("checkpoint.bin")).unwrap();
    resume_refused(&out, "the model text");

    // The untouched folder still resumes.
    let o = resume(&good);
    assert!(o.status.success(), "{}", stderr(&o));
}

#[test]
fn resuming_a_finished_run_says_so_and_writes_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("o");
    let o = bin().args(run_args(&out, &[])).output().unwrap();
    assert!(o.status.success(), "{}", stderr(&o));
    let before: Vec<(String, Vec<u8>)> = files(&out)
        .into_iter()
        .map(|n| (n.clone(), std::fs::read(out.join(&n)).unwrap()))
        .collect();
    let o = bin()
        .args(["resume", out.to_str().unwrap()])
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(0));
    assert!(
        stderr(&o).contains("already reached its end time"),
        "{}",
        stderr(&o)
    );
    let after: Vec<(String, Vec<u8>)> = files(&out)
        .into_iter()
        .map(|n| (n.clone(), std::fs::read(out.join(&n)).unwrap()))
        .collect();
    assert!(
        before == after,
        "resume of a finished run changed the folder"
    );
}

#[test]
fn a_busy_folder_is_refused_and_a_dead_runs_lock_is_not() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("busy");
    // A run long enough to be caught in the act (about a million fixed steps).
    let mut child = bin()
        .args(run_args(
            &out,
            &["--fixed-step", "--dt", "1e-6", "--checkpoint-every", "1000"],
        ))
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let deadline = Instant::now() + Duration::from_secs(120);
    while !out.join("run.json").exists() {
        assert!(Instant::now() < deadline, "the run never started");
        assert!(child.try_wait().unwrap().is_none(), "the run ended early");
        std::thread::sleep(Duration::from_millis(20));
    }
    let folder = out.display().to_string();
    let o = resume(&out);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains(&folder) && err.contains("another agarium run or resume"),
        "{err}"
    );
    let o = bin()
        .args(run_args(&out, &["--overwrite"]))
        .output()
        .unwrap();
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains(&folder) && err.contains("another agarium run"),
        "{err}"
    );
    assert!(
        child.try_wait().unwrap().is_none(),
        "the first run was disturbed"
    );

    // Killed outright: its lock file stays, its lock does not.
    child.kill().unwrap();
    child.wait().unwrap();
    assert!(out.join(".agarium.lock").exists());
    let o = bin()
        .args(run_args(&out, &["--overwrite"]))
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", stderr(&o));
    assert_eq!(common::manifest(&out)["exit"], "reached");
}

#[test]
fn a_write_error_names_the_file_and_marks_the_run_failed() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("o");
    let file = format!("{STEM}_0002.vtu");
    let o = with_fault(&format!("fail-write:{file}"), &run_args(&out, &[]));
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(1), "{err}");
    assert!(
        err.contains(&file) && err.contains("No space left"),
        "{err}"
    );
    let m = common::manifest(&out);
    let exit = m["exit"].as_str().unwrap();
    assert!(
        exit.starts_with("error: ") && exit.contains(&file),
        "{exit}"
    );
    assert!(!out.join(&file).exists());
    // The failed run resumes from its last checkpoint once the disk is back.
    let o = resume(&out);
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(out.join(&file).exists());
}

/// `agarium` with `args` in a fresh folder exits 2 with `expected` in the message, without a
/// panic, and leaves the folder empty.
fn refused_and_nothing_written(args: &[&str], expected: &str) {
    let dir = tempfile::tempdir().unwrap();
    let o = common::agarium(args, dir.path());
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{args:?}: {err}");
    assert!(err.contains(expected), "expected `{expected}` in: {err}");
    assert!(!err.contains("panicked"), "{err}");
    assert_eq!(
        files(dir.path()),
        Vec::<String>::new(),
        "{args:?} wrote files"
    );
}

#[test]
fn settings_that_would_exhaust_memory_or_time_are_refused_up_front() {
    let m = model();
    let base = [
        "run",
        m.as_str(),
        "--plate",
        "circle:4",
        "--size",
        "0.5",
        "-o",
        "out",
    ];
    let with = |extra: &[&'static str]| -> Vec<&str> {
        base.iter().copied().chain(extra.iter().copied()).collect()
    };
    refused_and_nothing_written(&with(&["--end", "1e20", "--every", "1"]), "--every 1 gives");
    refused_and_nothing_written(
        &with(&["--end", "1", "--every", "1e-10"]),
        "--every 0.0000000001 gives",
    );
    refused_and_nothing_written(
        &with(&["--end", "1", "--fixed-step", "--dt", "1e-9"]),
        "take 1000000000 steps, more than the budget of 10000000",
    );
    refused_and_nothing_written(&with(&["--end", "1", "--dt-max", "1e-8"]), "--max-steps");
    refused_and_nothing_written(
        &with(&["--end", "1", "--max-nodes", "100000000000000"]),
        "--max-nodes 100000000000000: a mesh of that many nodes needs at least",
    );
    refused_and_nothing_written(
        &[
            "mesh",
            "--plate",
            "circle:4",
            "--max-nodes",
            "100000000000000",
        ],
        "more than this machine's",
    );
    // The budget can be raised with --max-steps.
    let dir = tempfile::tempdir().unwrap();
    let o = common::agarium(
        &with(&[
            "--end",
            "0.001",
            "--fixed-step",
            "--dt",
            "1e-4",
            "--max-steps",
            "5",
        ]),
        dir.path(),
    );
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("take 10 steps, more than the budget of 5"));
    let o = common::agarium(
        &with(&[
            "--end",
            "0.001",
            "--fixed-step",
            "--dt",
            "1e-4",
            "--max-steps",
            "10",
        ]),
        dir.path(),
    );
    assert!(o.status.success(), "{}", stderr(&o));
}

#[cfg(unix)]
#[test]
fn paths_that_are_not_utf8_are_taken_as_they_are() {
    use std::os::unix::ffi::OsStrExt;
    let dir = tempfile::tempdir().unwrap();
    let name = std::ffi::OsStr::from_bytes(b"out-\xff\xfe");
    let o = bin()
        .current_dir(dir.path())
        .args([
            "run",
            &model(),
            "--plate",
            "circle:4",
            "--size",
            "0.5",
            "--end",
            "0.5",
            "-q",
        ])
        .arg("-o")
        .arg(name)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(dir.path().join(name).join("run.json").is_file());
}

#[test]
fn every_output_path_is_checked_before_any_is_written() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::create_dir(dir.path().join("taken.png")).unwrap();
    std::fs::write(dir.path().join("plain.txt"), "x").unwrap();
    let mesh = [
        "mesh", "--plate", "circle:4", "--size", "0.5", "-o", "m.vtu",
    ];
    for (png, expected) in [
        ("taken.png", "--png: "),
        ("plain.txt/x.png", "is a file, not a folder"),
    ] {
        let args: Vec<&str> = mesh.iter().copied().chain(["--png", png]).collect();
        let o = common::agarium(&args, dir.path());
        let err = stderr(&o);
        // Exit 1, as for any path that cannot be written (mesh_cli's contract).
        assert_eq!(o.status.code(), Some(1), "{png}: {err}");
        assert!(err.contains(expected) && err.contains(png), "{err}");
        assert!(
            !dir.path().join("m.vtu").exists(),
            "{png}: m.vtu was written"
        );
    }
    // /proc refuses new files even to root.
    let args: Vec<&str> = mesh
        .iter()
        .copied()
        .chain(["--png", "/proc/x.png"])
        .collect();
    let o = common::agarium(&args, dir.path());
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    assert!(stderr(&o).contains("/proc/x.png"));
    assert!(!dir.path().join("m.vtu").exists());

    // run: an output folder below a file is refused before anything is written.
    let o = common::agarium(
        &[
            "run",
            &model(),
            "--plate",
            "circle:4",
            "--end",
            "1",
            "-o",
            "plain.txt/out",
        ],
        dir.path(),
    );
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(1), "{err}");
    assert!(
        err.contains("output folder (-o)") && err.contains("plain.txt"),
        "{err}"
    );
    assert_eq!(files(dir.path()), vec!["plain.txt", "taken.png"]);
}
