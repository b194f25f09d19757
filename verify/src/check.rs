//! What a check is, what one row of the verification table holds, and the registry of all
//! checks.

use std::sync::Arc;

use agarium_core::kernel::{BatchKernel, KernelError, KernelInput, Scratch, SpeciesKind};
use agarium_core::problem::Problem;
use serde::Serialize;

use crate::error::VerifyError;

/// How thoroughly to verify.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Level {
    /// Coarse-but-asymptotic meshes: the set CI and `agarium verify` run.
    Fast,
    /// Finer meshes and longer windows (`agarium verify --full`).
    Full,
}

/// Deliberate defects injected into every problem a check hands to the solver (never into
/// the expected values), so tests can show that a check fails when the discretisation is
/// wrong. All factors are 1 for a real verification.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Faults {
    /// Multiplies every diffusion coefficient the solver sees.
    pub diffusion: f64,
    /// Multiplies every chemotactic potential the solver sees.
    pub chemotaxis: f64,
    /// Multiplies every reaction term (and manufactured source) the solver sees.
    pub reaction: f64,
}

impl Default for Faults {
    fn default() -> Self {
        Faults {
            diffusion: 1.0,
            chemotaxis: 1.0,
            reaction: 1.0,
        }
    }
}

impl Faults {
    fn is_clean(&self) -> bool {
        *self == Faults::default()
    }
}

/// What a check runs with.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Context {
    /// Fast or full.
    pub level: Level,
    /// Injected defects (none by default).
    pub faults: Faults,
}

impl Context {
    /// The fast set, no faults.
    pub fn fast() -> Self {
        Context {
            level: Level::Fast,
            faults: Faults::default(),
        }
    }

    /// The full set, no faults.
    pub fn full() -> Self {
        Context {
            level: Level::Full,
            faults: Faults::default(),
        }
    }

    /// `fast` or `full` by level.
    pub fn pick<T>(&self, fast: T, full: T) -> T {
        match self.level {
            Level::Fast => fast,
            Level::Full => full,
        }
    }

    /// The problem the solver is given: `problem` with the injected faults applied.
    pub fn solver_problem(&self, mut problem: Problem) -> Problem {
        let f = self.faults;
        if f.is_clean() {
            return problem;
        }
        for s in &mut problem.species {
            s.kind = match s.kind {
                SpeciesKind::Mobile { diffusion } => SpeciesKind::Mobile {
                    diffusion: diffusion * f.diffusion,
                },
                SpeciesKind::QuasiSteady { diffusion } => SpeciesKind::QuasiSteady {
                    diffusion: diffusion * f.diffusion,
                },
                SpeciesKind::Immobile => SpeciesKind::Immobile,
            };
        }
        if f.reaction != 1.0 {
            problem.reactions = Arc::new(Scaled {
                inner: problem.reactions.clone(),
                factor: f.reaction,
            });
        }
        if f.chemotaxis != 1.0 {
            for c in &mut problem.chemotaxis {
                c.sensitivity = Arc::new(Scaled {
                    inner: c.sensitivity.clone(),
                    factor: f.chemotaxis,
                });
            }
        }
        problem
    }
}

/// A kernel whose outputs (and derivatives) are those of another times a factor.
struct Scaled {
    inner: Arc<dyn BatchKernel>,
    factor: f64,
}

impl BatchKernel for Scaled {
    fn n_inputs(&self) -> usize {
        self.inner.n_inputs()
    }

    fn n_outputs(&self) -> usize {
        self.inner.n_outputs()
    }

    fn depends_on(&self, output: usize, species: usize) -> bool {
        self.inner.depends_on(output, species)
    }

    fn eval(
        &self,
        input: &KernelInput<'_>,
        out: &mut [f64],
        scratch: &mut Scratch,
    ) -> Result<(), KernelError> {
        self.inner.eval(input, out, scratch)?;
        out.iter_mut().for_each(|v| *v *= self.factor);
        Ok(())
    }

