//! Pattern prediction for a run specification: its model's homogeneous steady states, their
//! dispersion relations, the plate's Neumann modes inside each unstable band, and the
//! threshold of one parameter (the numerics are `agarium_core::stability`).

use std::sync::Arc;

use agarium_core::kernel::{KernelInput, Scratch};
use agarium_core::mesh::Mesh;
use agarium_core::problem::Problem;
use agarium_core::stability::{
    find_steady_states, linearise, neumann_modes, neumann_modes_near, Band, Dispersion, Growth,
    PlateModes, SteadyOptions, SteadyState,
};
use serde::Serialize;

use crate::error::RunError;
use crate::session::{mesh_of, model_problem};
use crate::spec::RunSpec;

/// What to compute.
#[derive(Clone, Debug)]
pub struct StabilityOptions {
    /// Neumann eigenvalues of the plate (0: none).
    pub modes: usize,
    /// k² scanned, logarithmically, from `k2_range.0` to `k2_range.1`.
    pub k2_range: (f64, f64),
    /// Scan points.
    pub k2_points: usize,
    /// A parameter whose threshold is bracketed: (name, low, high).
    pub scan: Option<(String, f64, f64)>,
}

impl Default for StabilityOptions {
    fn default() -> Self {
        Self {
            modes: 12,
            k2_range: (1e-4, 1e4),
            k2_points: 481,
            scan: None,
        }
    }
}

/// A plate mode with its predicted growth.
#[derive(Clone, Debug, Serialize)]
pub struct PlateGrowth {
    /// Index among the plate's modes (0 = the constant mode).
    pub index: usize,
    /// Its eigenvalue k².
    pub k2: f64,
    /// Predicted growth rate σ(k²).
    pub sigma: f64,
}

/// One homogeneous steady state and what grows about it.
#[derive(Clone, Debug, Serialize)]
pub struct StateReport {
    /// The state.
    pub state: SteadyState,
    /// Its unstable band (none: every mode decays).
    pub band: Option<Band>,
    /// The plate's eigenvalues compared with the band: the lowest ones, or, when the band
    /// lies above them, those nearest the fastest k².
    pub plate_eigenvalues: Vec<f64>,
    /// The plate's modes inside the band, fastest first (`index` into `plate_eigenvalues`).
    pub plate_growth: Vec<PlateGrowth>,
    /// The modes of `plate_eigenvalues` (node values).
    #[serde(skip)]
    pub plate_modes: Vec<Vec<f64>>,
    /// σ on the k² scan.
    #[serde(skip)]
    pub curve: Vec<Growth>,
}

/// The threshold of a parameter.
#[derive(Clone, Debug, Serialize)]
pub struct Threshold {
    /// The parameter.
    pub parameter: String,
    /// Its unit (from the model).
    pub unit: String,
    /// Largest value with every mode decaying and smallest with one growing (or the reverse,
    /// as `unstable_above` says).
    pub bracket: [f64; 2],
    /// The state loses stability as the parameter increases.
    pub unstable_above: bool,
    /// Values of the state at the lower end of the bracket.
    pub state: Vec<f64>,
}

/// The whole analysis.
#[derive(Clone, Debug, Serialize)]
pub struct StabilityReport {
    /// Species names, in the order of the states' values.
    pub species: Vec<String>,
    /// Nodes of the plate mesh.
    pub nodes: usize,
    /// The plate's lowest Neumann eigenvalues.
    pub plate_eigenvalues: Vec<f64>,
    /// The homogeneous steady states found.
    pub states: Vec<StateReport>,
    /// The threshold, when a scan was asked for.
    pub threshold: Option<Threshold>,
}

/// Mean of the model's initial data over the mesh (lumped quadrature).
fn initial_means(problem: &Problem, mesh: &Mesh) -> Result<Vec<f64>, RunError> {
    let n = mesh.num_nodes();
    let s = problem.species.len();
    let x: Vec<f64> = (0..n).map(|i| mesh.node(i)[0]).collect();
    let y: Vec<f64> = (0..n).map(|i| mesh.node(i)[1]).collect();
    let zeros = vec![vec![0.0; n]; s];
    let species: Vec<&[f64]> = zeros.iter().map(Vec::as_slice).collect();
    let input = KernelInput {
        species: &species,
        x: &x,
        y: &y,
        t: 0.0,
    };
    let mut out = vec![0.0; s * n];
    problem
        .initial
        .eval(&input, &mut out, &mut Scratch::new())
        .map_err(|e| RunError::input(format!("evaluating the initial conditions: {e}")))?;
    let area: f64 = mesh.node_areas.iter().sum();
    Ok((0..s)
        .map(|k| {
            out[k * n..(k + 1) * n]
                .iter()
                .zip(&mesh.node_areas)
                .map(|(v, m)| v * m)
                .sum::<f64>()
                / area
        })
        .collect())
}

