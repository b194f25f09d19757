//! End-to-end tests of plates from outline files (SVG drawings, GeoJSON polygons) and of the
//! run file's plate sources (outline files and photographs), with bad input exiting 2.

mod common;

use std::path::Path;

use common::{agarium, manifest};

fn stderr(o: &std::process::Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

fn example(name: &str) -> String {
    format!("{}/examples/plates/{name}", env!("CARGO_MANIFEST_DIR"))
}

fn mesh_json(args: &[&str], dir: &Path) -> serde_json::Value {
    let mut all = vec!["mesh"];
    all.extend_from_slice(args);
    all.push("--json");
    let o = agarium(&all, dir);
    assert!(o.status.success(), "failed: {}", stderr(&o));
    serde_json::from_slice(&o.stdout).expect("JSON report")
}

#[test]
fn the_bundled_svg_dish_meshes_with_its_named_loops_and_area() {
    let dir = tempfile::tempdir().unwrap();
    let r = mesh_json(
        &["--outline", &example("bean-dish.svg"), "--size", "1"],
        dir.path(),
    );
    assert_eq!(r["boundary_loops"], 3);
    assert_eq!(
        r["loop_names"],
        serde_json::json!(["rim", "well-a", "well-b"])
    );
    // Exact: the pentagon (10,20) (20,10) (45,8) (45,32) (20,30) has the shoelace area 650;
    // the two quarter arcs of radius 10 add 2 (25 pi - 50), the half circle of radius 12 adds
    // 72 pi, the wells of radius 3 and 4 take 25 pi: 550 + 97 pi mm^2.
    let exact = 550.0 + 97.0 * std::f64::consts::PI;
    let area = r["area"].as_f64().unwrap();
    eprintln!(
        "bean dish: area {area:.4} vs {exact:.4} ({:+.2e})",
        (area - exact) / exact
    );
    assert!((area - exact).abs() / exact < 1e-3, "{area} vs {exact}");
    // The same drawing asked in centimetres is ten times smaller.
    let r = mesh_json(
        &[
            "--outline",
            &example("bean-dish.svg"),
            "--size",
            "0.1",
            "--unit",
            "cm",
        ],
        dir.path(),
    );
    let area_cm = r["area"].as_f64().unwrap();
    assert!((area_cm * 100.0 - exact).abs() / exact < 1e-3, "{area_cm}");
}

#[test]
fn the_bundled_geojson_slab_has_the_exact_polygon_area() {
    let dir = tempfile::tempdir().unwrap();
    let r = mesh_json(
        &[
            "--outline",
            &example("notched-slab.geojson"),
            "--size",
            "1.5",
        ],
        dir.path(),
    );
    assert_eq!(r["boundary_loops"], 3);
    assert_eq!(
        r["loop_names"],
        serde_json::json!(["slab", "square-well", "slot"])
    );
    // Exact: 50 x 30 less the notch's triangle (10 x 6 / 2), the 8 x 8 well and the 14 x 4 slot.
    let area = r["area"].as_f64().unwrap();
    assert!((area - 1350.0).abs() < 1e-9, "{area}");
}

#[test]
fn bad_outline_files_exit_2_naming_the_file() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    std::fs::write(
        d.join("open.svg"),
        r#"<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 9 9"><path d="M 1 1 L 8 1 L 8 8"/></svg>"#,
    )
    .unwrap();
    std::fs::write(d.join("broken.svg"), "<svg><path d=").unwrap();
    std::fs::write(
        d.join("two.geojson"),
        r#"{"type": "MultiPolygon", "coordinates": [[[[0,0],[1,0],[1,1],[0,0]]], [[[5,5],[6,5],[6,6],[5,5]]]]}"#,
    )
    .unwrap();
    std::fs::write(
        d.join("open.geojson"),
        r#"{"type": "Polygon", "coordinates": [[[0,0],[4,0],[4,4],[0,4]]]}"#,
    )
    .unwrap();
    std::fs::write(
        d.join("line.geojson"),
        r#"{"type": "LineString", "coordinates": [[0,0],[4,0]]}"#,
    )
    .unwrap();
    for (file, says) in [
        ("open.svg", "open.svg: no closed path"),
        ("broken.svg", "broken.svg: not a readable SVG file"),
        ("missing.svg", "missing.svg: cannot read outline file"),
        (
            "two.geojson",
            "two.geojson: the MultiPolygon holds 2 polygons",
        ),
        ("open.geojson", "open.geojson: the outer ring is not closed"),
        (
            "line.geojson",
            "line.geojson: a LineString is not a polygon",
        ),
    ] {
        let o = agarium(&["mesh", "--outline", file], d);
        assert_eq!(o.status.code(), Some(2), "{file}: {}", stderr(&o));
        assert!(stderr(&o).contains(says), "{file}: {}", stderr(&o));
    }
}

/// A run file with the given `[plate]` table, a tiny end time and a coarse mesh.
fn run_file(dir: &Path, plate: &str) -> String {
    let model = concat!(env!("CARGO_MANIFEST_DIR"), "/models/colony_4species.rhai");
    let text = format!(
        "model = \"{model}\"\nend = 0.01\nevery = 0.01\nout = \"result\"\n\n[plate]\n{plate}\n\n[mesh]\nsize = 2.0\n"
    );
    let path = dir.join("plate-run.toml");
    std::fs::write(&path, text).unwrap();
    path.display().to_string()
}

