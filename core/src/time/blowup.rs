//! Recognising a suspected blow-up.
//!
//! Two signatures stop a run:
//! - step collapse: the step size falls below a floor while a sup-norm keeps growing (finite-
//!   time blow-up resolved by the mesh);
//! - mesh-scale concentration: on a fixed mesh a positive, conservative discrete solution
//!   cannot exceed (total mass)/(smallest node area), so a collapsing aggregate ends as a
//!   spike one element wide instead of an infinite peak. Most of a chemotactic species' mass
//!   gathering within a few element diameters of its peak, with the peak still growing and
//!   standing well above its mesh neighbours (a spike, not a plateau at a packing bound), is
//!   reported as a suspected blow-up whose verdict depends on the mesh.

use serde::{Deserialize, Serialize};

use super::BlowupParams;
use crate::mesh::Mesh;

/// Which signature stopped the run.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum BlowupKind {
    /// Step size below the floor while a sup-norm grows.
    StepCollapse,
    /// Mass concentrated at the mesh scale around a growing peak.
    MeshScaleConcentration,
    /// Step size below the floor while the species grows everywhere at once (its minimum
    /// at least [`UNIFORM_SHARE`] of its peak): an ODE-type blow-up of the reaction terms,
    /// not a concentration.
    UniformGrowth,
}

/// Minimum over peak from which a collapsing species counts as growing uniformly.
pub const UNIFORM_SHARE: f64 = 0.5;

/// What a run reports when it stops at a suspected blow-up.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct BlowupReport {
    /// Signature.
    pub kind: BlowupKind,
    /// Time of the last accepted state.
    pub time: f64,
    /// Species whose peak grows.
    pub species: String,
    /// Node of the peak.
    pub node: usize,
    /// Coordinates of the peak.
    pub location: [f64; 2],
    /// Peak value.
    pub peak: f64,
    /// Smallest value of the species over the plate.
    pub minimum: f64,
    /// Sup-norm at the start of the run.
    pub initial_peak: f64,
    /// Integral of the species over the plate.
    pub mass: f64,
    /// Integral within `radius` of the peak.
    pub mass_near_peak: f64,
    /// Radius used (a few local element diameters).
    pub radius: f64,
    /// (total mass)/(smallest node area): the largest value the discrete solution can take.
    pub discrete_bound: f64,
    /// Last accepted steps as (time, dt), oldest first.
    pub dt_history: Vec<(f64, f64)>,
}

impl BlowupReport {
    /// A few lines for a person: what was seen, and how to confirm it.
    pub fn describe(&self) -> String {
        if self.kind == BlowupKind::UniformGrowth {
            let mut s = format!(
                "suspected blow-up of `{}` at t = {:.6e}: the step size collapsed while `{}` grew everywhere at once\n  values {:.6e} to {:.6e} over the whole plate (initially up to {:.6e}): a spatially uniform blow-up of the reaction terms (as of the ODE without diffusion), not a concentration; refining the mesh will not change it",
                self.species, self.time, self.species, self.minimum, self.peak, self.initial_peak,
            );
            if let Some(&(t, dt)) = self.dt_history.last() {
                s.push_str(&format!("\n  last step: dt = {dt:.3e} at t = {t:.6e}"));
            }
            return s;
        }
        let what = match self.kind {
            BlowupKind::StepCollapse | BlowupKind::UniformGrowth => {
                "the step size collapsed while the peak kept growing"
            }
            BlowupKind::MeshScaleConcentration => {
                "the mass gathered at the scale of the mesh around a growing peak"
            }
        };
        let mut s = format!(
            "suspected blow-up of `{}` at t = {:.6e}: {what}\n  peak {:.6e} at ({:.6}, {:.6}) (initially {:.6e}); {:.1}% of the mass {:.6e} lies within {:.3e} of it\n  discrete bound mass/min(node area) = {:.6e} (peak is {:.1}% of it)",
            self.species,
            self.time,
            self.peak,
            self.location[0],
            self.location[1],
            self.initial_peak,
            100.0 * self.mass_near_peak / self.mass.max(f64::MIN_POSITIVE),
            self.mass,
            self.radius,
            self.discrete_bound,
            100.0 * self.peak / self.discrete_bound.max(f64::MIN_POSITIVE),
        );
        if self.kind == BlowupKind::MeshScaleConcentration {
            s.push_str(
                "\n  this verdict depends on the mesh: refine near the peak (a spot there with a smaller size) and rerun; a true blow-up concentrates again at the finer scale and sooner",
            );
        }
        if let Some(&(t, dt)) = self.dt_history.last() {
            s.push_str(&format!("\n  last step: dt = {dt:.3e} at t = {t:.6e}"));
        }
        s
    }
}

