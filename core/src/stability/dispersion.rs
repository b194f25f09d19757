//! σ(k²): growth rates of Fourier modes about a homogeneous state.

use faer::Mat;
use serde::Serialize;

use super::{Linearisation, StabilityError};

/// The dispersion relation of one linearisation.
#[derive(Clone, Debug)]
pub struct Dispersion {
    lin: Linearisation,
}

/// The growth of one mode.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Growth {
    /// k².
    pub k2: f64,
    /// Largest real part of the eigenvalues.
    pub sigma: f64,
    /// Imaginary part of that eigenvalue (non-zero: an oscillatory mode).
    pub omega: f64,
}

/// The unstable band of k² (σ > 0) and its fastest-growing mode.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Band {
    /// Lowest unstable k² found (0 when the band reaches k = 0).
    pub k2_low: f64,
    /// Highest unstable k² found (infinite when σ stays positive up to the scan's end).
    pub k2_high: f64,
    /// The fastest-growing mode.
    pub fastest: Growth,
    /// Its wavelength 2π/k in the model's length unit (infinite at k = 0).
    pub wavelength: f64,
    /// The fastest mode grows with oscillation (σ complex), a wave instability.
    pub oscillatory: bool,
}

impl Dispersion {
    /// The relation of a linearisation.
    pub fn new(lin: Linearisation) -> Self {
        Self { lin }
    }

    /// The linearisation it was made from.
    pub fn linearisation(&self) -> &Linearisation {
        &self.lin
    }

    /// The matrix J − k²(D + T) with the quasi-steady rows eliminated (Schur complement), as
    /// a dense matrix over the dynamic species.
    fn matrix(&self, k2: f64) -> Option<Mat<f64>> {
        let n = self.lin.n;
        let a = |r: usize, s: usize| {
            let d = if r == s { self.lin.diffusion[r] } else { 0.0 };
            self.lin.jac[r * n + s] - k2 * (d + self.lin.cross[r * n + s])
        };
        let dynamic: Vec<usize> = (0..n).filter(|&s| self.lin.dynamic[s]).collect();
        let quasi: Vec<usize> = (0..n).filter(|&s| !self.lin.dynamic[s]).collect();
        let (nd, nq) = (dynamic.len(), quasi.len());
        let mut m = Mat::<f64>::from_fn(nd, nd, |i, j| a(dynamic[i], dynamic[j]));
        if nq > 0 {
            // m −= A_dq A_qq⁻¹ A_qd.
            let aqq = Mat::<f64>::from_fn(nq, nq, |i, j| a(quasi[i], quasi[j]));
            let aqd = Mat::<f64>::from_fn(nq, nd, |i, j| a(quasi[i], dynamic[j]));
            let adq = Mat::<f64>::from_fn(nd, nq, |i, j| a(dynamic[i], quasi[j]));
            let lu = aqq.full_piv_lu();
            let x = faer::linalg::solvers::Solve::solve(&lu, &aqd);
            if x.col_iter().any(|c| c.iter().any(|v| !v.is_finite())) {
                return None;
            }
            m -= &adq * &x;
        }
        Some(m)
    }

    /// Eigenvalues (re, im) of J − k²(D + T) over the dynamic species, largest real part
    /// first; `None` when the quasi-steady block is singular at this k² (e.g. k = 0 without
    /// decay).
    pub fn eigenvalues(&self, k2: f64) -> Result<Option<Vec<(f64, f64)>>, StabilityError> {
        let Some(m) = self.matrix(k2) else {
            return Ok(None);
        };
        if m.nrows() == 0 {
            return Ok(Some(Vec::new()));
        }
        let mut ev: Vec<(f64, f64)> = m
            .eigenvalues()
            .map_err(|_| StabilityError::Eigen(m.nrows()))?
            .iter()
            .map(|z| (z.re, z.im))
            .collect();
        ev.sort_by(|a, b| b.0.total_cmp(&a.0).then(b.1.total_cmp(&a.1)));
        Ok(Some(ev))
    }

    /// The mode of largest real part at `k2` (σ NaN, a neutral report, where the quasi-steady
    /// block is singular; −∞ without dynamic species).
    pub fn growth(&self, k2: f64) -> Result<Growth, StabilityError> {
        let (sigma, omega) = match self.eigenvalues(k2)? {
            None => (f64::NAN, 0.0),
            Some(ev) => ev
                .first()
                .map_or((f64::NEG_INFINITY, 0.0), |&(re, im)| (re, im.abs())),
        };
        Ok(Growth { k2, sigma, omega })
    }

