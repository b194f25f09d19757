//! Cut plates: the outline clipped by a half-plane or with a wedge removed.
//!
//! The polygon clipping itself is the `geo` crate's boolean operations; this module builds the
//! cutting polygons, checks that one piece remains, and re-spaces the new straight edges.

use super::discretise::{subdivide_polygon, Ring};
use super::shape::{dist, Point};
use super::GeometryError;
use geo::{BooleanOps, Coord, LineString, Polygon};
use serde::{Deserialize, Serialize};

/// A cut applied to a plate.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(tag = "cut", rename_all = "snake_case", deny_unknown_fields)]
pub enum Cut {
    /// Removes the side `normal · p > offset` (a straight cut across the dish).
    HalfPlane {
        /// Normal pointing into the removed side (need not be unit length).
        normal: [f64; 2],
        /// Offset: points with `normal · p > offset` are removed.
        offset: f64,
    },
    /// Removes the sector seen from `apex` between two directions, counter-clockwise from
    /// `from_deg` to `to_deg` (degrees from the +x axis).
    Wedge {
        /// The wedge's tip.
        apex: Point,
        /// Start direction in degrees.
        from_deg: f64,
        /// End direction in degrees (counter-clockwise from the start).
        to_deg: f64,
    },
}

impl Cut {
    /// Checks the numbers of the cut.
    pub fn check_numbers(&self) -> Result<(), String> {
        match self {
            Cut::HalfPlane { normal, offset } => {
                if !(normal[0].is_finite() && normal[1].is_finite() && offset.is_finite()) {
                    return Err("half-plane numbers must be finite".into());
                }
                if normal[0] == 0.0 && normal[1] == 0.0 {
                    return Err("half-plane normal must not be zero".into());
                }
                Ok(())
            }
            Cut::Wedge {
                apex,
                from_deg,
                to_deg,
            } => {
                if !(apex[0].is_finite()
                    && apex[1].is_finite()
                    && from_deg.is_finite()
                    && to_deg.is_finite())
                {
                    return Err("wedge numbers must be finite".into());
                }
                let span = wedge_span(*from_deg, *to_deg);
                if span <= 0.0 || span >= 360.0 {
                    return Err(format!(
                        "wedge opening must be strictly between 0 and 360 degrees, got {span}"
                    ));
                }
                Ok(())
            }
        }
    }

