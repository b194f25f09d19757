//! Parameter sweeps: many runs of one base specification, one per point of a plan of axes,
//! run in parallel on the local cores or as disjoint shards (for example the tasks of a
//! cluster job array), each point in its own folder, and one summary table.
//!
//! Folder of a sweep:
//!
//! ```text
//! sweep.json            the plan, the base run's fingerprint and the plan's hash
//! points/0000/          the run folder of point 0 (run.json, states, …) and point.json, its
//!                       summary row, written when the point finished
//! summary.csv, .json    the table of all points (an unsharded sweep, or `merge`)
//! shard-K-of-N.csv, .json  the table of one shard's points
//! ```
//!
//! A point whose folder holds a `point.json` with its specification's fingerprint is not run
//! again, so a killed sweep started again loses only the points that were running. A point
//! that fails is recorded with its reason and the sweep goes on.

mod axis;
mod plan;
mod summary;

pub use axis::{Axis, AxisSection, Scale};
pub use plan::{Combine, Plan, Point, Sample, SampleMethod, Shard};
pub use summary::{map_columns, write_summary, BlowupCell, Row, SpeciesEnd};

use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::mpsc;

use serde::{Deserialize, Serialize};

use crate::error::RunError;
use crate::manifest::sha256;
use crate::session::{Ended, Run, Silent};
use crate::spec::RunSpec;
use summary::write_text;

/// File of the plan in a sweep's folder.
pub const SWEEP_FILE: &str = "sweep.json";
/// File of a finished point's row in its folder.
pub const POINT_FILE: &str = "point.json";
/// Width of the points' pictures for a contact sheet (the smallest picture width).
const CONTACT_WIDTH: u32 = 320;

/// The `[sweep]` table of a run file.
#[derive(Clone, Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SweepSection {
    /// Axes.
    #[serde(default)]
    pub axis: Vec<AxisSection>,
    /// `grid` (default) or `zip`.
    #[serde(default)]
    pub combine: Combine,
    /// Sampled points instead.
    pub sample: Option<Sample>,
    /// Summary columns drawn as phase maps over the first two axes (`phase-COLUMN.png`).
    #[serde(default)]
    pub maps: Vec<String>,
    /// A species or declared field pictured at every point's end and tiled into
    /// `contact-FIELD.png`.
    pub contact: Option<String>,
}

/// What `sweep.json` records.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct SweepRecord {
    /// The plan.
    pub plan: Plan,
    /// Fingerprint of the base run.
    pub base: String,
    /// Hash of plan and base together: shards of one sweep share it.
    pub hash: String,
    /// Points in the plan.
    pub points: usize,
    /// Summary columns drawn as phase maps (not part of the hash).
    #[serde(default)]
    pub maps: Vec<String>,
    /// Axis labels of the maps: names with the model's units.
    #[serde(default)]
    pub labels: Vec<String>,
    /// The field of the contact sheet, and the runs' file stem.
    #[serde(default)]
    pub contact: Option<(String, String)>,
}

/// What a sweep tells its caller as points start and end.
pub trait SweepObserver {
    /// Points of this shard, and how many of them were already finished.
    fn planned(&mut self, _points: usize, _finished: usize) {}
    /// A point started.
    fn point_started(&mut self, _point: &Point) {}
    /// A point ended with this row (not called for points interrupted by the cancel flag).
    fn point_finished(&mut self, _row: &Row) {}
}

/// A sweep ready to run: the base run, the plan and every point's specification, checked.
pub struct Sweep {
    dir: PathBuf,
    plan: Plan,
    record: SweepRecord,
    specs: Vec<(Point, RunSpec, String)>,
}

/// How many points ran, and the rows of this shard.
#[derive(Clone, Debug)]
pub struct SweepReport {
    /// Rows of this shard's points that are finished (from this and earlier attempts).
    pub rows: Vec<Row>,
    /// Points of this shard.
    pub points: usize,
    /// Of those, finished before this attempt.
    pub skipped: usize,
    /// Of those, left unfinished (the cancel flag was set).
    pub interrupted: usize,
}

/// The folder of point `index`.
pub fn point_dir(dir: &Path, index: usize) -> PathBuf {
    dir.join("points").join(format!("{index:04}"))
}

