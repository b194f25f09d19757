//! The bundled four-species nutrient model (models/colony_4species.rhai) through the
//! scripting crate, as users run it:
//!
//! ```text
//! u_t = Du Δu − ∇·(u∇χ(c)) + (g(n) − b(n)) u,   c_t = Dc Δc + αu − βc,
//! n_t = Dn Δn − γ g(n) u,                        w_t = b(n) u,
//! g(n) = r n/(k_n + n),   b(n) = b₀ k_b/(k_b + n).
//! ```
//!
//! - ∫ γ(u + w) + n is conserved (sum of the reaction terms γ·u' + γ·w' + n' = 0 and no-flux
//!   fluxes; the model's analysis, common practice).
//! - Spatially uniform data stay uniform (no gradients, so no fluxes), and each node follows
//!   the ODE system. That ODE is integrated independently with the Dormand–Prince 8(5,3)
//!   method of the `ode_solvers` crate (Hairer, Nørsett & Wanner, "Solving Ordinary
//!   Differential Equations I", 1993, section II.10) at rtol 1e-12, from the equations above
//!   written here in Rust with the parameter values read from the model file; the solver's
//!   BDF2 run at tight tolerances must match it to 1e-6.
//! - As t → ∞ the cells die out once the nutrient drops to where g(n) < b(n):
//!   (u, c, n, w) → (0, 0, n∞, w∞), with n∞ from the ODE and w∞ = (Q − n∞)/γ from the
//!   conservation law Q = γ(u + w) + n.

use agarium_core::observe::Diagnostics;
use agarium_core::problem::Problem;
use agarium_scripting::{Model, Overrides};
use ode_solvers::{Dop853, OutputType, System, Vector4};

use crate::check::{Check, Context, Criterion, Row};
use crate::error::VerifyError;
use crate::support::{self, max, min};

const NAME: &str = "nutrient";
const FILE: &str = "models/colony_4species.rhai";
const MODEL: &str = include_str!("../../models/colony_4species.rhai");
const SOURCE: &str = "ODE reference: Dop853 (Hairer et al. 1993)";

/// The nutrient-model check.
pub const CHECK: Check = Check {
    name: "nutrient",
    about: "models/colony_4species.rhai with uniform data: matches an independent Dop853 ODE \
        integration to 1e-6, conserves γ(u+w)+n, tends to (0, 0, n∞, w∞)",
    source: "E. Hairer, S. P. Nørsett & G. Wanner, Solving Ordinary Differential Equations I \
        (1993), section II.10 (DOP853, as implemented by the ode_solvers crate); conservation \
        and extinction: the model's analysis (common practice)",
    run,
};

/// Parameters of the reaction terms, read from the model file.
#[derive(Clone, Copy, Debug)]
struct Params {
    r: f64,
    k_n: f64,
    b_0: f64,
    k_b: f64,
    gamma: f64,
    alpha: f64,
    beta: f64,
}

type State = Vector4<f64>;

impl System<f64, State> for Params {
    fn system(&self, _t: f64, y: &State, dy: &mut State) {
        let (u, c, n) = (y[0], y[1], y[2]);
        let g = self.r * n / (self.k_n + n);
        let b = self.b_0 * self.k_b / (self.k_b + n);
        dy[0] = (g - b) * u;
        dy[1] = self.alpha * u - self.beta * c;
        dy[2] = -self.gamma * g * u;
        dy[3] = b * u;
    }
}

/// Integrates the ODE from `y` at `t0` to `t1`.
///
/// Sparse output (the state after each accepted step; the last one lands on `t1`): the
/// crate's dense output (0.6.2) returned values at the interval's end that disagree with the
/// accepted steps (at t = 1 by 5e-5 here, and wildly after a restart), so it is not used.
fn ode(p: Params, y: State, t0: f64, t1: f64) -> Result<State, VerifyError> {
    let span = t1 - t0;
    let mut solver = Dop853::from_param(
        p,
        t0,
        t1,
        span,
        y,
        1e-12,
        1e-14,
        0.9,
        0.0,
        0.333,
        6.0,
        span,
        0.0,
        100_000,
        1000,
        OutputType::Sparse,
    );
    solver.integrate().map_err(|e| VerifyError::Reference {
        check: NAME.into(),
        message: e.to_string(),
    })?;
    solver
        .y_out()
        .last()
        .copied()
        .ok_or_else(|| VerifyError::Reference {
            check: NAME.into(),
            message: "no output".into(),
        })
}

