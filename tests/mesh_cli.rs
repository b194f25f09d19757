//! End-to-end tests of `agarium mesh`: good plates and every kind of bad input.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn agarium(args: &[&str], dir: &Path) -> Output {
    Command::new(env!("CARGO_BIN_EXE_agarium"))
        .args(args)
        .current_dir(dir)
        .output()
        .expect("run agarium")
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

fn json_report(o: &Output) -> serde_json::Value {
    assert!(o.status.success(), "failed: {}", stderr(o));
    serde_json::from_slice(&o.stdout).expect("JSON report")
}

fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

#[test]
fn disk_with_holes_writes_vtu_png_and_report() {
    let dir = tempfile::tempdir().unwrap();
    let out = agarium(
        &[
            "mesh",
            "--plate",
            "circle:45",
            "--hole",
            "circle:5@20,0",
            "--hole",
            "rect:8,4@-15,-15",
            "--size",
            "2",
            "--spot",
            "0,10,0.3",
            "-o",
            "plate.vtu",
            "--png",
            "plate.png",
            "--json",
        ],
        dir.path(),
    );
    let r = json_report(&out);
    assert_eq!(r["boundary_loops"], 3);
    assert_eq!(r["negative_edge_weights"], 0);
    assert!(r["min_angle_deg"].as_f64().unwrap() >= 30.0 - 1e-9);
    // Exact area π·45² − π·5² − 8·4.
    let exact = std::f64::consts::PI * (45.0f64 * 45.0 - 25.0) - 32.0;
    assert!((r["exact_area"].as_f64().unwrap() - exact).abs() < 1e-9);
    assert!(r["area_relative_error"].as_f64().unwrap().abs() < 1e-3);
    let png = std::fs::read(dir.path().join("plate.png")).unwrap();
    assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n");
    let vtu = std::fs::read_to_string(dir.path().join("plate.vtu")).unwrap();
    assert!(vtu.contains("UnstructuredGrid") && vtu.contains("node_area"));
    // Only the two requested files: no temporary left behind.
    assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 2);
}

#[test]
fn table_report_by_default() {
    let dir = tempfile::tempdir().unwrap();
    let out = agarium(
        &[
            "mesh",
            "--plate",
            "ellipse:30,20",
            "--size",
            "3",
            "--unit",
            "cm",
        ],
        dir.path(),
    );
    assert!(out.status.success(), "{}", stderr(&out));
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(
        text.contains("nodes")
            && text.contains("area [cm²]")
            && text.contains("negative edge weights")
    );
}

#[test]
fn every_shape_and_cut_meshes() {
    let dir = tempfile::tempdir().unwrap();
    for args in [
        vec!["--plate", "rect:40,25"],
        vec!["--plate", "annulus:30,8@2,3"],
        vec!["--plate", "polygon:0,0;40,0;45,20;20,35;-5,20"],
        vec!["--plate", "circle:30", "--trim", "1,0,20"],
        vec!["--plate", "circle:30", "--wedge", "0,0,-20,20"],
        vec![
            "--plate",
            "circle:30",
            "--trim",
            "0,-1,25",
            "--wedge",
            "0,0,80,100",
            "--hole",
            "circle:3@-10,0",
        ],
    ] {
        let mut all = vec!["mesh"];
        all.extend(&args);
        all.extend(["--size", "2", "--json"]);
        let r = json_report(&agarium(&all, dir.path()));
        assert_eq!(r["negative_edge_weights"], 0, "{args:?}");
        assert!(r["nodes"].as_u64().unwrap() > 50, "{args:?}");
    }
}

#[test]
fn outline_file_with_a_hole() {
    let dir = tempfile::tempdir().unwrap();
    write(
        dir.path(),
        "kidney.txt",
        "# outer\n0 0\n30 0\n34 12\n22 20\n15 12\n8 20\n-4 12\n\n# a well\n5 4\n9 4\n9 8\n5 8\n",
    );
    let r = json_report(&agarium(
        &["mesh", "--outline", "kidney.txt", "--size", "1", "--json"],
        dir.path(),
    ));
    assert_eq!(r["boundary_loops"], 2);
    // Polygon areas by the shoelace formula, computed independently of the tool: 560 − 16.
    assert!(
        (r["exact_area"].as_f64().unwrap() - 544.0).abs() < 1e-9,
        "{}",
        r["exact_area"]
    );
    assert!((r["area"].as_f64().unwrap() - 544.0).abs() < 1e-9);
}