/// Describes a point's values for messages: `chi=5, D=0.1`.
fn describe(plan: &Plan, values: &[f64]) -> String {
    plan.axes
        .iter()
        .zip(values)
        .map(|(a, v)| format!("{}={v}", a.name))
        .collect::<Vec<_>>()
        .join(", ")
}

/// The row recorded in a point's folder, if it is there and belongs to `fingerprint`.
fn finished_row(dir: &Path, fingerprint: &str) -> Option<Row> {
    let text = std::fs::read_to_string(dir.join(POINT_FILE)).ok()?;
    let row: Row = serde_json::from_str(&text).ok()?;
    (row.fingerprint == fingerprint).then_some(row)
}

impl Sweep {
    /// Checks `plan` and builds every point's specification from `base`, loading the model
    /// with each point's overrides: an unknown parameter, a value outside the model's bounds
    /// or a setting the plate does not have is refused here, naming the point, before any
    /// run starts or any file is written.
    pub fn new(
        base: RunSpec,
        plan: Plan,
        maps: &[String],
        contact: Option<&str>,
        dir: &Path,
    ) -> Result<Self, RunError> {
        plan.check()?;
        let mut base = base;
        if let Some(field) = contact {
            // Every point pictures the field at its end, small, for the sheet.
            base.pictures = vec![field.to_string()];
            base.picture_times = vec![base.end];
            base.picture_width = CONTACT_WIDTH;
        }
        base.check()?;
        let base_fingerprint = base.fingerprint();
        let plan_json = serde_json::to_string(&plan).map_err(RunError::failure)?;
        let hash = sha256(&format!("{plan_json}\n{base_fingerprint}"));
        let points = plan.points();
        let mut specs = Vec::with_capacity(points.len());
        let mut decl = None;
        for p in points {
            let mut spec = base.clone();
            let at = || format!("sweep point {} ({})", p.index, describe(&plan, &p.values));
            for (axis, &v) in plan.axes.iter().zip(&p.values) {
                axis.apply(&mut spec, v)
                    .map_err(|e| RunError::input(format!("{}: {}", at(), e.message)))?;
            }
            if contact.is_some() {
                spec.picture_times = vec![spec.end];
            }
            let d = spec
                .check()
                .and_then(|()| spec.check_model())
                .map_err(|e| RunError::input(format!("{}: {}", at(), e.message)))?;
            decl.get_or_insert(d);
            let fingerprint = spec.fingerprint();
            specs.push((p, spec, fingerprint));
        }
        let labels: Vec<String> = plan
            .axes
            .iter()
            .map(|a| {
                let unit = decl
                    .as_ref()
                    .and_then(|d| d.params.iter().find(|p| p.name == a.name))
                    .map(|p| p.unit.clone())
                    .unwrap_or_default();
                if unit.is_empty() {
                    a.name.clone()
                } else {
                    format!("{} [{unit}]", a.name)
                }
            })
            .collect();
        if !maps.is_empty() {
            if plan.axes.len() != 2 {
                return Err(RunError::input(format!(
                    "a phase map is drawn over two axes; this sweep has {}",
                    plan.axes.len()
                )));
            }
            let (species, integrals): (Vec<String>, Vec<String>) = match &decl {
                Some(d) => (
                    d.species.iter().map(|s| s.name.clone()).collect(),
                    d.diagnostics
                        .iter()
                        .filter(|g| g.integral)
                        .map(|g| g.name.clone())
                        .collect(),
                ),
                None => (Vec::new(), Vec::new()),
            };
            let known = map_columns(&species, &integrals);
            if let Some(m) = maps.iter().find(|m| !known.contains(m)) {
                return Err(RunError::input(format!(
                    "phase map '{m}': the summary has no such column (it has: {})",
                    known.join(", ")
                )));
            }
        }
        if let (Some(field), Some(d)) = (contact, &decl) {
            let fields: Vec<&str> = d
                .species
                .iter()
                .map(|s| s.name.as_str())
                .chain(
                    d.diagnostics
                        .iter()
                        .filter(|g| !g.integral)
                        .map(|g| g.name.as_str()),
                )
                .collect();
            if !fields.contains(&field) {
                return Err(RunError::input(format!(
                    "contact sheet of '{field}': the model has no species or field of that name (it has: {})",
                    fields.join(", ")
                )));
            }
        }
        let record = SweepRecord {
            points: specs.len(),
            plan: plan.clone(),
            base: base_fingerprint,
            hash,
            maps: maps.to_vec(),
            labels,
            contact: contact.map(|f| (f.to_string(), base.stem.clone())),
        };
        Ok(Self {
            dir: dir.to_path_buf(),
            plan,
            record,
            specs,
        })
    }

