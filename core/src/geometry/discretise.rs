//! Turning shapes into closed polylines whose segments follow a local target edge length.
//!
//! Curved boundaries are sampled on the true curve here, before meshing, so that every
//! boundary node of the final mesh lies on the curve; refinement would otherwise split chords.

use super::shape::{dist, Point, Shape};
use std::f64::consts::PI;

/// A closed polyline (last point joins the first), counter-clockwise for outer outlines.
pub type Ring = Vec<Point>;

/// A ring would need more nodes than the caller allows (about `needed`).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct TooManyNodes {
    /// Nodes the ring would need (may be infinite for absurd sizes).
    pub needed: f64,
}

/// Cumulative number of target lengths along a path `p(t)`, `t ∈ [0, 1]`, at `samples`
/// uniform parameter steps (chord length over `h` at the chord's midpoint).
fn cumulative_count(
    p: &dyn Fn(f64) -> Point,
    h: &dyn Fn(Point) -> f64,
    samples: usize,
) -> Vec<f64> {
    let mut cum = Vec::with_capacity(samples + 1);
    cum.push(0.0);
    let mut prev = p(0.0);
    for k in 1..=samples {
        let q = p(k as f64 / samples as f64);
        let mid = [(q[0] + prev[0]) * 0.5, (q[1] + prev[1]) * 0.5];
        let last = cum[k - 1];
        cum.push(last + dist(q, prev) / h(mid));
        prev = q;
    }
    cum
}

/// The parameter where the cumulative count `cum` reaches `target` (linear within a step);
/// `j` carries the search position between calls with increasing targets.
fn parameter_at(cum: &[f64], target: f64, j: &mut usize) -> f64 {
    let samples = cum.len() - 1;
    while *j + 1 < samples && cum[*j + 1] < target {
        *j += 1;
    }
    let span = cum[*j + 1] - cum[*j];
    let frac = if span > 0.0 {
        (target - cum[*j]) / span
    } else {
        0.0
    };
    (*j as f64 + frac) / samples as f64
}

/// Samples a parametric closed curve `p(t)`, `t ∈ [0, 1)`, with spacing `h(p)`: nodes at equal
/// steps of the number of target lengths (equidistribution of arclength / h).
fn sample_closed_curve(
    curve: &dyn Fn(f64) -> Point,
    h: &dyn Fn(Point) -> f64,
    cap: usize,
) -> Result<Ring, TooManyNodes> {
    let cum = cumulative_count(curve, h, 4096);
    let total = cum[cum.len() - 1];
    // Checked before allocating: an absurdly small size must fail, not exhaust memory.
    if total.is_nan() || total > cap as f64 {
        return Err(TooManyNodes { needed: total });
    }
    let n = (total.round() as usize).max(8);
    let mut j = 0;
    Ok((0..n)
        .map(|i| curve(parameter_at(&cum, total * i as f64 / n as f64, &mut j)))
        .collect())
}

/// Subdivides each straight segment of a closed polygon so no piece is longer than the local
/// target length; corners are kept exactly.
pub fn subdivide_polygon(
    corners: &[Point],
    h: &dyn Fn(Point) -> f64,
    cap: usize,
) -> Result<Ring, TooManyNodes> {
    let n = corners.len();
    let mut ring = Vec::new();
    for i in 0..n {
        let a = corners[i];
        let b = corners[(i + 1) % n];
        ring.push(a);
        let along = |t: f64| [a[0] + t * (b[0] - a[0]), a[1] + t * (b[1] - a[1])];
        // Integrate 1/h along the segment to honour grading near inoculation spots.
        let cum = cumulative_count(&along, h, 64);
        let total = cum[cum.len() - 1];
        // `ring` already holds this segment's start, which is one of its `total` pieces.
        let so_far = (ring.len() - 1) as f64;
        if total.is_nan() || so_far + total > cap as f64 {
            let rest: f64 = (i + 1..n)
                .map(|k| dist(corners[k], corners[(k + 1) % n]) / h(corners[k]))
                .sum();
            return Err(TooManyNodes {
                needed: so_far + total + rest,
            });
        }
        let pieces = total.round().max(1.0) as usize;
        let mut j = 0;
        for s in 1..pieces {
            ring.push(along(parameter_at(
                &cum,
                total * s as f64 / pieces as f64,
                &mut j,
            )));
        }
    }
    Ok(ring)
}

