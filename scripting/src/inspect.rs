//! Sanity checks of a compiled model at sample states, for `agarium check`: non-finite values,
//! quasi-positivity of reaction terms, and non-positive diffusion coefficients.

use agarium_core::kernel::{BatchKernel, KernelInput, Scratch, SpeciesKind};

use crate::declare::TermSrc;
use crate::model::{CompiledModel, Model};

/// Findings of [`inspect`].
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Findings {
    /// Terms giving NaN or infinity at a sample state (reported: a term singular at zero can
    /// be intended).
    pub non_finite: Vec<String>,
    /// Warnings (quasi-positivity, diffusion).
    pub warnings: Vec<String>,
    /// Number of sample states evaluated.
    pub samples: usize,
}

/// How a term was written, for tables.
pub fn describe(model: &Model, t: &TermSrc) -> String {
    match t {
        TermSrc::Number(v) => format!("{v}"),
        TermSrc::Expr(s) => s.clone(),
        TermSrc::Function(f) => match model.function_params(f) {
            Some(p) if f.starts_with("anon$") => format!("|{}| ...", p.join(", ")),
            Some(p) => format!("fn {f}({})", p.join(", ")),
            None => format!("fn {f}"),
        },
    }
}

/// Sample states: species values on a fixed, spread-out pseudo-random set in [0, 10] (plus the
/// all-zero and all-one states), coordinates in [-10, 10], t in [0, 10].
fn samples(ns: usize, count: usize) -> (Vec<Vec<f64>>, Vec<f64>, Vec<f64>) {
    let mut state: u64 = 0x9E37_79B9_7F4A_7C15;
    let mut next = move || {
        // SplitMix64: a fixed sequence, so findings are reproducible.
        state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = state;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64
    };
    let levels = [0.0, 1e-3, 0.1, 0.5, 1.0, 2.0, 10.0];
    let mut species = vec![Vec::with_capacity(count); ns];
    let (mut x, mut y) = (Vec::new(), Vec::new());
    for k in 0..count {
        for col in species.iter_mut() {
            let v = match k {
                0 => 0.0,
                1 => 1.0,
                _ if k % 2 == 0 => levels[(next() * levels.len() as f64) as usize % levels.len()],
                _ => 10.0 * next(),
            };
            col.push(v);
        }
        x.push(20.0 * next() - 10.0);
        y.push(20.0 * next() - 10.0);
    }
    (species, x, y)
}

fn run(k: &dyn BatchKernel, species: &[Vec<f64>], x: &[f64], y: &[f64], t: f64) -> Vec<f64> {
    let refs: Vec<&[f64]> = species.iter().map(Vec::as_slice).collect();
    let input = KernelInput {
        species: &refs,
        x,
        y,
        t,
    };
    let mut out = vec![0.0; k.n_outputs() * x.len()];
    if k.eval(&input, &mut out, &mut Scratch::new()).is_err() {
        out.fill(f64::NAN);
    }
    out
}

fn state_text(names: &[String], species: &[Vec<f64>], i: usize, x: &[f64], y: &[f64]) -> String {
    let mut parts: Vec<String> = names
        .iter()
        .zip(species)
        .map(|(n, col)| format!("{n}={}", col[i]))
        .collect();
    parts.push(format!("x={:.3}", x[i]));
    parts.push(format!("y={:.3}", y[i]));
    parts.join(", ")
}

/// Evaluates every term of `compiled` at sample states.
pub fn inspect(model: &Model, compiled: &CompiledModel) -> Findings {
    let ns = compiled.species.len();
    let names: Vec<String> = compiled.species.iter().map(|s| s.name.clone()).collect();
    let count = 512;
    let (species, x, y) = samples(ns, count);
    let mut f = Findings {
        samples: count * 2,
        ..Findings::default()
    };
    let mut terms: Vec<(String, &dyn BatchKernel, usize)> = Vec::new();
    for (i, s) in names.iter().enumerate() {
        terms.push((format!("reaction of `{s}`"), &compiled.reactions, i));
        terms.push((format!("initial condition of `{s}`"), &compiled.initial, i));
    }
    for c in &compiled.chemotaxis {
        let label = format!(
            "sensitivity of `{}` to `{}`",
            names[c.cells], names[c.signal]
        );
        terms.push((label, &c.sensitivity, 0));
        if let Some(fk) = &c.factor {
            terms.push((format!("density factor of `{}`", names[c.cells]), fk, 0));
        }
    }
    for d in &compiled.diagnostics {
        terms.push((format!("diagnostic `{}`", d.name), &d.kernel, 0));
    }
    for t in [0.0, 10.0] {
        let outs: Vec<Vec<f64>> = terms
            .iter()
            .map(|(_, k, _)| run(*k, &species, &x, &y, t))
            .collect();
        for ((label, _, o), out) in terms.iter().zip(&outs) {
            let vals = &out[o * count..(o + 1) * count];
            if let Some(i) = vals.iter().position(|v| !v.is_finite()) {
                let msg = format!(
                    "{label} is {} at {}, t={t}",
                    vals[i],
                    state_text(&names, &species, i, &x, &y)
                );
                if !f.non_finite.iter().any(|m| m.starts_with(label.as_str())) {
                    f.non_finite.push(msg);
                }
            }
        }
    }
    // Quasi-positivity (common practice for reaction–diffusion systems): with every species
    // non-negative and species s at zero, the reaction of s must not be negative, or the
    // equations can drive s below zero.
    for s in 0..ns {
        let mut zeroed = species.clone();
        zeroed[s].fill(0.0);
        let out = run(&compiled.reactions, &zeroed, &x, &y, 0.0);
        let vals = &out[s * count..(s + 1) * count];
        if let Some(i) = vals.iter().position(|v| *v < 0.0) {
            f.warnings.push(format!(
                "reaction of `{}` is {} < 0 at {} : quasi-positivity fails, `{}` can become negative",
                names[s],
                vals[i],
                state_text(&names, &zeroed, i, &x, &y),
                names[s]
            ));
        }
    }
    for (s, decl) in compiled.species.iter().zip(&model.decl.species) {
        match s.kind {
            SpeciesKind::Mobile { diffusion } | SpeciesKind::QuasiSteady { diffusion }
                if diffusion <= 0.0 =>
            {
                f.warnings.push(format!(
                    "{}: diffusion coefficient of `{}` is {diffusion}, not positive",
                    decl.at, s.name
                ));
            }
            _ => {}
        }
    }
    f
}
