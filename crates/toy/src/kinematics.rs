//! Exact two-body decay kinematics and Breit–Wigner mass sampling.

use quarry_lorentz::FourMomentum;

/// Breit–Wigner masses are drawn within this many total widths of the pole
/// mass (and never below the sum of the daughters' lowest masses).
pub const BREIT_WIGNER_CUTOFF: f64 = 15.0;

/// The Källén triangle function λ(a, b, c) = a² + b² + c² − 2ab − 2ac − 2bc
/// (PDG *Review of Particle Physics*, section "Kinematics").
///
/// ```
/// assert_eq!(quarry_toy::kallen(9.0, 1.0, 1.0), 45.0);
/// ```
#[inline]
pub fn kallen(a: f64, b: f64, c: f64) -> f64 {
    a * a + b * b + c * c - 2.0 * (a * b + a * c + b * c)
}

/// Momentum of either daughter in the rest frame of a parent of mass `m`
/// decaying to masses `m1` and `m2`: p* = λ^{1/2}(m², m1², m2²)/(2m).
///
/// λ is evaluated in the factorised form
/// (m² − (m1 + m2)²)(m² − (m1 − m2)²), which keeps full relative precision
/// near threshold. `None` if a mass is negative or non-finite, `m` is 0, or
/// the decay is closed (`m1 + m2 > m`).
///
/// ```
/// use quarry_toy::two_body_momentum;
/// // Massless daughters share the parent mass equally.
/// assert_eq!(two_body_momentum(80.0, 0.0, 0.0), Some(40.0));
/// assert_eq!(two_body_momentum(10.0, 6.0, 6.0), None);
/// ```
#[inline]
pub fn two_body_momentum(m: f64, m1: f64, m2: f64) -> Option<f64> {
    if !(m.is_finite() && m1.is_finite() && m2.is_finite()) || m <= 0.0 || m1 < 0.0 || m2 < 0.0 {
        return None;
    }
    // Error-free sums (Knuth's TwoSum) keep m − (m1 + m2) exact to rounding
    // even near threshold, where it is a small difference of large numbers.
    let (sum, sum_err) = two_sum(m1, m2);
    let (diff, diff_err) = two_sum(m1, -m2);
    let below = (m - sum) - sum_err;
    if below < 0.0 {
        return None;
    }
    let lambda = below * ((m + sum) + sum_err) * ((m - diff) - diff_err) * ((m + diff) + diff_err);
    Some(lambda.max(0.0).sqrt() / (2.0 * m))
}

/// Both daughters of a two-body decay *in the parent's rest frame*: the
/// first flies along (cos θ, φ), the second opposite; energies
/// E₁ = (m² + m1² − m2²)/(2m), E₂ = m − E₁. `None` as for
/// [`two_body_momentum`] or if `cos_theta` is outside [−1, 1].
///
/// ```
/// use quarry_toy::decay_at_rest;
/// let (a, b) = decay_at_rest(80.0, 0.0, 0.0, 0.0, 0.0).unwrap();
/// assert!((a.px() - 40.0).abs() < 1e-12 && (a.px() + b.px()).abs() < 1e-12);
/// ```
#[inline]
pub fn decay_at_rest(
    m: f64,
    m1: f64,
    m2: f64,
    cos_theta: f64,
    phi: f64,
) -> Option<(FourMomentum, FourMomentum)> {
    if !(-1.0..=1.0).contains(&cos_theta) || !phi.is_finite() {
        return None;
    }
    let p = two_body_momentum(m, m1, m2)?;
    let sin_theta = (1.0 - cos_theta * cos_theta).max(0.0).sqrt();
    let (sin_phi, cos_phi) = phi.sin_cos();
    let (px, py, pz) = (
        p * sin_theta * cos_phi,
        p * sin_theta * sin_phi,
        p * cos_theta,
    );
    let e1 = (m * m + m1 * m1 - m2 * m2) / (2.0 * m);
    let e2 = m - e1;
    Some((
        FourMomentum::new(px, py, pz, e1),
        FourMomentum::new(-px, -py, -pz, e2),
    ))
}