    fn eval_with_jacobian(
        &self,
        input: &KernelInput<'_>,
        out: &mut [f64],
        jac: &mut [f64],
        scratch: &mut Scratch,
    ) -> Result<(), KernelError> {
        self.inner.eval_with_jacobian(input, out, jac, scratch)?;
        out.iter_mut().for_each(|v| *v *= self.factor);
        jac.iter_mut().for_each(|v| *v *= self.factor);
        Ok(())
    }
}

/// How an obtained value is judged.
#[derive(Clone, Debug, PartialEq)]
pub enum Criterion {
    /// |obtained − expected| ≤ tol.
    Abs {
        /// Expected value.
        expected: f64,
        /// Absolute tolerance.
        tol: f64,
    },
    /// |obtained − expected| ≤ tol·|expected|.
    Rel {
        /// Expected value.
        expected: f64,
        /// Relative tolerance.
        tol: f64,
    },
    /// obtained ≥ bound.
    AtLeast(f64),
    /// obtained ≤ bound.
    AtMost(f64),
}

impl Criterion {
    /// Whether `obtained` meets the criterion (never for NaN).
    pub fn holds(&self, obtained: f64) -> bool {
        match *self {
            Criterion::Abs { expected, tol } => (obtained - expected).abs() <= tol,
            Criterion::Rel { expected, tol } => (obtained - expected).abs() <= tol * expected.abs(),
            Criterion::AtLeast(b) => obtained >= b,
            Criterion::AtMost(b) => obtained <= b,
        }
    }

    fn expected_text(&self) -> String {
        match *self {
            Criterion::Abs { expected, .. } | Criterion::Rel { expected, .. } => num(expected),
            Criterion::AtLeast(b) => format!(">= {}", num(b)),
            Criterion::AtMost(b) => format!("<= {}", num(b)),
        }
    }

    fn tolerance_text(&self) -> String {
        match *self {
            Criterion::Abs { tol, .. } => format!("± {}", num(tol)),
            Criterion::Rel { tol, .. } => format!("± {} rel", num(tol)),
            Criterion::AtLeast(_) | Criterion::AtMost(_) => "bound".into(),
        }
    }

    fn expected_value(&self) -> f64 {
        match *self {
            Criterion::Abs { expected, .. } | Criterion::Rel { expected, .. } => expected,
            Criterion::AtLeast(b) | Criterion::AtMost(b) => b,
        }
    }
}

/// A number for the table: 7 significant digits, scientific outside [1e-3, 1e5).
pub fn num(x: f64) -> String {
    let a = x.abs();
    if x == 0.0 || (1e-3..1e5).contains(&a) {
        let digits = if x == 0.0 {
            0
        } else {
            (6 - a.log10().floor() as i32).max(0) as usize
        };
        let s = format!("{x:.digits$}");
        if s.contains('.') {
            s.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            s
        }
    } else {
        format!("{x:.6e}")
    }
}

/// One line of the verification table.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Row {
    /// What was checked (family, case, mesh).
    pub check: String,
    /// Short form of the published source (author year, table), or "common practice".
    pub source: String,
    /// Expected value or bound, as printed.
    pub expected: String,
    /// Obtained value, as printed.
    pub obtained: String,
    /// Tolerance, as printed.
    pub tolerance: String,
    /// Whether the row passes.
    pub pass: bool,
    /// Expected value or bound as a number (none for qualitative rows).
    pub expected_value: Option<f64>,
    /// Obtained value as a number (none for qualitative rows).
    pub obtained_value: Option<f64>,
}

impl Row {
    /// A numeric row judged by `criterion`.
    pub fn value(
        check: impl Into<String>,
        source: &str,
        criterion: Criterion,
        obtained: f64,
    ) -> Row {
        Row {
            check: check.into(),
            source: source.into(),
            expected: criterion.expected_text(),
            obtained: num(obtained),
            tolerance: criterion.tolerance_text(),
            pass: criterion.holds(obtained),
            expected_value: Some(criterion.expected_value()),
            obtained_value: Some(obtained),
        }
    }

    /// A qualitative row: something expected to happen (or not), and what did.
    pub fn event(
        check: impl Into<String>,
        source: &str,
        expected: &str,
        obtained: impl Into<String>,
        pass: bool,
    ) -> Row {
        Row {
            check: check.into(),
            source: source.into(),
            expected: expected.into(),
            obtained: obtained.into(),
            tolerance: "-".into(),
            pass,
            expected_value: None,
            obtained_value: None,
        }
    }

