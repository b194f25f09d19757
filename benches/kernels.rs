//! Cost of evaluating model terms, in ns per node: native closures, the compiled chunked graph,
//! and one script-engine call per node; values alone and values with the full Jacobian. All
//! variants run side by side in one process, so the ratios are meaningful on a shared machine.
//! Median of N repetitions, no timing assertions anywhere.

use std::hint::black_box;
use std::time::Instant;

use agarium_core::kernel::{BatchKernel, ClosureKernel, KernelInput, Scratch};
use agarium_scripting::tape::multiversion::multiversion;
use agarium_scripting::{Model, Overrides};

const NODES: usize = 16 * 1024;
const REPS: usize = 31;
const RHAI_NODES: usize = 512;

fn median_ns_per_node(nodes: usize, reps: usize, mut f: impl FnMut()) -> f64 {
    f();
    let mut t: Vec<f64> = (0..reps)
        .map(|_| {
            let s = Instant::now();
            f();
            s.elapsed().as_nanos() as f64 / nodes as f64
        })
        .collect();
    t.sort_by(f64::total_cmp);
    t[t.len() / 2]
}

/// The reaction set as hand-written loops over the species slices: the best case for native code.
/// `dispatch` runs the loops through the same runtime CPU dispatch as the compiled kernel;
/// without it they are built for the default target, as a user's own code would be.
struct Loops {
    p: [f64; 7],
    dispatch: bool,
}

/// The value loops; `#[inline(always)]` so the dispatched clones below get their own copy.
#[inline(always)]
fn values_loop(p: [f64; 7], u: &[f64], c: &[f64], nu: &[f64], o: [&mut [f64]; 4]) {
    let [r, k_n, b_0, k_b, alpha, beta, gamma] = p;
    let [o0, o1, o2, o3] = o;
    let n = o0.len();
    for i in 0..n {
        let g = r * nu[i] / (k_n + nu[i]);
        let b = b_0 * k_b / (k_b + nu[i]);
        o0[i] = (g - b) * u[i];
        o1[i] = alpha * u[i] - beta * c[i];
        o2[i] = -gamma * g * u[i];
        o3[i] = b * u[i];
    }
}

#[multiversion(targets("x86_64+avx512f+avx512vl+avx2+fma", "x86_64+avx2+fma", "x86_64+avx"))]
fn values_dispatched(p: [f64; 7], u: &[f64], c: &[f64], nu: &[f64], o: [&mut [f64]; 4]) {
    values_loop(p, u, c, nu, o)
}

/// Values and the eight structurally non-zero Jacobian rows in one pass.
#[inline(always)]
fn jacobian_loop(
    p: [f64; 7],
    u: &[f64],
    c: &[f64],
    nu: &[f64],
    o: [&mut [f64]; 4],
    j: [&mut [f64]; 8],
) {
    let [r, k_n, b_0, k_b, alpha, beta, gamma] = p;
    let [o0, o1, o2, o3] = o;
    let [j0, j2, j4, j5, j8, j10, j12, j14] = j;
    let n = o0.len();
    for i in 0..n {
        // The formulas the symbolic derivative produces (quotient rule on g and b).
        let (sg, sb) = (k_n + nu[i], k_b + nu[i]);
        let g = r * nu[i] / sg;
        let b = b_0 * k_b / sb;
        let dg = (r - g) / sg;
        let db = -b / sb;
        o0[i] = (g - b) * u[i];
        o1[i] = alpha * u[i] - beta * c[i];
        o2[i] = -gamma * g * u[i];
        o3[i] = b * u[i];
        j0[i] = g - b;
        j2[i] = (dg - db) * u[i];
        j4[i] = alpha;
        j5[i] = -beta;
        j8[i] = -gamma * g;
        j10[i] = -gamma * dg * u[i];
        j12[i] = b;
        j14[i] = db * u[i];
    }
}

#[multiversion(targets("x86_64+avx512f+avx512vl+avx2+fma", "x86_64+avx2+fma", "x86_64+avx"))]
fn jacobian_dispatched(
    p: [f64; 7],
    u: &[f64],
    c: &[f64],
    nu: &[f64],
    o: [&mut [f64]; 4],
    j: [&mut [f64]; 8],
) {
    jacobian_loop(p, u, c, nu, o, j)
}

