//! The files of a run's output folder and the summary printed at the end.

use std::path::Path;

use agarium_core::observe::{Diagnostics, DiagnosticsRow, PvdIndex};
use agarium_core::output::{
    snapshot_title, write_field_png, write_series_png, write_vtu_as, Field, PlotOptions, Series,
    SnapshotOptions, ValueRange, VtuEncoding,
};
use agarium_core::time::Simulation;

use crate::error::RunError;
use crate::manifest::Manifest;

/// Pictures of the run's chosen fields (at its width and with its time unit), number `k`.
pub(crate) fn write_pictures(
    dir: &Path,
    stem: &str,
    k: usize,
    sim: &Simulation,
    d: &Diagnostics,
    settings: &Manifest,
) -> Result<(), RunError> {
    let state = sim.state();
    for name in &settings.pictures {
        let values: &[f64] = match sim.species_names().iter().position(|s| s == name) {
            Some(s) => state.row(s).to_slice().unwrap_or(&[]),
            None => match d.fields.iter().find(|(n, _)| n == name) {
                Some((_, v)) => v,
                None => continue,
            },
        };
        let options = SnapshotOptions {
            title: snapshot_title(name, sim.time(), &settings.time_unit),
            width: settings.picture_width,
            range: match settings.picture_ranges.get(name) {
                Some(&[min, max]) => ValueRange::Fixed { min, max },
                None => ValueRange::Auto,
            },
            log_scale: settings.picture_log.contains(name),
            ..SnapshotOptions::default()
        };
        let path = dir.join(format!("{stem}_{name}_{k:04}.png"));
        write_field_png(&path, sim.mesh(), values, &options).map_err(RunError::failure)?;
    }
    Ok(())
}

/// Diagnostics over time, kept for the plots.
pub(crate) struct History {
    names: Vec<String>,
    integral_names: Vec<String>,
    t: Vec<f64>,
    dt: Vec<(f64, f64)>,
    integrals: Vec<Vec<(f64, f64)>>,
    sups: Vec<Vec<(f64, f64)>>,
    declared: Vec<Vec<(f64, f64)>>,
}

impl History {
    pub(crate) fn new(names: &[String], start: &Diagnostics) -> Self {
        let mut h = History {
            names: names.to_vec(),
            integral_names: start.integrals.iter().map(|i| i.name.clone()).collect(),
            t: Vec::new(),
            dt: Vec::new(),
            integrals: vec![Vec::new(); names.len()],
            sups: vec![Vec::new(); names.len()],
            declared: vec![Vec::new(); start.integrals.len()],
        };
        h.push(start.time, 0.0, start);
        h
    }

    /// Rebuilds the history from the diagnostics table's rows (a resumed run).
    pub(crate) fn from_rows(
        names: &[String],
        start: &Diagnostics,
        rows: &[DiagnosticsRow],
    ) -> Self {
        let mut h = History::new(names, start);
        h.t.clear();
        h.dt.clear();
        h.integrals.iter_mut().for_each(Vec::clear);
        h.sups.iter_mut().for_each(Vec::clear);
        h.declared.iter_mut().for_each(Vec::clear);
        for r in rows {
            let t = r.step.t;
            h.t.push(t);
            if r.step.dt > 0.0 {
                h.dt.push((t, r.step.dt));
            }
            for (s, st) in r.species.iter().enumerate().take(names.len()) {
                h.integrals[s].push((t, st.integral));
                h.sups[s].push((t, st.max.abs().max(st.min.abs())));
            }
            for (k, v) in r.integrals.iter().enumerate().take(h.declared.len()) {
                h.declared[k].push((t, *v));
            }
        }
        h
    }

    pub(crate) fn push(&mut self, t: f64, dt: f64, d: &Diagnostics) {
        self.t.push(t);
        if dt > 0.0 {
            self.dt.push((t, dt));
        }
        for (s, st) in d.species.iter().enumerate() {
            self.integrals[s].push((t, st.integral));
            self.sups[s].push((t, st.max.abs().max(st.min.abs())));
        }
        for (k, i) in d.integrals.iter().enumerate() {
            self.declared[k].push((t, i.value));
        }
    }

