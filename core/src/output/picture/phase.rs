//! Phase maps: the points of a two-parameter sweep in the plane of its two axes, coloured by
//! one figure of each point's outcome (viridis, with a colour bar), with distinct marks for
//! points whose run stopped at a suspected blow-up (a cross) and points that failed (grey).
//! A full grid is drawn as touching cells; other point sets (samples) as discs.

use super::canvas::{Canvas, Mask, Rgb};
use super::scale::Scale;
use super::text::{self, Align, Label};
use super::{frame, write_canvas, ColourTable, NAN_GREY};
use crate::output::OutputError;
use std::path::Path;

/// What a point of the map shows.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum PhaseMark {
    /// A value to colour by (NaN: no value, drawn grey).
    Value(f64),
    /// The run stopped at a suspected blow-up; the value, if any, still colours the cell.
    BlowUp(f64),
    /// The run failed.
    Failed,
}

/// One point of a phase map.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct PhasePoint {
    /// Coordinate along the first axis.
    pub x: f64,
    /// Coordinate along the second axis.
    pub y: f64,
    /// Colour and mark.
    pub mark: PhaseMark,
}

/// Labels and scales of a phase map.
#[derive(Clone, Debug, Default)]
pub struct PhaseOptions {
    /// Title above the map.
    pub title: String,
    /// Label of the first axis (name and unit).
    pub x_label: String,
    /// Label of the second axis.
    pub y_label: String,
    /// Label of the colour bar (the figure's name).
    pub value_label: String,
    /// Logarithmic first axis (all x positive).
    pub log_x: bool,
    /// Logarithmic second axis (all y positive).
    pub log_y: bool,
}

fn axis_scale(values: &[f64], log: bool) -> Result<Scale, String> {
    let lo = values.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = values.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    if !(lo.is_finite() && hi.is_finite()) {
        return Err("a phase map needs finite coordinates".into());
    }
    if log {
        if lo <= 0.0 {
            return Err("a logarithmic axis needs positive values".into());
        }
        let (a, b) = (lo.log10(), hi.log10());
        let pad = if b > a { 0.0 } else { 0.5 };
        Ok(Scale::log_exponents(a - pad, b + pad))
    } else {
        let pad = if hi > lo {
            0.0
        } else {
            0.5 * lo.abs().max(1.0)
        };
        Ok(Scale::linear(lo - pad, hi + pad))
    }
}

/// Sorted distinct values.
fn distinct(v: impl Iterator<Item = f64>) -> Vec<f64> {
    let mut d: Vec<f64> = v.collect();
    d.sort_by(f64::total_cmp);
    d.dedup();
    d
}

/// Writes the phase map of `points` as a PNG of `width` pixels, atomically.
pub fn write_phase_png(
    path: &Path,
    points: &[PhasePoint],
    options: &PhaseOptions,
    width: u32,
) -> Result<(), OutputError> {
    let canvas = render_phase(points, options, width).map_err(|reason| OutputError::Encode {
        path: path.to_path_buf(),
        reason,
    })?;
    write_canvas(path, &canvas)
}

