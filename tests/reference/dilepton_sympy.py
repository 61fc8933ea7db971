"""Reference quartics and solutions of the dilepton kinematic equations, computed with sympy.

The equations (L. Sonnenschein, Phys. Rev. D 73 (2006) 054015): two massless
neutrinos nu_a, nu_b; m(l_a + nu_a) = mW_a, m(l_a + nu_a + b_a) = mt_a, the
same for side b, and nu_a,T + nu_b,T = MET. For each random case this script,
independently of quarry's code:

1. takes every input as the exact rational of its float value;
2. solves the two linear mass equations of each side for the neutrino's E and
   pz in terms of its (px, py) (sympy.linsolve), and writes the mass shell
   E^2 = px^2 + py^2 + pz^2 as a polynomial in (x, y) = (px, py) of nu_a
   (side b with px = MET_x - x, py = MET_y - y);
3. eliminates y with sympy.resultant: a quartic in x, whose coefficients are
   written normalised to a largest magnitude of 1 (x in GeV);
4. finds its roots with sympy's Poly.nroots to 40 digits and writes the
   real ones;
5. for every real root solves for y (both conics must vanish), forms both
   neutrinos and keeps those with E > 0 on both sides: the physical
   solutions.

Cases: "exact" ones are built from random visible objects and random
neutrinos, the four masses and the MET then taken from their sums, so the
true neutrinos are a solution; "perturbed" ones move the MET of an exact case
by up to 30 GeV, so the count of solutions varies (0 to 4). Lepton and b-quark
masses from the `particle` package (PDG table).

Run from the repository root:  python tests/reference/dilepton_sympy.py
Writes tests/reference/fixtures/dilepton_sympy.json (deterministic).
"""

import json
import math
import random

import particle
import sympy
from particle import Particle

SEED = 20261204
N_CASES = 120
DIGITS = 40
OUT = "tests/reference/fixtures/dilepton_sympy.json"

LEPTON_MASSES = [
    0.0,
    Particle.from_pdgid(11).mass / 1000.0,
    Particle.from_pdgid(13).mass / 1000.0,
]
B_MASS = Particle.from_pdgid(5).mass / 1000.0

x, y = sympy.symbols("x y")
E, Z = sympy.symbols("E Z")


def exact(v):
    return sympy.Rational(v)


def four(pt, eta, phi, m):
    px, py, pz = pt * math.cos(phi), pt * math.sin(phi), pt * math.sinh(eta)
    return [px, py, pz, math.sqrt(px * px + py * py + pz * pz + m * m)]


def mass(*vs):
    s = [sum(v[i] for v in vs) for i in range(4)]
    return math.sqrt(max(s[3] ** 2 - s[0] ** 2 - s[1] ** 2 - s[2] ** 2, 0.0))


def dot(a, b):
    return a[3] * b[3] - a[0] * b[0] - a[1] * b[1] - a[2] * b[2]


def side_conic(lep, b, mw, mt, nx, ny):
    """Mass shell of the neutrino with transverse momentum (nx, ny) and (E, pz) from the linear equations."""
    lep = [exact(c) for c in lep]
    b = [exact(c) for c in b]
    mw, mt = exact(mw), exact(mt)
    nu = [nx, ny, Z, E]
    eq_w = sympy.Eq(2 * dot(lep, nu), mw**2 - dot(lep, lep))
    eq_t = sympy.Eq(2 * dot(b, nu), mt**2 - mw**2 - dot(b, b) - 2 * dot(lep, b))
    (sol,) = sympy.linsolve([eq_w, eq_t], [E, Z])
    e_expr, z_expr = sol
    conic = sympy.expand(e_expr**2 - nx**2 - ny**2 - z_expr**2)
    return conic, e_expr, z_expr


