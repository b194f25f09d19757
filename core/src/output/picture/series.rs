//! Line plots of time series (step sizes, norms over time) with axes, ticks and a legend.

use super::canvas::{Canvas, Mask, Rgb, WHITE};
use super::scale::Scale;
use super::text::{self, Align, Label};
use super::{frame, write_canvas};
use crate::output::OutputError;
use std::path::Path;

/// One named line of a plot.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Series {
    /// Legend entry; empty names get no entry.
    pub name: String,
    /// `(x, y)` points, drawn joined in the given order.
    pub points: Vec<(f64, f64)>,
}

/// Settings of a time-series plot.
#[derive(Clone, Debug)]
pub struct PlotOptions {
    /// Width in pixels (clamped to 320 ..= 8192).
    pub width: u32,
    /// Height in pixels (clamped to 240 ..= 8192).
    pub height: u32,
    /// Label of the y axis; empty for none.
    pub y_label: String,
    /// Logarithmic y axis. Points with `y <= 0` cannot be shown on it: they are skipped and
    /// the line is broken there.
    pub log_y: bool,
}

impl Default for PlotOptions {
    fn default() -> Self {
        PlotOptions {
            width: 900,
            height: 560,
            y_label: String::new(),
            log_y: false,
        }
    }
}

/// Line colours: the Okabe–Ito colour-blind-safe palette without its yellow (too pale on
/// white), cycled when there are more series.
pub(super) const PALETTE: [Rgb; 7] = [
    [0, 114, 178],
    [213, 94, 0],
    [0, 158, 115],
    [204, 121, 167],
    [230, 159, 0],
    [86, 180, 233],
    [0, 0, 0],
];

/// Plots `series` against a shared x axis and writes a PNG, atomically.
///
/// Points with a non-finite coordinate, and on a log-y axis points with `y <= 0`, are
/// skipped (the line is broken there rather than joined across); an isolated point is drawn
/// as a dot. The axes span the drawable points (y with a 5 % margin). Errors
/// ([`OutputError::Encode`]) when no point at all can be drawn or the labels leave no room
/// for the plot; file-system failures are [`OutputError::Io`]. Nothing is left at `path` on
/// failure.
pub fn write_series_png(
    path: &Path,
    title: &str,
    x_label: &str,
    series: &[Series],
    options: &PlotOptions,
) -> Result<(), OutputError> {
    let canvas =
        render_series(title, x_label, series, options).map_err(|reason| OutputError::Encode {
            path: path.to_path_buf(),
            reason,
        })?;
    write_canvas(path, &canvas)
}

/// Whether a point can be drawn under `options`.
fn drawable(p: (f64, f64), log_y: bool) -> bool {
    p.0.is_finite() && p.1.is_finite() && (!log_y || p.1 > 0.0)
}

/// The pixels of a series plot, text included.
pub(super) fn render_series(
    title: &str,
    x_label: &str,
    series: &[Series],
    options: &PlotOptions,
) -> Result<Canvas, String> {
    render_series_with_frame(title, x_label, series, options).map(|(c, _)| c)
}

