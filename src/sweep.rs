//! `agarium sweep` and `agarium sweep merge`: the options of `run` give the base run, axes
//! (from `--axis` and the run file's `[sweep]` table) give the points; `agarium-run` runs them
//! in parallel or as one shard of a job array while a bar counts the points.

use std::io::IsTerminal;
use std::path::PathBuf;

use agarium_run::sweep::{
    merge, Axis, Combine, Plan, Point, Row, Sample, SampleMethod, Shard, Sweep, SweepObserver,
};
use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};

use crate::error::CliError;
use crate::run::{interrupt_flag, spec_of, RunArgs, EXIT_INTERRUPTED};

/// Arguments of `agarium sweep`.
#[derive(clap::Args, Debug)]
#[command(args_conflicts_with_subcommands = true)]
pub struct SweepArgs {
    #[command(subcommand)]
    pub command: Option<SweepCommand>,
    #[command(flatten)]
    pub run: RunArgs,
    /// An axis: `NAME=V1,V2,…`, `NAME=lin:FIRST:LAST:COUNT` or `NAME=log:FIRST:LAST:COUNT`
    /// (repeatable). NAME is a model parameter, or `run.end`, `mesh.size`, `plate.radius`,
    /// `plate.inner`, `plate.width`, `plate.height`, `plate.semi_x`, `plate.semi_y`,
    /// `inoculum.K.level|radius|x|y`. Replaces a `[[sweep.axis]]` of the same name.
    #[arg(long = "axis", value_name = "NAME=VALUES")]
    pub axes: Vec<String>,
    /// Pair the axes value by value instead of taking every combination.
    #[arg(long)]
    pub zip: bool,
    /// Sample points between each axis' smallest and largest value instead: `random:N` or
    /// `lhs:N` (Latin hypercube).
    #[arg(long, value_name = "METHOD:N")]
    pub sample: Option<String>,
    /// Seed of the sampled points [default: 1].
    #[arg(long, value_name = "N")]
    pub seed: Option<u64>,
    /// Points run at the same time [default: the cores, divided by --threads-per-point].
    #[arg(short = 'j', long, value_name = "N")]
    pub jobs: Option<usize>,
    /// Threads of each point's solver [default: 1].
    #[arg(long, value_name = "N")]
    pub threads_per_point: Option<usize>,
    /// Draw a phase map of this summary column over the first two axes
    /// (`phase-COLUMN.png`, e.g. `--map u_max`; repeatable).
    #[arg(long = "map", value_name = "COLUMN")]
    pub maps: Vec<String>,
    /// Picture this species or declared field at the end of every point and tile the
    /// pictures into `contact-FIELD.png`.
    #[arg(long, value_name = "FIELD")]
    pub contact: Option<String>,
    /// Run only the K-th of N disjoint slices of the points [default: from Slurm's
    /// SLURM_ARRAY_TASK_* variables inside a job array, else all points].
    #[arg(long, value_name = "K/N")]
    pub shard: Option<String>,
}

/// Subcommands of `agarium sweep`.
#[derive(clap::Subcommand, Debug)]
pub enum SweepCommand {
    /// Combine the finished points of shard folders into the sweep's summary table.
    Merge(MergeArgs),
}

/// Arguments of `agarium sweep merge`.
#[derive(clap::Args, Debug)]
pub struct MergeArgs {
    /// Sweep folders (shards of one sweep; the same folder when the shards shared it).
    #[arg(required = true)]
    pub folders: Vec<PathBuf>,
    /// Where the summary goes [default: the first folder].
    #[arg(short, long, value_name = "DIR")]
    pub out: Option<PathBuf>,
}

fn parse_sample(text: &str, seed: u64) -> Result<Sample, CliError> {
    let bad = || CliError::input(format!("--sample '{text}': expected random:N or lhs:N"));
    let (method, count) = text.split_once(':').ok_or_else(bad)?;
    let method = match method.trim() {
        "random" => SampleMethod::Random,
        "lhs" => SampleMethod::Lhs,
        _ => return Err(bad()),
    };
    let count: usize = count.trim().parse().map_err(|_| bad())?;
    Ok(Sample {
        method,
        count,
        seed,
    })
}

/// The bar over points on a terminal, a line per point otherwise.
struct Points {
    bar: Option<ProgressBar>,
    quiet: bool,
    done: usize,
    running: usize,
    failed: usize,
    blowups: usize,
}

impl Points {
    fn message(&self) -> String {
        format!(
            "done {}  running {}  failed {}  blow-up {}",
            self.done, self.running, self.failed, self.blowups
        )
    }
}

impl SweepObserver for Points {
    fn planned(&mut self, points: usize, finished: usize) {
        if !self.quiet {
            eprintln!("sweep: {points} points, {finished} already finished");
        }
        self.done = finished;
        if !self.quiet && std::io::stderr().is_terminal() {
            let bar =
                ProgressBar::with_draw_target(Some(points as u64), ProgressDrawTarget::stderr());
            if let Ok(style) = ProgressStyle::with_template(
                "{bar:30} {pos}/{len} points  {msg}  elapsed {elapsed_precise}  eta {eta}",
            ) {
                bar.set_style(style);
            }
            bar.set_position(finished as u64);
            self.bar = Some(bar);
        }
    }

