//! TOML run files: every run setting in one file, the command line overriding it, unknown
//! keys refused with their line.

mod common;

use std::path::Path;

use common::{agarium, manifest, parameter};

fn run_file(dir: &Path, extra: &str) -> String {
    let model = concat!(env!("CARGO_MANIFEST_DIR"), "/models/colony_4species.rhai");
    let text = format!(
        r#"model = "{model}"
end = 1.0
every = 0.5
out = "result"
time_unit = "h"

[set]
chi_0 = 0.3

[plate]
outer = {{ shape = "circle", radius = 4.0 }}
cuts = [{{ cut = "half_plane", normal = [1.0, 0.0], offset = 3.0 }}]

[mesh]
size = 0.4
spots = [{{ centre = [0.0, 0.0], size = 0.1 }}]

[solver]
rtol = 1e-4
{extra}"#
    );
    let path = dir.join("plate-run.toml");
    std::fs::write(&path, text).unwrap();
    path.display().to_string()
}

#[test]
fn a_run_file_sets_everything_and_the_command_line_overrides_it() {
    let dir = tempfile::tempdir().unwrap();
    let file = run_file(dir.path(), "");
    // Run from elsewhere: the output folder is relative to the run file.
    let elsewhere = tempfile::tempdir().unwrap();
    let o = agarium(&["run", "--run-file", &file, "-q"], elsewhere.path());
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let out = dir.path().join("result");
    let m = manifest(&out);
    assert_eq!(m["end"], 1.0);
    assert_eq!(m["solver"]["rtol"], 1e-4);
    assert_eq!(m["mesh"]["size"], 0.4);
    assert_eq!(m["plate"]["cuts"][0]["offset"], 3.0);
    assert_eq!(parameter(&m, "chi_0"), Some(0.3));
    assert!(out.join("colony_4species_0002.vtu").exists());

    let o = agarium(
        &[
            "run",
            "--run-file",
            &file,
            "--end",
            "0.5",
            "--set",
            "chi_0=0.5",
            "--rtol",
            "1e-3",
            "-q",
            "--overwrite",
        ],
        elsewhere.path(),
    );
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let m = manifest(&out);
    assert_eq!(m["end"], 0.5);
    assert_eq!(m["solver"]["rtol"], 1e-3);
    assert_eq!(parameter(&m, "chi_0"), Some(0.5));
}

#[test]
fn bad_run_files_exit_2_name_the_key_and_line_and_write_nothing() {
    let dir = tempfile::tempdir().unwrap();
    for (extra, expect) in [
        ("colour = \"red\"\n", "unknown field `colour`"),
        ("max_newton = \"many\"\n", "line 20"),
        ("adaptive = false\n", "fixed steps need dt_initial"),
    ] {
        let file = run_file(dir.path(), extra);
        let o = agarium(&["run", "--run-file", &file], dir.path());
        let err = String::from_utf8_lossy(&o.stderr).into_owned();
        assert_eq!(o.status.code(), Some(2), "{extra}: {err}");
        assert!(err.contains(expect), "{extra}: {err}");
        assert!(
            !dir.path().join("result").exists(),
            "{extra}: output written"
        );
    }
    // A run file without a model and no MODEL argument.
    let path = dir.path().join("empty.toml");
    std::fs::write(&path, "end = 1.0\n").unwrap();
    let o = agarium(&["run", "--run-file", path.to_str().unwrap()], dir.path());
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("give the model file"));
}

/// Colour scales in the run file: `range` per field and `log_scale`; `--range` overrides a
/// field's range from the file.
#[test]
fn picture_scales_come_from_the_run_file() {
    let dir = tempfile::tempdir().unwrap();
    let file = run_file(dir.path(), "");
    let text = std::fs::read_to_string(&file).unwrap().replace(
        "time_unit = \"h\"\n",
        "time_unit = \"h\"\npictures = [\"n\", \"u\"]\nrange = { n = [0.0, 10.0], u = [0.0, 2.0] }\nlog_scale = [\"u\"]\n",
    );
    std::fs::write(&file, text).unwrap();
    let o = agarium(
        &["run", "--run-file", &file, "--range", "u=0.5:3", "-q"],
        dir.path(),
    );
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let m = manifest(&dir.path().join("result"));
    assert_eq!(m["picture_ranges"]["n"], serde_json::json!([0.0, 10.0]));
    assert_eq!(m["picture_ranges"]["u"], serde_json::json!([0.5, 3.0]));
    assert_eq!(m["picture_log"], serde_json::json!(["u"]));
    // A log scale over a range reaching zero is refused.
    let o = agarium(&["run", "--run-file", &file, "-q", "-o", "bad"], dir.path());
    assert_eq!(o.status.code(), Some(2));
    assert!(
        String::from_utf8_lossy(&o.stderr).contains("positive range"),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    assert!(!dir.path().join("bad").exists());
}

/// One word per scheme on the command line, in run files and in the manifest: `euler`, with
/// the earlier `backward-euler` still read.
#[test]
fn the_scheme_has_one_spelling_everywhere() {
    for word in ["euler", "backward-euler"] {
        let dir = tempfile::tempdir().unwrap();
        let file = run_file(dir.path(), &format!("scheme = \"{word}\"\n"));
        let o = agarium(
            &["run", "--run-file", &file, "--end", "0.1", "-q"],
            dir.path(),
        );
        assert!(
            o.status.success(),
            "{word}: {}",
            String::from_utf8_lossy(&o.stderr)
        );
        assert_eq!(
            manifest(&dir.path().join("result"))["solver"]["scheme"],
            "euler"
        );
        let o = agarium(
            &[
                "run",
                "--run-file",
                &file,
                "--end",
                "0.1",
                "--scheme",
                word,
                "-q",
                "--overwrite",
            ],
            dir.path(),
        );
        assert!(
            o.status.success(),
            "{word}: {}",
            String::from_utf8_lossy(&o.stderr)
        );
        assert_eq!(
            manifest(&dir.path().join("result"))["solver"]["scheme"],
            "euler"
        );
    }
}
