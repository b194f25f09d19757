//! `agarium stability`: the homogeneous steady states of a model, the dispersion relation
//! about each, the plate's Neumann modes inside the unstable band and, with `--scan`, the
//! threshold of one parameter; a table on the terminal, JSON with `--json`, and with `-o` the
//! files (report, σ(k²) plot, the predicted first patterns as pictures and a .vtu).

use std::path::Path;

use agarium_core::output::{
    write_field_png, write_series_png, write_vtu, Field, PlotOptions, Series, SnapshotOptions,
};
use agarium_run::stability::{analyse, StabilityOptions, StabilityReport, StateReport};

use crate::error::CliError;
use crate::run::{low_high, spec_with_end, RunArgs};

/// Arguments of `agarium stability`.
#[derive(clap::Args, Debug)]
pub struct StabilityArgs {
    #[command(flatten)]
    pub run: RunArgs,
    /// Neumann eigenvalues of the plate to compute (0 for none).
    #[arg(long, value_name = "N", default_value_t = 12)]
    pub modes: usize,
    /// Bracket the value of a parameter where the state loses (or gains) stability, by
    /// bisection on the largest growth rate: `NAME=LOW:HIGH`, e.g. `--scan chi=1:10`.
    #[arg(long, value_name = "NAME=LOW:HIGH")]
    pub scan: Option<String>,
    /// k² range of the dispersion scan, `LOW:HIGH` in the model's 1/length² [default:
    /// 1e-4:1e4].
    #[arg(long, value_name = "LOW:HIGH")]
    pub k2: Option<String>,
    /// Print the report as JSON on standard output instead of the table.
    #[arg(long)]
    pub json: bool,
}

fn pair(text: &str, what: &str) -> Result<(f64, f64), CliError> {
    low_high(text).map_err(|why| {
        CliError::input(format!(
            "{what} {text}: {why} (expected LOW:HIGH with two numbers)"
        ))
    })
}

/// Runs the command.
pub fn run(args: &StabilityArgs) -> Result<i32, CliError> {
    let (spec, out, _) = spec_with_end(&args.run, Some(1.0))?;
    let mut opts = StabilityOptions {
        modes: args.modes,
        ..StabilityOptions::default()
    };
    if let Some(k2) = &args.k2 {
        let (lo, hi) = pair(k2, "--k2")?;
        if !(lo > 0.0 && hi > lo && hi.is_finite()) {
            return Err(CliError::input(format!(
                "--k2 {k2}: the range must be positive and increasing"
            )));
        }
        opts.k2_range = (lo, hi);
    }
    if let Some(scan) = &args.scan {
        let (name, range) = scan
            .split_once('=')
            .ok_or_else(|| CliError::input(format!("--scan {scan}: expected NAME=LOW:HIGH")))?;
        let (lo, hi) = pair(range, "--scan")?;
        opts.scan = Some((name.trim().to_string(), lo, hi));
    }
    let (report, mesh, _) = analyse(&spec, &opts)?;
    if report.states.is_empty() {
        return Err(CliError::input(format!(
            "{}: no spatially homogeneous steady state found (Newton from the mean initial state and a grid around it)",
            spec.model_file
        )));
    }
    if args.json {
        println!(
            "{}",
            serde_json::to_string_pretty(&report).map_err(|e| CliError::failure(e.to_string()))?
        );
    } else {
        print_table(&report, &spec.model_file);
    }
    if let Some(dir) = out {
        write_files(&dir, &report, &mesh)?;
        if !args.json {
            println!("files in {}", dir.display());
        }
    }
    Ok(0)
}

fn fmt(v: f64) -> String {
    if v == 0.0 {
        "0".into()
    } else if v.is_infinite() {
        "∞".into()
    } else if (1e-3..1e4).contains(&v.abs()) {
        format!("{v:.5}")
    } else {
        format!("{v:.4e}")
    }
}

fn print_table(r: &StabilityReport, model: &str) {
    println!(
        "{model}: {} homogeneous steady state(s); plate mesh of {} nodes",
        r.states.len(),
        r.nodes
    );
    if !r.plate_eigenvalues.is_empty() {
        let l: Vec<String> = r.plate_eigenvalues.iter().map(|&v| fmt(v)).collect();
        println!("plate Neumann eigenvalues k²: {}", l.join(", "));
    }
    for (i, s) in r.states.iter().enumerate() {
        describe_state(i, s, &r.species);
    }
    if let Some(t) = &r.threshold {
        let unit = if t.unit.is_empty() {
            String::new()
        } else {
            format!(" {}", t.unit)
        };
        println!(
            "threshold: {} between {} and {}{unit} (unstable {} it)",
            t.parameter,
            fmt(t.bracket[0]),
            fmt(t.bracket[1]),
            if t.unstable_above { "above" } else { "below" }
        );
    }
}