    /// σ on `count` values of k² spaced logarithmically from `lo` to `hi` (after k² = 0).
    pub fn curve(&self, lo: f64, hi: f64, count: usize) -> Result<Vec<Growth>, StabilityError> {
        let mut v = vec![self.growth(0.0)?];
        let count = count.max(2);
        for i in 0..count {
            let k2 = lo * (hi / lo).powf(i as f64 / (count - 1) as f64);
            v.push(self.growth(k2)?);
        }
        Ok(v)
    }

    /// Whether `g` grows beyond round-off: σ above 1e-9 of the size of J − k²(D + T), so a
    /// neutral mode (an immobile species, a conserved quantity) does not count.
    pub fn grows(&self, g: &Growth) -> bool {
        let l = &self.lin;
        let jn = l.jac.iter().fold(0.0f64, |m, v| m.max(v.abs()));
        let dn = l
            .diffusion
            .iter()
            .chain(&l.cross)
            .fold(0.0f64, |m, v| m.max(v.abs()));
        g.sigma > 1e-9 * (jn + g.k2 * dn).max(1e-300)
    }

    /// The unstable band on the scan `curve` (from [`Dispersion::curve`]), its edges refined
    /// by bisection and the fastest mode by golden-section search; `None` when no mode grows
    /// ([`Dispersion::grows`]). The maximum is refined before deciding, so a band narrower
    /// than the scan's spacing (near a threshold) is still found.
    pub fn band(&self, curve: &[Growth]) -> Result<Option<Band>, StabilityError> {
        let Some(imax) = (0..curve.len())
            .filter(|&i| curve[i].sigma.is_finite())
            .max_by(|&a, &b| curve[a].sigma.total_cmp(&curve[b].sigma))
        else {
            return Ok(None);
        };
        let fastest = self.refine_max(curve, imax)?;
        if !self.grows(&fastest) {
            return Ok(None);
        }
        let grows = |g: &Growth| self.grows(g);
        // Edges of the connected unstable interval around the maximum.
        let mut lo_i = imax;
        while lo_i > 0 && grows(&curve[lo_i - 1]) {
            lo_i -= 1;
        }
        let mut hi_i = imax;
        while hi_i + 1 < curve.len() && grows(&curve[hi_i + 1]) {
            hi_i += 1;
        }
        // A band narrower than the scan: its edges lie between the maximum and its neighbours.
        let (lo_a, hi_b) = if grows(&curve[imax]) {
            (None, None)
        } else {
            (Some(fastest.k2), Some(fastest.k2))
        };
        let edge = |a: f64, b: f64| -> Result<f64, StabilityError> {
            // One end grows and the other does not.
            let (mut a, mut b) = (a, b);
            let up = self.grows(&self.growth(a)?);
            for _ in 0..60 {
                let m = if a > 0.0 {
                    (a * b).sqrt()
                } else {
                    0.5 * (a + b)
                };
                if self.grows(&self.growth(m)?) == up {
                    a = m;
                } else {
                    b = m;
                }
            }
            Ok(0.5 * (a + b))
        };
        let k2_low = match lo_a {
            Some(inside) if imax > 0 => edge(curve[imax - 1].k2, inside)?,
            Some(_) => 0.0,
            None if lo_i == 0 => 0.0,
            None => edge(curve[lo_i - 1].k2, curve[lo_i].k2)?,
        };
        let k2_high = match hi_b {
            Some(inside) if imax + 1 < curve.len() => edge(inside, curve[imax + 1].k2)?,
            Some(_) => f64::INFINITY,
            None if hi_i + 1 == curve.len() => f64::INFINITY,
            None => edge(curve[hi_i].k2, curve[hi_i + 1].k2)?,
        };
        let wavelength = if fastest.k2 > 0.0 {
            2.0 * std::f64::consts::PI / fastest.k2.sqrt()
        } else {
            f64::INFINITY
        };
        Ok(Some(Band {
            k2_low,
            k2_high,
            fastest,
            wavelength,
            oscillatory: fastest.omega > 1e-9 * fastest.sigma.abs().max(1e-300),
        }))
    }