    /// Points in the plan.
    pub fn len(&self) -> usize {
        self.specs.len()
    }

    /// Whether the plan has no points (never, once checked).
    pub fn is_empty(&self) -> bool {
        self.specs.is_empty()
    }

    /// Axis names, in order.
    pub fn axis_names(&self) -> Vec<String> {
        self.plan.axes.iter().map(|a| a.name.clone()).collect()
    }

    /// Runs the points of `shard` that are not finished yet: `jobs` at a time, each on its
    /// own pool of `threads` threads, until all are done or `cancel` is set. Writes each
    /// finished point's row into its folder and the table of the shard (or of the whole
    /// sweep) into the sweep's folder.
    pub fn run(
        &self,
        shard: Shard,
        jobs: usize,
        threads: usize,
        cancel: &AtomicBool,
        observer: &mut dyn SweepObserver,
    ) -> Result<SweepReport, RunError> {
        std::fs::create_dir_all(self.dir.join("points")).map_err(|e| {
            RunError::failure(format!("{}: cannot create folder: {e}", self.dir.display()))
        })?;
        self.write_record()?;
        let mine: Vec<&(Point, RunSpec, String)> = self
            .specs
            .iter()
            .filter(|(p, _, _)| shard.contains(p.index))
            .collect();
        let mut rows: Vec<Row> = Vec::new();
        let mut todo: Vec<&(Point, RunSpec, String)> = Vec::new();
        for item in &mine {
            match finished_row(&point_dir(&self.dir, item.0.index), &item.2) {
                Some(row) => rows.push(row),
                None => todo.push(item),
            }
        }
        let skipped = rows.len();
        observer.planned(mine.len(), skipped);
        let next = AtomicUsize::new(0);
        let (tx, rx) = mpsc::channel::<Message>();
        let jobs = jobs.clamp(1, todo.len().max(1));
        let mut failure: Option<RunError> = None;
        std::thread::scope(|scope| {
            for _ in 0..jobs {
                let tx = tx.clone();
                let (todo, next) = (&todo, &next);
                scope.spawn(move || {
                    let pool = match rayon::ThreadPoolBuilder::new()
                        .num_threads(threads.max(1))
                        .build()
                    {
                        Ok(p) => p,
                        Err(e) => {
                            let _ = tx.send(Message::Error(RunError::failure(e)));
                            return;
                        }
                    };
                    loop {
                        if cancel.load(Ordering::SeqCst) {
                            return;
                        }
                        let k = next.fetch_add(1, Ordering::SeqCst);
                        let Some((point, spec, fingerprint)) = todo.get(k).copied() else {
                            return;
                        };
                        let _ = tx.send(Message::Started(point.clone()));
                        let dir = point_dir(&self.dir, point.index);
                        let msg =
                            pool.install(|| run_point(point, spec, fingerprint, &dir, cancel));
                        let _ = tx.send(msg);
                    }
                });
            }
            drop(tx);
            for msg in rx {
                match msg {
                    Message::Started(p) => observer.point_started(&p),
                    Message::Finished(row) => {
                        observer.point_finished(&row);
                        rows.push(*row);
                    }
                    Message::Interrupted => {}
                    Message::Error(e) => {
                        // A file that cannot be written: stop taking new points.
                        cancel.store(true, Ordering::SeqCst);
                        failure.get_or_insert(e);
                    }
                }
            }
        });
        if let Some(e) = failure {
            return Err(e);
        }
        rows.sort_by_key(|r| r.point);
        let stem = if shard == Shard::ALL {
            "summary".to_string()
        } else {
            format!("shard-{}-of-{}", shard.index, shard.count)
        };
        write_summary(&self.dir, &stem, &self.axis_names(), &rows)?;
        if shard == Shard::ALL {
            draw_maps(&self.dir, &self.record, &rows)?;
            draw_sheet(
                std::slice::from_ref(&self.dir),
                &self.dir,
                &self.record,
                &rows,
            )?;
        }
        Ok(SweepReport {
            points: mine.len(),
            skipped,
            interrupted: mine.len() - rows.len(),
            rows,
        })
    }

