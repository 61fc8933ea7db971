"""Compares freshly regenerated reference fixtures with the saved ones.

`.ci/run` copies tests/reference/fixtures/ aside, re-runs every script in
tests/reference/, then runs

    python tests/reference/check_fixtures.py SAVED_DIR tests/reference/fixtures

and finally puts the saved fixtures back, so the Rust tests always read the
committed data.

Why not a byte-for-byte diff: on the same CPU the scripts reproduce their
fixtures exactly, but numpy picks SIMD kernels for sin, cos, exp, hypot ...
by what the CPU offers, so another machine may differ in the last bit or two
(seen: 1.2e-13 relative in a boost from scikit-hep `vector` between two
x86-64 machines), and MINUIT's stopping point and its Hesse errors move
within MINUIT's own tolerance when the inputs move by an ulp (seen: minimum
1e-10 relative, parameters 8e-6 of their error, errors 0.7 %).

So the structure (keys, lengths, strings, integers, booleans) must match
exactly and floating-point numbers within the tolerances below, each far
tighter than what the Rust tests then demand of quarry against the fixture.
"""

import json
import math
import sys
from pathlib import Path

# Default for every float: |a - b| <= RTOL * max(|a|, |b|) + ATOL.
# ATOL absorbs rounding noise on quantities that cancel to ~0 (e.g. the mass
# of a nearly massless vector computed from E^2 - p^2 at the GeV scale).
RTOL = 1e-10
ATOL = 1e-9

# Per fixture and key (the last dictionary key on the path): (rtol, atol).
# fit_iminuit.json: the Rust test asks for the minimum within 1e-4 relative,
# parameters within 1e-3 of MINUIT's error and errors within 5 %.
# fit_hard_scipy.json: the Rust test asks for the minimum within 1e-6
# relative, parameters within 1e-3 of the bordered-matrix σ and σ within
# 1e-3; SLSQP stops within its ftol (1e-12) and its constraint residuals
# and Lagrange residual are round-off, compared in absolute terms.
OVERRIDES = {
    # calib_reference.json: curve_fit (MINPACK) stops within its ftol/xtol of
    # 1.5e-8; the Rust test asks for agreement within 1e-3 of each error.
    "calib_reference.json": {
        "params": (1e-7, 0.0),
        "errors": (1e-7, 0.0),
        "chi2": (1e-7, 0.0),
    },
    "fit_iminuit.json": {
        "fval": (1e-8, 0.0),
        "errors": (2e-2, 0.0),
    },
    "fit_hard_scipy.json": {
        "fval": (1e-9, 1e-12),
        "errors": (1e-6, 0.0),
        "max_violation_gev": (0.0, 1e-9),
        "lagrange_residual": (0.0, 1e-5),
    },
}

# "values": compared in units of the saved error.
ERROR_SCALED = {
    "fit_iminuit.json": ("values", "errors", 1e-4),
    "fit_hard_scipy.json": ("values", "errors", 1e-5),
}


def compare(name, old, new, path, key, problems, errors_of=None):
    if isinstance(old, dict):
        if not isinstance(new, dict) or old.keys() != new.keys():
            problems.append(f"{path}: keys differ")
            return
        scaled = ERROR_SCALED.get(name)
        for k in old:
            errs = old.get(scaled[1]) if scaled and k == scaled[0] else None
            compare(name, old[k], new[k], f"{path}.{k}", k, problems, errs)
    elif isinstance(old, list):
        if not isinstance(new, list) or len(old) != len(new):
            problems.append(f"{path}: lengths differ")
            return
        for i, (a, b) in enumerate(zip(old, new)):
            err = errors_of[i] if errors_of is not None else None
            compare(name, a, b, f"{path}[{i}]", key, problems, err)
    elif isinstance(old, float) or isinstance(new, float):
        if isinstance(old, bool) or isinstance(new, bool):
            problems.append(f"{path}: {old!r} vs {new!r}")
            return
        a, b = float(old), float(new)
        if math.isnan(a) or math.isnan(b):
            if not (math.isnan(a) and math.isnan(b)):
                problems.append(f"{path}: {a!r} vs {b!r}")
            return
        if errors_of is not None:
            limit = ERROR_SCALED[name][2] * abs(float(errors_of))
        else:
            rtol, atol = OVERRIDES.get(name, {}).get(key, (RTOL, ATOL))
            limit = rtol * max(abs(a), abs(b)) + atol
        if not abs(a - b) <= limit:
            problems.append(f"{path}: saved {a!r}, regenerated {b!r} (limit {limit:.3g})")
    elif old != new:
        problems.append(f"{path}: saved {old!r}, regenerated {new!r}")


def main():
    saved, fresh = Path(sys.argv[1]), Path(sys.argv[2])
    failed = False
    names = sorted({p.name for p in saved.glob("*.json")} | {p.name for p in fresh.glob("*.json")})
    for name in names:
        if not (saved / name).exists():
            print(f"{name}: written by a script but not committed")
            failed = True
            continue
        if not (fresh / name).exists():
            print(f"{name}: committed but no script wrote it")
            failed = True
            continue
        old = json.loads((saved / name).read_text())
        new = json.loads((fresh / name).read_text())
        problems = []
        compare(name, old, new, "", None, problems)
        if problems:
            failed = True
            print(f"{name}: {len(problems)} difference(s) beyond tolerance, first ones:")
            for p in problems[:5]:
                print("   ", p)
        else:
            print(f"{name}: reproduced")
    sys.exit(1 if failed else 0)


if __name__ == "__main__":
    main()
