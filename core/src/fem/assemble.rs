//! Residual and Jacobian of the semi-discrete system, refilled in place.
//!
//! For species r at node i (lumped mass mᵢ, node graph with cotangent weights w_e):
//!
//! ```text
//! mobile:        mᵢ (a·Uᵢ + hᵢ) + Σ_e F_e − mᵢ fᵣ(Uᵢ) = 0
//! immobile:      mᵢ (a·Uᵢ + hᵢ)          − mᵢ fᵣ(Uᵢ) = 0
//! quasi-steady:                  Σ_e F_e − mᵢ fᵣ(Uᵢ) = 0
//! ```
//!
//! where `a·U + h` is the time stepper's difference quotient and F_e the flux out of i along
//! edge e = (i, j). Without a mobility factor the flux is exponentially fitted
//! (Scharfetter–Gummel; Xu & Zikatanov 1999):
//! F = w·D·[B(−Δ/D) uᵢ − B(Δ/D) uⱼ], Δ = Σ_k (χ_k(Uⱼ) − χ_k(Uᵢ)), B(x) = x/(eˣ − 1), which is
//! exact for the no-flux state u ∝ exp(Φ/D), antisymmetric (so Σᵢ of the flux terms is zero:
//! mass is conserved exactly) and gives an M-matrix on Delaunay meshes (w ≥ 0). With a mobility
//! factor f = u·q(u) (volume filling) the flux is F = w·[D(uᵢ − uⱼ) + Σ_k u_up q_k(U_down) Δ_k]:
//! the cells at the upstream node of each term, the crowding at the downstream node, so that
//! both u ≥ 0 and the packing bound q = 0 are kept. A sensitivity given as χ'(c) enters through the
//! trapezoidal potential difference Δ = ½(χ'ᵢ + χ'ⱼ)(cⱼ − cᵢ).

use crate::kernel::{BatchKernel, KernelError, KernelInput, Scratch, SensitivityForm, SpeciesKind};
use crate::mesh::Mesh;
use crate::problem::Problem;

use super::bernoulli::bernoulli_pair;
use super::pattern::{BlockKind, BlockLayout, NodeGraph};

/// Cells below this value are clamped when the mobility's q = f/u is evaluated.
const MOBILITY_FLOOR: f64 = 1e-30;

/// The transport of one species: diffusion plus the chemotaxis terms that move it.
#[derive(Clone, Debug)]
struct Transport {
    species: usize,
    diffusion: f64,
    terms: Vec<usize>,
    upwind: bool,
    /// Species the fluxes depend on (including the transported one).
    deps: Vec<usize>,
}

/// The time-derivative part handed in by the stepper: for non-quasi-steady species the
/// equation holds mᵢ (coef·Uᵢ + hist[r·N + i]).
#[derive(Clone, Copy, Debug)]
pub struct TimeTerm<'a> {
    /// Coefficient of the new value (e.g. 1/dt for backward Euler).
    pub coef: f64,
    /// The rest of the difference quotient (e.g. −Uⁿ/dt), species-major.
    pub hist: &'a [f64],
}

/// Mesh data and problem structure needed every step, prepared once.
pub struct Discretisation {
    /// Node graph of the mesh.
    pub graph: NodeGraph,
    /// Lumped mass (node areas).
    pub mass: Vec<f64>,
    edges: Vec<[usize; 2]>,
    weights: Vec<f64>,
    /// Node x coordinates.
    pub x: Vec<f64>,
    /// Node y coordinates.
    pub y: Vec<f64>,
    kinds: Vec<SpeciesKind>,
    transports: Vec<Transport>,
    /// `reaction_deps[r][s]`: reaction r depends on species s.
    reaction_deps: Vec<Vec<bool>>,
}

/// Kernel outputs at the current state, reused between evaluations.
#[derive(Default)]
pub struct Workspace {
    reaction: Vec<f64>,
    reaction_jac: Vec<f64>,
    chi: Vec<Vec<f64>>,
    chi_jac: Vec<Vec<f64>>,
    factor: Vec<Vec<f64>>,
    factor_jac: Vec<Vec<f64>>,
    scratch: Scratch,
    /// Per-term potential differences and their derivatives on one edge.
    delta: Vec<f64>,
    gi: Vec<f64>,
    gj: Vec<f64>,
}

