//! `agarium verify`: run the verification suite (agarium-verify) and print its table.

use std::time::Instant;

use agarium_verify::{select, Check, Context, Row};

use crate::error::CliError;

/// Arguments of `agarium verify`.
#[derive(clap::Args)]
pub struct VerifyArgs {
    /// Run the slow versions on finer meshes and longer windows.
    #[arg(long)]
    pub full: bool,
    /// Run only the checks whose name contains this text (see --list).
    #[arg(long, value_name = "SUBSTRING")]
    pub only: Option<String>,
    /// Print the results as JSON on stdout instead of a table.
    #[arg(long)]
    pub json: bool,
    /// List the checks and their sources without running them.
    #[arg(long)]
    pub list: bool,
    /// Multiply every diffusion coefficient the solver sees (not the expected values) by this
    /// factor: a deliberately broken run, to see that checks fail.
    #[arg(long, value_name = "FACTOR", hide = true)]
    pub inject_diffusion: Option<f64>,
}

/// The rows of one check and how long it took.
struct Done {
    check: Check,
    rows: Vec<Row>,
    seconds: f64,
}

/// Runs `agarium verify`; the exit code is 0 when every row passes, 1 otherwise.
pub fn run(args: &VerifyArgs) -> Result<i32, CliError> {
    let checks = select(args.only.as_deref());
    if checks.is_empty() {
        let names: Vec<&str> = select(None).iter().map(|c| c.name).collect();
        return Err(CliError::input(format!(
            "--only {:?} matches no check; the checks are: {}",
            args.only.as_deref().unwrap_or(""),
            names.join(", ")
        )));
    }
    if args.list {
        for c in &checks {
            println!("{:<18} {}", c.name, c.about);
            println!("{:<18} source: {}", "", c.source);
        }
        return Ok(0);
    }
    let mut ctx = if args.full {
        Context::full()
    } else {
        Context::fast()
    };
    if let Some(f) = args.inject_diffusion {
        if !(f.is_finite() && f > 0.0) {
            return Err(CliError::input(format!(
                "--inject-diffusion {f}: must be a positive number"
            )));
        }
        ctx.faults.diffusion = f;
    }
    let start = Instant::now();
    let mut done = Vec::new();
    for (k, check) in checks.iter().enumerate() {
        eprint!("verify: [{}/{}] {} ... ", k + 1, checks.len(), check.name);
        let t0 = Instant::now();
        let rows = check.rows(&ctx);
        let seconds = t0.elapsed().as_secs_f64();
        let failed = rows.iter().filter(|r| !r.pass).count();
        if failed == 0 {
            eprintln!("{} rows pass ({seconds:.1} s)", rows.len());
        } else {
            eprintln!("{failed} of {} rows FAIL ({seconds:.1} s)", rows.len());
        }
        done.push(Done {
            check: *check,
            rows,
            seconds,
        });
    }
    let total = start.elapsed().as_secs_f64();
    let rows: Vec<&Row> = done.iter().flat_map(|d| &d.rows).collect();
    let failed = rows.iter().filter(|r| !r.pass).count();
    if args.json {
        print_json(&done, args.full, total, failed == 0)?;
    } else {
        print_table(&rows);
        println!();
        println!("sources:");
        for d in &done {
            println!("  {}: {}", d.check.name, d.check.source);
        }
        println!();
        let level = if args.full { "full" } else { "fast" };
        if failed == 0 {
            println!(
                "verify ({level}): all {} rows of {} checks pass ({total:.1} s)",
                rows.len(),
                done.len()
            );
        } else {
            println!(
                "verify ({level}): {failed} of {} rows FAIL ({total:.1} s)",
                rows.len()
            );
        }
    }
    Ok(if failed == 0 { 0 } else { 1 })
}

fn print_table(rows: &[&Row]) {
    let header = [
        "check",
        "source",
        "expected",
        "obtained",
        "tolerance",
        "result",
    ];
    let cells: Vec<[String; 6]> = rows
        .iter()
        .map(|r| {
            [
                r.check.clone(),
                r.source.clone(),
                r.expected.clone(),
                r.obtained.clone(),
                r.tolerance.clone(),
                if r.pass { "pass" } else { "FAIL" }.to_string(),
            ]
        })
        .collect();
    let mut width: Vec<usize> = header.iter().map(|h| h.chars().count()).collect();
    for r in &cells {
        for (w, c) in width.iter_mut().zip(r) {
            *w = (*w).max(c.chars().count());
        }
    }
    let line = |cells: &[String]| {
        let parts: Vec<String> = cells
            .iter()
            .zip(&width)
            .map(|(c, w)| format!("{c:<w$}", w = *w))
            .collect();
        println!("{}", parts.join(" | ").trim_end());
    };
    line(&header.map(String::from));
    line(&width.iter().map(|w| "-".repeat(*w)).collect::<Vec<_>>());
    for r in &cells {
        line(r);
    }
}

fn print_json(done: &[Done], full: bool, seconds: f64, passed: bool) -> Result<(), CliError> {
    let checks: Vec<serde_json::Value> = done
        .iter()
        .map(|d| {
            serde_json::json!({
                "name": d.check.name,
                "about": d.check.about,
                "source": d.check.source,
                "seconds": d.seconds,
                "rows": d.rows,
            })
        })
        .collect();
    let doc = serde_json::json!({
        "level": if full { "full" } else { "fast" },
        "passed": passed,
        "seconds": seconds,
        "checks": checks,
    });
    let text = serde_json::to_string_pretty(&doc).map_err(CliError::failure)?;
    println!("{text}");
    Ok(())
}
