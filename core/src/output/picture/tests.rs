//! Pictures checked by reading the written files back. Reference: the `image` crate's PNG
//! decoder (a general-purpose reader independent of our encoder call and layout code); the
//! expected colours are the ends of the viridis map, (68, 1, 84) and (254, 232, 37).

use super::series::{render_series_with_frame, PALETTE};
use super::*;
use crate::geometry::{PlateSpec, Shape};
use crate::mesh::{build_mesh, MeshOptions};
use canvas::WHITE;
use ndarray::Array2;

const FIRST: Rgb = [68, 1, 84];
const LAST: Rgb = [254, 232, 37];

/// A disc of radius 10 with a hole of radius 3 centred at (4, 0).
fn plate_with_hole() -> Mesh {
    let spec = PlateSpec {
        outer: Shape::Circle {
            centre: [0.0, 0.0],
            radius: 10.0,
        },
        holes: vec![Shape::Circle {
            centre: [4.0, 0.0],
            radius: 3.0,
        }],
        cuts: vec![],
    };
    let opts = MeshOptions {
        size: 0.8,
        ..MeshOptions::default()
    };
    build_mesh(&spec, &opts).expect("plate meshes").mesh
}

fn nearest_node(mesh: &Mesh, p: [f64; 2]) -> usize {
    (0..mesh.num_nodes())
        .min_by(|&i, &j| {
            let d = |k: usize| {
                let q = mesh.node(k);
                (q[0] - p[0]).hypot(q[1] - p[1])
            };
            d(i).total_cmp(&d(j))
        })
        .expect("mesh has nodes")
}

fn read(path: &Path) -> image::RgbImage {
    image::open(path).expect("written PNG decodes").to_rgb8()
}

fn at(img: &image::RgbImage, p: [f64; 2]) -> Rgb {
    img.get_pixel(p[0].floor() as u32, p[1].floor() as u32).0
}

fn close(a: Rgb, b: Rgb, tol: i32) -> bool {
    a.iter()
        .zip(b)
        .all(|(x, y)| (*x as i32 - y as i32).abs() <= tol)
}

fn is_white(c: Rgb) -> bool {
    c == WHITE
}

#[test]
fn field_snapshot_reads_back_with_its_colours_outline_and_title() {
    let mesh = plate_with_hole();
    let (a, b) = (
        nearest_node(&mesh, [-5.0, 0.0]),
        nearest_node(&mesh, [0.0, 6.0]),
    );
    let (pa, pb) = (mesh.node(a), mesh.node(b));
    // Minimum exactly at node a, maximum exactly at node b.
    let values: Vec<f64> = (0..mesh.num_nodes())
        .map(|i| {
            let p = mesh.node(i);
            (p[0] - pa[0]).hypot(p[1] - pa[1]) - (p[0] - pb[0]).hypot(p[1] - pb[1])
        })
        .collect();
    let options = SnapshotOptions {
        title: snapshot_title("u", 12.5, "h"),
        unit: "cells/mm²".into(),
        ..SnapshotOptions::default()
    };
    assert_eq!(options.title, "u   t = 12.5 h");
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("u.png");
    write_field_png(&path, &mesh, &values, &options).unwrap();
    let img = read(&path);
    let (_, layout) = render_field_with_layout(&mesh, &values, &options).unwrap();
    assert_eq!(img.width(), 900);
    assert_eq!(
        (img.width() as usize, img.height() as usize),
        (layout.width, layout.height)
    );
    // The plate is round: its drawn box is square.
    let span = 20.0 * layout.pixels_per_unit;
    assert!(img.height() as f64 > span && span > 500.0, "{span}");

    assert!(
        close(at(&img, layout.to_pixel(pa)), FIRST, 8),
        "{:?}",
        at(&img, layout.to_pixel(pa))
    );
    assert!(
        close(at(&img, layout.to_pixel(pb)), LAST, 8),
        "{:?}",
        at(&img, layout.to_pixel(pb))
    );
    // Outside the plate (a corner of its bounding box), in the hole, and the margins.
    assert!(is_white(at(&img, layout.to_pixel([-9.0, 9.0]))));
    assert!(is_white(at(&img, layout.to_pixel([9.0, -9.0]))));
    assert!(is_white(at(&img, layout.to_pixel([4.0, 0.0]))));
    assert!(is_white(at(&img, layout.to_pixel([4.0, 2.5]))));
    assert!(is_white(img.get_pixel(1, img.height() - 2).0));
    // The outline: dark pixels on the outer circle and on the hole's circle.
    let dark = |p: [f64; 2]| {
        let c = at(&img, layout.to_pixel(p));
        c.iter().all(|&x| x < 90)
    };
    assert!(dark([10.0, 0.0]) || dark([9.99, 0.0]));
    assert!(dark([1.0, 0.0]) || dark([1.01, 0.0]));
    // Inside the plate away from the outline nothing is white.
    assert!(!is_white(at(&img, layout.to_pixel([-2.0, -7.0]))));

    // The colour bar: last colour on top, first at the bottom, green rising monotonically.
    let [x0, y0, x1, y1] = layout.bar;
    let cx = ((x0 + x1) / 2.0).floor() as u32;
    let top = img.get_pixel(cx, (y0 + 3.0 * layout.em) as u32).0;
    let bottom = img.get_pixel(cx, (y1 - 3.0 * layout.em) as u32).0;
    assert!(
        close(top, LAST, 10) && close(bottom, FIRST, 10),
        "{top:?} {bottom:?}"
    );
    let (r0, r1) = ((y0 + 3.0) as u32, (y1 - 3.0) as u32);
    let greens: Vec<u8> = (r0..r1).rev().map(|r| img.get_pixel(cx, r).0[1]).collect();
    assert!(greens.windows(2).all(|w| w[1] >= w[0]), "ramp not monotone");
    assert!(greens.last().unwrap() - greens[0] > 200);

    // Title glyphs in the title band (left half), tick labels right of the bar.
    let ink = |xs: std::ops::Range<u32>, ys: std::ops::Range<u32>| {
        xs.flat_map(|x| ys.clone().map(move |y| (x, y)))
            .filter(|&(x, y)| !is_white(img.get_pixel(x, y).0))
            .count()
    };
    assert!(ink(0..450, 0..layout.title_band as u32) > 100);
    assert!(ink(x1 as u32 + 10..img.width(), y0 as u32..y1 as u32) > 100);
    // No NaN here, hence no swatch; and no temporary file left beside the picture.
    assert!(layout.nan_swatch.is_none());
    assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
}

