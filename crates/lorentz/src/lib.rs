//! Four-momenta for collider kinematics.
//!
//! Every later stage of quarry (the neutrino solver, the assignment search, the
//! kinematic fit, the event variables) works on [`FourMomentum`], a 32-byte
//! `Copy` value in Cartesian `(px, py, pz, E)` components, in GeV.
//!
//! **Design decision:** the Cartesian components are the only stored state.
//! Sums — the operation the assignment search performs millions of times per
//! second — are then four additions with no trigonometry, and every derived
//! quantity (pt, η, φ, m) is computed on demand. Nothing here allocates.
//!
//! The one trait that joins quarry's crates is [`Momentum`]: anything that has
//! a four-momentum (a jet, a lepton, a solved neutrino) implements it, so every
//! stage can take "some physics objects" without knowing their concrete type.
//!
//! # Conventions
//! - Units: GeV for energies, momenta and masses; radians for angles; c = 1.
//! - Metric: (+, −, −, −), so `m² = E² − |p|²`.
//! - φ lies in (−π, π].
//! - [`FourMomentum::m`] of a vector with `m² < 0` (which only rounding or
//!   unphysical input produce) returns `−sqrt(−m²)`: the sign flags the
//!   problem while keeping the magnitude, and the result is never NaN.
//! - [`FourMomentum::eta`] at `pt = 0` returns `±ETA_AT_ZERO_PT` (sign of pz),
//!   or 0 for the null vector, instead of ±∞.
//!
//! ```
//! use quarry_lorentz::FourMomentum;
//! let b = FourMomentum::from_pt_eta_phi_m(60.0, 0.3, 1.0, 4.8);
//! let w = FourMomentum::from_pt_eta_phi_m(120.0, -0.5, -2.0, 80.4);
//! let top = b + w;
//! assert!(top.m() > 80.4);
//! ```
#![deny(missing_docs)]

use std::f64::consts::PI;
use std::iter::Sum;
use std::ops::{Add, AddAssign, Mul, Neg, Sub, SubAssign};

/// Pseudorapidity returned for a vector with zero transverse momentum and
/// non-zero pz (sign of pz). Large enough to lie outside any detector.
pub const ETA_AT_ZERO_PT: f64 = 1.0e5;

/// Anything that carries a four-momentum: the narrow trait every quarry stage
/// accepts.
///
/// ```
/// use quarry_lorentz::{FourMomentum, Momentum};
/// fn total<T: Momentum>(objects: &[T]) -> FourMomentum {
///     objects.iter().map(Momentum::p4).sum()
/// }
/// let v = FourMomentum::new(1.0, 2.0, 3.0, 10.0);
/// assert_eq!(total(&[v, v]).e(), 20.0);
/// ```
pub trait Momentum {
    /// The object's four-momentum in GeV.
    fn p4(&self) -> FourMomentum;
}

impl Momentum for FourMomentum {
    #[inline]
    fn p4(&self) -> FourMomentum {
        *self
    }
}

/// A Lorentz four-momentum `(px, py, pz, E)` in GeV.
///
/// Invariant: none is enforced — components may be any finite `f64`; a value
/// built from NaN stays NaN, and validating input is the reader's job. The
/// type is `Copy` and 32 bytes.
///
/// ```
/// use quarry_lorentz::FourMomentum;
/// let p = FourMomentum::new(3.0, 4.0, 0.0, 13.0);
/// assert_eq!(p.pt(), 5.0);
/// assert_eq!(p.m(), 12.0);
/// ```
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct FourMomentum {
    px: f64,
    py: f64,
    pz: f64,
    e: f64,
}

impl FourMomentum {
    /// The zero vector.
    ///
    /// ```
    /// assert_eq!(quarry_lorentz::FourMomentum::ZERO.e(), 0.0);
    /// ```
    pub const ZERO: FourMomentum = FourMomentum {
        px: 0.0,
        py: 0.0,
        pz: 0.0,
        e: 0.0,
    };