/// Runs a failing mesh command, checks exit code 2, the message, and that no output appeared
/// and an existing file was kept intact.
fn fails(args: &[&str], expected: &str) {
    let dir = tempfile::tempdir().unwrap();
    write(dir.path(), "bowtie.txt", "0 0\n10 0\n10 10\n5 -5\n0 10\n");
    // A bow tie whose two lobes cancel: zero signed area.
    write(dir.path(), "balanced.txt", "0 0\n10 0\n0 10\n10 10\n");
    write(dir.path(), "two.txt", "0 0\n10 0\n");
    write(
        dir.path(),
        "badline.txt",
        "0 0\n10 0\n# fine\n10 ten\n0 10\n",
    );
    write(dir.path(), "keep.vtu", "precious");
    let mut all = vec!["mesh"];
    all.extend(args);
    all.extend(["-o", "keep.vtu", "--png", "new.png"]);
    let out = agarium(&all, dir.path());
    assert_eq!(
        out.status.code(),
        Some(2),
        "args {args:?}: {}",
        stderr(&out)
    );
    let msg = stderr(&out);
    assert!(
        msg.contains(expected),
        "args {args:?}: expected '{expected}' in: {msg}"
    );
    assert!(!msg.contains("panicked"), "{msg}");
    assert_eq!(
        std::fs::read_to_string(dir.path().join("keep.vtu")).unwrap(),
        "precious"
    );
    assert!(!dir.path().join("new.png").exists());
    assert_eq!(
        std::fs::read_dir(dir.path()).unwrap().count(),
        5,
        "stray files after {args:?}"
    );
}

#[test]
fn bad_geometry_is_refused_with_where() {
    fails(
        &["--outline", "balanced.txt"],
        "crosses itself near (5.000000, 5.000000)",
    );
    fails(
        &["--outline", "bowtie.txt"],
        "the outer outline intersects itself near",
    );
    fails(
        &["--plate", "circle:10", "--hole", "circle:2@30,0"],
        "hole 1 lies outside the plate",
    );
    fails(
        &["--plate", "circle:10", "--hole", "circle:2@9,0"],
        "the outer outline and hole 1 cross near",
    );
    fails(
        &[
            "--plate",
            "circle:10",
            "--hole",
            "circle:2@0,0",
            "--hole",
            "circle:2@3,0",
        ],
        "hole 1 and hole 2 cross near",
    );
    fails(
        &[
            "--plate",
            "circle:10",
            "--hole",
            "circle:4@0,0",
            "--hole",
            "circle:1@1,0",
        ],
        "hole 2 lies inside hole 1",
    );
    fails(
        &["--plate", "polygon:0,0;1,0"],
        "at least three distinct points",
    );
    fails(
        &["--outline", "two.txt"],
        "two.txt:1: loop starting here: outer loop: a polygon needs at least three distinct points",
    );
    fails(
        &["--outline", "badline.txt"],
        "badline.txt:4: 'ten' is not a number",
    );
    fails(
        &["--outline", "missing.txt"],
        "missing.txt: cannot read outline file",
    );
    fails(
        &["--plate", "circle:10", "--trim", "1,0,-20"],
        "cut 1 removes the whole plate",
    );
    fails(
        &[
            "--plate",
            "polygon:0,0;30,0;30,20;20,20;20,10;10,10;10,20;0,20",
            "--trim",
            "0,-1,-15",
        ],
        "cut 1 splits the plate into 2",
    );
}