/// Newton starts: the mean initial state, and a grid of 0, ½, 1 and 2 times each species'
/// scale (its mean initial value, or 1), at most 4⁶ points. A species that no reaction term
/// reads (`free[s]` false, an immobile record such as settled cells) is any value at a steady
/// state: it stays at its mean instead of multiplying the states found.
fn starts(means: &[f64], free: &[bool]) -> Vec<Vec<f64>> {
    let s = means.len();
    let scales: Vec<f64> = means
        .iter()
        .map(|&m| if m.abs() > 1e-12 { m.abs() } else { 1.0 })
        .collect();
    let levels = [0.0, 0.5, 1.0, 2.0];
    let per = if s <= 6 { levels.len() } else { 2 };
    let varied = free.iter().filter(|&&f| f).count();
    let total = per.pow(varied.min(8) as u32);
    let mut v = vec![means.to_vec()];
    for code in 0..total {
        let mut c = code;
        let p: Vec<f64> = (0..s)
            .map(|k| {
                if !free[k] {
                    return means[k];
                }
                let l = if k < 8 {
                    levels[c % per + (4 - per) / 2]
                } else {
                    1.0
                };
                c /= per;
                l * scales[k]
            })
            .collect();
        v.push(p);
    }
    v
}

fn analyse_problem(
    problem: &Problem,
    mesh: &Mesh,
    modes: &PlateModes,
    opts: &StabilityOptions,
    with_plate: bool,
) -> Result<Vec<StateReport>, RunError> {
    let means = initial_means(problem, mesh)?;
    let centre = centroid(mesh);
    let n = problem.species.len();
    let free: Vec<bool> = (0..n)
        .map(|s| (0..n).any(|o| problem.reactions.depends_on(o, s)))
        .collect();
    let states = find_steady_states(
        problem,
        &starts(&means, &free),
        centre,
        &SteadyOptions::default(),
    )
    .map_err(RunError::failure)?;
    let mut out = Vec::with_capacity(states.len());
    for state in states {
        let lin = linearise(problem, &state.values, centre).map_err(RunError::failure)?;
        let d = Dispersion::new(lin);
        let curve = d
            .curve(opts.k2_range.0, opts.k2_range.1, opts.k2_points)
            .map_err(RunError::failure)?;
        let band = d.band(&curve).map_err(RunError::failure)?;
        let mut plate_growth = Vec::new();
        let mut near = None;
        if let (Some(b), true) = (&band, with_plate && opts.modes > 0) {
            let top = modes.eigenvalues.last().copied().unwrap_or(0.0);
            if b.k2_low > top && b.fastest.k2 > 0.0 {
                near = Some(
                    neumann_modes_near(mesh, opts.modes, b.fastest.k2).map_err(RunError::input)?,
                );
            }
        }
        let used = near.as_ref().unwrap_or(modes);
        if band.is_some() && with_plate {
            for (index, &k2) in used.eigenvalues.iter().enumerate() {
                let g = d.growth(k2).map_err(RunError::failure)?;
                if d.grows(&g) {
                    plate_growth.push(PlateGrowth {
                        index,
                        k2,
                        sigma: g.sigma,
                    });
                }
            }
            plate_growth.sort_by(|a, b| b.sigma.total_cmp(&a.sigma));
        }
        out.push(StateReport {
            state,
            band,
            plate_eigenvalues: used.eigenvalues.clone(),
            plate_growth,
            plate_modes: if near.is_some() {
                used.modes.clone()
            } else {
                Vec::new()
            },
            curve,
        });
    }
    Ok(out)
}

fn centroid(mesh: &Mesh) -> [f64; 2] {
    let area: f64 = mesh.node_areas.iter().sum();
    let mut c = [0.0, 0.0];
    for (i, m) in mesh.node_areas.iter().enumerate() {
        let p = mesh.node(i);
        c[0] += m * p[0] / area;
        c[1] += m * p[1] / area;
    }
    c
}

