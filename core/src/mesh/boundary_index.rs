//! A uniform grid over boundary segments: distance to the boundary, inside tests and the loop
//! nearest to a point, each in roughly constant time.

use crate::geometry::{Point, Ring};

/// Segments of all loops bucketed by grid cell.
pub struct BoundaryIndex {
    /// Segments as (start, end, loop, index within the loop).
    segs: Vec<(Point, Point, usize, usize)>,
    longest: f64,
    origin: Point,
    cell: f64,
    cols: usize,
    rows: usize,
    cells: Vec<Vec<u32>>,
}

fn seg_distance(p: Point, a: Point, b: Point) -> f64 {
    let (dx, dy) = (b[0] - a[0], b[1] - a[1]);
    let len2 = dx * dx + dy * dy;
    let t = if len2 > 0.0 {
        (((p[0] - a[0]) * dx + (p[1] - a[1]) * dy) / len2).clamp(0.0, 1.0)
    } else {
        0.0
    };
    (p[0] - a[0] - t * dx).hypot(p[1] - a[1] - t * dy)
}

impl BoundaryIndex {
    /// Indexes the segments of `loops`; loop `k` is the k-th ring given.
    pub fn new<'a>(loops: impl Iterator<Item = &'a Ring>) -> Self {
        let mut segs = Vec::new();
        for (k, ring) in loops.enumerate() {
            let n = ring.len();
            for i in 0..n {
                segs.push((ring[i], ring[(i + 1) % n], k, i));
            }
        }
        let (mut lo, mut hi) = ([f64::MAX; 2], [f64::MIN; 2]);
        for (a, _, _, _) in &segs {
            for d in 0..2 {
                lo[d] = lo[d].min(a[d]);
                hi[d] = hi[d].max(a[d]);
            }
        }
        let w = (hi[0] - lo[0]).max(1e-300);
        let h = (hi[1] - lo[1]).max(1e-300);
        // About two segments per occupied cell for a boundary of n segments.
        let cell = ((w + h) / (segs.len() as f64).max(1.0) * 2.0).max(w.max(h) / 4096.0);
        let cols = (w / cell).ceil() as usize + 1;
        let rows = (h / cell).ceil() as usize + 1;
        let longest = segs
            .iter()
            .map(|(a, b, _, _)| (a[0] - b[0]).hypot(a[1] - b[1]))
            .fold(0.0, f64::max);
        let mut index = BoundaryIndex {
            longest,
            segs,
            origin: lo,
            cell,
            cols,
            rows,
            cells: vec![Vec::new(); cols * rows],
        };
        for (s, &(a, b, _, _)) in index.segs.iter().enumerate() {
            let (c0, r0) = index.cell_of([a[0].min(b[0]), a[1].min(b[1])]);
            let (c1, r1) = index.cell_of([a[0].max(b[0]), a[1].max(b[1])]);
            for r in r0..=r1 {
                for c in c0..=c1 {
                    index.cells[r * cols + c].push(s as u32);
                }
            }
        }
        index
    }

    fn cell_of(&self, p: Point) -> (usize, usize) {
        let c = ((p[0] - self.origin[0]) / self.cell)
            .floor()
            .clamp(0.0, (self.cols - 1) as f64) as usize;
        let r = ((p[1] - self.origin[1]) / self.cell)
            .floor()
            .clamp(0.0, (self.rows - 1) as f64) as usize;
        (c, r)
    }

    /// The nearest segment within `radius` of `p`: (distance, loop).
    pub fn nearest_within(&self, p: Point, radius: f64) -> Option<(f64, usize)> {
        let (c0, r0) = self.cell_of([p[0] - radius, p[1] - radius]);
        let (c1, r1) = self.cell_of([p[0] + radius, p[1] + radius]);
        let mut best: Option<(f64, usize)> = None;
        for r in r0..=r1 {
            for c in c0..=c1 {
                for &s in &self.cells[r * self.cols + c] {
                    let (a, b, k, _) = self.segs[s as usize];
                    let d = seg_distance(p, a, b);
                    if d <= radius && best.is_none_or(|(bd, _)| d < bd) {
                        best = Some((d, k));
                    }
                }
            }
        }
        best
    }

    /// A segment whose diametral circle holds `p` (so `p` must not become a node: the angle it
    /// makes over that segment would be obtuse), as (loop, index within the loop).
    pub fn encroached_by(&self, p: Point) -> Option<(usize, usize)> {
        let r = 0.5 * self.longest;
        let (c0, r0) = self.cell_of([p[0] - r, p[1] - r]);
        let (c1, r1) = self.cell_of([p[0] + r, p[1] + r]);
        for row in r0..=r1 {
            for c in c0..=c1 {
                for &s in &self.cells[row * self.cols + c] {
                    let (a, b, k, i) = self.segs[s as usize];
                    // Inside the circle on ab as diameter: the angle apb exceeds 90°.
                    if (a[0] - p[0]) * (b[0] - p[0]) + (a[1] - p[1]) * (b[1] - p[1]) < 0.0 {
                        return Some((k, i));
                    }
                }
            }
        }
        None
    }

    /// The loop nearest to `p` (searching outward until one is found).
    pub fn nearest_loop(&self, p: Point) -> usize {
        let mut radius = self.cell;
        loop {
            if let Some((_, k)) = self.nearest_within(p, radius) {
                return k;
            }
            if radius > 1e3 * self.cell * (self.cols + self.rows) as f64 {
                return 0;
            }
            radius *= 2.0;
        }
    }

    /// Even-odd inside test over all loops (inside the outer loop and outside every hole).
    pub fn contains(&self, p: Point) -> bool {
        if p[1] < self.origin[1] || p[1] > self.origin[1] + self.cell * self.rows as f64 {
            return false;
        }
        let (c0, r) = self.cell_of(p);
        // Every segment that crosses the ray y = p.y, x > p.x is listed in some cell of this
        // row to the right of p; gather them once each, then count crossings exactly as plain
        // ray casting does (no per-cell x ranges, whose float edges could drop a crossing).
        let mut candidates: Vec<u32> = self.cells[r * self.cols + c0..(r + 1) * self.cols]
            .iter()
            .flatten()
            .copied()
            .collect();
        candidates.sort_unstable();
        candidates.dedup();
        let mut inside = false;
        for s in candidates {
            let (a, b, _, _) = self.segs[s as usize];
            if (a[1] > p[1]) != (b[1] > p[1]) {
                let x = a[0] + (p[1] - a[1]) / (b[1] - a[1]) * (b[0] - a[0]);
                if p[0] < x {
                    inside = !inside;
                }
            }
        }
        inside
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::geometry::{point_in_ring, shape_rings, Shape};

    #[test]
    fn contains_agrees_with_plain_ray_casting() {
        let outer = shape_rings(
            &Shape::Circle {
                centre: [0.0, 0.0],
                radius: 1.0,
            },
            &|_| 0.05,
            usize::MAX,
        )
        .unwrap()
        .remove(0);
        let hole = shape_rings(
            &Shape::Circle {
                centre: [0.3, 0.1],
                radius: 0.3,
            },
            &|_| 0.05,
            usize::MAX,
        )
        .unwrap()
        .remove(0);
        let index = BoundaryIndex::new([&outer, &hole].into_iter());
        let mut state = 12345u64;
        let mut rnd = || {
            state = state
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            (state >> 11) as f64 / (1u64 << 53) as f64 * 2.4 - 1.2
        };
        for _ in 0..5000 {
            let p = [rnd(), rnd()];
            let expected = point_in_ring(p, &outer) && !point_in_ring(p, &hole);
            assert_eq!(index.contains(p), expected, "{p:?}");
        }
        // Points on the grid's own lines, where crossings fall on cell edges.
        for k in 0..200 {
            let p = [
                index.origin[0] + index.cell * (k % 20) as f64,
                index.origin[1] + index.cell * (k / 20) as f64,
            ];
            let expected = point_in_ring(p, &outer) && !point_in_ring(p, &hole);
            assert_eq!(index.contains(p), expected, "{p:?}");
        }
        let square = vec![[0.0, 0.0], [10.0, 0.0], [10.0, 10.0], [0.0, 10.0]];
        let sq = BoundaryIndex::new([&square].into_iter());
        assert!(sq.contains([5.0, 5.0]));
        assert!(!sq.contains([-3.0, 5.0]));
        assert_eq!(index.nearest_loop([0.3, 0.1]), 1);
        assert_eq!(index.nearest_loop([-0.9, 0.0]), 0);
    }
}