    /// From Cartesian components.
    ///
    /// ```
    /// let p = quarry_lorentz::FourMomentum::new(1.0, 0.0, 0.0, 2.0);
    /// assert_eq!(p.px(), 1.0);
    /// ```
    #[inline]
    pub const fn new(px: f64, py: f64, pz: f64, e: f64) -> Self {
        FourMomentum { px, py, pz, e }
    }

    /// From transverse momentum, pseudorapidity, azimuth and mass. A negative
    /// mass is taken as `m² = −m²` (the inverse of the [`m`](Self::m)
    /// convention), so the pair round-trips.
    ///
    /// ```
    /// let p = quarry_lorentz::FourMomentum::from_pt_eta_phi_m(50.0, 1.2, 0.4, 10.0);
    /// assert!((p.m() - 10.0).abs() < 1e-12);
    /// assert!((p.eta() - 1.2).abs() < 1e-12);
    /// ```
    #[inline]
    pub fn from_pt_eta_phi_m(pt: f64, eta: f64, phi: f64, m: f64) -> Self {
        let (px, py, pz) = pt_eta_phi_to_cartesian(pt, eta, phi);
        let p2 = px * px + py * py + pz * pz;
        let m2 = if m < 0.0 { -m * m } else { m * m };
        FourMomentum::new(px, py, pz, (p2 + m2).max(0.0).sqrt())
    }

    /// From transverse momentum, pseudorapidity, azimuth and energy.
    ///
    /// ```
    /// let p = quarry_lorentz::FourMomentum::from_pt_eta_phi_e(30.0, 0.0, 0.0, 50.0);
    /// assert!((p.m() - 40.0).abs() < 1e-12);
    /// ```
    #[inline]
    pub fn from_pt_eta_phi_e(pt: f64, eta: f64, phi: f64, e: f64) -> Self {
        let (px, py, pz) = pt_eta_phi_to_cartesian(pt, eta, phi);
        FourMomentum::new(px, py, pz, e)
    }

    /// x component of the momentum.
    ///
    /// ```
    /// assert_eq!(quarry_lorentz::FourMomentum::new(1.0, 2.0, 3.0, 4.0).px(), 1.0);
    /// ```
    #[inline]
    pub const fn px(&self) -> f64 {
        self.px
    }
    /// y component of the momentum.
    ///
    /// ```
    /// assert_eq!(quarry_lorentz::FourMomentum::new(1.0, 2.0, 3.0, 4.0).py(), 2.0);
    /// ```
    #[inline]
    pub const fn py(&self) -> f64 {
        self.py
    }
    /// z (beam-axis) component of the momentum.
    ///
    /// ```
    /// assert_eq!(quarry_lorentz::FourMomentum::new(1.0, 2.0, 3.0, 4.0).pz(), 3.0);
    /// ```
    #[inline]
    pub const fn pz(&self) -> f64 {
        self.pz
    }
    /// Energy.
    ///
    /// ```
    /// assert_eq!(quarry_lorentz::FourMomentum::new(1.0, 2.0, 3.0, 4.0).e(), 4.0);
    /// ```
    #[inline]
    pub const fn e(&self) -> f64 {
        self.e
    }

    /// Squared transverse momentum.
    ///
    /// ```
    /// assert_eq!(quarry_lorentz::FourMomentum::new(3.0, 4.0, 1.0, 9.0).pt2(), 25.0);
    /// ```
    #[inline]
    pub fn pt2(&self) -> f64 {
        self.px * self.px + self.py * self.py
    }

