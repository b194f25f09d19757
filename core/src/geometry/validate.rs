//! Topological checks on discretised outlines: simple loops, holes inside the plate and apart.

use super::discretise::Ring;
use super::shape::Point;
use super::GeometryError;

/// Which loop of a plate: the outer outline or hole `k` (counted from 1 in messages).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum LoopRole {
    /// The outer outline.
    Outer,
    /// A hole, zero-based index.
    Hole(usize),
}

impl std::fmt::Display for LoopRole {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            LoopRole::Outer => write!(f, "the outer outline"),
            LoopRole::Hole(k) => write!(f, "hole {}", k + 1),
        }
    }
}

/// Orientation of the triple (a, b, c): > 0 counter-clockwise.
fn orient(a: Point, b: Point, c: Point) -> f64 {
    (b[0] - a[0]) * (c[1] - a[1]) - (b[1] - a[1]) * (c[0] - a[0])
}

/// Whether closed segments ab and cd share a point (touching counts).
fn segments_meet(a: Point, b: Point, c: Point, d: Point) -> bool {
    let (o1, o2, o3, o4) = (
        orient(a, b, c),
        orient(a, b, d),
        orient(c, d, a),
        orient(c, d, b),
    );
    let within = |p: Point, q: Point, r: Point| {
        r[0] >= p[0].min(q[0])
            && r[0] <= p[0].max(q[0])
            && r[1] >= p[1].min(q[1])
            && r[1] <= p[1].max(q[1])
    };
    if ((o1 > 0.0 && o2 < 0.0) || (o1 < 0.0 && o2 > 0.0))
        && ((o3 > 0.0 && o4 < 0.0) || (o3 < 0.0 && o4 > 0.0))
    {
        return true;
    }
    (o1 == 0.0 && within(a, b, c))
        || (o2 == 0.0 && within(a, b, d))
        || (o3 == 0.0 && within(c, d, a))
        || (o4 == 0.0 && within(c, d, b))
}

/// Even-odd point-in-polygon test (ray casting).
pub fn point_in_ring(p: Point, ring: &[Point]) -> bool {
    let n = ring.len();
    if n == 0 {
        return false;
    }
    let mut inside = false;
    let mut j = n - 1;
    for i in 0..n {
        let (a, b) = (ring[i], ring[j]);
        if (a[1] > p[1]) != (b[1] > p[1]) {
            let x = a[0] + (p[1] - a[1]) / (b[1] - a[1]) * (b[0] - a[0]);
            if p[0] < x {
                inside = !inside;
            }
        }
        j = i;
    }
    inside
}

struct Seg {
    role_index: usize,
    seg_index: usize,
    a: Point,
    b: Point,
}

/// Where segments s and t meet: their intersection point, or for collinear overlapping
/// segments the middle of s's part inside t's span.
fn meeting_point(s: &Seg, t: &Seg) -> Point {
    let (r, q) = (
        [s.b[0] - s.a[0], s.b[1] - s.a[1]],
        [t.b[0] - t.a[0], t.b[1] - t.a[1]],
    );
    let denom = r[0] * q[1] - r[1] * q[0];
    if denom != 0.0 {
        let w = [t.a[0] - s.a[0], t.a[1] - s.a[1]];
        let k = ((w[0] * q[1] - w[1] * q[0]) / denom).clamp(0.0, 1.0);
        return [s.a[0] + k * r[0], s.a[1] + k * r[1]];
    }
    // Collinear: project t's ends onto s and take the middle of the common part.
    let len2 = (r[0] * r[0] + r[1] * r[1]).max(f64::MIN_POSITIVE);
    let proj = |p: Point| ((p[0] - s.a[0]) * r[0] + (p[1] - s.a[1]) * r[1]) / len2;
    let (u, v) = (proj(t.a), proj(t.b));
    let lo = u.min(v).max(0.0);
    let hi = u.max(v).min(1.0);
    let k = 0.5 * (lo + hi.max(lo));
    [s.a[0] + k * r[0], s.a[1] + k * r[1]]
}

/// Where a single closed loop crosses itself, if it does.
pub(crate) fn self_crossing(ring: &Ring) -> Option<Point> {
    first_crossing(&[ring]).map(|(_, _, at)| at)
}