impl Discretisation {
    /// Prepares the operators of `problem` (validated) on `mesh`.
    pub fn new(mesh: &Mesh, problem: &Problem) -> Self {
        let s_count = problem.n_species();
        let mut transports = Vec::new();
        for (s, sp) in problem.species.iter().enumerate() {
            let terms: Vec<usize> = (0..problem.chemotaxis.len())
                .filter(|&k| problem.chemotaxis[k].cells == s)
                .collect();
            let diffusion = sp.kind.diffusion();
            if sp.kind == SpeciesKind::Immobile || (diffusion == 0.0 && terms.is_empty()) {
                continue;
            }
            let upwind = terms
                .iter()
                .any(|&k| problem.chemotaxis[k].factor.is_some());
            let mut deps = vec![s];
            for &k in &terms {
                let c = &problem.chemotaxis[k];
                for d in 0..s_count {
                    let uses = c.sensitivity.depends_on(0, d)
                        || (c.form == SensitivityForm::Derivative && d == c.signal)
                        || c.factor.as_ref().is_some_and(|f| f.depends_on(0, d));
                    if uses && !deps.contains(&d) {
                        deps.push(d);
                    }
                }
            }
            deps.sort_unstable();
            transports.push(Transport {
                species: s,
                diffusion,
                terms,
                upwind,
                deps,
            });
        }
        let reaction_deps = (0..s_count)
            .map(|r| {
                (0..s_count)
                    .map(|s| problem.reactions.depends_on(r, s))
                    .collect()
            })
            .collect();
        Self {
            graph: NodeGraph::new(mesh),
            mass: mesh.node_areas.clone(),
            edges: mesh.edges.clone(),
            weights: mesh.edge_weights.clone(),
            x: mesh.nodes.column(0).to_vec(),
            y: mesh.nodes.column(1).to_vec(),
            kinds: problem.species.iter().map(|s| s.kind).collect(),
            transports,
            reaction_deps,
        }
    }

    /// Number of nodes.
    pub fn nodes(&self) -> usize {
        self.mass.len()
    }

    /// Kind of species `s`.
    pub fn kind(&self, s: usize) -> SpeciesKind {
        self.kinds[s]
    }

    /// Block kind of the coupled Jacobian between species r's equation and species s.
    pub fn block_kind(&self, r: usize, s: usize) -> BlockKind {
        if let Some(t) = self.transports.iter().find(|t| t.species == r) {
            if t.deps.contains(&s) {
                return BlockKind::Graph;
            }
        }
        if r == s || self.reaction_deps[r][s] {
            BlockKind::Diagonal
        } else {
            BlockKind::None
        }
    }

    /// The layout of the system over `species` (ascending indices).
    pub fn layout(&self, species: &[usize]) -> BlockLayout {
        BlockLayout::new(&self.graph, self.kinds.len(), species, |r, s| {
            self.block_kind(r, s)
        })
    }

    /// Evaluates every kernel at state `u` (species-major), with derivatives when `jac`.
    pub fn evaluate(
        &self,
        problem: &Problem,
        u: &[f64],
        t: f64,
        jac: bool,
        ws: &mut Workspace,
    ) -> Result<(), KernelError> {
        self.evaluate_for(problem, u, t, jac, ws, None)
    }

