//! Output-cost benchmark: what writing a run's outputs costs next to computing it.
//!
//! 1. Writing one state (.vtu with the four species and the declared field) at about 1e5
//!    and 1e6 nodes: plain base64 against zlib levels 1 and 6 (both our encoder), with
//!    the file sizes; medians.
//! 2. The share of a whole run's wall time spent on outputs (diagnostics every step, states,
//!    pictures, plots, checkpoints, tables; as the run itself records it in `run.json`) for
//!    the four-species colony on a 5 mm disk at the default cadence (a tenth of the end
//!    time) with one picture field: to t = 24 h at 1e5 nodes (Newton, and the cheaper lagged
//!    coupling, whose cheaper steps make the share larger), and to t = 4.8 h (the first two
//!    output intervals of the same 24 h run) at 1e6 nodes, lagged. Target: ≤ 10 %.
//!
//! Run with `cargo bench --bench output` (`-- no-1e6` skips the largest disk, which takes
//! several minutes). Without `--bench` (as under `cargo test --all-targets`) a smoke run on
//! a small mesh checks that everything works. No timing assertions.

mod common;

use std::path::Path;
use std::process::Command;
use std::time::Instant;

use agarium_core::mesh::Mesh;
use agarium_core::output::{write_vtu_as, Field, VtuEncoding};
use common::{disk, median};

/// Smooth colony-like fields (five arrays, as a four-species state with one declared field).
fn fields(mesh: &Mesh) -> Vec<Vec<f64>> {
    (0..5)
        .map(|k| {
            (0..mesh.num_nodes())
                .map(|i| {
                    let p = mesh.node(i);
                    let r2 = (p[0] - 0.3 * k as f64).powi(2) + p[1] * p[1];
                    (1.0 + k as f64) * (-r2 / 2.0).exp() + 0.1 * (3.0 * p[0]).sin()
                })
                .collect()
        })
        .collect()
}

fn write_costs(mesh: &Mesh, repeats: usize, dir: &Path) {
    let values = fields(mesh);
    let names = ["u", "c", "n", "w", "all_cells"];
    let fs: Vec<Field> = names
        .iter()
        .zip(&values)
        .map(|(name, v)| Field { name, values: v })
        .collect();
    let mut plain = (0.0, 0);
    for (label, enc) in [
        ("base64", VtuEncoding::Base64),
        ("zlib 1", VtuEncoding::Zlib { level: 1 }),
        ("zlib 6", VtuEncoding::Zlib { level: 6 }),
    ] {
        let path = dir.join(format!("state-{}.vtu", label.replace(' ', "")));
        let times: Vec<f64> = (0..repeats)
            .map(|_| {
                let t = Instant::now();
                write_vtu_as(&path, mesh, &fs, &[], enc).expect("write");
                t.elapsed().as_secs_f64()
            })
            .collect();
        let t = median(times);
        let bytes = std::fs::metadata(&path).expect("size").len();
        if enc == VtuEncoding::Base64 {
            plain = (t, bytes);
        }
        println!(
            "{:>8} nodes  {label:<7} {:>8.1} ms  {:>7.2} MB  time ×{:.2}  size ×{:.2}",
            mesh.num_nodes(),
            1e3 * t,
            bytes as f64 / 1e6,
            t / plain.0,
            bytes as f64 / plain.1 as f64
        );
    }
}

/// Runs `agarium run` and returns (nodes, wall s, output s) from its manifest.
fn run_share(h: f64, end: f64, every: f64, extra: &[&str], dir: &Path) -> (u64, f64, f64) {
    let model = Path::new(env!("CARGO_MANIFEST_DIR")).join("models/colony_4species.rhai");
    let out = dir.join("run");
    let _ = std::fs::remove_dir_all(&out);
    let status = Command::new(env!("CARGO_BIN_EXE_agarium"))
        .arg("run")
        .arg(&model)
        .args(["--plate", "circle:5", "--size", &h.to_string()])
        .args(["--end", &end.to_string(), "--every", &every.to_string()])
        .args(["--picture", "all_cells", "--time-unit", "h", "-q", "-o"])
        .arg(&out)
        .args(extra)
        .status()
        .expect("start agarium");
    assert!(status.success(), "the run failed");
    let m: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("run.json")).expect("manifest"))
            .expect("manifest json");
    let nodes = m["mesh_figures"]["nodes"].as_u64().unwrap_or(0);
    let wall = m["wall_seconds"].as_f64().unwrap_or(f64::NAN);
    let output = m["output_seconds"].as_f64().unwrap_or(f64::NAN);
    (nodes, wall, output)
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let smoke = !args.iter().any(|a| a == "--bench");
    let skip_largest = args.iter().any(|a| a == "no-1e6");
    let dir = tempfile::tempdir().expect("temp dir");
    println!("== writing one state (4 species + 1 field), median of the repeats");
    // Nodes ≈ 3.6 R²/h² on a disk of radius R.
    let sizes: Vec<(f64, usize)> = if smoke {
        vec![(0.5, 1)]
    } else if skip_largest {
        vec![(0.03, 7)]
    } else {
        vec![(0.03, 7), (0.0095, 3)]
    };
    for &(h, repeats) in &sizes {
        write_costs(&disk(5.0, h), repeats, dir.path());
    }
    println!("\n== share of a run's wall time spent on outputs (run.json), default cadence");
    let runs: Vec<(f64, f64, &[&str], &str)> = if smoke {
        vec![(0.5, 2.4, &[], "newton")]
    } else {
        let mut v: Vec<(f64, f64, &[&str], &str)> = vec![
            (0.03, 24.0, &[], "newton"),
            (0.03, 24.0, &["--coupling", "lagged"], "lagged"),
            (
                0.03,
                24.0,
                &["--coupling", "lagged", "--compress"],
                "lagged, zlib 6",
            ),
        ];
        if !skip_largest {
            v.push((0.0095, 4.8, &["--coupling", "lagged"], "lagged, to 4.8 h"));
        }
        v
    };
    for (h, end, extra, label) in runs {
        let (nodes, wall, output) = run_share(h, end, 2.4, extra, dir.path());
        println!(
            "{nodes:>8} nodes  {label:<18} run {wall:>8.1} s  outputs {output:>7.2} s  share {:>5.1} %  (target ≤ 10 %)",
            100.0 * output / wall
        );
    }
}
