//! Publication-quality PNG pictures: a field on the plate with a colour bar, and line plots
//! of time series (step sizes, norms).
//!
//! Pixels are computed by our own rasteriser (`picture/canvas.rs`): each triangle is filled
//! with the value interpolated linearly from its corners at every pixel centre (exactly the
//! P1 interpolant, no per-triangle flat shading), and strokes are antialiased by distance to
//! the segment. A direct RGB buffer is both exact and fast (a 10⁵-node field, PNG encoding
//! included, takes tens of milliseconds in a release build); plotters' bitmap backend is used
//! only for text, through its `ab_glyph` renderer with a bundled DejaVu Sans, so no system
//! font library is linked.
//!
//! Colour map: viridis, the perceptually uniform and colour-blind-friendly map, linearly
//! interpolated through the eight control colours of plotters' `ViridisRGB`, from dark
//! violet (68, 1, 84) at the low end to yellow (254, 232, 37) at the high end.

mod canvas;
mod phase;
mod scale;
mod series;
mod sheet;
mod text;

pub use phase::{write_phase_png, PhaseMark, PhaseOptions, PhasePoint};
pub use series::{write_series_png, PlotOptions, Series};
pub use sheet::{write_contact_sheet_png, SheetTile};

use super::{write_atomically, OutputError};
use crate::mesh::Mesh;
use canvas::{Canvas, Mask, Rgb};
use plotters::style::colors::colormaps::{ColorMap, ViridisRGB};
use scale::Scale;
use std::path::Path;
use text::{Align, Label};

/// Colour of pixels whose value is NaN (also explained by a swatch under the colour bar).
pub const NAN_GREY: [u8; 3] = [150, 150, 150];

/// Decades below the largest value an automatic log scale spans at most.
pub const AUTO_LOG_DECADES: i32 = 6;

/// Entries of the colour look-up table (finer than any visible step of the map).
const LUT_SIZE: usize = 1024;

/// The value range a snapshot's colour map spans.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum ValueRange {
    /// Smallest to largest finite value of this field.
    Auto,
    /// A fixed range, so that a series of pictures shares one scale; values outside take the
    /// end colours.
    Fixed {
        /// Value of the first colour.
        min: f64,
        /// Value of the last colour.
        max: f64,
    },
}

impl ValueRange {
    /// The range covering the finite values of all `fields` (for a shared scale over a run),
    /// or `None` when there is no finite value. With `positive_only`, only values `> 0`
    /// count (for log scales).
    pub fn covering(fields: &[&[f64]], positive_only: bool) -> Option<ValueRange> {
        let mut range: Option<(f64, f64)> = None;
        for &v in fields.iter().flat_map(|f| f.iter()) {
            if v.is_finite() && (!positive_only || v > 0.0) {
                range = Some(match range {
                    None => (v, v),
                    Some((lo, hi)) => (lo.min(v), hi.max(v)),
                });
            }
        }
        range.map(|(min, max)| ValueRange::Fixed { min, max })
    }
}

/// Settings of a field snapshot.
#[derive(Clone, Debug)]
pub struct SnapshotOptions {
    /// Width of the picture in pixels (clamped to 320 ..= 8192); the height follows from the
    /// plate's aspect ratio, which is preserved.
    pub width: u32,
    /// Range of the colour map.
    pub range: ValueRange,
    /// Title above the plate, e.g. from [`snapshot_title`]; empty for none.
    pub title: String,
    /// Unit of the values, written above the colour bar; empty for none.
    pub unit: String,
    /// Logarithmic colour scale: a fixed range must then be `> 0`; values at or below the
    /// range's low end (zero and negative ones included) take the first colour. An automatic
    /// range spans the positive values, at most [`AUTO_LOG_DECADES`] decades below the largest.
    pub log_scale: bool,
}

impl Default for SnapshotOptions {
    fn default() -> Self {
        SnapshotOptions {
            width: 900,
            range: ValueRange::Auto,
            title: String::new(),
            unit: String::new(),
            log_scale: false,
        }
    }
}

/// The usual title of a snapshot: `"u   t = 12.5 h"`.
pub fn snapshot_title(field: &str, time: f64, time_unit: &str) -> String {
    let t = scale::significant(time, 4);
    if time_unit.is_empty() {
        format!("{field}   t = {t}")
    } else {
        format!("{field}   t = {t} {time_unit}")
    }
}