    /// As [`Discretisation::evaluate`], but when `species` is given only the kernels the
    /// rows of those species need (the reactions and the chemotaxis terms moving them), so a
    /// per-species solve does not pay for the others' transport.
    pub fn evaluate_for(
        &self,
        problem: &Problem,
        u: &[f64],
        t: f64,
        jac: bool,
        ws: &mut Workspace,
        species: Option<&[usize]>,
    ) -> Result<(), KernelError> {
        let n = self.nodes();
        let sc = problem.n_species();
        let slices: Vec<&[f64]> = (0..sc).map(|s| &u[s * n..(s + 1) * n]).collect();
        let input = KernelInput {
            species: &slices,
            x: &self.x,
            y: &self.y,
            t,
        };
        let k = problem.chemotaxis.len();
        ws.chi.resize_with(k, Vec::new);
        ws.chi_jac.resize_with(k, Vec::new);
        ws.factor.resize_with(k, Vec::new);
        ws.factor_jac.resize_with(k, Vec::new);
        let run = |kernel: &dyn BatchKernel,
                   input: &KernelInput<'_>,
                   out: &mut Vec<f64>,
                   d: &mut Vec<f64>,
                   scratch: &mut Scratch|
         -> Result<(), KernelError> {
            out.resize(kernel.n_outputs() * n, 0.0);
            if jac {
                d.resize(kernel.n_outputs() * sc * n, 0.0);
                kernel.eval_with_jacobian(input, out, d, scratch)
            } else {
                kernel.eval(input, out, scratch)
            }
        };
        run(
            &*problem.reactions,
            &input,
            &mut ws.reaction,
            &mut ws.reaction_jac,
            &mut ws.scratch,
        )?;
        for (c, term) in problem.chemotaxis.iter().enumerate() {
            if species.is_some_and(|only| !only.contains(&term.cells)) {
                continue;
            }
            run(
                &*term.sensitivity,
                &input,
                &mut ws.chi[c],
                &mut ws.chi_jac[c],
                &mut ws.scratch,
            )?;
            if let Some(f) = &term.factor {
                // The mobility f is used as u·q(u) with q = f/u, so that an edge's flux can
                // take u at the upstream node and q at the downstream one: the flux into a
                // node then vanishes where q does (a packed node accepts no more cells) as
                // the flux out of it vanishes where u does. q is evaluated at u clamped to
                // a tiny positive value, which gives q(0) in the limit.
                let cells = term.cells;
                let clamped: Vec<f64> = u[cells * n..(cells + 1) * n]
                    .iter()
                    .map(|v| v.max(MOBILITY_FLOOR))
                    .collect();
                let mut moved = slices.clone();
                moved[cells] = &clamped;
                let input = KernelInput {
                    species: &moved,
                    ..input
                };
                run(
                    &**f,
                    &input,
                    &mut ws.factor[c],
                    &mut ws.factor_jac[c],
                    &mut ws.scratch,
                )?;
                let scale = clamped.iter().fold(1.0f64, |a, v| a.max(*v));
                for (i, &uc) in clamped.iter().enumerate() {
                    let q = ws.factor[c][i] / uc;
                    ws.factor[c][i] = q;
                    if jac {
                        for s in 0..sc {
                            let d = &mut ws.factor_jac[c][s * n + i];
                            // ∂q/∂s = (∂f/∂s − [s = cells]·q)/u; below 1e-10 of the
                            // scale the difference is round-off, and the cells' own term
                            // is dropped (Newton's Jacobian only, not the residual).
                            *d = if s != cells {
                                *d / uc
                            } else if uc > 1e-10 * scale {
                                (*d - q) / uc
                            } else {
                                0.0
                            };
                        }
                    }
                }
            }
        }
        Ok(())
    }

    /// The residual G(U) (species-major, length S·N) from the kernel values last evaluated
    /// at `u`, and, when `jac` is given, the Jacobian entries of its layout (values
    /// overwritten; kernels must have been evaluated with derivatives).
    pub fn assemble(
        &self,
        problem: &Problem,
        u: &[f64],
        time: TimeTerm<'_>,
        ws: &mut Workspace,
        residual: &mut [f64],
        jac: Option<(&BlockLayout, &mut [f64])>,
    ) {
        self.assemble_for(problem, u, time, ws, residual, jac, None);
    }

