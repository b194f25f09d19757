//! Hostile but plausible input to `agarium mesh`, end to end through the binary.
//!
//! Project rules for bad input: never a panic, never a hang; a clear message saying what and
//! where; exit code 2 for bad input (1 for failures not caused by the input); no partial or
//! clobbered output file. Good but awkward input must give a usable mesh with an honest
//! report (a warning whenever the angle bound is missed or an edge weight is negative).

use std::io::Read;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

/// Anti-hang deadline for one run of the binary.
const DEADLINE: Duration = Duration::from_secs(60);

struct Run {
    code: Option<i32>,
    stdout: String,
    stderr: String,
}

impl Run {
    fn json(&self) -> serde_json::Value {
        assert_eq!(self.code, Some(0), "failed: {}", self.stderr);
        serde_json::from_str(&self.stdout).expect("JSON report")
    }
    fn f(&self, key: &str) -> f64 {
        self.json()[key]
            .as_f64()
            .unwrap_or_else(|| panic!("{key} missing"))
    }
}

/// Runs `agarium` in `dir`, killing it (and failing the test) if it outlives `deadline`.
fn agarium_within(args: &[&str], dir: &Path, deadline: Duration) -> Run {
    let mut child = Command::new(env!("CARGO_BIN_EXE_agarium"))
        .args(args)
        .current_dir(dir)
        .env("RUST_BACKTRACE", "0")
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("run agarium");
    let drain = |mut r: Box<dyn Read + Send>| {
        std::thread::spawn(move || {
            let mut s = Vec::new();
            let _ = r.read_to_end(&mut s);
            String::from_utf8_lossy(&s).into_owned()
        })
    };
    let out = drain(Box::new(child.stdout.take().unwrap()));
    let err = drain(Box::new(child.stderr.take().unwrap()));
    let start = Instant::now();
    let status = loop {
        if let Some(s) = child.try_wait().expect("wait") {
            break s;
        }
        if start.elapsed() > deadline {
            let _ = child.kill();
            let _ = child.wait();
            panic!("agarium {args:?} still running after {deadline:?}: hang");
        }
        std::thread::sleep(Duration::from_millis(10));
    };
    let run = Run {
        code: status.code(),
        stdout: out.join().unwrap(),
        stderr: err.join().unwrap(),
    };
    assert!(
        !run.stderr.contains("panicked") && run.code.is_some() && run.code != Some(101),
        "agarium {args:?} crashed (code {:?}): {}",
        run.code,
        run.stderr
    );
    run
}

fn agarium(args: &[&str], dir: &Path) -> Run {
    agarium_within(args, dir, DEADLINE)
}

/// `agarium mesh ARGS --json`, expected to succeed, in a fresh directory.
fn mesh_json(args: &[&str]) -> (Run, serde_json::Value) {
    let dir = tempfile::tempdir().unwrap();
    mesh_json_in(args, dir.path())
}

fn mesh_json_in(args: &[&str], dir: &Path) -> (Run, serde_json::Value) {
    let mut all = vec!["mesh"];
    all.extend(args);
    all.push("--json");
    let run = agarium(&all, dir);
    let json = run.json();
    (run, json)
}

fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

/// The report is honest: a missed angle bound and negative weights are both announced.
fn assert_honest(run: &Run, r: &serde_json::Value, requested_min_angle: f64) {
    let neg = r["negative_edge_weights"].as_u64().unwrap();
    if neg > 0 {
        assert!(
            run.stderr.contains("negative cotangent weight"),
            "{neg} negative weights without a warning: {}",
            run.stderr
        );
    }
    if r["min_angle_deg"].as_f64().unwrap() < requested_min_angle - 1e-9 {
        assert!(
            run.stderr.contains("below the requested"),
            "angle bound missed without a warning: {}",
            run.stderr
        );
    }
    assert!(r["area"].as_f64().unwrap() > 0.0);
}

/// Runs a mesh command that must be refused: exit `code`, `expected` in the message, an
/// existing output kept intact, no new output and no temporary left behind.
fn refused_with(files: &[(&str, &str)], args: &[&str], code: i32, expected: &str) {
    refused_within(files, args, code, expected, DEADLINE)
}

