//! Value scales (linear or decimal-logarithmic), their tick marks and number labels.

/// A map from values to fractions of an axis, in `[0, 1]`.
#[derive(Clone, Copy, Debug)]
pub(super) struct Scale {
    /// Ends in the scale's own space (log10 of the values for a log scale).
    lo: f64,
    hi: f64,
    log: bool,
}

/// A tick: where it sits on the axis (fraction) and its label.
#[derive(Clone, Debug)]
pub(super) struct Tick {
    pub fraction: f64,
    pub label: String,
}

impl Scale {
    /// A linear scale over `[lo, hi]` (finite, `lo <= hi`); an empty range is widened around
    /// its value so a constant field still maps to the middle of the colour map.
    pub fn linear(lo: f64, hi: f64) -> Scale {
        let (lo, hi) = if hi > lo {
            (lo, hi)
        } else {
            let d = if lo.abs() < 1e-300 {
                1.0
            } else {
                lo.abs() * 0.05
            };
            (lo - d, hi + d)
        };
        Scale { lo, hi, log: false }
    }

    /// A log scale over `[lo, hi]` (finite, `0 < lo <= hi`), widened by 10 % each way if empty.
    pub fn log(lo: f64, hi: f64) -> Scale {
        let (a, b) = (lo.log10(), hi.log10());
        let (a, b) = if b > a {
            (a, b)
        } else {
            (a - 0.0414, b + 0.0414)
        };
        Scale {
            lo: a,
            hi: b,
            log: true,
        }
    }

    /// A log scale over the decimal exponents `[a, b]` (finite, `a <= b`; widened if empty).
    pub fn log_exponents(a: f64, b: f64) -> Scale {
        let (a, b) = if b > a {
            (a, b)
        } else {
            (a - 0.0414, b + 0.0414)
        };
        Scale {
            lo: a,
            hi: b,
            log: true,
        }
    }

    /// The scale's own coordinate of `v`: NaN stays NaN, values at or below zero on a log
    /// scale go to minus infinity (the bottom end after clamping).
    fn coordinate(&self, v: f64) -> f64 {
        if self.log {
            if v > 0.0 {
                v.log10()
            } else if v.is_nan() {
                f64::NAN
            } else {
                f64::NEG_INFINITY
            }
        } else {
            v
        }
    }

    /// Fraction of the axis for `v`, clamped to `[0, 1]`; NaN for NaN. Halves are taken first
    /// so ranges near ±`f64::MAX` do not overflow to infinity.
    pub fn fraction(&self, v: f64) -> f64 {
        self.unclamped(v).clamp(0.0, 1.0)
    }

    fn unclamped(&self, v: f64) -> f64 {
        let c = self.coordinate(v);
        (c / 2.0 - self.lo / 2.0) / (self.hi / 2.0 - self.lo / 2.0)
    }

    /// About `target` ticks with round labels (1, 2 or 5 × 10ᵏ steps; decades on log scales).
    pub fn ticks(&self, target: usize) -> Vec<Tick> {
        let target = target.max(2);
        if self.log {
            self.log_ticks(target)
        } else {
            linear_ticks(self.lo, self.hi, target)
                .into_iter()
                .map(|(v, label)| Tick {
                    fraction: self.unclamped(v),
                    label,
                })
                .collect()
        }
    }

    fn log_ticks(&self, target: usize) -> Vec<Tick> {
        let (d0, d1) = (self.lo.ceil(), self.hi.floor());
        if d1 - d0 >= 1.0 {
            // Every k-th decade, k chosen so that at most about `target` labels appear.
            let span = d1 - d0;
            let every = (span / target as f64).ceil().max(1.0);
            let mut out = Vec::new();
            let mut d = (d0 / every).ceil() * every;
            while d <= d1 && out.len() < 64 {
                out.push(Tick {
                    fraction: self.unclamped(10f64.powf(d)),
                    label: decade_label(d as i32),
                });
                d += every;
            }
            if out.len() >= 2 {
                return out;
            }
        }
        // Less than a decade: 1, 2, 5 × 10ᵏ inside the range, else the two ends.
        let mut out = Vec::new();
        let mut d = self.lo.floor();
        while d <= self.hi.ceil() && out.len() < 64 {
            for m in [1.0f64, 2.0, 5.0] {
                let c = d + m.log10();
                if c >= self.lo - 1e-12 && c <= self.hi + 1e-12 {
                    let v = 10f64.powf(c);
                    out.push(Tick {
                        fraction: self.unclamped(v),
                        label: significant(v, 3),
                    });
                }
            }
            d += 1.0;
        }
        if out.len() >= 2 {
            return out;
        }
        [self.lo, self.hi]
            .iter()
            .map(|&c| {
                let v = 10f64.powf(c);
                Tick {
                    fraction: self.unclamped(v),
                    label: significant(v, 3),
                }
            })
            .collect()
    }

    /// Decades `floor(lo) ..= ceil(hi)` of a log scale (empty for a linear one), for minor
    /// grid lines.
    pub fn decades(&self) -> Option<(i32, i32)> {
        self.log
            .then(|| (self.lo.floor() as i32, self.hi.ceil() as i32))
    }

    /// Fraction of the axis at the scale coordinate `c` (log10 value on a log scale).
    pub fn fraction_of_coordinate(&self, c: f64) -> f64 {
        (c / 2.0 - self.lo / 2.0) / (self.hi / 2.0 - self.lo / 2.0)
    }
}

