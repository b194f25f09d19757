//! Plate shapes: what a user describes, with exact area and perimeter where known.

use serde::{Deserialize, Serialize};
use std::f64::consts::PI;

/// A point in the plate's length unit.
pub type Point = [f64; 2];

/// One closed shape, used as the plate's outer outline or as a hole.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(tag = "shape", rename_all = "snake_case", deny_unknown_fields)]
pub enum Shape {
    /// A disk of the given radius.
    Circle {
        /// Centre of the disk.
        #[serde(default)]
        centre: Point,
        /// Radius.
        radius: f64,
    },
    /// An axis-aligned ellipse with semi-axes along x and y.
    Ellipse {
        /// Centre of the ellipse.
        #[serde(default)]
        centre: Point,
        /// Semi-axis along x.
        semi_x: f64,
        /// Semi-axis along y.
        semi_y: f64,
    },
    /// An axis-aligned rectangle.
    Rectangle {
        /// Centre of the rectangle.
        #[serde(default)]
        centre: Point,
        /// Extent along x.
        width: f64,
        /// Extent along y.
        height: f64,
    },
    /// A ring between two concentric circles (only as an outer outline: it brings its own hole).
    Annulus {
        /// Centre of both circles.
        #[serde(default)]
        centre: Point,
        /// Outer radius.
        outer: f64,
        /// Inner radius (the hole).
        inner: f64,
    },
    /// A simple polygon given by its corners in order (either orientation).
    Polygon {
        /// Corners; the last one joins the first.
        points: Vec<Point>,
    },
}

impl Shape {
    /// A short name for messages.
    pub fn kind(&self) -> &'static str {
        match self {
            Shape::Circle { .. } => "circle",
            Shape::Ellipse { .. } => "ellipse",
            Shape::Rectangle { .. } => "rectangle",
            Shape::Annulus { .. } => "annulus",
            Shape::Polygon { .. } => "polygon",
        }
    }

    /// Exact enclosed area (for the annulus: the ring's area).
    pub fn area(&self) -> f64 {
        match self {
            Shape::Circle { radius, .. } => PI * radius * radius,
            Shape::Ellipse { semi_x, semi_y, .. } => PI * semi_x * semi_y,
            Shape::Rectangle { width, height, .. } => width * height,
            Shape::Annulus { outer, inner, .. } => PI * (outer * outer - inner * inner),
            Shape::Polygon { points } => signed_area(points).abs(),
        }
    }

    /// Length of the boundary (for the annulus: both circles). The ellipse uses Ramanujan's
    /// second approximation, S. Ramanujan, "Modular equations and approximations to π",
    /// Quart. J. Math. 45 (1914) 350–372, whose relative error is below 1e-9 for the aspect
    /// ratios of real plates; that is far below any mesh's discretisation error.
    pub fn perimeter(&self) -> f64 {
        match self {
            Shape::Circle { radius, .. } => 2.0 * PI * radius,
            Shape::Ellipse { semi_x, semi_y, .. } => ramanujan_perimeter(*semi_x, *semi_y),
            Shape::Rectangle { width, height, .. } => 2.0 * (width + height),
            Shape::Annulus { outer, inner, .. } => 2.0 * PI * (outer + inner),
            Shape::Polygon { points } => polyline_length(points, true),
        }
    }

    /// Checks the numbers of the shape (sizes positive and finite); `role` names it in messages.
    pub fn check_numbers(&self, role: &str) -> Result<(), String> {
        let positive = |name: &str, v: f64| -> Result<(), String> {
            if v.is_finite() && v > 0.0 {
                Ok(())
            } else {
                Err(format!(
                    "{role}: {} {name} must be a positive number, got {v}",
                    self.kind()
                ))
            }
        };
        let finite_point = |p: &Point| -> Result<(), String> {
            if p[0].is_finite() && p[1].is_finite() {
                Ok(())
            } else {
                Err(format!(
                    "{role}: coordinates must be finite, got ({}, {})",
                    p[0], p[1]
                ))
            }
        };
        match self {
            Shape::Circle { centre, radius } => {
                finite_point(centre)?;
                positive("radius", *radius)
            }
            Shape::Ellipse {
                centre,
                semi_x,
                semi_y,
            } => {
                finite_point(centre)?;
                positive("semi-axis x", *semi_x)?;
                positive("semi-axis y", *semi_y)
            }
            Shape::Rectangle {
                centre,
                width,
                height,
            } => {
                finite_point(centre)?;
                positive("width", *width)?;
                positive("height", *height)
            }
            Shape::Annulus {
                centre,
                outer,
                inner,
            } => {
                finite_point(centre)?;
                positive("outer radius", *outer)?;
                positive("inner radius", *inner)?;
                if inner >= outer {
                    return Err(format!(
                        "{role}: annulus inner radius {inner} must be smaller than outer radius {outer}"
                    ));
                }
                Ok(())
            }
            Shape::Polygon { points } => {
                points.iter().try_for_each(finite_point)?;
                let mut distinct = points.clone();
                distinct.dedup();
                if distinct.len() > 1 && distinct.first() == distinct.last() {
                    distinct.pop();
                }
                if distinct.len() < 3 {
                    return Err(format!(
                        "{role}: a polygon needs at least three distinct points, got {}",
                        distinct.len()
                    ));
                }
                if signed_area(&distinct).abs() == 0.0 {
                    // A bow tie's two lobes cancel: say where its edges cross.
                    if let Some(at) = super::validate::self_crossing(&distinct) {
                        return Err(format!(
                            "{role}: the polygon crosses itself near ({:.6}, {:.6})",
                            at[0], at[1]
                        ));
                    }
                    return Err(format!("{role}: the polygon encloses no area"));
                }
                Ok(())
            }
        }
    }
}

