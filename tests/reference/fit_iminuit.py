"""Reference minima of quarry-fit's soft-constraint χ², computed with iminuit (MINUIT2).

Toy events: a pair of heavy quarks (fictional mass 1000 GeV) decaying to bW,
one W to two quarks and one to a muon and a neutrino — the "bW pair"
hypothesis: objects b_had, q1, q2, b_lep, muon; composites W_had = q1+q2,
W_lep = muon+nu, B_had = b_had+q1+q2, B_lep = b_lep+muon+nu; constraints
m(W_had) = m(W_lep) = m_W (Gaussian width Γ_W) and m(B_had) = m(B_lep) = M
with M a free common mass (Gaussian width 25 GeV each). Partons are exact
two-body decays; jets are smeared in energy, the muon in pt and MET in x, y
(with a correlated covariance) using the calorimeter form
σ(E)/E = a/√E ⊕ b/E ⊕ c per |η| bin and σ(pt)/pt = c ⊕ k·pt, with the
coefficients written to the fixture (they mirror quarry-resolution's
defaults; the Rust test builds its model from the fixture).

The χ² minimised here is *identical* to quarry_fit::KinematicChi2 in soft
mode, in the physical parameters θ = (s_1..s_5, px, py, pz, M):

    χ² = Σ_i ((s_i − 1)/r_i)² + dᵀ V⁻¹ d + Σ_t (c_t / w_t)²
    r_i = σ_i / x_i (jets: σ(E)/E at the measured E and η; muon: σ(pt)/pt)
    d   = (px − MET_x, py − MET_y), V = MET covariance
    c_t = (m_t² − M_t²) / (2 M_t), fitted objects s_i · p_i, neutrino
          E = sqrt(px² + py² + pz² + 1e-12)

starting from s = 1, the neutrino at (MET, smaller-|pz| W-mass root) and
M = max((m(B_had) + m(B_lep))/2, 1). W mass and width come from the
`particle` package (PDG table). The fixture holds the inputs and MINUIT's
minimum, parameter values and Hesse errors (errordef 1).

Run from the repository root:  python tests/reference/fit_iminuit.py
Writes tests/reference/fixtures/fit_iminuit.json (deterministic).
"""

import json
import math
import pathlib

import iminuit
import numpy as np
from iminuit import Minuit
from particle import Particle

SEED = 20240611
EVENTS = 120
HEAVY_MASS = 1000.0
EQUAL_WIDTH = 25.0
NU_REG = 1e-12
W = Particle.from_pdgid(24)
W_MASS = W.mass / 1000.0
W_WIDTH = W.width / 1000.0
B_QUARK_MASS = Particle.from_pdgid(5).mass / 1000.0
MUON_MASS = Particle.from_pdgid(13).mass / 1000.0

JET_BINS = [  # (abs_eta_max, stochastic, noise, constant)
    (1.3, 0.9, 4.0, 0.04),
    (2.5, 1.1, 5.0, 0.05),
    (5.0, 1.4, 6.0, 0.06),
]
MUON = (0.015, 0.0001)  # constant, per_gev
MET = (10.0, 0.5)  # floor, sqrt_sum_pt
MET_CORRELATION = 0.3


def jet_sigma(e, eta):
    a = abs(eta)
    b = next((b for b in JET_BINS if a < b[0]), JET_BINS[-1])
    e = max(e, 1e-3)
    rel2 = b[1] ** 2 / e + (b[2] / e) ** 2 + b[3] ** 2
    return e * math.sqrt(rel2)


def muon_sigma(pt):
    pt = max(pt, 1e-3)
    return pt * math.hypot(MUON[0], MUON[1] * pt)


def mdot(a, b):
    return a[3] * b[3] - a[0] * b[0] - a[1] * b[1] - a[2] * b[2]


def boost(p, beta):
    b2 = float(beta @ beta)
    if b2 == 0.0:
        return p.copy()
    gamma = 1.0 / math.sqrt(1.0 - b2)
    bp = float(beta @ p[:3])
    g2 = gamma * gamma / (gamma + 1.0)
    k = g2 * bp + gamma * p[3]
    return np.array([p[0] + k * beta[0], p[1] + k * beta[1], p[2] + k * beta[2], gamma * (p[3] + bp)])