    /// Golden-section search for the maximum of σ between the scan's neighbours of `imax`,
    /// in log k² (the scan is logarithmic); k² = 0 itself when the maximum is there.
    fn refine_max(&self, curve: &[Growth], imax: usize) -> Result<Growth, StabilityError> {
        Ok(if imax == 0 {
            curve[0]
        } else {
            let a = curve[imax - 1].k2.max(curve[1].k2 * 1e-3);
            let b = curve.get(imax + 1).map_or(curve[imax].k2 * 2.0, |g| g.k2);
            let (mut x0, mut x3) = (a.ln(), b.ln());
            let r = 0.5 * (5f64.sqrt() - 1.0);
            let f = |x: f64| self.growth(x.exp());
            let mut x1 = x3 - r * (x3 - x0);
            let mut x2 = x0 + r * (x3 - x0);
            let (mut f1, mut f2) = (f(x1)?.sigma, f(x2)?.sigma);
            for _ in 0..80 {
                if f1 > f2 {
                    x3 = x2;
                    x2 = x1;
                    f2 = f1;
                    x1 = x3 - r * (x3 - x0);
                    f1 = f(x1)?.sigma;
                } else {
                    x0 = x1;
                    x1 = x2;
                    f1 = f2;
                    x2 = x0 + r * (x3 - x0);
                    f2 = f(x2)?.sigma;
                }
            }
            let best = f(0.5 * (x1 + x2))?;
            if best.sigma >= curve[imax].sigma {
                best
            } else {
                curve[imax]
            }
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The chemotaxis–logistic lawn (1, α/β): J = [[−r, 0], [α, −β]], D = diag(D_u, D_v),
    /// T[u][v] = −χ·1.
    fn logistic(chi: f64, d_u: f64, d_v: f64, r: f64, alpha: f64, beta: f64) -> Dispersion {
        Dispersion::new(Linearisation {
            n: 2,
            reaction: vec![0.0, 0.0],
            jac: vec![-r, 0.0, alpha, -beta],
            diffusion: vec![d_u, d_v],
            cross: vec![0.0, -chi, 0.0, 0.0],
            dynamic: vec![true, true],
        })
    }

    /// For unit coefficients and χ = 5, J − k²(D + T) at k² = 1 is [[−2, 5], [1, −2]] with
    /// eigenvalues −2 ± √5 (direct computation, common practice).
    #[test]
    fn unit_coefficients_grow_at_sqrt5_minus_2() {
        let g = logistic(5.0, 1.0, 1.0, 1.0, 1.0, 1.0).growth(1.0).unwrap();
        assert!((g.sigma - (5f64.sqrt() - 2.0)).abs() < 1e-12, "{g:?}");
        assert_eq!(g.omega, 0.0);
    }

    /// The lawn is unstable iff αχ > (√(D_u β) + √(r D_v))², the fastest k²* = √(rβ/(D_u D_v))
    /// at threshold (Mimura & Tsujikawa, Physica A 230, 1996; Painter & Hillen, Physica D 240,
    /// 2011; both recalled from memory): band empty just below, present just above.
    #[test]
    fn the_band_opens_at_the_published_threshold() {
        let (d_u, d_v, r, alpha, beta): (f64, f64, f64, f64, f64) = (0.25, 1.0, 1.0, 1.0, 1.0);
        let chi_c = ((d_u * beta).sqrt() + (r * d_v).sqrt()).powi(2) / alpha;
        // 1e-6 either side: the band is then far narrower than the scan's spacing.
        for (chi, unstable) in [(chi_c * (1.0 - 1e-6), false), (chi_c * (1.0 + 1e-6), true)] {
            let d = logistic(chi, d_u, d_v, r, alpha, beta);
            let curve = d.curve(1e-3, 1e3, 400).unwrap();
            let band = d.band(&curve).unwrap();
            assert_eq!(band.is_some(), unstable, "chi {chi}: {band:?}");
            if let Some(b) = band {
                let k2 = (r * beta / (d_u * d_v)).sqrt();
                assert!((b.fastest.k2 / k2 - 1.0).abs() < 1e-3, "{b:?} vs {k2}");
                assert!(b.k2_low < k2 && k2 < b.k2_high);
                assert!(!b.oscillatory);
            }
        }
    }

    /// A quasi-steady signal: 0 = D_c Δc + αu − βc gives σ = −D_u k² + χ α k²/(D_c k² + β) for
    /// u_t = D_u Δu − χ∇·(u∇c) at ū = 1 without growth (Schur complement, common practice).
    #[test]
    fn quasi_steady_species_are_eliminated() {
        let (d_u, d_c, chi, alpha, beta) = (1.0, 1.0, 3.0, 1.0, 1.0);
        let d = Dispersion::new(Linearisation {
            n: 2,
            reaction: vec![0.0, 0.0],
            jac: vec![0.0, 0.0, alpha, -beta],
            diffusion: vec![d_u, d_c],
            cross: vec![0.0, -chi, 0.0, 0.0],
            dynamic: vec![true, false],
        });
        for k2 in [0.1, 0.5, 1.0, 4.0] {
            let want = -d_u * k2 + chi * alpha * k2 / (d_c * k2 + beta);
            let got = d.growth(k2).unwrap().sigma;
            assert!((got - want).abs() < 1e-12, "k2 {k2}: {got} vs {want}");
        }
    }
}