    /// As [`Discretisation::assemble`], but when `species` is given only their residual rows
    /// are written (the others are left as they are) and only their transport is assembled;
    /// the kernels must have been evaluated for at least those species
    /// ([`Discretisation::evaluate_for`]).
    #[allow(clippy::too_many_arguments)]
    pub fn assemble_for(
        &self,
        problem: &Problem,
        u: &[f64],
        time: TimeTerm<'_>,
        ws: &mut Workspace,
        residual: &mut [f64],
        mut jac: Option<(&BlockLayout, &mut [f64])>,
        species: Option<&[usize]>,
    ) {
        let n = self.nodes();
        let sc = problem.n_species();
        let g = &self.graph;
        let wanted = |r: usize| species.is_none_or(|only| only.contains(&r));
        if let Some((_, vals)) = jac.as_mut() {
            vals.iter_mut().for_each(|v| *v = 0.0);
        }
        // Node terms: time derivative and reactions.
        for r in (0..sc).filter(|&r| wanted(r)) {
            let steady = matches!(self.kinds[r], SpeciesKind::QuasiSteady { .. });
            for i in 0..n {
                let m = self.mass[i];
                let k = r * n + i;
                let mut v = -m * ws.reaction[k];
                if !steady {
                    v += m * (time.coef * u[k] + time.hist[k]);
                }
                residual[k] = v;
            }
            if let Some((layout, vals)) = jac.as_mut() {
                if layout.slot(r).is_none() {
                    continue;
                }
                for s in 0..sc {
                    let time_part = r == s && !steady;
                    if !(time_part || self.reaction_deps[r][s]) {
                        continue;
                    }
                    let d = &ws.reaction_jac;
                    for i in 0..n {
                        let Some(p) = layout.pos(g, r, s, i, g.diag[i]) else {
                            break;
                        };
                        let mut v = 0.0;
                        if self.reaction_deps[r][s] {
                            v -= self.mass[i] * d[(r * sc + s) * n + i];
                        }
                        if time_part {
                            v += self.mass[i] * time.coef;
                        }
                        vals[p] += v;
                    }
                }
            }
        }
        for tr in self.transports.iter().filter(|tr| wanted(tr.species)) {
            self.assemble_transport(
                problem,
                tr,
                u,
                ws,
                residual,
                jac.as_mut().map(|(l, v)| (*l, &mut **v)),
            );
        }
    }

    /// Pure diffusion (no chemotaxis term): flux w·D·(uᵢ − uⱼ) per edge and a Jacobian of
    /// constants. The common case of signals and nutrients, kept apart from the per-term
    /// bookkeeping of the general loop (same operations in the same order, so the same bits;
    /// about a quarter of the general loop's time per edge).
    fn assemble_diffusion(
        &self,
        r: usize,
        d: f64,
        u: &[f64],
        residual: &mut [f64],
        block: Option<(&[usize], &mut [f64])>,
    ) {
        let n = self.nodes();
        let ur = &u[r * n..(r + 1) * n];
        let res = &mut residual[r * n..(r + 1) * n];
        let g = &self.graph;
        let edges = self.edges.iter().zip(&self.weights);
        match block {
            None => {
                for (&[i, j], &w) in edges {
                    let k = w * d;
                    let flux = k * (ur[i] - ur[j]);
                    res[i] += flux;
                    res[j] -= flux;
                }
            }
            Some((base, vals)) => {
                for ((&[i, j], &w), &[kij, kji]) in edges.zip(&g.edge_slots) {
                    let k = w * d;
                    let flux = k * (ur[i] - ur[j]);
                    res[i] += flux;
                    res[j] -= flux;
                    let (bi, bj) = (base[i], base[j]);
                    vals[bi + g.diag[i]] += k;
                    vals[bi + kij] -= k;
                    vals[bj + kji] -= k;
                    vals[bj + g.diag[j]] += k;
                }
            }
        }
    }

