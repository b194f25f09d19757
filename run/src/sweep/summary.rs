//! The sweep's table: one row per point (axis values, outcome, figures at the end), as CSV and
//! JSON. Rows are kept per point in the point's folder (`point.json`), so a resumed sweep and
//! a merge of shards rebuild exactly the table an uninterrupted sweep writes.

use std::fmt::Write as _;
use std::path::Path;

use serde::{Deserialize, Serialize};

use crate::error::RunError;
use crate::session::{Ended, Finished};

/// One species at the end of a point's run.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct SpeciesEnd {
    /// Species name.
    pub name: String,
    /// ∫ over the plate.
    pub integral: f64,
    /// Smallest node value.
    pub min: f64,
    /// Largest node value (the sup-norm of a non-negative species).
    pub max: f64,
}

/// Where and when a suspected blow-up was reported.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct BlowupCell {
    /// Time of the last accepted state.
    pub time: f64,
    /// Species whose peak grows.
    pub species: String,
    /// Coordinates of the peak.
    pub x: f64,
    /// Coordinates of the peak.
    pub y: f64,
}

/// One point's row.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Row {
    /// Point number.
    pub point: usize,
    /// Axis values in axis order.
    pub values: Vec<f64>,
    /// `reached`, `blow-up` or `failed`.
    pub outcome: String,
    /// Why a failed point failed (empty otherwise).
    pub reason: String,
    /// Time reached.
    pub time: Option<f64>,
    /// Accepted steps.
    pub steps: Option<usize>,
    /// Rejected step attempts.
    pub rejected: Option<usize>,
    /// Species at the end.
    pub species: Vec<SpeciesEnd>,
    /// Declared integrals at the end: (name, value).
    pub integrals: Vec<(String, f64)>,
    /// The blow-up report's time and place, if any.
    pub blowup: Option<BlowupCell>,
    /// Wall seconds of the point's run.
    pub wall_seconds: f64,
    /// Fingerprint of the point's run specification.
    pub fingerprint: String,
}

impl Row {
    /// The row of a finished run.
    pub fn of(point: usize, values: &[f64], fingerprint: &str, done: &Finished) -> Self {
        let (outcome, reason, blowup) = match &done.ended {
            Ended::Reached => ("reached", String::new(), None),
            Ended::BlowUp(r) => (
                "blow-up",
                String::new(),
                Some(BlowupCell {
                    time: r.time,
                    species: r.species.clone(),
                    x: r.location[0],
                    y: r.location[1],
                }),
            ),
            Ended::Interrupted => ("interrupted", String::new(), None),
            Ended::Failed(why) => ("failed", why.clone(), None),
        };
        let (species, integrals) = match &done.last {
            Some(d) => (
                d.species
                    .iter()
                    .zip(&done.species_names)
                    .map(|(s, name)| SpeciesEnd {
                        name: name.clone(),
                        integral: s.integral,
                        min: s.min,
                        max: s.max,
                    })
                    .collect(),
                d.integrals
                    .iter()
                    .map(|i| (i.name.clone(), i.value))
                    .collect(),
            ),
            None => (Vec::new(), Vec::new()),
        };
        Self {
            point,
            values: values.to_vec(),
            outcome: outcome.into(),
            reason,
            time: Some(done.time),
            steps: Some(done.stats.steps),
            rejected: Some(done.stats.rejected),
            species,
            integrals,
            blowup,
            wall_seconds: done.wall_seconds,
            fingerprint: fingerprint.into(),
        }
    }

    /// The row of a point that could not start.
    pub fn failed(point: usize, values: &[f64], fingerprint: &str, reason: &str) -> Self {
        Self {
            point,
            values: values.to_vec(),
            outcome: "failed".into(),
            reason: reason.into(),
            time: None,
            steps: None,
            rejected: None,
            species: Vec::new(),
            integrals: Vec::new(),
            blowup: None,
            wall_seconds: 0.0,
            fingerprint: fingerprint.into(),
        }
    }
}

