//! Plate geometries: shapes, holes and cuts, their discretisation into boundary loops, and the
//! checks that make a set of loops a valid plate.

mod cut;
mod discretise;
mod geojson_outline;
mod image_trace;
mod outline_file;
mod outline_source;
mod shape;
mod svg_outline;
mod validate;

pub use cut::Cut;
pub use discretise::{shape_rings, subdivide_polygon, Ring, TooManyNodes};
pub use geojson_outline::{parse_geojson, read_geojson};
pub use image_trace::{
    otsu, trace_file, trace_grey, write_overlay, Scale, TraceError, TraceOptions, Traced,
};
pub use outline_file::{parse_outline, read_outline};
pub use outline_source::{read_outline_file, NamedLoop, Outline, OutlineFormat};
pub use shape::{dist, polyline_length, ramanujan_perimeter, signed_area, Point, Shape};
pub use svg_outline::{millimetres_per, parse_svg, read_svg, DEFAULT_TOLERANCE as SVG_TOLERANCE};
pub use validate::{check_plate, point_in_ring, LoopRole};

use serde::{Deserialize, Serialize};
use std::path::PathBuf;

/// What went wrong with a plate description. Positions are in the plate's length unit.
#[derive(Debug, thiserror::Error, PartialEq)]
pub enum GeometryError {
    /// A shape has a non-positive or non-finite size, or too few points.
    #[error("{0}")]
    BadShape(String),
    /// An annulus was given as a hole.
    #[error("hole {hole}: an annulus cannot be a hole (use a circle)")]
    AnnulusAsHole {
        /// One-based hole number.
        hole: usize,
    },
    /// One loop crosses or touches itself.
    #[error("{role} intersects itself near ({x:.6}, {y:.6})", x = at[0], y = at[1])]
    SelfIntersection {
        /// The loop.
        role: LoopRole,
        /// Approximate location.
        at: Point,
    },
    /// Two loops cross or touch.
    #[error("{first} and {second} cross near ({x:.6}, {y:.6})", x = at[0], y = at[1])]
    LoopsCross {
        /// First loop.
        first: LoopRole,
        /// Second loop.
        second: LoopRole,
        /// Approximate location.
        at: Point,
    },
    /// A hole lies outside the outer outline.
    #[error("hole {hole} lies outside the plate (its point ({x:.6}, {y:.6}) is not inside the outer outline)", x = at[0], y = at[1])]
    HoleOutside {
        /// One-based hole number.
        hole: usize,
        /// A point of the hole.
        at: Point,
    },
    /// A hole lies inside another hole.
    #[error("hole {inner} lies inside hole {outer}")]
    HoleInHole {
        /// One-based number of the enclosed hole.
        inner: usize,
        /// One-based number of the enclosing hole.
        outer: usize,
    },
    /// A cut's numbers are unusable.
    #[error("cut {cut}: {reason}")]
    BadCut {
        /// One-based cut number.
        cut: usize,
        /// What is wrong.
        reason: String,
    },
    /// A cut leaves nothing of the plate.
    #[error("cut {cut} removes the whole plate")]
    CutRemovesAll {
        /// One-based cut number.
        cut: usize,
    },
    /// A cut splits the plate into several pieces.
    #[error("cut {cut} splits the plate into {pieces} separate pieces; a plate must be one piece")]
    CutSplits {
        /// One-based cut number.
        cut: usize,
        /// How many pieces.
        pieces: usize,
    },
    /// The boundary alone needs more nodes than allowed at the requested edge length.
    #[error("the plate's boundary alone needs about {needed:.3e} nodes at this edge length, more than the node budget of {budget}; use a larger edge length or raise the budget")]
    TooManyBoundaryNodes {
        /// Nodes needed (may be infinite for absurd sizes).
        needed: f64,
        /// The budget.
        budget: usize,
    },
    /// The plate is so far from the origin that its coordinates cannot resolve its shape.
    #[error("the plate ({extent:.3e} across) lies {distance:.3e} from the origin; at that distance coordinates cannot resolve it: move it nearer to (0, 0)")]
    TooFarFromOrigin {
        /// Size of the plate.
        extent: f64,
        /// Largest coordinate magnitude.
        distance: f64,
    },
    /// An outline file could not be read.
    #[error("{path}: cannot read outline file: {reason}", path = path.display())]
    OutlineRead {
        /// The file.
        path: PathBuf,
        /// The system's reason.
        reason: String,
    },
    /// An outline file (SVG, GeoJSON) holds no usable outline.
    #[error("{path}: {reason}", path = path.display())]
    OutlineFormat {
        /// The file.
        path: PathBuf,
        /// What is wrong.
        reason: String,
    },
    /// An outline file has a malformed line.
    #[error("{path}:{line}: {reason}", path = path.display())]
    OutlineSyntax {
        /// The file.
        path: PathBuf,
        /// One-based line number.
        line: usize,
        /// What is wrong.
        reason: String,
    },
}

