//! Solver checks on closure-built problems: conservation, coupling modes, output times,
//! checkpoints. (Checks against published results live in the agarium-verify crate.)

mod common;

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

/// The Keller–Segel case of the linearly implicit checks below.
fn lagged_case() -> agarium_core::problem::Problem {
    keller_segel(
        1.0,
        1.0,
        3.0,
        1.0,
        1.0,
        |x, y| 1.0 + 2.0 * (-8.0 * ((x - 0.2).powi(2) + y * y)).exp(),
        |x, y| 0.5 * (-4.0 * (x * x + (y + 0.3).powi(2))).exp(),
    )
}

/// The linearly implicit mode (one linear solve per species, the signal lagged) conserves
/// mass as exactly as Newton does and agrees with it to the time-discretisation error.
#[test]
fn lagged_coupling_conserves_and_agrees_with_newton() {
    use agarium_core::time::Coupling;
    let mesh = disk(1.0, 0.1);
    let n = mesh.num_nodes();
    let mut states = Vec::new();
    for coupling in [Coupling::Newton, Coupling::Lagged] {
        let mut params = fixed(2e-3, Scheme::BackwardEuler);
        params.coupling = coupling;
        let mut sim = Simulation::new(lagged_case(), mesh.clone(), params, 0.0).unwrap();
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

/// Under `Method::Auto` the linearly implicit mode solves per-species blocks above 1,000
/// unknowns iteratively: Krylov iterations are counted, mass is conserved to the linear
/// tolerance, and the state agrees with the same run solved directly.
#[test]
fn lagged_auto_solves_large_blocks_iteratively_with_the_direct_answer() {
    use agarium_core::time::Coupling;
    let mesh = disk(1.0, 0.04);
    let n = mesh.num_nodes();
    assert!(n > 1_000, "{n} nodes");
    let mut states = Vec::new();
    for method in [Method::Auto, Method::Direct] {
        let problem = lagged_case();
        let mut params = fixed(2e-3, Scheme::Bdf2);
        params.coupling = Coupling::Lagged;
        params.linear.method = method;
        let mut sim = Simulation::new(problem, mesh.clone(), params, 0.0).unwrap();
        let m0 = integral_of(&mesh, sim.state_slice(), 0);
        sim.advance_to(0.05, &mut |_| Control::Continue).unwrap();
        let m = integral_of(&mesh, sim.state_slice(), 0);
        assert!((m - m0).abs() < 1e-10 * m0, "{method:?}: {m} vs {m0}");
        let st = sim.stats();
        if method == Method::Auto {
            assert!(st.linear_iterations > 0, "{st:?}");
        } else {
            assert_eq!(st.linear_iterations, 0, "{st:?}");
        }
        states.push(sim.state_slice()[..n].to_vec());
    }
    let scale = states[1].iter().fold(0.0f64, |a, v| a.max(*v));
    let diff = states[0]
        .iter()
        .zip(&states[1])
        .fold(0.0f64, |a, (x, y)| a.max((x - y).abs()));
    // Both solve to the Newton tolerance (0.1 of the error target, rtol 1e-4 by default).
    assert!(diff < 1e-4 * scale, "difference {diff:.3e} of {scale:.3e}");
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
    // One flipped bit in the states is caught by the checksum.
    let mut flipped = bytes.clone();
    let k = flipped.len() - 100;
    flipped[k] ^= 0x10;
    std::fs::write(&path, &flipped).unwrap();
    let err = Checkpoint::read(&path).unwrap_err().to_string();
    assert!(err.contains("checksum mismatch"), "{err}");
}
