//! The files of a run's output folder that grow while it runs: the VTK collection index
//! (.pvd, a small XML file listing each state's file and time, so a viewer opens the whole
//! series at once) and the diagnostics table (CSV, one row per accepted step).
//!
//! Both are rewritten whole, through a temporary file and a rename, each time they are
//! saved, so a run killed at any moment leaves either the previous or the new complete file,
//! never a truncated one.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use crate::observe::SpeciesStats;
use crate::output::{write_atomically, OutputError};

use super::Diagnostics;

/// The .pvd index of a state series.
#[derive(Clone, Debug, Default)]
pub struct PvdIndex {
    entries: Vec<(f64, String)>,
}

impl PvdIndex {
    /// An empty index.
    pub fn new() -> Self {
        Self::default()
    }

    /// Adds the state file `file` (relative to the index's folder) at time `t`; an entry at
    /// the same or a later time (left from before a resume) is replaced.
    pub fn push(&mut self, t: f64, file: &str) {
        self.entries.retain(|(s, _)| *s < t);
        self.entries.push((t, file.to_string()));
    }

    /// Entries (time, file).
    pub fn entries(&self) -> &[(f64, String)] {
        &self.entries
    }

    /// Keeps the entries up to time `t` (used when a run resumes from a checkpoint).
    pub fn truncate_after(&mut self, t: f64) {
        self.entries.retain(|(s, _)| *s <= t);
    }

    /// Writes the index atomically.
    pub fn write(&self, path: &Path) -> Result<(), OutputError> {
        let mut xml = String::from(
            "<?xml version=\"1.0\"?>\n<VTKFile type=\"Collection\" version=\"0.1\" byte_order=\"LittleEndian\">\n  <Collection>\n",
        );
        for (t, file) in &self.entries {
            let _ = writeln!(
                xml,
                "    <DataSet timestep=\"{t:e}\" group=\"\" part=\"0\" file=\"{}\"/>",
                escape(file)
            );
        }
        xml.push_str("  </Collection>\n</VTKFile>\n");
        write_text(path, &xml)
    }

    /// Reads an index written by [`PvdIndex::write`] (to resume a run).
    pub fn read(path: &Path) -> Result<Self, OutputError> {
        let text = std::fs::read_to_string(path).map_err(|e| OutputError::Io {
            path: path.to_path_buf(),
            reason: e.to_string(),
        })?;
        let mut entries = Vec::new();
        for line in text.lines().filter(|l| l.contains("<DataSet")) {
            let attr = |name: &str| {
                let key = format!("{name}=\"");
                let start = line.find(&key)? + key.len();
                let end = start + line[start..].find('"')?;
                Some(unescape(&line[start..end]))
            };
            let bad = || OutputError::Encode {
                path: path.to_path_buf(),
                reason: format!("unreadable entry: {line}"),
            };
            let t: f64 = attr("timestep")
                .and_then(|s| s.parse().ok())
                .ok_or_else(bad)?;
            entries.push((t, attr("file").ok_or_else(bad)?));
        }
        Ok(Self { entries })
    }
}

fn escape(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('"', "&quot;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
}

fn unescape(s: &str) -> String {
    s.replace("&quot;", "\"")
        .replace("&lt;", "<")
        .replace("&gt;", ">")
        .replace("&amp;", "&")
}

fn write_text(path: &Path, text: &str) -> Result<(), OutputError> {
    write_atomically(path, |w| {
        w.write_all(text.as_bytes()).map_err(|e| OutputError::Io {
            path: path.to_path_buf(),
            reason: e.to_string(),
        })
    })
}

/// One accepted step's solver figures, written beside the diagnostics.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct StepFigures {
    /// Time after the step.
    pub t: f64,
    /// Step size.
    pub dt: f64,
    /// Newton iterations of the accepted attempt.
    pub newton: usize,
    /// Attempts rejected before it.
    pub rejections: usize,
}

/// One row of the diagnostics table, typed: the step's figures, each species' statistics,
/// each declared integral and the relative drift of each conserved one.
#[derive(Clone, Debug, PartialEq)]
pub struct DiagnosticsRow {
    /// Solver figures of the step.
    pub step: StepFigures,
    /// Per species, in model order.
    pub species: Vec<SpeciesStats>,
    /// Declared integrals' values, in model order.
    pub integrals: Vec<f64>,
    /// Relative drifts of the conserved integrals, in model order.
    pub drifts: Vec<f64>,
}