/// A plate as a user describes it: an outer shape, holes and cuts, in one length unit.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PlateSpec {
    /// The outer outline (an annulus brings its own hole).
    pub outer: Shape,
    /// Holes: wells, obstacles.
    #[serde(default)]
    pub holes: Vec<Shape>,
    /// Cuts applied to the outline in order.
    #[serde(default)]
    pub cuts: Vec<Cut>,
}

/// A plate discretised into boundary loops, ready for meshing.
#[derive(Clone, Debug)]
pub struct Plate {
    /// Outer loop, counter-clockwise.
    pub outer: Ring,
    /// Hole loops, clockwise.
    pub holes: Vec<Ring>,
    /// Exact area of the described plate, when known in closed form (no cuts).
    pub exact_area: Option<f64>,
    /// Exact boundary length (outer plus holes), when known in closed form (no cuts).
    pub exact_perimeter: Option<f64>,
}

impl Plate {
    /// All loops, outer first; loop `k` of a mesh's boundary tags is this order.
    pub fn loops(&self) -> impl Iterator<Item = &Ring> {
        std::iter::once(&self.outer).chain(self.holes.iter())
    }

    /// The smallest interior angle at a corner of any loop, in degrees (angles of the plate
    /// region, so a hole's corner is measured from the plate's side).
    pub fn smallest_corner_angle(&self) -> f64 {
        let mut smallest = 180.0_f64;
        for ring in self.loops() {
            let n = ring.len();
            for i in 0..n {
                let (a, b, c) = (ring[(i + n - 1) % n], ring[i], ring[(i + 1) % n]);
                let u = [a[0] - b[0], a[1] - b[1]];
                let v = [c[0] - b[0], c[1] - b[1]];
                let cross = v[0] * u[1] - v[1] * u[0];
                let dot = u[0] * v[0] + u[1] * v[1];
                // Angle measured counter-clockwise from v to u, which is the region's side for
                // counter-clockwise outer loops and clockwise holes.
                let mut ang = cross.atan2(dot).to_degrees();
                if ang < 0.0 {
                    ang += 360.0;
                }
                smallest = smallest.min(ang);
            }
        }
        smallest
    }

    /// Area enclosed by the discretised loops (outer minus holes).
    pub fn polygon_area(&self) -> f64 {
        signed_area(&self.outer).abs()
            - self.holes.iter().map(|h| signed_area(h).abs()).sum::<f64>()
    }
}

impl PlateSpec {
    /// Checks the description's numbers without discretising.
    pub fn check_numbers(&self) -> Result<(), GeometryError> {
        self.outer
            .check_numbers("plate")
            .map_err(GeometryError::BadShape)?;
        for (k, hole) in self.holes.iter().enumerate() {
            if matches!(hole, Shape::Annulus { .. }) {
                return Err(GeometryError::AnnulusAsHole { hole: k + 1 });
            }
            hole.check_numbers(&format!("hole {}", k + 1))
                .map_err(GeometryError::BadShape)?;
        }
        for (k, c) in self.cuts.iter().enumerate() {
            c.check_numbers()
                .map_err(|reason| GeometryError::BadCut { cut: k + 1, reason })?;
        }
        Ok(())
    }