/// Finds the first pair of segments that meet but should not (segments of one loop may meet
/// only their neighbours, at the shared corner). Sweep over x so typical outlines cost
/// O(n log n) rather than O(n²).
fn first_crossing(rings: &[&Ring]) -> Option<(usize, usize, Point)> {
    let mut segs = Vec::new();
    for (r, ring) in rings.iter().enumerate() {
        let n = ring.len();
        for i in 0..n {
            segs.push(Seg {
                role_index: r,
                seg_index: i,
                a: ring[i],
                b: ring[(i + 1) % n],
            });
        }
    }
    segs.sort_by(|s, t| s.a[0].min(s.b[0]).total_cmp(&t.a[0].min(t.b[0])));
    for i in 0..segs.len() {
        let s = &segs[i];
        let s_max = s.a[0].max(s.b[0]);
        for t in &segs[i + 1..] {
            if t.a[0].min(t.b[0]) > s_max {
                break;
            }
            if s.a[1].max(s.b[1]) < t.a[1].min(t.b[1]) || t.a[1].max(t.b[1]) < s.a[1].min(s.b[1]) {
                continue;
            }
            if s.role_index == t.role_index {
                let n = rings[s.role_index].len();
                let (x, y) = (s.seg_index, t.seg_index);
                if (x + 1) % n == y || (y + 1) % n == x {
                    // Neighbours share a corner; they are wrong only if they fold back on
                    // each other (collinear overlap).
                    let (p, q) = if (x + 1) % n == y { (s, t) } else { (t, s) };
                    let turn = orient(p.a, p.b, q.b);
                    let back = (p.b[0] - p.a[0]) * (q.b[0] - q.a[0])
                        + (p.b[1] - p.a[1]) * (q.b[1] - q.a[1]);
                    if turn == 0.0 && back < 0.0 {
                        return Some((s.role_index, t.role_index, p.b));
                    }
                    continue;
                }
            }
            if segments_meet(s.a, s.b, t.a, t.b) {
                return Some((s.role_index, t.role_index, meeting_point(s, t)));
            }
        }
    }
    None
}

/// Checks that the outer ring and the holes form a valid plate: every loop simple, no two
/// loops meeting, every hole inside the outer outline and outside the other holes.
pub fn check_plate(outer: &Ring, holes: &[Ring]) -> Result<(), GeometryError> {
    let mut rings: Vec<&Ring> = vec![outer];
    rings.extend(holes.iter());
    let role = |i: usize| {
        if i == 0 {
            LoopRole::Outer
        } else {
            LoopRole::Hole(i - 1)
        }
    };
    if let Some((r, s, at)) = first_crossing(&rings) {
        return Err(if r == s {
            GeometryError::SelfIntersection { role: role(r), at }
        } else {
            GeometryError::LoopsCross {
                first: role(r.min(s)),
                second: role(r.max(s)),
                at,
            }
        });
    }
    for (k, hole) in holes.iter().enumerate() {
        if !point_in_ring(hole[0], outer) {
            return Err(GeometryError::HoleOutside {
                hole: k + 1,
                at: hole[0],
            });
        }
        for (j, other) in holes.iter().enumerate() {
            if j != k && point_in_ring(hole[0], other) {
                return Err(GeometryError::HoleInHole {
                    inner: k + 1,
                    outer: j + 1,
                });
            }
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn square(c: Point, h: f64) -> Ring {
        vec![
            [c[0] - h, c[1] - h],
            [c[0] + h, c[1] - h],
            [c[0] + h, c[1] + h],
            [c[0] - h, c[1] + h],
        ]
    }

    #[test]
    fn bow_tie_is_self_intersecting() {
        // The diagonals of the unit square cross at (1/2, 1/2) (exact).
        let bow = vec![[0.0, 0.0], [1.0, 1.0], [1.0, 0.0], [0.0, 1.0]];
        match check_plate(&bow, &[]) {
            Err(GeometryError::SelfIntersection { at, .. }) => assert_eq!(at, [0.5, 0.5]),
            other => panic!("{other:?}"),
        }
        assert_eq!(self_crossing(&bow), Some([0.5, 0.5]));
    }

    #[test]
    fn hole_cases() {
        let outer = square([0.0, 0.0], 10.0);
        assert!(check_plate(&outer, &[square([0.0, 0.0], 1.0)]).is_ok());
        assert!(matches!(
            check_plate(&outer, &[square([30.0, 0.0], 1.0)]),
            Err(GeometryError::HoleOutside { hole: 1, .. })
        ));
        assert!(matches!(
            check_plate(&outer, &[square([9.5, 0.0], 1.0)]),
            Err(GeometryError::LoopsCross {
                first: LoopRole::Outer,
                second: LoopRole::Hole(0),
                ..
            })
        ));
        assert!(matches!(
            check_plate(&outer, &[square([0.0, 0.0], 1.0), square([1.5, 0.0], 1.0)]),
            Err(GeometryError::LoopsCross {
                first: LoopRole::Hole(0),
                second: LoopRole::Hole(1),
                ..
            })
        ));
        assert!(matches!(
            check_plate(&outer, &[square([0.0, 0.0], 3.0), square([0.0, 0.0], 1.0)]),
            Err(GeometryError::HoleInHole { inner: 2, outer: 1 })
        ));
    }

    #[test]
    fn folded_back_spike_is_caught() {
        let spike = vec![[0.0, 0.0], [2.0, 0.0], [1.0, 0.0], [1.0, 1.0]];
        assert!(check_plate(&spike, &[]).is_err());
    }
}
