//! Critical mass of the parabolic–elliptic Keller–Segel system in two dimensions.
//!
//! u_t = Δu − χ∇·(u∇c), 0 = Δc − c + u on the unit disk with no-flux boundaries. Solutions
//! with mass below 4π/χ exist globally and stay bounded (Nagai, "Global existence and blowup
//! of solutions to a chemotaxis system", Nonlinear Anal. 47, 2001; Biler, "Local and global
//! solvability of some parabolic systems modelling chemotaxis", Adv. Math. Sci. Appl. 8,
//! 1998), and a mass concentrated at an interior point above 8π/χ blows up in finite time
//! (Jäger & Luckhaus, "On explosions of solutions to a system of partial differential
//! equations modelling chemotaxis", Trans. AMS 329, 1992; Nagai, "Blow-up of radially
//! symmetric solutions to a chemotaxis system", Adv. Math. Sci. Appl. 5, 1995).
//!
//! Scaling by the coefficients: for u_t = Du Δu − χ∇·(u∇c), 0 = Dc Δc − βc + αu, put
//! c = (α/Dc) c̃ and τ = Du t; then ũ = χα u/(Du Dc) solves the system above with χ = 1, so
//! the thresholds are 8π·Du Dc/(χα) and 4π·Du Dc/(χα) (derivation by rescaling; β only
//! changes the lower-order term). The check runs χ = 1 and χ = 2 to test the scaling.
//!
//! Start: a Gaussian of the given mass and variance 0.005 at the centre. Above the threshold
//! the run must stop with the solver's blow-up report at the centre, with most of the mass
//! near the peak and the peak within the discrete bound mass/(smallest node area); below, it
//! must reach t = 3 with the peak never above its start and the
//! solution within 1 % of the uniform state (the slowest mode decays like e^{−λt} with
//! λ ≥ j'₁,₁² − M/|Ω| > 1 for these masses, so e^{−3λ} < 5e-2·(start deviation ≈ 0.2)).

use std::f64::consts::PI;

use agarium_core::kernel::SpeciesKind;
use agarium_core::problem::{Problem, SpeciesSpec};
use agarium_core::time::Outcome;

use crate::check::{Check, Context, Criterion, Row};
use crate::error::VerifyError;
use crate::support::{self, max};

const BLOWUP_SOURCE: &str = "Jäger & Luckhaus 1992; Nagai 1995";
const BOUNDED_SOURCE: &str = "Nagai 2001; Biler 1998";

/// The critical-mass check.
pub const CHECK: Check = Check {
    name: "critical-mass",
    about: "quasi-steady Keller–Segel on the unit disk: mass above 8π/χ blows up (report at \
        the centre), mass below 4π/χ spreads to the uniform state; χ = 1 and 2",
    source: "W. Jäger & S. Luckhaus, Trans. AMS 329 (1992); T. Nagai, Adv. Math. Sci. Appl. 5 \
        (1995); T. Nagai, Nonlinear Anal. 47 (2001); P. Biler, Adv. Math. Sci. Appl. 8 (1998); \
        scaling 8π·Du·Dc/(χα) by rescaling",
    run,
};

fn problem(mass: f64, chi: f64) -> Problem {
    let var = 0.005;
    Problem {
        species: vec![
            support::mobile("u", 1.0),
            SpeciesSpec {
                name: "c".into(),
                kind: SpeciesKind::QuasiSteady { diffusion: 1.0 },
            },
        ],
        reactions: support::keller_segel_reactions(),
        initial: support::initial(vec![
            Box::new(move |x, y| mass / (2.0 * PI * var) * (-(x * x + y * y) / (2.0 * var)).exp()),
            Box::new(|_, _| 0.0),
        ]),
        chemotaxis: vec![support::linear_chemotaxis(2, 0, 1, chi)],
        diagnostics: vec![],
    }
}

fn run(ctx: &Context) -> Result<Vec<Row>, VerifyError> {
    let name = "critical-mass";
    let h = ctx.pick(0.06, 0.03);
    let mesh = support::mesh(name, support::disk(1.0), h, None)?;
    let n = mesh.num_nodes();
    let mut rows = Vec::new();
    for chi in [1.0, 2.0] {
        // Above: 10π/χ = 1.25 × 8π/χ.
        let mass = 10.0 * PI / chi;
        let mut sim = support::simulation(
            name,
            ctx,
            problem(mass, chi),
            &mesh,
            support::adaptive(1e-3, 1e-6),
        )?;
        let out = support::advance(name, &mut sim, 0.5, &mut |_| {})?;
        let (obtained, pass) = match &out {
            Outcome::BlowUp(r) => {
                let centre = r.location[0].hypot(r.location[1]) < 0.1;
                let concentrated = r.mass_near_peak > 0.5 * r.mass;
                (
                    format!(
                        "blow-up report at t {:.3e}, r {:.3}, {:.0}% of mass near the peak",
                        r.time,
                        r.location[0].hypot(r.location[1]),
                        100.0 * r.mass_near_peak / r.mass
                    ),
                    r.species == "u"
                        && centre
                        && concentrated
                        && r.peak <= r.discrete_bound * (1.0 + 1e-9),
                )
            }
            other => (format!("no blow-up ({other:?}) by t 0.5"), false),
        };
        rows.push(Row::event(
            format!("critical-mass χ {chi}: mass 10π/χ > 8π/χ, h {h}"),
            BLOWUP_SOURCE,
            "blow-up at the centre",
            obtained,
            pass,
        ));
        // Below: 2π/χ = ½ × 4π/χ.
        let mass = 2.0 * PI / chi;
        let mut sim = support::simulation(
            name,
            ctx,
            problem(mass, chi),
            &mesh,
            support::adaptive(1e-3, 1e-6),
        )?;
        let peak0 = max(&sim.state_slice()[..n]);
        let mut peak: f64 = peak0;
        let out = support::advance(name, &mut sim, 3.0, &mut |u| {
            peak = peak.max(max(&u[..n]));
        })?;
        if out != Outcome::Reached {
            rows.push(Row::event(
                format!("critical-mass χ {chi}: mass 2π/χ < 4π/χ stays bounded, h {h}"),
                BOUNDED_SOURCE,
                "reaches t 3",
                format!("{out:?} at t {:.3e}", sim.time()),
                false,
            ));
            continue;
        }
        let u = &sim.state_slice()[..n];
        let m = support::lumped(&mesh, |i| u[i]);
        let uniform = m / mesh.area();
        let c = &sim.state_slice()[n..];
        let dev = |w: &[f64]| w.iter().fold(0.0f64, |a, v| a.max((v - uniform).abs())) / uniform;
        rows.push(Row::value(
            format!("critical-mass χ {chi}: mass 2π/χ, sup u over the run / sup u₀, h {h}"),
            BOUNDED_SOURCE,
            Criterion::AtMost(1.0),
            peak / peak0,
        ));
        for (label, w) in [("u", u), ("c", c)] {
            rows.push(Row::value(
                format!("critical-mass χ {chi}: mass 2π/χ, max |{label} − ū|/ū at t 3, h {h}"),
                BOUNDED_SOURCE,
                Criterion::AtMost(1e-2),
                dev(w),
            ));
        }
    }
    Ok(rows)
}