/// Runs the analysis for `spec`'s model, overrides, initial data and plate.
pub fn analyse(
    spec: &RunSpec,
    opts: &StabilityOptions,
) -> Result<(StabilityReport, Arc<Mesh>, PlateModes), RunError> {
    let (model, problem) =
        model_problem(&spec.model_file, &spec.model_text, &spec.set, &spec.initial)?;
    let (mesh, figures) = mesh_of(&spec.plate, &spec.mesh)?;
    let modes = neumann_modes(&mesh, opts.modes).map_err(RunError::input)?;
    let mut states = analyse_problem(&problem, &mesh, &modes, opts, true)?;
    for s in &mut states {
        if s.plate_modes.is_empty() {
            s.plate_modes = modes.modes.clone();
        }
    }
    let threshold = match &opts.scan {
        None => None,
        Some((name, lo, hi)) => {
            let Some(p) = model.decl.params.iter().find(|p| &p.name == name) else {
                let names: Vec<&str> = model.decl.params.iter().map(|p| p.name.as_str()).collect();
                return Err(RunError::input(format!(
                    "--scan {name}: the model has no parameter `{name}` (it has: {})",
                    names.join(", ")
                )));
            };
            Some(threshold(
                spec, &mesh, &modes, opts, name, &p.unit, *lo, *hi,
            )?)
        }
    };
    Ok((
        StabilityReport {
            species: problem.species.iter().map(|s| s.name.clone()).collect(),
            nodes: figures.nodes,
            plate_eigenvalues: modes.eigenvalues.clone(),
            states,
            threshold,
        },
        mesh,
        modes,
    ))
}

/// Whether some mode about the followed state grows at parameter value `v`, and the state
/// (the one closest to `near`, or the first ODE-stable one).
fn grows_at(
    spec: &RunSpec,
    mesh: &Mesh,
    modes: &PlateModes,
    opts: &StabilityOptions,
    name: &str,
    v: f64,
    near: Option<&[f64]>,
) -> Result<(bool, Vec<f64>), RunError> {
    let mut set = spec.set.clone();
    set.push(format!("{name}={v}"));
    let (_, problem) = model_problem(&spec.model_file, &spec.model_text, &set, &spec.initial)?;
    let reports = analyse_problem(&problem, mesh, modes, opts, false)?;
    let pick = match near {
        Some(w) => reports.iter().min_by(|a, b| {
            let d = |r: &StateReport| -> f64 {
                r.state
                    .values
                    .iter()
                    .zip(w)
                    .map(|(x, y)| (x - y).powi(2))
                    .sum()
            };
            d(a).total_cmp(&d(b))
        }),
        None => reports
            .iter()
            .find(|r| {
                matches!(
                    r.state.class,
                    agarium_core::stability::SteadyClass::StableNode
                        | agarium_core::stability::SteadyClass::StableFocus
                )
            })
            .or(reports.first()),
    };
    let Some(r) = pick else {
        return Err(RunError::input(format!(
            "--scan {name}: no homogeneous steady state found at {name} = {v}"
        )));
    };
    Ok((r.band.is_some(), r.state.values.clone()))
}

/// Bisection on "some mode grows" between `lo` and `hi`.
#[allow(clippy::too_many_arguments)]
fn threshold(
    spec: &RunSpec,
    mesh: &Mesh,
    modes: &PlateModes,
    opts: &StabilityOptions,
    name: &str,
    unit: &str,
    lo: f64,
    hi: f64,
) -> Result<Threshold, RunError> {
    if !(lo.is_finite() && hi.is_finite() && lo < hi) {
        return Err(RunError::input(format!(
            "--scan {name}={lo}:{hi}: the range must be finite and increasing"
        )));
    }
    let (g_lo, state) = grows_at(spec, mesh, modes, opts, name, lo, None)?;
    let (g_hi, _) = grows_at(spec, mesh, modes, opts, name, hi, Some(&state))?;
    if g_lo == g_hi {
        return Err(RunError::input(format!(
            "--scan {name}={lo}:{hi}: the state is {} at both ends; widen the range",
            if g_lo { "unstable" } else { "stable" }
        )));
    }
    let (mut a, mut b) = (lo, hi);
    let mut near = state.clone();
    for _ in 0..50 {
        if (b - a) <= 1e-9 * a.abs().max(b.abs()) {
            break;
        }
        let m = 0.5 * (a + b);
        let (g, s) = grows_at(spec, mesh, modes, opts, name, m, Some(&near))?;
        near = s;
        if g == g_lo {
            a = m;
        } else {
            b = m;
        }
    }
    Ok(Threshold {
        parameter: name.to_string(),
        unit: unit.to_string(),
        bracket: [a, b],
        unstable_above: !g_lo,
        state,
    })
}
