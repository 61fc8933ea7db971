//! Robust location, width and fraction estimators used by the summaries.
//!
//! Every function ignores non-finite inputs (they are counted by the caller
//! if it cares) and returns `None` rather than a NaN when the data do not
//! allow an estimate.

/// Half-width of the core window of [`gaussian_core`], in units of the core σ.
pub const CORE_WINDOW: f64 = 2.0;

/// Standard deviation of a unit Gaussian truncated to ±[`CORE_WINDOW`]:
/// √(1 − 2aφ(a)/(2Φ(a) − 1)) at a = 2. Dividing the r.m.s. of the values
/// inside the window by this undoes the truncation.
///
/// The value is checked against `scipy.stats.truncnorm(-2, 2).std()` in the
/// crate's tests (fixture `tests/reference/fixtures/eval_statistics.json`).
pub const TRUNCATED_STD_RATIO: f64 = 0.879_625_661_034_239_8;

/// Scale from the median absolute deviation to σ for Gaussian data,
/// 1/Φ⁻¹(3/4) (common practice; checked against
/// `1 / scipy.stats.norm.ppf(0.75)` in the tests).
pub const MAD_TO_SIGMA: f64 = 1.482_602_218_505_602;

/// Fewest values inside the core window for [`gaussian_core`] to answer.
pub const MIN_CORE_VALUES: usize = 10;

/// Most iterations of [`gaussian_core`].
pub const MAX_CORE_ITERATIONS: usize = 100;

/// Two-sided normal coverage of ±1σ, 0.682689… (the "68 %" of a 1σ
/// interval; common practice).
pub const ONE_SIGMA_COVERAGE: f64 = 0.682_689_492_137_085_9;

/// Finite values of `values`, sorted ascending.
pub fn sorted_finite(values: impl IntoIterator<Item = f64>) -> Vec<f64> {
    let mut v: Vec<f64> = values.into_iter().filter(|x| x.is_finite()).collect();
    v.sort_by(f64::total_cmp);
    v
}

/// The `q` quantile (0 ≤ q ≤ 1) of ascending `sorted` values, by linear
/// interpolation between order statistics (the default of `numpy.quantile`,
/// "type 7"). `None` for an empty slice or `q` outside [0, 1].
///
/// ```
/// use quarry_eval::stats::quantile;
/// assert_eq!(quantile(&[1.0, 2.0, 3.0, 4.0], 0.5), Some(2.5));
/// assert_eq!(quantile(&[], 0.5), None);
/// ```
pub fn quantile(sorted: &[f64], q: f64) -> Option<f64> {
    if sorted.is_empty() || !(0.0..=1.0).contains(&q) {
        return None;
    }
    let h = q * (sorted.len() - 1) as f64;
    let lo = h.floor() as usize;
    let hi = (lo + 1).min(sorted.len() - 1);
    Some(sorted[lo] + (h - lo as f64) * (sorted[hi] - sorted[lo]))
}

/// The narrowest interval `[lo, hi]` between two values of ascending
/// `sorted` that contains at least `fraction` of them (⌈fraction·n⌉
/// values). `None` for fewer than two values or `fraction` outside (0, 1].
///
/// For a Gaussian sample and `fraction` = [`ONE_SIGMA_COVERAGE`] the
/// half-width tends to σ.
///
/// ```
/// use quarry_eval::stats::shortest_interval;
/// let v = [0.0, 10.0, 10.5, 11.0, 30.0];
/// assert_eq!(shortest_interval(&v, 0.6), Some((10.0, 11.0)));
/// ```
pub fn shortest_interval(sorted: &[f64], fraction: f64) -> Option<(f64, f64)> {
    let n = sorted.len();
    if n < 2 || !(fraction > 0.0 && fraction <= 1.0) {
        return None;
    }
    let k = ((fraction * n as f64).ceil() as usize).clamp(2, n);
    (0..=n - k)
        .map(|i| (sorted[i], sorted[i + k - 1]))
        .min_by(|a, b| (a.1 - a.0).total_cmp(&(b.1 - b.0)))
}