    /// Transverse momentum.
    ///
    /// `√(px² + py²)` (within an ulp of the exact value) while the squares
    /// neither overflow nor underflow, `hypot` beyond that, so extreme
    /// inputs never turn into ∞ or 0. The split exists for speed: `hypot`
    /// costs several times a square root, and pt is computed for every
    /// object several times per event.
    ///
    /// ```
    /// use quarry_lorentz::FourMomentum;
    /// assert_eq!(FourMomentum::new(3.0, 4.0, 1.0, 9.0).pt(), 5.0);
    /// let huge = FourMomentum::new(3e200, 4e200, 0.0, 1e201).pt(); // squares overflow
    /// assert!((huge / 5e200 - 1.0).abs() < 1e-15);
    /// ```
    #[inline]
    pub fn pt(&self) -> f64 {
        let s = self.px * self.px + self.py * self.py;
        if s > 1e-290 && s < 1e290 {
            s.sqrt()
        } else {
            self.px.hypot(self.py)
        }
    }

    /// Squared magnitude of the three-momentum.
    ///
    /// ```
    /// assert_eq!(quarry_lorentz::FourMomentum::new(1.0, 2.0, 2.0, 9.0).p2(), 9.0);
    /// ```
    #[inline]
    pub fn p2(&self) -> f64 {
        self.px * self.px + self.py * self.py + self.pz * self.pz
    }

    /// Magnitude of the three-momentum |p|.
    ///
    /// ```
    /// assert_eq!(quarry_lorentz::FourMomentum::new(1.0, 2.0, 2.0, 9.0).p(), 3.0);
    /// ```
    #[inline]
    pub fn p(&self) -> f64 {
        self.p2().sqrt()
    }

    /// Transverse energy `E · pt / |p|` (0 for a vector at rest).
    ///
    /// ```
    /// let p = quarry_lorentz::FourMomentum::new(3.0, 4.0, 0.0, 10.0);
    /// assert_eq!(p.et(), 10.0);
    /// ```
    #[inline]
    pub fn et(&self) -> f64 {
        let p = self.p();
        if p > 0.0 {
            self.e * self.pt() / p
        } else {
            0.0
        }
    }

    /// Invariant mass squared `E² − |p|²`; may be slightly negative from
    /// rounding.
    ///
    /// ```
    /// assert_eq!(quarry_lorentz::FourMomentum::new(0.0, 0.0, 3.0, 5.0).m2(), 16.0);
    /// ```
    #[inline]
    pub fn m2(&self) -> f64 {
        (self.e - self.p()) * (self.e + self.p())
    }

    /// Invariant mass; for `m² < 0` returns `−sqrt(−m²)` (see the crate
    /// conventions), never NaN for finite input.
    ///
    /// ```
    /// use quarry_lorentz::FourMomentum;
    /// assert_eq!(FourMomentum::new(0.0, 0.0, 3.0, 5.0).m(), 4.0);
    /// assert_eq!(FourMomentum::new(0.0, 0.0, 5.0, 3.0).m(), -4.0);
    /// ```
    #[inline]
    pub fn m(&self) -> f64 {
        let m2 = self.m2();
        if m2 >= 0.0 {
            m2.sqrt()
        } else {
            -(-m2).sqrt()
        }
    }

    /// Transverse mass of this single system, `sqrt(E² − pz²)` with the same
    /// sign convention as [`m`](Self::m).
    ///
    /// ```
    /// let p = quarry_lorentz::FourMomentum::new(3.0, 4.0, 12.0, 13.0);
    /// assert!((p.mt() - 5.0).abs() < 1e-12);
    /// ```
    #[inline]
    pub fn mt(&self) -> f64 {
        let mt2 = (self.e - self.pz) * (self.e + self.pz);
        if mt2 >= 0.0 {
            mt2.sqrt()
        } else {
            -(-mt2).sqrt()
        }
    }

    /// Azimuth φ in (−π, π]; 0 for a vector with zero pt.
    ///
    /// ```
    /// let p = quarry_lorentz::FourMomentum::new(0.0, 1.0, 0.0, 1.0);
    /// assert!((p.phi() - std::f64::consts::FRAC_PI_2).abs() < 1e-15);
    /// ```
    #[inline]
    pub fn phi(&self) -> f64 {
        if self.px == 0.0 && self.py == 0.0 {
            0.0
        } else {
            // atan2 returns [−π, π]; map −π to π to keep the interval half-open.
            let phi = self.py.atan2(self.px);
            if phi == -PI {
                PI
            } else {
                phi
            }
        }
    }

