//! Plate outlines drawn in SVG.
//!
//! `usvg` does the SVG work: it parses the file, applies CSS and `transform`s of groups and
//! elements, turns `circle`, `ellipse`, `rect`, `polygon` and `path` elements (M/L/H/V/C/S/Q/T/A/Z,
//! absolute and relative) into absolute move/line/quadratic/cubic segments, and maps the
//! `viewBox` onto the canvas. `kurbo` flattens the curves to lines within a tolerance. Each
//! closed subpath becomes a loop named by its element's `id`; the loop enclosing the largest area
//! is the plate, the others holes.
//!
//! Units: when the root `svg` element's `width` is in a physical unit (mm, cm, in, pt, pc),
//! the drawing is converted to the plate's length unit (which must then be one of mm, cm, m,
//! um, in); otherwise one user unit of the drawing is one length unit. The origin is the
//! drawing's bottom-left corner with y upwards (SVG's y points down).
//!
//! Accuracy: `usvg` approximates arcs by cubic curves (kurbo's, with its own tolerance of 0.1
//! user units, at least four per full turn); a quarter circle as one cubic deviates by at most
//! 2.7e-4 of the radius (value recalled from memory). The flattening tolerance applies after.

use super::outline_source::{NamedLoop, Outline};
use super::GeometryError;
use kurbo::{BezPath, PathEl, Point as KPoint, Shape as _};
use std::path::Path;
use usvg::tiny_skia_path::PathSegment;

/// The default flattening tolerance, relative to the drawing's largest extent.
pub const DEFAULT_TOLERANCE: f64 = 1e-4;

/// Millimetres per length unit, for the units a physical drawing can be converted to.
pub fn millimetres_per(unit: &str) -> Option<f64> {
    match unit {
        "mm" => Some(1.0),
        "cm" => Some(10.0),
        "m" => Some(1000.0),
        "um" | "µm" | "μm" => Some(1e-3),
        "in" => Some(25.4),
        _ => None,
    }
}

/// Reads an SVG file; `tolerance` is the flattening tolerance relative to the drawing's
/// largest extent.
pub fn read_svg(path: &Path, unit: &str, tolerance: f64) -> Result<Outline, GeometryError> {
    let text = std::fs::read_to_string(path).map_err(|e| GeometryError::OutlineRead {
        path: path.to_path_buf(),
        reason: e.to_string(),
    })?;
    parse_svg(&text, path, unit, tolerance)
}