    fn write_record(&self) -> Result<(), RunError> {
        let path = self.dir.join(SWEEP_FILE);
        if let Ok(text) = std::fs::read_to_string(&path) {
            let old: SweepRecord = serde_json::from_str(&text)
                .map_err(|e| RunError::input(format!("{}: {e}", path.display())))?;
            if old.hash != self.record.hash {
                return Err(RunError::input(format!(
                    "{}: this folder holds another sweep (plan or base run differ); choose another output folder",
                    self.dir.display()
                )));
            }
            return Ok(());
        }
        let text = serde_json::to_string_pretty(&self.record).map_err(RunError::failure)?;
        write_text(&path, &text)
    }
}

enum Message {
    Started(Point),
    Finished(Box<Row>),
    Interrupted,
    Error(RunError),
}

/// Runs one point in `dir` and returns what the coordinator records.
fn run_point(
    point: &Point,
    spec: &RunSpec,
    fingerprint: &str,
    dir: &Path,
    cancel: &AtomicBool,
) -> Message {
    let row = match Run::start(spec.clone(), dir) {
        Err(e) => Row::failed(point.index, &point.values, fingerprint, &e.message),
        Ok(run) => match run.advance(cancel, &mut Silent) {
            Ok(done) if matches!(done.ended, Ended::Interrupted) => return Message::Interrupted,
            Ok(done) => Row::of(point.index, &point.values, fingerprint, &done),
            Err(e) => Row::failed(point.index, &point.values, fingerprint, &e.message),
        },
    };
    if let Err(e) = std::fs::create_dir_all(dir)
        .map_err(|e| RunError::failure(format!("{}: {e}", dir.display())))
        .and_then(|()| {
            let text = serde_json::to_string_pretty(&row).map_err(RunError::failure)?;
            write_text(&dir.join(POINT_FILE), &text)
        })
    {
        return Message::Error(e);
    }
    Message::Finished(Box::new(row))
}

/// Draws the record's phase maps of `rows` into `dir` (`phase-COLUMN.png`).
fn draw_maps(dir: &Path, record: &SweepRecord, rows: &[Row]) -> Result<(), RunError> {
    use agarium_core::output::{write_phase_png, PhaseMark, PhaseOptions, PhasePoint};
    if rows.is_empty() || record.plan.axes.len() != 2 {
        return Ok(());
    }
    let axes = &record.plan.axes;
    let label = |k: usize| {
        record
            .labels
            .get(k)
            .cloned()
            .unwrap_or_else(|| axes[k].name.clone())
    };
    for column in &record.maps {
        let points: Vec<PhasePoint> = rows
            .iter()
            .map(|r| {
                let v = r.value(column).unwrap_or(f64::NAN);
                PhasePoint {
                    x: r.values[0],
                    y: r.values[1],
                    mark: match r.outcome.as_str() {
                        "failed" => PhaseMark::Failed,
                        "blow-up" => PhaseMark::BlowUp(v),
                        _ => PhaseMark::Value(v),
                    },
                }
            })
            .collect();
        let options = PhaseOptions {
            title: format!("{column} over {} and {}", axes[0].name, axes[1].name),
            x_label: label(0),
            y_label: label(1),
            value_label: column.clone(),
            log_x: axes[0].scale == Scale::Log,
            log_y: axes[1].scale == Scale::Log,
        };
        let name = format!("phase-{}.png", column.replace(['/', '\\', ' '], "_"));
        write_phase_png(&dir.join(name), &points, &options, 900).map_err(RunError::failure)?;
    }
    Ok(())
}

