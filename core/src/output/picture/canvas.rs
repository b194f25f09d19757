//! An RGB pixel buffer with the few drawing operations the pictures need: triangles with
//! linearly interpolated values, antialiased strokes, rectangles.

/// An RGB colour.
pub(super) type Rgb = [u8; 3];

/// Background outside the plate and around the axes.
pub(super) const WHITE: Rgb = [255, 255, 255];

/// Barycentric tolerance: pixel centres on a shared edge are drawn by both triangles (with
/// the same value), so the plate has no cracks between triangles.
const INSIDE_EPS: f64 = -1e-9;

/// Row-major RGB pixels, 3 bytes each, as plotters' bitmap backend expects.
pub(super) struct Canvas {
    pub width: usize,
    pub height: usize,
    pub pixels: Vec<u8>,
}

impl Canvas {
    /// A white canvas.
    pub fn new(width: usize, height: usize) -> Canvas {
        Canvas {
            width,
            height,
            pixels: vec![255; width * height * 3],
        }
    }

    fn put(&mut self, x: usize, y: usize, c: Rgb) {
        let i = (y * self.width + x) * 3;
        if let Some(p) = self.pixels.get_mut(i..i + 3) {
            p.copy_from_slice(&c);
        }
    }

    /// The colour at pixel `(x, y)`, white outside.
    #[cfg(test)]
    pub fn get(&self, x: usize, y: usize) -> Rgb {
        let i = (y * self.width + x) * 3;
        match self.pixels.get(i..i + 3) {
            Some(p) if x < self.width => [p[0], p[1], p[2]],
            _ => WHITE,
        }
    }

    fn blend(&mut self, x: usize, y: usize, c: Rgb, alpha: f32) {
        let i = (y * self.width + x) * 3;
        if let Some(p) = self.pixels.get_mut(i..i + 3) {
            for k in 0..3 {
                let mixed = p[k] as f32 * (1.0 - alpha) + c[k] as f32 * alpha;
                p[k] = mixed.round().clamp(0.0, 255.0) as u8;
            }
        }
    }

    /// Pixel index range `[floor(a), ceil(b))` clipped to `0..n`; empty for NaN input.
    fn span(a: f64, b: f64, n: usize) -> std::ops::Range<usize> {
        let lo = a.floor().max(0.0);
        let hi = b.ceil().min(n as f64);
        if lo < hi {
            lo as usize..hi as usize
        } else {
            0..0
        }
    }

    /// Fills pixels whose centres lie in `[x0, x1) × [y0, y1)`.
    pub fn fill_rect(&mut self, x0: f64, y0: f64, x1: f64, y1: f64, c: Rgb) {
        for y in Self::span(y0 - 0.5, y1 - 0.5, self.height) {
            for x in Self::span(x0 - 0.5, x1 - 0.5, self.width) {
                self.put(x, y, c);
            }
        }
    }

    /// Draws the triangle `p` (pixel coordinates, either orientation), colouring each pixel
    /// centre inside it by `colour` of the value interpolated linearly from the corner values
    /// `v` (barycentric weights, exactly the P1 interpolant).
    pub fn fill_triangle(&mut self, p: [[f64; 2]; 3], v: [f64; 3], colour: &impl Fn(f64) -> Rgb) {
        let [a, b, c] = p;
        let area = (b[0] - a[0]) * (c[1] - a[1]) - (c[0] - a[0]) * (b[1] - a[1]);
        // Degenerate (or NaN-cornered) triangles cover no pixel centre.
        if area.is_nan() || area.abs() <= 1e-12 {
            return;
        }
        let inv = 1.0 / area;
        let all_finite = v.iter().all(|x| x.is_finite());
        let xs = Self::span(
            a[0].min(b[0]).min(c[0]),
            a[0].max(b[0]).max(c[0]),
            self.width,
        );
        let ys = Self::span(
            a[1].min(b[1]).min(c[1]),
            a[1].max(b[1]).max(c[1]),
            self.height,
        );
        for y in ys {
            let cy = y as f64 + 0.5;
            for x in xs.clone() {
                let cx = x as f64 + 0.5;
                let l1 = ((cx - a[0]) * (c[1] - a[1]) - (c[0] - a[0]) * (cy - a[1])) * inv;
                let l2 = ((b[0] - a[0]) * (cy - a[1]) - (cx - a[0]) * (b[1] - a[1])) * inv;
                let l0 = 1.0 - l1 - l2;
                if l0 < INSIDE_EPS || l1 < INSIDE_EPS || l2 < INSIDE_EPS {
                    continue;
                }
                let value = if all_finite {
                    l0 * v[0] + l1 * v[1] + l2 * v[2]
                } else {
                    // An infinite corner must not turn a zero weight into 0·∞ = NaN.
                    [l0, l1, l2]
                        .iter()
                        .zip(v)
                        .filter(|(l, _)| **l > 0.0)
                        .map(|(l, x)| l * x)
                        .sum()
                };
                self.put(x, y, colour(value));
            }
        }
    }
}

