//! The solver on scripted models: scripted and native kernels agree, and the four-species
//! nutrient model keeps what its analysis promises.

use std::path::PathBuf;
use std::sync::Arc;

use agarium_core::geometry::{PlateSpec, Shape};
use agarium_core::kernel::{BatchKernel, ClosureKernel, SensitivityForm};
use agarium_core::mesh::{build_mesh, Mesh, MeshOptions};
use agarium_core::observe::Diagnostics;
use agarium_core::problem::{ChemotaxisSpec, Problem};
use agarium_core::time::{Control, Outcome, Simulation, StepperParams};
use agarium_scripting::{Model, Overrides};

fn model_path(name: &str) -> PathBuf {
    [env!("CARGO_MANIFEST_DIR"), "models", name]
        .iter()
        .collect()
}

fn disk(radius: f64, h: f64) -> Arc<Mesh> {
    let plate = PlateSpec {
        outer: Shape::Circle {
            centre: [0.0, 0.0],
            radius,
        },
        holes: vec![],
        cuts: vec![],
    };
    let opts = MeshOptions {
        size: h,
        ..MeshOptions::default()
    };
    Arc::new(build_mesh(&plate, &opts).unwrap().mesh)
}

fn load(name: &str, set: &[&str]) -> Problem {
    let set: Vec<String> = set.iter().map(|s| s.to_string()).collect();
    let overrides = Overrides::parse(&set).unwrap();
    Model::load_file(&model_path(name), &overrides)
        .unwrap()
        .compile()
        .unwrap()
        .to_problem()
}

/// The four-species model's terms written by hand in Rust, with the parameter values of
/// models/colony_4species.rhai.
fn native_colony(scripted: &Problem) -> Problem {
    let (r, k_n, b_0, k_b, gamma, alpha, beta) = (1.2, 0.5, 0.2, 0.4, 1.0, 1.0, 0.5);
    let (chi_0, k_c) = (0.4, 0.3);
    let terms = move |u: &[f64], out: &mut [f64]| {
        let (cells, c, n) = (u[0], u[1], u[2]);
        let g = r * n / (k_n + n);
        let b = b_0 * k_b / (k_b + n);
        out[0] = (g - b) * cells;
        out[1] = alpha * cells - beta * c;
        out[2] = -gamma * g * cells;
        out[3] = b * cells;
    };
    let reactions: Arc<dyn BatchKernel> = Arc::new(ClosureKernel::new(
        4,
        4,
        move |u: &[f64], _x, _y, _t, out: &mut [f64]| terms(u, out),
        move |u: &[f64], _x, _y, _t, out: &mut [f64], jac: &mut [f64]| {
            terms(u, out);
            let (cells, n) = (u[0], u[2]);
            let g = r * n / (k_n + n);
            let b = b_0 * k_b / (k_b + n);
            let dg = r * k_n / ((k_n + n) * (k_n + n));
            let db = -b_0 * k_b / ((k_b + n) * (k_b + n));
            jac.iter_mut().for_each(|v| *v = 0.0);
            jac[0] = g - b;
            jac[2] = (dg - db) * cells;
            jac[4] = alpha;
            jac[5] = -beta;
            jac[8] = -gamma * g;
            jac[10] = -gamma * dg * cells;
            jac[12] = b;
            jac[14] = db * cells;
        },
    ));
    let sensitivity: Arc<dyn BatchKernel> = Arc::new(ClosureKernel::new(
        4,
        1,
        move |u: &[f64], _x, _y, _t, out: &mut [f64]| out[0] = chi_0 * (1.0 + u[1] / k_c).ln(),
        move |u: &[f64], _x, _y, _t, out: &mut [f64], jac: &mut [f64]| {
            out[0] = chi_0 * (1.0 + u[1] / k_c).ln();
            jac.iter_mut().for_each(|v| *v = 0.0);
            jac[1] = chi_0 / (k_c + u[1]);
        },
    ));
    Problem {
        species: scripted.species.clone(),
        reactions,
        initial: scripted.initial.clone(),
        chemotaxis: vec![ChemotaxisSpec {
            cells: 0,
            signal: 1,
            form: SensitivityForm::Potential,
            sensitivity,
            factor: None,
        }],
        diagnostics: scripted.diagnostics.clone(),
    }
}

