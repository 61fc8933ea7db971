"""Reference best assignments for quarry-assign's `ttbar-ljets` preset, by
brute force with scikit-hep `vector` for every invariant mass.

Events: a top pair decaying to b q q' + b mu nu, built with numpy from
isotropic two-body decays (PDG masses from the `particle` package), with jet
energies smeared by 10 %, MET = neutrino pT smeared by 10 GeV, one extra jet,
and b-tag scores 0.9 (b) / 0.1 (light) with one random flip. Jets are shuffled
and listed in descending pt so positions equal quarry's leading-jet order.

For each event every assignment (b_had, {q1, q2}, b_lep) of the jets allowed by
the b-tag working point (score > 0.5 is tagged; b roles need tagged jets, q
roles untagged) and each real root of the W-mass quadratic for the neutrino pz
is scored with
    chi2 = ((m(q1 q2) - mW)/10)^2 + ((m(q1 q2 b_had) - mt)/15)^2
         + ((m(mu nu b_lep) - mt)/20)^2,
the widths of the preset. The neutrino roots come from numpy.roots on
(E^2 - pz^2) z^2 - 2 k pz z + (E^2 pT^2 - k^2) = 0 with
k = (mW^2 - m_mu^2)/2 + pT(mu).pT(nu); only events with two real roots are kept.
The fixture records the inputs, the masses used, and the three lowest chi2
with the best assignment (jet positions, root index by ascending |pz|).

Run from the repository root:  python tests/reference/assign_ttbar.py
Writes tests/reference/fixtures/assign_ttbar.json (deterministic).
"""

import itertools
import json

import numpy as np
import vector
from particle import Particle

MW = Particle.from_pdgid(24).mass / 1000.0
MT = Particle.from_pdgid(6).mass / 1000.0
MB = Particle.from_pdgid(5).mass / 1000.0
MMU = Particle.from_pdgid(13).mass / 1000.0

rng = np.random.default_rng(20240611)


def lab(p4):
    return vector.obj(px=p4[0], py=p4[1], pz=p4[2], E=p4[3])


def decay(parent, m1, m2):
    m = parent.mass
    lam = (m * m - (m1 + m2) ** 2) * (m * m - (m1 - m2) ** 2)
    p = np.sqrt(max(lam, 0.0)) / (2 * m)
    cos = rng.uniform(-1, 1)
    sin = np.sqrt(1 - cos * cos)
    phi = rng.uniform(-np.pi, np.pi)
    d = np.array([p * sin * np.cos(phi), p * sin * np.sin(phi), p * cos])
    a = vector.obj(px=d[0], py=d[1], pz=d[2], E=np.sqrt(p * p + m1 * m1))
    b = vector.obj(px=-d[0], py=-d[1], pz=-d[2], E=np.sqrt(p * p + m2 * m2))
    beta = parent.to_beta3()
    return a.boost_beta3(beta), b.boost_beta3(beta)


def top():
    return vector.obj(pt=rng.uniform(0, 250), eta=rng.uniform(-1, 1), phi=rng.uniform(-3, 3), mass=MT)


def four(v):
    return [float(v.px), float(v.py), float(v.pz), float(v.E)]


def nu_roots(mu, mex, mey):
    k = (MW**2 - mu.mass**2) / 2 + mu.px * mex + mu.py * mey
    a = mu.E**2 - mu.pz**2
    pt2 = mex**2 + mey**2
    r = np.roots([a, -2 * k * mu.pz, mu.E**2 * pt2 - k * k])
    if np.iscomplexobj(r) and np.any(np.abs(r.imag) > 0):
        return None
    r = sorted(np.real(r), key=abs)
    return [vector.obj(px=mex, py=mey, pz=z, E=np.sqrt(pt2 + z * z)) for z in r]


events = []
while len(events) < 6:
    bh, wh = decay(top(), MB, MW)
    q1, q2 = decay(wh, 0.0, 0.0)
    bl, wl = decay(top(), MB, MW)
    mu, nu = decay(wl, MMU, 0.0)
    isr = vector.obj(pt=rng.uniform(25, 60), eta=rng.uniform(-2.5, 2.5), phi=rng.uniform(-3, 3), mass=0.0)
    jets = []
    for p, score in [(bh, 0.9), (q1, 0.1), (q2, 0.1), (bl, 0.9), (isr, 0.1)]:
        s = max(1 + 0.1 * rng.normal(), 0.3)
        jets.append((p * s, score))
    flip = rng.integers(0, len(jets))
    if rng.uniform() < 0.5:
        jets[flip] = (jets[flip][0], 1.0 - jets[flip][1])
    jets.sort(key=lambda j: -j[0].pt)
    mex = float(nu.px + 10 * rng.normal())
    mey = float(nu.py + 10 * rng.normal())
    roots = nu_roots(mu, mex, mey)
    if roots is None:
        continue
    scored = []
    tagged = [s > 0.5 for _, s in jets]
    n = len(jets)
    for bh_i, bl_i in itertools.permutations(range(n), 2):
        if not (tagged[bh_i] and tagged[bl_i]):
            continue
        for qa, qb in itertools.combinations(range(n), 2):
            if len({bh_i, bl_i, qa, qb}) < 4 or tagged[qa] or tagged[qb]:
                continue
            w = jets[qa][0] + jets[qb][0]
            th = w + jets[bh_i][0]
            for ri, nv in enumerate(roots):
                tl = mu + nv + jets[bl_i][0]
                chi2 = ((w.mass - MW) / 10) ** 2 + ((th.mass - MT) / 15) ** 2 + ((tl.mass - MT) / 20) ** 2
                scored.append((float(chi2), bh_i, [qa, qb], bl_i, ri))
    if not scored:
        continue
    scored.sort(key=lambda s: s[0])
    events.append(
        {
            "jets": [four(j) + [s] for j, s in jets],
            "muon": four(mu),
            "met": [mex, mey],
            "best": {"b_had": scored[0][1], "q": scored[0][2], "b_lep": scored[0][3], "root": scored[0][4]},
            "chi2": [s[0] for s in scored[:3]],
        }
    )

out = {
    "source": "brute force with scikit-hep vector and numpy.roots; masses from particle (PDG)",
    "masses": {"W": MW, "top": MT},
    "events": events,
}
with open("tests/reference/fixtures/assign_ttbar.json", "w") as f:
    json.dump(out, f, indent=1, sort_keys=True)
    f.write("\n")
