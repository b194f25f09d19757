//! Special-function values the checks compare with, each with its source.
//!
//! - Bessel functions Jₙ by the ascending series (Abramowitz & Stegun 1964, "Handbook of
//!   Mathematical Functions", 9.1.10) and Jₙ' by the recurrence 2Jₙ' = Jₙ₋₁ − Jₙ₊₁ (A&S 9.1.27,
//!   J₀' = −J₁); for the arguments used here (x < 8) forty terms are far past double precision.
//! - Zeros j'ₘ,₁ of Jₘ' from A&S table 9.5 (7 decimals as tabulated), refined by Newton's method
//!   on the series so the checks use full precision while the table value stays the check.
//! - erf from the `libm` crate (a port of the FreeBSD msun implementation, accurate to < 1 ulp).

/// Jₙ(x) by A&S 9.1.10: Σₖ (−x²/4)ᵏ (x/2)ⁿ / (k! (n+k)!).
pub fn bessel_j(n: u32, x: f64) -> f64 {
    let mut term = (0..n).fold(1.0, |t, k| t * (x / 2.0) / f64::from(k + 1));
    let mut sum = term;
    for k in 1..40u32 {
        term *= -(x * x / 4.0) / (f64::from(k) * f64::from(n + k));
        sum += term;
    }
    sum
}

/// Jₙ'(x) by A&S 9.1.27.
pub fn bessel_jp(n: u32, x: f64) -> f64 {
    if n == 0 {
        -bessel_j(1, x)
    } else {
        0.5 * (bessel_j(n - 1, x) - bessel_j(n + 1, x))
    }
}

/// Jₙ''(x) from Bessel's equation x²J'' + xJ' + (x² − n²)J = 0 (A&S 9.1.1).
fn bessel_jpp(n: u32, x: f64) -> f64 {
    let nn = f64::from(n * n);
    -(bessel_jp(n, x) / x) - (1.0 - nn / (x * x)) * bessel_j(n, x)
}

/// First positive zeros of Jₘ' as tabulated in A&S table 9.5 (7 decimals): m = 0, 1, 2.
/// (j'₀,₁ = j₁,₁, the first zero of J₁, since J₀' = −J₁.)
pub const TABLE_9_5_J_PRIME: [(u32, f64); 3] =
    [(0, 3.831_706_0), (1, 1.841_183_8), (2, 3.054_236_9)];

/// The tabulated zero of Jₘ' (A&S table 9.5) refined to full precision by Newton's method on
/// the series; `None` for an m the table here does not hold.
pub fn j_prime_zero(m: u32) -> Option<f64> {
    let (_, mut x) = TABLE_9_5_J_PRIME.iter().copied().find(|(k, _)| *k == m)?;
    for _ in 0..8 {
        x -= bessel_jp(m, x) / bessel_jpp(m, x);
    }
    Some(x)
}

/// The error function (libm).
pub fn erf(x: f64) -> f64 {
    libm::erf(x)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bessel_values_match_the_handbook_table() {
        // A&S table 9.1 (10 decimals; values recalled from memory): J₀(1), J₁(1), J₀(2),
        // J₁(2), J₂(1) = 0.1149034849.
        assert!((bessel_j(0, 1.0) - 0.765_197_686_6).abs() < 1e-10);
        assert!((bessel_j(1, 1.0) - 0.440_050_585_7).abs() < 1e-10);
        assert!((bessel_j(0, 2.0) - 0.223_890_779_1).abs() < 1e-10);
        assert!((bessel_j(1, 2.0) - 0.576_724_807_8).abs() < 1e-10);
        assert!((bessel_j(2, 1.0) - 0.114_903_484_9).abs() < 1e-10);
        // J₀' = −J₁ (A&S 9.1.28), and the recurrence against a central difference.
        assert!((bessel_jp(0, 1.0) + 0.440_050_585_7).abs() < 1e-10);
        let h = 1e-5;
        for n in 0..3 {
            let fd = (bessel_j(n, 2.5 + h) - bessel_j(n, 2.5 - h)) / (2.0 * h);
            assert!((bessel_jp(n, 2.5) - fd).abs() < 1e-9, "n = {n}");
        }
    }

    #[test]
    fn refined_zeros_stay_within_the_tables_rounding_and_are_zeros() {
        for (m, tab) in TABLE_9_5_J_PRIME {
            let z = j_prime_zero(m).expect("tabulated");
            assert!((z - tab).abs() <= 0.5e-7, "m = {m}: {z} vs {tab}");
            assert!(bessel_jp(m, z).abs() < 1e-14, "m = {m}");
        }
        assert!(j_prime_zero(7).is_none());
        // j'₀,₁ is also the first zero of J₁ (A&S table 9.5, j₁,₁ = 3.8317060).
        let z = j_prime_zero(0).expect("tabulated");
        assert!(bessel_j(1, z).abs() < 1e-14);
    }

    #[test]
    fn erf_matches_the_handbook_table() {
        // A&S table 7.1 (10 decimals; values recalled from memory).
        assert!((erf(0.5) - 0.520_499_877_8).abs() < 1e-10);
        assert!((erf(1.0) - 0.842_700_792_9).abs() < 1e-10);
        assert!((erf(2.0) - 0.995_322_265_0).abs() < 1e-10);
        // erfc(5) = 1.5374597944e-12 (recalled from memory): erf(5)² = 1 − 3.1e-12, so the
        // blow-up data's mass 10π·erf(5)² is 10π to 11 digits.
        assert!((libm::erfc(5.0) / 1.537_459_794_4e-12 - 1.0).abs() < 1e-9);
        assert!((erf(5.0) - (1.0 - libm::erfc(5.0))).abs() < 2e-16);
    }
}
