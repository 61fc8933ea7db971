//! Efficiencies k/n with exact (Clopper–Pearson) binomial intervals.
//!
//! The interval's ends are quantiles of beta distributions (C. J. Clopper and
//! E. S. Pearson, Biometrika 26 (1934) 404): lo = B⁻¹(α/2; k, n − k + 1),
//! hi = B⁻¹(1 − α/2; k + 1, n − k). The regularised incomplete beta
//! function is evaluated by its continued fraction (modified Lentz) and
//! inverted by bisection; tests compare with `scipy.stats.beta.ppf`.

use serde::{Deserialize, Serialize};

/// Two-sided coverage of ±1σ of a normal distribution (common practice:
/// the "68 %" interval), as in `quarry_eval::stats::ONE_SIGMA_COVERAGE`.
pub use quarry_eval::stats::ONE_SIGMA_COVERAGE;

/// A fraction k/n with its exact 68.27 % central interval.
///
/// Invariants: `k <= n`, `n > 0`, `lo <= value <= hi`, all in [0, 1].
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct Efficiency {
    /// Passing.
    pub k: u64,
    /// Total.
    pub n: u64,
    /// k/n.
    pub value: f64,
    /// Lower end of the Clopper–Pearson interval at [`ONE_SIGMA_COVERAGE`].
    pub lo: f64,
    /// Upper end.
    pub hi: f64,
}

impl Efficiency {
    /// `k` of `n` with its 68.27 % Clopper–Pearson interval; `None` if
    /// `n == 0` or `k > n`.
    ///
    /// ```
    /// let e = quarry_calib::Efficiency::new(70, 100).unwrap();
    /// assert_eq!(e.value, 0.7);
    /// assert!(e.lo < 0.7 && e.hi > 0.7);
    /// ```
    pub fn new(k: u64, n: u64) -> Option<Efficiency> {
        if n == 0 || k > n {
            return None;
        }
        let (lo, hi) = clopper_pearson(k, n, ONE_SIGMA_COVERAGE);
        Some(Efficiency {
            k,
            n,
            value: k as f64 / n as f64,
            lo,
            hi,
        })
    }

    /// Half the interval's length: a symmetric stand-in for the error.
    pub fn half_width(&self) -> f64 {
        0.5 * (self.hi - self.lo)
    }
}

/// Clopper–Pearson central interval of confidence `level` for k of n.
///
/// ```
/// let (lo, hi) = quarry_calib::binomial::clopper_pearson(0, 10, 0.95);
/// assert_eq!(lo, 0.0);
/// assert!((hi - 0.3084971078187608).abs() < 1e-9); // 1 − 0.025^(1/10)
/// ```
pub fn clopper_pearson(k: u64, n: u64, level: f64) -> (f64, f64) {
    let alpha = 1.0 - level;
    let (kf, nf) = (k as f64, n as f64);
    let lo = if k == 0 {
        0.0
    } else {
        beta_ppf(alpha / 2.0, kf, nf - kf + 1.0)
    };
    let hi = if k == n {
        1.0
    } else {
        beta_ppf(1.0 - alpha / 2.0, kf + 1.0, nf - kf)
    };
    (lo, hi)
}

/// Quantile of the beta distribution B(a, b): the x with I_x(a, b) = `q`,
/// by bisection to the last bit.
pub fn beta_ppf(q: f64, a: f64, b: f64) -> f64 {
    let (mut lo, mut hi) = (0.0_f64, 1.0_f64);
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if mid <= lo || mid >= hi {
            break;
        }
        if regularized_beta(mid, a, b) < q {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

/// The regularised incomplete beta function I_x(a, b), a, b > 0.
pub fn regularized_beta(x: f64, a: f64, b: f64) -> f64 {
    if x <= 0.0 {
        return 0.0;
    }
    if x >= 1.0 {
        return 1.0;
    }
    let ln_front = ln_gamma(a + b) - ln_gamma(a) - ln_gamma(b) + a * x.ln() + b * (1.0 - x).ln();
    let front = ln_front.exp();
    // The continued fraction converges fast for x < (a+1)/(a+b+2); use the
    // symmetry I_x(a, b) = 1 − I_{1−x}(b, a) otherwise.
    if x < (a + 1.0) / (a + b + 2.0) {
        front * beta_fraction(x, a, b) / a
    } else {
        1.0 - front * beta_fraction(1.0 - x, b, a) / b
    }
}

/// The continued fraction of I_x(a, b) by the modified Lentz method.
fn beta_fraction(x: f64, a: f64, b: f64) -> f64 {
    const TINY: f64 = 1e-300;
    let mut c = 1.0;
    let mut d = 1.0 - (a + b) * x / (a + 1.0);
    if d.abs() < TINY {
        d = TINY;
    }
    d = 1.0 / d;
    let mut h = d;
    for m in 1..10_000 {
        let m = m as f64;
        let m2 = 2.0 * m;
        for coefficient in [
            m * (b - m) * x / ((a + m2 - 1.0) * (a + m2)),
            -(a + m) * (a + b + m) * x / ((a + m2) * (a + m2 + 1.0)),
        ] {
            d = 1.0 + coefficient * d;
            if d.abs() < TINY {
                d = TINY;
            }
            c = 1.0 + coefficient / c;
            if c.abs() < TINY {
                c = TINY;
            }
            d = 1.0 / d;
            h *= d * c;
        }
        if (d * c - 1.0).abs() < 1e-16 {
            break;
        }
    }
    h
}

/// ln Γ(x) for x > 0 (Lanczos approximation, g = 7, n = 9; accurate to
/// about 1e-15 relative).
pub fn ln_gamma(x: f64) -> f64 {
    const G: f64 = 7.0;
    const COEFFICIENTS: [f64; 9] = [
        0.999_999_999_999_809_9,
        676.520_368_121_885_1,
        -1_259.139_216_722_402_8,
        771.323_428_777_653_1,
        -176.615_029_162_140_6,
        12.507_343_278_686_905,
        -0.138_571_095_265_720_12,
        9.984_369_578_019_572e-6,
        1.505_632_735_149_311_6e-7,
    ];
    if x < 0.5 {
        // Reflection: Γ(x)Γ(1 − x) = π / sin(πx).
        let pi = std::f64::consts::PI;
        return (pi / (pi * x).sin()).ln() - ln_gamma(1.0 - x);
    }
    let x = x - 1.0;
    let mut sum = COEFFICIENTS[0];
    for (i, c) in COEFFICIENTS.iter().enumerate().skip(1) {
        sum += c / (x + i as f64);
    }
    let t = x + G + 0.5;
    0.5 * (2.0 * std::f64::consts::PI).ln() + (x + 0.5) * t.ln() - t + sum.ln()
}
