//! Initial-condition overrides of a run: a species' whole initial expression (`[initial]`,
//! `--initial NAME=EXPR`) and inoculation spots (`[[inoculum]]`, `--inoculum`), which
//! replace the model's own initial condition for that species. Each override remembers
//! where it was given, so a mistake in it is reported there and not in the model file.

use std::collections::BTreeMap;

use agarium_core::geometry::PlateSpec;
use agarium_core::mesh::{BoundaryIndex, Mesh, MeshOptions, Spot};
use agarium_scripting::{Model, SourcePos};
use serde::{Deserialize, Serialize};

use crate::error::RunError;
use crate::text::numbers;

/// How an inoculum's density falls off with distance from its centre.
#[derive(Clone, Copy, Debug, Default, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Profile {
    /// `level` inside `radius`, with a smooth edge a fifth of the radius wide (a drop of
    /// culture).
    #[default]
    Disc,
    /// A Gaussian of height `level` and standard deviation `radius`.
    Gaussian,
}

/// One inoculation spot.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Inoculum {
    /// The species placed there.
    pub species: String,
    /// Centre (plate coordinates).
    pub at: [f64; 2],
    /// Radius of the disc, or the Gaussian's standard deviation.
    pub radius: f64,
    /// Density at the centre.
    #[serde(default = "one")]
    pub level: f64,
    /// Shape of the spot.
    #[serde(default)]
    pub profile: Profile,
}

fn one() -> f64 {
    1.0
}

/// A number as a Rhai float literal that reads back to the same f64 (`{:e}` alone can
/// lack a decimal point, which Rhai would read as an integer).
fn literal(v: f64) -> String {
    format!("({:.17e})", v)
}

impl Inoculum {
    /// Parses `SPECIES@X,Y,RADIUS[,LEVEL[,disc|gaussian]]`.
    pub fn parse(text: &str) -> Result<Self, RunError> {
        let what = format!("--inoculum '{text}'");
        let form = "expected SPECIES@X,Y,RADIUS[,LEVEL[,disc|gaussian]]";
        let (species, rest) = text
            .split_once('@')
            .ok_or_else(|| RunError::input(format!("{what}: {form}")))?;
        let mut parts: Vec<&str> = rest.split(',').collect();
        let profile = match parts.last().map(|s| s.trim()) {
            Some("disc") => {
                parts.pop();
                Profile::Disc
            }
            Some("gaussian") => {
                parts.pop();
                Profile::Gaussian
            }
            _ => Profile::Disc,
        };
        let v = numbers(&what, &parts.join(","), ',').map_err(RunError::input)?;
        let (x, y, radius, level) = match v.as_slice() {
            [x, y, r] => (*x, *y, *r, 1.0),
            [x, y, r, l] => (*x, *y, *r, *l),
            _ => return Err(RunError::input(format!("{what}: {form}"))),
        };
        let i = Inoculum {
            species: species.trim().to_string(),
            at: [x, y],
            radius,
            level,
            profile,
        };
        i.check(&what)?;
        Ok(i)
    }

    /// Refuses a radius or level a density cannot have.
    pub fn check(&self, what: &str) -> Result<(), RunError> {
        if !(self.radius.is_finite() && self.radius > 0.0) {
            return Err(RunError::input(format!(
                "{what}: the radius must be a positive number, got {}",
                self.radius
            )));
        }
        if !self.level.is_finite() || !self.at.iter().all(|c| c.is_finite()) {
            return Err(RunError::input(format!(
                "{what}: the centre and level must be finite numbers"
            )));
        }
        Ok(())
    }

    /// The spot as a model expression in x and y.
    pub fn expression(&self) -> String {
        let [x0, y0] = self.at.map(literal);
        let (r, l) = (literal(self.radius), literal(self.level));
        match self.profile {
            Profile::Disc => format!(
                "{l} * soft_disc(x, y, {x0}, {y0}, {r}, {})",
                literal(self.radius / 5.0)
            ),
            Profile::Gaussian => format!("{l} * bump(x, y, {x0}, {y0}, {r})"),
        }
    }
}

/// An override as given: an expression, or spots, or both (the expression plus the spots).
#[derive(Clone, Debug, Default)]
pub struct SpeciesInitial {
    /// A whole expression and where it was given.
    pub expr: Option<(String, SourcePos)>,
    /// Spots and where each was given.
    pub spots: Vec<(Inoculum, SourcePos)>,
}

/// The overrides of a run, per species.
#[derive(Clone, Debug, Default)]
pub struct InitialOverrides {
    /// Per species name.
    pub species: BTreeMap<String, SpeciesInitial>,
}

impl InitialOverrides {
    /// The overrides of a run file, with those of the command line replacing the file's for
    /// every species the command line names.
    pub fn merge(file: InitialOverrides, cli: InitialOverrides) -> InitialOverrides {
        let mut out = file;
        for (name, given) in cli.species {
            out.species.insert(name, given);
        }
        out
    }

    /// `--initial NAME=EXPR` and `--inoculum …` options.
    pub fn from_cli(initial: &[String], inocula: &[String]) -> Result<Self, RunError> {
        let mut out = InitialOverrides::default();
        for text in initial {
            let (name, expr) = text.split_once('=').ok_or_else(|| {
                RunError::input(format!("--initial '{text}': expected NAME=EXPRESSION"))
            })?;
            let at = SourcePos {
                file: format!("--initial {}", name.trim()),
                line: 0,
                column: 0,
            };
            out.entry(name.trim()).expr = Some((expr.trim().to_string(), at));
        }
        for text in inocula {
            let i = Inoculum::parse(text)?;
            let at = SourcePos {
                file: format!("--inoculum '{text}'"),
                line: 0,
                column: 0,
            };
            out.entry(&i.species.clone()).spots.push((i, at));
        }
        Ok(out)
    }

