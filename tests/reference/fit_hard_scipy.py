"""Reference minima of quarry-fit's hard-constraint fit (its default mode), computed with
scipy.optimize.minimize(method="SLSQP") and the Lagrange (KKT) conditions checked with numpy.

Same worked events as tests/reference/fit_iminuit.py (its generator is imported, so the
events are the same toy bW-pair events, seed for seed): objects b_had, q1, q2, b_lep,
muon; composites W_had = q1+q2, W_lep = muon+nu, B_had = b_had+q1+q2, B_lep =
b_lep+muon+nu. In hard mode the constraints are equations, not χ² terms:

    minimise   χ²_meas(θ) = Σ_i ((s_i − 1)/r_i)² + dᵀ V⁻¹ d,   d = (px − MET_x, py − MET_y)
    subject to c_t(θ) = (m_t² − M_t²) / (2 M_t) = 0,
               t = W_had, W_lep (M_t = m_W), B_had, B_lep (M_t = M, the free common mass)

in θ = (s_1..s_5, px, py, pz, M), as quarry_fit::KinematicChi2 defines them. SLSQP (scipy's
sequential least squares programming, D. Kraft, DFVLR-FB 88-28, 1988) runs from the fit's
start (s = 1, the neutrino at MET and the smaller-|pz| W-mass root, M from the start's
two masses) with analytic gradients of χ²_meas and of the constraints, restarted from
its end point (at most twice) when it stops at its iteration limit. The fixture keeps
the minimum, the parameters, the largest |c_t| and the norm of the Lagrange condition
∇χ² + Aᵀλ (λ by least squares from numpy.linalg.lstsq) as evidence that SLSQP stopped at
a constrained minimum.

Uncertainties: the linearised constrained covariance of P. Avery, "Applied Fitting Theory
VI: Formulas for Kinematic Fitting", CLEO CBX 98-37 — the top-left block of the inverse
of the bordered matrix [[W, Aᵀ], [A, 0]] with W the measurement weights in θ (1/r_i² for
the scales, V⁻¹ for (px, py), zero for pz and M) and A = ∂c/∂θ at the minimum — inverted
here by numpy.linalg.inv.

Run from the repository root:  python tests/reference/fit_hard_scipy.py
Writes tests/reference/fixtures/fit_hard_scipy.json (deterministic).
"""

import json
import math
import pathlib
import sys

import numpy as np
import scipy
from scipy.optimize import minimize

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parent))
import fit_iminuit as soft  # noqa: E402  (the worked events and their resolutions)

N_PARAMS = 9


def composite(theta, objects, c):
    """Four-momentum of composite c, and its derivative with respect to θ (4 × 9)."""
    members, with_nu = soft.COMPOSITES[c]
    s = np.zeros(4)
    d = np.zeros((4, N_PARAMS))
    for i in members:
        s += theta[i] * objects[i]
        d[:, i] = objects[i]
    if with_nu:
        px, py, pz = theta[5], theta[6], theta[7]
        e = math.sqrt(px * px + py * py + pz * pz + soft.NU_REG)
        s += np.array([px, py, pz, e])
        for k, p in enumerate((px, py, pz)):
            d[k, 5 + k] = 1.0
            d[3, 5 + k] = p / e
    return s, d


def minkowski_grad(s, d):
    """∂(m²)/∂θ for a four-momentum s with derivative d."""
    return 2.0 * (s[3] * d[3] - s[0] * d[0] - s[1] * d[1] - s[2] * d[2])


def make_problem(objects, rel, met, cov):
    det = cov[0] * cov[2] - cov[1] ** 2
    vinv = np.array([[cov[2] / det, -cov[1] / det], [-cov[1] / det, cov[0] / det]])
    rel = np.asarray(rel)

    def chi2(theta):
        d = np.array([theta[5] - met[0], theta[6] - met[1]])
        return float(np.sum(((theta[:5] - 1.0) / rel) ** 2) + d @ vinv @ d)

    def chi2_grad(theta):
        g = np.zeros(N_PARAMS)
        g[:5] = 2.0 * (theta[:5] - 1.0) / rel**2
        d = np.array([theta[5] - met[0], theta[6] - met[1]])
        g[5:7] = 2.0 * vinv @ d
        return g

    def targets(theta):
        return [soft.W_MASS, soft.W_MASS, theta[8], theta[8]]

    def constraints(theta):
        out = []
        for c, target in enumerate(targets(theta)):
            s, _ = composite(theta, objects, c)
            out.append((soft.mdot(s, s) - target * target) / (2.0 * target))
        return np.array(out)

    def constraints_jac(theta):
        a = np.zeros((4, N_PARAMS))
        for c, target in enumerate(targets(theta)):
            s, d = composite(theta, objects, c)
            a[c] = minkowski_grad(s, d) / (2.0 * target)
            if c >= 2:
                # c = (m² − M²)/(2M): ∂c/∂M = −(m² + M²)/(2M²)
                m2 = soft.mdot(s, s)
                a[c, 8] = -(m2 + target * target) / (2.0 * target * target)
        return a

    weight = np.zeros((N_PARAMS, N_PARAMS))
    weight[np.arange(5), np.arange(5)] = 1.0 / rel**2
    weight[5:7, 5:7] = vinv
    return chi2, chi2_grad, constraints, constraints_jac, weight


