//! Outline files of every format the plate options take: the plain `x y` loop file, SVG
//! drawings and GeoJSON polygons, chosen by the file's extension, all ending as the same loops.

use super::shape::{signed_area, Point, Shape};
use super::GeometryError;
use std::path::Path;

/// A closed loop read from an outline file, with the name the file gave it (an SVG element's
/// `id`, a GeoJSON feature's `name` property), so boundary parts can be referred to later.
#[derive(Clone, Debug, PartialEq)]
pub struct NamedLoop {
    /// Corners in order, the last joining the first (not repeated).
    pub points: Vec<Point>,
    /// The file's name for the loop, if it has one.
    pub name: Option<String>,
}

/// The loops of an outline file: the plate's outer loop and its holes.
#[derive(Clone, Debug, PartialEq)]
pub struct Outline {
    /// The outer loop.
    pub outer: NamedLoop,
    /// Holes (wells, obstacles).
    pub holes: Vec<NamedLoop>,
}

impl Outline {
    /// The outline as the shapes a plate takes: outer polygon and hole polygons.
    pub fn shapes(&self) -> (Shape, Vec<Shape>) {
        let polygon = |l: &NamedLoop| Shape::Polygon {
            points: l.points.clone(),
        };
        (
            polygon(&self.outer),
            self.holes.iter().map(polygon).collect(),
        )
    }

    /// The loops' names, outer first (`None` where the file gave none).
    pub fn names(&self) -> Vec<Option<String>> {
        std::iter::once(&self.outer)
            .chain(&self.holes)
            .map(|l| l.name.clone())
            .collect()
    }

    /// Takes the loop enclosing the largest area as the outer one and the others as holes
    /// (whether they lie inside it and apart is checked with the plate, by `check_plate`).
    /// Each loop is tidied by [`tidy_loop`].
    pub fn from_loops(path: &Path, loops: Vec<NamedLoop>) -> Result<Outline, GeometryError> {
        let mut kept = loops
            .into_iter()
            .enumerate()
            .map(|(k, l)| tidy_loop(path, k, l))
            .collect::<Result<Vec<_>, _>>()?;
        let Some(outer_at) = (0..kept.len()).max_by(|&a, &b| {
            signed_area(&kept[a].points)
                .abs()
                .total_cmp(&signed_area(&kept[b].points).abs())
        }) else {
            return Err(GeometryError::OutlineFormat {
                path: path.to_path_buf(),
                reason: "no closed loop in the file".into(),
            });
        };
        let outer = kept.remove(outer_at);
        Ok(Outline { outer, holes: kept })
    }
}

/// Drops repeated consecutive points and a repeated first point; refuses a loop of fewer than
/// three points, naming the file and the loop (`k` counts from 0).
pub(super) fn tidy_loop(
    path: &Path,
    k: usize,
    mut l: NamedLoop,
) -> Result<NamedLoop, GeometryError> {
    l.points.dedup();
    if l.points.len() > 1 && l.points.first() == l.points.last() {
        l.points.pop();
    }
    if l.points.len() < 3 {
        return Err(GeometryError::OutlineFormat {
            path: path.to_path_buf(),
            reason: format!(
                "loop {}{} has {} distinct point(s); a loop needs at least 3",
                k + 1,
                l.name
                    .as_ref()
                    .map(|n| format!(" ('{n}')"))
                    .unwrap_or_default(),
                l.points.len()
            ),
        });
    }
    Ok(l)
}

/// Which reader an outline file goes to.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum OutlineFormat {
    /// Lines of `x y`, loops separated by blank lines.
    Text,
    /// An SVG drawing (`.svg`).
    Svg,
    /// GeoJSON (`.geojson`, `.json`).
    GeoJson,
}

impl OutlineFormat {
    /// The format of a file, from its extension (case-insensitive); anything else is the text
    /// format.
    pub fn of(path: &Path) -> OutlineFormat {
        match path
            .extension()
            .and_then(|e| e.to_str())
            .map(str::to_ascii_lowercase)
            .as_deref()
        {
            Some("svg") => OutlineFormat::Svg,
            Some("geojson") | Some("json") => OutlineFormat::GeoJson,
            _ => OutlineFormat::Text,
        }
    }
}

/// Reads an outline file of any accepted format; `unit` is the plate's length unit, to which
/// an SVG drawing in physical units (mm, cm, in, pt, pc) is converted.
pub fn read_outline_file(path: &Path, unit: &str) -> Result<Outline, GeometryError> {
    match OutlineFormat::of(path) {
        OutlineFormat::Text => {
            // The text format's order is meaningful (its first loop is the outer one) and its
            // reader reports errors at file:line, so it keeps its own checks.
            let (outer, holes) = super::outline_file::read_outline(path)?;
            let named = |s: Shape| match s {
                Shape::Polygon { points } => Some(NamedLoop { points, name: None }),
                _ => None,
            };
            match (
                named(outer),
                holes.into_iter().map(named).collect::<Option<Vec<_>>>(),
            ) {
                (Some(outer), Some(holes)) => Ok(Outline { outer, holes }),
                _ => Err(GeometryError::OutlineFormat {
                    path: path.to_path_buf(),
                    reason: "the outline reader returned a shape that is not a polygon".into(),
                }),
            }
        }
        OutlineFormat::Svg => {
            super::svg_outline::read_svg(path, unit, super::svg_outline::DEFAULT_TOLERANCE)
        }
        OutlineFormat::GeoJson => super::geojson_outline::read_geojson(path),
    }
}