fn describe_state(i: usize, s: &StateReport, species: &[String]) {
    let values: Vec<String> = species
        .iter()
        .zip(&s.state.values)
        .map(|(n, v)| format!("{n} = {}", fmt(*v)))
        .collect();
    let class = serde_json::to_value(s.state.class)
        .ok()
        .and_then(|v| v.as_str().map(str::to_string))
        .unwrap_or_default();
    println!(
        "\nstate {i}: {}  ({class} without diffusion)",
        values.join(", ")
    );
    let ev: Vec<String> = s
        .state
        .eigenvalues
        .iter()
        .map(|&(re, im)| {
            if im == 0.0 {
                fmt(re)
            } else {
                format!("{} ± {}i", fmt(re), fmt(im.abs()))
            }
        })
        .collect();
    println!("  eigenvalues at k = 0: {}", ev.join(", "));
    match &s.band {
        None => println!("  every mode decays: no pattern grows from this state"),
        Some(b) => {
            println!(
                "  unstable band k² from {} to {}; fastest k² = {} (σ = {}, wavelength {}){}",
                fmt(b.k2_low),
                fmt(b.k2_high),
                fmt(b.fastest.k2),
                fmt(b.fastest.sigma),
                fmt(b.wavelength),
                if b.oscillatory {
                    "; oscillatory (a wave instability)"
                } else if b.k2_low == 0.0 {
                    "; the band reaches k = 0 (the state is unstable without diffusion)"
                } else {
                    "; stationary (Turing-type)"
                }
            );
            if s.plate_growth.is_empty() {
                println!("  no mode of this plate lies in the band: the plate is too small for the pattern (or its modes there were not computed: --modes)");
            } else {
                let m: Vec<String> = s
                    .plate_growth
                    .iter()
                    .take(6)
                    .map(|g| format!("#{} k² = {} σ = {}", g.index, fmt(g.k2), fmt(g.sigma)))
                    .collect();
                println!(
                    "  plate modes in the band (fastest first): {}",
                    m.join("; ")
                );
            }
        }
    }
}

fn write_files(
    dir: &Path,
    r: &StabilityReport,
    mesh: &agarium_core::mesh::Mesh,
) -> Result<(), CliError> {
    std::fs::create_dir_all(dir).map_err(|e| CliError::input(format!("{}: {e}", dir.display())))?;
    let json = serde_json::to_string_pretty(r).map_err(|e| CliError::failure(e.to_string()))?;
    let path = dir.join("stability.json");
    agarium_core::output::write_atomically(&path, |w| {
        w.write_all(json.as_bytes())
            .map_err(|e| agarium_core::output::OutputError::Io {
                path: path.clone(),
                reason: e.to_string(),
            })
    })
    .map_err(|e| CliError::failure(e.to_string()))?;
    for (i, s) in r.states.iter().enumerate() {
        let Some(band) = &s.band else { continue };
        // The band and a decade and a half either side, σ down to −2 × its largest value:
        // far outside the band σ falls like −D k² and would flatten the curve.
        let top = band.fastest.sigma.max(1e-300);
        let (lo, hi) = (
            if band.k2_low > 0.0 {
                band.k2_low / 30.0
            } else {
                0.0
            },
            if band.k2_high.is_finite() {
                band.k2_high * 30.0
            } else {
                f64::INFINITY
            },
        );
        let points: Vec<(f64, f64)> = s
            .curve
            .iter()
            .filter(|g| g.k2 > 0.0 && g.k2 >= lo && g.k2 <= hi)
            .filter(|g| g.sigma.is_finite() && g.sigma >= -2.0 * top)
            .map(|g| (g.k2.log10(), g.sigma))
            .collect();
        let (x0, x1) = (
            points.first().map_or(0.0, |p| p.0),
            points.last().map_or(1.0, |p| p.0),
        );
        let mut series = vec![
            Series {
                name: "σ(k²)".into(),
                points,
            },
            Series {
                name: "σ = 0".into(),
                points: vec![(x0, 0.0), (x1, 0.0)],
            },
        ];
        // The plate's modes, each a dot on the curve (unnamed: no legend entry each).
        for g in s
            .plate_growth
            .iter()
            .filter(|g| g.k2 > 0.0 && g.k2.log10() >= x0)
        {
            series.push(Series {
                name: String::new(),
                points: vec![(g.k2.log10(), g.sigma)],
            });
        }
        let path = dir.join(format!("dispersion_state{i}.png"));
        write_series_png(
            &path,
            &format!("growth rate about state {i} (dots: the plate's modes)"),
            "log10 k²",
            &series,
            &PlotOptions {
                y_label: "σ".into(),
                ..PlotOptions::default()
            },
        )
        .map_err(|e| CliError::failure(e.to_string()))?;
        // The predicted first patterns: the fastest plate modes.
        let mut fields: Vec<(String, &[f64])> = Vec::new();
        for g in s.plate_growth.iter().take(4) {
            if let Some(m) = s.plate_modes.get(g.index) {
                fields.push((format!("mode{}", g.index), m.as_slice()));
            }
        }
        for (name, values) in &fields {
            let options = SnapshotOptions {
                title: format!("plate {name}, growing about state {i}"),
                ..SnapshotOptions::default()
            };
            write_field_png(
                &dir.join(format!("state{i}_{name}.png")),
                mesh,
                values,
                &options,
            )
            .map_err(|e| CliError::failure(e.to_string()))?;
        }
        if !fields.is_empty() {
            let f: Vec<Field> = fields
                .iter()
                .map(|(n, v)| Field { name: n, values: v })
                .collect();
            write_vtu(&dir.join(format!("state{i}_modes.vtu")), mesh, &f, &[])
                .map_err(|e| CliError::failure(e.to_string()))?;
        }
    }
    Ok(())
}
