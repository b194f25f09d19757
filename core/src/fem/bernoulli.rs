//! The Bernoulli function B(x) = x / (eˣ − 1) of exponential fitting and its derivative,
//! evaluated without cancellation near 0 and without overflow for large |x|.
//!
//! Identities used (common practice): B(−x) = B(x) + x, B(0) = 1, B'(0) = −½, and
//! B'(−x) = −B'(x) − 1.

/// Below this |x| the Taylor series is used (its truncation error is below 1e-17 there).
const SERIES: f64 = 1e-3;

/// B(x) and B'(x) for x ≥ 0.
fn positive(x: f64) -> (f64, f64) {
    if x < SERIES {
        // B = 1 − x/2 + x²/12 − x⁴/720; B' = −1/2 + x/6 − x³/180.
        let x2 = x * x;
        (
            1.0 - 0.5 * x + x2 / 12.0 - x2 * x2 / 720.0,
            -0.5 + x / 6.0 - x2 * x / 180.0,
        )
    } else {
        let em1 = x.exp_m1();
        let inv = 1.0 / em1;
        let b = x * inv;
        // B' = B (1/x − eˣ/(eˣ − 1)) = (1 − B eˣ)/(eˣ − 1): one exponential and one division
        // serve both (this runs once per edge and step); finite for every x > 0 (B → 0 as
        // x → ∞; eˣ − 1 = ∞ gives B = 0).
        let d = if em1.is_finite() {
            inv * (1.0 - b * (1.0 + em1))
        } else {
            0.0
        };
        (b, d)
    }
}

/// `[(B(x), B'(x)), (B(−x), B'(−x))]` from one evaluation at |x|, through B(−x) = B(x) + x
/// and B'(−x) = −B'(x) − 1 (the flux of an edge needs both).
pub fn bernoulli_pair(x: f64) -> [(f64, f64); 2] {
    let (b, d) = positive(x.abs());
    let mirrored = (b + x.abs(), -d - 1.0);
    if x >= 0.0 {
        [(b, d), mirrored]
    } else {
        [mirrored, (b, d)]
    }
}

/// B(x) and B'(x).
pub fn bernoulli(x: f64) -> (f64, f64) {
    if x >= 0.0 {
        positive(x)
    } else {
        let (b, d) = positive(-x);
        (b - x, -d - 1.0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Reference: the defining formula evaluated directly where it is well conditioned.
    fn direct(x: f64) -> f64 {
        x / (x.exp() - 1.0)
    }

    /// Reference for small |x|: the generating function of the Bernoulli numbers,
    /// x/(eˣ − 1) = Σ Bₙ xⁿ/n! with B₁ = −1/2, B₂ = 1/6, B₄ = −1/30, B₆ = 1/42, B₈ = −1/30
    /// (Abramowitz & Stegun 1964, 23.1.1 and table 23.2).
    fn series(x: f64) -> f64 {
        let x2 = x * x;
        1.0 - x / 2.0 + x2 / 12.0 - x2 * x2 / 720.0 + x2 * x2 * x2 / 30240.0
            - x2 * x2 * x2 * x2 / 1_209_600.0
    }

    #[test]
    fn matches_the_definition_and_its_symmetry() {
        // Truncation after x⁸ is below 1e-20 for |x| ≤ 0.05; allow two ulps of rounding.
        for &x in &[-0.05, -0.01, -1e-4, 1e-4, 0.01, 0.05] {
            let (b, _) = bernoulli(x);
            assert!(
                (b - series(x)).abs() <= 4.5e-16,
                "{x}: {b} vs {}",
                series(x)
            );
        }
        // Where eˣ − 1 has no cancellation the definition itself is the reference.
        for &x in &[-30.0, -5.0, -0.7, 0.7, 2.0, 10.0, 40.0] {
            let (b, _) = bernoulli(x);
            assert!(
                (b - direct(x)).abs() <= 1e-14 * direct(x).abs().max(1e-300),
                "{x}"
            );
            let (bm, _) = bernoulli(-x);
            assert!((bm - (b + x)).abs() <= 1e-13 * bm.abs().max(1.0), "{x}");
        }
        assert_eq!(bernoulli(0.0), (1.0, -0.5));
    }

    #[test]
    fn pair_equals_two_single_evaluations() {
        for &x in &[
            -40.0, -3.0, -0.2, -1e-4, 0.0, 1e-4, 0.2, 3.0, 40.0, 800.0, -800.0,
        ] {
            let [p, m] = bernoulli_pair(x);
            let (b, d) = bernoulli(x);
            let (bm, dm) = bernoulli(-x);
            let close = |a: f64, b: f64| (a - b).abs() <= 1e-14 * a.abs().max(1.0);
            assert!(close(p.0, b) && close(p.1, d), "{x}: {p:?} vs {b}, {d}");
            assert!(close(m.0, bm) && close(m.1, dm), "{x}: {m:?} vs {bm}, {dm}");
        }
    }

    #[test]
    fn derivative_matches_central_differences_and_is_continuous() {
        // Reference: central differences (common practice).
        for &x in &[-20.0, -3.0, -1e-3, -5e-4, 0.0, 5e-4, 1e-3, 1.5, 20.0] {
            let h = 1e-6;
            let fd = (bernoulli(x + h).0 - bernoulli(x - h).0) / (2.0 * h);
            let (_, d) = bernoulli(x);
            assert!((d - fd).abs() < 1e-8, "x={x}: {d} vs {fd}");
        }
        let below = bernoulli(SERIES * (1.0 - 1e-12));
        let above = bernoulli(SERIES * (1.0 + 1e-12));
        assert!((below.0 - above.0).abs() < 1e-15 && (below.1 - above.1).abs() < 1e-13);
    }

    #[test]
    fn extreme_arguments_stay_finite() {
        for &x in &[-800.0, -1e6, 800.0, 1e6] {
            let (b, d) = bernoulli(x);
            assert!(b.is_finite() && d.is_finite(), "{x}: {b} {d}");
            assert!(b >= 0.0);
        }
        assert_eq!(bernoulli(1e6).0, 0.0);
        assert_eq!(bernoulli(-1e6).0, 1e6);
    }
}