/// The result of [`gaussian_core`].
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Core {
    /// Centre: mean of the values inside the final window.
    pub center: f64,
    /// Core width σ: r.m.s. inside the window divided by
    /// [`TRUNCATED_STD_RATIO`]. Always > 0.
    pub sigma: f64,
    /// Values inside the final window.
    pub n_core: usize,
    /// Iterations used.
    pub iterations: usize,
}

impl Core {
    /// Statistical uncertainty of the centre, σ/√n_core (Gaussian
    /// approximation).
    pub fn center_error(&self) -> f64 {
        self.sigma / (self.n_core as f64).sqrt()
    }

    /// Fraction of ascending `sorted` values outside centre ± `k`·σ.
    pub fn outside_fraction(&self, sorted: &[f64], k: f64) -> f64 {
        if sorted.is_empty() {
            return 0.0;
        }
        let lo = self.center - k * self.sigma;
        let hi = self.center + k * self.sigma;
        let inside = sorted.partition_point(|&x| x <= hi) - sorted.partition_point(|&x| x < lo);
        (sorted.len() - inside) as f64 / sorted.len() as f64
    }
}

/// Iterative Gaussian-core estimate of a peak's position and width.
///
/// Start from the median and σ₀ = [`MAD_TO_SIGMA`] × MAD (the
/// normal-consistent median absolute deviation), then repeat: keep the
/// values within centre ± [`CORE_WINDOW`]·σ, set the centre to their mean
/// and σ to their r.m.s. divided by [`TRUNCATED_STD_RATIO`], until the
/// centre and σ move by less than 10⁻⁹ σ (at most
/// [`MAX_CORE_ITERATIONS`]). For a Gaussian peak on a broad background this
/// converges to the peak's mean and σ; tails beyond ±2σ do not pull it.
///
/// `sorted` must be ascending and finite (see [`sorted_finite`]). `None`
/// when fewer than [`MIN_CORE_VALUES`] values fall in the window or the
/// core has no spread (e.g. most values identical: a spike has no
/// Gaussian width).
///
/// ```
/// use quarry_eval::stats::gaussian_core;
/// // A symmetric peak plus two far outliers that do not move it.
/// let mut v: Vec<f64> = (0..200).map(|i| 100.0 + ((i as f64) - 99.5) * 0.05).collect();
/// v.push(-1e6);
/// v.push(1e6);
/// v.sort_by(f64::total_cmp);
/// let core = gaussian_core(&v).unwrap();
/// assert!((core.center - 100.0).abs() < 1e-9);
/// ```
pub fn gaussian_core(sorted: &[f64]) -> Option<Core> {
    let median = quantile(sorted, 0.5)?;
    let mut dev: Vec<f64> = sorted.iter().map(|x| (x - median).abs()).collect();
    dev.sort_by(f64::total_cmp);
    let mut center = median;
    let mut sigma = MAD_TO_SIGMA * quantile(&dev, 0.5)?;
    if sigma.partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater) {
        // More than half the values are identical: fall back on the r.m.s.
        let n = sorted.len() as f64;
        let mean = sorted.iter().sum::<f64>() / n;
        sigma = (sorted.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / n).sqrt();
        if !(sigma > 0.0 && sigma.is_finite()) {
            return None;
        }
    }
    let mut n_core = 0;
    for iteration in 1..=MAX_CORE_ITERATIONS {
        let lo = sorted.partition_point(|&x| x < center - CORE_WINDOW * sigma);
        let hi = sorted.partition_point(|&x| x <= center + CORE_WINDOW * sigma);
        let window = &sorted[lo..hi];
        n_core = window.len();
        if n_core < MIN_CORE_VALUES {
            return None;
        }
        let n = n_core as f64;
        let mean = window.iter().sum::<f64>() / n;
        let rms = (window.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / n).sqrt();
        let new_sigma = rms / TRUNCATED_STD_RATIO;
        if !(new_sigma > 0.0 && new_sigma.is_finite() && mean.is_finite()) {
            return None;
        }
        let converged =
            (mean - center).abs() <= 1e-9 * sigma && (new_sigma - sigma).abs() <= 1e-9 * sigma;
        center = mean;
        sigma = new_sigma;
        if converged {
            return Some(Core {
                center,
                sigma,
                n_core,
                iterations: iteration,
            });
        }
    }
    // Not converged (a window edge flips one value back and forth): the last
    // iterate is within one value's influence of either state.
    Some(Core {
        center,
        sigma,
        n_core,
        iterations: MAX_CORE_ITERATIONS,
    })
}