    /// Pseudorapidity η = asinh(pz / pt). At `pt = 0` returns
    /// `±ETA_AT_ZERO_PT` by the sign of pz, and 0 for the null vector.
    ///
    /// ```
    /// use quarry_lorentz::{FourMomentum, ETA_AT_ZERO_PT};
    /// assert_eq!(FourMomentum::new(1.0, 0.0, 0.0, 1.0).eta(), 0.0);
    /// assert_eq!(FourMomentum::new(0.0, 0.0, -2.0, 2.0).eta(), -ETA_AT_ZERO_PT);
    /// ```
    #[inline]
    pub fn eta(&self) -> f64 {
        let pt = self.pt();
        if pt > 0.0 {
            (self.pz / pt).asinh()
        } else if self.pz > 0.0 {
            ETA_AT_ZERO_PT
        } else if self.pz < 0.0 {
            -ETA_AT_ZERO_PT
        } else {
            0.0
        }
    }

    /// Rapidity y = ½ ln((E + pz)/(E − pz)). For `|pz| ≥ E` (massless along
    /// the beam, or unphysical) returns `±ETA_AT_ZERO_PT` by the sign of pz.
    ///
    /// ```
    /// let p = quarry_lorentz::FourMomentum::new(1.0, 0.0, 0.0, 2.0);
    /// assert_eq!(p.rapidity(), 0.0);
    /// ```
    #[inline]
    pub fn rapidity(&self) -> f64 {
        if self.e > self.pz.abs() {
            // atanh form: 0.5 ln((E+pz)/(E−pz)) = atanh(pz/E), better conditioned.
            (self.pz / self.e).atanh()
        } else if self.pz > 0.0 {
            ETA_AT_ZERO_PT
        } else if self.pz < 0.0 {
            -ETA_AT_ZERO_PT
        } else {
            0.0
        }
    }

    /// The momentum three-vector `[px, py, pz]`.
    ///
    /// ```
    /// assert_eq!(quarry_lorentz::FourMomentum::new(1.0, 2.0, 3.0, 4.0).p3(), [1.0, 2.0, 3.0]);
    /// ```
    #[inline]
    pub const fn p3(&self) -> [f64; 3] {
        [self.px, self.py, self.pz]
    }

    /// Velocity β = p/E of the frame in which this vector is at rest.
    /// Returns the zero vector for `E = 0`.
    ///
    /// ```
    /// let p = quarry_lorentz::FourMomentum::new(0.0, 0.0, 3.0, 5.0);
    /// assert_eq!(p.beta(), [0.0, 0.0, 0.6]);
    /// ```
    #[inline]
    pub fn beta(&self) -> [f64; 3] {
        if self.e == 0.0 {
            [0.0; 3]
        } else {
            [self.px / self.e, self.py / self.e, self.pz / self.e]
        }
    }

    /// Δφ to another vector, wrapped into (−π, π].
    ///
    /// ```
    /// use quarry_lorentz::FourMomentum;
    /// let a = FourMomentum::from_pt_eta_phi_m(10.0, 0.0, 3.0, 0.0);
    /// let b = FourMomentum::from_pt_eta_phi_m(10.0, 0.0, -3.0, 0.0);
    /// assert!((a.delta_phi(&b) - (6.0 - 2.0 * std::f64::consts::PI)).abs() < 1e-12);
    /// ```
    #[inline]
    pub fn delta_phi(&self, other: &FourMomentum) -> f64 {
        wrap_phi(self.phi() - other.phi())
    }

