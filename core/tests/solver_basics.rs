//! Solver checks on closure-built problems: conservation, positivity, an exact decay rate.

mod common;

use std::sync::Arc;

use agarium_core::linalg::{LinearParams, Method};
use agarium_core::time::{Control, Outcome, Scheme, Simulation, StepperParams};
use common::*;

fn fixed(dt: f64, scheme: Scheme) -> StepperParams {
    StepperParams {
        adaptive: false,
        dt_initial: Some(dt),
        scheme,
        ..StepperParams::default()
    }
}

/// Diffusion–chemotaxis conserves ∫u to round-off over 100 steps: the fitted fluxes are
/// antisymmetric, and with Newton started from the previous state every iterate conserves
/// (common practice for conservative finite-volume-type schemes).
#[test]
fn diffusion_chemotaxis_conserves_mass_over_100_steps() {
    let mesh = disk(1.0, 0.08);
    for method in [Method::Direct, Method::Iterative] {
        let problem = keller_segel(
            1.0,
            1.0,
            5.0,
            1.0,
            1.0,
            |x, y| 1.0 + 4.0 * (-10.0 * ((x - 0.3).powi(2) + y * y)).exp(),
            |x, y| (-5.0 * (x * x + (y - 0.2).powi(2))).exp(),
        );
        let mut params = fixed(1e-3, Scheme::Bdf2);
        params.linear = LinearParams {
            method,
            rtol: 1e-13,
            ..LinearParams::default()
        };
        let mut sim = Simulation::new(problem, mesh.clone(), params, 0.0).unwrap();
        let m0 = integral_of(&mesh, sim.state_slice(), 0);
        let mut worst: f64 = 0.0;
        let mut steps = 0;
        let out = sim
            .advance_to(0.1, &mut |r| {
                let m = integral_of(&mesh, r.state.as_slice().unwrap(), 0);
                worst = worst.max((m - m0).abs() / m0);
                steps += 1;
                Control::Continue
            })
            .unwrap();
        assert_eq!(out, Outcome::Reached);
        assert_eq!(steps, 100);
        // Direct: round-off over 100 steps (~1e-15 per step). Iterative: the linear solver's
        // relative tolerance 1e-13 bounds the defect of each step.
        let tol = if method == Method::Direct {
            1e-12
        } else {
            1e-11
        };
        assert!(worst < tol, "{method:?}: relative mass drift {worst:.3e}");
    }
}

/// J₁ by its power series (Abramowitz & Stegun 1964, 9.1.10); for x ≤ 2 thirty terms are far
/// past double precision.
fn bessel_j1(x: f64) -> f64 {
    let mut term = x / 2.0;
    let mut sum = term;
    for k in 1..30 {
        term *= -(x * x / 4.0) / (k as f64 * (k + 1) as f64);
        sum += term;
    }
    sum
}

/// First zero of J₁' (Abramowitz & Stegun 1964, table 9.5: j'₁,₁ = 1.8411838).
const J1P1: f64 = 1.841_183_781_340_659;

#[test]
fn the_tabulated_zero_is_a_zero_of_the_series_derivative() {
    let h = 1e-5;
    let d = (bessel_j1(J1P1 + h) - bessel_j1(J1P1 - h)) / (2.0 * h);
    assert!(d.abs() < 1e-9, "J1'(j'11) = {d}");
    // A&S table 9.1: J₁(1) = 0.4400505857.
    assert!((bessel_j1(1.0) - 0.440_050_585_7).abs() < 1e-10);
}

/// Decay rate of the Neumann mode J₁(j'₁,₁ r) cos θ on the unit disk.
fn mode_rate(h: f64) -> f64 {
    let mesh = disk(1.0, h);
    let d = 1.0;
    let mode = |x: f64, y: f64| {
        let r = x.hypot(y);
        if r == 0.0 {
            0.0
        } else {
            bessel_j1(J1P1 * r) * x / r
        }
    };
    let problem = agarium_core::problem::Problem {
        species: vec![mobile("u", d)],
        reactions: no_reactions(1),
        initial: initial(vec![Box::new(move |x, y| 2.0 + mode(x, y))]),
        chemotaxis: vec![],
        diagnostics: vec![],
    };
    let params = StepperParams {
        rtol: 1e-7,
        atol: 1e-9,
        ..StepperParams::default()
    };
    let mut sim = Simulation::new(problem, mesh.clone(), params, 0.0).unwrap();
    let n = mesh.num_nodes();
    let phi: Vec<f64> = (0..n)
        .map(|i| {
            let p = mesh.node(i);
            mode(p[0], p[1])
        })
        .collect();
    let amp = |u: &[f64]| -> f64 {
        let mean: f64 = u
            .iter()
            .zip(&mesh.node_areas)
            .map(|(a, m)| a * m)
            .sum::<f64>()
            / mesh.node_areas.iter().sum::<f64>();
        let num: f64 = (0..n)
            .map(|i| mesh.node_areas[i] * (u[i] - mean) * phi[i])
            .sum();
        let den: f64 = (0..n).map(|i| mesh.node_areas[i] * phi[i] * phi[i]).sum();
        num / den
    };
    // Start the measurement after higher modes present in the interpolant have decayed.
    sim.advance_to(0.05, &mut |_| Control::Continue).unwrap();
    let a0 = amp(sim.state_slice());
    let t1 = 0.45;
    sim.advance_to(t1, &mut |_| Control::Continue).unwrap();
    let a1 = amp(sim.state_slice());
    -(a1 / a0).ln() / (t1 - 0.05)
}