#[test]
fn run_files_name_outline_files_and_photographs() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    std::fs::create_dir(d.join("plates")).unwrap();
    std::fs::copy(
        example("notched-slab.geojson"),
        d.join("plates/slab.geojson"),
    )
    .unwrap();
    // An outline file, relative to the run file's folder.
    let rf = run_file(d, "outline = \"plates/slab.geojson\"");
    let o = agarium(&["run", "--run-file", &rf], d);
    assert!(o.status.success(), "{}", stderr(&o));
    let m = manifest(&d.join("result"));
    assert_eq!(m["plate"]["outer"]["shape"], "polygon");
    assert_eq!(m["plate"]["holes"].as_array().unwrap().len(), 2);

    // A photograph: a bright disc of radius 30 px with a dark well, 9 mm across.
    let n = 80u32;
    let mut px = vec![10u8; (n * n) as usize];
    for y in 0..n {
        for x in 0..n {
            let (fx, fy) = (x as f64 + 0.5 - 40.0, y as f64 + 0.5 - 40.0);
            if fx.hypot(fy) < 30.0 && (fx - 10.0).hypot(fy) >= 6.0 {
                px[(y * n + x) as usize] = 240;
            }
        }
    }
    let file = std::fs::File::create(d.join("plates/dish.png")).unwrap();
    let mut enc = png::Encoder::new(std::io::BufWriter::new(file), n, n);
    enc.set_color(png::ColorType::Grayscale);
    enc.set_depth(png::BitDepth::Eight);
    enc.write_header().unwrap().write_image_data(&px).unwrap();
    let rf = run_file(
        d,
        "photo = \"plates/dish.png\"\nphoto_width = 9.0\nphoto_overlay = \"dish-traced.png\"",
    );
    let o = agarium(&["run", "--run-file", &rf, "-o", "photo-run"], d);
    assert!(o.status.success(), "{}", stderr(&o));
    let m = manifest(&d.join("photo-run"));
    assert_eq!(m["plate"]["holes"].as_array().unwrap().len(), 1);
    let overlay = std::fs::read(d.join("dish-traced.png")).expect("overlay beside the run file");
    assert_eq!(&overlay[..8], b"\x89PNG\r\n\x1a\n");

    // Refused with exit 2 and a message: two outer outlines, a photo setting without a
    // photograph, a misspelt setting (at its line), a photograph without a scale.
    for (plate, says) in [
        (
            "outline = \"plates/slab.geojson\"\nouter = { shape = \"circle\", radius = 4.0 }",
            "not several",
        ),
        (
            "outline = \"plates/slab.geojson\"\nphoto_width = 9.0",
            "need a photograph",
        ),
        (
            "photo = \"plates/dish.png\"\nphoto_widht = 9.0",
            "photo_widht",
        ),
        ("photo = \"plates/dish.png\"", "needs a scale"),
    ] {
        let rf = run_file(d, plate);
        let o = agarium(&["run", "--run-file", &rf, "-o", "refused"], d);
        assert_eq!(o.status.code(), Some(2), "{plate}: {}", stderr(&o));
        assert!(stderr(&o).contains(says), "{plate}: {}", stderr(&o));
        assert!(!d.join("refused").exists());
    }
}

#[test]
fn the_readme_outline_examples_work() {
    let readme =
        std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/README.md")).unwrap();
    let dir = tempfile::tempdir().unwrap();
    // The mesh commands, run from the repository with the pictures sent to the temp folder.
    let commands: Vec<&str> = readme
        .lines()
        .filter(|l| l.starts_with("agarium mesh --outline examples/plates/"))
        .collect();
    assert_eq!(commands.len(), 2, "{commands:?}");
    for line in commands {
        let mut args: Vec<String> = line.split_whitespace().skip(1).map(String::from).collect();
        if let Some(k) = args.iter().position(|a| a == "--png") {
            args[k + 1] = dir.path().join(&args[k + 1]).display().to_string();
        }
        let refs: Vec<&str> = args.iter().map(String::as_str).collect();
        let o = agarium(&refs, Path::new(env!("CARGO_MANIFEST_DIR")));
        assert!(o.status.success(), "{line}: {}", stderr(&o));
    }
    // The run file's [plate] table, with the bundled drawing at the relative path it names.
    let start = readme
        .find("```toml\n[plate]\noutline")
        .expect("plate block")
        + 8;
    let end = start + readme[start..].find("```").unwrap();
    std::fs::create_dir_all(dir.path().join("plates")).unwrap();
    std::fs::create_dir_all(dir.path().join("runs")).unwrap();
    std::fs::copy(
        example("bean-dish.svg"),
        dir.path().join("plates/bean-dish.svg"),
    )
    .unwrap();
    let model = concat!(env!("CARGO_MANIFEST_DIR"), "/models/colony_4species.rhai");
    let text = format!(
        "model = \"{model}\"\nend = 0.01\nevery = 0.01\nout = \"result\"\n\n{}\n[mesh]\nsize = 2.0\n",
        &readme[start..end]
    );
    let rf = dir.path().join("runs/plate-run.toml");
    std::fs::write(&rf, text).unwrap();
    let o = agarium(
        &["run", "--run-file", &rf.display().to_string()],
        dir.path(),
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let m = manifest(&dir.path().join("runs/result"));
    // The drawing's two wells and the table's hole.
    assert_eq!(m["plate"]["holes"].as_array().unwrap().len(), 3);
}
