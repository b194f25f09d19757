//! The target edge length over the plate: uniform far away, finer near inoculation spots.

use crate::geometry::{dist, Point};
use serde::{Deserialize, Serialize};

/// A point near which the mesh is refined (an inoculation spot), with its local edge length.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct Spot {
    /// Where.
    pub centre: Point,
    /// Target edge length at the centre.
    pub size: f64,
}

/// Target edge length `h(x) = min(far, minᵢ(sizeᵢ + grading·|x − cᵢ|))`.
#[derive(Clone, Debug, PartialEq)]
pub struct SizeField {
    /// Edge length away from every spot.
    pub far: f64,
    /// Refinement spots.
    pub spots: Vec<Spot>,
    /// How fast the edge length grows with distance from a spot (length per length).
    pub grading: f64,
}

impl SizeField {
    /// The target edge length at `p`.
    pub fn at(&self, p: Point) -> f64 {
        self.spots
            .iter()
            .map(|s| s.size + self.grading * dist(p, s.centre))
            .fold(self.far, f64::min)
    }

    /// The smallest target edge length anywhere.
    pub fn smallest(&self) -> f64 {
        self.spots.iter().map(|s| s.size).fold(self.far, f64::min)
    }

    /// Estimated node count for a plate of area `area`: an equilateral mesh of edge `h` has
    /// 2/(√3 h²) nodes per unit area (common practice). Spots are integrated radially and may
    /// overlap or leave the plate, so this over-estimates; it only guards the node budget early.
    pub fn estimated_nodes(&self, area: f64) -> f64 {
        let density = |h: f64| 2.0 / (3f64.sqrt() * h * h);
        let mut n = area * density(self.far);
        for s in &self.spots {
            if s.size >= self.far || self.grading <= 0.0 {
                // Without grading a spot's size would cover the whole plate.
                n += area * (density(s.size.min(self.far)) - density(self.far)).max(0.0);
                continue;
            }
            let r_end = (self.far - s.size) / self.grading;
            let steps = 200;
            let mut extra = 0.0;
            for k in 0..steps {
                let r = (k as f64 + 0.5) / steps as f64 * r_end;
                let h = s.size + self.grading * r;
                extra += (density(h) - density(self.far)) * 2.0 * std::f64::consts::PI * r * r_end
                    / steps as f64;
            }
            n += extra.min(area * density(s.size));
        }
        n
    }

    /// Seed points on rings around each spot, spaced at the local target length, so the
    /// refinement starts from a graded point cloud; `keep` decides which seeds are used. Rings
    /// stop where the size reaches `far`, beyond `reach` from the spot (the plate's extent), or
    /// once more than `limit` seeds are kept (the caller then reports the node budget).
    pub fn spot_seeds(
        &self,
        keep: &dyn Fn(Point, f64) -> bool,
        reach: f64,
        limit: usize,
    ) -> Vec<Point> {
        let mut seeds = Vec::new();
        for (i, s) in self.spots.iter().enumerate() {
            // A seed belongs to the spot that sets the size there, so rings of neighbouring
            // spots do not pile up on each other.
            let owned = |p: Point| {
                let mine = s.size + self.grading * dist(p, s.centre);
                self.spots
                    .iter()
                    .enumerate()
                    .all(|(j, o)| j == i || mine <= o.size + self.grading * dist(p, o.centre))
            };
            let push = |p: Point, seeds: &mut Vec<Point>| {
                let h = self.at(p);
                if owned(p) && keep(p, h) {
                    seeds.push(p);
                }
            };
            push(s.centre, &mut seeds);
            let mut r = 0.0;
            let mut ring = 0;
            loop {
                let h = (s.size + self.grading * r).min(self.far);
                r += h;
                if s.size + self.grading * r >= self.far || r > reach {
                    break;
                }
                let h_here = s.size + self.grading * r;
                let n = ((2.0 * std::f64::consts::PI * r / h_here).round() as usize).max(6);
                // Stagger alternate rings by half a step so rings do not line up radially.
                let phase = if ring % 2 == 0 { 0.0 } else { 0.5 };
                for k in 0..n {
                    let a = 2.0 * std::f64::consts::PI * (k as f64 + phase) / n as f64;
                    push(
                        [s.centre[0] + r * a.cos(), s.centre[1] + r * a.sin()],
                        &mut seeds,
                    );
                }
                ring += 1;
                if seeds.len() > limit {
                    return seeds;
                }
            }
        }
        seeds
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn size_grows_away_from_spots_and_caps_at_far() {
        let f = SizeField {
            far: 1.0,
            spots: vec![Spot {
                centre: [0.0, 0.0],
                size: 0.1,
            }],
            grading: 0.3,
        };
        assert_eq!(f.at([0.0, 0.0]), 0.1);
        assert!((f.at([1.0, 0.0]) - 0.4).abs() < 1e-12);
        assert_eq!(f.at([10.0, 0.0]), 1.0);
        assert_eq!(f.smallest(), 0.1);
    }

    #[test]
    fn seeds_are_spaced_at_the_local_size() {
        let f = SizeField {
            far: 1.0,
            spots: vec![Spot {
                centre: [0.0, 0.0],
                size: 0.1,
            }],
            grading: 0.3,
        };
        let seeds = f.spot_seeds(&|_, _| true, 100.0, usize::MAX);
        assert!(seeds.len() > 50);
        for p in &seeds {
            let h = f.at(*p);
            let nearest = seeds
                .iter()
                .filter(|q| *q != p)
                .map(|q| dist(*p, *q))
                .fold(f64::MAX, f64::min);
            assert!(
                nearest > 0.4 * h && nearest < 1.6 * h,
                "seed {p:?}: nearest {nearest}, h {h}"
            );
        }
    }
}
