//! Sweep axes: what a point changes in the base run, and the values it takes.
//!
//! A name without a dot is a model parameter (`[set]`). Dotted names are run settings:
//! `run.end`, `mesh.size`, `plate.radius` (circle, or the annulus' outer radius),
//! `plate.inner`, `plate.width`, `plate.height`, `plate.semi_x`, `plate.semi_y`, and
//! `inoculum.K.level`, `.radius`, `.x`, `.y` for the K-th inoculation spot (1-based, counted
//! species by species in alphabetical order, each species' spots in the order given).

use agarium_core::geometry::Shape;
use serde::{Deserialize, Serialize};

use crate::error::RunError;
use crate::spec::RunSpec;
use crate::text::numbers;

/// How an axis' values are spaced (and, for sampling, drawn).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Scale {
    /// Evenly spaced.
    #[default]
    Linear,
    /// Evenly spaced logarithms (all values positive).
    Log,
}

/// One axis: a named setting and its values in order.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Axis {
    /// Parameter or dotted setting name.
    pub name: String,
    /// The values, in order.
    pub values: Vec<f64>,
    /// Spacing (used when points are sampled between the smallest and largest value).
    #[serde(default)]
    pub scale: Scale,
}

/// An axis as a run file's `[[sweep.axis]]` gives it: explicit values, or a range with a
/// count.
#[derive(Clone, Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct AxisSection {
    /// Parameter or dotted setting name.
    pub name: String,
    /// Explicit values.
    pub values: Option<Vec<f64>>,
    /// First and last value of a range.
    pub range: Option<[f64; 2]>,
    /// Values in the range (both ends included).
    pub count: Option<usize>,
    /// Spacing of the range.
    #[serde(default)]
    pub scale: Scale,
}

fn range(what: &str, lo: f64, hi: f64, count: usize, scale: Scale) -> Result<Vec<f64>, RunError> {
    if !(lo.is_finite() && hi.is_finite()) {
        return Err(RunError::input(format!(
            "{what}: the range ends must be finite numbers"
        )));
    }
    if count == 0 {
        return Err(RunError::input(format!(
            "{what}: the range is empty (count 0)"
        )));
    }
    if scale == Scale::Log && !(lo > 0.0 && hi > 0.0) {
        return Err(RunError::input(format!(
            "{what}: a log range needs positive ends, got {lo} and {hi}"
        )));
    }
    if count == 1 {
        return Ok(vec![lo]);
    }
    let step = |k: usize| k as f64 / (count - 1) as f64;
    Ok((0..count)
        .map(|k| {
            if k == count - 1 {
                hi
            } else {
                match scale {
                    Scale::Linear => lo + (hi - lo) * step(k),
                    Scale::Log => (lo.ln() + (hi.ln() - lo.ln()) * step(k)).exp(),
                }
            }
        })
        .collect())
}

impl Axis {
    /// Parses `NAME=V1,V2,…`, `NAME=lin:FIRST:LAST:COUNT` or `NAME=log:FIRST:LAST:COUNT`.
    pub fn parse(text: &str) -> Result<Self, RunError> {
        let what = format!("--axis '{text}'");
        let (name, spec) = text.split_once('=').ok_or_else(|| {
            RunError::input(format!(
                "{what}: expected NAME=V1,V2,… or NAME=lin:FIRST:LAST:COUNT or NAME=log:FIRST:LAST:COUNT"
            ))
        })?;
        let name = name.trim();
        let spec = spec.trim();
        let (values, scale) = if let Some(rest) = spec
            .strip_prefix("lin:")
            .map(|r| (r, Scale::Linear))
            .or_else(|| spec.strip_prefix("log:").map(|r| (r, Scale::Log)))
        {
            let (body, scale) = rest;
            let parts: Vec<&str> = body.split(':').collect();
            if parts.len() != 3 {
                return Err(RunError::input(format!(
                    "{what}: a range is FIRST:LAST:COUNT, got '{body}'"
                )));
            }
            let ends = numbers(&what, &format!("{},{}", parts[0], parts[1]), ',')
                .map_err(RunError::input)?;
            let count: usize = parts[2].trim().parse().map_err(|_| {
                RunError::input(format!(
                    "{what}: the count '{}' is not a whole number",
                    parts[2]
                ))
            })?;
            (range(&what, ends[0], ends[1], count, scale)?, scale)
        } else {
            if spec.is_empty() {
                return Err(RunError::input(format!("{what}: no values")));
            }
            (
                numbers(&what, spec, ',').map_err(RunError::input)?,
                Scale::Linear,
            )
        };
        Self::new(&what, name, values, scale)
    }