fn run_fixed(problem: Problem, mesh: Arc<Mesh>, steps: usize, dt: f64) -> Vec<f64> {
    let params = StepperParams {
        adaptive: false,
        dt_initial: Some(dt),
        ..StepperParams::default()
    };
    let mut sim = Simulation::new(problem, mesh, params, 0.0).unwrap();
    let out = sim
        .advance_to(steps as f64 * dt, &mut |_| Control::Continue)
        .unwrap();
    assert_eq!(out, Outcome::Reached);
    sim.state_slice().to_vec()
}

/// Reference: the same model written directly in Rust; both go through the one solver, so
/// the trajectories agree to round-off (the compiled tape and the closures may associate
/// a few operations differently).
#[test]
fn scripted_and_native_kernels_give_the_same_trajectory() {
    let mesh = disk(5.0, 0.25);
    let scripted = load("colony_4species.rhai", &[]);
    let native = native_colony(&scripted);
    let a = run_fixed(scripted, mesh.clone(), 20, 0.05);
    let b = run_fixed(native, mesh, 20, 0.05);
    let scale = a.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let diff = a
        .iter()
        .zip(&b)
        .fold(0.0f64, |m, (x, y)| m.max((x - y).abs()));
    assert!(
        diff <= 1e-12 * scale,
        "max difference {diff:.3e} (scale {scale:.3e})"
    );
}

const CONSTANT_DATA: &str = r#"
param("r", 1.2); param("k_n", 0.5); param("b_0", 0.2); param("k_b", 0.4);
param("gamma", 0.7); param("alpha", 1.0); param("beta", 0.5); param("chi_0", 0.4);
fn g(n, r, k_n) { r * n / (k_n + n) }
fn b(n, b_0, k_b) { b_0 * k_b / (k_b + n) }
species("u", #{ kind: "mobile", diffusion: 0.05, initial: 0.3,
                reaction: |u, n, r, k_n, b_0, k_b| (g(n, r, k_n) - b(n, b_0, k_b)) * u });
species("c", #{ kind: "mobile", diffusion: 0.8, initial: 0.1, reaction: "alpha * u - beta * c" });
species("n", #{ kind: "mobile", diffusion: 0.6, initial: 1.0,
                reaction: |u, n, r, k_n, gamma| -gamma * g(n, r, k_n) * u });