def make_case(rng, i):
    ml = [LEPTON_MASSES[(i + k) % 3] for k in range(2)]
    la = four(rng.uniform(20, 300), rng.uniform(-2.5, 2.5), rng.uniform(-math.pi, math.pi), ml[0])
    lb = four(rng.uniform(20, 300), rng.uniform(-2.5, 2.5), rng.uniform(-math.pi, math.pi), ml[1])
    ba = four(rng.uniform(25, 400), rng.uniform(-2.5, 2.5), rng.uniform(-math.pi, math.pi), B_MASS)
    bb = four(rng.uniform(25, 400), rng.uniform(-2.5, 2.5), rng.uniform(-math.pi, math.pi), B_MASS)
    na = four(rng.uniform(5, 300), rng.uniform(-3, 3), rng.uniform(-math.pi, math.pi), 0.0)
    nb = four(rng.uniform(5, 300), rng.uniform(-3, 3), rng.uniform(-math.pi, math.pi), 0.0)
    masses = [mass(la, na), mass(lb, nb), mass(la, na, ba), mass(lb, nb, bb)]
    met = [na[0] + nb[0], na[1] + nb[1]]
    kind = "exact"
    if i % 2 == 1:
        kind = "perturbed"
        met = [met[0] + rng.uniform(-30, 30), met[1] + rng.uniform(-30, 30)]
    return kind, la, lb, ba, bb, met, masses, na, nb


def f(v):
    return float(sympy.N(v, DIGITS))


def solve_case(la, lb, ba, bb, met, masses):
    mx, my = exact(met[0]), exact(met[1])
    conic_a, ea, za = side_conic(la, ba, masses[0], masses[2], x, y)
    conic_b, eb, zb = side_conic(lb, bb, masses[1], masses[3], mx - x, my - y)
    quartic = sympy.Poly(sympy.resultant(conic_a, conic_b, y), x)
    coeffs = [quartic.coeff_monomial(x**k) for k in range(5)]  # lowest power first
    big = max(abs(c) for c in coeffs)
    normalised = [f(c / big) for c in coeffs]
    roots = quartic.nroots(n=DIGITS, maxsteps=500)
    real = sorted(sympy.re(r) for r in roots if abs(sympy.im(r)) <= 1e-30 * (1 + abs(r)))
    solutions = []
    for xr in real:
        pa = sympy.Poly(conic_a.subs(x, xr), y)
        for yr in pa.nroots(n=DIGITS, maxsteps=500):
            if abs(sympy.im(yr)) > 1e-25 * (1 + abs(yr)):
                continue
            yr = sympy.re(yr)
            scale = sum(abs(c) for c in sympy.Poly(conic_b, x, y).coeffs())
            if abs(conic_b.subs({x: xr, y: yr})) > 1e-20 * scale * (1 + abs(xr) + abs(yr)) ** 2:
                continue
            vals = {x: xr, y: yr}
            e_a, e_b = ea.subs(vals), eb.subs(vals)
            if e_a <= 0 or e_b <= 0:
                continue
            sol = [f(xr), f(yr), f(za.subs(vals)), f(mx - xr), f(my - yr), f(zb.subs(vals))]
            if not any(max(abs(p - q) for p, q in zip(sol, s)) < 1e-9 for s in solutions):
                solutions.append(sol)
    return normalised, [f(r) for r in real], solutions


def main():
    rng = random.Random(SEED)
    cases = []
    for i in range(N_CASES):
        kind, la, lb, ba, bb, met, masses, na, nb = make_case(rng, i)
        quartic, real, solutions = solve_case(la, lb, ba, bb, met, masses)
        case = {
            "kind": kind,
            "lepton_a": la,
            "lepton_b": lb,
            "bjet_a": ba,
            "bjet_b": bb,
            "met": met,
            "masses": masses,
            "quartic": quartic,
            "real_roots": real,
            "solutions": solutions,
        }
        if kind == "exact":
            case["truth"] = [na[0], na[1], na[2], nb[0], nb[1], nb[2]]
        cases.append(case)
    doc = {
        "source": f"sympy {sympy.__version__} (resultant, 40-digit roots); "
        f"masses from particle {particle.__version__}",
        "seed": SEED,
        "cases": cases,
    }
    with open(OUT, "w") as fh:
        json.dump(doc, fh, indent=1)
        fh.write("\n")
    counts = [sum(len(c["solutions"]) == k for c in cases) for k in range(5)]
    print(f"wrote {len(cases)} cases to {OUT}; cases with 0..4 solutions: {counts}")


if __name__ == "__main__":
    main()
