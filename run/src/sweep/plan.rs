//! Which points a sweep runs: the grid product of its axes, the axes paired point by point,
//! or random / Latin-hypercube samples between each axis' smallest and largest value; and the
//! deterministic shards of those points.

use serde::{Deserialize, Serialize};

use super::axis::{Axis, Scale};
use crate::error::RunError;

/// How the axes combine into points.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Combine {
    /// Every combination (the first axis varies slowest).
    #[default]
    Grid,
    /// The k-th value of every axis together (all axes equally long).
    Zip,
}

/// How sampled points are drawn.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum SampleMethod {
    /// Independent uniform draws per axis (log-uniform on log axes).
    Random,
    /// Latin hypercube: each axis' range cut into `count` equal strata, each stratum used
    /// once, strata paired across axes at random (McKay, Beckman & Conover, Technometrics 21,
    /// 1979; recalled from memory).
    Lhs,
}

/// Sampled points instead of the grid or zip.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Sample {
    /// Random or Latin hypercube.
    pub method: SampleMethod,
    /// Points drawn.
    pub count: usize,
    /// Seed of the generator (the same seed gives the same points on every machine).
    #[serde(default = "default_seed")]
    pub seed: u64,
}

fn default_seed() -> u64 {
    1
}

/// The axes and how they make points.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Plan {
    /// The axes, in order (the columns of the summary).
    pub axes: Vec<Axis>,
    /// Grid or zip.
    pub combine: Combine,
    /// Sampling instead of `combine`, if given.
    pub sample: Option<Sample>,
}

/// One point of a sweep: its number (from 0, in plan order) and a value per axis.
#[derive(Clone, Debug, PartialEq)]
pub struct Point {
    /// Number in the plan.
    pub index: usize,
    /// One value per axis.
    pub values: Vec<f64>,
}

/// SplitMix64 (Steele, Lea & Flood, "Fast splittable pseudorandom number generators", OOPSLA
/// 2014; recalled from memory). Hand-written on purpose: its output is fixed by its few lines,
/// so a seed names the same points on every machine and with every dependency version.
struct SplitMix(u64);

impl SplitMix {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// Uniform in [0, 1) with 53 random bits.
    fn unit(&mut self) -> f64 {
        (self.next() >> 11) as f64 / (1u64 << 53) as f64
    }

    /// Uniform in 0..n.
    fn below(&mut self, n: usize) -> usize {
        (self.unit() * n as f64) as usize % n.max(1)
    }
}

/// The value at fraction `f` ∈ [0, 1] of the axis' span.
fn at_fraction(axis: &Axis, f: f64) -> f64 {
    let lo = axis.values.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = axis
        .values
        .iter()
        .copied()
        .fold(f64::NEG_INFINITY, f64::max);
    match axis.scale {
        Scale::Linear => lo + (hi - lo) * f,
        Scale::Log => (lo.ln() + (hi.ln() - lo.ln()) * f).exp(),
    }
}

impl Plan {
    /// Checks the plan: at least one axis, unique names, equal lengths for zip, a positive
    /// sample count, positive values on sampled log axes.
    pub fn check(&self) -> Result<(), RunError> {
        if self.axes.is_empty() {
            return Err(RunError::input(
                "a sweep needs at least one axis (--axis NAME=VALUES, or [[sweep.axis]] in the run file)",
            ));
        }
        for (k, a) in self.axes.iter().enumerate() {
            if self.axes[..k].iter().any(|b| b.name == a.name) {
                return Err(RunError::input(format!("axis '{}' is given twice", a.name)));
            }
        }
        if let Some(s) = &self.sample {
            if s.count == 0 {
                return Err(RunError::input("the sample count must be at least 1"));
            }
            for a in &self.axes {
                if a.scale == Scale::Log && a.values.iter().any(|v| *v <= 0.0) {
                    return Err(RunError::input(format!(
                        "axis '{}': a log axis needs positive values",
                        a.name
                    )));
                }
            }
        } else if self.combine == Combine::Zip {
            let n = self.axes[0].values.len();
            if let Some(a) = self.axes.iter().find(|a| a.values.len() != n) {
                return Err(RunError::input(format!(
                    "zipped axes must be equally long: '{}' has {n} values, '{}' {}",
                    self.axes[0].name,
                    a.name,
                    a.values.len()
                )));
            }
        }
        Ok(())
    }