/// Per-species history the detector looks at (saved in checkpoints, so a resumed run
/// decides exactly as the uninterrupted one).
#[derive(Clone, Debug, Serialize, Deserialize)]
pub(crate) struct Monitor {
    params: BlowupParams,
    /// Species watched for concentration (the climbing species of chemotaxis terms).
    chemotactic: Vec<bool>,
    initial_sup: Vec<f64>,
    sups: Vec<Vec<f64>>,
    initial_peak_per_mass: Vec<f64>,
    peak_per_mass: Vec<Vec<f64>>,
    dts: Vec<(f64, f64)>,
    /// Largest incident edge length at each node (recomputed from the mesh on restore).
    #[serde(skip)]
    local_h: Vec<f64>,
    #[serde(skip)]
    min_area: f64,
}

impl Monitor {
    /// Recomputes the mesh-derived fields after deserialisation.
    pub fn attach(&mut self, mesh: &Mesh) {
        let fresh = Monitor::new(self.params.clone(), mesh, self.chemotactic.clone(), &[]);
        self.local_h = fresh.local_h;
        self.min_area = fresh.min_area;
    }

    pub fn new(params: BlowupParams, mesh: &Mesh, chemotactic: Vec<bool>, u: &[f64]) -> Self {
        let (sups, ratios) = if u.is_empty() {
            (vec![], vec![])
        } else {
            peaks(mesh, u, chemotactic.len())
        };
        let mut local_h = vec![0.0f64; mesh.num_nodes()];
        for &[a, b] in &mesh.edges {
            let (pa, pb) = (mesh.node(a), mesh.node(b));
            let l = (pa[0] - pb[0]).hypot(pa[1] - pb[1]);
            local_h[a] = local_h[a].max(l);
            local_h[b] = local_h[b].max(l);
        }
        let min_area = mesh
            .node_areas
            .iter()
            .copied()
            .fold(f64::INFINITY, f64::min);
        Self {
            params,
            chemotactic,
            sups: sups.iter().map(|&s| vec![s]).collect(),
            initial_sup: sups,
            peak_per_mass: ratios.iter().map(|&s| vec![s]).collect(),
            initial_peak_per_mass: ratios,
            dts: Vec::new(),
            local_h,
            min_area,
        }
    }

    /// Records an accepted step.
    pub fn record(&mut self, mesh: &Mesh, t: f64, dt: f64, u: &[f64]) {
        let keep = self.params.window + 1;
        let (sups, ratios) = peaks(mesh, u, self.sups.len());
        for (h, s) in self.sups.iter_mut().zip(sups) {
            h.push(s);
            if h.len() > keep {
                h.remove(0);
            }
        }
        for (h, s) in self.peak_per_mass.iter_mut().zip(ratios) {
            h.push(s);
            if h.len() > keep {
                h.remove(0);
            }
        }
        self.dts.push((t, dt));
        if self.dts.len() > keep.max(20) {
            self.dts.remove(0);
        }
    }

    /// The last three values of `h` increase and the newest is `factor` times the oldest kept.
    /// Needs a full window of history and a positive start: growth out of zero (a species
    /// that starts absent) is not a blow-up.
    fn growing(&self, h: &[f64], factor: f64) -> bool {
        let n = h.len();
        n >= (self.params.window + 1).max(3)
            && h[0] > 0.0
            && h[n - 1] > h[n - 2]
            && h[n - 2] > h[n - 3]
            && h[n - 1] >= factor * h[0]
    }