def two_body(parent, m1, m2, rng):
    m = math.sqrt(mdot(parent, parent))
    lam = (m * m - (m1 + m2) ** 2) * (m * m - (m1 - m2) ** 2)
    p = math.sqrt(max(lam, 0.0)) / (2.0 * m)
    cos_t = rng.uniform(-1.0, 1.0)
    phi = rng.uniform(-math.pi, math.pi)
    sin_t = math.sqrt(1.0 - cos_t * cos_t)
    v = np.array([p * sin_t * math.cos(phi), p * sin_t * math.sin(phi), p * cos_t])
    a = np.array([*v, math.sqrt(p * p + m1 * m1)])
    b = np.array([*(-v), math.sqrt(p * p + m2 * m2)])
    beta = parent[:3] / parent[3]
    return boost(a, beta), boost(b, beta)


def resonance(m, rng):
    pt = rng.uniform(20.0, 300.0)
    eta = rng.uniform(-1.5, 1.5)
    phi = rng.uniform(-math.pi, math.pi)
    px, py, pz = pt * math.cos(phi), pt * math.sin(phi), pt * math.sinh(eta)
    return np.array([px, py, pz, math.sqrt(px * px + py * py + pz * pz + m * m)])


def pt_eta(p):
    pt = math.hypot(p[0], p[1])
    return pt, math.asinh(p[2] / pt)


def generate(rng):
    while True:
        had, lep = resonance(HEAVY_MASS, rng), resonance(HEAVY_MASS, rng)
        b_had, w_had = two_body(had, B_QUARK_MASS, W_MASS, rng)
        q1, q2 = two_body(w_had, 0.0, 0.0, rng)
        b_lep, w_lep = two_body(lep, B_QUARK_MASS, W_MASS, rng)
        mu, nu = two_body(w_lep, MUON_MASS, 0.0, rng)
        visible = [b_had, q1, q2, b_lep, mu]
        if all(pt_eta(p)[0] > 25.0 and abs(pt_eta(p)[1]) < 2.5 for p in visible):
            return visible, nu


def w_pz_start(mu, met):
    mw2, ml2 = W_MASS**2, max(mdot(mu, mu), 0.0)
    m = 0.5 * (mw2 - ml2) + mu[0] * met[0] + mu[1] * met[1]
    el2 = mu[3] ** 2
    et2 = el2 - mu[2] ** 2
    a = m * mu[2] / et2
    disc = a * a - (el2 * (met[0] ** 2 + met[1] ** 2) - m * m) / et2
    if disc < 0.0:
        return a
    r1, r2 = a - math.sqrt(disc), a + math.sqrt(disc)
    return r1 if abs(r1) <= abs(r2) else r2


def signed_sqrt(x):
    return math.sqrt(x) if x >= 0.0 else -math.sqrt(-x)


COMPOSITES = [([1, 2], False), ([4], True), ([0, 1, 2], False), ([3, 4], True)]


def make_chi2(objects, rel, met, cov):
    det = cov[0] * cov[2] - cov[1] ** 2
    vinv = (cov[2] / det, -cov[1] / det, cov[0] / det)

    def composite_m2(theta, c):
        members, with_nu = COMPOSITES[c]
        s = np.zeros(4)
        for i in members:
            s += theta[i] * objects[i]
        if with_nu:
            px, py, pz = theta[5], theta[6], theta[7]
            s += np.array([px, py, pz, math.sqrt(px * px + py * py + pz * pz + NU_REG)])
        return mdot(s, s)

    def chi2(theta):
        theta = np.asarray(theta, dtype=float)
        m_common = theta[8]
        if m_common <= 0.0:
            return 1e300
        f = sum(((theta[i] - 1.0) / rel[i]) ** 2 for i in range(5))
        dx, dy = theta[5] - met[0], theta[6] - met[1]
        f += dx * dx * vinv[0] + 2.0 * dx * dy * vinv[1] + dy * dy * vinv[2]
        for c, (target, width) in enumerate(
            [(W_MASS, W_WIDTH), (W_MASS, W_WIDTH), (m_common, EQUAL_WIDTH), (m_common, EQUAL_WIDTH)]
        ):
            ct = (composite_m2(theta, c) - target * target) / (2.0 * target)
            f += (ct / width) ** 2
        return f

    return chi2, composite_m2