/// A fraction k/n with its binomial uncertainty.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Fraction {
    /// Successes.
    pub k: usize,
    /// Trials (> 0).
    pub n: usize,
}

impl Fraction {
    /// `k` of `n`; `None` if `n` is 0 or `k > n`.
    ///
    /// ```
    /// let f = quarry_eval::stats::Fraction::new(30, 40).unwrap();
    /// assert_eq!(f.value(), 0.75);
    /// assert!(quarry_eval::stats::Fraction::new(1, 0).is_none());
    /// ```
    pub fn new(k: usize, n: usize) -> Option<Fraction> {
        (n > 0 && k <= n).then_some(Fraction { k, n })
    }

    /// k/n.
    pub fn value(&self) -> f64 {
        self.k as f64 / self.n as f64
    }

    /// Normal-approximation standard error √(p(1−p)/n) (0 at p = 0 or 1:
    /// use [`Fraction::wilson`] for an interval there).
    pub fn std_error(&self) -> f64 {
        let p = self.value();
        (p * (1.0 - p) / self.n as f64).sqrt()
    }

    /// Wilson score interval at `z` standard deviations (z = 1 for the
    /// 68.27 % interval used in the summaries and plots). Stays inside
    /// [0, 1] and is not empty at k = 0 or k = n.
    ///
    /// ```
    /// let (lo, hi) = quarry_eval::stats::Fraction::new(0, 10).unwrap().wilson(1.0);
    /// assert_eq!(lo, 0.0);
    /// assert!(hi > 0.0 && hi < 0.2);
    /// ```
    pub fn wilson(&self, z: f64) -> (f64, f64) {
        let n = self.n as f64;
        let p = self.value();
        let z2 = z * z;
        let denom = 1.0 + z2 / n;
        let mid = (p + z2 / (2.0 * n)) / denom;
        let half = z * (p * (1.0 - p) / n + z2 / (4.0 * n * n)).sqrt() / denom;
        ((mid - half).max(0.0), (mid + half).min(1.0))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn quantile_endpoints_and_bad_q() {
        let v = [1.0, 5.0, 7.0];
        assert_eq!(quantile(&v, 0.0), Some(1.0));
        assert_eq!(quantile(&v, 1.0), Some(7.0));
        assert_eq!(quantile(&v, 0.25), Some(3.0));
        assert_eq!(quantile(&v, 1.5), None);
        assert_eq!(quantile(&v, f64::NAN), None);
    }

    #[test]
    fn shortest_interval_rejects_degenerate_input() {
        assert_eq!(shortest_interval(&[1.0], 0.5), None);
        assert_eq!(shortest_interval(&[1.0, 2.0], 0.0), None);
        assert_eq!(shortest_interval(&[1.0, 2.0], f64::NAN), None);
        assert_eq!(shortest_interval(&[1.0, 2.0], 1.0), Some((1.0, 2.0)));
    }

    #[test]
    fn core_needs_spread_and_enough_values() {
        assert!(gaussian_core(&[]).is_none());
        assert!(gaussian_core(&[3.0; 50]).is_none());
        assert!(gaussian_core(&[1.0, 2.0, 3.0]).is_none());
    }

    #[test]
    fn core_collapsing_onto_a_spike_gives_none_not_nan() {
        // 60 % identical values: MAD = 0, the r.m.s. start shrinks onto the
        // spike, whose width is zero: no estimate rather than σ = 0 or NaN.
        let mut v = vec![5.0; 60];
        v.extend((0..40).map(|i| 4.0 + i as f64 * 0.05));
        v.sort_by(f64::total_cmp);
        assert_eq!(gaussian_core(&v), None);
    }

    #[test]
    fn sorted_finite_drops_nan_and_infinity() {
        assert_eq!(
            sorted_finite([3.0, f64::NAN, 1.0, f64::INFINITY]),
            vec![1.0, 3.0]
        );
    }
}
