//! FourMomentum against scikit-hep `vector` 1.9.0 (PyPI), an independent
//! Lorentz-vector library: 1200 random cases from
//! `tests/reference/vector_fourvectors.py` (fixed seed), covering
//! construction, invariants, angles, sums and boosts.
//!
//! Tolerances: 1e-12 relative to the natural scale of each quantity, except
//! where floating-point cancellation makes that impossible for *any*
//! implementation; each such case is explained at its check. ε below is
//! `f64::EPSILON` (2.2e-16).

use quarry_lorentz::{transverse_mass, wrap_phi, FourMomentum};
use serde_json::Value;

const EPS: f64 = f64::EPSILON;

struct Case {
    build: String,
    a_in: [f64; 4],
    a: FourMomentum,
    b: FourMomentum,
    beta: [f64; 3],
    out: Value,
}

fn arr<const N: usize>(v: &Value) -> [f64; N] {
    let a = v.as_array().expect("array");
    assert_eq!(a.len(), N);
    std::array::from_fn(|i| a[i].as_f64().expect("number"))
}

fn cases() -> (String, Vec<Case>) {
    let text = include_str!("../../../tests/reference/fixtures/vector_fourvectors.json");
    let v: Value = serde_json::from_str(text).unwrap();
    let source = v["source"].as_str().unwrap().to_string();
    let cases = v["cases"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| {
            let build = c["build"].as_str().unwrap().to_string();
            let a_in: [f64; 4] = arr(&c["a"]);
            let [x0, x1, x2, x3] = a_in;
            let a = match build.as_str() {
                "xyzt" => FourMomentum::new(x0, x1, x2, x3),
                "ptetaphim" => FourMomentum::from_pt_eta_phi_m(x0, x1, x2, x3),
                "ptetaphie" => FourMomentum::from_pt_eta_phi_e(x0, x1, x2, x3),
                other => panic!("unknown build {other}"),
            };
            let [bpt, beta, bphi, bm] = arr(&c["b"]);
            Case {
                build,
                a_in,
                a,
                b: FourMomentum::from_pt_eta_phi_m(bpt, beta, bphi, bm),
                beta: arr(&c["beta"]),
                out: c["out"].clone(),
            }
        })
        .collect();
    (source, cases)
}

fn num(c: &Case, key: &str) -> f64 {
    c.out[key]
        .as_f64()
        .unwrap_or_else(|| panic!("fixture lacks {key}"))
}

fn p4(c: &Case, key: &str) -> [f64; 4] {
    arr(&c.out[key])
}

fn comps(p: &FourMomentum) -> [f64; 4] {
    [p.px(), p.py(), p.pz(), p.e()]
}

/// Collects the worst |difference| / tolerance of one quantity over all
/// cases and fails if it exceeds 1.
struct Worst {
    name: &'static str,
    ratio: f64,
    detail: String,
}

impl Worst {
    fn new(name: &'static str) -> Self {
        Worst {
            name,
            ratio: 0.0,
            detail: String::new(),
        }
    }

    fn check(&mut self, i: usize, ours: f64, theirs: f64, tol: f64) {
        assert!(
            ours.is_finite(),
            "{} case {i}: quarry gave {ours}",
            self.name
        );
        let r = (ours - theirs).abs() / tol;
        if r > self.ratio || r.is_nan() {
            self.ratio = r;
            self.detail = format!("case {i}: quarry {ours:e}, vector {theirs:e}, tol {tol:e}");
        }
    }

    fn finish(self) {
        eprintln!(
            "{:<16} worst |Δ|/tol = {:.3e} ({})",
            self.name, self.ratio, self.detail
        );
        assert!(self.ratio <= 1.0, "{}: {}", self.name, self.detail);
    }
}

fn gamma(p: &FourMomentum) -> f64 {
    p.e() / p.m()
}