fn refused_within(
    files: &[(&str, &str)],
    args: &[&str],
    code: i32,
    expected: &str,
    deadline: Duration,
) {
    let dir = tempfile::tempdir().unwrap();
    for (name, text) in files {
        write(dir.path(), name, text);
    }
    write(dir.path(), "keep.vtu", "precious");
    let mut all = vec!["mesh"];
    all.extend(args);
    all.extend(["-o", "keep.vtu", "--png", "new.png"]);
    let run = agarium_within(&all, dir.path(), deadline);
    assert_eq!(run.code, Some(code), "args {args:?}: {}", run.stderr);
    assert!(
        run.stderr.contains(expected),
        "args {args:?}: expected '{expected}' in: {}",
        run.stderr
    );
    assert_eq!(
        std::fs::read_to_string(dir.path().join("keep.vtu")).unwrap(),
        "precious"
    );
    assert!(!dir.path().join("new.png").exists(), "args {args:?}");
    assert_eq!(
        std::fs::read_dir(dir.path()).unwrap().count(),
        files.len() + 1,
        "stray files after {args:?}"
    );
}

fn refused(args: &[&str], expected: &str) {
    refused_with(&[], args, 2, expected)
}

fn traced_circle(r: f64, n: usize) -> String {
    (0..n)
        .map(|k| {
            let a = 2.0 * std::f64::consts::PI * k as f64 / n as f64;
            format!("{:.12} {:.12}\n", r * a.cos(), r * a.sin())
        })
        .collect()
}

fn wedge_outline(deg: f64) -> String {
    let a = deg.to_radians();
    format!("0 0\n20 0\n{} {}\n", 20.0 * a.cos(), 20.0 * a.sin())
}

// ---------------------------------------------------------------- numbers in options

#[test]
fn non_finite_numbers_in_options_are_refused() {
    for (args, expected) in [
        (vec!["--plate", "circle:NaN"], "'NaN' is not finite"),
        (vec!["--plate", "circle:inf"], "'inf' is not finite"),
        (vec!["--plate", "ellipse:5,-inf"], "'-inf' is not finite"),
        (
            vec!["--plate", "circle:10", "--hole", "circle:NaN@1,1"],
            "--hole 'circle:NaN@1,1'",
        ),
        (
            vec!["--plate", "circle:10", "--size", "NaN"],
            "--size must be a positive number",
        ),
        (
            vec!["--plate", "circle:10", "--size", "inf"],
            "--size must be a positive number",
        ),
        (
            vec!["--plate", "circle:10", "--largest-triangle", "inf"],
            "--largest-triangle must be a positive number",
        ),
        (
            vec!["--plate", "circle:10", "--smallest-angle", "NaN"],
            "minimum angle must be above 0",
        ),
        (
            vec!["--plate", "circle:10", "--smallest-angle", "0"],
            "minimum angle must be above 0",
        ),
        (
            vec!["--plate", "circle:10", "--grading", "NaN"],
            "grading must be a non-negative number",
        ),
        (
            vec!["--plate", "circle:10", "--grading", "-1"],
            "grading must be a non-negative number",
        ),
        (
            vec!["--plate", "circle:10", "--spot", "NaN,0"],
            "--spot 'NaN,0': 'NaN' is not finite",
        ),
        (
            vec!["--plate", "circle:10", "--spot", "0,0,inf"],
            "--spot '0,0,inf': 'inf' is not finite",
        ),
        (
            vec!["--plate", "circle:10", "--trim", "1,0,inf"],
            "--trim '1,0,inf': 'inf' is not finite",
        ),
        (
            vec!["--plate", "circle:10", "--wedge", "0,0,NaN,10"],
            "--wedge '0,0,NaN,10': 'NaN' is not finite",
        ),
        (
            vec!["--plate", "circle:10", "--max-nodes", "0"],
            "node budget must be at least 3",
        ),
    ] {
        refused(&args, expected);
    }
}

#[test]
fn min_angle_extremes_mesh_and_keep_their_bound() {
    for deg in [34.0, 0.5] {
        let d = deg.to_string();
        let (run, r) = mesh_json(&["--plate", "circle:10", "--smallest-angle", &d]);
        assert!(r["min_angle_deg"].as_f64().unwrap() >= deg - 1e-9, "{deg}");
        assert_eq!(r["negative_edge_weights"], 0);
        assert!(r["area_relative_error"].as_f64().unwrap().abs() < 1e-3);
        assert_honest(&run, &r, deg);
    }
}