    /// Integrals, sup-norms and step sizes over time as three PNG plots.
    pub(crate) fn plot(&self, dir: &Path, stem: &str) -> Result<(), RunError> {
        let named = |names: &[String], data: &[Vec<(f64, f64)>], prefix: &str| -> Vec<Series> {
            names
                .iter()
                .zip(data)
                .map(|(n, p)| Series {
                    name: format!("{prefix}{n}"),
                    points: p.clone(),
                })
                .collect()
        };
        let mut integrals = named(&self.names, &self.integrals, "∫ ");
        integrals.extend(named(&self.integral_names, &self.declared, "∫ "));
        let plots = [
            ("integrals", "integrals over the plate", integrals, false),
            (
                "sup",
                "sup-norms",
                self.names
                    .iter()
                    .zip(&self.sups)
                    .map(|(n, p)| Series {
                        name: format!("max |{n}|"),
                        points: p.clone(),
                    })
                    .collect(),
                true,
            ),
            (
                "dt",
                "step size",
                vec![Series {
                    name: "dt".into(),
                    points: self.dt.clone(),
                }],
                true,
            ),
        ];
        for (file, title, series, log_y) in plots {
            if series.iter().all(|s| s.points.len() < 2) {
                continue;
            }
            let options = PlotOptions {
                log_y,
                ..PlotOptions::default()
            };
            let path = dir.join(format!("{stem}_{file}.png"));
            if let Err(e) = write_series_png(&path, title, "t", &series, &options) {
                // A plot with nothing drawable (e.g. every sup-norm zero on a log axis) is
                // skipped, not fatal; a disk failure is.
                if matches!(e, agarium_core::output::OutputError::Io { .. }) {
                    return Err(RunError::failure(e));
                }
            }
        }
        Ok(())
    }
}

/// Relative drift of a conserved integral above which the run warns (far above round-off and
/// the iterative solvers' tolerance, far below anything that changes a picture).
pub(crate) const CONSERVED_WARNING: f64 = 1e-8;

/// Writes state number `k` and adds it to the series index.
pub(crate) fn write_state(
    dir: &Path,
    stem: &str,
    k: usize,
    sim: &Simulation,
    d: &Diagnostics,
    pvd: &mut PvdIndex,
    encoding: VtuEncoding,
) -> Result<(), RunError> {
    let state = sim.state();
    let names = sim.species_names();
    let mut fields: Vec<Field> = names
        .iter()
        .enumerate()
        .map(|(s, name)| Field {
            name,
            values: state.row(s).to_slice().unwrap_or(&[]),
        })
        .collect();
    for (name, values) in &d.fields {
        fields.push(Field { name, values });
    }
    let name = format!("{stem}_{k:04}.vtu");
    write_vtu_as(&dir.join(&name), sim.mesh(), &fields, &[], encoding)
        .map_err(RunError::failure)?;
    pvd.push(sim.time(), &name);
    pvd.write(&dir.join(format!("{stem}.pvd")))
        .map_err(RunError::failure)
}

/// The summary table of a finished run (several lines, each ending in a newline).
pub(crate) fn summary(
    sim: &Simulation,
    start: &Diagnostics,
    last: &Diagnostics,
    seconds: f64,
    output_seconds: f64,
) -> String {
    use std::fmt::Write as _;
    let mut out = String::new();
    let s = sim.stats();
    let _ = writeln!(
        out,
        "reached t = {:.6e} in {} steps ({} rejected), {} Newton iterations, {} Jacobians, {} linear solves, {:.2} s ({:.1} % on outputs)",
        sim.time(),
        s.steps,
        s.rejected,
        s.newton_iterations,
        s.jacobians,
        s.linear_solves,
        seconds,
        100.0 * output_seconds / seconds.max(1e-12)
    );
    if s.linear_iterations > 0 {
        let _ = writeln!(
            out,
            "  {} Krylov iterations ({:.1} per linear solve), {} of {} Jacobians with a new preconditioner",
            s.linear_iterations,
            s.linear_iterations as f64 / s.linear_solves.max(1) as f64,
            s.builds,
            s.jacobians
        );
    }
    let _ = writeln!(
        out,
        "  {:<20} {:>14} {:>14} {:>14}",
        "species", "integral", "min", "max"
    );
    for (name, st) in sim.species_names().iter().zip(&last.species) {
        let _ = writeln!(
            out,
            "  {:<20} {:>14.6e} {:>14.6e} {:>14.6e}",
            name, st.integral, st.min, st.max
        );
    }
    for (now, then) in last.integrals.iter().zip(&start.integrals) {
        let drift = if now.conserved {
            format!(
                "  (conserved: relative drift {:.2e})",
                (now.value - then.value).abs() / then.value.abs().max(f64::MIN_POSITIVE)
            )
        } else {
            String::new()
        };
        let _ = writeln!(out, "  ∫ {:<18} {:>14.6e}{drift}", now.name, now.value);
    }
    out
}