#[test]
fn nan_is_grey_with_a_swatch_and_infinities_take_the_ends() {
    let mesh = plate_with_hole();
    let n = nearest_node(&mesh, [-4.0, -4.0]);
    let hot = nearest_node(&mesh, [-4.0, 5.0]);
    let mut values: Vec<f64> = (0..mesh.num_nodes()).map(|i| mesh.node(i)[0]).collect();
    values[n] = f64::NAN;
    values[hot] = f64::INFINITY;
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("nan.png");
    let options = SnapshotOptions::default();
    write_field_png(&path, &mesh, &values, &options).unwrap();
    let img = read(&path);
    let (_, layout) = render_field_with_layout(&mesh, &values, &options).unwrap();
    assert_eq!(at(&img, layout.to_pixel(mesh.node(n))), NAN_GREY);
    assert!(close(at(&img, layout.to_pixel(mesh.node(hot))), LAST, 8));
    let s = layout.nan_swatch.expect("a NaN field shows the swatch");
    assert_eq!(
        at(&img, [(s[0] + s[2]) / 2.0, (s[1] + s[3]) / 2.0]),
        NAN_GREY
    );
}

#[test]
fn constant_all_nan_and_huge_fields_draw() {
    let mesh = plate_with_hole();
    let n = mesh.num_nodes();
    let inside = nearest_node(&mesh, [-5.0, 0.0]);
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("f.png");
    let options = SnapshotOptions::default();
    // Constant: the middle of the map (viridis at 0.5 is a blue-green).
    write_field_png(&path, &mesh, &vec![2.5; n], &options).unwrap();
    let (_, layout) = render_field_with_layout(&mesh, &vec![2.5; n], &options).unwrap();
    let mid = ColourTable::viridis().at(0.5);
    assert!(close(
        at(&read(&path), layout.to_pixel(mesh.node(inside))),
        mid,
        2
    ));
    assert!(!close(mid, FIRST, 30) && !close(mid, LAST, 30));
    // All NaN: grey everywhere on the plate.
    write_field_png(&path, &mesh, &vec![f64::NAN; n], &options).unwrap();
    assert_eq!(
        at(&read(&path), layout.to_pixel(mesh.node(inside))),
        NAN_GREY
    );
    // Near the largest doubles, with infinities and a zero-size fixed range.
    let huge: Vec<f64> = (0..n)
        .map(|i| match i % 4 {
            0 => f64::MAX,
            1 => -f64::MAX,
            2 => f64::NEG_INFINITY,
            _ => 0.0,
        })
        .collect();
    write_field_png(&path, &mesh, &huge, &options).unwrap();
    let fixed = SnapshotOptions {
        range: ValueRange::Fixed { min: 1.0, max: 1.0 },
        ..SnapshotOptions::default()
    };
    write_field_png(&path, &mesh, &huge, &fixed).unwrap();
    assert!(read(&path).width() == 900);
}