species("w", #{ kind: "immobile", initial: 0.0, reaction: |u, n, b_0, k_b| b(n, b_0, k_b) * u });
chemotaxis(#{ cells: "u", signal: "c", potential: "chi_0 * ln(1.0 + c)" });
integral("q", "gamma * (u + w) + n", #{ conserved: true });
"#;

/// g increasing and bounded with g(0) = 0, b positive and decreasing, γ > 0: constant data
/// stay constant (no gradients, so no fluxes), γ(u + w) + n is invariant, and the cells die
/// out once the nutrient falls below the level where g = b: (u, c) → (0, 0) (the model's
/// analysis; common practice for this class of nutrient models).
#[test]
fn four_species_constant_data_stay_constant_conserve_and_die_out() {
    let mesh = disk(3.0, 0.3);
    let problem = Model::load("constant.rhai", CONSTANT_DATA, &Overrides::default())
        .unwrap()
        .compile()
        .unwrap()
        .to_problem();
    let n = mesh.num_nodes();
    let mut sim =
        Simulation::new(problem.clone(), mesh.clone(), StepperParams::default(), 0.0).unwrap();
    let start = Diagnostics::evaluate(&problem, &mesh, sim.state_slice(), 0.0).unwrap();
    let mut worst_spread: f64 = 0.0;
    let out = sim
        .advance_to(300.0, &mut |r| {
            let u = r.state.as_slice().unwrap();
            for s in 0..4 {
                let v = &u[s * n..(s + 1) * n];
                let (lo, hi) = v
                    .iter()
                    .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), x| {
                        (a.min(*x), b.max(*x))
                    });
                worst_spread = worst_spread.max((hi - lo) / hi.abs().max(1e-300).max(1e-12));
            }
            Control::Continue
        })
        .unwrap();
    assert_eq!(out, Outcome::Reached);
    let end = Diagnostics::evaluate(&problem, &mesh, sim.state_slice(), sim.time()).unwrap();
    let drift = end.conserved_drift(&start)[0].1;
    assert!(drift < 1e-12, "γ(u+w)+n drift {drift:.3e}");
    assert!(worst_spread < 1e-9, "spatial spread {worst_spread:.3e}");
    let s = &end.species;
    assert!(
        s[0].max < 1e-6 && s[1].max < 1e-5,
        "u {} c {}",
        s[0].max,
        s[1].max
    );
    // n∞ is where the nutrient stopped: positive, and below the level where g(n) = b(n).
    assert!(s[2].min > 0.0 && s[2].max < 1.0);
}

/// With non-constant data on a disk the invariant is the integral ∫ γ(u + w) + n, and the
/// motile cells and the attractant still vanish at large times.
#[test]
fn four_species_on_a_disk_conserves_the_integral_and_cells_die_out() {
    let mesh = disk(4.0, 0.2);
    let problem = load("colony_4species.rhai", &["chi_0=0.1"]);
    let mut sim =
        Simulation::new(problem.clone(), mesh.clone(), StepperParams::default(), 0.0).unwrap();
    let start = Diagnostics::evaluate(&problem, &mesh, sim.state_slice(), 0.0).unwrap();
    let out = sim.advance_to(400.0, &mut |_| Control::Continue).unwrap();
    assert_eq!(out, Outcome::Reached);
    let end = Diagnostics::evaluate(&problem, &mesh, sim.state_slice(), sim.time()).unwrap();
    let drift = end.conserved_drift(&start)[0].1;
    assert!(drift < 1e-12, "drift {drift:.3e}");
    let s = &end.species;
    assert!(
        s[0].max < 1e-4 && s[1].max < 1e-3,
        "u {} c {}",
        s[0].max,
        s[1].max
    );
    assert!(s.iter().all(|x| x.min >= -1e-12 * x.max.abs()));
}

/// Volume filling (mobility u(1 − u/u_max)₊ with logistic growth capped at u_max): the cell
/// density stays within [0, u_max] (the point of the model: density-limited chemotaxis,
/// common practice), and without growth the upwinded fluxes conserve the cells.
#[test]
fn volume_filling_keeps_cells_between_zero_and_the_packing_density() {
    let mesh = disk(3.0, 0.15);
    let n = mesh.num_nodes();
    for r in ["0.3", "0.0"] {
        let set = format!("r={r}");
        let problem = load("volume_filling.rhai", &["chi_0=8.0", "u_max=1.0", &set]);
        let mut sim =
            Simulation::new(problem.clone(), mesh.clone(), StepperParams::default(), 0.0).unwrap();
        let m0: f64 = sim.state_slice()[..n]
            .iter()
            .zip(&mesh.node_areas)
            .map(|(a, b)| a * b)
            .sum();
        let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
        let out = sim
            .advance_to(20.0, &mut |rep| {
                for v in &rep.state.as_slice().unwrap()[..n] {
                    lo = lo.min(*v);
                    hi = hi.max(*v);
                }
                Control::Continue
            })
            .unwrap();
        assert_eq!(out, Outcome::Reached);
        assert!(lo >= -1e-12, "r = {r}: min u = {lo:.3e}");
        // The cap is reached only in the limit; Newton's tolerance allows a hair above it.
        assert!(hi <= 1.0 + 1e-6, "r = {r}: max u = {hi}");
        assert!(
            hi > 0.5,
            "r = {r}: the cells should aggregate (max u = {hi})"
        );
        if r == "0.0" {
            let m: f64 = sim.state_slice()[..n]
                .iter()
                .zip(&mesh.node_areas)
                .map(|(a, b)| a * b)
                .sum();
            assert!((m - m0).abs() <= 1e-12 * m0, "mass {m} vs {m0}");
        }
    }
}
