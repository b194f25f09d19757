//! Differential tests: compiled kernels against the script engine's own evaluation (values bit
//! for bit) and against finite differences (derivatives).
//!
//! References: the values oracle is the `rhai` crate's interpreter itself (version 1.27.0 from
//! crates.io, the reference implementation of the language); derivatives are checked with
//! central differences, whose O(h²) error bounds the tolerance (common practice).

use agarium_core::kernel::{BatchKernel, KernelInput, Scratch};
use agarium_scripting::{Model, Overrides};

/// A fixed pseudo-random sequence (SplitMix64) so failures reproduce.
struct Rng(u64);
impl Rng {
    fn next(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64
    }
}

const GROWTH: &str = r#"
param("r", 1.3); param("k", 0.7); param("a", 2.0); param("b", 0.4); param("g", 0.5);
param("chi0", 3.0); param("kc", 0.2);
fn g_of(n, r, k) { r * n / (k + n) }
fn death(n, b) {
    let d = b;
    if n > 0.5 { d *= 0.5; } else if n > 0.1 { d = d * 0.75 } else { d += 0.01; }
    d
}
fn react_u(u, n, r, k, b) { g_of(n, r, k) * u - death(n, b) * u }
fn react_c(u, c, a, b) { a * u - b * c ** 2 + 0.1 * c ** 1.5 }
fn react_n(u, n, r, k, g) { -g * g_of(n, r, k) * u }
fn react_w(u, n, b) { death(n, b) * u }
species("u", #{ kind: "mobile", diffusion: 0.1, reaction: Fn("react_u") });
species("c", #{ kind: "mobile", diffusion: 1.0, reaction: Fn("react_c") });
species("n", #{ kind: "mobile", diffusion: 0.5, reaction: Fn("react_n") });
species("w", #{ kind: "immobile", reaction: Fn("react_w") });
chemotaxis(#{ cells: "u", signal: "c", potential: "chi0 * ln(1.0 + c / kc)" });
"#;

const TRANSCENDENTAL: &str = r#"
param("p", 2.5); param("q", 3);
fn helper(z, p) { if z < 1 { return exp(-z * p); } sqrt(z) * ln(z + 1.0) }
fn f(u, v, p, q, x, y, t) {
    let s = sin(u * x) + cos(v * y) * tanh(t - u);
    let m = max(u, v) - min(u, 0.3) + abs(v - 2.0);
    let e = pow(u + 0.5, p) - (v + 1.0) ** q + log(u + 2.0) + log(v + 3.0, 2.0);
    let w = floor(u * 3.0) + ceil(v) + ceiling(u);
    let i = 7 / 2 + 2 ** 3 - (-7) / 2 + 7 % 3;
    s + m + e * 0.01 + w + i + helper(u * v, p)
}
fn h(u, v) { if u >= v && !(u == 1.0) || v != 0.5 { u / (v + 1) } else { 0 } }
species("u", #{ kind: "mobile", diffusion: 1.0, reaction: Fn("f") });
species("v", #{ kind: "mobile", diffusion: 1.0, reaction: Fn("h") });
"#;

const EXPRESSIONS: &str = r#"
param("alpha", 0.8); param("umax", 4.0);
fn bumpy(u) { let a = u; a = a * a; a -= 1.0; { let a = 3.0; a } + a }
species("u", #{ kind: "mobile", diffusion: 0.2,
    reaction: "alpha * u * (1.0 - u / umax) + bumpy(u) * 1e-3" });
species("c", #{ kind: "quasi-steady", diffusion: 1.0,
    reaction: |u, c, alpha| if u > c { alpha * (u - c) } else { -alpha * c * c } });
"#;

fn states(model: &Model, n: usize, seed: u64, grid: bool) -> (Vec<Vec<f64>>, Vec<f64>, Vec<f64>) {
    let ns = model.decl.species.len();
    let mut rng = Rng(seed);
    let mut sp = vec![Vec::with_capacity(n); ns];
    for col in sp.iter_mut() {
        for i in 0..n {
            // Mix of small, moderate, exact-integer and near-threshold values.
            let v = match i % 5 {
                0 => 10.0 * rng.next(),
                1 => rng.next(),
                // Exact half-integers hit floor/ceil jumps exactly: values only.
                2 if grid => (rng.next() * 4.0).floor() * 0.5,
                2 => 3.0 * rng.next(),
                3 => 0.5 + (rng.next() - 0.5) * 1e-15,
                _ => 1e-3 * rng.next(),
            };
            col.push(v);
        }
    }
    let x = (0..n).map(|_| 10.0 * rng.next() - 5.0).collect();
    let y = (0..n).map(|_| 10.0 * rng.next() - 5.0).collect();
    (sp, x, y)
}

fn same(a: f64, b: f64) -> bool {
    a.to_bits() == b.to_bits() || (a.is_nan() && b.is_nan())
}

fn check_values(src: &str, n: usize) {
    let model = Model::load("test.rhai", src, &Overrides::new()).unwrap();
    let compiled = model.compile().unwrap();
    let oracle = model.interpreted_reactions().unwrap();
    let (sp, x, y) = states(&model, n, 7, true);
    let refs: Vec<&[f64]> = sp.iter().map(Vec::as_slice).collect();
    let input = KernelInput {
        species: &refs,
        x: &x,
        y: &y,
        t: 0.75,
    };
    let no = compiled.reactions.n_outputs();
    let mut fast = vec![0.0; no * n];
    let mut slow = vec![0.0; no * n];
    compiled
        .reactions
        .eval(&input, &mut fast, &mut Scratch::new())
        .unwrap();
    oracle.eval(&input, &mut slow, &mut Scratch::new()).unwrap();
    let mut nan = 0;
    for k in 0..no * n {
        assert!(
            same(fast[k], slow[k]),
            "output {} node {}: compiled {:e} vs engine {:e}",
            k / n,
            k % n,
            fast[k],
            slow[k]
        );
        nan += fast[k].is_nan() as usize;
    }
    assert!(
        nan < no * n / 10,
        "too many NaN states for a meaningful test"
    );
    // Values from the Jacobian tape are the same bits as from the values tape.
    let mut vals = vec![0.0; no * n];
    let mut jac = vec![0.0; no * refs.len() * n];
    compiled
        .reactions
        .eval_with_jacobian(&input, &mut vals, &mut jac, &mut Scratch::new())
        .unwrap();
    assert!(vals.iter().zip(&fast).all(|(a, b)| same(*a, *b)));
}

fn check_derivatives(src: &str, n: usize) {
    let model = Model::load("test.rhai", src, &Overrides::new()).unwrap();
    let compiled = model.compile().unwrap();
    let k = &compiled.reactions;
    let (sp, x, y) = states(&model, n, 11, false);
    let ns = sp.len();
    let no = k.n_outputs();
    let refs: Vec<&[f64]> = sp.iter().map(Vec::as_slice).collect();
    let input = KernelInput {
        species: &refs,
        x: &x,
        y: &y,
        t: 0.75,
    };
    let mut val = vec![0.0; no * n];
    let mut jac = vec![0.0; no * ns * n];
    let mut scratch = Scratch::new();
    k.eval_with_jacobian(&input, &mut val, &mut jac, &mut scratch)
        .unwrap();
    let (mut checked, mut skipped) = (0, 0);
    for s in 0..ns {
        let h: Vec<f64> = sp[s].iter().map(|v| 1e-5 * v.abs().max(1e-2)).collect();
        let shifted = |sign: f64| {
            let mut sp2 = sp.clone();
            for (v, h) in sp2[s].iter_mut().zip(&h) {
                *v += sign * h;
            }
            sp2
        };
        let eval = |sp2: &Vec<Vec<f64>>, scratch: &mut Scratch| {
            let r: Vec<&[f64]> = sp2.iter().map(Vec::as_slice).collect();
            let inp = KernelInput {
                species: &r,
                x: &x,
                y: &y,
                t: 0.75,
            };
            let mut out = vec![0.0; no * n];
            k.eval(&inp, &mut out, scratch).unwrap();
            out
        };
        let (p, m) = (
            eval(&shifted(1.0), &mut scratch),
            eval(&shifted(-1.0), &mut scratch),
        );
        for o in 0..no {
            for i in 0..n {
                let d = jac[(o * ns + s) * n + i];
                let f0 = val[o * n + i];
                let (fp, fm) = (p[o * n + i], m[o * n + i]);
                if !(d.is_finite() && f0.is_finite() && fp.is_finite() && fm.is_finite()) {
                    skipped += 1;
                    continue;
                }
                let (fwd, bwd) = ((fp - f0) / h[i], (f0 - fm) / h[i]);
                let scale = d.abs().max(1.0);
                // A kink or jump (if/else, min, floor) between the sample points: not smooth here.
                if (fwd - bwd).abs() > 1e-3 * scale {
                    skipped += 1;
                    continue;
                }
                let central = (fp - fm) / (2.0 * h[i]);
                let tol = 1e-7 * scale.max(f0.abs() * 1e-2);
                assert!(
                    (d - central).abs() <= tol.max(1e-6 * scale),
                    "d out{o}/d s{s} at node {i}: symbolic {d:e}, central difference {central:e}"
                );
                checked += 1;
            }
        }
    }
    // Near-threshold states (one in five) sit on if/else kinks by design.
    assert!(
        checked > 3 * skipped,
        "checked {checked}, skipped {skipped}"
    );
}

#[test]
fn growth_model_values_bit_identical() {
    check_values(GROWTH, 4096);
}

#[test]
fn transcendental_values_bit_identical() {
    check_values(TRANSCENDENTAL, 4096);
}

#[test]
fn expression_terms_values_bit_identical() {
    check_values(EXPRESSIONS, 4096);
}

#[test]
fn growth_model_derivatives_match_finite_differences() {
    check_derivatives(GROWTH, 2048);
}

#[test]
fn transcendental_derivatives_match_finite_differences() {
    check_derivatives(TRANSCENDENTAL, 2048);
}

#[test]
fn expression_derivatives_match_finite_differences() {
    check_derivatives(EXPRESSIONS, 2048);
}

#[test]
fn sensitivity_values_and_derivative() {
    let model = Model::load("test.rhai", GROWTH, &Overrides::new()).unwrap();
    let compiled = model.compile().unwrap();
    let chem = &compiled.chemotaxis[0];
    let oracle = model.interpreted_sensitivity(0).unwrap();
    let (sp, x, y) = states(&model, 1000, 3, true);
    let refs: Vec<&[f64]> = sp.iter().map(Vec::as_slice).collect();
    let input = KernelInput {
        species: &refs,
        x: &x,
        y: &y,
        t: 0.0,
    };
    let (mut a, mut b) = (vec![0.0; 1000], vec![0.0; 1000]);
    let mut jac = vec![0.0; 4 * 1000];
    chem.sensitivity
        .eval_with_jacobian(&input, &mut a, &mut jac, &mut Scratch::new())
        .unwrap();
    oracle.eval(&input, &mut b, &mut Scratch::new()).unwrap();
    assert!(a.iter().zip(&b).all(|(p, q)| same(*p, *q)));
    // χ(c) = chi0 ln(1 + c/kc): χ'(c) = chi0 / (kc + c); only the signal column is nonzero.
    for i in 0..1000 {
        let c = sp[1][i];
        let expected = 3.0 / (0.2 + c);
        assert!((jac[1000 + i] - expected).abs() <= 1e-12 * expected.abs().max(1.0));
        assert_eq!(jac[i], 0.0);
    }
    assert!(chem.sensitivity.depends_on(0, 1));
    assert!(!chem.sensitivity.depends_on(0, 0));
}
