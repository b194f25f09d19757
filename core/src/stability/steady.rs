//! Spatially homogeneous steady states: zeros of the reaction terms, found by Newton's method
//! from many starts and classified by the eigenvalues of the homogeneous (k = 0) system.

use faer::Mat;
use serde::Serialize;

use super::{linearise, Dispersion, StabilityError};
use crate::problem::Problem;

/// How a homogeneous steady state behaves for the reaction system (no diffusion).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum SteadyClass {
    /// All eigenvalues real and negative.
    StableNode,
    /// All real parts negative, some eigenvalues complex.
    StableFocus,
    /// Real parts of both signs.
    Saddle,
    /// All real parts positive.
    Unstable,
    /// Some eigenvalue has a zero real part (within round-off): a neutral direction, as on a
    /// family of states that a conserved quantity or an immobile species parametrises.
    NonHyperbolic,
}

/// A homogeneous steady state.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct SteadyState {
    /// One value per species.
    pub values: Vec<f64>,
    /// Eigenvalues (re, im) of the homogeneous system at the state.
    pub eigenvalues: Vec<(f64, f64)>,
    /// Classification.
    pub class: SteadyClass,
    /// Largest |reaction term| at the state.
    pub residual: f64,
}

/// Settings of the search.
#[derive(Clone, Debug)]
pub struct SteadyOptions {
    /// A state counts as steady when every reaction term is below `tol` (absolute) plus
    /// `tol` relative to the terms' scale.
    pub tol: f64,
    /// Newton iterations per start.
    pub iterations: usize,
    /// States closer than this (relative to their size) are one state.
    pub distinct: f64,
    /// Keep only states with every species ≥ −tol (densities).
    pub non_negative: bool,
}

impl Default for SteadyOptions {
    fn default() -> Self {
        Self {
            tol: 1e-10,
            iterations: 60,
            distinct: 1e-6,
            non_negative: true,
        }
    }
}

/// Newton's method for f(u) = 0 from `start`, each step the minimum-norm solution of
/// J δ = −f (through the singular value decomposition), so a family of states (a singular
/// Jacobian) is approached at its nearest point. `None` when it does not converge.
fn newton(
    problem: &Problem,
    start: &[f64],
    point: [f64; 2],
    opts: &SteadyOptions,
) -> Result<Option<(Vec<f64>, f64)>, StabilityError> {
    let n = start.len();
    let mut u = start.to_vec();
    for _ in 0..opts.iterations {
        let lin = linearise(problem, &u, point)?;
        let res = lin.reaction.iter().fold(0.0f64, |m, v| m.max(v.abs()));
        let scale = 1.0 + u.iter().fold(0.0f64, |m, v| m.max(v.abs()));
        if !res.is_finite() || u.iter().any(|v| !v.is_finite()) {
            return Ok(None);
        }
        if res <= opts.tol * scale {
            return Ok(Some((u, res)));
        }
        let j = Mat::<f64>::from_fn(n, n, |r, s| lin.jac[r * n + s]);
        let Ok(svd) = j.svd() else {
            return Ok(None);
        };
        let (uu, ss, vv) = (svd.U(), svd.S(), svd.V());
        let smax = (0..n).map(|k| ss[k]).fold(0.0f64, f64::max);
        if smax == 0.0 {
            return Ok(None);
        }
        let mut delta = vec![0.0; n];
        for k in 0..n {
            let s = ss[k];
            if s <= 1e-12 * smax {
                continue;
            }
            let c: f64 = (0..n).map(|r| uu[(r, k)] * lin.reaction[r]).sum::<f64>() / s;
            for (i, d) in delta.iter_mut().enumerate() {
                *d -= vv[(i, k)] * c;
            }
        }
        for (ui, d) in u.iter_mut().zip(&delta) {
            *ui += d;
        }
    }
    Ok(None)
}