    /// An axis from a run file's section; `what` names it in messages.
    pub fn from_section(what: &str, s: &AxisSection) -> Result<Self, RunError> {
        let what = format!("{what} (axis '{}')", s.name);
        let values = match (&s.values, s.range, s.count) {
            (Some(v), None, None) => v.clone(),
            (None, Some([lo, hi]), Some(count)) => range(&what, lo, hi, count, s.scale)?,
            _ => {
                return Err(RunError::input(format!(
                    "{what}: give either `values = [...]` or `range = [first, last]` with `count`"
                )))
            }
        };
        Self::new(&what, &s.name, values, s.scale)
    }

    fn new(what: &str, name: &str, values: Vec<f64>, scale: Scale) -> Result<Self, RunError> {
        let axis = Self {
            name: name.to_string(),
            values,
            scale,
        };
        if axis.values.is_empty() {
            return Err(RunError::input(format!("{what}: no values")));
        }
        if let Some(v) = axis.values.iter().find(|v| !v.is_finite()) {
            return Err(RunError::input(format!(
                "{what}: {v} is not a finite number"
            )));
        }
        Target::of(&axis.name).map_err(|e| RunError::input(format!("{what}: {e}")))?;
        Ok(axis)
    }

    /// Sets this axis' setting to `value` in `spec`.
    pub fn apply(&self, spec: &mut RunSpec, value: f64) -> Result<(), RunError> {
        let target = Target::of(&self.name).map_err(RunError::input)?;
        target.apply(&self.name, spec, value)
    }
}

