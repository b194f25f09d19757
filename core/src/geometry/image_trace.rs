//! Plates traced from a photograph: threshold (fixed or Otsu), pick the plate's connected
//! region, fill specks, trace its outline and wells, smooth the pixel stairs and simplify.
//!
//! Hand-written here, and why: Otsu's threshold, the 4/8-connected labelling and the
//! crack-edge contour tracing are a few dozen lines each. The crate that offers them,
//! `imageproc` (0.27), needs `image` 0.25 (we decode with 0.24, which `plotters` also uses, so
//! there would be two) and brings `nalgebra`, `rand` and `rand_distr` even with its default
//! features off; and its `find_contours` follows pixel centres, whereas the crack edges traced
//! here enclose exactly the region's pixels, so the traced area is the pixel count. The
//! Douglas–Peucker simplification is `geo`'s.

use super::shape::{signed_area, Point, Shape};
use geo::{Coord, LineString, Simplify};
use std::collections::HashMap;
use std::path::{Path, PathBuf};

/// What went wrong tracing a photograph.
#[derive(Debug, thiserror::Error, PartialEq)]
pub enum TraceError {
    /// The picture could not be read or decoded.
    #[error("{path}: cannot read picture: {reason}", path = path.display())]
    Unreadable {
        /// The file.
        path: PathBuf,
        /// Why.
        reason: String,
    },
    /// The threshold leaves no plate pixels.
    #[error("threshold {threshold} leaves no plate pixels (try another threshold or invert)")]
    Empty {
        /// The threshold used.
        threshold: u8,
    },
    /// The chosen region touches the picture's border, so it is not closed.
    #[error("the plate region touches the picture's border, so its outline is not closed (crop the photograph, or try invert)")]
    TouchesBorder,
    /// The given pixel is not on a plate region.
    #[error("pixel ({x}, {y}) is not on a plate region at this threshold")]
    SeedOutside {
        /// Column.
        x: u32,
        /// Row from the top.
        y: u32,
    },
    /// A number in the options is unusable.
    #[error("{0}")]
    BadOption(String),
}

/// How pixels become lengths.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Scale {
    /// Length per pixel.
    PerPixel(f64),
    /// The plate's real width (its extent along x).
    Width(f64),
}

/// Options of the tracing.
#[derive(Clone, Debug, PartialEq)]
pub struct TraceOptions {
    /// Grey level above which a pixel is plate; `None` picks Otsu's threshold.
    pub threshold: Option<u8>,
    /// Take dark pixels as plate.
    pub invert: bool,
    /// The plate is the region under this pixel (column, row from the top); default the largest.
    pub seed: Option<(u32, u32)>,
    /// Wells and specks smaller than this many pixels are dropped (filled).
    pub min_area_px: f64,
    /// Douglas–Peucker tolerance in pixels.
    pub tolerance_px: f64,
    /// Pixels to lengths.
    pub scale: Scale,
}

impl Default for TraceOptions {
    fn default() -> Self {
        TraceOptions {
            threshold: None,
            invert: false,
            seed: None,
            min_area_px: 16.0,
            tolerance_px: 0.7,
            scale: Scale::PerPixel(1.0),
        }
    }
}

/// A traced plate.
#[derive(Clone, Debug)]
pub struct Traced {
    /// Outer loop in plate lengths (y up, centred on the plate's centroid), counter-clockwise.
    pub outer: Vec<Point>,
    /// Holes in plate lengths.
    pub holes: Vec<Vec<Point>>,
    /// The same loops in pixel coordinates (x right, y down), for the overlay.
    pub pixel_loops: Vec<Vec<Point>>,
    /// The threshold used.
    pub threshold: u8,
    /// Length per pixel used.
    pub per_pixel: f64,
}

impl Traced {
    /// The outline as shapes the plate takes: outer polygon and hole polygons.
    pub fn shapes(&self) -> (Shape, Vec<Shape>) {
        (
            Shape::Polygon {
                points: self.outer.clone(),
            },
            self.holes
                .iter()
                .map(|h| Shape::Polygon { points: h.clone() })
                .collect(),
        )
    }
}

/// Reads a PNG or JPEG and traces it.
pub fn trace_file(path: &Path, opts: &TraceOptions) -> Result<Traced, TraceError> {
    let img = image::open(path).map_err(|e| TraceError::Unreadable {
        path: path.to_path_buf(),
        reason: e.to_string(),
    })?;
    let grey = img.to_luma8();
    trace_grey(grey.width(), grey.height(), grey.as_raw(), opts)
}