    /// ΔR = sqrt(Δη² + Δφ²) to another vector (pseudorapidity-based, the
    /// usual collider convention).
    ///
    /// ```
    /// use quarry_lorentz::FourMomentum;
    /// let a = FourMomentum::from_pt_eta_phi_m(10.0, 0.3, 0.0, 0.0);
    /// let b = FourMomentum::from_pt_eta_phi_m(10.0, -0.1, 0.3, 0.0);
    /// assert!((a.delta_r(&b) - 0.5).abs() < 1e-12);
    /// ```
    #[inline]
    pub fn delta_r(&self, other: &FourMomentum) -> f64 {
        let deta = self.eta() - other.eta();
        let dphi = self.delta_phi(other);
        // |η| ≤ 1e5 by convention and |Δφ| ≤ π: the squares cannot
        // overflow, so no need for the slower `hypot`.
        (deta * deta + dphi * dphi).sqrt()
    }

    /// Squared ΔR, avoiding the square root for threshold comparisons.
    ///
    /// ```
    /// use quarry_lorentz::FourMomentum;
    /// let a = FourMomentum::from_pt_eta_phi_m(10.0, 0.3, 0.0, 0.0);
    /// let b = FourMomentum::from_pt_eta_phi_m(10.0, -0.1, 0.3, 0.0);
    /// assert!((a.delta_r2(&b) - 0.25).abs() < 1e-12);
    /// ```
    #[inline]
    pub fn delta_r2(&self, other: &FourMomentum) -> f64 {
        let deta = self.eta() - other.eta();
        let dphi = self.delta_phi(other);
        deta * deta + dphi * dphi
    }

    /// Opening angle between the two three-momenta in [0, π]; 0 if either is
    /// the null vector. Uses atan2(|a×b|, a·b), accurate at small angles.
    ///
    /// ```
    /// use quarry_lorentz::FourMomentum;
    /// let a = FourMomentum::new(1.0, 0.0, 0.0, 1.0);
    /// let b = FourMomentum::new(0.0, 1.0, 0.0, 1.0);
    /// assert!((a.angle(&b) - std::f64::consts::FRAC_PI_2).abs() < 1e-15);
    /// ```
    #[inline]
    pub fn angle(&self, other: &FourMomentum) -> f64 {
        let [ax, ay, az] = self.p3();
        let [bx, by, bz] = other.p3();
        let cx = ay * bz - az * by;
        let cy = az * bx - ax * bz;
        let cz = ax * by - ay * bx;
        let cross = (cx * cx + cy * cy + cz * cz).sqrt();
        let dot = ax * bx + ay * by + az * bz;
        if cross == 0.0 && dot == 0.0 {
            0.0
        } else {
            cross.atan2(dot)
        }
    }

    /// Minkowski product `E₁E₂ − p₁·p₂`.
    ///
    /// ```
    /// use quarry_lorentz::FourMomentum;
    /// let p = FourMomentum::new(0.0, 0.0, 3.0, 5.0);
    /// assert_eq!(p.dot(&p), p.m2());
    /// ```
    #[inline]
    pub fn dot(&self, other: &FourMomentum) -> f64 {
        self.e * other.e - self.px * other.px - self.py * other.py - self.pz * other.pz
    }

    /// Active boost by velocity `beta` (|β| < 1): the vector as seen from a
    /// frame moving with `−beta`. `boost(p.beta())` applied to a vector at
    /// rest in p's frame gives its momentum in the lab. For |β| ≥ 1 or
    /// non-finite β the vector is returned unchanged (there is no such frame).
    ///
    /// ```
    /// use quarry_lorentz::FourMomentum;
    /// let at_rest = FourMomentum::new(0.0, 0.0, 0.0, 4.0);
    /// let moving = at_rest.boost([0.0, 0.0, 0.6]);
    /// assert!((moving.pz() - 3.0).abs() < 1e-12);
    /// assert!((moving.e() - 5.0).abs() < 1e-12);
    /// ```
    #[inline]
    pub fn boost(&self, beta: [f64; 3]) -> FourMomentum {
        let [bx, by, bz] = beta;
        let b2 = bx * bx + by * by + bz * bz;
        if b2 == 0.0 || b2 >= 1.0 || !b2.is_finite() {
            return *self;
        }
        let gamma = 1.0 / (1.0 - b2).sqrt();
        let bp = bx * self.px + by * self.py + bz * self.pz;
        // (γ − 1)/β² written as γ²/(γ + 1) to stay accurate for tiny β.
        let gamma2 = gamma * gamma / (gamma + 1.0);
        let k = gamma2 * bp + gamma * self.e;
        FourMomentum::new(
            self.px + k * bx,
            self.py + k * by,
            self.pz + k * bz,
            gamma * (self.e + bp),
        )
    }