/// What an axis name refers to.
#[derive(Clone, Debug, PartialEq)]
enum Target {
    Parameter,
    End,
    MeshSize,
    Plate(&'static str),
    Inoculum(usize, &'static str),
}

const PLATE_KEYS: [&str; 6] = ["radius", "inner", "width", "height", "semi_x", "semi_y"];
const SPOT_KEYS: [&str; 4] = ["level", "radius", "x", "y"];

impl Target {
    fn of(name: &str) -> Result<Self, String> {
        if name.is_empty() {
            return Err("the axis has no name".into());
        }
        if !name.contains('.') {
            return Ok(Target::Parameter);
        }
        let parts: Vec<&str> = name.split('.').collect();
        match parts.as_slice() {
            ["run", "end"] => Ok(Target::End),
            ["mesh", "size"] => Ok(Target::MeshSize),
            ["plate", key] => PLATE_KEYS
                .iter()
                .find(|k| *k == key)
                .map(|k| Target::Plate(k))
                .ok_or_else(|| {
                    format!("unknown plate setting '{key}' (axes can vary plate.{})", PLATE_KEYS.join(", plate."))
                }),
            ["inoculum", k, key] => {
                let k: usize = k
                    .parse()
                    .ok()
                    .filter(|&k| k >= 1)
                    .ok_or_else(|| format!("'{name}': the spot number must be 1, 2, …"))?;
                SPOT_KEYS
                    .iter()
                    .find(|s| *s == key)
                    .map(|s| Target::Inoculum(k, s))
                    .ok_or_else(|| {
                        format!("unknown inoculum setting '{key}' (one of {})", SPOT_KEYS.join(", "))
                    })
            }
            _ => Err(format!(
                "unknown setting '{name}': axes vary a model parameter (no dot), run.end, mesh.size, plate.KEY or inoculum.K.KEY"
            )),
        }
    }

    fn apply(&self, name: &str, spec: &mut RunSpec, value: f64) -> Result<(), RunError> {
        match self {
            Target::Parameter => {
                spec.set
                    .retain(|t| t.split_once('=').map(|(n, _)| n.trim()) != Some(name));
                spec.set.push(format!("{name}={value:e}"));
            }
            Target::End => {
                // Keep the number of output intervals of the base run.
                let intervals = (spec.end / spec.every).round().max(1.0);
                spec.end = value;
                spec.every = value / intervals;
            }
            Target::MeshSize => spec.mesh.size = value,
            Target::Plate(key) => {
                let ok = match (&mut spec.plate.outer, *key) {
                    (Shape::Circle { radius, .. }, "radius") => {
                        *radius = value;
                        true
                    }
                    (Shape::Annulus { outer, .. }, "radius") => {
                        *outer = value;
                        true
                    }
                    (Shape::Annulus { inner, .. }, "inner") => {
                        *inner = value;
                        true
                    }
                    (Shape::Rectangle { width, .. }, "width") => {
                        *width = value;
                        true
                    }
                    (Shape::Rectangle { height, .. }, "height") => {
                        *height = value;
                        true
                    }
                    (Shape::Ellipse { semi_x, .. }, "semi_x") => {
                        *semi_x = value;
                        true
                    }
                    (Shape::Ellipse { semi_y, .. }, "semi_y") => {
                        *semi_y = value;
                        true
                    }
                    _ => false,
                };
                if !ok {
                    return Err(RunError::input(format!(
                        "axis '{name}': the plate's outline is a {}, which has no {key}",
                        spec.plate.outer.kind()
                    )));
                }
            }
            Target::Inoculum(k, key) => {
                let spot = spec
                    .initial
                    .species
                    .values_mut()
                    .flat_map(|s| s.spots.iter_mut())
                    .nth(k - 1)
                    .ok_or_else(|| {
                        RunError::input(format!(
                            "axis '{name}': the run has no inoculation spot number {k}"
                        ))
                    })?;
                let i = &mut spot.0;
                match *key {
                    "level" => i.level = value,
                    "radius" => i.radius = value,
                    "x" => i.at[0] = value,
                    _ => i.at[1] = value,
                }
                i.check(&format!("axis '{name}' = {value}"))?;
            }
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lists_and_ranges_parse() {
        let a = Axis::parse("chi=1, 2,5").unwrap();
        assert_eq!(a.values, vec![1.0, 2.0, 5.0]);
        let a = Axis::parse("D=lin:0:1:5").unwrap();
        assert_eq!(a.values, vec![0.0, 0.25, 0.5, 0.75, 1.0]);
        let a = Axis::parse("D=log:1e-2:1:3").unwrap();
        assert_eq!(a.scale, Scale::Log);
        assert!((a.values[1] - 0.1).abs() < 1e-15 && a.values[2] == 1.0);
        assert_eq!(Axis::parse("mesh.size=0.5").unwrap().values, vec![0.5]);
    }

    #[test]
    fn bad_axes_say_what_is_wrong() {
        for (text, says) in [
            ("chi", "expected NAME="),
            ("chi=", "no values"),
            ("chi=1,x", "'x' is not a number"),
            ("chi=lin:0:1:0", "empty"),
            ("chi=log:0:1:3", "positive ends"),
            ("chi=lin:0:1", "FIRST:LAST:COUNT"),
            ("plate.depth=1", "unknown plate setting"),
            ("inoculum.0.level=1", "spot number"),
            ("solver.rtol=1", "unknown setting"),
        ] {
            let e = Axis::parse(text).unwrap_err();
            assert!(e.message.contains(says), "{text}: {}", e.message);
        }
    }
}
