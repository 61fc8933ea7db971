"""Reference roots of the W-mass constraint for quarry-neutrino, computed exactly with sympy.

For each random case (charged lepton four-vector, MET vector, W mass) the script
builds, from the invariant-mass condition m^2(l + nu) = m_W^2 with a massless
neutrino whose transverse momentum is the MET, the polynomial in the neutrino pz,
solves it exactly with sympy (all inputs are taken as the exact rationals of
their float values), and evaluates the roots to 40 digits.

- Real case: both roots, checked against the unsquared mass equation.
- Complex case: the real part of the complex pair, and the MET vector nearest
  to the measured one on which the discriminant (sympy.discriminant of the same
  polynomial) vanishes, found by enumerating every stationary point of the
  distance on that curve (resultant of the Lagrange conditions, all roots) and
  keeping the nearest.

Masses of the W, electron, muon and tau come from the `particle` package (PDG
table); 5 GeV and 20 GeV leptons exaggerate the mass effect on purpose.

Run from the repository root:  python tests/reference/neutrino_sympy.py
Writes tests/reference/fixtures/neutrino_sympy.json (deterministic).
"""

import json
import math
import random

import particle
import sympy
from particle import Particle

SEED = 20240603
N_CASES = 300
DIGITS = 40
OUT = "tests/reference/fixtures/neutrino_sympy.json"

W_MASS = Particle.from_pdgid(24).mass / 1000.0  # MeV -> GeV
LEPTON_MASSES = [
    0.0,
    Particle.from_pdgid(11).mass / 1000.0,
    Particle.from_pdgid(13).mass / 1000.0,
    Particle.from_pdgid(15).mass / 1000.0,
    5.0,  # exaggerated, to make the mass effect visible
    20.0,  # exaggerated
]

z = sympy.Symbol("z")  # complex: the roots may be a complex pair
vx, vy = sympy.symbols("vx vy", real=True)


def exact(x):
    return sympy.Rational(x)  # exact value of the binary float


def pz_polynomial(lep, mx, my, mw):
    """Squared form of E_l * E_nu = k + pT_l . pT_nu + pz_l z, as a polynomial in z."""
    lpx, lpy, lpz, le = (exact(c) for c in lep)
    m2 = le**2 - lpx**2 - lpy**2 - lpz**2
    k = (exact(mw) ** 2 - m2) / 2
    mu = k + lpx * mx + lpy * my
    return sympy.expand(le**2 * (mx**2 + my**2 + z**2) - (mu + lpz * z) ** 2)


def mass_of_sum(lep, nx, ny, nz):
    lpx, lpy, lpz, le = (exact(c) for c in lep)
    en = sympy.sqrt(nx**2 + ny**2 + nz**2)
    return sympy.sqrt((le + en) ** 2 - (lpx + nx) ** 2 - (lpy + ny) ** 2 - (lpz + nz) ** 2)


def f(x):
    return float(sympy.N(x, DIGITS))


def nearest_zero_discriminant_met(lep, mx, my, mw):
    """Nearest (vx, vy) to (mx, my) with zero discriminant: all Lagrange stationary points."""
    disc = sympy.discriminant(sympy.Poly(pz_polynomial(lep, vx, vy, mw), z), z).as_expr()
    disc = sympy.expand(disc)
    emx, emy = exact(mx), exact(my)
    # Gradient of the distance parallel to the gradient of the constraint.
    parallel = sympy.expand((vx - emx) * sympy.diff(disc, vy) - (vy - emy) * sympy.diff(disc, vx))
    res = sympy.Poly(sympy.resultant(disc, parallel, vy), vx)
    best = None
    for rx in res.nroots(n=DIGITS, maxsteps=500):
        if abs(sympy.im(rx)) > 1e-20 * (1 + abs(rx)):
            continue
        rx = sympy.re(rx)
        for ry in sympy.Poly(disc.subs(vx, rx), vy).nroots(n=DIGITS, maxsteps=500):
            if abs(sympy.im(ry)) > 1e-20 * (1 + abs(ry)):
                continue
            ry = sympy.re(ry)
            scale = 1 + abs(rx) + abs(ry)
            grad = abs(sympy.diff(disc, vx).subs({vx: rx, vy: ry})) + abs(
                sympy.diff(disc, vy).subs({vx: rx, vy: ry})
            )
            if abs(parallel.subs({vx: rx, vy: ry})) > 1e-15 * grad * scale:
                continue
            d = sympy.sqrt((rx - emx) ** 2 + (ry - emy) ** 2)
            if best is None or d < best[0]:
                best = (d, rx, ry)
    assert best is not None
    return best


def make_case(rng, i):
    m = LEPTON_MASSES[i % len(LEPTON_MASSES)]
    pt = rng.uniform(5.0, 200.0)
    eta = 0.0 if i % 17 == 0 else rng.uniform(-2.5, 2.5)  # some leptons with pz = 0
    phi = rng.uniform(-math.pi, math.pi)
    lep = [pt * math.cos(phi), pt * math.sin(phi), pt * math.sinh(eta)]
    lep.append(math.sqrt(lep[0] ** 2 + lep[1] ** 2 + lep[2] ** 2 + m * m))
    met = 0.0 if i % 23 == 0 else rng.uniform(0.0, 150.0)  # some with zero MET
    mphi = rng.uniform(-math.pi, math.pi)
    mw = W_MASS if i % 5 else rng.uniform(40.0, 120.0)  # some off-shell W masses
    return lep, met * math.cos(mphi), met * math.sin(mphi), mw


def main():
    rng = random.Random(SEED)
    cases = []
    for i in range(N_CASES):
        lep, mx, my, mw = make_case(rng, i)
        poly = pz_polynomial(lep, exact(mx), exact(my), mw)
        roots = sympy.solve(poly, z)  # exact radicals
        values = [sympy.N(r, DIGITS) for r in roots]
        case = {"lepton": lep, "met": [mx, my], "w_mass": mw}
        if all(abs(sympy.im(v)) == 0 for v in values):
            values = sorted((sympy.re(v) for v in values), key=abs)
            if len(values) == 1:  # double root
                values = values * 2
            for v in values:  # no spurious root from squaring
                mass = mass_of_sum(lep, exact(mx), exact(my), v)
                assert abs(sympy.N(mass, DIGITS) - exact(mw)) < 1e-25 * mw, (i, v)
            case["kind"] = "real"
            case["pz"] = [f(v) for v in values]
        else:
            case["kind"] = "complex"
            case["pz_real_part"] = f(sympy.re(values[0]))
            d, ax, ay = nearest_zero_discriminant_met(lep, mx, my, mw)
            case["adjusted_met"] = [f(ax), f(ay)]
            case["met_shift"] = f(d)
        cases.append(case)
    doc = {
        "source": f"sympy {sympy.__version__} (exact roots); masses from particle {particle.__version__}",
        "seed": SEED,
        "cases": cases,
    }
    with open(OUT, "w") as fh:
        json.dump(doc, fh, indent=1)
        fh.write("\n")
    n_complex = sum(c["kind"] == "complex" for c in cases)
    print(f"wrote {len(cases)} cases ({n_complex} complex) to {OUT}")


if __name__ == "__main__":
    main()