impl DiagnosticsRow {
    /// The row as the table writes it (17 significant digits: it reads back exactly).
    fn render(&self) -> String {
        let st = &self.step;
        let mut row = format!(
            "{:.17e},{:.17e},{},{}",
            st.t, st.dt, st.newton, st.rejections
        );
        for s in &self.species {
            let _ = write!(row, ",{:.17e},{:.17e},{:.17e}", s.integral, s.min, s.max);
        }
        for v in self.integrals.iter().chain(&self.drifts) {
            let _ = write!(row, ",{v:.17e}");
        }
        row
    }

    /// Reads a row written by [`DiagnosticsRow::render`] for a table of `species` species,
    /// `integrals` integrals and `drifts` conserved ones.
    fn parse(line: &str, species: usize, integrals: usize, drifts: usize) -> Option<Self> {
        let cells: Vec<&str> = line.split(',').collect();
        if cells.len() != 4 + 3 * species + integrals + drifts {
            return None;
        }
        let num = |k: usize| cells[k].trim().parse::<f64>().ok();
        let count = |k: usize| cells[k].trim().parse::<usize>().ok();
        let step = StepFigures {
            t: num(0)?,
            dt: num(1)?,
            newton: count(2)?,
            rejections: count(3)?,
        };
        let species = (0..species)
            .map(|s| {
                Some(SpeciesStats {
                    integral: num(4 + 3 * s)?,
                    min: num(5 + 3 * s)?,
                    max: num(6 + 3 * s)?,
                })
            })
            .collect::<Option<Vec<_>>>()?;
        let base = 4 + 3 * species.len();
        let integrals = (0..integrals)
            .map(|k| num(base + k))
            .collect::<Option<Vec<_>>>()?;
        let base = base + integrals.len();
        let drifts = (0..drifts)
            .map(|k| num(base + k))
            .collect::<Option<Vec<_>>>()?;
        Some(Self {
            step,
            species,
            integrals,
            drifts,
        })
    }
}

/// The diagnostics table: a header naming every column and one row per accepted step.
///
/// Columns: `t, dt, newton_iterations, rejections`, then per species `∫`, min and max
/// (`<name>_integral`, `<name>_min`, `<name>_max`), each declared integral by name, and for
/// each integral declared conserved its relative drift from the first row
/// (`<name>_drift`). Numbers are written with 17 significant digits (they read back exactly).
#[derive(Clone, Debug)]
pub struct DiagnosticsCsv {
    path: PathBuf,
    header: String,
    rows: Vec<DiagnosticsRow>,
    start: Option<Diagnostics>,
    /// Species, integrals and conserved integrals: the shape of every row.
    shape: (usize, usize, usize),
}

impl DiagnosticsCsv {
    /// A table for `species` and the integrals of `first` (the state at the start of the
    /// run, whose values the drifts are measured from).
    pub fn new(path: PathBuf, species: &[String], first: &Diagnostics) -> Self {
        let mut cols = vec![
            "t".to_string(),
            "dt".into(),
            "newton_iterations".into(),
            "rejections".into(),
        ];
        for s in species {
            cols.push(format!("{s}_integral"));
            cols.push(format!("{s}_min"));
            cols.push(format!("{s}_max"));
        }
        for i in &first.integrals {
            cols.push(i.name.clone());
        }
        for i in first.integrals.iter().filter(|i| i.conserved) {
            cols.push(format!("{}_drift", i.name));
        }
        let conserved = first.integrals.iter().filter(|i| i.conserved).count();
        Self {
            path,
            header: cols.join(","),
            rows: Vec::new(),
            start: Some(first.clone()),
            shape: (species.len(), first.integrals.len(), conserved),
        }
    }

    /// Appends the row of one accepted step (kept in memory until [`DiagnosticsCsv::save`]);
    /// returns the conserved drifts of that row.
    pub fn push(&mut self, step: StepFigures, d: &Diagnostics) -> Vec<(String, f64)> {
        let drifts = match &self.start {
            Some(start) => d.conserved_drift(start),
            None => Vec::new(),
        };
        self.rows.push(DiagnosticsRow {
            step,
            species: d.species.clone(),
            integrals: d.integrals.iter().map(|i| i.value).collect(),
            drifts: drifts.iter().map(|(_, v)| *v).collect(),
        });
        drifts
    }

    /// Rows so far.
    pub fn len(&self) -> usize {
        self.rows.len()
    }

    /// True before the first row.
    pub fn is_empty(&self) -> bool {
        self.rows.is_empty()
    }