#[test]
fn very_large_and_very_small_but_representable_plates_mesh() {
    for radius in ["1e6", "1e-10"] {
        let plate = format!("circle:{radius}");
        let (run, r) = mesh_json(&["--plate", &plate]);
        assert!(
            r["area_relative_error"].as_f64().unwrap().abs() < 1e-3,
            "{plate}"
        );
        assert!(
            r["min_angle_deg"].as_f64().unwrap() >= 30.0 - 1e-9,
            "{plate}"
        );
        assert_honest(&run, &r, 30.0);
    }
}

#[test]
fn size_larger_than_the_plate_gives_a_coarse_honest_mesh() {
    let (run, r) = mesh_json(&["--plate", "circle:10", "--size", "30"]);
    assert!(r["nodes"].as_u64().unwrap() >= 8);
    assert_eq!(r["negative_edge_weights"], 0);
    // A coarse polygon loses area, and the report says so against the exact disk.
    assert!(r["area_relative_error"].as_f64().unwrap() < -0.01);
    assert_honest(&run, &r, 30.0);
}

#[test]
fn negative_png_pixels_is_refused() {
    refused(&["--plate", "circle:10", "--png-pixels", "-5"], "'-5'");
}

// ---------------------------------------------------------------- outline files

#[test]
fn outline_line_endings_tabs_and_blank_runs_are_read() {
    let square_with_well = [
        "0 0\r\n10 0\r\n10 10\r\n0 10\r\n\r\n4 4\r\n6 4\r\n6 6\r\n4 6\r\n",
        "0\t0  \n10\t0\t\n 10 10 \n0 10\n\n\n\n  \t\n4 4\n6 4\n6 6\n4 6\n\n\n",
        "0,0\n10, 0\n10 ,10\n0 10 # corner\n   \n4 4\n6 4\n6 6\n4 6",
    ];
    for text in square_with_well {
        let dir = tempfile::tempdir().unwrap();
        write(dir.path(), "o.txt", text);
        let (run, r) = mesh_json_in(&["--outline", "o.txt"], dir.path());
        assert_eq!(r["boundary_loops"], 2, "{text:?}");
        assert!((r["exact_area"].as_f64().unwrap() - 96.0).abs() < 1e-9);
        assert!((r["area"].as_f64().unwrap() - 96.0).abs() < 1e-9);
        assert_honest(&run, &r, 30.0);
    }
}

#[test]
fn outline_duplicates_collinear_points_and_repeated_closing_point() {
    for text in [
        "0 0\n10 0\n10 0\n10 10\n0 10\n0 10\n0 0\n",
        "0 0\n5 0\n10 0\n10 10\n0 10\n",
        "0 0\n10 0\n10 10\n0 10\n0 0\n0 0\n",
    ] {
        let dir = tempfile::tempdir().unwrap();
        write(dir.path(), "o.txt", text);
        let (run, r) = mesh_json_in(&["--outline", "o.txt"], dir.path());
        assert_eq!(r["boundary_loops"], 1);
        assert!(
            (r["area"].as_f64().unwrap() - 100.0).abs() < 1e-9,
            "{text:?}"
        );
        assert!((r["min_corner_angle_deg"].as_f64().unwrap() - 90.0).abs() < 1e-9);
        assert!(
            r["min_angle_deg"].as_f64().unwrap() >= 30.0 - 1e-9,
            "{text:?}"
        );
        assert_honest(&run, &r, 30.0);
    }
}

#[test]
fn outline_without_points_or_with_bad_numbers_is_refused_with_line() {
    refused_with(
        &[("c.txt", "# a\n# b\n\n# c\n")],
        &["--outline", "c.txt"],
        2,
        "c.txt:1: the file holds no points",
    );
    refused_with(
        &[("e.txt", "")],
        &["--outline", "e.txt"],
        2,
        "e.txt:1: the file holds no points",
    );
    refused_with(
        &[("n.txt", "0 0\nNaN 0\n10 10\n")],
        &["--outline", "n.txt"],
        2,
        "n.txt:2: 'NaN' is not a finite number",
    );
    refused_with(
        &[("o.txt", "0 0\n1e400 0\n10 10\n")],
        &["--outline", "o.txt"],
        2,
        "o.txt:2: '1e400' is not a finite number",
    );
    refused_with(
        &[("d.txt", "0 0\n10 0\n0 0\n")],
        &["--outline", "d.txt"],
        2,
        "d.txt:1: loop starting here",
    );
}