    /// The step size has been falling: each of the last three accepted steps no longer than
    /// the one before.
    fn shrinking(&self) -> bool {
        let n = self.dts.len();
        n >= 3 && self.dts[n - 1].1 <= self.dts[n - 2].1 && self.dts[n - 2].1 <= self.dts[n - 3].1
    }

    /// A report if the state `u` (species-major) at time `t` looks like a blow-up; `dt` is the
    /// step size the stepper is about to try and `floor` the step-size floor.
    pub fn check(
        &self,
        mesh: &Mesh,
        names: &[String],
        u: &[f64],
        t: f64,
        dt: f64,
        floor: f64,
    ) -> Option<BlowupReport> {
        if !self.params.enabled {
            return None;
        }
        let n = mesh.num_nodes();
        for s in 0..self.sups.len() {
            let u = &u[s * n..(s + 1) * n];
            let collapse =
                dt < floor && self.shrinking() && self.growing(&self.sups[s], self.params.growth);
            // Concentration is growth of the peak relative to the mass (growth of the whole
            // population raises both and is no concentration).
            let concentrating = self.chemotactic[s] && {
                let h = &self.peak_per_mass[s];
                self.growing(h, 1.0)
                    && h.last().copied().unwrap_or(0.0)
                        >= self.params.peak_growth * self.initial_peak_per_mass[s]
            };
            if !(collapse || concentrating) {
                continue;
            }
            let report = self.report(mesh, s, &names[s], u, t);
            if collapse {
                let uniform = report.minimum >= UNIFORM_SHARE * report.peak;
                return Some(BlowupReport {
                    kind: if uniform {
                        BlowupKind::UniformGrowth
                    } else {
                        BlowupKind::StepCollapse
                    },
                    ..report
                });
            }
            let mass = report.mass.max(f64::MIN_POSITIVE);
            let share = report.mass_near_peak / mass;
            // A bounded aggregate spread over many nodes (a colony's dense core on a coarse
            // mesh) also gathers half the mass near its peak; a collapse at the mesh scale
            // puts a good part of it into the peak node itself.
            let in_peak_node = report.peak * mesh.node_areas[report.node] / mass;
            // A collapse ends one node wide; an aggregate stopped by crowding is a plateau
            // whose neighbours are nearly as high as its peak.
            let spike = report.peak >= self.params.spike * neighbour_mean(mesh, u, report.node);
            if share >= self.params.concentration && in_peak_node >= self.params.peak_share && spike
            {
                return Some(report);
            }
        }
        None
    }

    fn report(&self, mesh: &Mesh, s: usize, name: &str, u: &[f64], t: f64) -> BlowupReport {
        let (node, peak) =
            u.iter()
                .copied()
                .enumerate()
                .fold(
                    (0, f64::NEG_INFINITY),
                    |a, (i, v)| if v > a.1 { (i, v) } else { a },
                );
        let p = mesh.node(node);
        let radius = self.params.radius_elements * self.local_h[node];
        let mut mass = 0.0;
        let mut near = 0.0;
        for (i, (&v, &m)) in u.iter().zip(&mesh.node_areas).enumerate() {
            mass += m * v;
            let q = mesh.node(i);
            if (q[0] - p[0]).hypot(q[1] - p[1]) <= radius {
                near += m * v;
            }
        }
        BlowupReport {
            kind: BlowupKind::MeshScaleConcentration,
            time: t,
            species: name.to_string(),
            node,
            location: p,
            peak,
            minimum: u.iter().copied().fold(f64::INFINITY, f64::min),
            initial_peak: self.initial_sup[s],
            mass,
            mass_near_peak: near,
            radius,
            discrete_bound: mass / self.min_area,
            dt_history: self.dts.clone(),
        }
    }
}