    /// Every point, in plan order.
    pub fn points(&self) -> Vec<Point> {
        let d = self.axes.len();
        let rows: Vec<Vec<f64>> = match (&self.sample, self.combine) {
            (Some(s), _) => {
                let mut rng = SplitMix(s.seed);
                let n = s.count;
                match s.method {
                    SampleMethod::Random => (0..n)
                        .map(|_| {
                            self.axes
                                .iter()
                                .map(|a| at_fraction(a, rng.unit()))
                                .collect()
                        })
                        .collect(),
                    SampleMethod::Lhs => {
                        // One shuffled stratum order per axis (Fisher–Yates), a uniform
                        // position within each stratum.
                        let strata: Vec<Vec<usize>> = (0..d)
                            .map(|_| {
                                let mut p: Vec<usize> = (0..n).collect();
                                for i in (1..n).rev() {
                                    p.swap(i, rng.below(i + 1));
                                }
                                p
                            })
                            .collect();
                        (0..n)
                            .map(|i| {
                                self.axes
                                    .iter()
                                    .zip(&strata)
                                    .map(|(a, p)| {
                                        at_fraction(a, (p[i] as f64 + rng.unit()) / n as f64)
                                    })
                                    .collect()
                            })
                            .collect()
                    }
                }
            }
            (None, Combine::Zip) => (0..self.axes[0].values.len())
                .map(|k| self.axes.iter().map(|a| a.values[k]).collect())
                .collect(),
            (None, Combine::Grid) => {
                let mut rows: Vec<Vec<f64>> = vec![Vec::new()];
                for a in &self.axes {
                    rows = rows
                        .into_iter()
                        .flat_map(|r| {
                            a.values.iter().map(move |&v| {
                                let mut r = r.clone();
                                r.push(v);
                                r
                            })
                        })
                        .collect();
                }
                rows
            }
        };
        rows.into_iter()
            .enumerate()
            .map(|(index, values)| Point { index, values })
            .collect()
    }
}

/// The K-th of N disjoint, deterministic slices of a sweep (K from 1): points whose number
/// is K − 1 modulo N, so every shard gets a share of every region of the plan.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Shard {
    /// This slice, 1 ..= count.
    pub index: usize,
    /// Slices in all.
    pub count: usize,
}

impl Shard {
    /// The whole sweep.
    pub const ALL: Shard = Shard { index: 1, count: 1 };

    /// Parses `K/N`.
    pub fn parse(text: &str) -> Result<Self, RunError> {
        let bad = || {
            RunError::input(format!(
                "--shard '{text}': expected K/N with 1 ≤ K ≤ N, e.g. 2/8"
            ))
        };
        let (k, n) = text.split_once('/').ok_or_else(bad)?;
        let (k, n): (usize, usize) = (
            k.trim().parse().map_err(|_| bad())?,
            n.trim().parse().map_err(|_| bad())?,
        );
        Self::new(k, n).map_err(|_| bad())
    }

    /// Shard `index` of `count`.
    pub fn new(index: usize, count: usize) -> Result<Self, RunError> {
        if count == 0 || index == 0 || index > count {
            return Err(RunError::input(format!(
                "shard {index} of {count}: the shard number must lie between 1 and the count"
            )));
        }
        Ok(Self { index, count })
    }

    /// The shard of a Slurm job-array task, from the environment variables Slurm sets
    /// (`SLURM_ARRAY_TASK_ID` with `SLURM_ARRAY_TASK_COUNT`, or with `SLURM_ARRAY_TASK_MIN`
    /// and `SLURM_ARRAY_TASK_MAX`); `None` outside a job array. `get` reads a variable.
    pub fn from_slurm(get: impl Fn(&str) -> Option<String>) -> Result<Option<Self>, RunError> {
        let num =
            |name: &str| -> Result<Option<usize>, RunError> {
                match get(name) {
                    None => Ok(None),
                    Some(v) => v.trim().parse().map(Some).map_err(|_| {
                        RunError::input(format!("{name}='{v}' is not a whole number"))
                    }),
                }
            };
        let Some(id) = num("SLURM_ARRAY_TASK_ID")? else {
            return Ok(None);
        };
        let min = num("SLURM_ARRAY_TASK_MIN")?.unwrap_or(0);
        let count = match (num("SLURM_ARRAY_TASK_COUNT")?, num("SLURM_ARRAY_TASK_MAX")?) {
            (Some(c), _) => c,
            (None, Some(max)) if max >= min => max - min + 1,
            _ => {
                return Err(RunError::input(
                    "SLURM_ARRAY_TASK_ID is set but neither SLURM_ARRAY_TASK_COUNT nor SLURM_ARRAY_TASK_MAX is",
                ))
            }
        };
        if id < min {
            return Err(RunError::input(format!(
                "SLURM_ARRAY_TASK_ID={id} lies below SLURM_ARRAY_TASK_MIN={min}"
            )));
        }
        Self::new(id - min + 1, count).map(Some)
    }