/// Parses SVG text; `path` only names the source in messages.
pub fn parse_svg(
    text: &str,
    path: &Path,
    unit: &str,
    tolerance: f64,
) -> Result<Outline, GeometryError> {
    let bad = |reason: String| GeometryError::OutlineFormat {
        path: path.to_path_buf(),
        reason,
    };
    if !(tolerance.is_finite() && tolerance > 0.0) {
        return Err(bad(format!(
            "the flattening tolerance must be a positive number, not {tolerance}"
        )));
    }
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    let xml = usvg::roxmltree::Document::parse_with_options(
        text,
        usvg::roxmltree::ParsingOptions {
            allow_dtd: true,
            ..Default::default()
        },
    )
    .map_err(|e| {
        // roxmltree's message ends with the position as "line:column".
        bad(format!("not a readable SVG file: {e}"))
    })?;
    let root = xml.root_element();
    if root.tag_name().name() != "svg" {
        return Err(bad(format!(
            "not an SVG drawing: the root element is <{}>, not <svg>",
            root.tag_name().name()
        )));
    }
    let width_attr = root.attribute("width");
    let physical = match width_attr.map(|w| w.trim().parse::<svgtypes::Length>()) {
        Some(Ok(l)) => matches!(
            l.unit,
            svgtypes::LengthUnit::Mm
                | svgtypes::LengthUnit::Cm
                | svgtypes::LengthUnit::In
                | svgtypes::LengthUnit::Pt
                | svgtypes::LengthUnit::Pc
        ),
        _ => false,
    };
    let view_box = root
        .attribute("viewBox")
        .and_then(|v| v.parse::<svgtypes::ViewBox>().ok());
    let tree = usvg::Tree::from_xmltree(&xml, &usvg::Options::default())
        .map_err(|e| bad(format!("not a usable SVG drawing: {e}")))?;
    let size = tree.size();
    let (canvas_w, canvas_h) = (size.width() as f64, size.height() as f64);
    // Length units per canvas pixel (usvg's canvas is in CSS pixels, 96 to the inch).
    let per_px = if physical {
        let Some(mm) = millimetres_per(unit) else {
            return Err(bad(format!(
                "the drawing is {} wide, in a physical unit, but the length unit '{unit}' is not one of mm, cm, m, um, in",
                width_attr.unwrap_or_default()
            )));
        };
        25.4 / 96.0 / mm
    } else {
        match view_box {
            Some(vb) if canvas_w > 0.0 => vb.w / canvas_w,
            _ => 1.0,
        }
    };

    // Every path in canvas coordinates (f64), with its id.
    let mut paths: Vec<(BezPath, String)> = Vec::new();
    collect(tree.root(), &mut paths);
    let mut bounds: Option<kurbo::Rect> = None;
    for (p, _) in &paths {
        let b = p.bounding_box();
        bounds = Some(bounds.map_or(b, |a| a.union(b)));
    }
    let extent = bounds.map_or(0.0, |b| b.width().max(b.height()));
    let tol_px = tolerance * extent;
    let mut loops = Vec::new();
    let mut open = 0usize;
    for (bez, id) in &paths {
        let mut sub: Vec<Vec<super::Point>> = Vec::new();
        let mut current: Vec<super::Point> = Vec::new();
        let mut closed = false;
        let mut finish = |current: &mut Vec<super::Point>, closed: bool, sub: &mut Vec<_>| {
            if current.is_empty() {
                return;
            }
            let pts = std::mem::take(current);
            // A subpath that ends where it began is closed even without a Z.
            let ends_meet = pts.len() > 2
                && pts
                    .first()
                    .zip(pts.last())
                    .is_some_and(|(a, b)| (a[0] - b[0]).hypot(a[1] - b[1]) <= 1e-9 * extent);
            if closed || ends_meet {
                sub.push(pts);
            } else {
                open += 1;
            }
        };
        kurbo::flatten(bez.iter(), tol_px.max(f64::MIN_POSITIVE), |el| match el {
            PathEl::MoveTo(p) => {
                finish(&mut current, closed, &mut sub);
                closed = false;
                current.push([p.x, p.y]);
            }
            PathEl::LineTo(p) => current.push([p.x, p.y]),
            PathEl::ClosePath => {
                finish(&mut current, true, &mut sub);
                closed = false;
            }
            // flatten emits only moves, lines and closes.
            PathEl::QuadTo(_, p) | PathEl::CurveTo(_, _, p) => current.push([p.x, p.y]),
        });
        finish(&mut current, closed, &mut sub);
        let many = sub.len() > 1;
        for (k, pts) in sub.into_iter().enumerate() {
            let name = match (id.is_empty(), many) {
                (true, _) => None,
                (false, false) => Some(id.clone()),
                (false, true) => Some(format!("{id}.{}", k + 1)),
            };
            let points = pts
                .into_iter()
                .map(|p| [p[0] * per_px, (canvas_h - p[1]) * per_px])
                .collect();
            loops.push(NamedLoop { points, name });
        }
    }
    if loops.is_empty() {
        return Err(bad(if open > 0 {
            format!("no closed path in the drawing ({open} open path(s); close the outline with Z)")
        } else {
            "no closed path in the drawing".into()
        }));
    }
    Outline::from_loops(path, loops)
}

/// Collects every path under `group` in canvas coordinates with its element's id.
fn collect(group: &usvg::Group, out: &mut Vec<(BezPath, String)>) {
    for node in group.children() {
        match node {
            usvg::Node::Group(g) => collect(g, out),
            usvg::Node::Path(p) => {
                let t = p.abs_transform();
                let map = |q: usvg::tiny_skia_path::Point| {
                    let (x, y) = (q.x as f64, q.y as f64);
                    KPoint::new(
                        t.sx as f64 * x + t.kx as f64 * y + t.tx as f64,
                        t.ky as f64 * x + t.sy as f64 * y + t.ty as f64,
                    )
                };
                let mut bez = BezPath::new();
                for seg in p.data().segments() {
                    match seg {
                        PathSegment::MoveTo(a) => bez.move_to(map(a)),
                        PathSegment::LineTo(a) => bez.line_to(map(a)),
                        PathSegment::QuadTo(a, b) => bez.quad_to(map(a), map(b)),
                        PathSegment::CubicTo(a, b, c) => bez.curve_to(map(a), map(b), map(c)),
                        PathSegment::Close => bez.close_path(),
                    }
                }
                out.push((bez, p.id().to_string()));
            }
            // Pictures and text are not outlines.
            usvg::Node::Image(_) | usvg::Node::Text(_) => {}
        }
    }
}

#[cfg(test)]
mod tests;
