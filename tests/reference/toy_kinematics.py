"""Reference values for the quarry-toy generator's kinematics.

1. Two-body momentum p* = lambda^(1/2)(M^2, m1^2, m2^2) / (2M), with the Kallen
   function lambda(a, b, c) = a^2 + b^2 + c^2 - 2ab - 2ac - 2bc (PDG Review of
   Particle Physics, section "Kinematics"), evaluated exactly with sympy on the
   exact rationals of the float inputs and printed to 17 significant digits.
2. Two-body decays of moving parents: daughters built at rest along
   (cos theta, phi) and boosted to the lab with scikit-hep `vector`
   (`boost_p4`), an independent Lorentz-vector library.
3. Quantiles (25 %, 50 %, 75 %) of the relativistic Breit-Wigner mass
   distribution dP/dm ~ m / ((m^2 - M^2)^2 + M^2 Gamma^2), truncated to
   [M - 15 Gamma, M + 15 Gamma], for the W boson, by numerical integration
   (scipy.integrate.quad) and root finding (scipy.optimize.brentq) -- not by
   the closed-form inverse the generator uses.

Masses and widths come from the PDG mass/width table shipped in the
`particle` package (PyPI), the table crates/pdg follows; the Rust test checks
that the fixture's W mass and width equal quarry_pdg's.

Run from the repository root:  python tests/reference/toy_kinematics.py
Writes tests/reference/fixtures/toy_kinematics.json (deterministic).
"""

import json
import random

import numpy as np
import sympy
import vector
from particle import Particle
from scipy import integrate, optimize

def _gev(pdgid, what="mass"):
    return getattr(Particle.from_pdgid(pdgid), what) / 1000.0


W_MASS = _gev(24)
W_WIDTH = _gev(24, "width")
TOP, BOTTOM, Z, HIGGS = _gev(6), _gev(5), _gev(23), _gev(25)
MUON, ELECTRON = _gev(13), _gev(11)
CUTOFF = 15.0


def exact_pstar(m, m1, m2):
    M, a, b = (sympy.Rational(x) for x in (m, m1, m2))
    lam = M**4 + a**4 + b**4 - 2 * M**2 * a**2 - 2 * M**2 * b**2 - 2 * a**2 * b**2
    return float(sympy.N(sympy.sqrt(lam) / (2 * M), 30))


def two_body_cases():
    named = [
        (W_MASS, 0.0, 0.0),
        (TOP, BOTTOM, W_MASS),
        (900.0, TOP, W_MASS),
        (1400.0, TOP, Z),
        (1400.0, BOTTOM, HIGGS),
        (Z, BOTTOM, BOTTOM),
        (HIGGS, BOTTOM, BOTTOM),
        (W_MASS, MUON, 0.0),
        (W_MASS, ELECTRON, 0.0),
        (100.0, 49.999, 50.0),  # near threshold
        (1000.0, TOP, 0.0),
    ]
    rng = random.Random(20261201)
    for _ in range(40):
        m = rng.uniform(1.0, 2000.0)
        m1 = rng.uniform(0.0, 0.6 * m)
        m2 = rng.uniform(0.0, m - m1)
        named.append((m, m1, m2))
    return [
        {"m": m, "m1": m1, "m2": m2, "pstar": exact_pstar(m, m1, m2)}
        for (m, m1, m2) in named
    ]


def boosted_cases():
    rng = random.Random(7)
    out = []
    for _ in range(20):
        m = rng.uniform(50.0, 1500.0)
        m1 = rng.uniform(0.0, 0.4 * m)
        m2 = rng.uniform(0.0, 0.4 * m)
        px, py, pz = (rng.uniform(-1500.0, 1500.0) for _ in range(3))
        cos_t = rng.uniform(-1.0, 1.0)
        phi = rng.uniform(-3.0, 3.0)
        p = exact_pstar(m, m1, m2)
        sin_t = np.sqrt(1.0 - cos_t * cos_t)
        dx, dy, dz = p * sin_t * np.cos(phi), p * sin_t * np.sin(phi), p * cos_t
        parent = vector.obj(px=px, py=py, pz=pz, mass=m)
        d1 = vector.obj(px=dx, py=dy, pz=dz, mass=m1).boost_p4(parent)
        d2 = vector.obj(px=-dx, py=-dy, pz=-dz, mass=m2).boost_p4(parent)
        out.append(
            {
                "parent": [px, py, pz, float(parent.E)],
                "m": m,
                "m1": m1,
                "m2": m2,
                "cos_theta": cos_t,
                "phi": phi,
                "d1": [float(d1.px), float(d1.py), float(d1.pz), float(d1.E)],
                "d2": [float(d2.px), float(d2.py), float(d2.pz), float(d2.E)],
            }
        )
    return out


def breit_wigner_quantiles(mass, width):
    lo, hi = mass - CUTOFF * width, mass + CUTOFF * width

    def density(m):
        return m / ((m * m - mass * mass) ** 2 + (mass * width) ** 2)

    total, _ = integrate.quad(density, lo, hi, points=[mass], limit=200, epsabs=0, epsrel=1e-13)

    def cdf(x):
        v, _ = integrate.quad(density, lo, x, points=[mass] if lo < mass < x else None,
                              limit=200, epsabs=0, epsrel=1e-13)
        return v / total

    qs = {}
    for q in (0.25, 0.5, 0.75):
        qs[str(q)] = optimize.brentq(lambda x: cdf(x) - q, lo, hi, xtol=1e-12, rtol=1e-14)
    return {"mass": mass, "width": width, "lo": lo, "hi": hi, "quantiles": qs}


def main():
    fixture = {
        "source": "tests/reference/toy_kinematics.py (sympy, scikit-hep vector, scipy)",
        "two_body": two_body_cases(),
        "boosted": boosted_cases(),
        "breit_wigner_w": breit_wigner_quantiles(W_MASS, W_WIDTH),
    }
    with open("tests/reference/fixtures/toy_kinematics.json", "w") as f:
        json.dump(fixture, f, indent=1, sort_keys=True, default=lambda x: round(float(x), 17))
        f.write("\n")


if __name__ == "__main__":
    main()
