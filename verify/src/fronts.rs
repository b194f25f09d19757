//! Fisher–KPP front speed.
//!
//! A front of u_t = DΔu + ru(1 − u) started from steep data (decaying faster than e^{−x}) moves
//! at the minimal speed 2√(Dr) (Fisher, "The wave of advance of advantageous genes", Ann.
//! Eugen. 7, 1937; Kolmogorov, Petrovsky & Piskunov, Bull. Univ. Moscou A 1, 1937), reached
//! slowly: its position is x(t) = 2t − (3/2) ln t + const + o(1) for D = r = 1 (Bramson,
//! "Convergence of solutions of the Kolmogorov equation to travelling waves", Mem. AMS 285,
//! 1983). Over a window [t₁, t₂] the expected mean speed is therefore
//! 2 − (3/2)·ln(t₂/t₁)/(t₂ − t₁).
//!
//! No 1D meshes exist, so the front is a plane front in a long channel [0, L] × [0, 1] meshed
//! like any plate; its position is where u = ½ along the channel's lower edge (linear
//! interpolation between boundary nodes, which lie on the edge).
//!
//! Tolerance. The o(1) terms of Bramson's expansion still act over a finite window: the next
//! term is of order t^{−½} in x(t) (Ebert & van Saarloos, "Front propagation into unstable
//! states: universal algebraic convergence towards uniformly translating pulled fronts",
//! Physica D 146, 2000; coefficient not used here). Measured over [10, 30] with h = 0.4, 0.2,
//! 0.1: 1.91859, 1.91293, 1.91107 against 2 − (3/2)ln 3/20 = 1.91760, i.e. within 0.007, and
//! converging like h² (the mesh adds about h²/12 to the minimal speed of the semi-discrete
//! linearised equation on a uniform grid, (1 + (2/h²)(cosh λh − 1))/λ at λ ≈ 1; common
//! practice). The tolerance 0.02 + h²/12 is about 3× the measured deviation, while a 5 %
//! error in D or r moves the speed by ≥ 2.5 % = 0.05.

use crate::check::{Check, Context, Criterion, Row};
use crate::error::VerifyError;
use crate::support;

const SOURCE: &str = "Fisher 1937; KPP 1937; Bramson 1983";

/// The Fisher–KPP check.
pub const FISHER_KPP: Check = Check {
    name: "fisher-kpp",
    about: "front of u_t = Δu + u(1 − u) in a channel: mean speed over a window vs \
        2 − (3/2)ln(t₂/t₁)/(t₂ − t₁)",
    source: "R. A. Fisher, Ann. Eugen. 7 (1937); A. Kolmogorov, I. Petrovsky & N. Piskunov, \
        Bull. Univ. Moscou A 1 (1937); M. Bramson, Mem. AMS 285 (1983); next-order term: \
        U. Ebert & W. van Saarloos, Physica D 146 (2000)",
    run,
};

/// Front position (where u = ½) along the lower edge y = 0, from the nodes on that edge.
fn front(edge: &[(f64, usize)], u: &[f64]) -> Option<f64> {
    edge.windows(2).find_map(|w| {
        let ((x0, i0), (x1, i1)) = (w[0], w[1]);
        let (u0, u1) = (u[i0], u[i1]);
        (u0 >= 0.5 && u1 < 0.5).then(|| x0 + (u0 - 0.5) / (u0 - u1) * (x1 - x0))
    })
}

/// Mean front speed over [t1, t2] at edge length `h` in a channel of length `length`.
pub fn window_speed(
    ctx: &Context,
    h: f64,
    length: f64,
    t1: f64,
    t2: f64,
) -> Result<f64, VerifyError> {
    let name = "fisher-kpp";
    let mesh = support::mesh(name, support::rectangle(0.0, 0.0, length, 0.5), h, None)?;
    let mut edge: Vec<(f64, usize)> = (0..mesh.num_nodes())
        .filter_map(|i| {
            let p = mesh.node(i);
            (p[1].abs() < 1e-9).then_some((p[0], i))
        })
        .collect();
    edge.sort_by(|a, b| a.0.total_cmp(&b.0));
    let problem = agarium_core::problem::Problem {
        species: vec![support::mobile("u", 1.0)],
        reactions: support::kernel(1, 1, |s, _x, _y, _t, out, jac| {
            out[0] = s[0] * (1.0 - s[0]);
            if let Some(j) = jac {
                j[0] = 1.0 - 2.0 * s[0];
            }
        }),
        // Steep start (decay e^{−4x} ahead of x = 3), so the front is pulled at the minimal
        // speed with Bramson's correction.
        initial: support::initial(vec![Box::new(|x, _| 1.0 / (1.0 + (4.0 * (x - 3.0)).exp()))]),
        chemotaxis: vec![],
        diagnostics: vec![],
    };
    let mut sim = support::simulation(name, ctx, problem, &mesh, support::adaptive(1e-5, 1e-8))?;
    let at = |t: f64, sim: &mut agarium_core::time::Simulation| {
        support::reach(name, sim, t)?;
        front(&edge, sim.state_slice()).ok_or_else(|| {
            VerifyError::measurement(name, format!("no front crossing u = ½ at t {t}"))
        })
    };
    let x1 = at(t1, &mut sim)?;
    let x2 = at(t2, &mut sim)?;
    Ok((x2 - x1) / (t2 - t1))
}

fn run(ctx: &Context) -> Result<Vec<Row>, VerifyError> {
    let hs: [f64; 3] = ctx.pick([0.4, 0.28, 0.2], [0.28, 0.2, 0.14]);
    let (t1, t2): (f64, f64) = ctx.pick((10.0, 30.0), (20.0, 60.0));
    // The front reaches ≈ 3 + 2t₂; the channel leaves ≥ 15 of room ahead of it for the
    // leading edge (u ~ e^{−(x − 2t)}, below 1e-6 there).
    let length = 2.0 * t2 + 20.0;
    let bramson = 2.0 - 1.5 * (t2 / t1).ln() / (t2 - t1);
    let mut rows = Vec::new();
    for &h in &hs {
        let speed = window_speed(ctx, h, length, t1, t2)?;
        rows.push(Row::value(
            format!("fisher-kpp mean speed over t {t1}–{t2}, D = r = 1, h {h}"),
            SOURCE,
            Criterion::Abs {
                expected: bramson,
                tol: 0.02 + h * h / 12.0,
            },
            speed,
        ));
    }
    Ok(rows)
}