/// Draws the contact sheet of the record's field (if any) from the points' pictures (each in
/// the first of `dirs` that holds the point) into `out` (`contact-FIELD.png`): a row per value of the first axis and a
/// column per value of the second for a full two-axis grid, otherwise rows in point order.
fn draw_sheet(
    dirs: &[PathBuf],
    out: &Path,
    record: &SweepRecord,
    rows: &[Row],
) -> Result<(), RunError> {
    use agarium_core::output::{write_contact_sheet_png, SheetTile};
    let Some((field, stem)) = &record.contact else {
        return Ok(());
    };
    if rows.is_empty() {
        return Ok(());
    }
    let plan = &record.plan;
    let columns = match (plan.axes.len(), plan.sample, plan.combine) {
        (2, None, Combine::Grid) => plan.axes[1].values.len(),
        _ => (rows.len() as f64).sqrt().ceil() as usize,
    };
    let tiles: Vec<SheetTile> = rows
        .iter()
        .map(|r| {
            let name = format!("{stem}_{field}_0000.png");
            let picture = dirs
                .iter()
                .map(|d| point_dir(d, r.point).join(&name))
                .find(|p| p.is_file());
            let mut label = describe(plan, &r.values);
            if r.outcome != "reached" {
                label = format!("{label} ({})", r.outcome);
            }
            SheetTile { picture, label }
        })
        .collect();
    let title = format!("{field} at the end of each point");
    write_contact_sheet_png(
        &out.join(format!("contact-{field}.png")),
        &tiles,
        columns,
        CONTACT_WIDTH,
        &title,
    )
    .map_err(RunError::failure)
}

/// Which points a merge found missing.
#[derive(Clone, Debug)]
pub struct Merged {
    /// Points in the plan.
    pub points: usize,
    /// Point numbers with no finished row in any folder.
    pub missing: Vec<usize>,
}

/// Combines the finished points of the sweep folders `dirs` (shards of one sweep, possibly
/// the same folder) into `out/summary.csv` and `.json`: exactly the table the unsharded sweep
/// writes, for the points that are there. Refuses folders of different sweeps.
pub fn merge(dirs: &[PathBuf], out: &Path) -> Result<Merged, RunError> {
    let mut record: Option<(SweepRecord, PathBuf)> = None;
    let mut rows: Vec<Row> = Vec::new();
    for dir in dirs {
        let path = dir.join(SWEEP_FILE);
        let text = std::fs::read_to_string(&path).map_err(|e| {
            RunError::input(format!(
                "{}: cannot read the sweep's plan: {e} (is this a sweep's folder?)",
                path.display()
            ))
        })?;
        let r: SweepRecord = serde_json::from_str(&text)
            .map_err(|e| RunError::input(format!("{}: {e}", path.display())))?;
        match &record {
            Some((first, at)) if first.hash != r.hash => {
                return Err(RunError::input(format!(
                    "{} and {} hold different sweeps (their plans or base runs differ)",
                    at.display(),
                    path.display()
                )))
            }
            Some(_) => {}
            None => record = Some((r.clone(), path.clone())),
        }
        let points = dir.join("points");
        let Ok(entries) = std::fs::read_dir(&points) else {
            continue;
        };
        let mut names: Vec<PathBuf> = entries.filter_map(|e| e.ok().map(|e| e.path())).collect();
        names.sort();
        for p in names {
            let Ok(text) = std::fs::read_to_string(p.join(POINT_FILE)) else {
                continue;
            };
            let row: Row = serde_json::from_str(&text)
                .map_err(|e| RunError::input(format!("{}: {e}", p.join(POINT_FILE).display())))?;
            if !rows.iter().any(|q| q.point == row.point) {
                rows.push(row);
            }
        }
    }
    let Some((record, _)) = record else {
        return Err(RunError::input("give at least one sweep folder to merge"));
    };
    std::fs::create_dir_all(out)
        .map_err(|e| RunError::failure(format!("{}: cannot create folder: {e}", out.display())))?;
    let axes: Vec<String> = record.plan.axes.iter().map(|a| a.name.clone()).collect();
    write_summary(out, "summary", &axes, &rows)?;
    draw_maps(out, &record, &rows)?;
    draw_sheet(dirs, out, &record, &rows)?;
    let missing = (0..record.points)
        .filter(|i| !rows.iter().any(|r| r.point == *i))
        .collect();
    Ok(Merged {
        points: record.points,
        missing,
    })
}
