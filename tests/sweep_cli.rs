//! `agarium sweep` end to end: grid points and their table, shards merged into the unsharded
//! table, a sweep killed with SIGKILL and started again, and bad input.

mod common;

use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::{Duration, Instant};

use common::agarium;

fn model() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("models/keller_segel.rhai")
}

/// The base run and a 2 × 2 × 2 grid (8 points).
fn args(out: &Path) -> Vec<String> {
    let mut v: Vec<String> = [
        model().to_str().unwrap(),
        "--plate",
        "circle:1",
        "--size",
        "0.15",
        "--end",
        "0.04",
        "--every",
        "0.02",
        "--axis",
        "chi=1,5",
        "--axis",
        "D_u=lin:0.5:1:2",
        "--axis",
        "mesh.size=0.15,0.2",
        "--contact",
        "u",
        "-q",
        "-o",
    ]
    .iter()
    .map(|s| s.to_string())
    .collect();
    v.push(out.to_str().unwrap().to_string());
    v
}

fn sweep(extra: &[&str], out: &Path) -> std::process::Output {
    let mut a: Vec<String> = vec!["sweep".into()];
    a.extend(args(out));
    a.extend(extra.iter().map(|s| s.to_string()));
    let refs: Vec<&str> = a.iter().map(String::as_str).collect();
    agarium(&refs, Path::new(env!("CARGO_MANIFEST_DIR")))
}

/// The table without its last column (wall seconds, the one that differs between sweeps).
fn table(path: &Path) -> Vec<String> {
    std::fs::read_to_string(path)
        .unwrap()
        .lines()
        .map(|l| l.rsplit_once(',').unwrap().0.to_string())
        .collect()
}

fn ok(o: &std::process::Output) {
    assert!(
        o.status.success(),
        "{:?}\n{}",
        o.status,
        String::from_utf8_lossy(&o.stderr)
    );
}

#[test]
fn a_grid_sweep_writes_a_row_per_point_and_shards_merge_to_the_same_table() {
    let dir = tempfile::tempdir().unwrap();
    let whole = dir.path().join("whole");
    ok(&sweep(&[], &whole));
    let rows = table(&whole.join("summary.csv"));
    assert_eq!(rows.len(), 9, "{rows:#?}");
    assert!(rows[0].starts_with("point,chi,D_u,mesh.size,outcome,reason,t_end,steps"));
    // Grid order: the first axis varies slowest.
    let values: Vec<(f64, f64, f64)> = rows[1..]
        .iter()
        .map(|r| {
            let c: Vec<f64> = r
                .split(',')
                .skip(1)
                .take(3)
                .map(|v| v.parse().unwrap())
                .collect();
            (c[0], c[1], c[2])
        })
        .collect();
    let mut want = Vec::new();
    for chi in [1.0, 5.0] {
        for d in [0.5, 1.0] {
            for h in [0.15, 0.2] {
                want.push((chi, d, h));
            }
        }
    }
    assert_eq!(values, want);
    for (k, r) in rows[1..].iter().enumerate() {
        assert!(r.starts_with(&format!("{k},")), "{r}");
        assert!(r.contains(",reached,"), "{r}");
        // Each point is a run folder with its manifest, which records the point's values.
        let m = common::manifest(&whole.join(format!("points/{k:04}")));
        assert_eq!(common::parameter(&m, "chi"), Some(want[k].0));
        assert_eq!(common::parameter(&m, "D_u"), Some(want[k].1));
        assert_eq!(m["mesh"]["size"].as_f64(), Some(want[k].2));
    }
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(whole.join("summary.json")).unwrap())
            .unwrap();
    assert_eq!(json["rows"].as_array().unwrap().len(), 8);

    let shards: Vec<PathBuf> = (1..=3).map(|k| dir.path().join(format!("s{k}"))).collect();
    for (k, s) in shards.iter().enumerate() {
        ok(&sweep(&["--shard", &format!("{}/3", k + 1)], s));
    }
    let merged = dir.path().join("merged");
    let mut m: Vec<&str> = vec!["sweep", "merge"];
    m.extend(shards.iter().map(|s| s.to_str().unwrap()));
    m.extend(["-o", merged.to_str().unwrap()]);
    ok(&agarium(&m, dir.path()));
    assert_eq!(table(&merged.join("summary.csv")), rows);
    // The contact sheet of u at every point's end, from the shards' folders.
    for d in [&whole, &merged] {
        let png = std::fs::read(d.join("contact-u.png")).unwrap();
        assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n");
    }
    assert!(whole.join("points/0007/keller_segel_u_0000.png").is_file());

    // Two of three shards: the merge says which points are missing and fails.
    let partial = agarium(
        &[
            "sweep",
            "merge",
            shards[0].to_str().unwrap(),
            shards[1].to_str().unwrap(),
            "-o",
            dir.path().join("partial").to_str().unwrap(),
        ],
        dir.path(),
    );
    assert_eq!(partial.status.code(), Some(1));
    let err = String::from_utf8_lossy(&partial.stderr);
    assert!(
        err.contains("points missing") && err.contains("2, 5"),
        "{err}"
    );

    // Shards of a different sweep are refused.
    let other = dir.path().join("other");
    ok(&sweep(&["--axis", "chi=2,3"], &other));
    let mixed = agarium(
        &[
            "sweep",
            "merge",
            shards[0].to_str().unwrap(),
            other.to_str().unwrap(),
        ],
        dir.path(),
    );
    assert_eq!(mixed.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&mixed.stderr).contains("different sweeps"));
}