fn load() -> Result<(Problem, Params, f64), VerifyError> {
    let model = Model::load(FILE, MODEL, &Overrides::default())
        .map_err(|e| VerifyError::model(NAME, FILE, &e))?;
    let param = |name: &str| {
        model
            .decl
            .params
            .iter()
            .find(|p| p.name == name)
            .map(|p| p.value)
            .ok_or_else(|| VerifyError::Model {
                check: NAME.into(),
                file: FILE.into(),
                message: format!("no parameter `{name}`"),
            })
    };
    let p = Params {
        r: param("r")?,
        k_n: param("k_n")?,
        b_0: param("b_0")?,
        k_b: param("k_b")?,
        gamma: param("gamma")?,
        alpha: param("alpha")?,
        beta: param("beta")?,
    };
    let n0 = param("n_0")?;
    let compiled = model
        .compile()
        .map_err(|e| VerifyError::model(NAME, FILE, &e))?;
    Ok((compiled.to_problem(), p, n0))
}

fn run(ctx: &Context) -> Result<Vec<Row>, VerifyError> {
    let (mut problem, p, n0) = load()?;
    if problem
        .species
        .iter()
        .map(|s| s.name.as_str())
        .collect::<Vec<_>>()
        != ["u", "c", "n", "w"]
    {
        return Err(VerifyError::measurement(
            NAME,
            "species are not (u, c, n, w)",
        ));
    }
    // Uniform data in place of the file's inoculation bumps.
    let y0 = State::new(0.2, 0.1, n0, 0.05);
    let start = [y0[0], y0[1], y0[2], y0[3]];
    problem.initial = support::kernel(4, 4, move |_s, _x, _y, _t, out, _j| {
        out.copy_from_slice(&start);
    });
    let mesh = support::mesh(NAME, support::disk(1.0), 0.5, None)?;
    let n = mesh.num_nodes();
    // The stepper's tolerance: BDF2's global error is a few hundred times the local
    // tolerance over these spans (measured 3.9e-7 at rtol 1e-9), so rtol 1e-10 leaves a
    // margin of about 10 below the 1e-6 asked for.
    let params = support::adaptive(ctx.pick(1e-10, 1e-11), 1e-13);
    let mut sim = support::simulation(NAME, ctx, problem.clone(), &mesh, params)?;
    let d0 = diagnostics(&problem, &mesh, sim.state_slice(), 0.0)?;
    let mut rows = Vec::new();
    let mut y = y0;
    let mut t_prev = 0.0;
    let mut spread: f64 = 0.0;
    let mut drift: f64 = 0.0;
    for t in [1.0, 3.0, 10.0, 30.0] {
        y = ode(p, y, t_prev, t)?;
        t_prev = t;
        support::reach(NAME, &mut sim, t)?;
        let state = sim.state_slice();
        let mut worst: f64 = 0.0;
        for s in 0..4 {
            let v = &state[s * n..(s + 1) * n];
            worst = worst.max((max(v) - y[s]).abs()).max((min(v) - y[s]).abs());
            spread = spread.max(max(v) - min(v));
        }
        let d = diagnostics(&problem, &mesh, state, t)?;
        drift = drift.max(d.conserved_drift(&d0).first().map_or(f64::NAN, |x| x.1));
        rows.push(Row::value(
            format!("nutrient max |PDE − ODE| over (u, c, n, w) at t {t}"),
            SOURCE,
            Criterion::AtMost(1e-6),
            worst,
        ));
    }
    rows.push(Row::value(
        "nutrient spread max − min across nodes (uniform data stay uniform)",
        "common practice",
        Criterion::AtMost(1e-12),
        spread,
    ));
    rows.push(Row::value(
        "nutrient relative drift of ∫γ(u+w)+n to t 30",
        "model analysis (common practice)",
        Criterion::AtMost(1e-12),
        drift,
    ));
    // The limit: the ODE far out gives n∞; the conservation law gives w∞.
    let t_end = 400.0;
    let far = ode(p, y, t_prev, 2000.0)?;
    let q = p.gamma * (y0[0] + y0[3]) + y0[2];
    let n_inf = far[2];
    let w_inf = (q - n_inf) / p.gamma;
    support::reach(NAME, &mut sim, t_end)?;
    let state = sim.state_slice();
    let at = |s: usize| max(&state[s * n..(s + 1) * n]);
    for (s, label, expected) in [
        (0, "u", 0.0),
        (1, "c", 0.0),
        (2, "n", n_inf),
        (3, "w", w_inf),
    ] {
        rows.push(Row::value(
            format!("nutrient {label}(t {t_end}) → {label}∞"),
            "model analysis (common practice)",
            Criterion::Abs {
                expected,
                tol: 1e-6,
            },
            at(s),
        ));
    }
    Ok(rows)
}

fn diagnostics(
    problem: &Problem,
    mesh: &agarium_core::mesh::Mesh,
    state: &[f64],
    t: f64,
) -> Result<Diagnostics, VerifyError> {
    Diagnostics::evaluate(problem, mesh, state, t)
        .map_err(|e| VerifyError::measurement(NAME, format!("diagnostics: {e}")))
}