/// Closed polylines of a shape: one ring, or two for an annulus (outer first, then the hole).
pub fn shape_rings(
    shape: &Shape,
    h: &dyn Fn(Point) -> f64,
    cap: usize,
) -> Result<Vec<Ring>, TooManyNodes> {
    match shape {
        Shape::Circle { centre, radius } => shape_rings(
            &Shape::Ellipse {
                centre: *centre,
                semi_x: *radius,
                semi_y: *radius,
            },
            h,
            cap,
        ),
        Shape::Ellipse {
            centre,
            semi_x,
            semi_y,
        } => {
            let (c, a, b) = (*centre, *semi_x, *semi_y);
            Ok(vec![sample_closed_curve(
                &|t| {
                    [
                        c[0] + a * (2.0 * PI * t).cos(),
                        c[1] + b * (2.0 * PI * t).sin(),
                    ]
                },
                h,
                cap,
            )?])
        }
        Shape::Rectangle {
            centre,
            width,
            height,
        } => {
            let (c, w, hh) = (*centre, 0.5 * width, 0.5 * height);
            let corners = [
                [c[0] - w, c[1] - hh],
                [c[0] + w, c[1] - hh],
                [c[0] + w, c[1] + hh],
                [c[0] - w, c[1] + hh],
            ];
            Ok(vec![subdivide_polygon(&corners, h, cap)?])
        }
        Shape::Annulus {
            centre,
            outer,
            inner,
        } => {
            let mut rings = shape_rings(
                &Shape::Circle {
                    centre: *centre,
                    radius: *outer,
                },
                h,
                cap,
            )?;
            let used = rings[0].len();
            rings.extend(shape_rings(
                &Shape::Circle {
                    centre: *centre,
                    radius: *inner,
                },
                h,
                cap.saturating_sub(used),
            )?);
            Ok(rings)
        }
        Shape::Polygon { points } => {
            let mut corners = points.clone();
            corners.dedup();
            if corners.len() > 1 && corners.first() == corners.last() {
                corners.pop();
            }
            Ok(vec![subdivide_polygon(&corners, h, cap)?])
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn circle_nodes_lie_on_the_circle_at_the_target_spacing() {
        let ring = shape_rings(
            &Shape::Circle {
                centre: [1.0, 2.0],
                radius: 3.0,
            },
            &|_| 0.1,
            usize::MAX,
        )
        .unwrap()
        .remove(0);
        // 2π·3 / 0.1 ≈ 188.5 segments.
        assert_eq!(ring.len(), 188);
        for p in &ring {
            assert!((dist(*p, [1.0, 2.0]) - 3.0).abs() < 1e-12);
        }
        for i in 0..ring.len() {
            let d = dist(ring[i], ring[(i + 1) % ring.len()]);
            assert!((d - 0.1).abs() < 0.002, "segment {i} has length {d}");
        }
    }

    #[test]
    fn polygon_corners_are_kept_and_segments_split() {
        let sq = [[0.0, 0.0], [1.0, 0.0], [1.0, 1.0], [0.0, 1.0]];
        let ring = subdivide_polygon(&sq, &|_| 0.25, usize::MAX).unwrap();
        assert_eq!(ring.len(), 16);
        for c in sq {
            assert!(ring.contains(&c));
        }
    }

    #[test]
    fn absurd_sizes_fail_before_allocating() {
        let disk = Shape::Circle {
            centre: [0.0, 0.0],
            radius: 10.0,
        };
        let err = shape_rings(&disk, &|_| 1e-300, 1000).unwrap_err();
        assert!(err.needed > 1e300);
        let sq = [[0.0, 0.0], [1.0, 0.0], [1.0, 1.0], [0.0, 1.0]];
        assert!(subdivide_polygon(&sq, &|_| 1e-300, 1000).is_err());
        assert_eq!(
            subdivide_polygon(&sq, &|_| 0.25, 15).unwrap_err().needed,
            16.0
        );
    }
}
