//! `agarium stability` benchmark: the report of the four-species colony model on a 1e5-node
//! plate (radius 10, size 0.061) with 20 Neumann eigenvalues (goal: under 10 s on the
//! 2-core machine), and the share of it the plate's modes take (the same run with
//! `--modes 0`). Medians of 3 (`-- quick`: 1).
//!
//! Run with `cargo bench --bench stability`. Without `--bench` (as under `cargo test
//! --all-targets`) a smoke run on a coarse plate checks that everything works. No timing
//! assertions.

use std::process::Command;
use std::time::Instant;

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn seconds(size: &str, modes: &str) -> f64 {
    let t = Instant::now();
    let o = Command::new(env!("CARGO_BIN_EXE_agarium"))
        .args([
            "stability",
            "models/colony_4species.rhai",
            "--plate",
            "circle:10",
            "--size",
            size,
            "--modes",
            modes,
            "--json",
        ])
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .output()
        .expect("run agarium");
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    t.elapsed().as_secs_f64()
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let smoke = !args.iter().any(|a| a == "--bench");
    let reps = if smoke || args.iter().any(|a| a == "quick") {
        1
    } else {
        3
    };
    let size = if smoke { "1.0" } else { "0.061" };
    let (mut with, mut without) = (Vec::new(), Vec::new());
    for _ in 0..reps {
        with.push(seconds(size, "20"));
        without.push(seconds(size, "0"));
    }
    let (w, wo) = (median(with), median(without));
    println!(
        "stability report, four-species model, size {size} (about 1e5 nodes unless smoke): {w:.2} s with 20 eigenvalues, {wo:.2} s without (modes {:.0} %)",
        100.0 * (w - wo) / w
    );
}
