"""One hand-built top-pair event (lepton + jets) with round transverse
momenta, for the command line's end-to-end check of HT, ST, the unclaimed
ST, the assignment and the composite masses.

Construction (all jets massless, the muon at its PDG mass from `particle`):
every object has a chosen round pT and azimuth; the pseudorapidities of the
second light quark, the hadronic b, the neutrino and the leptonic b are
solved with scipy's brentq so that, with scikit-hep `vector` sums,
  m(q1 q2)        = m_W,
  m(q1 q2 b_had)  = m_top,
  m(mu nu)        = m_W,
  m(mu nu b_lep)  = m_top,
with m_W, m_top from the `particle` package (PDG table). The neutrino's pT is
written as the MET. One extra radiation jet (pT 30) completes the event.
The fixture records every object and the masses recomputed with `vector`.

Run from the repository root:  python tests/reference/cli_ttbar_event.py
Writes tests/reference/fixtures/cli_ttbar_event.json (deterministic).
"""

import json
import math

import vector
from particle import Particle
from scipy.optimize import brentq

M_W = Particle.from_pdgid(24).mass / 1000.0
M_TOP = Particle.from_pdgid(6).mass / 1000.0
M_MU = Particle.from_pdgid(13).mass / 1000.0


def obj(pt, eta, phi, m=0.0):
    return vector.obj(pt=pt, eta=eta, phi=phi, mass=m)


def solve_eta(partner, pt, phi, m_target, m=0.0, lo=-4.0, hi=4.0):
    """eta of an object (pt, phi, m) such that m(partner + object) = m_target;
    of the two solutions, the one in [lo, hi]."""
    f = lambda eta: (partner + obj(pt, eta, phi, m)).mass - m_target
    return brentq(f, lo, hi, xtol=1e-15, rtol=1e-15, maxiter=500)


# Hadronic side.
q1 = dict(pt=60.0, eta=0.3, phi=0.5)
q2_pt, q2_phi = 50.0, 1.9
q2_eta = solve_eta(obj(**q1), q2_pt, q2_phi, M_W, lo=0.3, hi=4.0)
q2 = dict(pt=q2_pt, eta=q2_eta, phi=q2_phi)
w_had = obj(**q1) + obj(**q2)
bh_pt, bh_phi = 90.0, 0.0
bh_eta = solve_eta(w_had, bh_pt, bh_phi, M_TOP, lo=-4.0, hi=0.6)
b_had = dict(pt=bh_pt, eta=bh_eta, phi=bh_phi)

# Leptonic side.
mu = dict(pt=45.0, eta=-0.8, phi=2.6)
nu_pt, nu_phi = 40.0, -2.9
nu_eta = solve_eta(obj(**mu, m=M_MU), nu_pt, nu_phi, M_W, lo=-0.8, hi=4.0)
nu = dict(pt=nu_pt, eta=nu_eta, phi=nu_phi)
w_lep = obj(**mu, m=M_MU) + obj(**nu)
bl_pt, bl_phi = 70.0, -2.0
bl_eta = solve_eta(w_lep, bl_pt, bl_phi, M_TOP, lo=-4.0, hi=-0.1)
b_lep = dict(pt=bl_pt, eta=bl_eta, phi=bl_phi)

# Extra radiation jet, far from everything.
isr = dict(pt=30.0, eta=2.2, phi=-0.1)

t_had = w_had + obj(**b_had)
t_lep = w_lep + obj(**b_lep)

fixture = {
    "source": "hand-built ttbar event; masses by scikit-hep vector, PDG masses by particle",
    "m_w": M_W,
    "m_top": M_TOP,
    "m_mu": M_MU,
    # Input jet order (index = row order in the CSV): b_had, q1, q2, b_lep, isr.
    "jets": [
        dict(b_had, btag=0.9, truth="h.b"),
        dict(q1, btag=0.1, truth="h.W.q"),
        dict(q2, btag=0.2, truth="h.W.q"),
        dict(b_lep, btag=0.8, truth="l.b"),
        dict(isr, btag=0.05, truth="isr"),
    ],
    "muon": dict(mu, charge=-1, truth="l.W.mu"),
    "met": dict(pt=nu_pt, phi=nu_phi),
    "neutrino_eta": nu_eta,
    "masses": {
        "W_had": w_had.mass,
        "t_had": t_had.mass,
        "W_lep": w_lep.mass,
        "t_lep": t_lep.mass,
    },
    "neutrino_pz": obj(**nu).pz,
}


def rounded(x):
    if isinstance(x, float):
        return float(f"{x:.15g}")
    if isinstance(x, dict):
        return {k: rounded(v) for k, v in x.items()}
    if isinstance(x, list):
        return [rounded(v) for v in x]
    return x


with open("tests/reference/fixtures/cli_ttbar_event.json", "w") as f:
    json.dump(rounded(fixture), f, indent=1, sort_keys=True)
    f.write("\n")