#[test]
fn construction_and_single_vector_quantities() {
    let (source, cases) = cases();
    assert_eq!(source, "scikit-hep vector 1.9.0 (PyPI)");
    assert!(cases.len() >= 1000);
    for b in ["xyzt", "ptetaphim", "ptetaphie"] {
        assert!(cases.iter().filter(|c| c.build == b).count() >= 300);
    }
    let mut w_comp = Worst::new("components");
    let mut w_m2 = Worst::new("mass squared");
    let mut w_m = Worst::new("mass");
    let mut w_pt = Worst::new("pt");
    let mut w_eta = Worst::new("eta");
    let mut w_y = Worst::new("rapidity");
    let mut w_phi = Worst::new("phi");
    let mut w_mt = Worst::new("mt");
    let mut w_et = Worst::new("et");
    for (i, c) in cases.iter().enumerate() {
        let a = &c.a;
        let e = a.e();
        for (ours, theirs) in comps(a).iter().zip(p4(c, "p4")) {
            w_comp.check(i, *ours, theirs, 1e-12 * e);
        }
        // Mass: m² = E² − |p|² cancels when m ≪ E, so its absolute error is
        // a few ε·E² in either library (vector, built from (pt, η, φ, m),
        // returns the input m exactly; quarry recomputes it). Hence compare
        // m² to 16 ε E², and m to the matching 16 ε E² / (m_q + m_v).
        let (mq, mv) = (a.m(), num(c, "mass"));
        let tol_m2 = 1e-12 * mv * mv + 16.0 * EPS * e * e;
        w_m2.check(i, mq * mq.abs(), mv * mv.abs(), tol_m2);
        if mv > 0.0 && mq > 0.0 {
            w_m.check(i, mq, mv, tol_m2 / (mq + mv));
        }
        if c.build == "ptetaphim" && c.a_in[3] > 0.1 * e {
            // The relative error of m is about ε·(E/m)²; for m > E/10 that
            // is below 1e-13, so the input mass must come back to 1e-12.
            w_m.check(i, mq, c.a_in[3], 1e-12 * c.a_in[3].max(1.0));
        }
        w_pt.check(i, a.pt(), num(c, "pt"), 1e-12 * a.pt());
        w_eta.check(i, a.eta(), num(c, "eta"), 1e-12 * a.eta().abs().max(1.0));
        // Rapidity ½ln((E+pz)/(E−pz)): E − |pz| cancels, leaving a relative
        // error of ε·E²/m_T² in it (m_T² = E² − pz²), i.e. an absolute
        // error of that size in y; both libraries face it.
        let mt2 = (e - a.pz()) * (e + a.pz());
        w_y.check(
            i,
            a.rapidity(),
            num(c, "rapidity"),
            1e-12 + 8.0 * EPS * e * e / mt2,
        );
        // vector's φ is in [−π, π], quarry's in (−π, π]: compare the wrapped
        // difference.
        let dphi = wrap_phi(a.phi() - num(c, "phi"));
        w_phi.check(i, dphi, 0.0, 1e-12);
        // Single-vector m_T = sqrt(E² − pz²): the same cancellation as m.
        let (mtq, mtv) = (a.mt(), num(c, "mt"));
        w_mt.check(
            i,
            mtq * mtq.abs(),
            mtv * mtv.abs(),
            1e-12 * mtv * mtv + 16.0 * EPS * e * e,
        );
        w_et.check(i, a.et(), num(c, "et"), 1e-12 * e);
    }
    for w in [w_comp, w_m2, w_m, w_pt, w_eta, w_y, w_phi, w_mt, w_et] {
        w.finish();
    }
}