#[test]
fn bad_numbers_are_refused() {
    fails(&["--plate", "circle:0"], "radius must be a positive number");
    fails(
        &["--plate", "circle:-3"],
        "radius must be a positive number",
    );
    fails(
        &["--plate", "rect:10,0"],
        "height must be a positive number",
    );
    fails(
        &["--plate", "annulus:5,6"],
        "inner radius 6 must be smaller",
    );
    fails(
        &["--plate", "circle:10", "--size", "0"],
        "--size must be a positive number",
    );
    fails(
        &["--plate", "circle:10", "--size", "-1"],
        "--size must be a positive number",
    );
    fails(
        &["--plate", "circle:10", "--largest-triangle", "-1"],
        "--largest-triangle must be a positive number",
    );
    fails(
        &["--plate", "circle:10", "--smallest-angle", "40"],
        "minimum angle must be above 0 and at most 34",
    );
    fails(
        &["--plate", "circle:10", "--spot", "0,0,0"],
        "refinement spot 1: edge length must be a positive number",
    );
    fails(
        &["--plate", "circle:10", "--spot", "50,0"],
        "refinement spot 1 at (50, 0) lies outside the plate",
    );
    fails(
        &["--plate", "circle:10", "--spot", "1"],
        "--spot '1': expected X,Y or X,Y,H",
    );
    fails(&["--plate", "blob:3"], "unknown shape 'blob'");
    fails(
        &["--plate", "circle:10", "--wedge", "0,0,10,10"],
        "wedge opening must be strictly between 0 and 360",
    );
    fails(
        &["--plate", "circle:10", "--trim", "0,0,1"],
        "half-plane normal must not be zero",
    );
}

#[test]
fn node_budget_is_enforced() {
    fails(
        &[
            "--plate",
            "circle:10",
            "--size",
            "0.01",
            "--max-nodes",
            "50000",
        ],
        "node budget is 50000",
    );
    // Even the boundary alone is over budget: refused before any allocation.
    fails(
        &[
            "--plate",
            "circle:10",
            "--size",
            "0.01",
            "--max-nodes",
            "5000",
        ],
        "the plate's boundary alone needs about 6.283e3 nodes",
    );
    // Close to the estimate: refinement itself stops at the budget and says so.
    fails(
        &[
            "--plate",
            "circle:10",
            "--size",
            "0.2",
            "--max-nodes",
            "8000",
        ],
        "refinement reached the node budget of 8000",
    );
}

#[test]
fn bad_output_names_are_refused_before_work() {
    let dir = tempfile::tempdir().unwrap();
    let out = agarium(
        &["mesh", "--plate", "circle:10", "-o", "mesh.txt"],
        dir.path(),
    );
    assert_eq!(out.status.code(), Some(2));
    assert!(stderr(&out).contains("must end in .vtu"));
    assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0);
    // Missing directories are created.
    let out = agarium(
        &["mesh", "--plate", "circle:10", "-o", "new/dir/mesh.vtu"],
        dir.path(),
    );
    assert!(out.status.success(), "{}", stderr(&out));
    assert!(dir.path().join("new/dir/mesh.vtu").exists());
    // A directory that cannot exist (its parent is a file) is a failure, not an input error.
    std::fs::write(dir.path().join("afile"), "x").unwrap();
    let out = agarium(
        &["mesh", "--plate", "circle:10", "-o", "afile/mesh.vtu"],
        dir.path(),
    );
    assert_eq!(out.status.code(), Some(1), "{}", stderr(&out));
    assert!(stderr(&out).contains("afile"));
}

/// The mesh options have our own names; the earlier spellings still work for a release and
/// say what they are called now.
#[test]
fn earlier_mesh_option_names_work_with_a_warning() {
    let dir = tempfile::tempdir().unwrap();
    let new = agarium(
        &[
            "mesh",
            "--plate",
            "circle:5",
            "--largest-triangle",
            "0.5",
            "--smallest-angle",
            "28",
            "--json",
        ],
        dir.path(),
    );
    assert!(!stderr(&new).contains("warning"), "{}", stderr(&new));
    let old = agarium(
        &[
            "mesh",
            "--plate",
            "circle:5",
            "--max-area",
            "0.5",
            "--min-angle",
            "28",
            "--json",
        ],
        dir.path(),
    );
    let text = stderr(&old);
    assert!(
        text.contains("--max-area is now called --largest-triangle"),
        "{text}"
    );
    assert!(
        text.contains("--min-angle is now called --smallest-angle"),
        "{text}"
    );
    let (a, b) = (json_report(&new), json_report(&old));
    assert!(a["nodes"].as_u64().unwrap() > 0);
    assert_eq!(a["nodes"], b["nodes"]);
    assert!(b["min_angle_deg"].as_f64().unwrap() >= 28.0 - 1e-9);
}
