use super::*;
use crate::geometry::polyline_length;
use std::f64::consts::PI;

/// A dark picture with a bright disc of radius `r` at (cx, cy) and dark wells (cx, cy, r).
fn disc(w: u32, h: u32, c: (f64, f64), r: f64, wells: &[(f64, f64, f64)]) -> Vec<u8> {
    let mut px = vec![20u8; (w * h) as usize];
    for y in 0..h {
        for x in 0..w {
            let (fx, fy) = (x as f64 + 0.5, y as f64 + 0.5);
            let inside = (fx - c.0).hypot(fy - c.1) < r
                && wells
                    .iter()
                    .all(|&(wx, wy, wr)| (fx - wx).hypot(fy - wy) >= wr);
            if inside {
                px[(y * w + x) as usize] = 220;
            }
        }
    }
    px
}

#[test]
fn disc_area_and_length_match_the_circle() {
    let r = 100.0;
    let px = disc(260, 260, (130.0, 130.0), r, &[]);
    let t = trace_grey(260, 260, &px, &TraceOptions::default()).expect("traces");
    assert!(t.holes.is_empty());
    let area = signed_area(&t.outer);
    // Exact: the disc's area pi R^2 and circumference 2 pi R.
    let exact = PI * r * r;
    eprintln!(
        "disc R = {r} px: area {area:.1} vs {exact:.1} ({:+.2e} relative), length {:.2} vs {:.2}",
        (area - exact) / exact,
        polyline_length(&t.outer, true),
        2.0 * PI * r
    );
    // Pixel error: one pixel width along the perimeter.
    assert!(
        (area - exact).abs() < 2.0 * PI * r * 1.0,
        "area {area} vs {exact}"
    );
    let len = polyline_length(&t.outer, true);
    let rel = (len - 2.0 * PI * r).abs() / (2.0 * PI * r);
    assert!(rel < 0.01, "length {len} vs {} ({rel})", 2.0 * PI * r);
}

#[test]
fn disc_with_two_wells_gives_three_loops() {
    let px = disc(
        260,
        260,
        (130.0, 130.0),
        100.0,
        &[(90.0, 130.0, 20.0), (170.0, 120.0, 15.0)],
    );
    let t = trace_grey(260, 260, &px, &TraceOptions::default()).expect("traces");
    assert_eq!(t.holes.len(), 2);
    eprintln!("two wells: {} loops", 1 + t.holes.len());
    let holes: f64 = t.holes.iter().map(|h| signed_area(h).abs()).sum();
    let exact = PI * (400.0 + 225.0);
    assert!((holes - exact).abs() / exact < 0.05, "{holes} vs {exact}");
}

#[test]
fn specks_change_neither_loops_nor_area() {
    let wells = [(90.0, 130.0, 20.0), (170.0, 120.0, 15.0)];
    let clean = disc(260, 260, (130.0, 130.0), 100.0, &wells);
    let mut noisy = clean.clone();
    // A fixed pseudo-random scatter of single-pixel and 2x2 specks of both colours.
    let mut s: u64 = 12345;
    for _ in 0..400 {
        s = s
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        let x = ((s >> 33) % 256) as usize + 2;
        let y = ((s >> 13) % 256) as usize + 2;
        let v = if noisy[y * 260 + x] > 100 { 20 } else { 220 };
        for (dx, dy) in [(0, 0), (1, 0), (0, 1), (1, 1)] {
            if x + dx < 258 && y + dy < 258 {
                noisy[(y + dy) * 260 + x + dx] = v;
            }
        }
    }
    let o = TraceOptions {
        threshold: Some(128),
        ..TraceOptions::default()
    };
    let a = trace_grey(260, 260, &clean, &o).expect("clean");
    let b = trace_grey(260, 260, &noisy, &o).expect("noisy");
    assert_eq!(a.holes.len(), b.holes.len());
    let area = |t: &Traced| {
        signed_area(&t.outer) - t.holes.iter().map(|h| signed_area(h).abs()).sum::<f64>()
    };
    let (aa, ab) = (area(&a), area(&b));
    eprintln!(
        "clean {} loops, area {aa:.1}; noisy {} loops, area {ab:.1} ({:+.2e} relative)",
        1 + a.holes.len(),
        1 + b.holes.len(),
        (ab - aa) / aa
    );
    assert!((aa - ab).abs() / aa < 0.005, "{aa} vs {ab}");
}

#[test]
fn bad_pictures_are_named() {
    let w = 40;
    let all_dark = vec![10u8; 1600];
    assert!(matches!(
        trace_grey(
            w,
            40,
            &all_dark,
            &TraceOptions {
                threshold: Some(128),
                ..TraceOptions::default()
            }
        ),
        Err(TraceError::Empty { .. })
    ));
    let half: Vec<u8> = (0..1600)
        .map(|i| if i % 40 < 20 { 200 } else { 10 })
        .collect();
    assert_eq!(
        trace_grey(w, 40, &half, &TraceOptions::default()).unwrap_err(),
        TraceError::TouchesBorder
    );
    // A uniformly bright picture: Otsu's threshold keeps everything, which touches the border.
    assert_eq!(
        trace_grey(w, 40, &[200u8; 1600], &TraceOptions::default()).unwrap_err(),
        TraceError::TouchesBorder
    );
    assert!(matches!(
        trace_grey(w, 40, &[200u8; 100], &TraceOptions::default()),
        Err(TraceError::BadOption(_))
    ));
    let px = disc(40, 40, (20.0, 20.0), 10.0, &[]);
    let o = TraceOptions {
        seed: Some((1, 1)),
        ..TraceOptions::default()
    };
    assert!(matches!(
        trace_grey(w, 40, &px, &o),
        Err(TraceError::SeedOutside { .. })
    ));
}

#[test]
fn width_scale_sets_the_plate_width() {
    let px = disc(120, 120, (60.0, 60.0), 40.0, &[]);
    let o = TraceOptions {
        scale: Scale::Width(8.0),
        ..TraceOptions::default()
    };
    let t = trace_grey(120, 120, &px, &o).expect("traces");
    let (lo, hi) = t.outer.iter().fold((f64::MAX, f64::MIN), |(lo, hi), p| {
        (lo.min(p[0]), hi.max(p[0]))
    });
    assert!((hi - lo - 8.0).abs() < 1e-9);
}
