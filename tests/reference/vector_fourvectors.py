"""Reference values for crates/lorentz from scikit-hep `vector` (PyPI), an
independent Lorentz-vector library.

Draws 1200 random cases (fixed seed). Each case builds a four-vector `a` in
one of three ways -- Cartesian (px, py, pz, E), (pt, eta, phi, m) or
(pt, eta, phi, E) -- plus a massive vector `b` from (pt, eta, phi, m) and a
velocity `beta` (|beta| < 1), and records `vector`'s results for:
components, mass, pt, eta, rapidity, phi, single-vector transverse mass
(`mt`), transverse energy (`Et`), delta phi, delta R, opening angle
(`deltaangle`), Minkowski dot product, the sum a + b and its mass, the boost
of a by beta (`boost_beta3`), a in b's rest frame (`boostCM_of_p4`) and a
boosted out of b's rest frame (`boost_p4`).

The two-object transverse mass is not in `vector`; it is computed here with
numpy as mT^2 = (ET_a + ET_b)^2 - |pT_a + pT_b|^2, ET = sqrt(m^2 + pT^2),
from `vector`'s masses and transverse momenta (a different but equivalent
arrangement of the formula quarry uses).

Conventions of `vector` 1.9.0 noted for the comparison: phi in [-pi, pi]
(quarry: (-pi, pi]); deltaphi wrapped into [-pi, pi); eta and rapidity are
+-inf where pt = 0 or |pz| = E (quarry returns +-1e5): no case here has
pt = 0 or |pz| >= E; boost_beta3 / boost_p4 are active boosts (a vector at
rest boosted by beta moves along +beta), the same sign as quarry's `boost`;
a negative mass squared gives a negative mass (-sqrt(-m^2)), as in quarry.

Run from the repository root:  python tests/reference/vector_fourvectors.py
Writes tests/reference/fixtures/vector_fourvectors.json (deterministic).
"""

import json
import math

import numpy as np
import vector

SEED = 20260512
N_CASES = 1200


def components(v):
    return [float(v.px), float(v.py), float(v.pz), float(v.E)]


def draw_mass(rng):
    kind = rng.integers(0, 5)
    if kind == 0:
        return 0.0
    if kind == 1:
        return float(rng.choice([0.000510998950, 0.1056583755, 1.77693, 4.186]))
    if kind == 2:
        return float(rng.uniform(0.0, 5.0))
    return float(rng.uniform(5.0, 600.0))


def draw_pt_eta_phi(rng):
    pt = float(math.exp(rng.uniform(math.log(0.5), math.log(2500.0))))
    eta = float(rng.uniform(-4.5, 4.5))
    phi = float(rng.uniform(-math.pi, math.pi))
    return pt, eta, phi


def make_case(i, rng):
    build = ["xyzt", "ptetaphim", "ptetaphie"][i % 3]
    pt, eta, phi = draw_pt_eta_phi(rng)
    m = draw_mass(rng)
    if build == "xyzt":
        px, py, pz = (float(x) for x in rng.normal(0.0, 300.0, 3))
        e = math.sqrt(px * px + py * py + pz * pz + m * m)
        a_in = [px, py, pz, e]
        a = vector.obj(px=px, py=py, pz=pz, E=e)
    elif build == "ptetaphim":
        a_in = [pt, eta, phi, m]
        a = vector.obj(pt=pt, eta=eta, phi=phi, mass=m)
    else:
        p = pt * math.cosh(eta)
        # Energy at or above |p|: massive or (to rounding) massless.
        e = math.sqrt(p * p + m * m) * (1.0 + (0.0 if m == 0.0 else float(rng.uniform(0.0, 0.5))))
        a_in = [pt, eta, phi, e]
        a = vector.obj(pt=pt, eta=eta, phi=phi, E=e)
    bpt, beta_, bphi = draw_pt_eta_phi(rng)
    bm = float(rng.uniform(1.0, 900.0))
    b = vector.obj(pt=bpt, eta=beta_, phi=bphi, mass=bm)
    direction = rng.normal(0.0, 1.0, 3)
    direction /= np.linalg.norm(direction)
    speed = float(rng.choice([rng.uniform(0.0, 0.9), rng.uniform(0.9, 0.999)]))
    beta = [float(x) for x in direction * speed]
    bv = vector.obj(x=beta[0], y=beta[1], z=beta[2])

    s = a + b
    eta_a = math.sqrt(float(a.mass) ** 2 + float(a.pt) ** 2)
    et_b = math.sqrt(float(b.mass) ** 2 + float(b.pt) ** 2)
    ptsum2 = (float(a.px) + float(b.px)) ** 2 + (float(a.py) + float(b.py)) ** 2
    mt2 = (eta_a + et_b) ** 2 - ptsum2
    mt_pair = math.copysign(math.sqrt(abs(mt2)), mt2)
    return {
        "build": build,
        "a": a_in,
        "b": [bpt, beta_, bphi, bm],
        "beta": beta,
        "out": {
            "p4": components(a),
            "mass": float(a.mass),
            "pt": float(a.pt),
            "eta": float(a.eta),
            "rapidity": float(a.rapidity),
            "phi": float(a.phi),
            "mt": float(a.mt),
            "et": float(a.Et),
            "delta_phi": float(a.deltaphi(b)),
            "delta_r": float(a.deltaR(b)),
            "angle": float(a.deltaangle(b)),
            "dot": float(a.dot(b)),
            "sum": components(s),
            "sum_mass": float(s.mass),
            "boost": components(a.boost_beta3(bv)),
            "to_rest_of_b": components(a.boostCM_of_p4(b)),
            "from_rest_of_b": components(a.boost_p4(b)),
            "transverse_mass_numpy": mt_pair,
        },
    }


def main():
    rng = np.random.default_rng(SEED)
    cases = [make_case(i, rng) for i in range(N_CASES)]
    out = {
        "source": f"scikit-hep vector {vector.__version__} (PyPI)",
        "vector_version": vector.__version__,
        "numpy_version": np.__version__,
        "seed": SEED,
        "cases": cases,
    }
    dest = "tests/reference/fixtures/vector_fourvectors.json"
    # One case per line keeps diffs of the fixture readable.
    cases_text = ",\n".join(json.dumps(c, sort_keys=True) for c in cases)
    with open(dest, "w") as f:
        header = {k: v for k, v in out.items() if k != "cases"}
        f.write("{\n")
        for k in sorted(header):
            f.write(f"{json.dumps(k)}: {json.dumps(header[k])},\n")
        f.write('"cases": [\n' + cases_text + "\n]}\n")
    print(f"wrote {dest}: {len(cases)} cases, vector {vector.__version__}")


if __name__ == "__main__":
    main()
