//! Settings of the time stepper (serde values, so run files and sweeps can carry them).

use serde::{Deserialize, Serialize};

use crate::linalg::LinearParams;

/// The time discretisation.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "kebab-case")]
pub enum Scheme {
    /// Variable-step BDF2 (second order), started with backward Euler; a step whose BDF2
    /// solution leaves the positive cone is redone with backward Euler.
    #[default]
    Bdf2,
    /// Backward Euler (first order, positivity-preserving for the fitted transport). Written
    /// `euler`, the command line's word; the earlier `backward-euler` is still read.
    #[serde(rename = "euler", alias = "backward-euler")]
    BackwardEuler,
    /// Variable-step, variable-order BDF (orders 1 to `max_order`, at most 5) on the actual
    /// past times, started with backward Euler; the order is chosen after each step from error
    /// estimates of the neighbouring orders. With fixed steps the order rises by one per step
    /// up to `max_order`. A step whose solution leaves the positive cone is redone with
    /// backward Euler, a Newton failure restarts at order 1.
    Bdf,
}

/// The highest order of [`Scheme::Bdf`] (BDF6 and above are not zero-stable).
pub const BDF_MAX_ORDER: usize = 5;

/// How the species are coupled within a step.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "kebab-case")]
pub enum Coupling {
    /// Newton on the fully coupled system of all species.
    #[default]
    Newton,
    /// Linearly implicit: the species are solved one after another (in model order), each
    /// with one linear solve, the others taken at their latest values. Cheaper per step and
    /// in memory; less accurate for strong coupling.
    Lagged,
}

/// When to stop with a suspected blow-up.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct BlowupParams {
    /// Watch for blow-up at all.
    pub enabled: bool,
    /// Step-size floor, as a fraction of the span from the run's start to the current
    /// `advance_to` target: a run whose step falls below it while a sup-norm keeps growing
    /// is stopped.
    pub dt_floor: f64,
    /// Growth of a sup-norm over the last `window` accepted steps that counts as "keeps
    /// growing" together with the step-size floor.
    pub growth: f64,
    /// Accepted steps looked back over.
    pub window: usize,
    /// Mesh-scale concentration: this share of a chemotactic species' mass within
    /// `radius_elements` local element diameters of its peak…
    pub concentration: f64,
    /// …radius of that disk in element diameters…
    pub radius_elements: f64,
    /// …while its sup-norm has grown by at least this factor since the start and is still
    /// growing…
    pub peak_growth: f64,
    /// …and the peak node alone (its value times its area) holds at least this share of the
    /// mass…
    pub peak_share: f64,
    /// …and the peak is a spike: at least this factor above the mean of its mesh neighbours
    /// (a plateau at a packing bound, whose neighbours are nearly as high, is not).
    #[serde(default = "default_spike")]
    pub spike: f64,
}

fn default_spike() -> f64 {
    1.5
}

impl Default for BlowupParams {
    fn default() -> Self {
        Self {
            enabled: true,
            dt_floor: 1e-7,
            growth: 2.0,
            window: 10,
            concentration: 0.5,
            radius_elements: 3.0,
            peak_growth: 4.0,
            peak_share: 0.05,
            spike: default_spike(),
        }
    }
}

/// Settings of a [`super::Simulation`].
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct StepperParams {
    /// Time discretisation.
    pub scheme: Scheme,
    /// Coupling of the species within a step.
    pub coupling: Coupling,
    /// Adapt the step size to the local error estimate (false: fixed steps of `dt_initial`).
    pub adaptive: bool,
    /// Relative tolerance of the local error.
    pub rtol: f64,
    /// Absolute tolerance of the local error, in the species' own units.
    pub atol: f64,
    /// First step; `None` picks one from the initial rates of change.
    pub dt_initial: Option<f64>,
    /// Smallest step tried before the run gives up (or reports a blow-up).
    pub dt_min: f64,
    /// Largest step.
    pub dt_max: Option<f64>,
    /// Newton iterations per step attempt.
    pub max_newton: usize,
    /// Newton stops when its remaining error, read from the weighted residual (or, with
    /// quasi-steady species, the update) in the units of the local error target, is below
    /// this; 0.1 leaves nine tenths of the error budget to the time discretisation (common
    /// practice for BDF codes). Krylov solves stop at 0.3 × this.
    pub newton_tol: f64,
    /// A step is rejected when a species' minimum is below −tol × its maximum modulus
    /// (values from round-off below that are accepted). Negative: no positivity check.
    pub negativity_tol: f64,
    /// Highest order of [`Scheme::Bdf`] (1 to [`BDF_MAX_ORDER`]; other schemes ignore it).
    pub max_order: usize,
    /// Linear solver settings.
    pub linear: LinearParams,
    /// Blow-up detection.
    pub blowup: BlowupParams,
}

impl Default for StepperParams {
    fn default() -> Self {
        Self {
            scheme: Scheme::Bdf2,
            coupling: Coupling::Newton,
            adaptive: true,
            rtol: 1e-3,
            atol: 1e-6,
            dt_initial: None,
            dt_min: 1e-14,
            dt_max: None,
            max_newton: 10,
            newton_tol: 0.1,
            negativity_tol: 1e-12,
            max_order: BDF_MAX_ORDER,
            linear: LinearParams::default(),
            blowup: BlowupParams::default(),
        }
    }
}