#[test]
fn coincident_and_touching_loops_are_refused() {
    let sq = "0 0\n10 0\n10 10\n0 10\n";
    refused_with(
        &[(
            "o.txt",
            &format!("{sq}\n2 2\n4 2\n4 4\n2 4\n\n2 2\n4 2\n4 4\n2 4\n"),
        )],
        &["--outline", "o.txt"],
        2,
        "hole 1 and hole 2 cross near",
    );
    // A hole whose corner sits on the outer outline.
    refused_with(
        &[("o.txt", &format!("{sq}\n0 5\n2 4\n2 6\n"))],
        &["--outline", "o.txt"],
        2,
        "the outer outline and hole 1 cross near",
    );
    // Two wells sharing an edge.
    refused_with(
        &[(
            "o.txt",
            &format!("{sq}\n2 2\n4 2\n4 4\n2 4\n\n4 2\n6 2\n6 4\n4 4\n"),
        )],
        &["--outline", "o.txt"],
        2,
        "hole 1 and hole 2 cross near",
    );
    refused_with(
        &[("o.txt", &format!("{sq}\n{sq}"))],
        &["--outline", "o.txt"],
        2,
        "the outer outline and hole 1 cross near",
    );
    refused(
        &[
            "--plate",
            "circle:10",
            "--hole",
            "circle:2@3,0",
            "--hole",
            "circle:2@3,0",
        ],
        "hole 1 and hole 2 cross near",
    );
    refused(
        &["--plate", "circle:10", "--hole", "circle:10"],
        "the outer outline and hole 1 cross near",
    );
}

#[test]
fn nearly_touching_holes_mesh_with_an_honest_report() {
    let dir = tempfile::tempdir().unwrap();
    write(
        dir.path(),
        "o.txt",
        "0 0\n10 0\n10 10\n0 10\n\n2 2\n4 2\n4 4\n2 4\n\n4.000001 2\n6 2\n6 4\n4.000001 4\n",
    );
    let (run, r) = mesh_json_in(&["--outline", "o.txt"], dir.path());
    assert_eq!(r["boundary_loops"], 3);
    assert!((r["area"].as_f64().unwrap() - 92.000002).abs() < 1e-9);
    assert_honest(&run, &r, 30.0);
    // A well a micrometre from the rim.
    let (run, r) = mesh_json(&["--plate", "circle:10", "--hole", "circle:2@7.999999,0"]);
    assert_eq!(r["boundary_loops"], 2);
    assert_honest(&run, &r, 30.0);
}

#[test]
fn sharp_input_corners_end_with_an_honest_report() {
    for deg in [5.0, 1.0, 0.1] {
        let dir = tempfile::tempdir().unwrap();
        write(dir.path(), "w.txt", &wedge_outline(deg));
        let (run, r) = mesh_json_in(&["--outline", "w.txt"], dir.path());
        let corner = r["min_corner_angle_deg"].as_f64().unwrap();
        assert!((corner - deg).abs() < 1e-9, "{deg}: {corner}");
        // Exact triangle area ½·20·20·sin(θ).
        let exact = 200.0 * deg.to_radians().sin();
        assert!((r["area"].as_f64().unwrap() - exact).abs() < 1e-9 * exact.max(1.0));
        assert_honest(&run, &r, 30.0);
    }
}

#[test]
fn a_hundred_thousand_traced_points_finish_with_an_honest_report() {
    let dir = tempfile::tempdir().unwrap();
    write(dir.path(), "c.txt", &traced_circle(10.0, 100_000));
    let (run, r) = mesh_json_in(&["--outline", "c.txt"], dir.path());
    let area = r["area"].as_f64().unwrap();
    assert!((area - std::f64::consts::PI * 100.0).abs() < 1e-6, "{area}");
    assert!(r["nodes"].as_u64().unwrap() >= 100_000);
    assert_honest(&run, &r, 30.0);
}

// ---------------------------------------------------------------- spots

