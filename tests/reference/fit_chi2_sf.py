"""Reference values of the χ² survival function for quarry-fit.

Writes tests/reference/fixtures/fit_chi2_sf.json with scipy.stats.chi2.sf
(chi2, ndf) on a fixed grid; crates/fit/tests/reference.rs compares
quarry_fit::chi2_survival against it. Run from the repository root:

    python tests/reference/fit_chi2_sf.py
"""

import json
import pathlib

import scipy
from scipy.stats import chi2

NDFS = [1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 12, 15, 20, 30, 50]
CHI2S = [0.001, 0.01, 0.1, 0.5, 1.0, 2.0, 3.0, 5.0, 7.5, 10.0, 15.0, 20.0, 30.0, 50.0, 80.0, 120.0]

cases = [
    {"chi2": x, "ndf": k, "sf": float(chi2.sf(x, k))}
    for k in NDFS
    for x in CHI2S
]
out = {
    "source": f"scipy {scipy.__version__} scipy.stats.chi2.sf",
    "cases": cases,
}
path = pathlib.Path("tests/reference/fixtures/fit_chi2_sf.json")
path.parent.mkdir(parents=True, exist_ok=True)
path.write_text(json.dumps(out, indent=1) + "\n")
print(f"wrote {len(cases)} cases to {path}")