    /// The final expressions a run recorded in its manifest (`file`), for a resume.
    pub fn recorded(expressions: &BTreeMap<String, String>, file: &str) -> Self {
        let mut out = InitialOverrides::default();
        for (name, expr) in expressions {
            let at = SourcePos {
                file: format!("{file} (initial.{name})"),
                line: 0,
                column: 0,
            };
            out.entry(name).expr = Some((expr.clone(), at));
        }
        out
    }

    fn entry(&mut self, name: &str) -> &mut SpeciesInitial {
        self.species.entry(name.to_string()).or_default()
    }

    /// The final expression of every overridden species, with where it was given (the
    /// expression's position, else the first spot's).
    pub fn expressions(&self) -> BTreeMap<String, (String, SourcePos)> {
        let mut out = BTreeMap::new();
        for (name, given) in &self.species {
            let mut terms: Vec<String> = Vec::new();
            let mut at = None;
            if let Some((e, p)) = &given.expr {
                terms.push(format!("({e})"));
                at = Some(p.clone());
            }
            for (i, p) in &given.spots {
                terms.push(i.expression());
                at.get_or_insert_with(|| p.clone());
            }
            if let Some(at) = at {
                out.insert(name.clone(), (terms.join(" + "), at));
            }
        }
        out
    }

    /// Applies the overrides to `model` before it is compiled.
    pub fn apply(&self, model: &mut Model) -> Result<(), RunError> {
        for (name, (expr, at)) in self.expressions() {
            model
                .set_initial(&name, &expr, at)
                .map_err(RunError::input)?;
        }
        Ok(())
    }

    /// All spots, for mesh refinement and the coverage check.
    pub fn spots(&self) -> impl Iterator<Item = &(Inoculum, SourcePos)> {
        self.species.values().flat_map(|s| s.spots.iter())
    }

    /// Refuses an inoculum centred outside the plate, and adds a refinement spot (edge
    /// length a fifth of the radius) at every inoculum that no refinement spot of the
    /// user's already covers, so the spot's profile is resolved.
    pub fn refine(&self, spec: &PlateSpec, options: &mut MeshOptions) -> Result<(), RunError> {
        if self.spots().next().is_none() {
            return Ok(());
        }
        let plate = spec
            .discretise(&|_| options.size, options.max_nodes)
            .map_err(RunError::input)?;
        let inside = BoundaryIndex::new(plate.loops());
        for (i, at) in self.spots() {
            if !inside.contains(i.at) {
                return Err(RunError::input(format!(
                    "{at}: the inoculum of `{}` at ({}, {}) lies outside the plate",
                    i.species, i.at[0], i.at[1]
                )));
            }
        }
        for (i, _) in self.spots() {
            let covered = options.spots.iter().any(|s| {
                let d = ((s.centre[0] - i.at[0]).powi(2) + (s.centre[1] - i.at[1]).powi(2)).sqrt();
                d <= i.radius && s.size <= i.radius / 2.0
            });
            if !covered {
                options.spots.push(Spot {
                    centre: i.at,
                    size: (i.radius / 5.0).min(options.size),
                });
            }
        }
        Ok(())
    }

    /// Refuses a spot with no mesh node within its radius (far smaller than the mesh, or
    /// hanging over the rim), which would silently place nothing.
    pub fn check_coverage(&self, mesh: &Mesh) -> Result<(), RunError> {
        for (i, at) in self.spots() {
            let r2 = i.radius * i.radius;
            let covered = (0..mesh.num_nodes()).any(|k| {
                let p = mesh.node(k);
                (p[0] - i.at[0]).powi(2) + (p[1] - i.at[1]).powi(2) <= r2
            });
            if !covered {
                return Err(RunError::input(format!(
                    "{at}: the inoculum of `{}` at ({}, {}) with radius {} covers no mesh node: refine the mesh there or enlarge the spot",
                    i.species, i.at[0], i.at[1], i.radius
                )));
            }
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn inoculum_options_parse() {
        let i = Inoculum::parse("u@-10,0.5,1.5").unwrap();
        assert_eq!(i.at, [-10.0, 0.5]);
        assert_eq!((i.radius, i.level, i.profile), (1.5, 1.0, Profile::Disc));
        let g = Inoculum::parse("u@1,2,0.5,0.8,gaussian").unwrap();
        assert_eq!((g.level, g.profile), (0.8, Profile::Gaussian));
        for bad in [
            "u",
            "u@1,2",
            "u@1,2,0",
            "u@1,2,-1",
            "u@a,2,1",
            "u@1,2,3,4,5",
        ] {
            assert!(Inoculum::parse(bad).is_err(), "{bad}");
        }
    }

    #[test]
    fn literals_read_back_exactly() {
        for v in [1.0, -10.0, 0.1, 1e-300, 123456789.125] {
            let s = literal(v);
            let back: f64 = s.trim_matches(|c| c == '(' || c == ')').parse().unwrap();
            assert_eq!(back, v);
            assert!(s.contains('.'), "{s}");
        }
    }

    #[test]
    fn the_command_line_replaces_the_files_override_of_a_species() {
        let file = InitialOverrides::from_cli(&["u=1".into(), "n=2".into()], &[]).unwrap();
        let cli = InitialOverrides::from_cli(&[], &["u@0,0,1".into()]).unwrap();
        let e = InitialOverrides::merge(file, cli).expressions();
        assert_eq!(e["n"].0, "(2)");
        assert!(e["u"].0.contains("soft_disc"), "{}", e["u"].0);
    }
}