    /// This vector in the rest frame of `frame` (boost by `−frame.beta()`).
    ///
    /// ```
    /// use quarry_lorentz::FourMomentum;
    /// let w = FourMomentum::from_pt_eta_phi_m(200.0, 0.5, 1.0, 80.4);
    /// let rest = w.to_rest_frame_of(&w);
    /// assert!(rest.p() < 1e-9);
    /// assert!((rest.e() - 80.4).abs() < 1e-9);
    /// ```
    #[inline]
    pub fn to_rest_frame_of(&self, frame: &FourMomentum) -> FourMomentum {
        let [bx, by, bz] = frame.beta();
        self.boost([-bx, -by, -bz])
    }

    /// Inverse of [`to_rest_frame_of`](Self::to_rest_frame_of): a vector given
    /// in the rest frame of `frame`, expressed in the frame `frame` is measured
    /// in.
    ///
    /// ```
    /// use quarry_lorentz::FourMomentum;
    /// let w = FourMomentum::from_pt_eta_phi_m(200.0, 0.5, 1.0, 80.4);
    /// let q = FourMomentum::new(0.0, 0.0, 40.2, 40.2);
    /// let back = q.from_rest_frame_of(&w).to_rest_frame_of(&w);
    /// assert!((back.pz() - 40.2).abs() < 1e-9);
    /// ```
    #[inline]
    pub fn from_rest_frame_of(&self, frame: &FourMomentum) -> FourMomentum {
        self.boost(frame.beta())
    }

    /// True if all four components are finite.
    ///
    /// ```
    /// use quarry_lorentz::FourMomentum;
    /// assert!(FourMomentum::new(1.0, 2.0, 3.0, 4.0).is_finite());
    /// assert!(!FourMomentum::new(f64::NAN, 2.0, 3.0, 4.0).is_finite());
    /// ```
    #[inline]
    pub fn is_finite(&self) -> bool {
        self.px.is_finite() && self.py.is_finite() && self.pz.is_finite() && self.e.is_finite()
    }

    /// The same direction with energy (and momentum) scaled so that the mass
    /// is kept: `|p|` scales by `k`, E recomputed from the mass. Used by the
    /// kinematic fit, which moves energies along fixed directions.
    ///
    /// ```
    /// use quarry_lorentz::FourMomentum;
    /// let j = FourMomentum::from_pt_eta_phi_m(50.0, 0.2, 0.1, 8.0);
    /// let k = j.scale_momentum(1.1);
    /// assert!((k.pt() - 55.0).abs() < 1e-12);
    /// assert!((k.m() - 8.0).abs() < 1e-9);
    /// ```
    #[inline]
    pub fn scale_momentum(&self, k: f64) -> FourMomentum {
        let m2 = self.m2().max(0.0);
        let (px, py, pz) = (self.px * k, self.py * k, self.pz * k);
        FourMomentum::new(px, py, pz, (px * px + py * py + pz * pz + m2).sqrt())
    }
}

/// Wraps an angle difference into (−π, π].
///
/// ```
/// let d = quarry_lorentz::wrap_phi(3.0 * std::f64::consts::PI);
/// assert!((d - std::f64::consts::PI).abs() < 1e-12);
/// ```
#[inline]
pub fn wrap_phi(mut dphi: f64) -> f64 {
    if !dphi.is_finite() {
        return dphi;
    }
    if dphi > PI || dphi <= -PI {
        dphi = dphi.rem_euclid(2.0 * PI);
        if dphi > PI {
            dphi -= 2.0 * PI;
        }
    }
    dphi
}