/// Coverage of strokes before they are painted, so overlapping segments of one polyline
/// (joints, short boundary edges) take the maximum coverage and are not darkened twice.
pub(super) struct Mask {
    width: usize,
    height: usize,
    coverage: Vec<f32>,
    /// Bounding box of touched pixels, to paint only there.
    touched: Option<[usize; 4]>,
}

impl Mask {
    pub fn new(width: usize, height: usize) -> Mask {
        Mask {
            width,
            height,
            coverage: vec![0.0; width * height],
            touched: None,
        }
    }

    /// Adds a segment of half-width `half` (pixels) with round caps, clipped to
    /// `clip = [x0, y0, x1, y1]`; coverage falls off over one pixel for antialiasing.
    pub fn segment(&mut self, a: [f64; 2], b: [f64; 2], half: f64, clip: [f64; 4]) {
        if !(a.iter().chain(&b).all(|x| x.is_finite()) && half.is_finite()) {
            return;
        }
        let r = half + 1.0;
        let xs = Canvas::span(
            (a[0].min(b[0]) - r).max(clip[0]),
            (a[0].max(b[0]) + r).min(clip[2]),
            self.width,
        );
        let ys = Canvas::span(
            (a[1].min(b[1]) - r).max(clip[1]),
            (a[1].max(b[1]) + r).min(clip[3]),
            self.height,
        );
        if xs.is_empty() || ys.is_empty() {
            return;
        }
        let (dx, dy) = (b[0] - a[0], b[1] - a[1]);
        let len2 = dx * dx + dy * dy;
        for y in ys.clone() {
            let cy = y as f64 + 0.5;
            for x in xs.clone() {
                let cx = x as f64 + 0.5;
                let t = if len2 > 0.0 {
                    (((cx - a[0]) * dx + (cy - a[1]) * dy) / len2).clamp(0.0, 1.0)
                } else {
                    0.0
                };
                let d = (cx - a[0] - t * dx).hypot(cy - a[1] - t * dy);
                let cov = (half + 0.5 - d).clamp(0.0, 1.0) as f32;
                let m = &mut self.coverage[y * self.width + x];
                *m = m.max(cov);
            }
        }
        let bb = [xs.start, ys.start, xs.end, ys.end];
        self.touched = Some(match self.touched {
            None => bb,
            Some(t) => [
                t[0].min(bb[0]),
                t[1].min(bb[1]),
                t[2].max(bb[2]),
                t[3].max(bb[3]),
            ],
        });
    }

    /// A filled disc (a dot for an isolated data point).
    pub fn disc(&mut self, c: [f64; 2], radius: f64, clip: [f64; 4]) {
        self.segment(c, c, radius, clip);
    }

    /// Blends `colour` into the canvas by the coverage, then clears the mask.
    pub fn paint(&mut self, canvas: &mut Canvas, colour: Rgb) {
        if let Some([x0, y0, x1, y1]) = self.touched.take() {
            for y in y0..y1 {
                for x in x0..x1 {
                    let m = &mut self.coverage[y * self.width + x];
                    if *m > 0.0 {
                        canvas.blend(x, y, colour, *m);
                        *m = 0.0;
                    }
                }
            }
        }
    }
}