def worked_events():
    """The toy events, deterministic: (objects, relative sigmas, MET, MET covariance, pz start).

    Shared with fit_hard_scipy.py, which checks the hard-constraint fit on the same events.
    """
    rng = np.random.default_rng(SEED)
    for _ in range(EVENTS):
        partons, nu = generate(rng)
        objects = []
        for k, p in enumerate(partons):
            pt, eta = pt_eta(p)
            if k < 4:
                sigma = jet_sigma(p[3], eta)
                scale = max(p[3] + sigma * rng.standard_normal(), 0.05 * p[3]) / p[3]
            else:
                sigma = muon_sigma(pt)
                scale = max(pt + sigma * rng.standard_normal(), 0.05 * pt) / pt
            objects.append(p * scale)
        rel = []
        for k, p in enumerate(objects):
            pt, eta = pt_eta(p)
            rel.append(jet_sigma(p[3], eta) / p[3] if k < 4 else muon_sigma(pt) / pt)
        sum_pt = sum(pt_eta(p)[0] for p in partons[:4])
        s = math.hypot(MET[0], MET[1] * math.sqrt(sum_pt))
        cov = [s * s, MET_CORRELATION * s * s, s * s]
        z1, z2 = rng.standard_normal(2)
        c = MET_CORRELATION
        met = [nu[0] + s * z1, nu[1] + s * (c * z1 + math.sqrt(1.0 - c * c) * z2)]
        pz0 = w_pz_start(objects[4], met)
        yield objects, rel, met, cov, pz0


def main():
    events = []
    for objects, rel, met, cov, pz0 in worked_events():
        s = math.sqrt(cov[0])
        chi2, composite_m2 = make_chi2(objects, rel, met, cov)
        start = [1.0] * 5 + [met[0], met[1], pz0, 0.0]
        m_had = signed_sqrt(composite_m2(np.array(start), 2))
        m_lep = signed_sqrt(composite_m2(np.array(start), 3))
        start[8] = max(0.5 * (m_had + m_lep), 1.0)
        m = Minuit(chi2, start, name=["s1", "s2", "s3", "s4", "s5", "px", "py", "pz", "M"])
        m.errordef = Minuit.LEAST_SQUARES
        m.errors = [*(0.5 * r for r in rel), math.sqrt(cov[0]), math.sqrt(cov[2]), 2.0 * s, EQUAL_WIDTH]
        m.strategy = 2
        m.tol = 1e-6
        m.migrad()
        m.migrad()
        m.hesse()
        events.append(
            {
                "objects": [[float(v) for v in p] for p in objects],
                "kinds": ["jet", "jet", "jet", "jet", "muon"],
                "relative_sigma": rel,
                "met": met,
                "met_cov": cov,
                "nu_start": [met[0], met[1], pz0],
                "common_start": start[8],
                "valid": bool(m.valid),
                "fval": float(m.fval),
                "values": [float(v) for v in m.values],
                "errors": [float(v) for v in m.errors],
            }
        )
    out = {
        "source": f"iminuit {iminuit.__version__} (MINUIT2), migrad ×2 + hesse, strategy 2, tol 1e-6",
        "w_mass": W_MASS,
        "w_width": W_WIDTH,
        "equal_width": EQUAL_WIDTH,
        "jet_bins": [list(b) for b in JET_BINS],
        "muon": list(MUON),
        "composites": [[m, nu] for m, nu in COMPOSITES],
        "parameters": ["s_b_had", "s_q1", "s_q2", "s_b_lep", "s_muon", "nu_px", "nu_py", "nu_pz", "M_common"],
        "events": events,
    }
    path = pathlib.Path("tests/reference/fixtures/fit_iminuit.json")
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(json.dumps(out, indent=1) + "\n")
    valid = sum(e["valid"] for e in events)
    print(f"wrote {len(events)} events ({valid} valid minima) to {path}")


if __name__ == "__main__":
    main()