#[test]
fn spots_in_holes_or_outside_are_refused_and_on_near_rim_accepted() {
    refused(
        &[
            "--plate",
            "circle:10",
            "--hole",
            "circle:2",
            "--spot",
            "0,0",
        ],
        "refinement spot 1 at (0, 0) lies outside the plate",
    );
    refused(
        &["--plate", "circle:10", "--spot", "30,30"],
        "refinement spot 1 at (30, 30) lies outside the plate",
    );
    let (run, r) = mesh_json(&["--plate", "circle:10", "--spot", "9.9999,0"]);
    assert_honest(&run, &r, 30.0);
    assert!(r["min_edge_length"].as_f64().unwrap() < 0.4 / 5.0 * 1.01);
}

#[test]
fn tiny_spot_with_grading_meshes() {
    let (run, r) = mesh_json(&["--plate", "circle:10", "--spot", "0,0,1e-6"]);
    assert!(r["min_edge_length"].as_f64().unwrap() < 1e-5);
    assert!(r["min_angle_deg"].as_f64().unwrap() >= 30.0 - 1e-9);
    assert_honest(&run, &r, 30.0);
}

// ---------------------------------------------------------------- cuts

#[test]
fn wedge_with_apex_outside_the_plate() {
    // Pointing away: nothing is removed.
    let (_, r) = mesh_json(&["--plate", "circle:10", "--wedge", "50,0,-10,10"]);
    let (_, uncut) = mesh_json(&["--plate", "circle:10"]);
    let (a, b) = (r["area"].as_f64().unwrap(), uncut["area"].as_f64().unwrap());
    assert!((a - b).abs() < 1e-6 * b, "{a} vs {b}");
    // Pointing across: a band through the whole dish leaves two pieces.
    refused(
        &["--plate", "circle:10", "--wedge", "50,0,170,190"],
        "cut 1 splits the plate into 2 separate pieces",
    );
}

#[test]
fn many_cuts_make_the_exact_regular_polygon() {
    let n = 50usize;
    let trims: Vec<String> = (0..n)
        .map(|k| {
            let a = 2.0 * std::f64::consts::PI * k as f64 / n as f64;
            format!("{},{},8", a.cos(), a.sin())
        })
        .collect();
    let mut args = vec!["--plate", "circle:10"];
    for t in &trims {
        args.extend(["--trim", t.as_str()]);
    }
    let (run, r) = mesh_json(&args);
    // Regular n-gon of inradius ρ: area n ρ² tan(π/n) (exact formula).
    let exact = n as f64 * 64.0 * (std::f64::consts::PI / n as f64).tan();
    let area = r["area"].as_f64().unwrap();
    assert!((area - exact).abs() < 1e-6 * exact, "{area} vs {exact}");
    assert!(r["min_angle_deg"].as_f64().unwrap() >= 30.0 - 1e-9);
    assert_honest(&run, &r, 30.0);
}

#[test]
fn trims_touching_or_missing_the_plate() {
    let (_, r) = mesh_json(&["--plate", "circle:10", "--trim", "1,0,10"]);
    assert!((r["area"].as_f64().unwrap() - 314.0754).abs() < 1e-3);
    refused(
        &["--plate", "circle:10", "--trim", "1,0,-10"],
        "cut 1 removes the whole plate",
    );
    // A trim through a well turns it into a notch of the outline.
    let (run, r) = mesh_json(&[
        "--plate",
        "circle:10",
        "--hole",
        "circle:1@5,0",
        "--trim",
        "1,0,5",
    ]);
    assert_eq!(r["boundary_loops"], 1);
    assert_honest(&run, &r, 30.0);
}

#[test]
fn a_hair_thin_wedge_sliver_meshes_with_an_honest_report() {
    let (run, r) = mesh_json(&["--plate", "circle:10", "--wedge", "0,0,0,359.9999"]);
    // Sector of 1e-4 degrees: area π r² · 1e-4/360.
    let exact = std::f64::consts::PI * 100.0 * 1e-4 / 360.0;
    let area = r["area"].as_f64().unwrap();
    assert!((area - exact).abs() < 0.01 * exact, "{area} vs {exact}");
    assert_honest(&run, &r, 30.0);
}

// ---------------------------------------------------------------- outputs