#[test]
fn neumann_disk_mode_decays_at_d_times_j11_prime_squared() {
    let exact = J1P1 * J1P1;
    let hs = [0.2, 0.1, 0.05];
    let errs: Vec<f64> = hs
        .iter()
        .map(|&h| (mode_rate(h) - exact).abs() / exact)
        .collect();
    eprintln!("relative rate errors {errs:?}");
    // At h = 0.1 the P1 lumped-mass eigenvalue error is O(h²) ≈ 1e-3 (common practice).
    assert!(errs[1] < 0.01, "{errs:?}");
    for k in 0..2 {
        let rate = (errs[k] / errs[k + 1]).log2();
        assert!(
            rate > 1.7,
            "observed order {rate:.2} between h={} and h={}",
            hs[k],
            hs[k + 1]
        );
    }
}

#[test]
fn blow_up_data_stays_positive_and_conserves_mass() {
    // u0 = 1000 e^{−100 r²}, c0 = 500 e^{−50 r²} on [−½, ½]² with Du = Dc = χ = α = β = 1:
    // the data of Chertock & Kurganov (2008) and Strehl, Sokolov, Kuzmin & Turek (2010);
    // the exact mass is 10π·erf(5)² ≈ 31.4159.
    let mesh = rectangle(-0.5, -0.5, 0.5, 0.5, 0.03);
    let problem = keller_segel(
        1.0,
        1.0,
        1.0,
        1.0,
        1.0,
        |x, y| 1000.0 * (-100.0 * (x * x + y * y)).exp(),
        |x, y| 500.0 * (-50.0 * (x * x + y * y)).exp(),
    );
    let mut sim = Simulation::new(problem, mesh.clone(), StepperParams::default(), 0.0).unwrap();
    let m0 = integral_of(&mesh, sim.state_slice(), 0);
    // Quadrature of the Gaussian on this mesh: within 1 % of 10π·erf(5)².
    assert!((m0 - 10.0 * std::f64::consts::PI).abs() / m0 < 1e-2, "{m0}");
    let n = mesh.num_nodes();
    let mut worst_neg: f64 = 0.0;
    let mut drift: f64 = 0.0;
    let out = sim
        .advance_to(1e-4, &mut |r| {
            let u = &r.state.as_slice().unwrap()[..n];
            let max = u.iter().fold(0.0f64, |a, v| a.max(*v));
            let min = u.iter().fold(f64::INFINITY, |a, v| a.min(*v));
            worst_neg = worst_neg.max(-min / max);
            let m = integral_of(&mesh, r.state.as_slice().unwrap(), 0);
            drift = drift.max((m - m0).abs() / m0);
            Control::Continue
        })
        .unwrap();
    assert!(
        matches!(out, Outcome::Reached | Outcome::BlowUp(_)),
        "{out:?}"
    );
    assert!(worst_neg <= 1e-12, "min/max = {worst_neg:.3e}");
    assert!(drift < 1e-12, "mass drift {drift:.3e}");
    let _ = Arc::clone(&mesh);
}