def main():
    events = []
    for objects, rel, met, cov, pz0 in soft.worked_events():
        chi2, chi2_grad, cons, cons_jac, weight = make_problem(objects, rel, met, cov)
        start = np.array([1.0] * 5 + [met[0], met[1], pz0, 0.0])
        m_had = soft.signed_sqrt(soft.mdot(*[composite(start, objects, 2)[0]] * 2))
        m_lep = soft.signed_sqrt(soft.mdot(*[composite(start, objects, 3)[0]] * 2))
        start[8] = max(0.5 * (m_had + m_lep), 1.0)
        # SLSQP's quasi-Newton matrix restarts with each call: a run that hits
        # the iteration limit (4 of 120 here) is restarted from where it ended.
        x = start
        for passes in range(1, 4):
            res = minimize(
                chi2,
                x,
                jac=chi2_grad,
                method="SLSQP",
                constraints=[{"type": "eq", "fun": cons, "jac": cons_jac}],
                options={"ftol": 1e-12, "maxiter": 200},
            )
            x = res.x
            if res.success:
                break
        theta = res.x
        a = cons_jac(theta)
        g = chi2_grad(theta)
        lam, *_ = np.linalg.lstsq(a.T, -g, rcond=None)
        kkt = float(np.linalg.norm(g + a.T @ lam))
        bordered = np.zeros((N_PARAMS + 4, N_PARAMS + 4))
        bordered[:N_PARAMS, :N_PARAMS] = weight
        bordered[:N_PARAMS, N_PARAMS:] = a.T
        bordered[N_PARAMS:, :N_PARAMS] = a
        cov_theta = np.linalg.inv(bordered)[:N_PARAMS, :N_PARAMS]
        events.append(
            {
                "objects": [[float(v) for v in p] for p in objects],
                "kinds": ["jet", "jet", "jet", "jet", "muon"],
                "relative_sigma": [float(r) for r in rel],
                "met": [float(v) for v in met],
                "met_cov": [float(v) for v in cov],
                "nu_start": [float(met[0]), float(met[1]), float(pz0)],
                "success": bool(res.success),
                "passes": passes,
                "fval": float(res.fun),
                "values": [float(v) for v in theta],
                "max_violation_gev": float(np.max(np.abs(cons(theta)))),
                "lagrange_residual": kkt,
                "errors": [float(math.sqrt(max(v, 0.0))) for v in np.diag(cov_theta)],
            }
        )
    out = {
        "source": (
            f"scipy {scipy.__version__} optimize.minimize SLSQP (ftol 1e-12, 200 iterations per pass, analytic gradients); "
            f"covariance: bordered-matrix inverse (P. Avery, CLEO CBX 98-37) by numpy {np.__version__}"
        ),
        "w_mass": soft.W_MASS,
        "w_width": soft.W_WIDTH,
        "equal_width": soft.EQUAL_WIDTH,
        "jet_bins": [list(b) for b in soft.JET_BINS],
        "muon": list(soft.MUON),
        "composites": [[m, nu] for m, nu in soft.COMPOSITES],
        "parameters": ["s_b_had", "s_q1", "s_q2", "s_b_lep", "s_muon", "nu_px", "nu_py", "nu_pz", "M_common"],
        "events": events,
    }
    path = pathlib.Path("tests/reference/fixtures/fit_hard_scipy.json")
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(json.dumps(out, indent=1) + "\n")
    ok = sum(e["success"] for e in events)
    worst = max(e["max_violation_gev"] for e in events)
    kkt = max(e["lagrange_residual"] for e in events)
    print(f"wrote {len(events)} events ({ok} converged; largest |c| {worst:.2e} GeV, largest Lagrange residual {kkt:.2e}) to {path}")


if __name__ == "__main__":
    main()