/// Draws the field `values` (one per mesh node) on the plate and writes it as a PNG,
/// atomically.
///
/// The picture: the title band on top; the plate with the field interpolated linearly over
/// each triangle and its outline (outer loop and holes) as dark lines; a vertical colour bar
/// with tick labels to the right, the unit above it. Outside the plate and inside holes the
/// picture is white. NaN values are drawn in [`NAN_GREY`] (a pixel is grey when the
/// interpolated value is NaN, i.e. in every triangle touching a NaN node), and a grey swatch
/// labelled "NaN" then appears under the colour bar; ±∞ take the end colours and are ignored
/// by the automatic range. A constant field gets a range widened around its value (it shows
/// the middle colour). Without any finite value the range is 0 … 1 (1 … 10 on a log scale).
///
/// Errors ([`OutputError::Encode`]): a mesh without nodes or triangles, a value count that
/// is not the node count, a fixed range that is not finite or has `min > max`, a log scale
/// with a finite value `<= 0` or a fixed minimum `<= 0`; and any file-system failure
/// ([`OutputError::Io`]). Nothing is left at `path` on failure.
pub fn write_field_png(
    path: &Path,
    mesh: &Mesh,
    values: &[f64],
    options: &SnapshotOptions,
) -> Result<(), OutputError> {
    let encode = |reason: String| OutputError::Encode {
        path: path.to_path_buf(),
        reason,
    };
    let canvas = render_field(mesh, values, options).map_err(encode)?;
    write_canvas(path, &canvas)
}

/// Encodes `canvas` to `path` through a temporary file.
fn write_canvas(path: &Path, canvas: &Canvas) -> Result<(), OutputError> {
    write_atomically(path, |out| {
        text::encode_png(canvas, out).map_err(|reason| OutputError::Encode {
            path: path.to_path_buf(),
            reason,
        })
    })
}

/// The colour map sampled at `LUT_SIZE` points, so a pixel costs one multiplication.
struct ColourTable(Vec<Rgb>);

impl ColourTable {
    fn viridis() -> ColourTable {
        ColourTable(
            (0..LUT_SIZE)
                .map(|i| {
                    let c = ViridisRGB.get_color(i as f64 / (LUT_SIZE - 1) as f64);
                    [c.0, c.1, c.2]
                })
                .collect(),
        )
    }

    /// Colour at fraction `t` of the map; grey for NaN.
    fn at(&self, t: f64) -> Rgb {
        if t.is_nan() {
            return NAN_GREY;
        }
        let i = (t.clamp(0.0, 1.0) * (LUT_SIZE - 1) as f64).round() as usize;
        self.0.get(i).copied().unwrap_or(NAN_GREY)
    }
}

/// Where things go in a snapshot, in pixels.
#[derive(Clone, Debug)]
struct FieldLayout {
    width: usize,
    height: usize,
    /// Pixel position of plate point `(xmin, ymax)`.
    origin: [f64; 2],
    xmin: f64,
    ymax: f64,
    /// Pixels per length unit.
    pixels_per_unit: f64,
    title_band: f64,
    /// Colour bar `[x0, y0, x1, y1]`.
    bar: [f64; 4],
    /// Grey NaN swatch `[x0, y0, x1, y1]`, when the field has NaN values.
    nan_swatch: Option<[f64; 4]>,
    /// Length unit of fonts and strokes: 1 at 900 px width.
    em: f64,
}

impl FieldLayout {
    fn to_pixel(&self, p: [f64; 2]) -> [f64; 2] {
        [
            self.origin[0] + (p[0] - self.xmin) * self.pixels_per_unit,
            self.origin[1] + (self.ymax - p[1]) * self.pixels_per_unit,
        ]
    }
}

/// Colour scale of a field under `options`, checking the log-scale and range rules.
fn field_scale(values: &[f64], options: &SnapshotOptions) -> Result<Scale, String> {
    let (lo, hi) = match options.range {
        ValueRange::Fixed { min, max } => {
            if !(min.is_finite() && max.is_finite() && min <= max) {
                return Err(format!("value range {min} … {max} is not a finite range"));
            }
            if options.log_scale && min <= 0.0 {
                return Err(format!(
                    "a log scale needs a positive range; got {min} … {max}"
                ));
            }
            (min, max)
        }
        ValueRange::Auto => match ValueRange::covering(&[values], options.log_scale) {
            // A density that decays towards zero somewhere would stretch the scale over
            // dozens of decades: show the top AUTO_LOG_DECADES.
            Some(ValueRange::Fixed { min, max }) if options.log_scale => {
                (min.max(max * 10f64.powi(-AUTO_LOG_DECADES)), max)
            }
            Some(ValueRange::Fixed { min, max }) => (min, max),
            _ if options.log_scale => (1.0, 10.0),
            _ => (0.0, 1.0),
        },
    };
    Ok(if options.log_scale {
        Scale::log(lo, hi)
    } else {
        Scale::linear(lo, hi)
    })
}