/// Otsu's threshold: the grey level maximising the between-class variance
/// (N. Otsu, "A threshold selection method from gray-level histograms", IEEE Trans. SMC, 1979).
pub fn otsu(pixels: &[u8]) -> u8 {
    let mut hist = [0f64; 256];
    for &p in pixels {
        hist[p as usize] += 1.0;
    }
    let total: f64 = pixels.len() as f64;
    let sum_all: f64 = hist.iter().enumerate().map(|(i, h)| i as f64 * h).sum();
    let (mut w0, mut sum0, mut best, mut best_t) = (0.0, 0.0, -1.0, 0u8);
    for (t, &count) in hist.iter().enumerate() {
        w0 += count;
        sum0 += t as f64 * count;
        let w1 = total - w0;
        if w0 == 0.0 || w1 == 0.0 {
            continue;
        }
        let (m0, m1) = (sum0 / w0, (sum_all - sum0) / w1);
        let between = w0 * w1 * (m0 - m1) * (m0 - m1);
        if between > best {
            best = between;
            best_t = t as u8;
        }
    }
    best_t
}

/// Labels connected `true` cells; returns labels (0 = none) and component sizes (index = label).
fn label(mask: &[bool], w: usize, h: usize, eight: bool) -> (Vec<u32>, Vec<usize>) {
    let mut lab = vec![0u32; w * h];
    let mut sizes = vec![0usize];
    let mut stack = Vec::new();
    for start in 0..w * h {
        if !mask[start] || lab[start] != 0 {
            continue;
        }
        let id = sizes.len() as u32;
        sizes.push(0);
        lab[start] = id;
        stack.push(start);
        while let Some(i) = stack.pop() {
            sizes[id as usize] += 1;
            let (x, y) = ((i % w) as i64, (i / w) as i64);
            for dy in -1i64..=1 {
                for dx in -1i64..=1 {
                    if (dx == 0 && dy == 0) || (!eight && dx != 0 && dy != 0) {
                        continue;
                    }
                    let (nx, ny) = (x + dx, y + dy);
                    if nx < 0 || ny < 0 || nx >= w as i64 || ny >= h as i64 {
                        continue;
                    }
                    let j = ny as usize * w + nx as usize;
                    if mask[j] && lab[j] == 0 {
                        lab[j] = id;
                        stack.push(j);
                    }
                }
            }
        }
    }
    (lab, sizes)
}