impl BatchKernel for Loops {
    fn n_inputs(&self) -> usize {
        4
    }
    fn n_outputs(&self) -> usize {
        4
    }
    fn depends_on(&self, _o: usize, _s: usize) -> bool {
        true
    }
    fn eval(
        &self,
        input: &KernelInput<'_>,
        out: &mut [f64],
        _s: &mut Scratch,
    ) -> Result<(), agarium_core::kernel::KernelError> {
        let n = input.len();
        let (u, c, nu) = (input.species[0], input.species[1], input.species[2]);
        let (o0, rest) = out.split_at_mut(n);
        let (o1, rest) = rest.split_at_mut(n);
        let (o2, o3) = rest.split_at_mut(n);
        if self.dispatch {
            values_dispatched(self.p, u, c, nu, [o0, o1, o2, o3]);
        } else {
            values_loop(self.p, u, c, nu, [o0, o1, o2, o3]);
        }
        Ok(())
    }
    fn eval_with_jacobian(
        &self,
        input: &KernelInput<'_>,
        out: &mut [f64],
        jac: &mut [f64],
        _s: &mut Scratch,
    ) -> Result<(), agarium_core::kernel::KernelError> {
        let n = input.len();
        let (u, c, nu) = (input.species[0], input.species[1], input.species[2]);
        let (o0, rest) = out.split_at_mut(n);
        let (o1, rest) = rest.split_at_mut(n);
        let (o2, o3) = rest.split_at_mut(n);
        // Only the structural zeros are cleared.
        let mut rows: Vec<Option<&mut [f64]>> = jac.chunks_mut(n).map(Some).collect();
        let mut row = |k: usize| rows[k].take().unwrap_or_default();
        let j = [
            row(0),
            row(2),
            row(4),
            row(5),
            row(8),
            row(10),
            row(12),
            row(14),
        ];
        for z in rows.into_iter().flatten() {
            z.fill(0.0);
        }
        if self.dispatch {
            jacobian_dispatched(self.p, u, c, nu, [o0, o1, o2, o3], j);
        } else {
            jacobian_loop(self.p, u, c, nu, [o0, o1, o2, o3], j);
        }
        Ok(())
    }
}

struct Case<'a> {
    name: &'a str,
    native: &'a dyn BatchKernel,
    compiled: &'a dyn BatchKernel,
    rhai: &'a dyn BatchKernel,
}

fn run(case: &Case, species: &[Vec<f64>], x: &[f64]) {
    let bench = |k: &dyn BatchKernel, n: usize, reps: usize, jac: bool| {
        let refs: Vec<&[f64]> = species.iter().map(|s| &s[..n]).collect();
        let input = KernelInput {
            species: &refs,
            x: &x[..n],
            y: &x[..n],
            t: 0.0,
        };
        let mut out = vec![0.0; k.n_outputs() * n];
        let mut j = vec![0.0; k.n_outputs() * k.n_inputs() * n];
        let mut s = Scratch::new();
        median_ns_per_node(n, reps, || {
            let r = if jac {
                k.eval_with_jacobian(&input, &mut out, &mut j, &mut s)
            } else {
                k.eval(&input, &mut out, &mut s)
            };
            black_box((r.is_ok(), &out, &j));
        })
    };
    for jac in [false, true] {
        let native = bench(case.native, NODES, REPS, jac);
        // The interpreted baseline is slow and the same for every case; time it once per case.
        let compiled = bench(case.compiled, NODES, REPS, jac);
        let rhai = bench(case.rhai, RHAI_NODES, 5, jac);
        println!(
            "{:<28} {:<16} native {:>8.2}  compiled {:>8.2}  rhai/node {:>9.1}   compiled/native {:>5.2}x  rhai/native {:>7.0}x",
            case.name,
            if jac { "values+jacobian" } else { "values" },
            native,
            compiled,
            rhai,
            compiled / native,
            rhai / native
        );
    }
}