    /// Writes the whole table atomically.
    pub fn save(&self) -> Result<(), OutputError> {
        let mut text = String::with_capacity(self.header.len() + 1 + self.rows.len() * 200);
        text.push_str(&self.header);
        text.push('\n');
        for r in &self.rows {
            text.push_str(&r.render());
            text.push('\n');
        }
        write_text(&self.path, &text)
    }

    /// The rows so far.
    pub fn rows(&self) -> &[DiagnosticsRow] {
        &self.rows
    }

    /// Reloads the rows of an earlier save up to time `t` (to resume a run); the header
    /// must match this table's.
    pub fn reload_until(&mut self, t: f64) -> Result<(), OutputError> {
        let bad = |reason: String| OutputError::Encode {
            path: self.path.clone(),
            reason,
        };
        let text = std::fs::read_to_string(&self.path).map_err(|e| OutputError::Io {
            path: self.path.clone(),
            reason: e.to_string(),
        })?;
        let mut lines = text.lines();
        if lines.next() != Some(self.header.as_str()) {
            return Err(bad("its columns differ from this run's".into()));
        }
        let (species, integrals, drifts) = self.shape;
        let mut rows = Vec::new();
        for line in lines {
            let row = DiagnosticsRow::parse(line, species, integrals, drifts)
                .ok_or_else(|| bad(format!("unreadable row: {line}")))?;
            if row.step.t <= t {
                rows.push(row);
            }
        }
        self.rows = rows;
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::observe::{IntegralValue, SpeciesStats};

    fn diag(t: f64, q: f64) -> Diagnostics {
        Diagnostics {
            time: t,
            species: vec![SpeciesStats {
                integral: q,
                min: 0.0,
                max: 2.0 * q,
            }],
            integrals: vec![IntegralValue {
                name: "q".into(),
                conserved: true,
                value: q,
            }],
            fields: vec![],
        }
    }

    #[test]
    fn csv_rows_round_trip_and_resume_drops_later_rows() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("d.csv");
        let first = diag(0.0, 3.0);
        let mut csv = DiagnosticsCsv::new(path.clone(), &["u".into()], &first);
        for k in 1..=4 {
            let t = 0.1 * k as f64;
            let drifts = csv.push(
                StepFigures {
                    t,
                    dt: 0.1,
                    newton: 2,
                    rejections: 0,
                },
                &diag(t, 3.0 + 1e-13 * k as f64),
            );
            // 3 + k·1e-13 is stored to within an ulp of 3 (4.4e-16).
            assert!((drifts[0].1 - 1e-13 * k as f64 / 3.0).abs() < 3e-16);
        }
        csv.save().unwrap();
        let text = std::fs::read_to_string(&path).unwrap();
        let lines: Vec<&str> = text.lines().collect();
        assert_eq!(
            lines[0],
            "t,dt,newton_iterations,rejections,u_integral,u_min,u_max,q,q_drift"
        );
        assert_eq!(lines.len(), 5);
        // 17 significant digits read back exactly.
        let v: f64 = lines[2].split(',').nth(7).unwrap().parse().unwrap();
        assert_eq!(v.to_bits(), (3.0 + 2e-13f64).to_bits());
        let mut again = DiagnosticsCsv::new(path.clone(), &["u".into()], &first);
        again.reload_until(0.25).unwrap();
        assert_eq!(again.len(), 2);
        // Typed rows read back exactly and are written again byte for byte.
        assert_eq!(again.rows()[1].step.t.to_bits(), 0.2f64.to_bits());
        assert_eq!(
            again.rows()[1].integrals[0].to_bits(),
            (3.0 + 2e-13f64).to_bits()
        );
        again.save().unwrap();
        let text_again = std::fs::read_to_string(&path).unwrap();
        assert_eq!(text_again.lines().collect::<Vec<_>>(), lines[..3]);
        let mut other = DiagnosticsCsv::new(path, &["v".into()], &first);
        assert!(other.reload_until(1.0).is_err());
    }

    #[test]
    fn pvd_index_round_trips_and_replaces_later_entries() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("run.pvd");
        let mut pvd = PvdIndex::new();
        pvd.push(0.0, "run_0000.vtu");
        pvd.push(0.5, "run_0001.vtu");
        pvd.push(1.0, "a&b \"q\".vtu");
        pvd.write(&path).unwrap();
        let back = PvdIndex::read(&path).unwrap();
        assert_eq!(back.entries(), pvd.entries());
        let mut resumed = back.clone();
        resumed.truncate_after(0.5);
        resumed.push(0.5, "run_0001.vtu");
        assert_eq!(resumed.entries().len(), 2);
    }
}