#[test]
fn output_path_that_is_a_directory_is_a_failure_with_nothing_written() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::create_dir(dir.path().join("d.vtu")).unwrap();
    std::fs::create_dir(dir.path().join("d.png")).unwrap();
    let run = agarium(
        &[
            "mesh",
            "--plate",
            "circle:10",
            "-o",
            "d.vtu",
            "--png",
            "new.png",
        ],
        dir.path(),
    );
    assert_eq!(run.code, Some(1), "{}", run.stderr);
    assert!(run.stderr.contains("d.vtu"), "{}", run.stderr);
    let run = agarium(
        &["mesh", "--plate", "circle:10", "--png", "d.png"],
        dir.path(),
    );
    assert_eq!(run.code, Some(1), "{}", run.stderr);
    assert!(run.stderr.contains("d.png"), "{}", run.stderr);
    let names: Vec<String> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert_eq!(names.len(), 2, "stray files: {names:?}");
    for d in ["d.vtu", "d.png"] {
        assert_eq!(std::fs::read_dir(dir.path().join(d)).unwrap().count(), 0);
    }
}

// ================================================================ defects

#[test]
fn spot_at_the_centre_of_a_plate_is_accepted() {
    for args in [
        vec!["--plate", "polygon:0,0;10,0;10,10;0,10", "--spot", "5,5"],
        vec!["--plate", "rect:10,10", "--size", "0.1", "--spot", "0,0"],
        vec!["--plate", "circle:10", "--size", "0.1", "--spot", "0,0"],
    ] {
        let mut all = vec!["mesh"];
        all.extend(&args);
        all.push("--json");
        let dir = tempfile::tempdir().unwrap();
        let run = agarium(&all, dir.path());
        assert_eq!(run.code, Some(0), "{args:?}: {}", run.stderr);
    }
}

#[test]
fn spot_left_of_a_square_plate_is_refused() {
    refused(
        &[
            "--plate",
            "polygon:0,0;10,0;10,10;0,10",
            "--spot",
            "-3,5,0.01",
        ],
        "refinement spot 1 at (-3, 5) lies outside the plate",
    );
    refused(
        &["--plate", "circle:10", "--size", "0.1", "--spot", "-11,0"],
        "refinement spot 1 at (-11, 0) lies outside the plate",
    );
}

#[test]
fn tiny_size_on_a_disk_is_refused_by_the_budget() {
    refused(&["--plate", "circle:10", "--size", "1e-300"], "node budget");
    refused(
        &[
            "--plate",
            "circle:10",
            "--grading",
            "0",
            "--spot",
            "0.5,0.5,1e-300",
        ],
        "node budget",
    );
}

#[test]
fn tiny_size_on_a_rectangle_is_refused_by_the_budget() {
    // Refusal takes milliseconds; the defect allocates about half a gigabyte per second, so the
    // anti-hang deadline is short here.
    refused_within(
        &[],
        &["--plate", "rect:10,10", "--size", "1e-300"],
        2,
        "node budget",
        Duration::from_secs(5),
    );
}

#[test]
fn coordinates_beyond_the_triangulator_range_are_input_errors() {
    for args in [
        vec!["--plate", "circle:1e150"],
        vec!["--plate", "circle:1e-150"],
        vec!["--plate", "circle:10", "--spot", "0,0,1e-300"],
    ] {
        let dir = tempfile::tempdir().unwrap();
        let mut all = vec!["mesh"];
        all.extend(&args);
        let run = agarium(&all, dir.path());
        assert_eq!(run.code, Some(2), "{args:?}: {}", run.stderr);
        assert!(
            !run.stderr.contains("triangulation failed"),
            "{}",
            run.stderr
        );
    }
    refused_with(
        &[("h.txt", "0 0\n1e308 0\n1e308 1e308\n0 1e308\n")],
        &["--outline", "h.txt"],
        2,
        "is outside the range the triangulation can handle",
    );
}

#[test]
fn overflowing_plate_is_blamed_on_the_plate_not_on_size() {
    let dir = tempfile::tempdir().unwrap();
    let run = agarium(&["mesh", "--plate", "circle:1e308"], dir.path());
    assert_eq!(run.code, Some(2), "{}", run.stderr);
    assert!(!run.stderr.contains("--size"), "{}", run.stderr);
    assert!(run.stderr.contains("plate"), "{}", run.stderr);
}

