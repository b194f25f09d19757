//! Sweep benchmark: points per minute of a small model on 1 and 2 cores (`-j 1` against
//! `-j 2`, one thread per point) and the sweep's overhead per point against bare `agarium run`
//! of the same points one after another (target: under 5 %).
//!
//! The case: the chemotaxis–logistic lawn of `examples/pattern-switch` on a 24 × 18 mm tray
//! (about 2,200 nodes) to t = 10 h, eight values of chi. Each configuration is timed `reps`
//! times, interleaved, and the medians are reported; the machine is shared, so compare the
//! ratios of one run.
//!
//! Run with `cargo bench --bench sweep` (`-- quick` for one repetition). Without `--bench`
//! (as under `cargo test --all-targets`) a smoke run of two points on a coarse mesh checks that
//! everything works. No timing assertions.

use std::path::Path;
use std::process::Command;
use std::time::Instant;

/// Median of the samples (the upper one of an even count).
fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn agarium(args: &[&str]) -> f64 {
    let t = Instant::now();
    let status = Command::new(env!("CARGO_BIN_EXE_agarium"))
        .args(args)
        .env("RAYON_NUM_THREADS", "1")
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .status()
        .expect("run agarium");
    assert!(status.success(), "{args:?}");
    t.elapsed().as_secs_f64()
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let smoke = !args.iter().any(|a| a == "--bench");
    let quick = smoke || args.iter().any(|a| a == "quick");
    let reps = if quick { 1 } else { 3 };
    let (chis, size, end): (Vec<f64>, &str, &str) = if smoke {
        (vec![3.0, 5.0], "1.5", "1")
    } else {
        ((0..8).map(|k| 2.0 + 0.5 * k as f64).collect(), "0.5", "10")
    };
    let tmp = tempfile::tempdir().expect("temporary folder");
    let base = |out: &Path| -> Vec<String> {
        [
            "--run-file",
            "examples/pattern-switch/sweep.toml",
            "--size",
            size,
            "--end",
            end,
            "--every",
            end,
            "-q",
            "-o",
            out.to_str().unwrap_or_default(),
        ]
        .iter()
        .map(|s| s.to_string())
        .collect()
    };
    let axis = format!(
        "chi={}",
        chis.iter()
            .map(|c| c.to_string())
            .collect::<Vec<_>>()
            .join(",")
    );
    let (mut bare, mut one, mut two) = (Vec::new(), Vec::new(), Vec::new());
    for rep in 0..reps {
        // Bare runs, one after another.
        let mut total = 0.0;
        for (k, chi) in chis.iter().enumerate() {
            let out = tmp.path().join(format!("bare-{rep}-{k}"));
            let mut a: Vec<String> = vec!["run".into()];
            a.extend(base(&out));
            a.extend(["--set".into(), format!("chi={chi}")]);
            let refs: Vec<&str> = a.iter().map(String::as_str).collect();
            total += agarium(&refs);
        }
        bare.push(total);
        for (jobs, times) in [("1", &mut one), ("2", &mut two)] {
            let out = tmp.path().join(format!("sweep-{rep}-{jobs}"));
            let mut a: Vec<String> = vec!["sweep".into()];
            a.extend(base(&out));
            a.extend(["--axis".into(), axis.clone(), "-j".into(), jobs.into()]);
            let refs: Vec<&str> = a.iter().map(String::as_str).collect();
            times.push(agarium(&refs));
        }
    }
    let (bare, one, two) = (median(bare), median(one), median(two));
    let n = chis.len() as f64;
    println!(
        "sweep of {} points (chemotaxis-logistic lawn, mesh size {size}, to t = {end}):",
        chis.len()
    );
    println!(
        "  bare runs one after another  {:>8.2} s  {:>7.1} points/min",
        bare,
        60.0 * n / bare
    );
    println!(
        "  sweep -j 1                   {:>8.2} s  {:>7.1} points/min",
        one,
        60.0 * n / one
    );
    println!(
        "  sweep -j 2                   {:>8.2} s  {:>7.1} points/min",
        two,
        60.0 * n / two
    );
    println!(
        "  overhead per point of the sweep (-j 1 against bare runs): {:+.1} %",
        100.0 * (one / bare - 1.0)
    );
    println!("  speed-up of 2 cores over 1: {:.2}", one / two);
}
