//! Property tests of Lorentz invariants and conventions (textbook special
//! relativity: the invariant mass is unchanged by boosts, a boost by −β
//! undoes a boost by β; common practice for the φ interval).

use std::f64::consts::PI;

use proptest::prelude::*;
use quarry_lorentz::FourMomentum;

const EPS: f64 = f64::EPSILON;

fn massive() -> impl Strategy<Value = FourMomentum> {
    (0.1f64..2000.0, -4.0f64..4.0, -PI..PI, 0.1f64..500.0)
        .prop_map(|(pt, eta, phi, m)| FourMomentum::from_pt_eta_phi_m(pt, eta, phi, m))
}

fn any_vector() -> impl Strategy<Value = FourMomentum> {
    (0.0f64..2000.0, -5.0f64..5.0, -PI..PI, 0.0f64..500.0)
        .prop_map(|(pt, eta, phi, m)| FourMomentum::from_pt_eta_phi_m(pt, eta, phi, m))
}

fn velocity() -> impl Strategy<Value = [f64; 3]> {
    (-1.0f64..1.0, -1.0f64..1.0, -1.0f64..1.0, 0.0f64..0.99).prop_filter_map(
        "non-zero direction",
        |(x, y, z, speed)| {
            let n = (x * x + y * y + z * z).sqrt();
            (n > 1e-3).then(|| [x / n * speed, y / n * speed, z / n * speed])
        },
    )
}

fn gamma(b: [f64; 3]) -> f64 {
    1.0 / (1.0 - (b[0] * b[0] + b[1] * b[1] + b[2] * b[2])).sqrt()
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 2000, .. ProptestConfig::default() })]

    #[test]
    fn boost_keeps_the_mass(p in massive(), beta in velocity()) {
        let q = p.boost(beta);
        // m² = E² − |p|² of the boosted vector carries rounding of order
        // ε·(γ(E + |p|))²: compare m² at that scale.
        let scale = gamma(beta) * (p.e() + p.p());
        let tol = 64.0 * EPS * scale * scale;
        prop_assert!((q.m2() - p.m2()).abs() <= tol, "m² {} -> {} (tol {tol})", p.m2(), q.m2());
    }

    #[test]
    fn boost_there_and_back_is_identity(p in any_vector(), beta in velocity()) {
        let back = p.boost(beta).boost([-beta[0], -beta[1], -beta[2]]);
        let g = gamma(beta);
        let tol = 1e-13 * g * g * (p.e() + p.p()).max(1.0);
        for (x, y) in [(back.px(), p.px()), (back.py(), p.py()), (back.pz(), p.pz()), (back.e(), p.e())] {
            prop_assert!((x - y).abs() <= tol, "{p:?} -> {back:?}");
        }
        // Rest frame of a massive vector: zero momentum, energy = mass.
        if p.m() > 1e-3 * p.e() {
            let rest = p.to_rest_frame_of(&p);
            prop_assert!(rest.p() <= 1e-10 * p.e());
            prop_assert!((rest.e() - p.m()).abs() <= 1e-9 * p.e() * p.e() / p.m());
        }
    }

    #[test]
    fn phi_is_in_the_half_open_interval(px in -1e6f64..1e6, py in -1e6f64..1e6, flip in any::<bool>()) {
        let py = if flip && py == 0.0 { -0.0 } else { py };
        let phi = FourMomentum::new(px, py, 0.0, 1e7).phi();
        prop_assert!(phi > -PI && phi <= PI, "phi = {phi}");
    }

    #[test]
    fn sum_is_associative_to_rounding(a in any_vector(), b in any_vector(), c in any_vector()) {
        let l = (a + b) + c;
        let r = a + (b + c);
        let scale = a.e() + b.e() + c.e();
        for (x, y) in [(l.px(), r.px()), (l.py(), r.py()), (l.pz(), r.pz()), (l.e(), r.e())] {
            prop_assert!((x - y).abs() <= 4.0 * EPS * scale);
        }
        // And the sum is symmetric exactly.
        prop_assert_eq!(a + b, b + a);
    }

    #[test]
    fn no_nan_from_finite_input(
        px in any::<f64>(), py in any::<f64>(), pz in any::<f64>(), e in any::<f64>()
    ) {
        prop_assume!(px.is_finite() && py.is_finite() && pz.is_finite() && e.is_finite());
        let p = FourMomentum::new(px, py, pz, e);
        for (name, v) in [
            ("m", p.m()), ("m2", p.m2()), ("pt", p.pt()), ("eta", p.eta()),
            ("phi", p.phi()), ("rapidity", p.rapidity()), ("mt", p.mt()),
        ] {
            prop_assert!(!v.is_nan(), "{name} is NaN for {p:?}");
        }
    }
}

#[test]
fn phi_at_minus_pi_maps_to_plus_pi() {
    // atan2(−0, −1) = −π exactly; the convention puts it at +π.
    assert_eq!(FourMomentum::new(-1.0, -0.0, 0.0, 1.0).phi(), PI);
    assert_eq!(FourMomentum::new(-1.0, 0.0, 0.0, 1.0).phi(), PI);
}
