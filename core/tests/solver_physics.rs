//! Solver checks against results of the analysis of chemotaxis systems.

mod common;

use agarium_core::kernel::SpeciesKind;
use agarium_core::problem::{Problem, SpeciesSpec};
use agarium_core::time::{BlowupKind, Control, Outcome, Simulation, StepperParams};
use common::*;

/// Parabolic–elliptic Keller–Segel u_t = Δu − ∇·(u∇c), 0 = Δc − c + u on the unit disk with
/// a Gaussian of mass `mass` and width 0.1 at the centre.
fn quasi_steady_ks(mass: f64) -> Problem {
    let sigma2: f64 = 0.01;
    Problem {
        species: vec![
            mobile("u", 1.0),
            SpeciesSpec {
                name: "c".into(),
                kind: SpeciesKind::QuasiSteady { diffusion: 1.0 },
            },
        ],
        reactions: kernel(
            2,
            2,
            |u, _x, _y, _t, out| {
                out[0] = 0.0;
                out[1] = u[0] - u[1];
            },
            |u, _x, _y, _t, out, jac| {
                out[0] = 0.0;
                out[1] = u[0] - u[1];
                jac.copy_from_slice(&[0.0, 0.0, 1.0, -1.0]);
            },
        ),
        initial: initial(vec![
            Box::new(move |x, y| {
                mass / (std::f64::consts::PI * sigma2) * (-(x * x + y * y) / sigma2).exp()
            }),
            Box::new(|_, _| 0.0),
        ]),
        chemotaxis: vec![chemotaxis(0, 1, linear_potential(2, 1, 1.0))],
        diagnostics: vec![],
    }
}

/// Above the critical mass 8π an interior concentration blows up in finite time
/// (Jäger & Luckhaus 1992; Nagai 1995): the run must stop with a blow-up report at the
/// centre rather than run on or fail.
#[test]
fn supercritical_mass_triggers_the_blow_up_report() {
    let mesh = disk(1.0, 0.06);
    let mut sim = Simulation::new(
        quasi_steady_ks(10.0 * std::f64::consts::PI),
        mesh,
        StepperParams::default(),
        0.0,
    )
    .unwrap();
    let out = sim.advance_to(0.5, &mut |_| Control::Continue).unwrap();
    let Outcome::BlowUp(report) = out else {
        panic!(
            "expected a blow-up report, got {out:?} at t = {}",
            sim.time()
        );
    };
    eprintln!("{}", report.describe());
    assert_eq!(report.species, "u");
    assert!(
        report.location[0].hypot(report.location[1]) < 0.1,
        "{:?}",
        report.location
    );
    assert!(report.mass_near_peak > 0.5 * report.mass);
    assert!(report.peak <= report.discrete_bound * (1.0 + 1e-9));
    assert!(matches!(
        report.kind,
        BlowupKind::MeshScaleConcentration | BlowupKind::StepCollapse
    ));
}

/// Below 4π solutions exist globally and stay bounded (Nagai 2001; Biler 1998); on a bounded
/// domain with this mass they spread to the uniform state u = c = mass/|Ω|.
#[test]
fn subcritical_mass_spreads_to_the_uniform_state() {
    let mesh = disk(1.0, 0.06);
    let mass = 2.0 * std::f64::consts::PI;
    let mut sim = Simulation::new(
        quasi_steady_ks(mass),
        mesh.clone(),
        StepperParams::default(),
        0.0,
    )
    .unwrap();
    let m0 = integral_of(&mesh, sim.state_slice(), 0);
    let out = sim.advance_to(3.0, &mut |_| Control::Continue).unwrap();
    assert_eq!(out, Outcome::Reached);
    let n = mesh.num_nodes();
    let uniform = m0 / mesh.area();
    let u = &sim.state_slice()[..n];
    let c = &sim.state_slice()[n..];
    let dev_u = u.iter().fold(0.0f64, |a, v| a.max((v - uniform).abs())) / uniform;
    let dev_c = c.iter().fold(0.0f64, |a, v| a.max((v - uniform).abs())) / uniform;
    // The slowest mode decays like e^{−λ t} with λ ≈ j'₁,₁² − mass/|Ω|·(j'₁,₁²/(j'₁,₁²+1)) > 1,
    // so by t = 3 the deviation is far below 1e-2.
    assert!(
        dev_u < 1e-2 && dev_c < 1e-2,
        "deviation u {dev_u:.3e}, c {dev_c:.3e}"
    );
}

