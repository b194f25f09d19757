use super::*;
use crate::geometry::{polyline_length, signed_area};
use std::f64::consts::PI;

fn parse(text: &str) -> Result<Outline, GeometryError> {
    parse_svg(text, Path::new("plate.svg"), "mm", DEFAULT_TOLERANCE)
}

fn bounds(l: &NamedLoop) -> ([f64; 2], [f64; 2]) {
    l.points
        .iter()
        .fold(([f64::MAX; 2], [f64::MIN; 2]), |(lo, hi), p| {
            (
                [lo[0].min(p[0]), lo[1].min(p[1])],
                [hi[0].max(p[0]), hi[1].max(p[1])],
            )
        })
}

const FOUR_ARCS: &str = r#"<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 100 100">
  <path id="rim" d="M 90 50 A 40 40 0 0 1 50 90 A 40 40 0 0 1 10 50 A 40 40 0 0 1 50 10 A 40 40 0 0 1 90 50 Z"/>
</svg>"#;

#[test]
fn circle_of_four_arcs_has_the_circle_area() {
    let r = 40.0;
    // Exact: area pi r^2 and circumference 2 pi r.
    let exact = PI * r * r;
    for tolerance in [DEFAULT_TOLERANCE, 1e-2] {
        let o = parse_svg(FOUR_ARCS, Path::new("c.svg"), "mm", tolerance).expect("parses");
        assert!(o.holes.is_empty());
        assert_eq!(o.outer.name.as_deref(), Some("rim"));
        let area = signed_area(&o.outer.points).abs();
        // A chord within `tol` of its curve changes the area by at most tol per unit length,
        // so |A - pi r^2| <= 2 pi r (tol + e) with e = 2.7e-4 r, the deviation of usvg's cubic
        // quarter arcs from the circle (recalled from memory).
        let tol = tolerance * 2.0 * r;
        let bound = 2.0 * PI * r * (tol + 2.7e-4 * r);
        eprintln!(
            "four arcs, tolerance {tolerance:e}: {} points, area {area:.4} vs {exact:.4} (error {:.2e}, bound {bound:.2e})",
            o.outer.points.len(),
            area - exact
        );
        assert!((area - exact).abs() <= bound, "{area} vs {exact}");
        let len = polyline_length(&o.outer.points, true);
        // The same argument for the length: a relative error of order tol / r.
        let rel = (len - 2.0 * PI * r).abs() / (2.0 * PI * r);
        assert!(rel < 2.0 * (tol / r + 2.7e-4), "{len}");
        // Centre (50, 100 - 50) with y up from the bottom-left corner.
        let (lo, hi) = bounds(&o.outer);
        assert!((lo[0] - 10.0).abs() < 0.02 && (hi[1] - 90.0).abs() < 0.02);
    }
    // A coarser tolerance gives fewer points: the tolerance is applied.
    let fine = parse_svg(FOUR_ARCS, Path::new("c.svg"), "mm", 1e-4).unwrap();
    let coarse = parse_svg(FOUR_ARCS, Path::new("c.svg"), "mm", 1e-2).unwrap();
    assert!(coarse.outer.points.len() * 4 < fine.outer.points.len());
}

#[test]
fn group_transforms_are_applied() {
    let o = parse(
        r#"<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 100 100">
  <g transform="translate(10 20)"><g transform="scale(2)">
    <rect id="dish" x="0" y="0" width="5" height="3"/>
  </g></g>
</svg>"#,
    )
    .expect("parses");
    // The rectangle spans x 10..20 and SVG y 20..26, so plate y 74..80 (y up from the bottom).
    let (lo, hi) = bounds(&o.outer);
    for (got, want) in [(lo[0], 10.0), (hi[0], 20.0), (lo[1], 74.0), (hi[1], 80.0)] {
        assert!((got - want).abs() < 1e-5, "{got} vs {want}");
    }
    assert!((signed_area(&o.outer.points).abs() - 60.0).abs() < 1e-4);
}

#[test]
fn relative_and_absolute_commands_agree() {
    let svg = |d: &str| {
        format!(
            r#"<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 100 100"><path d="{d}"/></svg>"#
        )
    };
    // The same outline written with absolute and with relative commands (L/H/V/C/S/Q/T).
    let abs = "M 10 10 H 60 V 30 C 70 40 70 60 60 70 S 40 80 30 80 Q 10 80 10 60 T 10 10 Z";
    let rel = "m 10 10 h 50 v 20 c 10 10 10 30 0 40 s -20 10 -30 10 q -20 0 -20 -20 t 0 -50 z";
    let a = parse(&svg(abs)).expect("absolute");
    let b = parse(&svg(rel)).expect("relative");
    assert_eq!(a.outer.points.len(), b.outer.points.len());
    for (p, q) in a.outer.points.iter().zip(&b.outer.points) {
        assert!((p[0] - q[0]).abs() < 1e-4 && (p[1] - q[1]).abs() < 1e-4);
    }
    // A relative rectangle with a relative square hole: two loops, area exact.
    let o = parse(&svg("m 10 10 h 30 v 20 h -30 z m 5 5 l 5 0 l 0 5 l -5 0 z")).unwrap();
    assert_eq!(o.holes.len(), 1);
    let area = signed_area(&o.outer.points).abs() - signed_area(&o.holes[0].points).abs();
    assert!((area - 575.0).abs() < 1e-4, "{area}");
}

#[test]
fn physical_units_map_to_the_length_unit() {
    let text = r#"<svg xmlns="http://www.w3.org/2000/svg" width="90mm" height="90mm" viewBox="0 0 900 900">
  <circle id="plate" cx="450" cy="450" r="400"/>
  <circle id="well" cx="450" cy="450" r="50"/>
</svg>"#;
    // 900 user units across 90 mm: r = 40 mm and a 5 mm well, or 4 cm and 0.5 cm.
    for (unit, r, w) in [("mm", 40.0, 5.0), ("cm", 4.0, 0.5)] {
        let o = parse_svg(text, Path::new("u.svg"), unit, DEFAULT_TOLERANCE).unwrap();
        let exact = PI * (r * r - w * w);
        let area = signed_area(&o.outer.points).abs() - signed_area(&o.holes[0].points).abs();
        assert!(
            (area - exact).abs() / exact < 2e-3,
            "{unit}: {area} vs {exact}"
        );
        assert_eq!(o.names(), vec![Some("plate".into()), Some("well".into())]);
    }
    let e = parse_svg(text, Path::new("u.svg"), "furlong", DEFAULT_TOLERANCE).unwrap_err();
    assert!(e.to_string().contains("'furlong' is not one of mm"), "{e}");
}

#[test]
fn bad_drawings_are_named() {
    let open = r#"<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 10 10"><path d="M 0 0 L 5 0 L 5 5"/></svg>"#;
    let e = parse(open).unwrap_err().to_string();
    assert!(e.starts_with("plate.svg: no closed path"), "{e}");
    let e = parse("<svg xmlns=\"http://www.w3.org/2000/svg\"")
        .unwrap_err()
        .to_string();
    assert!(e.starts_with("plate.svg: not a readable SVG file"), "{e}");
    let e = parse("<html/>").unwrap_err().to_string();
    assert!(e.contains("root element is <html>"), "{e}");
    let e = read_svg(Path::new("/nonexistent/plate.svg"), "mm", DEFAULT_TOLERANCE).unwrap_err();
    assert!(matches!(e, GeometryError::OutlineRead { .. }), "{e}");
}
