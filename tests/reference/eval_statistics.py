"""Reference values for quarry-eval's statistics (scipy, numpy).

Writes tests/reference/fixtures/eval_statistics.json. Deterministic: fixed
inputs, no random numbers. Run from the repository root:

    python tests/reference/eval_statistics.py
"""
import json
import math
import pathlib

import numpy as np
from scipy import stats

ONE_SIGMA = math.erf(1 / math.sqrt(2))

out = {
    "source": "scipy " + __import__("scipy").__version__ + ", numpy " + np.__version__,
    # Standard deviation of a unit Gaussian truncated to [-2, 2].
    "truncnorm_std_2sigma": float(stats.truncnorm(-2.0, 2.0).std()),
    # Two-sided coverage of +-1 sigma and the tail beyond +-3 sigma.
    "normal_one_sigma_coverage": float(stats.norm.cdf(1) - stats.norm.cdf(-1)),
    "normal_outside_3sigma": float(2 * stats.norm.sf(3)),
    # Normal-consistent MAD scale 1 / Phi^-1(3/4).
    "mad_scale": float(1 / stats.norm.ppf(0.75)),
}

# Wilson score intervals at 68.27 % confidence (z = 1).
wilson = []
for k, n in [(0, 10), (3, 10), (10, 10), (1, 1), (74, 100), (493, 1000), (1, 2000), (1999, 2000)]:
    ci = stats.binomtest(k, n).proportion_ci(confidence_level=ONE_SIGMA, method="wilson")
    wilson.append({"k": k, "n": n, "lo": float(ci.low), "hi": float(ci.high)})
out["wilson_68"] = wilson

# Linear-interpolation quantiles (numpy's default method) of a fixed list.
values = [3.5, -1.25, 7.0, 0.0, 2.0, 11.5, 4.75, 4.75, -3.0, 9.0, 1.0]
qs = [0.0, 0.1, 0.25, 0.5, 0.68, 0.9, 1.0]
out["quantile_values"] = values
out["quantiles"] = [{"q": q, "value": float(np.quantile(values, q))} for q in qs]

path = pathlib.Path(__file__).parent / "fixtures" / "eval_statistics.json"
path.write_text(json.dumps(out, indent=2, sort_keys=True) + "\n")
print(f"wrote {path}")