/// Round ticks `k · step` in `[lo, hi]` with labels sharing one format.
fn linear_ticks(lo: f64, hi: f64, target: usize) -> Vec<(f64, String)> {
    let ends = || vec![(lo, significant(lo, 3)), (hi, significant(hi, 3))];
    // (hi - lo) may overflow near ±MAX; half the span over half the count does not.
    let raw = (hi / 2.0 - lo / 2.0) / (target as f64 / 2.0);
    if !(raw.is_finite() && raw > 0.0) {
        return ends();
    }
    let base = 10f64.powf(raw.log10().floor());
    if !(base.is_finite() && base > 0.0) {
        return ends();
    }
    let f = raw / base;
    let nice = if f < 1.5 {
        1.0
    } else if f < 3.5 {
        2.0
    } else if f < 7.5 {
        5.0
    } else {
        10.0
    };
    let step = nice * base;
    let (k0, k1) = ((lo / step - 1e-9).ceil(), (hi / step + 1e-9).floor());
    if !(step.is_finite() && k0.is_finite() && k1.is_finite()) || k1 - k0 > 100.0 || k1 < k0 {
        return ends();
    }
    let values: Vec<f64> = (0..=(k1 - k0) as i64)
        .map(|i| (k0 + i as f64) * step + 0.0)
        .collect();
    let largest = values.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let step_exp = step.log10().floor() as i32;
    let labels = values.iter().map(|&v| {
        let e = if largest > 0.0 {
            largest.log10().floor() as i32
        } else {
            0
        };
        if (-3..=5).contains(&e) {
            let decimals = (-step_exp).max(0) as usize;
            minus(format!("{v:.decimals$}"))
        } else {
            if v == 0.0 {
                return "0".to_string();
            }
            let decimals = (e - step_exp).clamp(0, 6) as usize;
            let m = v / 10f64.powi(e);
            minus(format!("{m:.decimals$}×10{}", superscript(e)))
        }
    });
    values.iter().copied().zip(labels).collect()
}

/// `v` with about `sig` significant digits, trailing zeros dropped; powers of ten as
/// `m×10ⁿ` outside 10⁻³ … 10⁶. Non-finite values print as they are.
pub(super) fn significant(v: f64, sig: i32) -> String {
    if !v.is_finite() {
        return format!("{v}");
    }
    if v == 0.0 {
        return "0".into();
    }
    let e = v.abs().log10().floor() as i32;
    if (-3..=5).contains(&e) {
        let decimals = (sig - 1 - e).max(0) as usize;
        minus(trim(format!("{v:.decimals$}")))
    } else {
        let decimals = (sig - 1).max(0) as usize;
        let m = v / 10f64.powi(e);
        minus(format!(
            "{}×10{}",
            trim(format!("{m:.decimals$}")),
            superscript(e)
        ))
    }
}

fn trim(s: String) -> String {
    if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    }
}

/// The typographic minus sign instead of the hyphen.
fn minus(s: String) -> String {
    s.replace('-', "−")
}

fn decade_label(d: i32) -> String {
    match d {
        -2 => "0.01".into(),
        -1 => "0.1".into(),
        0 => "1".into(),
        1 => "10".into(),
        2 => "100".into(),
        3 => "1000".into(),
        _ => format!("10{}", superscript(d)),
    }
}

fn superscript(e: i32) -> String {
    e.to_string()
        .chars()
        .map(|c| match c {
            '-' => '⁻',
            '0' => '⁰',
            '1' => '¹',
            '2' => '²',
            '3' => '³',
            '4' => '⁴',
            '5' => '⁵',
            '6' => '⁶',
            '7' => '⁷',
            '8' => '⁸',
            _ => '⁹',
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn linear_ticks_are_round_and_inside() {
        let t = linear_ticks(0.0, 1.0, 6);
        let labels: Vec<&str> = t.iter().map(|(_, l)| l.as_str()).collect();
        assert_eq!(labels, ["0.0", "0.2", "0.4", "0.6", "0.8", "1.0"]);
        let t = linear_ticks(-3e-7, 2e-7, 5);
        assert!(t.iter().any(|(_, l)| l == "−2×10⁻⁷"), "{t:?}");
    }

    #[test]
    fn huge_ranges_do_not_overflow() {
        let s = Scale::linear(-f64::MAX, f64::MAX);
        assert_eq!(s.fraction(0.0), 0.5);
        assert_eq!(s.fraction(f64::INFINITY), 1.0);
        let t = s.ticks(6);
        assert!(
            t.len() >= 2 && t.iter().all(|t| t.fraction.is_finite()),
            "{t:?}"
        );
    }

    #[test]
    fn constant_ranges_are_widened() {
        let s = Scale::linear(3.0, 3.0);
        assert_eq!(s.fraction(3.0), 0.5);
        let s = Scale::linear(0.0, 0.0);
        assert_eq!(s.fraction(0.0), 0.5);
        let s = Scale::log(2.0, 2.0);
        assert!((s.fraction(2.0) - 0.5).abs() < 1e-12);
        assert!(s.ticks(5).len() >= 2);
    }

    #[test]
    fn log_ticks_are_decades() {
        let s = Scale::log(1e-6, 1e-1);
        let labels: Vec<String> = s.ticks(8).into_iter().map(|t| t.label).collect();
        assert_eq!(labels, ["10⁻⁶", "10⁻⁵", "10⁻⁴", "10⁻³", "0.01", "0.1"]);
        assert!(s.fraction(0.0) == 0.0 && s.fraction(f64::NAN).is_nan());
    }

    #[test]
    fn significant_digits() {
        assert_eq!(significant(12.5, 4), "12.5");
        assert_eq!(significant(0.1 + 0.2, 4), "0.3");
        assert_eq!(significant(-2.5e-8, 3), "−2.5×10⁻⁸");
    }
}