/// Growth rate of the mode cos x on [0, π]² for u_t = ∇·(∇u − χu∇v) + u(1 − u),
/// v_t = Δv + u − v linearised at (1, 1): the largest eigenvalue of
/// [[−k² − 1, χk²], [1, −k² − 1]] with k² = 1 (linear stability analysis of the uniform
/// state, common practice): √χ − 2, i.e. √5 − 2 for χ = 5 (unstable) and √2 − 2 for χ = 2
/// (stable: αχ = 2 < (√(Du β) + √(r Dv))² = 4).
fn instability_rate(chi: f64) -> f64 {
    let mesh = rectangle(0.0, 0.0, std::f64::consts::PI, std::f64::consts::PI, 0.08);
    let eps = 1e-3;
    let sigma = chi.sqrt() - 2.0;
    // Start on the growing eigenvector (v-part (2 + σ)/χ of the u-part) so only one mode is
    // present.
    let ratio = (2.0 + sigma) / chi;
    let problem = Problem {
        species: vec![mobile("u", 1.0), mobile("v", 1.0)],
        reactions: kernel(
            2,
            2,
            |u, _x, _y, _t, out| {
                out[0] = u[0] * (1.0 - u[0]);
                out[1] = u[0] - u[1];
            },
            |u, _x, _y, _t, out, jac| {
                out[0] = u[0] * (1.0 - u[0]);
                out[1] = u[0] - u[1];
                jac.copy_from_slice(&[1.0 - 2.0 * u[0], 0.0, 1.0, -1.0]);
            },
        ),
        initial: initial(vec![
            Box::new(move |x, _| 1.0 + eps * x.cos()),
            Box::new(move |x, _| 1.0 + eps * ratio * x.cos()),
        ]),
        chemotaxis: vec![chemotaxis(0, 1, linear_potential(2, 1, chi))],
        diagnostics: vec![],
    };
    // The tolerance is relative to u ≈ 1 while the mode is ~1e-3: 1e-9 keeps the time
    // error of the mode near 1e-6 relative.
    let params = StepperParams {
        rtol: 1e-9,
        atol: 1e-12,
        ..StepperParams::default()
    };
    let mut sim = Simulation::new(problem, mesh.clone(), params, 0.0).unwrap();
    let n = mesh.num_nodes();
    let cos: Vec<f64> = (0..n).map(|i| mesh.node(i)[0].cos()).collect();
    let amp = |u: &[f64]| -> f64 {
        let num: f64 = (0..n)
            .map(|i| mesh.node_areas[i] * (u[i] - 1.0) * cos[i])
            .sum();
        let den: f64 = (0..n).map(|i| mesh.node_areas[i] * cos[i] * cos[i]).sum();
        num / den
    };
    // Measure after the other mode of the pair (rate −k² − 1 − √(χk²) ≤ −3.4), excited by the
    // difference between the continuous and the discrete eigenvector, has died out.
    let (t0, t1) = (1.0, 4.0);
    sim.advance_to(t0, &mut |_| Control::Continue).unwrap();
    let a0 = amp(sim.state_slice());
    sim.advance_to(t1, &mut |_| Control::Continue).unwrap();
    let a1 = amp(sim.state_slice());
    (a1 / a0).ln() / (t1 - t0)
}

#[test]
fn chemotactic_instability_grows_at_the_linear_rate() {
    let exact = 5f64.sqrt() - 2.0;
    let got = instability_rate(5.0);
    eprintln!("sigma: {got} vs {exact}");
    // Discrete eigenvalue of −Δ for cos x at h = 0.08: relative error O(h²) ≈ 1e-3 (common
    // practice); measured 1.6e-4 (χ = 5) and 7e-6 (χ = 2) relative, so 0.2 % leaves room.
    assert!((got - exact).abs() < 2e-3 * exact, "sigma {got} vs {exact}");
}

#[test]
fn below_the_threshold_the_mode_decays_at_the_linear_rate() {
    let exact = 2f64.sqrt() - 2.0;
    let got = instability_rate(2.0);
    eprintln!("sigma: {got} vs {exact}");
    assert!(got < 0.0);
    assert!(
        (got - exact).abs() < 2e-3 * exact.abs(),
        "sigma {got} vs {exact}"
    );
}
