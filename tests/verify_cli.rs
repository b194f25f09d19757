//! `agarium verify` end to end: table columns, JSON, exit codes.

use std::process::Command;

fn agarium(args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_agarium"))
        .args(args)
        .output()
        .expect("run agarium")
}

#[test]
fn one_quick_check_prints_the_table_and_exits_zero() {
    let out = agarium(&["verify", "--only", "eigen-rectangle"]);
    let stdout = String::from_utf8_lossy(&out.stdout);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(0), "{stdout}\n{stderr}");
    let header = stdout.lines().next().expect("a header line");
    let columns: Vec<&str> = header.split('|').map(str::trim).collect();
    assert_eq!(
        columns,
        [
            "check",
            "source",
            "expected",
            "obtained",
            "tolerance",
            "result"
        ]
    );
    let rows: Vec<&str> = stdout
        .lines()
        .filter(|l| l.starts_with("eigen-rectangle"))
        .collect();
    assert_eq!(rows.len(), 9, "{stdout}");
    assert!(
        rows.iter().all(|r| r.trim_end().ends_with("pass")),
        "{stdout}"
    );
    assert!(stdout.contains("sources:"));
    // Progress goes to stderr, not into the table.
    assert!(stderr.contains("[1/1] eigen-rectangle"), "{stderr}");
}

#[test]
fn json_output_carries_every_column() {
    let out = agarium(&["verify", "--only", "mms-time", "--json"]);
    assert_eq!(out.status.code(), Some(0));
    let doc: serde_json::Value = serde_json::from_slice(&out.stdout).expect("JSON on stdout");
    assert_eq!(doc["level"], "fast");
    assert_eq!(doc["passed"], true);
    let checks = doc["checks"].as_array().expect("checks");
    assert_eq!(checks.len(), 1);
    assert_eq!(checks[0]["name"], "mms-time");
    let rows = checks[0]["rows"].as_array().expect("rows");
    assert_eq!(rows.len(), 4);
    for r in rows {
        for key in [
            "check",
            "source",
            "expected",
            "obtained",
            "tolerance",
            "pass",
        ] {
            assert!(r.get(key).is_some(), "row lacks {key}: {r}");
        }
        let order = r["obtained_value"].as_f64().expect("numeric");
        assert!(order > 0.5 && order < 3.5, "{r}");
    }
}

#[test]
fn an_only_matching_nothing_is_bad_input() {
    let out = agarium(&["verify", "--only", "no-such-check"]);
    assert_eq!(out.status.code(), Some(2));
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(stderr.contains("matches no check"), "{stderr}");
    assert!(stderr.contains("eigen-disk"), "names the checks: {stderr}");
    assert!(out.stdout.is_empty());
}

#[test]
fn list_names_every_check_with_its_source() {
    let out = agarium(&["verify", "--list"]);
    assert_eq!(out.status.code(), Some(0));
    let stdout = String::from_utf8_lossy(&out.stdout);
    for name in [
        "mms-space-disk",
        "eigen-disk",
        "fisher-kpp",
        "nutrient",
        "blowup-data",
    ] {
        assert!(stdout.contains(name), "{stdout}");
    }
    assert!(stdout.contains("Abramowitz & I. A. Stegun"), "{stdout}");
}

#[test]
fn a_broken_solver_fails_the_table_and_exits_one() {
    // 2 % more diffusion than the expected values assume.
    let out = agarium(&[
        "verify",
        "--only",
        "eigen-rectangle",
        "--inject-diffusion",
        "1.02",
    ]);
    assert_eq!(out.status.code(), Some(1));
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(
        stdout.lines().any(|l| l.trim_end().ends_with("FAIL")),
        "{stdout}"
    );
    assert!(stdout.contains("rows FAIL"), "{stdout}");
}