/// A two-body decay of a moving parent: [`decay_at_rest`] with parent mass
/// `m`, then both daughters boosted to the frame `parent` is given in
/// ([`FourMomentum::from_rest_frame_of`]). `m` should equal `parent.m()`;
/// passing the generated mass avoids the rounding of E² − p² for fast
/// parents.
///
/// ```
/// use quarry_lorentz::FourMomentum;
/// use quarry_toy::two_body_decay;
/// let w = FourMomentum::from_pt_eta_phi_m(300.0, 0.4, 1.0, 80.0);
/// let (q1, q2) = two_body_decay(&w, 80.0, 0.0, 0.0, 0.3, 2.0).unwrap();
/// let sum = q1 + q2;
/// assert!((sum.e() - w.e()).abs() < 1e-9 && (sum.px() - w.px()).abs() < 1e-9);
/// ```
#[inline]
pub fn two_body_decay(
    parent: &FourMomentum,
    m: f64,
    m1: f64,
    m2: f64,
    cos_theta: f64,
    phi: f64,
) -> Option<(FourMomentum, FourMomentum)> {
    let (a, b) = decay_at_rest(m, m1, m2, cos_theta, phi)?;
    Some((a.from_rest_frame_of(parent), b.from_rest_frame_of(parent)))
}

/// A mass drawn from a relativistic Breit–Wigner distribution,
/// dP/dm² ∝ 1/((m² − M²)² + M²Γ²), truncated to [`lo`, `hi`], by inverting
/// its cumulative distribution at the uniform number `u` ∈ [0, 1]:
/// m² = M² + MΓ tan(θ_lo + u(θ_hi − θ_lo)), θ = atan((m² − M²)/(MΓ)).
///
/// With `width` = 0 the result is `mass` clamped to the window. `None` if
/// any input is non-finite, `mass` or `width` is negative, or `lo > hi`;
/// otherwise the result lies in [lo, hi].
///
/// ```
/// use quarry_toy::breit_wigner_mass;
/// // The median of a symmetric window is the pole mass.
/// let m = breit_wigner_mass(0.5, 80.0, 2.0, 50.0, 110.0).unwrap();
/// assert!((m - 80.0).abs() < 0.05);
/// assert_eq!(breit_wigner_mass(0.3, 80.0, 0.0, 50.0, 110.0), Some(80.0));
/// assert_eq!(breit_wigner_mass(0.3, 80.0, 2.0, 110.0, 50.0), None);
/// ```
#[inline]
pub fn breit_wigner_mass(u: f64, mass: f64, width: f64, lo: f64, hi: f64) -> Option<f64> {
    let finite = [u, mass, width, lo, hi].iter().all(|x| x.is_finite());
    if !finite || mass < 0.0 || width < 0.0 || lo > hi {
        return None;
    }
    if width == 0.0 || mass == 0.0 || hi == lo {
        return Some(mass.clamp(lo, hi));
    }
    let m2 = mass * mass;
    let mg = mass * width;
    let t_lo = ((lo * lo - m2) / mg).atan();
    let t_hi = ((hi * hi - m2) / mg).atan();
    let t = t_lo + u.clamp(0.0, 1.0) * (t_hi - t_lo);
    let s = m2 + mg * t.tan();
    Some(s.max(0.0).sqrt().clamp(lo, hi))
}

/// `a + b` rounded, and the rounding error (Knuth's TwoSum).
#[inline]
fn two_sum(a: f64, b: f64) -> (f64, f64) {
    let s = a + b;
    let bb = s - a;
    (s, (a - (s - bb)) + (b - bb))
}

/// Pole mass, width and sampling window of one species.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(crate) struct MassWindow {
    pub mass: f64,
    pub width: f64,
    pub lo: f64,
    pub hi: f64,
}

impl MassWindow {
    /// Window M ± cutoff·Γ, raised so that the lower edge is at least
    /// `floor`.
    pub(crate) fn new(mass: f64, width: f64, floor: f64) -> MassWindow {
        let reach = BREIT_WIGNER_CUTOFF * width;
        MassWindow {
            mass,
            width,
            lo: (mass - reach).max(floor),
            hi: mass + reach,
        }
    }

    /// A fixed mass.
    pub(crate) fn fixed(mass: f64) -> MassWindow {
        MassWindow {
            mass,
            width: 0.0,
            lo: mass,
            hi: mass,
        }
    }

    /// A draw with the upper edge lowered to `cap` when that is smaller.
    #[inline]
    pub(crate) fn draw(&self, u: f64, cap: f64) -> f64 {
        let hi = self.hi.min(cap).max(self.lo);
        // Windows are built from finite, validated masses: `None` cannot
        // occur; the pole mass is a safe fallback all the same.
        breit_wigner_mass(u, self.mass, self.width, self.lo, hi).unwrap_or(self.mass)
    }
}