/// Transverse mass of two transverse systems `a` and `b`, each given as a
/// four-vector whose transverse part and mass are used (pz is ignored):
/// `m_T² = m_a² + m_b² + 2 (E_Ta E_Tb − p_Ta · p_Tb)` with `E_T = sqrt(m² + pt²)`.
/// For a massless lepton and a neutrino this is the familiar
/// `2 pt_ℓ pt_ν (1 − cos Δφ)`. Returns the same signed convention as
/// [`FourMomentum::m`] if rounding makes m_T² negative.
///
/// ```
/// use quarry_lorentz::{transverse_mass, FourMomentum};
/// let lep = FourMomentum::from_pt_eta_phi_m(40.0, 0.0, 0.0, 0.0);
/// let met = FourMomentum::from_pt_eta_phi_m(40.0, 0.0, std::f64::consts::PI, 0.0);
/// assert!((transverse_mass(&lep, &met) - 80.0).abs() < 1e-12);
/// ```
#[inline]
pub fn transverse_mass(a: &FourMomentum, b: &FourMomentum) -> f64 {
    let ma2 = a.m2().max(0.0);
    let mb2 = b.m2().max(0.0);
    let eta = (ma2 + a.pt2()).sqrt();
    let etb = (mb2 + b.pt2()).sqrt();
    let mt2 = ma2 + mb2 + 2.0 * (eta * etb - a.px * b.px - a.py * b.py);
    if mt2 >= 0.0 {
        mt2.sqrt()
    } else {
        -(-mt2).sqrt()
    }
}

#[inline]
fn pt_eta_phi_to_cartesian(pt: f64, eta: f64, phi: f64) -> (f64, f64, f64) {
    let (s, c) = phi.sin_cos();
    (pt * c, pt * s, pt * eta.sinh())
}

impl Add for FourMomentum {
    type Output = FourMomentum;
    #[inline]
    fn add(self, o: FourMomentum) -> FourMomentum {
        FourMomentum::new(self.px + o.px, self.py + o.py, self.pz + o.pz, self.e + o.e)
    }
}

impl Sub for FourMomentum {
    type Output = FourMomentum;
    #[inline]
    fn sub(self, o: FourMomentum) -> FourMomentum {
        FourMomentum::new(self.px - o.px, self.py - o.py, self.pz - o.pz, self.e - o.e)
    }
}

impl AddAssign for FourMomentum {
    #[inline]
    fn add_assign(&mut self, o: FourMomentum) {
        *self = *self + o;
    }
}

impl SubAssign for FourMomentum {
    #[inline]
    fn sub_assign(&mut self, o: FourMomentum) {
        *self = *self - o;
    }
}

impl Neg for FourMomentum {
    type Output = FourMomentum;
    #[inline]
    fn neg(self) -> FourMomentum {
        FourMomentum::new(-self.px, -self.py, -self.pz, -self.e)
    }
}

impl Mul<f64> for FourMomentum {
    type Output = FourMomentum;
    #[inline]
    fn mul(self, k: f64) -> FourMomentum {
        FourMomentum::new(self.px * k, self.py * k, self.pz * k, self.e * k)
    }
}

impl Mul<FourMomentum> for f64 {
    type Output = FourMomentum;
    #[inline]
    fn mul(self, p: FourMomentum) -> FourMomentum {
        p * self
    }
}

impl Sum for FourMomentum {
    #[inline]
    fn sum<I: Iterator<Item = FourMomentum>>(iter: I) -> FourMomentum {
        iter.fold(FourMomentum::ZERO, Add::add)
    }
}

impl<'a> Sum<&'a FourMomentum> for FourMomentum {
    #[inline]
    fn sum<I: Iterator<Item = &'a FourMomentum>>(iter: I) -> FourMomentum {
        iter.fold(FourMomentum::ZERO, |a, b| a + *b)
    }
}