pub(super) fn render_phase(
    points: &[PhasePoint],
    options: &PhaseOptions,
    width: u32,
) -> Result<Canvas, String> {
    text::ensure_font()?;
    if points.is_empty() {
        return Err("a phase map needs at least one point".into());
    }
    let xs_all: Vec<f64> = points.iter().map(|p| p.x).collect();
    let ys_all: Vec<f64> = points.iter().map(|p| p.y).collect();
    let (dx, dy) = (
        distinct(xs_all.iter().copied()),
        distinct(ys_all.iter().copied()),
    );
    // A full grid (every combination once) is drawn as cells spanning to the midpoints.
    let grid = dx.len() * dy.len() == points.len() && dx.len() <= 200 && dy.len() <= 200;
    let xs = axis_scale(&xs_all, options.log_x)?;
    let ys = axis_scale(&ys_all, options.log_y)?;
    let values: Vec<f64> = points
        .iter()
        .filter_map(|p| match p.mark {
            PhaseMark::Value(v) | PhaseMark::BlowUp(v) if v.is_finite() => Some(v),
            _ => None,
        })
        .collect();
    let (vlo, vhi) = values
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &v| {
            (a.min(v), b.max(v))
        });
    let vscale = if vlo.is_finite() {
        let pad = if vhi > vlo {
            0.0
        } else {
            0.5 * vlo.abs().max(1e-300)
        };
        Some(Scale::linear(vlo - pad, vhi + pad))
    } else {
        None
    };

    let width = width.clamp(480, 8192) as f64;
    let height = (width * 0.72).round();
    let em = (width / 900.0).max(0.7);
    let tick_size = 17.0 * em;
    let label_size = 19.0 * em;
    let title_band = if options.title.is_empty() {
        20.0 * em
    } else {
        56.0 * em
    };
    let y_ticks = ys.ticks(6);
    let y_tick_w = y_ticks
        .iter()
        .map(|t| text::text_width(&t.label, tick_size))
        .fold(0.0, f64::max);
    let left = 20.0 * em + 32.0 * em + y_tick_w + 14.0 * em;
    let bar_w = 26.0 * em;
    let right = 20.0 * em + bar_w + 110.0 * em;
    let bottom = 20.0 * em + 32.0 * em + 30.0 * em;
    let plot = [left, title_band + 8.0 * em, width - right, height - bottom];
    let (pw, ph) = (plot[2] - plot[0], plot[3] - plot[1]);
    if pw < 60.0 || ph < 60.0 {
        return Err("the picture is too small for its labels".into());
    }
    // Cells and discs are inset from the frame by half a cell.
    let inset = |n: usize, len: f64| {
        if grid {
            len / (2.0 * n as f64)
        } else {
            0.06 * len
        }
    };
    let (ix, iy) = (inset(dx.len(), pw), inset(dy.len(), ph));
    let to_px = |x: f64, y: f64| {
        [
            plot[0] + ix + xs.fraction(x) * (pw - 2.0 * ix),
            plot[3] - iy - ys.fraction(y) * (ph - 2.0 * iy),
        ]
    };
    let mut canvas = Canvas::new(width as usize, height as usize);
    let ink: Rgb = [30, 30, 30];
    let line = em.max(1.0).round();
    let table = ColourTable::viridis();
    let colour = |m: PhaseMark| match (m, &vscale) {
        (PhaseMark::Value(v) | PhaseMark::BlowUp(v), Some(s)) if v.is_finite() => {
            table.at(s.fraction(v))
        }
        _ => NAN_GREY,
    };
    // Cell edges: midpoints between neighbouring distinct values, in pixels.
    let edges = |d: &[f64], px: &dyn Fn(f64) -> f64, lo: f64, hi: f64| -> Vec<f64> {
        let mut e = vec![lo];
        for w in d.windows(2) {
            e.push((px(w[0]) + px(w[1])) / 2.0);
        }
        e.push(hi);
        e
    };
    let mut crosses = Mask::new(canvas.width, canvas.height);
    let everywhere = [0.0, 0.0, width, height];
    let cell_size;
    if grid {
        let ex = edges(&dx, &|x| to_px(x, dy[0])[0], plot[0], plot[2]);
        let ey = edges(&dy, &|y| to_px(dx[0], y)[1], plot[3], plot[1]);
        cell_size = (pw / dx.len() as f64).min(ph / dy.len() as f64);
        for p in points {
            let i = dx.partition_point(|&v| v < p.x);
            let j = dy.partition_point(|&v| v < p.y);
            let (x0, x1) = (ex[i], ex[i + 1]);
            let (y0, y1) = (ey[j + 1], ey[j]);
            canvas.fill_rect(x0, y0, x1, y1, colour(p.mark));
        }
    } else {
        cell_size = 0.05 * pw.min(ph);
        let mut discs: Vec<(Rgb, [f64; 2])> = points
            .iter()
            .map(|p| (colour(p.mark), to_px(p.x, p.y)))
            .collect();
        discs.sort_by_key(|d| d.0);
        for (c, at) in discs {
            let mut m = Mask::new(canvas.width, canvas.height);
            m.disc(at, cell_size / 2.0, everywhere);
            m.paint(&mut canvas, c);
        }
    }
    let mut failed_rings = Mask::new(canvas.width, canvas.height);
    for p in points {
        let c = to_px(p.x, p.y);
        let r = 0.3 * cell_size;
        match p.mark {
            PhaseMark::BlowUp(_) => {
                crosses.segment(
                    [c[0] - r, c[1] - r],
                    [c[0] + r, c[1] + r],
                    1.6 * line,
                    everywhere,
                );
                crosses.segment(
                    [c[0] - r, c[1] + r],
                    [c[0] + r, c[1] - r],
                    1.6 * line,
                    everywhere,
                );
            }
            PhaseMark::Failed => {
                // A short dash through the grey cell.
                failed_rings.segment([c[0] - r, c[1]], [c[0] + r, c[1]], 1.6 * line, everywhere);
            }
            PhaseMark::Value(_) => {}
        }
    }
    crosses.paint(&mut canvas, [255, 255, 255]);
    failed_rings.paint(&mut canvas, ink);
    frame(&mut canvas, plot, line, ink);

    let mut labels = Vec::new();
    for t in &y_ticks {
        if !(-1e-9..=1.0 + 1e-9).contains(&t.fraction) {
            continue;
        }
        let y = (plot[3] - iy - t.fraction * (ph - 2.0 * iy)).round();
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
    let x_ticks = xs.ticks(((pw / (110.0 * em)) as usize).clamp(3, 10));
    for t in &x_ticks {
        if !(-1e-9..=1.0 + 1e-9).contains(&t.fraction) {
            continue;
        }
        let x = (plot[0] + ix + t.fraction * (pw - 2.0 * ix)).round();
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
            plot[3] + 22.0 * em,
            tick_size,
            Align::Centre,
        ));
    }
    labels.push(Label::new(
        options.x_label.clone(),
        (plot[0] + plot[2]) / 2.0,
        plot[3] + 56.0 * em,
        label_size,
        Align::Centre,
    ));
    let mut yl = Label::new(
        options.y_label.clone(),
        20.0 * em + 10.0 * em,
        (plot[1] + plot[3]) / 2.0,
        label_size,
        Align::Centre,
    );
    yl.rotated = true;
    labels.push(yl);
    // Colour bar with its ticks, the figure's name above it, the marks' legend below.
    let bar = [
        plot[2] + 24.0 * em,
        plot[1] + 30.0 * em,
        plot[2] + 24.0 * em + bar_w,
        plot[3] - 70.0 * em,
    ];
    if let Some(s) = &vscale {
        let (r0, r1) = (bar[1].round() as i64, bar[3].round() as i64);
        for r in r0..r1 {
            let t = 1.0 - ((r - r0) as f64 + 0.5) / (r1 - r0).max(1) as f64;
            canvas.fill_rect(bar[0], r as f64 + 0.5, bar[2], r as f64 + 1.5, table.at(t));
        }
        frame(&mut canvas, bar, line, ink);
        for t in s.ticks(6) {
            if !(-1e-9..=1.0 + 1e-9).contains(&t.fraction) {
                continue;
            }
            let y = (bar[3] - t.fraction * (bar[3] - bar[1])).round();
            canvas.fill_rect(
                bar[2],
                y - line / 2.0,
                bar[2] + 6.0 * em,
                y + line / 2.0,
                ink,
            );
            labels.push(Label::new(
                t.label,
                bar[2] + 10.0 * em,
                y,
                tick_size,
                Align::Left,
            ));
        }
    }
    labels.push(Label::new(
        options.value_label.clone(),
        bar[0],
        plot[1] + 12.0 * em,
        tick_size,
        Align::Left,
    ));
    let legend_y = plot[3] - 40.0 * em;
    if points
        .iter()
        .any(|p| matches!(p.mark, PhaseMark::BlowUp(_)))
    {
        labels.push(Label::new(
            "× blow-up",
            bar[0],
            legend_y,
            tick_size,
            Align::Left,
        ));
    }
    if points.iter().any(|p| matches!(p.mark, PhaseMark::Failed)) {
        labels.push(Label::new(
            "– failed (grey)",
            bar[0],
            legend_y + 24.0 * em,
            tick_size,
            Align::Left,
        ));
    }
    if !options.title.is_empty() {
        labels.push(Label::new(
            options.title.clone(),
            24.0 * em,
            title_band * 0.55,
            26.0 * em,
            Align::Left,
        ));
    }
    text::draw_labels(&mut canvas, &labels)?;
    Ok(canvas)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_grid_is_drawn_as_cells_coloured_by_value_with_marks() {
        let mut points = Vec::new();
        for (i, x) in [1.0, 2.0, 3.0].iter().enumerate() {
            for (j, y) in [10.0, 20.0].iter().enumerate() {
                let mark = match (i, j) {
                    (2, 1) => PhaseMark::BlowUp(5.0),
                    (0, 1) => PhaseMark::Failed,
                    _ => PhaseMark::Value((i + j) as f64),
                };
                points.push(PhasePoint { x: *x, y: *y, mark });
            }
        }
        let options = PhaseOptions {
            title: "test".into(),
            x_label: "a".into(),
            y_label: "b".into(),
            value_label: "v".into(),
            ..PhaseOptions::default()
        };
        let c = render_phase(&points, &options, 900).unwrap();
        // The centre of the (x = 1, y = 10) cell has the lowest value: viridis' first colour;
        // the failed cell (x = 1, y = 20) is grey away from its dash.
        let plot_px = |fx: f64, fy: f64| -> (usize, usize) {
            // Find the frame by scanning the middle row for the dark frame pixels.
            let row = c.height / 2;
            let xs: Vec<usize> = (0..c.width)
                .filter(|&x| c.get(x, row) == [30, 30, 30])
                .collect();
            let (l, r) = (xs[0], xs[xs.len() - 1]);
            let col = (l + r) / 2;
            let ys: Vec<usize> = (0..c.height)
                .filter(|&y| c.get(col, y) == [30, 30, 30])
                .collect();
            let (t, b) = (ys[0], ys[ys.len() - 1]);
            (
                (l as f64 + fx * (r - l) as f64) as usize,
                (t as f64 + fy * (b - t) as f64) as usize,
            )
        };
        let (x, y) = plot_px(1.0 / 6.0, 0.75);
        assert_eq!(c.get(x, y), [68, 1, 84]);
        let (x, y) = plot_px(1.0 / 6.0 - 0.1, 0.25 - 0.1);
        assert_eq!(c.get(x, y), NAN_GREY);
        assert!(render_phase(&[], &options, 900).is_err());
    }
}