#[test]
fn pair_quantities() {
    let (_, cases) = cases();
    let mut w_dphi = Worst::new("delta_phi");
    let mut w_dr = Worst::new("delta_r");
    let mut w_angle = Worst::new("angle");
    let mut w_dot = Worst::new("dot");
    let mut w_sum = Worst::new("sum");
    let mut w_sum_m = Worst::new("sum mass");
    let mut w_mtp = Worst::new("transverse_mass");
    for (i, c) in cases.iter().enumerate() {
        let (a, b) = (&c.a, &c.b);
        // Wrapped difference: vector's Δφ is in [−π, π), quarry's (−π, π].
        w_dphi.check(
            i,
            wrap_phi(a.delta_phi(b) - num(c, "delta_phi")),
            0.0,
            1e-12,
        );
        let dr = num(c, "delta_r");
        w_dr.check(i, a.delta_r(b), dr, 1e-12 * dr.max(1.0));
        // vector computes the opening angle as arccos(a·b / |a||b|), whose
        // error is δcos / sin θ (δcos ≈ a few ε), growing to ~sqrt(ε) at
        // θ → 0 or π; quarry's atan2(|a×b|, a·b) has no such loss. The
        // tolerance is vector's error bound.
        let th = num(c, "angle");
        let tol = 1e-12 + 8.0 * EPS / th.sin().max((8.0 * EPS).sqrt());
        w_angle.check(i, a.angle(b), th, tol);
        w_dot.check(i, a.dot(b), num(c, "dot"), 1e-12 * a.e() * b.e());
        let s = *a + *b;
        let scale = a.e() + b.e();
        for (ours, theirs) in comps(&s).iter().zip(p4(c, "sum")) {
            w_sum.check(i, *ours, theirs, 1e-12 * scale);
        }
        let mv = num(c, "sum_mass");
        w_sum_m.check(
            i,
            s.m2(),
            mv * mv.abs(),
            1e-12 * mv * mv + 16.0 * EPS * scale * scale,
        );
        // Two-object m_T: not in vector; numpy evaluates it as
        // (ET_a + ET_b)² − |pT_a + pT_b|² from vector's masses and pT, quarry
        // as m_a² + m_b² + 2(ET_a ET_b − pT_a·pT_b): equal algebraically, and
        // both lose ε·(ET_a + ET_b)² to cancellation for collinear light
        // objects. quarry's m² inputs also carry the ε·E² error of the mass
        // (E, not E_T: m² = E² − |p|² includes pz). Compare m_T².
        let et = (a.m2().max(0.0) + a.pt2()).sqrt() + (b.m2().max(0.0) + b.pt2()).sqrt();
        let e2 = a.e() * a.e() + b.e() * b.e();
        let (mq, mv) = (transverse_mass(a, b), num(c, "transverse_mass_numpy"));
        let tol = 1e-12 * mv * mv + 32.0 * EPS * (et * et + e2);
        w_mtp.check(i, mq * mq.abs(), mv * mv.abs(), tol);
    }
    for w in [w_dphi, w_dr, w_angle, w_dot, w_sum, w_sum_m, w_mtp] {
        w.finish();
    }
}

#[test]
fn boosts() {
    let (_, cases) = cases();
    let mut w_boost = Worst::new("boost by beta");
    let mut w_to = Worst::new("to_rest_frame_of");
    let mut w_from = Worst::new("from_rest_frame_of");
    for (i, c) in cases.iter().enumerate() {
        let (a, b) = (&c.a, &c.b);
        // A boost multiplies components by up to γ(1 + β) and mixes terms of
        // size γ·E and γ·|p| that may cancel: the attainable absolute error
        // is about ε·γ·(E + |p|) per component, so the tolerance is 1e-12
        // times that scale (for |β| ≤ 0.999, γ ≤ 22.4).
        let [bx, by, bz] = c.beta;
        let g = 1.0 / (1.0 - (bx * bx + by * by + bz * bz)).sqrt();
        let scale = g * (a.e() + a.p());
        for (ours, theirs) in comps(&a.boost(c.beta)).iter().zip(p4(c, "boost")) {
            w_boost.check(i, *ours, theirs, 1e-12 * scale);
        }
        // Boosting into / out of b's rest frame: β = p_b/E_b, γ = E_b/m_b.
        // vector builds β from b's (pt, η, φ, m) coordinates and quarry from
        // its Cartesian components, which differ by a few ε relative; the
        // boosted result moves by that times γ_b²·(E + |p|), hence the
        // γ_b² scale.
        let gb = gamma(b);
        let scale = gb * gb * (a.e() + a.p());
        for (ours, theirs) in comps(&a.to_rest_frame_of(b))
            .iter()
            .zip(p4(c, "to_rest_of_b"))
        {
            w_to.check(i, *ours, theirs, 1e-12 * scale);
        }
        for (ours, theirs) in comps(&a.from_rest_frame_of(b))
            .iter()
            .zip(p4(c, "from_rest_of_b"))
        {
            w_from.check(i, *ours, theirs, 1e-12 * scale);
        }
    }
    for w in [w_boost, w_to, w_from] {
        w.finish();
    }
}