/// Bounding box `[xmin, ymin, xmax, ymax]` of the mesh nodes.
fn bounding_box(mesh: &Mesh) -> Result<[f64; 4], String> {
    let mut bb = [
        f64::INFINITY,
        f64::INFINITY,
        f64::NEG_INFINITY,
        f64::NEG_INFINITY,
    ];
    for i in 0..mesh.num_nodes() {
        let p = mesh.node(i);
        if !(p[0].is_finite() && p[1].is_finite()) {
            return Err(format!("node {i} has a non-finite coordinate"));
        }
        bb = [
            bb[0].min(p[0]),
            bb[1].min(p[1]),
            bb[2].max(p[0]),
            bb[3].max(p[1]),
        ];
    }
    let (w, h) = (bb[2] - bb[0], bb[3] - bb[1]);
    if !(w.is_finite() && h.is_finite() && w > 0.0 && h > 0.0) {
        return Err("the mesh has no extent to draw".into());
    }
    Ok(bb)
}

fn layout_field(
    bb: [f64; 4],
    options: &SnapshotOptions,
    tick_labels: &[String],
    has_nan: bool,
) -> FieldLayout {
    let width = options.width.clamp(320, 8192) as f64;
    // Scales with the width, but text stays legible on small pictures.
    let em = (width / 900.0).max(0.7);
    let margin = 24.0 * em;
    let title_band = if options.title.is_empty() {
        margin
    } else {
        64.0 * em
    };
    let unit_band = 34.0 * em;
    let label_w = tick_labels
        .iter()
        .map(|l| text::text_width(l, 18.0 * em))
        .fold(0.0, f64::max);
    let bar_w = 26.0 * em;
    let right = 36.0 * em + bar_w + 14.0 * em + label_w + margin;
    let box_w = (width - margin - right).max(60.0);
    // Room for the outline's stroke around the plate.
    let pad = 4.0 * em;
    let (w, h) = (bb[2] - bb[0], bb[3] - bb[1]);
    // Fit the width, but keep tall plates within 1.5 widths of height.
    let inner = box_w - 2.0 * pad;
    let pixels_per_unit = (inner / w).min(1.5 * box_w / h);
    let (plate_w, plate_h) = (w * pixels_per_unit, h * pixels_per_unit);
    let top = title_band + unit_band;
    let origin = [margin + pad + (inner - plate_w) / 2.0, top + pad];
    let bar_x = margin + box_w + 36.0 * em;
    let bar_h = plate_h.max(180.0 * em);
    let bar = [bar_x, top + pad, bar_x + bar_w, top + pad + bar_h];
    let nan_swatch = has_nan.then(|| {
        let y = bar[3] + 24.0 * em;
        [bar[0], y, bar[2], y + 18.0 * em]
    });
    let bottom = nan_swatch
        .map_or(bar[3], |s| s[3])
        .max(top + plate_h + 2.0 * pad);
    FieldLayout {
        width: width.round() as usize,
        height: (bottom + margin + 10.0 * em).ceil() as usize,
        origin,
        xmin: bb[0],
        ymax: bb[3],
        pixels_per_unit,
        title_band,
        bar,
        nan_swatch,
        em,
    }
}

/// The snapshot's pixels, text included.
fn render_field(mesh: &Mesh, values: &[f64], options: &SnapshotOptions) -> Result<Canvas, String> {
    let (canvas, _) = render_field_with_layout(mesh, values, options)?;
    Ok(canvas)
}