    /// One chemotaxis term, exponentially fitted, without a mobility factor and with D > 0:
    /// the cell equation of Keller–Segel-type models. The general loop's operations for this
    /// case in the same order (the same bits), without its per-term bookkeeping.
    #[allow(clippy::too_many_arguments)]
    fn assemble_fitted(
        &self,
        problem: &Problem,
        tr: &Transport,
        u: &[f64],
        ws: &mut Workspace,
        residual: &mut [f64],
        bases: &[(usize, &[usize])],
        mut vals: Option<&mut [f64]>,
    ) {
        let n = self.nodes();
        let sc = problem.n_species();
        let g = &self.graph;
        let (r, d) = (tr.species, tr.diffusion);
        let c = tr.terms[0];
        let term = &problem.chemotaxis[c];
        let (chi, chi_jac) = (&ws.chi[c], &ws.chi_jac[c]);
        let want_jac = vals.is_some();
        // ∂Δ/∂s at i and at j, written for every dependency on every edge before use.
        let (gi, gj) = (&mut ws.gi[..sc], &mut ws.gj[..sc]);
        for (e, &[i, j]) in self.edges.iter().enumerate() {
            let w = self.weights[e];
            let (ui, uj) = (u[r * n + i], u[r * n + j]);
            let delta = match term.form {
                SensitivityForm::Potential => {
                    if want_jac {
                        for &s in &tr.deps {
                            gi[s] = -chi_jac[s * n + i];
                            gj[s] = chi_jac[s * n + j];
                        }
                    }
                    chi[j] - chi[i]
                }
                SensitivityForm::Derivative => {
                    let sig = term.signal;
                    let dc = u[sig * n + j] - u[sig * n + i];
                    let mean = 0.5 * (chi[i] + chi[j]);
                    if want_jac {
                        for &s in &tr.deps {
                            gi[s] = 0.5 * chi_jac[s * n + i] * dc;
                            gj[s] = 0.5 * chi_jac[s * n + j] * dc;
                        }
                        gi[sig] -= mean;
                        gj[sig] += mean;
                    }
                    mean * dc
                }
            };
            let [(bp, dp), (bm, dm)] = bernoulli_pair(delta / d);
            let wd = w * d;
            let flux = wd * (bm * ui - bp * uj);
            residual[r * n + i] += flux;
            residual[r * n + j] -= flux;
            let Some(vals) = vals.as_mut() else {
                continue;
            };
            // ∂F/∂Δ = w·(−B'(−δ) uᵢ − B'(δ) uⱼ); D cancels against ∂δ/∂Δ = 1/D.
            let dfd = w * (-dm * ui - dp * uj);
            let [kij, kji] = g.edge_slots[e];
            for &(s, base) in bases {
                let (mut ai, mut aj) = (dfd * gi[s], dfd * gj[s]);
                if s == r {
                    ai += wd * bm;
                    aj += -(wd * bp);
                }
                let (bi, bj) = (base[i], base[j]);
                vals[bi + g.diag[i]] += ai;
                vals[bi + kij] += aj;
                vals[bj + kji] -= ai;
                vals[bj + g.diag[j]] -= aj;
            }
        }
    }

