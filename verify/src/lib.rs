//! agarium-verify: the solver checked against manufactured solutions and published results.
//!
//! Every [`Check`] produces rows of a table (check, source, expected, obtained, tolerance,
//! pass/fail); `agarium verify` prints them and CI runs the fast set. Each check names its
//! published source beside it; a fact of the trade without one says "common practice", and a
//! value recalled from memory says so.
//!
//! | module | check |
//! | --- | --- |
//! | [`mms`] | manufactured solutions: L2 order 2 in space (square, disk; with and without chemotaxis), order 1/2 in time |
//! | [`eigen`] | Neumann eigenvalues of the unit disk (A&S table 9.5) and of a rectangle from decay rates, O(h²) |
//! | [`fronts`] | Fisher–KPP front speed 2√(Dr) with Bramson's logarithmic correction |
//! | [`instability`] | growth rate of a chemotactically unstable mode and the instability threshold |
//! | [`critical_mass`] | quasi-steady Keller–Segel: blow-up above 8π, bounded below 4π (scaled) |
//! | [`nutrient`] | the bundled four-species model against an independent ODE integration |
//! | [`blowup`] | the classical blow-up data: positivity, mass, sup-norm growing under refinement |
//!
//! Shared pieces: [`check`] (rows, criteria, the registry, fault injection to show checks can
//! fail), [`rates`] (observed orders), [`reference`] (special functions with their sources),
//! [`support`] (plates, kernels, measurements).

#![deny(missing_docs)]

pub mod blowup;
pub mod check;
pub mod critical_mass;
pub mod eigen;
pub mod error;
pub mod fronts;
pub mod instability;
pub mod mms;
pub mod nutrient;
pub mod rates;
pub mod reference;
pub mod support;

pub use check::{num, registry, select, Check, Context, Criterion, Faults, Level, Row};
pub use error::VerifyError;