    /// Applies the cut (one-based number `k` for messages) to a discretised plate.
    pub(super) fn apply(
        &self,
        k: usize,
        outer: &Ring,
        holes: &[Ring],
        h: &dyn Fn(Point) -> f64,
        max_nodes: usize,
    ) -> Result<(Ring, Vec<Ring>), GeometryError> {
        // Cutting polygons reach just beyond the plate: the clipper snaps to a grid scaled to the
        // inputs' extent, so a needlessly huge polygon would cost precision.
        let (mut lo, mut hi) = ([f64::MAX; 2], [f64::MIN; 2]);
        for p in outer {
            for d in 0..2 {
                lo[d] = lo[d].min(p[d]);
                hi[d] = hi[d].max(p[d]);
            }
        }
        let centre = [0.5 * (lo[0] + hi[0]), 0.5 * (lo[1] + hi[1])];
        let diag = dist(lo, hi);
        let plate = Polygon::new(
            to_line_string(outer),
            holes.iter().map(|r| to_line_string(r)).collect(),
        );
        let result = match self {
            Cut::HalfPlane { normal, offset } => {
                let len = normal[0].hypot(normal[1]);
                let n = [normal[0] / len, normal[1] / len];
                let off = offset / len;
                let side = |p: &Point| n[0] * p[0] + n[1] * p[1] - off;
                if outer.iter().all(|p| side(p) <= 0.0) {
                    return Ok((outer.clone(), holes.to_vec()));
                }
                if outer.iter().all(|p| side(p) >= 0.0) {
                    return Err(GeometryError::CutRemovesAll { cut: k });
                }
                let big = 2.0 * diag;
                let d = [-n[1], n[0]];
                let s = side(&centre);
                let p0 = [centre[0] - s * n[0], centre[1] - s * n[1]];
                let kept = vec![
                    [p0[0] - big * d[0], p0[1] - big * d[1]],
                    [p0[0] + big * d[0], p0[1] + big * d[1]],
                    [
                        p0[0] + big * d[0] - big * n[0],
                        p0[1] + big * d[1] - big * n[1],
                    ],
                    [
                        p0[0] - big * d[0] - big * n[0],
                        p0[1] - big * d[1] - big * n[1],
                    ],
                ];
                plate.intersection(&Polygon::new(to_line_string(&kept), vec![]))
            }
            Cut::Wedge {
                apex,
                from_deg,
                to_deg,
            } => {
                let span = wedge_span(*from_deg, *to_deg);
                let big = 2.0 * (diag + dist(*apex, centre));
                let steps = (span / 5.0).ceil().max(2.0) as usize;
                let mut wedge = vec![*apex];
                for s in 0..=steps {
                    let a = (from_deg + span * s as f64 / steps as f64).to_radians();
                    wedge.push([apex[0] + big * a.cos(), apex[1] + big * a.sin()]);
                }
                plate.difference(&Polygon::new(to_line_string(&wedge), vec![]))
            }
        };
        let pieces: Vec<&Polygon<f64>> = result
            .0
            .iter()
            .filter(|p| geo::Area::unsigned_area(*p) > 0.0)
            .collect();
        match pieces.len() {
            0 => return Err(GeometryError::CutRemovesAll { cut: k }),
            1 => {}
            n => return Err(GeometryError::CutSplits { cut: k, pieces: n }),
        }
        let piece = pieces[0];
        // A cut along an existing edge leaves a zero-width sliver that the clipper, which snaps
        // to a grid about 1e-8 of the extent fine, keeps as a speck of area: its mean width
        // 2·area/perimeter is far below anything a user draws on purpose.
        let perimeter = super::polyline_length(&from_line_string(piece.exterior()), true);
        let width = 2.0 * geo::Area::unsigned_area(piece) / perimeter.max(f64::MIN_POSITIVE);
        if width <= 1e-7 * diag {
            return Err(GeometryError::CutRemovesAll { cut: k });
        }
        let too_many = |e: super::TooManyNodes| GeometryError::TooManyBoundaryNodes {
            needed: e.needed,
            budget: max_nodes,
        };
        let outer = respace(&from_line_string(piece.exterior()), h, max_nodes).map_err(too_many)?;
        let mut holes = Vec::new();
        for r in piece.interiors() {
            holes.push(respace(&from_line_string(r), h, max_nodes).map_err(too_many)?);
        }
        Ok((outer, holes))
    }
}

/// Counter-clockwise opening from `from` to `to`, in (0, 360] for distinct directions.
fn wedge_span(from: f64, to: f64) -> f64 {
    let s = (to - from).rem_euclid(360.0);
    if s == 0.0 && to != from {
        360.0
    } else {
        s
    }
}

fn to_line_string(ring: &[Point]) -> LineString<f64> {
    LineString::new(ring.iter().map(|p| Coord { x: p[0], y: p[1] }).collect())
}

fn from_line_string(ls: &LineString<f64>) -> Ring {
    let mut ring: Ring = ls.coords().map(|c| [c.x, c.y]).collect();
    if ring.len() > 1 && ring.first() == ring.last() {
        ring.pop();
    }
    ring
}