/// Traces a grey picture given row by row from the top.
pub fn trace_grey(
    w: u32,
    h: u32,
    pixels: &[u8],
    opts: &TraceOptions,
) -> Result<Traced, TraceError> {
    if !(opts.tolerance_px >= 0.0 && opts.tolerance_px.is_finite()) {
        return Err(TraceError::BadOption(format!(
            "the simplification tolerance must be a non-negative number of pixels, not {}",
            opts.tolerance_px
        )));
    }
    if !(opts.min_area_px >= 0.0 && opts.min_area_px.is_finite()) {
        return Err(TraceError::BadOption(format!(
            "the speck area must be a non-negative number of pixels, not {}",
            opts.min_area_px
        )));
    }
    let (w, h) = (w as usize, h as usize);
    if w.checked_mul(h) != Some(pixels.len()) {
        return Err(TraceError::BadOption(format!(
            "a {w}x{h} picture needs {} grey values, got {}",
            w.saturating_mul(h),
            pixels.len()
        )));
    }
    let threshold = opts.threshold.unwrap_or_else(|| otsu(pixels));
    let fg: Vec<bool> = pixels
        .iter()
        .map(|&p| (p > threshold) != opts.invert)
        .collect();
    let (lab, sizes) = label(&fg, w, h, false);
    let chosen = match opts.seed {
        Some((x, y)) => {
            let l = if (x as usize) < w && (y as usize) < h {
                lab[y as usize * w + x as usize]
            } else {
                0
            };
            if l == 0 {
                return Err(TraceError::SeedOutside { x, y });
            }
            l
        }
        None => match (1..sizes.len()).max_by_key(|&i| sizes[i]) {
            Some(l) => l as u32,
            None => return Err(TraceError::Empty { threshold }),
        },
    };
    let mut region: Vec<bool> = lab.iter().map(|&l| l == chosen).collect();
    let on_border = |i: usize| {
        let (x, y) = (i % w, i / w);
        x == 0 || y == 0 || x + 1 == w || y + 1 == h
    };
    if (0..w * h).any(|i| region[i] && on_border(i)) {
        return Err(TraceError::TouchesBorder);
    }
    // Everything else, 8-connected (the region is 4-connected): parts touching the border are
    // outside, the rest are wells; wells smaller than the speck area are filled.
    let rest: Vec<bool> = region.iter().map(|&r| !r).collect();
    let (blab, bsizes) = label(&rest, w, h, true);
    let mut outside = vec![false; bsizes.len()];
    for i in 0..w * h {
        if blab[i] != 0 && on_border(i) {
            outside[blab[i] as usize] = true;
        }
    }
    for i in 0..w * h {
        let b = blab[i] as usize;
        if b != 0 && !outside[b] && (bsizes[b] as f64) < opts.min_area_px {
            region[i] = true;
        }
    }
    let mut pixel_loops = crack_loops(&region, w, h);
    // Smooth the stairs (edge midpoints cut each pixel corner), then simplify.
    for l in pixel_loops.iter_mut() {
        let n = l.len();
        let mid: Vec<Point> = (0..n)
            .map(|i| {
                let (a, b) = (l[i], l[(i + 1) % n]);
                [(a[0] + b[0]) / 2.0, (a[1] + b[1]) / 2.0]
            })
            .collect();
        *l = simplify_closed(&mid, opts.tolerance_px);
    }
    pixel_loops.retain(|l| l.len() >= 3);
    // The walk keeps the region on its right in y-down pixels, so the outer loop has the
    // largest positive signed area there and wells are negative.
    pixel_loops.sort_by(|a, b| signed_area(b).total_cmp(&signed_area(a)));
    let width_px = pixel_loops
        .first()
        .map(|l| {
            let (lo, hi) = l.iter().fold((f64::MAX, f64::MIN), |(lo, hi), p| {
                (lo.min(p[0]), hi.max(p[0]))
            });
            hi - lo
        })
        .unwrap_or(0.0);
    let per_pixel = match opts.scale {
        Scale::PerPixel(s) => s,
        Scale::Width(wd) => wd / width_px,
    };
    if !(per_pixel > 0.0 && per_pixel.is_finite()) {
        return Err(TraceError::BadOption(
            "the scale must be a positive length per pixel or a positive plate width".into(),
        ));
    }
    let outer_px = pixel_loops.first().cloned().unwrap_or_default();
    let a = signed_area(&outer_px);
    let (cx, cy) = centroid(&outer_px, a);
    let to_world = |l: &Vec<Point>| -> Vec<Point> {
        // Flipping y reverses orientation; reverse the order so the outer loop is
        // counter-clockwise in plate coordinates.
        l.iter()
            .rev()
            .map(|p| [(p[0] - cx) * per_pixel, (cy - p[1]) * per_pixel])
            .collect()
    };
    Ok(Traced {
        outer: to_world(&outer_px),
        holes: pixel_loops.iter().skip(1).map(to_world).collect(),
        pixel_loops,
        threshold,
        per_pixel,
    })
}

fn centroid(l: &[Point], a: f64) -> (f64, f64) {
    let n = l.len();
    let (mut sx, mut sy) = (0.0, 0.0);
    for i in 0..n {
        let (p, q) = (l[i], l[(i + 1) % n]);
        let c = p[0] * q[1] - q[0] * p[1];
        sx += (p[0] + q[0]) * c;
        sy += (p[1] + q[1]) * c;
    }
    if a == 0.0 {
        return (0.0, 0.0);
    }
    (sx / (6.0 * a), sy / (6.0 * a))
}

/// Douglas–Peucker on a closed loop (geo's), opened at its first point and its farthest one so
/// both halves keep their ends.
fn simplify_closed(l: &[Point], eps: f64) -> Vec<Point> {
    if l.len() < 4 || eps == 0.0 {
        return l.to_vec();
    }
    let far = (1..l.len())
        .max_by(|&i, &j| super::shape::dist(l[0], l[i]).total_cmp(&super::shape::dist(l[0], l[j])))
        .unwrap_or(1);
    let half = |pts: Vec<Point>| -> Vec<Point> {
        let ls: LineString<f64> = pts.iter().map(|p| Coord { x: p[0], y: p[1] }).collect();
        ls.simplify(eps).0.iter().map(|c| [c.x, c.y]).collect()
    };
    let mut a = half(l[..=far].to_vec());
    let mut second: Vec<Point> = l[far..].to_vec();
    second.push(l[0]);
    let b = half(second);
    a.pop();
    a.extend_from_slice(&b[..b.len() - 1]);
    a
}