/// Mean value at the mesh neighbours of `node` (0 for an isolated node).
fn neighbour_mean(mesh: &Mesh, u: &[f64], node: usize) -> f64 {
    let (mut sum, mut count) = (0.0, 0usize);
    for &[a, b] in &mesh.edges {
        let other = if a == node {
            b
        } else if b == node {
            a
        } else {
            continue;
        };
        sum += u[other];
        count += 1;
    }
    if count == 0 {
        0.0
    } else {
        sum / count as f64
    }
}

/// Sup-norm of each species and its ratio to the species' integral (0 for a zero integral).
fn peaks(mesh: &Mesh, u: &[f64], species: usize) -> (Vec<f64>, Vec<f64>) {
    let n = mesh.num_nodes();
    (0..species)
        .map(|s| {
            let v = &u[s * n..(s + 1) * n];
            let sup = v.iter().fold(0.0f64, |a, x| a.max(x.abs()));
            let mass: f64 = v.iter().zip(&mesh.node_areas).map(|(x, m)| x * m).sum();
            (sup, if mass > 0.0 { sup / mass } else { 0.0 })
        })
        .unzip()
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::Array2;

    /// Uniform grid of (k+1)² nodes on [0, 1]², two triangles per cell.
    fn grid(k: usize) -> Mesh {
        let n = k + 1;
        let mut nodes = Array2::zeros((n * n, 2));
        for j in 0..n {
            for i in 0..n {
                nodes[[j * n + i, 0]] = i as f64 / k as f64;
                nodes[[j * n + i, 1]] = j as f64 / k as f64;
            }
        }
        let mut tris = Vec::new();
        for j in 0..k {
            for i in 0..k {
                let a = j * n + i;
                tris.push([a, a + 1, a + n + 1]);
                tris.push([a, a + n + 1, a + n]);
            }
        }
        Mesh::from_parts(nodes, tris, &|_| 0).unwrap()
    }

    /// Drives a monitor through a growing concentration around the centre node of a 20×20
    /// grid: `shape(d)` is the profile at grid distance d (in cells), scaled up every step.
    fn verdict(spike: f64, shape: impl Fn(f64) -> f64) -> Option<BlowupReport> {
        let mesh = grid(20);
        let n = mesh.num_nodes();
        let centre = [0.5, 0.5];
        let state = |amp: f64| -> Vec<f64> {
            (0..n)
                .map(|i| {
                    let p = mesh.node(i);
                    let d = 20.0 * (p[0] - centre[0]).hypot(p[1] - centre[1]);
                    1e-3 + amp * shape(d)
                })
                .collect()
        };
        let params = BlowupParams {
            spike,
            ..BlowupParams::default()
        };
        let mut m = Monitor::new(params, &mesh, vec![true], &state(0.0));
        let names = vec!["u".to_string()];
        let mut last = None;
        for k in 1..=14 {
            let u = state(0.01 * 1.6f64.powi(k));
            m.record(&mesh, k as f64 * 0.1, 0.1, &u);
            last = m.check(&mesh, &names, &u, k as f64 * 0.1, 0.1, 1e-9);
            if last.is_some() {
                break;
            }
        }
        last
    }

    #[test]
    fn a_spike_one_node_wide_is_reported() {
        let r = verdict(1.5, |d| if d < 0.5 { 1.0 } else { 0.0 }).expect("a spike");
        assert_eq!(r.kind, BlowupKind::MeshScaleConcentration);
        assert_eq!(r.location, [0.5, 0.5]);
    }

    #[test]
    fn a_plateau_a_few_nodes_wide_is_not() {
        // The same mass concentration, but flat over the centre node and its neighbours:
        // an aggregate stopped at a packing density, not a collapse. Without the spike
        // criterion (factor 0) it is reported as well.
        let plateau = |d: f64| if d < 1.5 { 1.0 - 0.01 * d } else { 0.0 };
        assert!(verdict(1.5, plateau).is_none());
        assert!(verdict(0.0, plateau).is_some());
    }
}