/// Removes nodes that the cut left crowded next to a new corner, then splits the long straight
/// edges the cut made. Only nearly straight nodes are dropped: a corner is part of the plate's
/// shape however close it is to its neighbours (a thin strip keeps its four corners).
fn respace(ring: &Ring, h: &dyn Fn(Point) -> f64, cap: usize) -> Result<Ring, super::TooManyNodes> {
    let n = ring.len();
    let flat = |k: usize| {
        let (a, b, c) = (ring[(k + n - 1) % n], ring[k], ring[(k + 1) % n]);
        let u = [b[0] - a[0], b[1] - a[1]];
        let v = [c[0] - b[0], c[1] - b[1]];
        (u[0] * v[1] - u[1] * v[0])
            .atan2(u[0] * v[0] + u[1] * v[1])
            .abs()
            < 10f64.to_radians()
    };
    let mut pts: Ring = Vec::with_capacity(n);
    for k in 0..n {
        let p = ring[k];
        let near = 0.3 * h(p);
        let crowded =
            pts.last().is_some_and(|q| dist(*q, p) < near) || dist(ring[(k + 1) % n], p) < near;
        if n > 3 && crowded && flat(k) {
            continue;
        }
        pts.push(p);
    }
    if pts.len() < 3 {
        pts = ring.clone();
    }
    subdivide_polygon(&pts, h, cap)
}

#[cfg(test)]
mod tests {
    use super::super::{PlateSpec, Shape};
    use super::*;
    use std::f64::consts::PI;

    fn disk(r: f64) -> Shape {
        Shape::Circle {
            centre: [0.0, 0.0],
            radius: r,
        }
    }

    #[test]
    fn half_plane_cut_of_a_disk_has_the_segment_area() {
        // Circular segment area r²/2 (θ − sin θ) for the cut-off cap (exact formula).
        let (r, d) = (2.0_f64, 1.0_f64);
        let spec = PlateSpec {
            outer: disk(r),
            holes: vec![],
            cuts: vec![Cut::HalfPlane {
                normal: [1.0, 0.0],
                offset: d,
            }],
        };
        let plate = spec.discretise(&|_| 0.02, usize::MAX).unwrap();
        let theta = 2.0 * (d / r).acos();
        let cap = 0.5 * r * r * (theta - theta.sin());
        let exact = PI * r * r - cap;
        assert!((plate.polygon_area() - exact).abs() / exact < 1e-3);
        assert!(plate.outer.iter().all(|p| p[0] <= d + 1e-9));
        // The new straight edge is re-spaced: no segment much longer than the target.
        let n = plate.outer.len();
        for i in 0..n {
            assert!(dist(plate.outer[i], plate.outer[(i + 1) % n]) < 0.03);
        }
    }

    #[test]
    fn wedge_removes_a_quarter() {
        let spec = PlateSpec {
            outer: disk(1.0),
            holes: vec![],
            cuts: vec![Cut::Wedge {
                apex: [0.0, 0.0],
                from_deg: 0.0,
                to_deg: 90.0,
            }],
        };
        let plate = spec.discretise(&|_| 0.01, usize::MAX).unwrap();
        let exact = 0.75 * PI;
        assert!((plate.polygon_area() - exact).abs() / exact < 1e-3);
    }

    #[test]
    fn cut_errors() {
        let all = PlateSpec {
            outer: disk(1.0),
            holes: vec![],
            cuts: vec![Cut::HalfPlane {
                normal: [1.0, 0.0],
                offset: -5.0,
            }],
        };
        assert_eq!(
            all.discretise(&|_| 0.1, usize::MAX).unwrap_err(),
            GeometryError::CutRemovesAll { cut: 1 }
        );
        // A thin bar across a dumbbell-like rectangle pair: a wedge splitting a U-shape.
        let u = Shape::Polygon {
            points: vec![
                [0.0, 0.0],
                [3.0, 0.0],
                [3.0, 2.0],
                [2.0, 2.0],
                [2.0, 1.0],
                [1.0, 1.0],
                [1.0, 2.0],
                [0.0, 2.0],
            ],
        };
        let split = PlateSpec {
            outer: u,
            holes: vec![],
            cuts: vec![Cut::HalfPlane {
                normal: [0.0, -1.0],
                offset: -1.5,
            }],
        };
        assert_eq!(
            split.discretise(&|_| 0.1, usize::MAX).unwrap_err(),
            GeometryError::CutSplits { cut: 1, pieces: 2 }
        );
        let bad = Cut::Wedge {
            apex: [0.0, 0.0],
            from_deg: 10.0,
            to_deg: 10.0,
        };
        assert!(bad.check_numbers().is_err());
    }
}