    /// Discretises every loop at the local target edge length `h(x)`, with at most
    /// `max_nodes` boundary nodes in all, and checks the result.
    pub fn discretise(
        &self,
        h: &dyn Fn(Point) -> f64,
        max_nodes: usize,
    ) -> Result<Plate, GeometryError> {
        self.check_numbers()?;
        let too_many = |e: TooManyNodes| GeometryError::TooManyBoundaryNodes {
            needed: e.needed,
            budget: max_nodes,
        };
        let mut outer_rings = shape_rings(&self.outer, h, max_nodes).map_err(too_many)?;
        let mut used: usize = outer_rings.iter().map(Vec::len).sum();
        let mut outer = outer_rings.remove(0);
        let mut holes = outer_rings;
        for hole in &self.holes {
            let rings = shape_rings(hole, h, max_nodes.saturating_sub(used)).map_err(|e| {
                too_many(TooManyNodes {
                    needed: e.needed + used as f64,
                })
            })?;
            used += rings.iter().map(Vec::len).sum::<usize>();
            holes.extend(rings);
        }
        check_resolution(&outer)?;
        orient_rings(&mut outer, &mut holes);
        check_plate(&outer, &holes)?;
        let no_cuts = self.cuts.is_empty();
        let (exact_area, exact_perimeter) = if no_cuts {
            let area = self.outer.area() - self.holes.iter().map(Shape::area).sum::<f64>();
            let per = self.outer.perimeter() + self.holes.iter().map(Shape::perimeter).sum::<f64>();
            (Some(area), Some(per))
        } else {
            (None, None)
        };
        for (k, c) in self.cuts.iter().enumerate() {
            let (o, hs) = c.apply(k + 1, &outer, &holes, h, max_nodes)?;
            outer = o;
            holes = hs;
            orient_rings(&mut outer, &mut holes);
            check_plate(&outer, &holes)?;
        }
        Ok(Plate {
            outer,
            holes,
            exact_area,
            exact_perimeter,
        })
    }
}

/// Refuses plates whose size is below what their coordinates can resolve: with |x| ~ D the
/// spacing of doubles is about 2.2e-16·D, so a plate must span many such steps.
fn check_resolution(outer: &Ring) -> Result<(), GeometryError> {
    let (mut lo, mut hi, mut far) = ([f64::MAX; 2], [f64::MIN; 2], 0.0_f64);
    for p in outer {
        for d in 0..2 {
            lo[d] = lo[d].min(p[d]);
            hi[d] = hi[d].max(p[d]);
            far = far.max(p[d].abs());
        }
    }
    let extent = (hi[0] - lo[0]).max(hi[1] - lo[1]);
    if extent < 1e-9 * far {
        return Err(GeometryError::TooFarFromOrigin {
            extent,
            distance: far,
        });
    }
    Ok(())
}

/// Outer loop counter-clockwise, holes clockwise.
fn orient_rings(outer: &mut Ring, holes: &mut [Ring]) {
    if signed_area(outer) < 0.0 {
        outer.reverse();
    }
    for h in holes.iter_mut() {
        if signed_area(h) > 0.0 {
            h.reverse();
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn annulus_discretises_into_two_loops_with_exact_area() {
        let spec = PlateSpec {
            outer: Shape::Annulus {
                centre: [0.0, 0.0],
                outer: 2.0,
                inner: 1.0,
            },
            holes: vec![],
            cuts: vec![],
        };
        let plate = spec.discretise(&|_| 0.05, usize::MAX).unwrap();
        assert_eq!(plate.holes.len(), 1);
        let exact = std::f64::consts::PI * 3.0;
        assert_eq!(plate.exact_area, Some(exact));
        assert!((plate.polygon_area() - exact).abs() / exact < 1e-3);
        assert!(signed_area(&plate.outer) > 0.0 && signed_area(&plate.holes[0]) < 0.0);
    }

    #[test]
    fn corner_angle_of_a_square_with_square_hole() {
        let sq = |h: f64| Shape::Rectangle {
            centre: [0.0, 0.0],
            width: h,
            height: h,
        };
        let spec = PlateSpec {
            outer: sq(4.0),
            holes: vec![sq(1.0)],
            cuts: vec![],
        };
        let plate = spec.discretise(&|_| 0.5, usize::MAX).unwrap();
        // Outer corners are 90° from inside; the hole's corners are 270° seen from the plate.
        assert!((plate.smallest_corner_angle() - 90.0).abs() < 1e-9);
    }

    #[test]
    fn annulus_hole_is_refused() {
        let spec = PlateSpec {
            outer: Shape::Circle {
                centre: [0.0, 0.0],
                radius: 5.0,
            },
            holes: vec![Shape::Annulus {
                centre: [0.0, 0.0],
                outer: 2.0,
                inner: 1.0,
            }],
            cuts: vec![],
        };
        assert_eq!(
            spec.check_numbers(),
            Err(GeometryError::AnnulusAsHole { hole: 1 })
        );
    }
}