fn render_field_with_layout(
    mesh: &Mesh,
    values: &[f64],
    options: &SnapshotOptions,
) -> Result<(Canvas, FieldLayout), String> {
    text::ensure_font()?;
    if mesh.num_nodes() == 0 || mesh.triangles.is_empty() {
        return Err("the mesh is empty".into());
    }
    if values.len() != mesh.num_nodes() {
        return Err(format!(
            "{} values for {} mesh nodes",
            values.len(),
            mesh.num_nodes()
        ));
    }
    let bb = bounding_box(mesh)?;
    let scale = field_scale(values, options)?;
    let ticks = scale.ticks(6);
    let tick_labels: Vec<String> = ticks.iter().map(|t| t.label.clone()).collect();
    let has_nan = values.iter().any(|v| v.is_nan());
    let layout = layout_field(bb, options, &tick_labels, has_nan);
    let em = layout.em;
    let mut canvas = Canvas::new(layout.width, layout.height);
    let table = ColourTable::viridis();
    let colour = |v: f64| table.at(scale.fraction(v));

    let pixel = |i: usize| layout.to_pixel(mesh.node(i));
    for (k, tri) in mesh.triangles.iter().enumerate() {
        let (Some(&a), Some(&b), Some(&c)) =
            (values.get(tri[0]), values.get(tri[1]), values.get(tri[2]))
        else {
            return Err(format!("triangle {k} refers to a node that does not exist"));
        };
        canvas.fill_triangle(
            [pixel(tri[0]), pixel(tri[1]), pixel(tri[2])],
            [a, b, c],
            &colour,
        );
    }

    // Plate outline: every boundary edge, outer loop and holes alike.
    let everywhere = [0.0, 0.0, layout.width as f64, layout.height as f64];
    let mut mask = Mask::new(layout.width, layout.height);
    let half = (1.1 * em).max(0.6);
    for (k, e) in mesh.boundary.iter().enumerate() {
        if e.nodes[0] >= mesh.num_nodes() || e.nodes[1] >= mesh.num_nodes() {
            return Err(format!(
                "boundary edge {k} refers to a node that does not exist"
            ));
        }
        mask.segment(pixel(e.nodes[0]), pixel(e.nodes[1]), half, everywhere);
    }
    let ink: Rgb = [30, 30, 30];
    mask.paint(&mut canvas, ink);

    // Colour bar: top row the last colour, bottom row the first.
    let [x0, y0, x1, y1] = layout.bar;
    let rows = (y1 - y0).max(1.0);
    let (r0, r1) = (y0.round() as i64, y1.round() as i64);
    for r in r0..r1 {
        let t = 1.0 - ((r - r0) as f64 + 0.5) / (r1 - r0).max(1) as f64;
        canvas.fill_rect(x0, r as f64 + 0.5, x1, r as f64 + 1.5, table.at(t));
    }
    let line = em.max(1.0).round();
    frame(&mut canvas, layout.bar, line, ink);
    let mut labels = Vec::new();
    let tick_size = 18.0 * em;
    for t in &ticks {
        if !(t.fraction.is_finite() && (-1e-9..=1.0 + 1e-9).contains(&t.fraction)) {
            continue;
        }
        let y = (y1 - t.fraction * rows).round();
        canvas.fill_rect(x1, y - line / 2.0, x1 + 7.0 * em, y + line / 2.0, ink);
        labels.push(Label::new(
            t.label.clone(),
            x1 + 12.0 * em,
            y,
            tick_size,
            Align::Left,
        ));
    }
    if let Some(s) = layout.nan_swatch {
        canvas.fill_rect(s[0], s[1], s[2], s[3], NAN_GREY);
        frame(&mut canvas, s, line, ink);
        labels.push(Label::new(
            "NaN",
            s[2] + 12.0 * em,
            (s[1] + s[3]) / 2.0,
            tick_size,
            Align::Left,
        ));
    }
    if !options.unit.is_empty() {
        labels.push(Label::new(
            options.unit.clone(),
            x0,
            y0 - 20.0 * em,
            tick_size,
            Align::Left,
        ));
    }
    if !options.title.is_empty() {
        labels.push(Label::new(
            options.title.clone(),
            24.0 * em,
            layout.title_band * 0.55,
            30.0 * em,
            Align::Left,
        ));
    }
    text::draw_labels(&mut canvas, &labels)?;
    Ok((canvas, layout))
}

/// A rectangle's border of thickness `line`, drawn inside `r`.
fn frame(canvas: &mut Canvas, r: [f64; 4], line: f64, c: Rgb) {
    let [x0, y0, x1, y1] = r;
    canvas.fill_rect(x0, y0, x1, y0 + line, c);
    canvas.fill_rect(x0, y1 - line, x1, y1, c);
    canvas.fill_rect(x0, y0, x0 + line, y1, c);
    canvas.fill_rect(x1 - line, y0, x1, y1, c);
}

#[cfg(test)]
mod tests;
