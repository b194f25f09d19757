//! Plate outlines as GeoJSON polygons (RFC 7946, H. Butler et al., "The GeoJSON Format", 2016),
//! read with the `geojson` crate.
//!
//! Accepted: a `Polygon`, a `MultiPolygon` holding one polygon, a `Feature` with such a
//! geometry, or a `FeatureCollection` with exactly one such feature. The first ring is the
//! plate, the others are holes. Rings must be closed (last position equal to the first, as
//! RFC 7946 §3.1.6 requires). Coordinates are taken as plane coordinates in the plate's length
//! unit (a plate is not on the globe; RFC 7946's longitude/latitude meaning is not applied).
//! The rings are named from the feature's `name` property: the outer ring by the name itself,
//! holes as `name.hole1`, `name.hole2`, … unless the feature has a `hole_names` array property
//! naming them in order.

use super::outline_source::{tidy_loop, NamedLoop, Outline};
use super::GeometryError;
use geojson::{Feature, GeoJson, GeometryValue};
use std::path::Path;

/// Reads a GeoJSON file.
pub fn read_geojson(path: &Path) -> Result<Outline, GeometryError> {
    let text = std::fs::read_to_string(path).map_err(|e| GeometryError::OutlineRead {
        path: path.to_path_buf(),
        reason: e.to_string(),
    })?;
    parse_geojson(&text, path)
}

/// Parses GeoJSON text; `path` only names the source in messages.
pub fn parse_geojson(text: &str, path: &Path) -> Result<Outline, GeometryError> {
    let bad = |reason: String| GeometryError::OutlineFormat {
        path: path.to_path_buf(),
        reason,
    };
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    let gj: GeoJson = text
        .parse()
        .map_err(|e| bad(format!("not a readable GeoJSON file: {e}")))?;
    let (geometry, feature): (Option<&geojson::Geometry>, Option<&Feature>) = match &gj {
        GeoJson::Geometry(g) => (Some(g), None),
        GeoJson::Feature(f) => (f.geometry.as_ref(), Some(f)),
        GeoJson::FeatureCollection(fc) => {
            let polygons: Vec<&Feature> = fc
                .features
                .iter()
                .filter(|f| {
                    f.geometry.as_ref().is_some_and(|g| {
                        matches!(
                            g.value,
                            GeometryValue::Polygon { .. } | GeometryValue::MultiPolygon { .. }
                        )
                    })
                })
                .collect();
            match polygons.as_slice() {
                [f] => (f.geometry.as_ref(), Some(*f)),
                [] => return Err(bad("the feature collection holds no polygon".into())),
                many => {
                    return Err(bad(format!(
                        "the feature collection holds {} polygons; a plate is one polygon (its holes are its inner rings)",
                        many.len()
                    )))
                }
            }
        }
    };
    let Some(geometry) = geometry else {
        return Err(bad("the feature has no geometry".into()));
    };
    let rings = match &geometry.value {
        GeometryValue::Polygon { coordinates } => coordinates,
        GeometryValue::MultiPolygon { coordinates } => match coordinates.as_slice() {
            [one] => one,
            [] => return Err(bad("the MultiPolygon holds no polygon".into())),
            many => {
                return Err(bad(format!(
                    "the MultiPolygon holds {} polygons; a plate is one polygon (its holes are its inner rings)",
                    many.len()
                )))
            }
        },
        other => {
            return Err(bad(format!(
                "a {} is not a polygon; the plate must be a Polygon (or a MultiPolygon of one)",
                other.type_name()
            )))
        }
    };
    if rings.is_empty() {
        return Err(bad("the polygon has no rings".into()));
    }
    let property = |key: &str| {
        feature
            .and_then(|f| f.properties.as_ref())
            .and_then(|p| p.get(key))
    };
    let name = property("name").and_then(|v| v.as_str()).map(String::from);
    let hole_names: Vec<Option<String>> = property("hole_names")
        .and_then(|v| v.as_array())
        .map(|a| a.iter().map(|v| v.as_str().map(String::from)).collect())
        .unwrap_or_default();
    let mut loops = Vec::with_capacity(rings.len());
    for (k, ring) in rings.iter().enumerate() {
        let role = if k == 0 {
            "the outer ring".to_string()
        } else {
            format!("ring {} (hole {k})", k + 1)
        };
        let mut points = Vec::with_capacity(ring.len());
        for (j, pos) in ring.iter().enumerate() {
            match pos.as_slice() {
                [x, y, ..] if x.is_finite() && y.is_finite() => points.push([*x, *y]),
                _ => {
                    return Err(bad(format!(
                        "{role}, position {}: expected finite numbers [x, y]",
                        j + 1
                    )))
                }
            }
        }
        if points.len() < 4 || points.first() != points.last() {
            return Err(bad(format!(
                "{role} is not closed: a GeoJSON ring has at least four positions and ends where it begins (RFC 7946 §3.1.6)"
            )));
        }
        let name = if k == 0 {
            name.clone()
        } else {
            hole_names
                .get(k - 1)
                .cloned()
                .flatten()
                .or_else(|| name.as_ref().map(|n| format!("{n}.hole{k}")))
        };
        loops.push(NamedLoop { points, name });
    }
    // The first ring is the outer one here (RFC 7946), whatever the areas say.
    let mut tidy = loops
        .into_iter()
        .enumerate()
        .map(|(k, l)| tidy_loop(path, k, l))
        .collect::<Result<Vec<_>, _>>()?
        .into_iter();
    match tidy.next() {
        Some(outer) => Ok(Outline {
            outer,
            holes: tidy.collect(),
        }),
        None => Err(bad("the polygon has no rings".into())),
    }
}

#[cfg(test)]
mod tests;