    fn assemble_transport(
        &self,
        problem: &Problem,
        tr: &Transport,
        u: &[f64],
        ws: &mut Workspace,
        residual: &mut [f64],
        mut jac: Option<(&BlockLayout, &mut [f64])>,
    ) {
        let n = self.nodes();
        let sc = problem.n_species();
        let g = &self.graph;
        let r = tr.species;
        let d = tr.diffusion;
        let nt = tr.terms.len();
        ws.delta.resize(nt, 0.0);
        ws.gi.resize(nt * sc, 0.0);
        ws.gj.resize(nt * sc, 0.0);
        let mut acc_i = vec![0.0; sc];
        let mut acc_j = vec![0.0; sc];
        let want_jac = jac.as_ref().is_some_and(|(l, _)| l.slot(r).is_some());
        if nt == 0 {
            let block = match jac {
                Some((layout, vals)) if want_jac => layout.graph_base(r, r).map(|b| (b, vals)),
                _ => None,
            };
            self.assemble_diffusion(r, d, u, residual, block);
            return;
        }
        // The graph blocks of this row species in the system (a dependency whose species is
        // not an unknown of the system has none).
        let bases: Vec<(usize, &[usize])> = match jac.as_ref() {
            Some((layout, _)) if want_jac => tr
                .deps
                .iter()
                .filter_map(|&s| layout.graph_base(r, s).map(|b| (s, b)))
                .collect(),
            _ => Vec::new(),
        };
        if nt == 1 && !tr.upwind && d > 0.0 {
            let vals = match jac {
                Some((_, vals)) if want_jac => Some(vals),
                _ => None,
            };
            self.assemble_fitted(problem, tr, u, ws, residual, &bases, vals);
            return;
        }
        for (e, &[i, j]) in self.edges.iter().enumerate() {
            let w = self.weights[e];
            let (ui, uj) = (u[r * n + i], u[r * n + j]);
            // Potential differences of every term on this edge, with ∂Δ/∂s at i and at j.
            for (t, &c) in tr.terms.iter().enumerate() {
                let term = &problem.chemotaxis[c];
                let chi = &ws.chi[c];
                let gi = &mut ws.gi[t * sc..(t + 1) * sc];
                let gj = &mut ws.gj[t * sc..(t + 1) * sc];
                gi.iter_mut().for_each(|v| *v = 0.0);
                gj.iter_mut().for_each(|v| *v = 0.0);
                match term.form {
                    SensitivityForm::Potential => {
                        ws.delta[t] = chi[j] - chi[i];
                        if want_jac {
                            for &s in &tr.deps {
                                gi[s] = -ws.chi_jac[c][s * n + i];
                                gj[s] = ws.chi_jac[c][s * n + j];
                            }
                        }
                    }
                    SensitivityForm::Derivative => {
                        let sig = term.signal;
                        let dc = u[sig * n + j] - u[sig * n + i];
                        let mean = 0.5 * (chi[i] + chi[j]);
                        ws.delta[t] = mean * dc;
                        if want_jac {
                            for &s in &tr.deps {
                                gi[s] = 0.5 * ws.chi_jac[c][s * n + i] * dc;
                                gj[s] = 0.5 * ws.chi_jac[c][s * n + j] * dc;
                            }
                            gi[sig] -= mean;
                            gj[sig] += mean;
                        }
                    }
                }
            }
            acc_i.iter_mut().for_each(|v| *v = 0.0);
            acc_j.iter_mut().for_each(|v| *v = 0.0);
            let flux;
            if tr.upwind {
                let mut f = w * d * (ui - uj);
                acc_i[r] += w * d;
                acc_j[r] -= w * d;
                for (t, &c) in tr.terms.iter().enumerate() {
                    let delta = ws.delta[t];
                    let (up, acc_up) = if delta > 0.0 {
                        (i, &mut acc_i)
                    } else {
                        (j, &mut acc_j)
                    };
                    let down = i + j - up;
                    let u_up = u[r * n + up];
                    let mob = match &problem.chemotaxis[c].factor {
                        Some(_) => u_up * ws.factor[c][down],
                        None => u_up,
                    };
                    f += w * mob * delta;
                    if want_jac {
                        match &problem.chemotaxis[c].factor {
                            Some(_) => {
                                acc_up[r] += w * delta * ws.factor[c][down];
                                let acc_down = if down == i { &mut acc_i } else { &mut acc_j };
                                for &s in &tr.deps {
                                    acc_down[s] +=
                                        w * delta * u_up * ws.factor_jac[c][s * n + down];
                                }
                            }
                            None => acc_up[r] += w * delta,
                        }
                        for &s in &tr.deps {
                            acc_i[s] += w * mob * ws.gi[t * sc + s];
                            acc_j[s] += w * mob * ws.gj[t * sc + s];
                        }
                    }
                }
                flux = f;
            } else if nt == 0 {
                flux = w * d * (ui - uj);
                acc_i[r] = w * d;
                acc_j[r] = -w * d;
            } else {
                let total: f64 = ws.delta.iter().sum();
                let (dbm, dbp);
                if d > 0.0 {
                    let x = total / d;
                    let [(bp, dp), (bm, dm)] = bernoulli_pair(x);
                    (dbm, dbp) = (dm, dp);
                    flux = w * d * (bm * ui - bp * uj);
                    acc_i[r] += w * d * bm;
                    acc_j[r] -= w * d * bp;
                } else {
                    // The D → 0 limit of exponential fitting is first-order upwinding.
                    let (pos, neg) = (total.max(0.0), (-total).max(0.0));
                    flux = w * (pos * ui - neg * uj);
                    acc_i[r] += w * pos;
                    acc_j[r] -= w * neg;
                    dbm = if total > 0.0 { -1.0 } else { 0.0 };
                    dbp = if total < 0.0 { -1.0 } else { 0.0 };
                }
                if want_jac {
                    // ∂F/∂Δ = w·(−B'(−δ) uᵢ − B'(δ) uⱼ); D cancels against ∂δ/∂Δ = 1/D.
                    let dfd = w * (-dbm * ui - dbp * uj);
                    for t in 0..nt {
                        for &s in &tr.deps {
                            acc_i[s] += dfd * ws.gi[t * sc + s];
                            acc_j[s] += dfd * ws.gj[t * sc + s];
                        }
                    }
                }
            }
            residual[r * n + i] += flux;
            residual[r * n + j] -= flux;
            if want_jac {
                let Some((_, vals)) = jac.as_mut() else {
                    continue;
                };
                let [kij, kji] = g.edge_slots[e];
                for &(s, base) in &bases {
                    let (bi, bj) = (base[i], base[j]);
                    vals[bi + g.diag[i]] += acc_i[s];
                    vals[bi + kij] += acc_j[s];
                    vals[bj + kji] -= acc_i[s];
                    vals[bj + g.diag[j]] -= acc_j[s];
                }
            }
        }
    }
}
