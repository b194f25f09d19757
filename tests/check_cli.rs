//! End-to-end tests of `agarium check` through the built binary.

use std::path::PathBuf;
use std::process::{Command, Output};

fn agarium(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_agarium"))
        .args(args)
        .output()
        .expect("run agarium")
}

fn model_path(name: &str) -> String {
    let p: PathBuf = [env!("CARGO_MANIFEST_DIR"), "models", name]
        .iter()
        .collect();
    p.display().to_string()
}

fn write_model(dir: &tempfile::TempDir, text: &str) -> String {
    let p = dir.path().join("m.rhai");
    std::fs::write(&p, text).expect("write model");
    p.display().to_string()
}

fn text(o: &Output) -> (String, String) {
    (
        String::from_utf8_lossy(&o.stdout).into_owned(),
        String::from_utf8_lossy(&o.stderr).into_owned(),
    )
}

#[test]
fn library_models_are_valid() {
    for m in [
        "colony_4species.rhai",
        "colony_quasi_steady.rhai",
        "volume_filling.rhai",
    ] {
        let o = agarium(&["check", &model_path(m)]);
        let (out, err) = text(&o);
        assert_eq!(o.status.code(), Some(0), "{m}: {out}\n{err}");
        assert!(
            out.contains("species") && out.contains("diagnostics"),
            "{out}"
        );
        assert!(!out.contains("warning:"), "{m}: {out}");
    }
}

#[test]
fn set_changes_the_printed_value() {
    let o = agarium(&[
        "check",
        &model_path("colony_4species.rhai"),
        "--set",
        "chi_0=2.5",
        "--set",
        "r=0.9",
    ]);
    let (out, err) = text(&o);
    assert_eq!(o.status.code(), Some(0), "{err}");
    assert!(out.contains("2.5 (default 0.4, --set)"), "{out}");
    assert!(out.contains("0.9 (default 1.2, --set)"), "{out}");
}

#[test]
fn bad_set_values_exit_2() {
    let m = model_path("colony_4species.rhai");
    for (set, needle) in [
        ("nope=1", "no parameter `nope`"),
        ("chi_0=lots", "not a finite number"),
        ("chi_0=99", "outside its bounds"),
        ("chi_0", "expected name=value"),
    ] {
        let o = agarium(&["check", &m, "--set", set]);
        let (_, err) = text(&o);
        assert_eq!(o.status.code(), Some(2), "{set}: {err}");
        assert!(err.contains(needle), "{set}: {err}");
    }
}

#[test]
fn invalid_models_exit_2_with_position() {
    let dir = tempfile::tempdir().expect("tempdir");
    let cases = [
        ("param(\"a\", 1.0);\nlet = 3;", ":2:", "syntax error"),
        (
            "species(\"u\", #{ kind: \"mobile\", diffusion: 0.1, reaction: \"k * u\" });",
            ":1:",
            "unknown name `k`",
        ),
        ("param(\"a\", 1.0);\nparam(\"a\", 1.0);", ":2:", "declared twice"),
        ("species(\"u\", #{ diffusion: 0.1 });", ":1:", "has no kind"),
        (
            "species(\"u\", #{ kind: \"mobile\", diffusion: -1.0 });",
            ":1:",
            "must be positive",
        ),
        (
            "fn f(u) {\n  while true { }\n  u\n}\nspecies(\"u\", #{ kind: \"mobile\", diffusion: 1.0, reaction: Fn(\"f\") });",
            ":2:3:",
            "while/loop is not supported",
        ),
        (
            "fn f(u) { f(u) }\nspecies(\"u\", #{ kind: \"mobile\", diffusion: 1.0, reaction: Fn(\"f\") });",
            ":1:",
            "recursion",
        ),
        ("loop { }", ":1:", "operations"),
    ];
    for (src, pos, needle) in cases {
        let path = write_model(&dir, src);
        let o = agarium(&["check", &path]);
        let (_, err) = text(&o);
        assert_eq!(o.status.code(), Some(2), "{src}: {err}");
        assert!(err.contains(needle), "{src}: {err}");
        assert!(err.contains(&format!("m.rhai{pos}")), "{src}: {err}");
    }
}

#[test]
fn missing_file_exits_2() {
    let o = agarium(&["check", "/nonexistent/model.rhai"]);
    assert_eq!(o.status.code(), Some(2));
}

#[test]
fn warns_on_quasi_positivity_and_zero_diffusion() {
    let dir = tempfile::tempdir().expect("tempdir");
    let path = write_model(
        &dir,
        "species(\"u\", #{ kind: \"mobile\", diffusion: 0.0, reaction: \"1.0 - u - 0.5\" });\n\
         species(\"v\", #{ kind: \"mobile\", diffusion: 1.0, reaction: \"u - 0.1\" });\n\
         species(\"w\", #{ kind: \"immobile\", reaction: \"ln(w)\" });",
    );
    let o = agarium(&["check", &path]);
    let (out, err) = text(&o);
    assert_eq!(o.status.code(), Some(0), "{err}");
    // v's reaction is negative at v = 0 when u < 0.1: quasi-positivity fails.
    assert!(
        out.contains("reaction of `v`") && out.contains("quasi-positivity"),
        "{out}"
    );
    assert!(!out.contains("reaction of `u` is"), "{out}");
    assert!(out.contains("diffusion coefficient of `u` is 0"), "{out}");
    assert!(out.contains("not finite: reaction of `w` is -inf"), "{out}");
}

/// `check` refuses what `run` refuses: a model without species, with the same message.
#[test]
fn check_refuses_a_model_without_species_as_run_does() {
    let dir = tempfile::tempdir().unwrap();
    let empty = dir.path().join("empty.rhai");
    std::fs::write(&empty, "").unwrap();
    let path = empty.to_str().unwrap();
    let check = agarium(&["check", path]);
    let run = agarium(&[
        "run",
        path,
        "--plate",
        "circle:1",
        "--end",
        "1",
        "-o",
        dir.path().join("o").to_str().unwrap(),
    ]);
    for o in [&check, &run] {
        assert_eq!(o.status.code(), Some(2));
        assert!(
            String::from_utf8_lossy(&o.stderr).contains("the model declares no species"),
            "{}",
            String::from_utf8_lossy(&o.stderr)
        );
    }
}

/// Output into a pipe whose reader has gone (`agarium check … | head -0`) ends quietly with
/// 128 + SIGPIPE instead of a panic.
#[test]
fn a_closed_pipe_ends_quietly() {
    let model = concat!(env!("CARGO_MANIFEST_DIR"), "/models/colony_4species.rhai");
    let mut child = Command::new(env!("CARGO_BIN_EXE_agarium"))
        .args(["check", model])
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    drop(child.stdout.take());
    let o = child.wait_with_output().unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(141), "{err}");
    assert!(!err.contains("panicked"), "{err}");
}