    /// Whether point `index` belongs to this shard.
    pub fn contains(&self, index: usize) -> bool {
        index % self.count == self.index - 1
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn axis(name: &str, values: &[f64]) -> Axis {
        Axis {
            name: name.into(),
            values: values.to_vec(),
            scale: Scale::Linear,
        }
    }

    #[test]
    fn grid_zip_and_samples() {
        let plan = Plan {
            axes: vec![axis("a", &[1.0, 2.0]), axis("b", &[10.0, 20.0, 30.0])],
            combine: Combine::Grid,
            sample: None,
        };
        let p = plan.points();
        assert_eq!(p.len(), 6);
        assert_eq!(p[0].values, vec![1.0, 10.0]);
        assert_eq!(p[1].values, vec![1.0, 20.0]);
        assert_eq!(p[5].values, vec![2.0, 30.0]);
        let zip = Plan {
            combine: Combine::Zip,
            ..plan.clone()
        };
        assert!(zip.check().is_err());
        let lhs = Plan {
            sample: Some(Sample {
                method: SampleMethod::Lhs,
                count: 8,
                seed: 7,
            }),
            ..plan.clone()
        };
        let p = lhs.points();
        assert_eq!(p, lhs.points(), "a seed gives the same points");
        // Each of the 8 strata of each axis holds exactly one point.
        for (k, (lo, hi)) in [(0, (1.0, 2.0)), (1, (10.0, 30.0))] {
            let mut strata: Vec<usize> = p
                .iter()
                .map(|q| (((q.values[k] - lo) / (hi - lo)) * 8.0).floor() as usize)
                .collect();
            strata.sort();
            assert_eq!(strata, (0..8).collect::<Vec<_>>());
        }
    }

    #[test]
    fn shards_are_disjoint_and_cover_the_sweep() {
        let n = 3;
        let mut seen = [0; 10];
        for k in 1..=n {
            let s = Shard::new(k, n).unwrap();
            for (i, c) in seen.iter_mut().enumerate() {
                if s.contains(i) {
                    *c += 1;
                }
            }
        }
        assert!(seen.iter().all(|&c| c == 1));
        assert!(Shard::parse("0/3").is_err() && Shard::parse("4/3").is_err());
        assert_eq!(Shard::parse("2/3").unwrap(), Shard { index: 2, count: 3 });
    }

    #[test]
    fn slurm_array_variables_give_the_shard() {
        let env = |vars: &'static [(&'static str, &'static str)]| {
            move |k: &str| {
                vars.iter()
                    .find(|(n, _)| *n == k)
                    .map(|(_, v)| v.to_string())
            }
        };
        assert_eq!(Shard::from_slurm(env(&[])).unwrap(), None);
        let s = Shard::from_slurm(env(&[
            ("SLURM_ARRAY_TASK_ID", "0"),
            ("SLURM_ARRAY_TASK_COUNT", "3"),
        ]));
        assert_eq!(s.unwrap(), Some(Shard { index: 1, count: 3 }));
        let s = Shard::from_slurm(env(&[
            ("SLURM_ARRAY_TASK_ID", "7"),
            ("SLURM_ARRAY_TASK_MIN", "5"),
            ("SLURM_ARRAY_TASK_MAX", "8"),
        ]));
        assert_eq!(s.unwrap(), Some(Shard { index: 3, count: 4 }));
        assert!(Shard::from_slurm(env(&[("SLURM_ARRAY_TASK_ID", "x")])).is_err());
    }
}
