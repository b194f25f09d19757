use super::*;
use crate::geometry::signed_area;

fn parse(text: &str) -> Result<Outline, GeometryError> {
    parse_geojson(text, Path::new("plate.geojson"))
}

const SQUARE_WITH_HOLE: &str = r#"[[[0, 0], [10, 0], [10, 8], [0, 8], [0, 0]],
    [[2, 2], [2, 5], [4, 5], [4, 2], [2, 2]]]"#;

fn area(o: &Outline) -> f64 {
    signed_area(&o.outer.points).abs()
        - o.holes
            .iter()
            .map(|h| signed_area(&h.points).abs())
            .sum::<f64>()
}

#[test]
fn polygon_with_a_hole_gives_two_loops_and_the_exact_area() {
    let forms = [
        format!(r#"{{"type": "Polygon", "coordinates": {SQUARE_WITH_HOLE}}}"#),
        format!(r#"{{"type": "MultiPolygon", "coordinates": [{SQUARE_WITH_HOLE}]}}"#),
        format!(
            r#"{{"type": "Feature", "properties": {{"name": "dish"}},
                "geometry": {{"type": "Polygon", "coordinates": {SQUARE_WITH_HOLE}}}}}"#
        ),
        format!(
            r#"{{"type": "FeatureCollection", "features": [
                {{"type": "Feature", "properties": {{"name": "label"}},
                  "geometry": {{"type": "Point", "coordinates": [1, 1]}}}},
                {{"type": "Feature", "properties": {{"name": "dish", "hole_names": ["well"]}},
                  "geometry": {{"type": "Polygon", "coordinates": {SQUARE_WITH_HOLE}}}}}]}}"#
        ),
    ];
    for (k, text) in forms.iter().enumerate() {
        let o = parse(text).unwrap_or_else(|e| panic!("form {k}: {e}"));
        assert_eq!(1 + o.holes.len(), 2, "form {k}");
        // Exact: the shoelace area of these integer corners is 80 - 6.
        assert_eq!(area(&o), 74.0, "form {k}");
        assert_eq!(o.outer.points.len(), 4);
    }
    let named = |k: usize| parse(&forms[k]).unwrap().names();
    assert_eq!(named(0), vec![None, None]);
    assert_eq!(
        named(2),
        vec![Some("dish".into()), Some("dish.hole1".into())]
    );
    assert_eq!(named(3), vec![Some("dish".into()), Some("well".into())]);
}

#[test]
fn errors_name_the_file() {
    for (text, says) in [
        (
            r#"{"type": "Point", "coordinates": [1, 2]}"#,
            "a Point is not a polygon",
        ),
        (
            r#"{"type": "FeatureCollection", "features": []}"#,
            "holds no polygon",
        ),
        (
            r#"{"type": "MultiPolygon", "coordinates": [[[[0,0],[1,0],[1,1],[0,0]]], [[[5,5],[6,5],[6,6],[5,5]]]]}"#,
            "holds 2 polygons",
        ),
        (
            r#"{"type": "Polygon", "coordinates": [[[0,0],[1,0],[1,1],[0,1]]]}"#,
            "the outer ring is not closed",
        ),
        (
            r#"{"type": "Polygon", "coordinates": ["#,
            "not a readable GeoJSON file",
        ),
    ] {
        let e = parse(text).unwrap_err().to_string();
        assert!(e.starts_with("plate.geojson: "), "{e}");
        assert!(e.contains(says), "{e} (expected '{says}')");
    }
    let two = format!(
        r#"{{"type": "FeatureCollection", "features": [
            {{"type": "Feature", "properties": null, "geometry": {{"type": "Polygon", "coordinates": {SQUARE_WITH_HOLE}}}}},
            {{"type": "Feature", "properties": null, "geometry": {{"type": "Polygon", "coordinates": {SQUARE_WITH_HOLE}}}}}]}}"#
    );
    let e = parse(&two).unwrap_err().to_string();
    assert!(e.contains("holds 2 polygons"), "{e}");
}