#[test]
fn log_scale_maps_decades_linearly_and_bad_input_leaves_no_file() {
    let mesh = plate_with_hole();
    let n = mesh.num_nodes();
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("log.png");
    let log = SnapshotOptions {
        log_scale: true,
        unit: "mm⁻²".into(),
        ..SnapshotOptions::default()
    };
    // Five decades (x from -10 to 10), inside the automatic range's six.
    let positive: Vec<f64> = (0..n).map(|i| 10f64.powf(mesh.node(i)[0] / 4.0)).collect();
    write_field_png(&path, &mesh, &positive, &log).unwrap();
    let (_, layout) = render_field_with_layout(&mesh, &positive, &log).unwrap();
    let a = nearest_node(&mesh, [-9.0, 0.0]);
    let left = layout.to_pixel(mesh.node(a));
    // log10 of the values is linear in x: halfway along the map at x = 0 from -10 … 10.
    let centre = nearest_node(&mesh, [0.0, 5.0]);
    let t = (mesh.node(centre)[0] / 4.0 + 2.5) / 5.0;
    let want = ColourTable::viridis().at(t);
    let got = at(&read(&path), layout.to_pixel(mesh.node(centre)));
    assert!(close(got, want, 8), "{got:?} vs {want:?}");
    assert!(!is_white(at(&read(&path), left)));
    std::fs::remove_file(&path).unwrap();

    // A density that reaches zero somewhere takes the first colour there instead of failing.
    let mut with_zero = positive.clone();
    with_zero[a] = 0.0;
    write_field_png(&path, &mesh, &with_zero, &log).unwrap();
    let first = ColourTable::viridis().at(0.0);
    let got = at(&read(&path), left);
    assert!(close(got, first, 8), "{got:?} vs {first:?}");
    std::fs::remove_file(&path).unwrap();
    // Ten decades, 10^(x/2) from 1e-5 to 1e5: the automatic range keeps the top six, so the
    // scale starts at 1e-1 (x = -2) and the left of the plate takes the first colour.
    let wide: Vec<f64> = (0..n).map(|i| 10f64.powf(mesh.node(i)[0] / 2.0)).collect();
    write_field_png(&path, &mesh, &wide, &log).unwrap();
    let got = at(&read(&path), left);
    assert!(close(got, first, 8), "{got:?} vs {first:?}");
    let t = (mesh.node(centre)[0] / 2.0 + 1.0) / 6.0;
    let want = ColourTable::viridis().at(t);
    let got = at(&read(&path), layout.to_pixel(mesh.node(centre)));
    assert!(close(got, want, 8), "{got:?} vs {want:?}");
    std::fs::remove_file(&path).unwrap();
    let fixed = SnapshotOptions {
        range: ValueRange::Fixed {
            min: -1.0,
            max: 1.0,
        },
        ..log.clone()
    };
    assert!(write_field_png(&path, &mesh, &positive, &fixed).is_err());
    let nan_range = SnapshotOptions {
        range: ValueRange::Fixed {
            min: f64::NAN,
            max: 1.0,
        },
        ..SnapshotOptions::default()
    };
    assert!(write_field_png(&path, &mesh, &positive, &nan_range).is_err());
    let e = write_field_png(&path, &mesh, &positive[1..], &SnapshotOptions::default()).unwrap_err();
    assert!(e.to_string().contains("values for"), "{e}");
    let empty = Mesh::from_parts(Array2::zeros((0, 2)), vec![], &|_| 0).unwrap();
    assert!(write_field_png(&path, &empty, &[], &SnapshotOptions::default()).is_err());
    assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0);
}

#[test]
fn shared_range_covers_all_fields() {
    let a = [1.0, f64::NAN, 3.0];
    let b = [-2.0, f64::INFINITY];
    assert_eq!(
        ValueRange::covering(&[&a, &b], false),
        Some(ValueRange::Fixed {
            min: -2.0,
            max: 3.0
        })
    );
    assert_eq!(
        ValueRange::covering(&[&a, &b], true),
        Some(ValueRange::Fixed { min: 1.0, max: 3.0 })
    );
    assert_eq!(ValueRange::covering(&[&[f64::NAN]], false), None);
}