#[test]
fn a_killed_sweep_started_again_keeps_its_finished_points() {
    let dir = tempfile::tempdir().unwrap();
    let reference = dir.path().join("reference");
    ok(&sweep(&["-j", "1"], &reference));
    let out = dir.path().join("killed");
    let mut a: Vec<String> = vec!["sweep".into()];
    a.extend(args(&out));
    a.extend(["-j".into(), "1".into()]);
    let mut child = Command::new(env!("CARGO_BIN_EXE_agarium"))
        .args(&a)
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .spawn()
        .unwrap();
    // Kill as soon as two points are finished.
    let finished = |d: &Path| {
        (0..8)
            .filter(|k| d.join(format!("points/{k:04}/point.json")).exists())
            .count()
    };
    let deadline = Instant::now() + Duration::from_secs(120);
    while finished(&out) < 2 && Instant::now() < deadline {
        if child.try_wait().unwrap().is_some() {
            break;
        }
        std::thread::sleep(Duration::from_millis(5));
    }
    child.kill().ok();
    child.wait().unwrap();
    let before = finished(&out);
    assert!(before >= 2, "no point finished before the kill");
    let stamps: Vec<Option<String>> = (0..8)
        .map(|k| std::fs::read_to_string(out.join(format!("points/{k:04}/point.json"))).ok())
        .collect();
    let again = sweep(&["-j", "1"], &out);
    ok(&again);
    // Finished points were not run again: their rows are the very same files.
    for (k, s) in stamps.iter().enumerate() {
        if let Some(s) = s {
            let now =
                std::fs::read_to_string(out.join(format!("points/{k:04}/point.json"))).unwrap();
            assert_eq!(&now, s, "point {k} was run again");
        }
    }
    assert_eq!(
        table(&out.join("summary.csv")),
        table(&reference.join("summary.csv"))
    );
}

#[test]
fn bad_sweeps_are_refused_before_anything_is_written() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("never");
    for (extra, says) in [
        (vec!["--axis", "no_such=1,2"], "no parameter `no_such`"),
        (vec!["--axis", "chi=-1,2"], "outside its bounds"),
        (vec!["--axis", "chi=1,x"], "'x' is not a number"),
        (vec!["--axis", "chi=lin:1:2:0"], "empty"),
        (vec!["--axis", "plate.width=2"], "has no width"),
        (vec!["--shard", "4/3"], "--shard '4/3'"),
        (vec!["--zip", "--axis", "chi=1,2,3"], "equally long"),
        (vec!["--sample", "lhs:0"], "at least 1"),
    ] {
        let o = sweep(&extra, &out);
        assert_eq!(o.status.code(), Some(2), "{extra:?}");
        let err = String::from_utf8_lossy(&o.stderr);
        assert!(err.contains(says), "{extra:?}: {err}");
        assert!(!out.exists(), "{extra:?} wrote something");
    }
    // Outside a job array Slurm's variables are absent; inside, a broken one is refused.
    let mut a: Vec<String> = vec!["sweep".into()];
    a.extend(args(&out));
    let o = Command::new(env!("CARGO_BIN_EXE_agarium"))
        .args(&a)
        .env("SLURM_ARRAY_TASK_ID", "3")
        .env("SLURM_ARRAY_TASK_COUNT", "3")
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("shard 4 of 3"));
}

#[test]
fn a_sweep_across_the_stability_threshold_separates_decay_from_growth() {
    // The bundled example's [sweep] table over chi and D_u, on a coarser mesh. Linear stability
    // of the uniform lawn (the determinant condition derived in
    // models/chemotaxis_logistic.rhai, common practice for this model family; Mimura &
    // Tsujikawa, Physica A 230, 1996, recalled from memory): it breaks up iff
    // alpha·chi > (sqrt(D_u beta) + sqrt(r D_v))², here chi > (sqrt(D_u) + 1)², i.e. above
    // 2.25 at D_u = 0.25 and above 9 at D_u = 4. Of chi ∈ {1.5, 4} × D_u ∈ {0.25, 4} only
    // (4, 0.25) is unstable: there the initial ripple (up to 0.03) grows, elsewhere it decays.
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("threshold");
    let o = agarium(
        &[
            "sweep",
            "--run-file",
            "examples/pattern-switch/sweep.toml",
            "--axis",
            "chi=1.5,4",
            "--axis",
            "D_u=0.25,4",
            "--size",
            "1.0",
            "--map",
            "u_max",
            "-q",
            "-o",
            out.to_str().unwrap(),
        ],
        Path::new(env!("CARGO_MANIFEST_DIR")),
    );
    ok(&o);
    let text = std::fs::read_to_string(out.join("summary.csv")).unwrap();
    let lines: Vec<&str> = text.lines().collect();
    let header: Vec<&str> = lines[0].split(',').collect();
    let col = |name: &str| header.iter().position(|h| *h == name).unwrap();
    assert_eq!(lines.len(), 5);
    for line in &lines[1..] {
        let c: Vec<&str> = line.split(',').collect();
        let num = |name: &str| -> f64 { c[col(name)].parse().unwrap() };
        let deviation = (num("u_max") - 1.0).max(1.0 - num("u_min"));
        let unstable = num("chi") > (num("D_u").sqrt() + 1.0).powi(2);
        if unstable {
            assert!(deviation > 0.1, "should grow: {line}");
        } else {
            assert!(deviation < 1e-3, "should decay: {line}");
        }
    }
    let png = std::fs::read(out.join("phase-u_max.png")).unwrap();
    assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n");
}