/// The distinct homogeneous steady states reached by Newton from `starts`, sorted by their
/// values; `point` is where position-dependent terms are evaluated.
pub fn find_steady_states(
    problem: &Problem,
    starts: &[Vec<f64>],
    point: [f64; 2],
    opts: &SteadyOptions,
) -> Result<Vec<SteadyState>, StabilityError> {
    let mut found: Vec<(Vec<f64>, f64)> = Vec::new();
    for start in starts {
        let Some((u, res)) = newton(problem, start, point, opts)? else {
            continue;
        };
        if opts.non_negative && u.iter().any(|&v| v < -opts.tol) {
            continue;
        }
        // Clean round-off negatives of zero components.
        let u: Vec<f64> = u
            .iter()
            .map(|&v| if v.abs() <= opts.tol { 0.0 } else { v })
            .collect();
        let size = 1.0 + u.iter().fold(0.0f64, |m, v| m.max(v.abs()));
        let same = |w: &Vec<f64>| {
            u.iter()
                .zip(w)
                .fold(0.0f64, |m, (a, b)| m.max((a - b).abs()))
                <= opts.distinct * size
        };
        if !found.iter().any(|(w, _)| same(w)) {
            found.push((u, res));
        }
    }
    found.sort_by(|a, b| {
        a.0.iter()
            .zip(&b.0)
            .map(|(x, y)| x.total_cmp(y))
            .find(|o| o.is_ne())
            .unwrap_or(std::cmp::Ordering::Equal)
    });
    let mut states = Vec::with_capacity(found.len());
    for (values, residual) in found {
        let lin = linearise(problem, &values, point)?;
        // The k = 0 system, quasi-steady rows eliminated; a quasi-steady block singular at
        // k = 0 (no decay) leaves no finite spectrum: a neutral state.
        let (eigenvalues, class) = match Dispersion::new(lin).eigenvalues(0.0)? {
            Some(ev) => {
                let class = classify(&ev);
                (ev, class)
            }
            None => (Vec::new(), SteadyClass::NonHyperbolic),
        };
        states.push(SteadyState {
            class,
            values,
            eigenvalues,
            residual,
        });
    }
    Ok(states)
}

/// Classification from the eigenvalues (real parts within 1e-9 of the largest modulus count
/// as zero).
fn classify(ev: &[(f64, f64)]) -> SteadyClass {
    let scale = ev
        .iter()
        .fold(1e-300f64, |m, &(re, im)| m.max(re.hypot(im)));
    let zero = |re: f64| re.abs() <= 1e-9 * scale;
    if ev.iter().any(|&(re, _)| zero(re)) {
        return SteadyClass::NonHyperbolic;
    }
    let neg = ev.iter().filter(|&&(re, _)| re < 0.0).count();
    if neg == ev.len() {
        if ev.iter().any(|&(_, im)| im != 0.0) {
            SteadyClass::StableFocus
        } else {
            SteadyClass::StableNode
        }
    } else if neg == 0 {
        SteadyClass::Unstable
    } else {
        SteadyClass::Saddle
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::kernel::{ClosureKernel, SpeciesKind};
    use crate::problem::SpeciesSpec;
    use std::sync::Arc;

    /// u' = u(1 − u)(u − a) (bistable): steady states 0 (stable), a (unstable), 1 (stable),
    /// with f'(0) = −a, f'(a) = a(1 − a), f'(1) = −(1 − a) (direct computation).
    #[test]
    fn bistable_states_and_their_classes() {
        let a = 0.3;
        let f = move |x: f64| x * (1.0 - x) * (x - a);
        let reactions = ClosureKernel::new(
            1,
            1,
            move |u: &[f64], _x, _y, _t, out: &mut [f64]| out[0] = f(u[0]),
            move |u: &[f64], _x, _y, _t, out: &mut [f64], jac: &mut [f64]| {
                let x = u[0];
                out[0] = f(x);
                jac[0] = (1.0 - x) * (x - a) - x * (x - a) + x * (1.0 - x);
            },
        );
        let zero = ClosureKernel::new(
            1,
            1,
            |_: &[f64], _x, _y, _t, out: &mut [f64]| out[0] = 0.0,
            |_: &[f64], _x, _y, _t, out: &mut [f64], jac: &mut [f64]| {
                out[0] = 0.0;
                jac[0] = 0.0;
            },
        );
        let problem = Problem {
            species: vec![SpeciesSpec {
                name: "u".into(),
                kind: SpeciesKind::Mobile { diffusion: 1.0 },
            }],
            reactions: Arc::new(reactions),
            initial: Arc::new(zero),
            chemotaxis: vec![],
            diagnostics: vec![],
        };
        let starts: Vec<Vec<f64>> = (0..=12).map(|k| vec![k as f64 * 0.1]).collect();
        let s =
            find_steady_states(&problem, &starts, [0.0, 0.0], &SteadyOptions::default()).unwrap();
        let values: Vec<f64> = s.iter().map(|x| x.values[0]).collect();
        assert_eq!(values.len(), 3, "{values:?}");
        for (got, want) in values.iter().zip([0.0, a, 1.0]) {
            assert!((got - want).abs() < 1e-9, "{values:?}");
        }
        assert_eq!(s[0].class, SteadyClass::StableNode);
        assert_eq!(s[1].class, SteadyClass::Unstable);
        assert_eq!(s[2].class, SteadyClass::StableNode);
        assert!((s[1].eigenvalues[0].0 - a * (1.0 - a)).abs() < 1e-9);
        assert!((s[2].eigenvalues[0].0 + (1.0 - a)).abs() < 1e-9);
    }
}