/// Ramanujan's second approximation of the perimeter of an ellipse (reference in
/// [`Shape::perimeter`]).
pub fn ramanujan_perimeter(a: f64, b: f64) -> f64 {
    let h = ((a - b) / (a + b)).powi(2);
    PI * (a + b) * (1.0 + 3.0 * h / (10.0 + (4.0 - 3.0 * h).sqrt()))
}

/// Shoelace formula: positive for counter-clockwise loops.
pub fn signed_area(points: &[Point]) -> f64 {
    let n = points.len();
    let mut s = 0.0;
    for i in 0..n {
        let a = points[i];
        let b = points[(i + 1) % n];
        s += a[0] * b[1] - b[0] * a[1];
    }
    0.5 * s
}

/// Length of a polyline, closed or not.
pub fn polyline_length(points: &[Point], closed: bool) -> f64 {
    let n = points.len();
    let segs = if closed { n } else { n.saturating_sub(1) };
    (0..segs)
        .map(|i| dist(points[i], points[(i + 1) % n]))
        .sum()
}

/// Euclidean distance.
pub fn dist(a: Point, b: Point) -> f64 {
    (a[0] - b[0]).hypot(a[1] - b[1])
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn circle_limit_of_ramanujan() {
        // For a = b the formula reduces to 2πa exactly (h = 0).
        assert_eq!(ramanujan_perimeter(3.0, 3.0), 2.0 * PI * 3.0);
    }

    #[test]
    fn ramanujan_against_complete_elliptic_integral() {
        // Perimeter 4a E(e) with E from the arithmetic-geometric mean series
        // (M. Abramowitz, I. A. Stegun, Handbook of Mathematical Functions, 1964, eq. 17.6.3-17.6.4).
        let (a, b) = (5.0_f64, 3.0_f64);
        let (mut an, mut bn) = (a, b);
        let mut c2sum = 0.5 * (a * a - b * b);
        let mut pow = 1.0;
        for _ in 0..10 {
            let cn = 0.5 * (an - bn);
            let (na, nb) = (0.5 * (an + bn), (an * bn).sqrt());
            an = na;
            bn = nb;
            pow *= 2.0;
            c2sum += pow * 0.5 * cn * cn;
        }
        // 4aE(e) = 2π/(a+b... ) via AGM: P = 2π (a² − Σ 2^(n−1) c_n²) / AGM(a,b)
        let exact = 2.0 * PI * (a * a - c2sum) / an;
        let approx = ramanujan_perimeter(a, b);
        assert!((approx - exact).abs() / exact < 1e-9, "{approx} vs {exact}");
    }

    #[test]
    fn polygon_numbers_are_checked() {
        let p = Shape::Polygon {
            points: vec![[0.0, 0.0], [1.0, 0.0], [0.0, 0.0]],
        };
        assert!(p
            .check_numbers("plate")
            .unwrap_err()
            .contains("three distinct"));
        let c = Shape::Circle {
            centre: [0.0, 0.0],
            radius: -1.0,
        };
        assert!(c.check_numbers("plate").unwrap_err().contains("positive"));
        let a = Shape::Annulus {
            centre: [0.0, 0.0],
            outer: 1.0,
            inner: 2.0,
        };
        assert!(a.check_numbers("plate").is_err());
    }
}
