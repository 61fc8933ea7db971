//! The robust core estimate of one bin: centre and width of the Gaussian
//! core with their statistical uncertainties, and the tails beyond it.

use quarry_eval::stats::{gaussian_core, sorted_finite, CORE_WINDOW};
use serde::{Deserialize, Serialize};

use crate::Measured;

/// d(centre)/d(window centre) of the ±2σ window mean at the fixed point,
/// for a Gaussian: 2kφ(k)/(2Φ(k) − 1) at k = [`CORE_WINDOW`] = 2. A shift
/// of the window moves the mean of the values inside it by this fraction,
/// so the iteration's own noise is amplified by 1/(1 − this).
///
/// Derived here (differentiate the truncated mean with respect to the
/// window centre); the value is checked against scipy.stats.norm in the
/// tests (fixture `tests/reference/fixtures/calib_reference.json`).
pub const CENTER_FEEDBACK: f64 = 0.226_258_696_450_076_8;

/// d(σ_new)/d(σ) of the ±2σ window r.m.s. at the fixed point, for a
/// Gaussian: k·V′(k)/(2V(k)) with V(a) = 1 − 2aφ(a)/(2Φ(a) − 1) the variance
/// of a unit Gaussian truncated to ±a. A wider window holds a wider spread,
/// so the iteration amplifies the r.m.s. noise by 1/(1 − this). Checked
/// against scipy like [`CENTER_FEEDBACK`].
pub const WIDTH_FEEDBACK: f64 = 0.471_713_920_221_411_2;

/// One-sided tail probability of a unit Gaussian beyond
/// [`TAIL_SIGMAS`]: Φ(−2.5) (checked against `scipy.stats.norm.sf(2.5)`).
pub const GAUSSIAN_TAIL: f64 = 0.006_209_665_325_776_139;

/// The tails are counted beyond centre ± this many core σ.
pub const TAIL_SIGMAS: f64 = 2.5;

/// Centre, core width and tails of a distribution (e.g. measured/true
/// energy in one bin).
///
/// Invariants: `sigma > 0`, every number finite, `n_core <= n`, errors ≥ 0.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct CoreEstimate {
    /// Centre of the Gaussian core (mean inside the final ±2σ window).
    pub center: Measured,
    /// Core σ (window r.m.s. corrected for the truncation).
    pub sigma: Measured,
    /// Values used.
    pub n: usize,
    /// Values inside the final core window.
    pub n_core: usize,
    /// Fraction of values below centre − [`TAIL_SIGMAS`]·σ.
    pub tail_low: Measured,
    /// Fraction of values above centre + [`TAIL_SIGMAS`]·σ.
    pub tail_high: Measured,
}

impl CoreEstimate {
    /// The core estimate of `values` (non-finite values ignored): the
    /// iterative Gaussian core of [`quarry_eval::stats::gaussian_core`]
    /// (start at the median and the normal-consistent MAD, then the mean and
    /// truncation-corrected r.m.s. inside ±2σ until stable).
    ///
    /// Uncertainties: the centre's is r.m.s./√n_core and the width's
    /// √((m₄ − m₂²)/(4 m₂ n_core)) / 0.8796 (delta method on the window's
    /// second moment), each divided by 1 − feedback ([`CENTER_FEEDBACK`],
    /// [`WIDTH_FEEDBACK`]: the window follows its own estimate). The
    /// feedback constants are those of a Gaussian core; a test checks the
    /// stated errors against the spread of repeated estimates. Tail
    /// fractions carry the binomial error √(p(1−p)/n).
    ///
    /// `None` when fewer than 10 values fall in the core or the core has no
    /// spread.
    ///
    /// ```
    /// use quarry_calib::CoreEstimate;
    /// let v: Vec<f64> = (0..1000).map(|i| ((i * 7919) % 1000) as f64 / 1000.0).collect();
    /// let c = CoreEstimate::of(&v).unwrap();
    /// assert!((c.center.value - 0.5).abs() < 0.01);
    /// ```
    pub fn of(values: &[f64]) -> Option<CoreEstimate> {
        let sorted = sorted_finite(values.iter().copied());
        let core = gaussian_core(&sorted)?;
        let lo = sorted.partition_point(|&x| x < core.center - CORE_WINDOW * core.sigma);
        let hi = sorted.partition_point(|&x| x <= core.center + CORE_WINDOW * core.sigma);
        let window = &sorted[lo..hi];
        let n_core = window.len() as f64;
        let m2 = window
            .iter()
            .map(|x| (x - core.center).powi(2))
            .sum::<f64>()
            / n_core;
        let m4 = window
            .iter()
            .map(|x| (x - core.center).powi(4))
            .sum::<f64>()
            / n_core;
        let center_error = (m2 / n_core).sqrt() / (1.0 - CENTER_FEEDBACK);
        let rms_error = ((m4 - m2 * m2).max(0.0) / (4.0 * m2 * n_core)).sqrt();
        let sigma_error =
            rms_error / quarry_eval::stats::TRUNCATED_STD_RATIO / (1.0 - WIDTH_FEEDBACK);
        let n = sorted.len();
        let below = sorted.partition_point(|&x| x < core.center - TAIL_SIGMAS * core.sigma);
        let above = n - sorted.partition_point(|&x| x <= core.center + TAIL_SIGMAS * core.sigma);
        let estimate = CoreEstimate {
            center: Measured::new(core.center, center_error),
            sigma: Measured::new(core.sigma, sigma_error),
            n,
            n_core: window.len(),
            tail_low: binomial_fraction(below, n),
            tail_high: binomial_fraction(above, n),
        };
        estimate.is_finite().then_some(estimate)
    }

    fn is_finite(&self) -> bool {
        [self.center, self.sigma, self.tail_low, self.tail_high]
            .iter()
            .all(|m| m.value.is_finite() && m.error.is_finite())
            && self.sigma.value > 0.0
    }

    /// Excess of the low tail over a Gaussian's ([`GAUSSIAN_TAIL`]), with
    /// the tail's binomial error: the fraction of values in a non-Gaussian
    /// low-side tail (e.g. b jets losing a neutrino).
    pub fn low_tail_excess(&self) -> Measured {
        Measured::new(self.tail_low.value - GAUSSIAN_TAIL, self.tail_low.error)
    }

    /// Excess of the high tail over a Gaussian's.
    pub fn high_tail_excess(&self) -> Measured {
        Measured::new(self.tail_high.value - GAUSSIAN_TAIL, self.tail_high.error)
    }
}

/// k/n with the normal-approximation binomial error √(p(1−p)/n).
fn binomial_fraction(k: usize, n: usize) -> Measured {
    let p = k as f64 / n as f64;
    Measured::new(p, (p * (1.0 - p) / n as f64).sqrt())
}