fn main() {
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/models/colony_4species.rhai");
    let model = Model::load_file(std::path::Path::new(path), &Overrides::new()).expect("model");
    let compiled = model.compile().expect("compile");
    let value = |name: &str| {
        model
            .decl
            .params
            .iter()
            .find(|p| p.name == name)
            .map(|p| p.value)
            .expect("param")
    };
    let (r, k_n, b_0, k_b) = (value("r"), value("k_n"), value("b_0"), value("k_b"));
    let (alpha, beta, gamma) = (value("alpha"), value("beta"), value("gamma"));
    let (chi_0, k_c) = (value("chi_0"), value("k_c"));

    // The same reaction set written by hand, with its hand-derived Jacobian.
    let react = move |u: &[f64], o: &mut [f64]| {
        let (cu, c, n) = (u[0], u[1], u[2]);
        let g = r * n / (k_n + n);
        let b = b_0 * k_b / (k_b + n);
        o[0] = (g - b) * cu;
        o[1] = alpha * cu - beta * c;
        o[2] = -gamma * g * cu;
        o[3] = b * cu;
    };
    let native = ClosureKernel::new(
        4,
        4,
        move |u: &[f64], _x, _y, _t, o: &mut [f64]| react(u, o),
        move |u: &[f64], _x, _y, _t, o: &mut [f64], j: &mut [f64]| {
            react(u, o);
            let (cu, n) = (u[0], u[2]);
            let g = r * n / (k_n + n);
            let dg = (r - g) / (k_n + n);
            let b = b_0 * k_b / (k_b + n);
            let db = -b / (k_b + n);
            j.fill(0.0);
            j[0] = g - b;
            j[2] = (dg - db) * cu;
            j[4] = alpha;
            j[5] = -beta;
            j[8] = -gamma * g;
            j[10] = -gamma * dg * cu;
            j[12] = b;
            j[14] = db * cu;
        },
    );
    let chi_native = ClosureKernel::new(
        4,
        1,
        move |u: &[f64], _x, _y, _t, o: &mut [f64]| o[0] = chi_0 * (1.0 + u[1] / k_c).ln(),
        move |u: &[f64], _x, _y, _t, o: &mut [f64], j: &mut [f64]| {
            o[0] = chi_0 * (1.0 + u[1] / k_c).ln();
            j.fill(0.0);
            j[1] = chi_0 / (k_c + u[1]);
        },
    );

    let mut seed = 0x2545_F491_4F6C_DD1Du64;
    let mut next = move || {
        seed ^= seed << 13;
        seed ^= seed >> 7;
        seed ^= seed << 17;
        (seed >> 11) as f64 / (1u64 << 53) as f64
    };
    let species: Vec<Vec<f64>> = (0..4)
        .map(|_| (0..NODES).map(|_| 2.0 * next()).collect())
        .collect();
    let x: Vec<f64> = (0..NODES).map(|_| next()).collect();

    let p = [r, k_n, b_0, k_b, alpha, beta, gamma];
    let loops = Loops { p, dispatch: false };
    let loops_dispatched = Loops { p, dispatch: true };
    let rhai_react = model.interpreted_reactions().expect("interpreted");
    let rhai_chi = model.interpreted_sensitivity(0).expect("interpreted");
    // The hand-written loops must be the same arithmetic as the compiled kernel, bit for bit.
    let bits = |k: &dyn BatchKernel| {
        let refs: Vec<&[f64]> = species.iter().map(Vec::as_slice).collect();
        let input = KernelInput {
            species: &refs,
            x: &x,
            y: &x,
            t: 0.0,
        };
        let mut out = vec![f64::NAN; 4 * NODES];
        let mut vals = vec![f64::NAN; 4 * NODES];
        let mut jac = vec![f64::NAN; 16 * NODES];
        let mut s = Scratch::new();
        k.eval(&input, &mut out, &mut s).expect("eval");
        k.eval_with_jacobian(&input, &mut vals, &mut jac, &mut s)
            .expect("eval");
        out.iter()
            .chain(&vals)
            .chain(&jac)
            .map(|v| v.to_bits())
            .collect::<Vec<u64>>()
    };
    assert!(
        bits(&loops) == bits(&compiled.reactions),
        "native loops and compiled kernel disagree"
    );
    assert!(
        bits(&loops_dispatched) == bits(&compiled.reactions),
        "dispatched native loops and compiled kernel disagree"
    );
    println!(
        "ns/node, median of {REPS} runs over {NODES} nodes (rhai: 5 runs over {RHAI_NODES} nodes)"
    );
    println!(
        "the compiled kernel picks AVX-512/AVX2/AVX loops at run time; \"native\" rows are built \
         for the default target, except \"loops dispatched\", which use the same dispatch"
    );
    run(
        &Case {
            name: "4-species reactions",
            native: &native,
            compiled: &compiled.reactions,
            rhai: &rhai_react,
        },
        &species,
        &x,
    );
    run(
        &Case {
            name: "4-species, native loops",
            native: &loops,
            compiled: &compiled.reactions,
            rhai: &rhai_react,
        },
        &species,
        &x,
    );
    run(
        &Case {
            name: "4-species, loops dispatched",
            native: &loops_dispatched,
            compiled: &compiled.reactions,
            rhai: &rhai_react,
        },
        &species,
        &x,
    );
    run(
        &Case {
            name: "sensitivity chi(c)",
            native: &chi_native,
            compiled: &compiled.chemotaxis[0].sensitivity,
            rhai: &rhai_chi,
        },
        &species,
        &x,
    );
}