    /// The failing row standing for a check that could not run.
    pub fn error(check: &str, source: &str, err: &VerifyError) -> Row {
        Row::event(check, source, "runs", format!("error: {err}"), false)
    }
}

/// One registered check: a family of rows sharing a source and a set-up.
#[derive(Clone, Copy)]
pub struct Check {
    /// Identifier (what `--only` matches), e.g. `eigen-disk`.
    pub name: &'static str,
    /// One line on what it verifies.
    pub about: &'static str,
    /// Full citation of the published source(s), or "common practice".
    pub source: &'static str,
    /// Produces the rows.
    pub run: fn(&Context) -> Result<Vec<Row>, VerifyError>,
}

impl std::fmt::Debug for Check {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Check").field("name", &self.name).finish()
    }
}

impl Check {
    /// Runs the check; an error becomes a single failing row, so a broken check can never
    /// pass silently.
    pub fn rows(&self, ctx: &Context) -> Vec<Row> {
        match (self.run)(ctx) {
            Ok(rows) if rows.is_empty() => vec![Row::event(
                self.name,
                self.source,
                "rows",
                "the check produced no rows",
                false,
            )],
            Ok(rows) => rows,
            Err(e) => vec![Row::error(self.name, self.source, &e)],
        }
    }
}

/// Every check, in the order of the table.
pub fn registry() -> Vec<Check> {
    vec![
        crate::mms::SPACE_SQUARE,
        crate::mms::SPACE_DISK,
        crate::mms::TIME,
        crate::eigen::DISK,
        crate::eigen::RECTANGLE,
        crate::fronts::FISHER_KPP,
        crate::instability::CHECK,
        crate::critical_mass::CHECK,
        crate::nutrient::CHECK,
        crate::blowup::CHECK,
    ]
}

/// The checks whose name contains `filter` (all when `None`).
pub fn select(filter: Option<&str>) -> Vec<Check> {
    registry()
        .into_iter()
        .filter(|c| filter.is_none_or(|f| c.name.contains(f)))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn criteria_reject_wrong_values_and_nan() {
        let c = Criterion::Rel {
            expected: 2.0,
            tol: 0.01,
        };
        assert!(c.holds(2.01));
        assert!(!c.holds(2.03));
        assert!(!c.holds(f64::NAN));
        let a = Criterion::Abs {
            expected: 1.0,
            tol: 0.1,
        };
        assert!(a.holds(0.95) && !a.holds(1.2) && !a.holds(f64::NAN));
        assert!(Criterion::AtLeast(1.0).holds(1.0) && !Criterion::AtLeast(1.0).holds(0.9));
        assert!(Criterion::AtMost(1.0).holds(0.5) && !Criterion::AtMost(1.0).holds(f64::NAN));
    }

    #[test]
    fn a_wrong_expected_value_makes_the_row_fail() {
        let good = Row::value(
            "x",
            "s",
            Criterion::Rel {
                expected: 3.3899,
                tol: 1e-3,
            },
            3.3901,
        );
        assert!(good.pass);
        let bad = Row::value(
            "x",
            "s",
            Criterion::Rel {
                expected: 3.5,
                tol: 1e-3,
            },
            3.3901,
        );
        assert!(!bad.pass);
        assert_eq!(bad.expected, "3.5");
        assert_eq!(bad.tolerance, "± 0.001 rel");
    }

    #[test]
    fn numbers_print_with_seven_significant_digits() {
        assert_eq!(num(3.389_916_71), "3.389917");
        assert_eq!(num(2.0), "2");
        assert_eq!(num(1.5e-7), "1.500000e-7");
        assert_eq!(num(0.0), "0");
        assert_eq!(num(31.415_926_5), "31.41593");
    }

    #[test]
    fn names_are_unique_and_every_filter_matches_its_own_check() {
        let all = registry();
        for c in &all {
            assert_eq!(select(Some(c.name)).len(), 1, "{}", c.name);
            assert!(!c.source.is_empty());
        }
        assert!(select(Some("no-such-check")).is_empty());
    }
}