/// Pixels of the colour `c` (exactly) inside `rect`.
fn count(img: &image::RgbImage, rect: [f64; 4], c: Rgb) -> usize {
    let mut k = 0;
    for y in rect[1].ceil() as u32..rect[3] as u32 {
        for x in rect[0].ceil() as u32..rect[2] as u32 {
            if img.get_pixel(x, y).0 == c {
                k += 1;
            }
        }
    }
    k
}

#[test]
fn series_plot_reads_back_and_log_axis_skips_non_positive_points() {
    let dt = Series {
        name: "dt".into(),
        points: (0..50)
            .map(|i| (i as f64 * 0.5, 1e-3 * 1.2f64.powi(i)))
            .collect(),
    };
    let sup = Series {
        name: "sup u".into(),
        points: vec![
            (0.0, 1.0),
            (5.0, 0.0),
            (10.0, -3.0),
            (15.0, 40.0),
            (20.0, 50.0),
        ],
    };
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("series.png");
    let options = PlotOptions {
        width: 700,
        height: 420,
        y_label: "value".into(),
        log_y: true,
    };
    write_series_png(
        &path,
        "step sizes",
        "t [h]",
        &[dt.clone(), sup.clone()],
        &options,
    )
    .unwrap();
    let img = read(&path);
    assert_eq!((img.width(), img.height()), (700, 420));
    let (_, plot) =
        render_series_with_frame("step sizes", "t [h]", &[dt.clone(), sup.clone()], &options)
            .unwrap();
    // Both lines are there in their palette colours.
    assert!(count(&img, plot, PALETTE[0]) > 100);
    assert!(count(&img, plot, PALETTE[1]) > 20);
    // Title, axis labels: ink outside the plot frame.
    let title_ink = (0..350u32)
        .flat_map(|x| (0..plot[1] as u32 - 2).map(move |y| (x, y)))
        .filter(|&(x, y)| !is_white(img.get_pixel(x, y).0))
        .count();
    assert!(title_ink > 50);

    // Skipped points break the line: with (5, 0) and (10, -3) gone, the first point of
    // "sup u" is alone (a dot), and nothing joins it to (15, 40).
    let lone = Series {
        name: String::new(),
        points: sup.points.clone(),
    };
    let (c, _) = render_series_with_frame("", "", &[lone], &options).unwrap();
    let (c_linear, _) = render_series_with_frame(
        "",
        "",
        &[Series {
            name: String::new(),
            points: sup.points.clone(),
        }],
        &PlotOptions {
            log_y: false,
            ..options.clone()
        },
    )
    .unwrap();
    let colour = |c: &Canvas| {
        let mut k = 0;
        for y in 0..c.height {
            for x in 0..c.width {
                k += usize::from(c.get(x, y) == PALETTE[0]);
            }
        }
        k
    };
    assert!(
        colour(&c) < colour(&c_linear),
        "log plot should draw less of the line"
    );

    // Nothing drawable on a log axis: refused, and no file.
    let bad = Series {
        name: "zero".into(),
        points: vec![(0.0, 0.0), (1.0, -1.0), (f64::NAN, 2.0)],
    };
    let p2 = dir.path().join("bad.png");
    assert!(write_series_png(&p2, "", "", std::slice::from_ref(&bad), &options).is_err());
    assert!(!p2.exists());
    // The same data on a linear axis (NaN point skipped) is fine, as is a single point.
    let linear = PlotOptions::default();
    write_series_png(&p2, "", "", &[bad], &linear).unwrap();
    assert_eq!((read(&p2).width(), read(&p2).height()), (900, 560));
    let one = Series {
        name: "one".into(),
        points: vec![(3.0, 3.0)],
    };
    write_series_png(&p2, "one", "x", &[one], &linear).unwrap();
    assert!(write_series_png(&p2, "", "", &[], &linear).is_err());
    // Extreme values on both kinds of axis still give lines inside the frame.
    let extreme = Series {
        name: "extreme".into(),
        points: vec![(-f64::MAX, f64::MIN_POSITIVE), (f64::MAX, f64::MAX)],
    };
    for log_y in [false, true] {
        let o = PlotOptions {
            log_y,
            ..PlotOptions::default()
        };
        let (c, _) = render_series_with_frame("", "", std::slice::from_ref(&extreme), &o).unwrap();
        let mut k = 0;
        for y in 0..c.height {
            for x in 0..c.width {
                k += usize::from(c.get(x, y) == PALETTE[0]);
            }
        }
        assert!(k > 100, "log_y {log_y}: {k} line pixels");
    }
}
