"""Reference values for quarry-calib's estimators (scipy, numpy).

Writes tests/reference/fixtures/calib_reference.json. Deterministic: fixed
inputs and numpy's seeded PCG64 generator. Run from the repository root:

    python tests/reference/calib_reference.py

- Gaussian constants of the core estimate's error formulas (scipy.stats.norm).
- Resolution-form fits: scipy.optimize.curve_fit on fixed binned points
  (sigma = the points' errors, absolute_sigma=True), for the calorimeter
  form a/sqrt(E) (+) b/E (+) c, the tracker form c (+) k*pt and the MET form
  floor (+) s*sqrt(H).
- The iterative Gaussian core of a fixed sample, recomputed here with numpy
  (window +-2 sigma, r.m.s. divided by scipy's truncnorm(-2, 2).std()), and
  the moments its error formula uses (scipy.stats.moment).
- Clopper-Pearson intervals: scipy.stats.beta.ppf, cross-checked against
  scipy.stats.binomtest(...).proportion_ci(method="exact").
"""
import json
import math
import pathlib

import numpy as np
import scipy
from scipy import optimize, stats

ONE_SIGMA = math.erf(1 / math.sqrt(2))
K = 2.0  # core window in sigma

out = {"source": "scipy " + scipy.__version__ + ", numpy " + np.__version__}

# --- constants -------------------------------------------------------------
phi, Phi = stats.norm.pdf, stats.norm.cdf
D = 2 * Phi(K) - 1
out["center_feedback"] = float(2 * K * phi(K) / D)


def trunc_var(a):
    return float(stats.truncnorm(-a, a).var())


h = 1e-4
dV = (trunc_var(K + h) - trunc_var(K - h)) / (2 * h)
out["width_feedback"] = float(K * dV / (2 * trunc_var(K)))
out["gaussian_tail_2p5"] = float(stats.norm.sf(2.5))
out["truncnorm_std_2sigma"] = float(stats.truncnorm(-K, K).std())


# --- resolution-form fits --------------------------------------------------
def calorimeter(e, a, b, c):
    return np.sqrt(a**2 / e + b**2 / e**2 + c**2)


def tracker(pt, c, k):
    return np.sqrt(c**2 + (k * pt) ** 2)


def sqrt_sum(hsum, floor, s):
    return np.sqrt(floor**2 + s**2 * hsum)


def fit_case(name, f, xs, truth, rel_err, wiggle):
    xs = np.asarray(xs, dtype=float)
    ideal = f(xs, *truth)
    # A fixed, deterministic perturbation: the points are not on the curve.
    ys = ideal * (1 + wiggle * np.sin(1.7 * np.arange(len(xs)) + 0.3))
    errs = rel_err * ideal
    p0 = [1.1 * t + 0.01 for t in truth]
    popt, pcov = optimize.curve_fit(f, xs, ys, p0=p0, sigma=errs, absolute_sigma=True, maxfev=20000)
    chi2 = float(np.sum(((ys - f(xs, *popt)) / errs) ** 2))
    return {
        "name": name,
        "x": xs.tolist(),
        "y": ys.tolist(),
        "error": errs.tolist(),
        "params": [abs(float(p)) for p in popt],
        "errors": [float(math.sqrt(pcov[i, i])) for i in range(len(popt))],
        "chi2": chi2,
    }


energies = [35.0, 50.0, 70.0, 100.0, 140.0, 200.0, 280.0, 400.0, 560.0, 800.0, 1100.0, 1600.0]
out["fits"] = [
    fit_case("calorimeter", calorimeter, energies, (1.17, 5.2, 0.052), 0.03, 0.02),
    fit_case("calorimeter-wide", calorimeter, energies, (0.6, 9.0, 0.03), 0.05, 0.04),
    fit_case("tracker", tracker, [30.0, 45.0, 70.0, 100.0, 150.0, 220.0, 330.0, 500.0, 750.0],
             (0.012, 0.00011), 0.04, 0.03),
    fit_case("sqrt-sum", sqrt_sum, [50.0, 150.0, 250.0, 350.0, 450.0, 600.0, 800.0, 1100.0, 1600.0],
             (12.0, 0.65), 0.03, 0.02),
]

# --- iterative Gaussian core -----------------------------------------------
rng = np.random.default_rng(20261204)
core_values = np.concatenate([
    rng.normal(0.97, 0.11, 1800),
    rng.uniform(0.4, 0.8, 150),  # a low tail
    rng.normal(1.6, 0.05, 50),  # a high bump
])
core_values = np.round(core_values, 12)  # 12 digits survive the JSON round trip exactly
s = np.sort(core_values)
ratio = stats.truncnorm(-K, K).std()
center = float(np.median(s))
sigma = float(stats.median_abs_deviation(s, scale="normal"))
for _ in range(100):
    w = s[(s >= center - K * sigma) & (s <= center + K * sigma)]
    mean = float(np.mean(w))
    new_sigma = float(np.std(w) / ratio)
    done = abs(mean - center) <= 1e-9 * sigma and abs(new_sigma - sigma) <= 1e-9 * sigma
    center, sigma = mean, new_sigma
    if done:
        break
w = s[(s >= center - K * sigma) & (s <= center + K * sigma)]
m2 = float(np.mean((w - center) ** 2))
m4 = float(np.mean((w - center) ** 4))
n_core = len(w)
out["core"] = {
    "values": core_values.tolist(),
    "center": center,
    "sigma": sigma,
    "n_core": n_core,
    "central_m2_scipy": float(stats.moment(w, 2, center=center)),
    "central_m4_scipy": float(stats.moment(w, 4, center=center)),
    "center_error": math.sqrt(m2 / n_core) / (1 - out["center_feedback"]),
    "sigma_error": math.sqrt((m4 - m2 * m2) / (4 * m2 * n_core)) / ratio / (1 - out["width_feedback"]),
    "tail_low": float(np.mean(s < center - 2.5 * sigma)),
    "tail_high": float(np.mean(s > center + 2.5 * sigma)),
}

# --- Clopper-Pearson -------------------------------------------------------
cp = []
for k, n in [(0, 10), (3, 10), (10, 10), (1, 1), (70, 100), (1, 2000), (1999, 2000),
             (7012, 10000), (103, 10000), (35000, 50000)]:
    for level in (ONE_SIGMA, 0.95):
        alpha = 1 - level
        lo = 0.0 if k == 0 else float(stats.beta.ppf(alpha / 2, k, n - k + 1))
        hi = 1.0 if k == n else float(stats.beta.ppf(1 - alpha / 2, k + 1, n - k))
        exact = stats.binomtest(k, n).proportion_ci(confidence_level=level, method="exact")
        assert abs(exact.low - lo) < 1e-9 and abs(exact.high - hi) < 1e-9, (k, n, level)
        cp.append({"k": k, "n": n, "level": level, "lo": lo, "hi": hi})
out["clopper_pearson"] = cp

path = pathlib.Path(__file__).parent / "fixtures" / "calib_reference.json"
path.write_text(json.dumps(out, indent=2, sort_keys=True) + "\n")
print(f"wrote {path}")