/// Like [`render_series`], also returning the plot rectangle `[x0, y0, x1, y1]`.
pub(super) fn render_series_with_frame(
    title: &str,
    x_label: &str,
    series: &[Series],
    options: &PlotOptions,
) -> Result<(Canvas, [f64; 4]), String> {
    text::ensure_font()?;
    let log_y = options.log_y;
    let mut bb = [
        f64::INFINITY,
        f64::INFINITY,
        f64::NEG_INFINITY,
        f64::NEG_INFINITY,
    ];
    for &p in series.iter().flat_map(|s| &s.points) {
        if drawable(p, log_y) {
            bb = [
                bb[0].min(p.0),
                bb[1].min(p.1),
                bb[2].max(p.0),
                bb[3].max(p.1),
            ];
        }
    }
    if bb[0] > bb[2] {
        return Err(if log_y {
            "nothing to plot: no point with finite x and positive finite y".into()
        } else {
            "nothing to plot: no point with finite coordinates".into()
        });
    }
    let xs = Scale::linear(bb[0], bb[2]);
    let ys = if log_y {
        // 5 % margins, in decades: exponents stay finite where ratios would overflow.
        let (a, b) = (bb[1].log10(), bb[3].log10());
        let pad = 0.05 * (b - a);
        Scale::log_exponents(a - pad, b + pad)
    } else {
        // Halves first and ends kept finite, for values near ±f64::MAX.
        let pad = 0.1 * (bb[3] / 2.0 - bb[1] / 2.0);
        Scale::linear((bb[1] - pad).max(-f64::MAX), (bb[3] + pad).min(f64::MAX))
    };
    let (width, height) = (
        options.width.clamp(320, 8192) as f64,
        options.height.clamp(240, 8192) as f64,
    );
    // Scales with the picture, but text stays legible on small ones.
    let em = (width.min(height * 1.6) / 900.0).max(0.7);
    let margin = 20.0 * em;
    let tick_size = 17.0 * em;
    let label_size = 19.0 * em;
    let title_band = if title.is_empty() { margin } else { 56.0 * em };
    let y_ticks = ys.ticks(6);
    let y_label_w = y_ticks
        .iter()
        .map(|t| text::text_width(&t.label, tick_size))
        .fold(0.0, f64::max);
    let left = margin
        + if options.y_label.is_empty() {
            0.0
        } else {
            32.0 * em
        }
        + y_label_w
        + 14.0 * em;
    let bottom = margin + if x_label.is_empty() { 0.0 } else { 32.0 * em } + 30.0 * em;
    let right = margin + 24.0 * em;
    let plot = [left, title_band + 8.0 * em, width - right, height - bottom];
    let (pw, ph) = (plot[2] - plot[0], plot[3] - plot[1]);
    if pw < 40.0 || ph < 40.0 {
        return Err("the picture is too small for its labels".into());
    }
    let to_px = |p: (f64, f64)| {
        [
            plot[0] + xs.fraction(p.0) * pw,
            plot[3] - ys.fraction(p.1) * ph,
        ]
    };
    let x_ticks = xs.ticks(((pw / (110.0 * em)) as usize).clamp(3, 10));

    let mut canvas = Canvas::new(width.round() as usize, height.round() as usize);
    let line = em.max(1.0).round();
    let (grid, minor, ink): (Rgb, Rgb, Rgb) = ([222, 222, 222], [240, 240, 240], [40, 40, 40]);
    if let Some((d0, d1)) = ys.decades() {
        if d1 - d0 <= 8 {
            for d in d0..=d1 {
                for m in 2..=9 {
                    let f = ys.fraction_of_coordinate(d as f64 + (m as f64).log10());
                    if (0.0..=1.0).contains(&f) {
                        let y = (plot[3] - f * ph).round();
                        canvas.fill_rect(plot[0], y - line / 2.0, plot[2], y + line / 2.0, minor);
                    }
                }
            }
        }
    }
    let mut labels = Vec::new();
    for t in &y_ticks {
        if !(0.0..=1.0).contains(&t.fraction) {
            continue;
        }
        let y = (plot[3] - t.fraction * ph).round();
        canvas.fill_rect(plot[0], y - line / 2.0, plot[2], y + line / 2.0, grid);
        canvas.fill_rect(
            plot[0] - 6.0 * em,
            y - line / 2.0,
            plot[0],
            y + line / 2.0,
            ink,
        );
        labels.push(Label::new(
            t.label.clone(),
            plot[0] - 10.0 * em,
            y,
            tick_size,
            Align::Right,
        ));
    }
    for t in &x_ticks {
        if !(-1e-9..=1.0 + 1e-9).contains(&t.fraction) {
            continue;
        }
        let x = (plot[0] + t.fraction * pw).round();
        canvas.fill_rect(x - line / 2.0, plot[1], x + line / 2.0, plot[3], grid);
        canvas.fill_rect(
            x - line / 2.0,
            plot[3],
            x + line / 2.0,
            plot[3] + 6.0 * em,
            ink,
        );
        labels.push(Label::new(
            t.label.clone(),
            x,
            plot[3] + 20.0 * em,
            tick_size,
            Align::Centre,
        ));
    }
    frame(
        &mut canvas,
        [plot[0] - line, plot[1], plot[2], plot[3] + line],
        line,
        ink,
    );

    let mut mask = Mask::new(canvas.width, canvas.height);
    let half = (1.1 * em).max(0.6);
    for (k, s) in series.iter().enumerate() {
        let pts = &s.points;
        for (i, &p) in pts.iter().enumerate() {
            if !drawable(p, log_y) {
                continue;
            }
            let next = pts.get(i + 1).filter(|q| drawable(**q, log_y));
            let prev_ok = i > 0 && drawable(pts[i - 1], log_y);
            match next {
                Some(&q) => mask.segment(to_px(p), to_px(q), half, plot),
                None if !prev_ok => mask.disc(to_px(p), 2.6 * em, plot),
                None => {}
            }
        }
        mask.paint(&mut canvas, PALETTE[k % PALETTE.len()]);
    }

    // Legend: top right inside the plot, on white.
    let named: Vec<(usize, &str)> = series
        .iter()
        .enumerate()
        .filter(|(_, s)| !s.name.is_empty())
        .map(|(k, s)| (k, s.name.as_str()))
        .collect();
    if !named.is_empty() {
        let row = 24.0 * em;
        let name_w = named
            .iter()
            .map(|(_, n)| text::text_width(n, tick_size))
            .fold(0.0, f64::max);
        let w = 12.0 * em + 30.0 * em + 10.0 * em + name_w + 12.0 * em;
        let h = named.len() as f64 * row + 10.0 * em;
        let bx = [plot[2] - 10.0 * em - w, plot[1] + 10.0 * em];
        let rect = [bx[0], bx[1], bx[0] + w, bx[1] + h];
        canvas.fill_rect(rect[0], rect[1], rect[2], rect[3], WHITE);
        frame(&mut canvas, rect, line, [170, 170, 170]);
        for (r, (k, name)) in named.iter().enumerate() {
            let y = bx[1] + 5.0 * em + (r as f64 + 0.5) * row;
            let x = bx[0] + 12.0 * em;
            mask.segment([x, y], [x + 30.0 * em, y], half, rect);
            mask.paint(&mut canvas, PALETTE[k % PALETTE.len()]);
            labels.push(Label::new(*name, x + 40.0 * em, y, tick_size, Align::Left));
        }
    }

    if !title.is_empty() {
        labels.push(Label::new(
            title,
            margin,
            title_band * 0.55,
            26.0 * em,
            Align::Left,
        ));
    }
    if !x_label.is_empty() {
        labels.push(Label::new(
            x_label,
            (plot[0] + plot[2]) / 2.0,
            height - margin - 12.0 * em,
            label_size,
            Align::Centre,
        ));
    }
    if !options.y_label.is_empty() {
        let mut l = Label::new(
            options.y_label.clone(),
            margin + 12.0 * em,
            (plot[1] + plot[3]) / 2.0,
            label_size,
            Align::Centre,
        );
        l.rotated = true;
        labels.push(l);
    }
    text::draw_labels(&mut canvas, &labels)?;
    Ok((canvas, plot))
}