impl Row {
    /// The value of a summary column (`t_end`, `steps`, `rejected`, `NAME_integral`,
    /// `NAME_min`, `NAME_max`, a declared integral, `blowup_t`, `wall_seconds`), if the row has
    /// one.
    pub fn value(&self, column: &str) -> Option<f64> {
        match column {
            "t_end" => return self.time,
            "steps" => return self.steps.map(|s| s as f64),
            "rejected" => return self.rejected.map(|s| s as f64),
            "blowup_t" => return self.blowup.as_ref().map(|b| b.time),
            "wall_seconds" => return Some(self.wall_seconds),
            _ => {}
        }
        if let Some((_, v)) = self.integrals.iter().find(|(n, _)| n == column) {
            return Some(*v);
        }
        self.species.iter().find_map(|s| {
            let part = column.strip_prefix(s.name.as_str())?.strip_prefix('_')?;
            match part {
                "integral" => Some(s.integral),
                "min" => Some(s.min),
                "max" => Some(s.max),
                _ => None,
            }
        })
    }
}

/// The columns a phase map can colour by, for a model with these species and integrals.
pub fn map_columns(species: &[String], integrals: &[String]) -> Vec<String> {
    let mut out: Vec<String> = ["t_end", "steps", "rejected", "blowup_t", "wall_seconds"]
        .iter()
        .map(|s| s.to_string())
        .collect();
    for s in species {
        for part in ["integral", "min", "max"] {
            out.push(format!("{s}_{part}"));
        }
    }
    out.extend(integrals.iter().cloned());
    out
}

/// A number as the table writes it (Rust's shortest round-trip form in scientific notation).
fn num(v: f64) -> String {
    format!("{v:e}")
}

/// A CSV field, quoted when it holds a separator, quote or line break (RFC 4180).
fn field(text: &str) -> String {
    if text.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", text.replace('"', "\"\""))
    } else {
        text.to_string()
    }
}

/// Writes `rows` (any order; written by point number) as `stem.csv` and `stem.json` in `dir`,
/// atomically. The columns: `point`, the axes, `outcome`, `reason`, `t_end`, `steps`,
/// `rejected`, per species `NAME_integral`, `NAME_min`, `NAME_max`, the declared integrals,
/// `blowup_t`, `blowup_species`, `blowup_x`, `blowup_y`, `wall_seconds` (last, the one column
/// that differs between repeated sweeps).
pub fn write_summary(
    dir: &Path,
    stem: &str,
    axes: &[String],
    rows: &[Row],
) -> Result<(), RunError> {
    let mut rows: Vec<&Row> = rows.iter().collect();
    rows.sort_by_key(|r| r.point);
    // Species and integral columns in order of first appearance (every point of a sweep runs
    // the same model; failed points leave them blank).
    let mut species: Vec<String> = Vec::new();
    let mut integrals: Vec<String> = Vec::new();
    for r in &rows {
        for s in &r.species {
            if !species.contains(&s.name) {
                species.push(s.name.clone());
            }
        }
        for (n, _) in &r.integrals {
            if !integrals.contains(n) {
                integrals.push(n.clone());
            }
        }
    }
    let mut header: Vec<String> = vec!["point".into()];
    header.extend(axes.iter().cloned());
    header.extend(
        ["outcome", "reason", "t_end", "steps", "rejected"]
            .iter()
            .map(|s| s.to_string()),
    );
    for s in &species {
        for part in ["integral", "min", "max"] {
            header.push(format!("{s}_{part}"));
        }
    }
    header.extend(integrals.iter().cloned());
    header.extend(
        [
            "blowup_t",
            "blowup_species",
            "blowup_x",
            "blowup_y",
            "wall_seconds",
        ]
        .iter()
        .map(|s| s.to_string()),
    );
    let mut csv = String::new();
    let _ = writeln!(
        csv,
        "{}",
        header
            .iter()
            .map(|h| field(h))
            .collect::<Vec<_>>()
            .join(",")
    );
    for r in &rows {
        let mut cells: Vec<String> = vec![r.point.to_string()];
        cells.extend(r.values.iter().map(|v| num(*v)));
        cells.push(r.outcome.clone());
        cells.push(field(&r.reason));
        cells.push(r.time.map(num).unwrap_or_default());
        cells.push(r.steps.map(|s| s.to_string()).unwrap_or_default());
        cells.push(r.rejected.map(|s| s.to_string()).unwrap_or_default());
        for s in &species {
            match r.species.iter().find(|e| &e.name == s) {
                Some(e) => cells.extend([num(e.integral), num(e.min), num(e.max)]),
                None => cells.extend([String::new(), String::new(), String::new()]),
            }
        }
        for n in &integrals {
            cells.push(
                r.integrals
                    .iter()
                    .find(|(m, _)| m == n)
                    .map(|(_, v)| num(*v))
                    .unwrap_or_default(),
            );
        }
        match &r.blowup {
            Some(b) => cells.extend([num(b.time), field(&b.species), num(b.x), num(b.y)]),
            None => cells.extend([String::new(), String::new(), String::new(), String::new()]),
        }
        cells.push(format!("{:.3}", r.wall_seconds));
        let _ = writeln!(csv, "{}", cells.join(","));
    }
    let json = serde_json::to_string_pretty(&serde_json::json!({
        "axes": axes,
        "rows": rows,
    }))
    .map_err(RunError::failure)?;
    write_text(&dir.join(format!("{stem}.csv")), &csv)?;
    write_text(&dir.join(format!("{stem}.json")), &json)
}