/// Traces the pixel-edge loops around `region` (x right, y down; region on the right of the
/// walk). At a corner where two region pixels meet diagonally the walk turns right, so the
/// 4-connected region never touches itself.
fn crack_loops(region: &[bool], w: usize, h: usize) -> Vec<Vec<Point>> {
    let inside = |x: i64, y: i64| {
        x >= 0
            && y >= 0
            && (x as usize) < w
            && (y as usize) < h
            && region[y as usize * w + x as usize]
    };
    // Directed edges: (from, direction).
    let mut out: HashMap<(i64, i64), Vec<(i64, i64)>> = HashMap::new();
    for y in 0..h as i64 {
        for x in 0..w as i64 {
            if !inside(x, y) {
                continue;
            }
            if !inside(x, y - 1) {
                out.entry((x, y)).or_default().push((1, 0));
            }
            if !inside(x + 1, y) {
                out.entry((x + 1, y)).or_default().push((0, 1));
            }
            if !inside(x, y + 1) {
                out.entry((x + 1, y + 1)).or_default().push((-1, 0));
            }
            if !inside(x - 1, y) {
                out.entry((x, y + 1)).or_default().push((0, -1));
            }
        }
    }
    let mut starts: Vec<(i64, i64)> = out.keys().copied().collect();
    starts.sort();
    let mut loops = Vec::new();
    for s in starts {
        while let Some(d0) = out.get_mut(&s).and_then(|v| v.pop()) {
            let mut pts = vec![[s.0 as f64, s.1 as f64]];
            let (mut p, mut d) = ((s.0 + d0.0, s.1 + d0.1), d0);
            while p != s {
                pts.push([p.0 as f64, p.1 as f64]);
                let v = match out.get_mut(&p) {
                    Some(v) => v,
                    None => break,
                };
                // Prefer right, then straight, then left (y down: right of (dx, dy) is (-dy, dx)).
                let choice = [(-d.1, d.0), d, (d.1, -d.0)]
                    .into_iter()
                    .find_map(|c| v.iter().position(|&e| e == c));
                let Some(k) = choice else { break };
                d = v.swap_remove(k);
                p = (p.0 + d.0, p.1 + d.1);
            }
            loops.push(pts);
        }
    }
    loops
}

#[cfg(test)]
mod tests;

/// Writes the photograph with the traced loops drawn on it in red, outer and wells alike, with
/// their corners in yellow, so the user can see what was taken.
pub fn write_overlay(
    photo: &Path,
    traced: &Traced,
    out: &Path,
) -> Result<(), crate::output::OutputError> {
    let enc = |reason: String| crate::output::OutputError::Encode {
        path: out.to_path_buf(),
        reason,
    };
    let mut img = image::open(photo)
        .map_err(|e| enc(e.to_string()))?
        .to_rgb8();
    let (w, h) = (img.width() as i64, img.height() as i64);
    let mut put = |x: f64, y: f64, c: [u8; 3]| {
        let (x, y) = (x.floor() as i64, y.floor() as i64);
        if x >= 0 && y >= 0 && x < w && y < h {
            img.put_pixel(x as u32, y as u32, image::Rgb(c));
        }
    };
    for l in &traced.pixel_loops {
        let n = l.len();
        for i in 0..n {
            let (a, b) = (l[i], l[(i + 1) % n]);
            // Plain sampling along each edge, half a pixel apart (hand-written: one line of
            // drawing does not justify a drawing crate).
            let steps = (super::shape::dist(a, b) * 2.0).ceil().max(1.0) as usize;
            for s in 0..=steps {
                let t = s as f64 / steps as f64;
                put(
                    a[0] + t * (b[0] - a[0]),
                    a[1] + t * (b[1] - a[1]),
                    [255, 0, 0],
                );
            }
        }
        for p in l {
            put(p[0], p[1], [255, 255, 0]);
        }
    }
    let mut bytes = std::io::Cursor::new(Vec::new());
    img.write_to(&mut bytes, image::ImageFormat::Png)
        .map_err(|e| enc(e.to_string()))?;
    crate::output::write_atomically(out, |wr| {
        wr.write_all(bytes.get_ref())
            .map_err(|e| crate::output::OutputError::Io {
                path: out.to_path_buf(),
                reason: e.to_string(),
            })
    })
}