    fn point_started(&mut self, _point: &Point) {
        self.running += 1;
        if let Some(bar) = &self.bar {
            bar.set_message(self.message());
        }
    }

    fn point_finished(&mut self, row: &Row) {
        self.running = self.running.saturating_sub(1);
        self.done += 1;
        match row.outcome.as_str() {
            "failed" => self.failed += 1,
            "blow-up" => self.blowups += 1,
            _ => {}
        }
        match &self.bar {
            Some(bar) => {
                bar.set_position(self.done as u64);
                bar.set_message(self.message());
            }
            None if !self.quiet => {
                let why = if row.reason.is_empty() {
                    String::new()
                } else {
                    format!(": {}", row.reason)
                };
                eprintln!(
                    "  point {} {}{why} ({})",
                    row.point,
                    row.outcome,
                    self.message()
                );
            }
            None => {}
        }
    }
}

/// Runs `agarium sweep` (or `agarium sweep merge`).
pub fn run(args: &SweepArgs) -> Result<i32, CliError> {
    if let Some(SweepCommand::Merge(m)) = &args.command {
        return run_merge(m);
    }
    let (spec, dir, file) = spec_of(&args.run)?;
    let dir = dir.unwrap_or_else(|| PathBuf::from("out").join(format!("{}-sweep", spec.stem)));
    let section = file.sweep.clone().unwrap_or_default();
    let where_ = args
        .run
        .run_file
        .as_ref()
        .map(|p| format!("{} [sweep]", p.display()))
        .unwrap_or_default();
    let mut axes: Vec<Axis> = section
        .axis
        .iter()
        .map(|s| Axis::from_section(&where_, s))
        .collect::<Result<_, _>>()?;
    for text in &args.axes {
        let a = Axis::parse(text)?;
        match axes.iter_mut().find(|b| b.name == a.name) {
            Some(b) => *b = a,
            None => axes.push(a),
        }
    }
    let seed = args.seed.or(section.sample.map(|s| s.seed)).unwrap_or(1);
    let sample = match &args.sample {
        Some(t) => Some(parse_sample(t, seed)?),
        None => section.sample.map(|s| Sample { seed, ..s }),
    };
    let plan = Plan {
        axes,
        combine: if args.zip {
            Combine::Zip
        } else {
            section.combine
        },
        sample,
    };
    let shard = match &args.shard {
        Some(t) => Shard::parse(t)?,
        None => Shard::from_slurm(|k| std::env::var(k).ok())?.unwrap_or(Shard::ALL),
    };
    let threads = match args.threads_per_point {
        Some(0) => return Err(CliError::input("--threads-per-point must be at least 1")),
        Some(t) => t,
        None => 1,
    };
    let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
    let jobs = match args.jobs {
        Some(0) => return Err(CliError::input("--jobs must be at least 1")),
        Some(j) => j,
        None => (cores / threads).max(1),
    };
    let mut maps = section.maps.clone();
    for m in &args.maps {
        if !maps.contains(m) {
            maps.push(m.clone());
        }
    }
    let contact = args.contact.clone().or(section.contact.clone());
    let sweep = Sweep::new(spec, plan, &maps, contact.as_deref(), &dir)?;
    let mut points = Points {
        bar: None,
        quiet: args.run.quiet,
        done: 0,
        running: 0,
        failed: 0,
        blowups: 0,
    };
    let report = sweep.run(shard, jobs, threads, interrupt_flag(), &mut points);
    if let Some(bar) = &points.bar {
        bar.finish_and_clear();
    }
    let report = report?;
    let count = |o: &str| report.rows.iter().filter(|r| r.outcome == o).count();
    let table = if shard == Shard::ALL {
        "summary".to_string()
    } else {
        format!("shard-{}-of-{}", shard.index, shard.count)
    };
    if !args.run.quiet {
        eprintln!(
            "{} of {} points finished ({} reached, {} blow-up, {} failed; {} from before); table in {}",
            report.rows.len(),
            report.points,
            count("reached"),
            count("blow-up"),
            count("failed"),
            report.skipped,
            dir.join(format!("{table}.csv")).display()
        );
    }
    if report.interrupted > 0 {
        eprintln!(
            "interrupted: {} points unfinished; run the same command again to finish them",
            report.interrupted
        );
        return Ok(EXIT_INTERRUPTED);
    }
    Ok(0)
}

fn run_merge(args: &MergeArgs) -> Result<i32, CliError> {
    let out = args.out.clone().unwrap_or_else(|| args.folders[0].clone());
    let merged = merge(&args.folders, &out)?;
    let found = merged.points - merged.missing.len();
    eprintln!(
        "merged {found} of {} points into {}",
        merged.points,
        out.join("summary.csv").display()
    );
    if !merged.missing.is_empty() {
        let list: Vec<String> = merged.missing.iter().map(|i| i.to_string()).collect();
        return Err(CliError::failure(format!(
            "points missing (not finished in any folder): {}",
            list.join(", ")
        )));
    }
    Ok(0)
}