/// Writes `text` to `path` atomically.
pub(crate) fn write_text(path: &Path, text: &str) -> Result<(), RunError> {
    agarium_core::output::write_atomically(path, |w| {
        w.write_all(text.as_bytes())
            .map_err(|e| agarium_core::output::OutputError::Io {
                path: path.to_path_buf(),
                reason: e.to_string(),
            })
    })
    .map_err(RunError::failure)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fields_with_separators_are_quoted() {
        assert_eq!(field("plain"), "plain");
        assert_eq!(field("a, b"), "\"a, b\"");
        assert_eq!(field("say \"x\""), "\"say \"\"x\"\"\"");
    }

    #[test]
    fn the_table_is_sorted_by_point_with_blanks_for_failed_points() {
        let dir = tempfile::tempdir().unwrap();
        let ok = Row {
            point: 1,
            values: vec![2.0],
            outcome: "reached".into(),
            reason: String::new(),
            time: Some(1.0),
            steps: Some(10),
            rejected: Some(0),
            species: vec![SpeciesEnd {
                name: "u".into(),
                integral: 3.0,
                min: 0.0,
                max: 1.5,
            }],
            integrals: vec![("cells".into(), 3.0)],
            blowup: None,
            wall_seconds: 0.25,
            fingerprint: "f1".into(),
        };
        let bad = Row::failed(0, &[1.0], "f0", "mesh: too many nodes, try a larger size");
        write_summary(dir.path(), "summary", &["chi".into()], &[ok, bad]).unwrap();
        let text = std::fs::read_to_string(dir.path().join("summary.csv")).unwrap();
        let lines: Vec<&str> = text.lines().collect();
        assert_eq!(
            lines[0],
            "point,chi,outcome,reason,t_end,steps,rejected,u_integral,u_min,u_max,cells,blowup_t,blowup_species,blowup_x,blowup_y,wall_seconds"
        );
        assert_eq!(
            lines[1],
            "0,1e0,failed,\"mesh: too many nodes, try a larger size\",,,,,,,,,,,,0.000"
        );
        assert_eq!(
            lines[2],
            "1,2e0,reached,,1e0,10,0,3e0,0e0,1.5e0,3e0,,,,,0.250"
        );
    }
}
