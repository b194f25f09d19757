//! `agarium check`: load and compile a model file, print what it declares, and evaluate every
//! term at sample states.

use agarium_core::kernel::{SensitivityForm, SpeciesKind};
use agarium_scripting::{describe, inspect, Model, Overrides};

use crate::error::CliError;

/// Arguments of `agarium check`.
#[derive(clap::Args)]
pub struct CheckArgs {
    /// The model file.
    pub model: std::path::PathBuf,
    /// Override a parameter (repeatable), e.g. `--set chi_0=2.5`.
    #[arg(long = "set", value_name = "NAME=VALUE")]
    pub set: Vec<String>,
}

/// Prints rows as left-aligned columns.
fn table(header: &[&str], rows: &[Vec<String>]) {
    let mut width: Vec<usize> = header.iter().map(|h| h.chars().count()).collect();
    for r in rows {
        for (w, c) in width.iter_mut().zip(r) {
            *w = (*w).max(c.chars().count());
        }
    }
    let line = |cells: Vec<String>| {
        let parts: Vec<String> = cells
            .iter()
            .zip(&width)
            .map(|(c, w)| format!("{c:<w$}", w = *w))
            .collect();
        println!("  {}", parts.join("  ").trim_end());
    };
    line(header.iter().map(|h| h.to_string()).collect());
    line(width.iter().map(|w| "-".repeat(*w)).collect());
    for r in rows {
        line(r.clone());
    }
}

fn bounds(min: f64, max: f64) -> String {
    match (min.is_finite(), max.is_finite()) {
        (false, false) => String::new(),
        _ => format!("[{min}, {max}]"),
    }
}

/// Runs `agarium check`.
pub fn run(args: &CheckArgs) -> Result<(), CliError> {
    let overrides = Overrides::parse(&args.set).map_err(CliError::input)?;
    if !args.model.is_file() {
        return Err(CliError::input(format!(
            "{}: no such model file",
            args.model.display()
        )));
    }
    let model = Model::load_file(&args.model, &overrides).map_err(CliError::input)?;
    let compiled = model.compile().map_err(CliError::input)?;
    // Refuse what `run` refuses (for example a model that declares no species), with the
    // same message.
    compiled
        .to_problem()
        .validate()
        .map_err(|e| CliError::input(format!("{}: {e}", args.model.display())))?;
    let d = &model.decl;

    println!("model {}", model.file);
    println!("\nparameters");
    let rows: Vec<Vec<String>> = d
        .params
        .iter()
        .map(|p| {
            let value = if p.value == p.default {
                format!("{}", p.value)
            } else {
                format!("{} (default {}, --set)", p.value, p.default)
            };
            vec![
                p.name.clone(),
                value,
                p.unit.clone(),
                bounds(p.min, p.max),
                p.about.clone(),
            ]
        })
        .collect();
    table(&["name", "value", "unit", "bounds", "about"], &rows);

    println!("\nspecies");
    let rows: Vec<Vec<String>> = compiled
        .species
        .iter()
        .zip(&d.species)
        .map(|(s, sd)| {
            let (kind, diff) = match s.kind {
                SpeciesKind::Mobile { diffusion } => ("motile", format!("{diffusion}")),
                SpeciesKind::Immobile => ("immobile", "-".into()),
                SpeciesKind::QuasiSteady { diffusion } => ("quasi-steady", format!("{diffusion}")),
            };
            vec![
                s.name.clone(),
                kind.into(),
                diff,
                sd.unit.clone(),
                sd.about.clone(),
            ]
        })
        .collect();
    table(&["name", "kind", "diffusion", "unit", "about"], &rows);

    println!("\nterms");
    let mut rows: Vec<Vec<String>> = Vec::new();
    for s in &d.species {
        rows.push(vec![
            s.name.clone(),
            "reaction".into(),
            describe(&model, &s.reaction),
        ]);
        rows.push(vec![
            s.name.clone(),
            "initial".into(),
            describe(&model, &s.initial),
        ]);
    }
    for (c, cd) in compiled.chemotaxis.iter().zip(&d.chemotaxis) {
        let form = match c.form {
            SensitivityForm::Potential => "chemotaxis χ(c)",
            SensitivityForm::Derivative => "chemotaxis χ'(c)",
        };
        let mut text = format!(
            "{} climbs {}: {}",
            cd.cells,
            cd.signal,
            describe(&model, &cd.sensitivity)
        );
        if let Some(f) = &cd.factor {
            text.push_str(&format!("; density factor {}", describe(&model, f)));
        }
        rows.push(vec![cd.cells.clone(), form.into(), text]);
    }
    table(&["species", "term", "definition"], &rows);

    println!("\ndiagnostics");
    let rows: Vec<Vec<String>> = d
        .diagnostics
        .iter()
        .map(|g| {
            let kind = match (g.integral, g.conserved) {
                (true, true) => "integral (expected conserved)",
                (true, false) => "integral",
                (false, _) => "field",
            };
            vec![g.name.clone(), kind.into(), describe(&model, &g.expr)]
        })
        .collect();
    table(&["name", "kind", "definition"], &rows);

    let (v, j) = compiled.reactions.tape_lengths();
    println!(
        "\ncompiled: {} graph nodes; reaction tape {v} instructions, with Jacobian {j}",
        compiled.graph_nodes
    );

    let findings = inspect(&model, &compiled);
    for w in &findings.warnings {
        println!("warning: {w}");
    }
    // A term singular at zero (ln c, 1/u) is a legitimate modelling choice, so non-finite
    // values are reported, not fatal; only a model that fails to load or compile is invalid.
    for m in &findings.non_finite {
        println!("warning: not finite: {m}");
    }
    println!(
        "ok: {} evaluated at {} sample states ({} warning(s))",
        model.file,
        findings.samples,
        findings.warnings.len() + findings.non_finite.len()
    );
    Ok(())
}