#[test]
fn outline_with_a_byte_order_mark_is_read() {
    let dir = tempfile::tempdir().unwrap();
    write(dir.path(), "bom.txt", "\u{feff}0 0\n10 0\n10 10\n0 10\n");
    let (_, r) = mesh_json_in(&["--outline", "bom.txt"], dir.path());
    assert!((r["area"].as_f64().unwrap() - 100.0).abs() < 1e-9);
}

#[test]
fn trims_leaving_a_strip_keep_its_area() {
    let (_, r) = mesh_json(&[
        "--plate",
        "circle:10",
        "--trim",
        "1,0,1",
        "--trim",
        "-1,0,-0.999",
    ]);
    // Strip 0.999 ≤ x ≤ 1 of the disk of radius 10: width × chord at x ≈ 0.9995.
    let exact = 0.001 * 2.0 * (100.0f64 - 0.9995 * 0.9995).sqrt();
    let area = r["area"].as_f64().unwrap();
    assert!((area - exact).abs() < 0.05 * exact, "{area} vs {exact}");
}

#[test]
fn trims_leaving_nothing_are_refused() {
    refused(
        &[
            "--plate",
            "circle:10",
            "--trim",
            "1,0,1",
            "--trim",
            "-1,0,-1",
        ],
        "removes the whole plate",
    );
}

#[test]
fn oversized_size_still_meets_the_angle_bound() {
    let (_, r) = mesh_json(&["--plate", "circle:10", "--size", "1000"]);
    assert!(
        r["min_angle_deg"].as_f64().unwrap() >= 30.0 - 1e-9,
        "{}",
        r["min_angle_deg"]
    );
}

#[test]
fn finely_traced_smooth_outline_meets_the_angle_bound() {
    let dir = tempfile::tempdir().unwrap();
    write(dir.path(), "c.txt", &traced_circle(45.0, 20_000));
    let (_, r) = mesh_json_in(&["--outline", "c.txt"], dir.path());
    assert!(r["min_corner_angle_deg"].as_f64().unwrap() > 179.0);
    assert!(
        r["min_angle_deg"].as_f64().unwrap() >= 30.0 - 1e-9,
        "{}",
        r["min_angle_deg"]
    );
}

#[test]
fn zero_grading_spot_sets_the_size_everywhere_or_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let run = agarium(
        &[
            "mesh",
            "--plate",
            "circle:10",
            "--grading",
            "0",
            "--spot",
            "0,0.001,0.1",
            "--json",
        ],
        dir.path(),
    );
    if run.code == Some(2) {
        assert!(run.stderr.contains("grading"), "{}", run.stderr);
        return;
    }
    // h(x) = min(far, 0.1 + 0·|x − c|) = 0.1 everywhere: the mean edge must be near 0.1.
    let mean = run.f("mean_edge_length");
    assert!(
        mean < 0.13,
        "mean edge {mean} for a target of 0.1 everywhere"
    );
}

#[test]
fn zero_png_pixels_is_refused() {
    refused(
        &["--plate", "circle:10", "--png-pixels", "0"],
        "--png-pixels",
    );
}

#[test]
fn far_offset_plate_gets_a_precision_message() {
    let dir = tempfile::tempdir().unwrap();
    let run = agarium(&["mesh", "--plate", "circle:10@1e17,0"], dir.path());
    assert_eq!(run.code, Some(2), "{}", run.stderr);
    assert!(!run.stderr.contains("intersects itself"), "{}", run.stderr);
}

#[cfg(unix)]
#[test]
fn output_files_get_ordinary_permissions() {
    use std::os::unix::fs::PermissionsExt;
    let dir = tempfile::tempdir().unwrap();
    let run = agarium(
        &[
            "mesh",
            "--plate",
            "circle:10",
            "-o",
            "m.vtu",
            "--png",
            "m.png",
        ],
        dir.path(),
    );
    assert_eq!(run.code, Some(0), "{}", run.stderr);
    let reference = write(dir.path(), "ref.txt", "x");
    let mode = |p: &Path| std::fs::metadata(p).unwrap().permissions().mode() & 0o777;
    for f in ["m.vtu", "m.png"] {
        assert_eq!(
            mode(&dir.path().join(f)),
            mode(&reference),
            "{f} has other permissions than an ordinary new file"
        );
    }
}
