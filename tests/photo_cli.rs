//! End-to-end tests of plates traced from a photograph: a synthetic picture of a plate with two
//! wells is meshed, and bad pictures exit with 2 and a message.

mod common;

use std::path::Path;
use std::process::Output;

use common::agarium;

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

/// `agarium ARGS` in `dir` exits 2 with `expected` in its message.
fn refused(dir: &Path, args: &[&str], expected: &str) {
    let o = agarium(args, dir);
    assert_eq!(o.status.code(), Some(2), "{args:?}: {}", stderr(&o));
    assert!(stderr(&o).contains(expected), "{args:?}: {}", stderr(&o));
}

/// A grey PNG of a bright disc (radius `r` pixels, centred) with two dark wells.
fn plate_png(path: &Path, n: u32, r: f64) {
    let c = n as f64 / 2.0;
    let mut px = vec![15u8; (n * n) as usize];
    for y in 0..n {
        for x in 0..n {
            let (fx, fy) = (x as f64 + 0.5, y as f64 + 0.5);
            let in_disc = (fx - c).hypot(fy - c) < r;
            let in_well = (fx - c + 0.4 * r).hypot(fy - c) < 0.2 * r
                || (fx - c - 0.4 * r).hypot(fy - c) < 0.15 * r;
            if in_disc && !in_well {
                px[(y * n + x) as usize] = 230;
            }
        }
    }
    let file = std::fs::File::create(path).unwrap();
    let mut enc = png::Encoder::new(std::io::BufWriter::new(file), n, n);
    enc.set_color(png::ColorType::Grayscale);
    enc.set_depth(png::BitDepth::Eight);
    enc.write_header().unwrap().write_image_data(&px).unwrap();
}

#[test]
fn photo_of_a_plate_with_two_wells_meshes_with_three_loops() {
    let dir = tempfile::tempdir().unwrap();
    plate_png(&dir.path().join("plate.png"), 200, 80.0);
    let out = agarium(
        &[
            "mesh",
            "--photo",
            "plate.png",
            "--photo-width",
            "90",
            "--size",
            "3",
            "-o",
            "plate.vtu",
            "--json",
        ],
        dir.path(),
    );
    assert!(out.status.success(), "failed: {}", stderr(&out));
    let r: serde_json::Value = serde_json::from_slice(&out.stdout).expect("JSON report");
    assert_eq!(r["boundary_loops"], 3);
    // Width 90 from 160 px: area of the disc minus wells, scaled.
    let s = 90.0 / 160.0;
    let exact =
        std::f64::consts::PI * (80.0f64.powi(2) - 16.0f64.powi(2) - 12.0f64.powi(2)) * s * s;
    let area = r["area"].as_f64().expect("area in the report");
    assert!((area - exact).abs() / exact < 0.01, "{area} vs {exact}");
    let overlay = std::fs::read(dir.path().join("traced-plate.png")).unwrap();
    assert_eq!(&overlay[..8], b"\x89PNG\r\n\x1a\n");
}

#[test]
fn bad_pictures_exit_2_with_a_message() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("junk.png"), "not a picture").unwrap();
    refused(
        dir.path(),
        &["mesh", "--photo", "junk.png", "--photo-scale", "0.1"],
        "junk.png: cannot read picture",
    );
    plate_png(&dir.path().join("plate.png"), 100, 40.0);
    refused(
        dir.path(),
        &[
            "mesh",
            "--photo",
            "plate.png",
            "--photo-scale",
            "0.1",
            "--photo-threshold",
            "250",
        ],
        "leaves no plate pixels",
    );
    refused(
        dir.path(),
        &[
            "mesh",
            "--photo",
            "plate.png",
            "--photo-scale",
            "0.1",
            "--photo-invert",
        ],
        "touches the picture's border",
    );
    // No closed region: a uniformly bright picture is all plate, up to the border.
    let file = std::fs::File::create(dir.path().join("blank.png")).unwrap();
    let mut enc = png::Encoder::new(std::io::BufWriter::new(file), 30, 30);
    enc.set_color(png::ColorType::Grayscale);
    enc.set_depth(png::BitDepth::Eight);
    enc.write_header()
        .unwrap()
        .write_image_data(&[200u8; 900])
        .unwrap();
    refused(
        dir.path(),
        &["mesh", "--photo", "blank.png", "--photo-scale", "0.1"],
        "blank.png: the plate region touches the picture's border",
    );
    let o = agarium(&["mesh", "--photo", "plate.png"], dir.path());
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("needs a scale"), "{}", stderr(&o));
}