/// The linearly implicit mode (one linear solve per species, the signal lagged) conserves
/// mass as exactly as Newton does and agrees with it to the time-discretisation error.
#[test]
fn lagged_coupling_conserves_and_agrees_with_newton() {
    use agarium_core::time::Coupling;
    let mesh = disk(1.0, 0.1);
    let n = mesh.num_nodes();
    let make = || {
        keller_segel(
            1.0,
            1.0,
            3.0,
            1.0,
            1.0,
            |x, y| 1.0 + 2.0 * (-8.0 * ((x - 0.2).powi(2) + y * y)).exp(),
            |x, y| 0.5 * (-4.0 * (x * x + (y + 0.3).powi(2))).exp(),
        )
    };
    let mut states = Vec::new();
    for coupling in [Coupling::Newton, Coupling::Lagged] {
        let mut params = fixed(2e-3, Scheme::BackwardEuler);
        params.coupling = coupling;
        let mut sim = Simulation::new(make(), mesh.clone(), params, 0.0).unwrap();
        let m0 = integral_of(&mesh, sim.state_slice(), 0);
        sim.advance_to(0.1, &mut |_| Control::Continue).unwrap();
        let m = integral_of(&mesh, sim.state_slice(), 0);
        assert!((m - m0).abs() < 1e-12 * m0, "{coupling:?}: {m} vs {m0}");
        assert_eq!(sim.time(), 0.1);
        if coupling == Coupling::Lagged {
            // The signal's operator M/dt + K + M is the same every step: factored once; the
            // cells' transport changes with the signal: factored every step.
            let st = sim.stats();
            assert_eq!(st.jacobians, st.steps + 1, "{st:?}");
        }
        states.push(sim.state_slice()[..n].to_vec());
    }
    let scale = states[0].iter().fold(0.0f64, |a, v| a.max(*v));
    let diff = states[0]
        .iter()
        .zip(&states[1])
        .fold(0.0f64, |a, (x, y)| a.max((x - y).abs()));
    // Lagging the signal adds an O(dt) splitting error: dt = 2e-3 gives ~1e-3 relative.
    assert!(
        diff < 1e-2 * scale && diff > 0.0,
        "difference {diff:.3e} of {scale:.3e}"
    );
}

/// Adaptive runs land exactly on every requested time, and an observer can stop a run.
#[test]
fn output_times_are_hit_exactly_and_observers_can_stop() {
    let mesh = disk(1.0, 0.15);
    let make = || {
        keller_segel(
            1.0,
            1.0,
            1.0,
            1.0,
            1.0,
            |x, _| 1.0 + 0.5 * x,
            |_, y| 1.0 + 0.5 * y,
        )
    };
    let mut sim = Simulation::new(make(), mesh.clone(), StepperParams::default(), 0.0).unwrap();
    for t in [0.013, 0.1, 0.35, 1.0] {
        assert_eq!(
            sim.advance_to(t, &mut |_| Control::Continue).unwrap(),
            Outcome::Reached
        );
        assert_eq!(sim.time(), t);
    }
    let mut sim = Simulation::new(make(), mesh, StepperParams::default(), 0.0).unwrap();
    let mut seen = 0;
    let out = sim
        .advance_to(1.0, &mut |_| {
            seen += 1;
            if seen == 3 {
                Control::Stop
            } else {
                Control::Continue
            }
        })
        .unwrap();
    assert_eq!(out, Outcome::Stopped);
    assert_eq!(sim.stats().steps, 3);
    assert!(sim.time() < 1.0);
}

/// A run stopped half-way, written to a checkpoint file, read back and continued ends with
/// the same state, bit for bit, as the uninterrupted run (same settings and thread count).
#[test]
fn resumed_runs_end_bit_for_bit_where_uninterrupted_runs_end() {
    use agarium_core::time::Checkpoint;
    let mesh = disk(1.0, 0.12);
    let make = || {
        keller_segel(
            1.0,
            1.0,
            4.0,
            1.0,
            1.0,
            |x, y| 1.0 + 3.0 * (-10.0 * ((x - 0.2).powi(2) + y * y)).exp(),
            |x, y| (-5.0 * (x * x + y * y)).exp(),
        )
    };
    let mut whole = Simulation::new(make(), mesh.clone(), StepperParams::default(), 0.0).unwrap();
    whole.advance_to(0.2, &mut |_| Control::Continue).unwrap();

    let mut first = Simulation::new(make(), mesh.clone(), StepperParams::default(), 0.0).unwrap();
    // Stop after an arbitrary accepted step (not at an output time).
    let mut k = 0;
    first
        .advance_to(0.2, &mut |_| {
            k += 1;
            if k == 7 {
                Control::Stop
            } else {
                Control::Continue
            }
        })
        .unwrap();
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("state.ckpt");
    first.checkpoint().write(&path).unwrap();
    drop(first);
    let ckpt = Checkpoint::read(&path).unwrap();
    let mut resumed =
        Simulation::restore(make(), mesh.clone(), StepperParams::default(), ckpt).unwrap();
    resumed.advance_to(0.2, &mut |_| Control::Continue).unwrap();
    assert_eq!(resumed.stats(), whole.stats());
    let same = whole
        .state_slice()
        .iter()
        .zip(resumed.state_slice())
        .all(|(a, b)| a.to_bits() == b.to_bits());
    assert!(same, "resumed state differs");

    // A damaged checkpoint is refused, not half-read.
    let bytes = std::fs::read(&path).unwrap();
    std::fs::write(&path, &bytes[..bytes.len() - 8]).unwrap();
    assert!(Checkpoint::read(&path).is_err());
}
