//! The neutrino's longitudinal momentum from the W-mass constraint, and the
//! two neutrinos of dilepton final states ([`dilepton`]: the analytic
//! solution of the dilepton kinematic equations, L. Sonnenschein, Phys. Rev.
//! D 73 (2006) 054015).
//!
//! In a leptonic W decay the neutrino escapes; its transverse momentum is
//! taken from the missing transverse momentum (MET), and its pz is fixed by
//! requiring the charged lepton and the neutrino to have the invariant mass of
//! the W: `m²(ℓ + ν) = m_W²`. That is a quadratic in pz, with two real roots
//! or a complex pair (common practice in top-quark physics).
//!
//! **Design decision:** the solver is a small `Copy` value ([`WMassSolver`])
//! whose result ([`NeutrinoSolutions`]) is also `Copy` and lives on the stack
//! (at most two roots, no heap), because the assignment search calls it for
//! every lepton of every event. (The kinematic fit does not call it: it
//! starts from the neutrino the search solved and fits its momentum with the
//! W-mass constraint as one of its own.)
//! The real case is a closed formula with no iteration.
//!
//! # The equation
//! With the lepton `(E, p⃗_ℓ)` of mass `m_ℓ` (taken from the four-vector, not
//! assumed zero), the neutrino massless with transverse momentum `p⃗_T` (the
//! MET) and longitudinal momentum `z`:
//!
//! ```text
//! k  = (m_W² − m_ℓ²) / 2
//! μ  = k + p⃗_T,ℓ · p⃗_T                      (> 0 whenever roots are real)
//! a  = E² − p_z,ℓ² = m_ℓ² + p_T,ℓ²           (the lepton's transverse mass²)
//! a z² − 2 μ p_z,ℓ z + (E² p_T² − μ²) = 0
//! Δ  = μ² − a p_T²                          (discriminant / (4E²))
//! z± = (μ p_z,ℓ ± E √Δ) / a
//! ```
//!
//! The roots are evaluated without catastrophic cancellation:
//! `q = μ p_z,ℓ + sign(μ p_z,ℓ) E √Δ`, roots `q / a` and `c / q`. Squaring
//! introduced no spurious root: for `m_W > m_ℓ`, `Δ ≥ 0` implies
//! `μ ≥ √a p_T ≥ 0`, which keeps `E|p_ν| = μ + p_z,ℓ z` non-negative.
//!
//! # Complex case (Δ < 0)
//! The caller picks a [`ComplexStrategy`]:
//! - [`ComplexStrategy::DropImaginary`] keeps the MET and returns the real
//!   part `z = μ p_z,ℓ / a`; then `m(ℓ + ν) > m_W`.
//! - [`ComplexStrategy::AdjustMet`] (the default) moves the neutrino's
//!   transverse momentum by the smallest possible `|Δp⃗_T|` so that `Δ = 0`,
//!   and returns the double root; then `m(ℓ + ν) = m_W`.
//!
//! Geometry of `AdjustMet`: the set `Δ(p⃗_T) ≥ 0` is
//! `{ v : m_T,ℓ |v| − p⃗_T,ℓ·v ≤ k }`, in polar form `|v| ≤ k / (m_T,ℓ −
//! p_T,ℓ cos θ)` with θ measured from the lepton's direction: a filled conic
//! with one focus at the origin and eccentricity `p_T,ℓ / m_T,ℓ` — an ellipse
//! for a massive lepton, a parabola for a massless one (where the condition is
//! the familiar `m_T(ℓ, ν) ≤ m_W`). The region is convex, so the nearest point
//! to an outside MET is unique (projection onto a convex set) and lies on the
//! boundary, even though the distance along the boundary curve can have other
//! local minima. The solver finds it through the Lagrange condition
//! `v − MET = λ ∇Δ(v)/2`, `λ ≥ 0`: in the lepton's frame `v(λ)` is explicit,
//! and `Δ(v(λ))` is strictly increasing in λ (it is minus the derivative of
//! the concave dual function), so its single root is found by Newton steps
//! safeguarded by bisection. The result is finally put exactly on the curve
//! by a radial step to `r(θ)`, which changes `|Δp⃗_T|` only to second order.
//!
//! # Limits and assumptions
//! - One neutrino, massless, whose whole transverse momentum is the MET.
//! - The W is taken on shell at `w_mass` (no width).
//! - The lepton must be time-like or light-like up to rounding
//!   (`m_ℓ² ≥ −1e−9 E²`; tiny negative values are taken as 0) and must have
//!   transverse mass (`E² − p_z² > 0`).
//!
//! ```
//! use quarry_lorentz::FourMomentum;
//! use quarry_neutrino::{SolutionCase, WMassSolver};
//!
//! let muon = FourMomentum::from_pt_eta_phi_m(40.0, 0.5, 0.3, quarry_pdg::MUON_MASS);
//! let solutions = WMassSolver::default().solve(&muon, -30.0, 10.0).unwrap();
//! assert_eq!(solutions.case(), SolutionCase::Real);
//! for nu in solutions.as_slice() {
//!     assert!(((muon + nu.p4).m() - quarry_pdg::W_MASS).abs() < 1e-9);
//! }
//! ```
#![deny(missing_docs)]

pub mod dilepton;

use quarry_lorentz::{FourMomentum, Momentum};

/// A lepton with `m² < −SPACELIKE_TOLERANCE · E²` is rejected as unphysical;
/// above that, a negative m² is rounding and is taken as zero.
const SPACELIKE_TOLERANCE: f64 = 1e-9;

/// Iteration cap of the `AdjustMet` root search. Newton converges in a handful
/// of steps; bisection alone needs at most ~2100 halvings to exhaust f64, but
/// the safeguard only bisects when Newton misbehaves.
const MAX_ADJUST_ITERATIONS: usize = 300;

/// What to do when the quadratic for pz has no real root (negative
/// discriminant).
///
/// The default is [`AdjustMet`](Self::AdjustMet): complex solutions arise
/// mostly because the MET is mismeasured (its resolution is far poorer than the
/// lepton's), so the most plausible neutrino is the one reached by the smallest
/// change of the MET that satisfies the constraint. It keeps `m(ℓ + ν) = m_W`
/// exactly, and [`Neutrino::met_shift`] is a useful quality variable. Its cost
/// is a short iteration, paid only in the complex case.
/// [`DropImaginary`](Self::DropImaginary) is cheaper and also common practice.
///
/// ```
/// use quarry_neutrino::ComplexStrategy;
/// assert_eq!(ComplexStrategy::default(), ComplexStrategy::AdjustMet);
/// ```
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Hash)]
pub enum ComplexStrategy {
    /// Keep the measured MET and use the real part of the complex roots,
    /// `pz = μ p_z,ℓ / a` (see the crate docs); `m(ℓ + ν)` is then above m_W.
    DropImaginary,
    /// Move the MET vector by the smallest `|Δp⃗_T|` that makes the
    /// discriminant zero and use the resulting double root.
    #[default]
    AdjustMet,
}

/// Which case produced a [`Neutrino`].
///
/// ```
/// use quarry_lorentz::FourMomentum;
/// use quarry_neutrino::{SolutionCase, WMassSolver};
/// let e = FourMomentum::from_pt_eta_phi_m(50.0, 0.0, 0.0, 0.0);
/// // MET back to back with a hard lepton: transverse mass far above m_W.
/// let s = WMassSolver::default().solve(&e, -150.0, 0.0).unwrap();
/// assert_eq!(s.case(), SolutionCase::AdjustedMet);
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum SolutionCase {
    /// Non-negative discriminant: an exact root with the measured MET.
    Real,
    /// Negative discriminant, [`ComplexStrategy::DropImaginary`]: the real
    /// part of the complex roots with the measured MET.
    DroppedImaginary,
    /// Negative discriminant, [`ComplexStrategy::AdjustMet`]: the double root
    /// after the smallest change of the MET.
    AdjustedMet,
}

/// One neutrino solution.
///
/// Invariants: `p4` is massless (`E = |p⃗|` up to rounding) and finite; `met_shift ≥ 0`, and
/// it is 0 unless `case` is [`SolutionCase::AdjustedMet`], where it is the
/// length of the change applied to the MET vector.
///
/// ```
/// use quarry_lorentz::FourMomentum;
/// use quarry_neutrino::WMassSolver;
/// let mu = FourMomentum::from_pt_eta_phi_m(30.0, 1.0, 2.0, quarry_pdg::MUON_MASS);
/// let nu = WMassSolver::default().solve(&mu, 20.0, 5.0).unwrap().smaller_abs_pz();
/// assert_eq!(nu.met_shift, 0.0);
/// assert_eq!((nu.p4.px(), nu.p4.py()), (20.0, 5.0));
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Neutrino {
    /// Massless neutrino four-momentum: (px, py) from the MET (or the adjusted
    /// MET), pz solved, E = |p⃗|. GeV.
    pub p4: FourMomentum,
    /// Which case produced this solution.
    pub case: SolutionCase,
    /// `|Δp⃗_T|` of the MET vector in GeV; 0 unless `case` is `AdjustedMet`.
    pub met_shift: f64,
}

impl Momentum for Neutrino {
    #[inline]
    fn p4(&self) -> FourMomentum {
        self.p4
    }
}

/// The solutions of one solve: two roots in the real case (distinct or
/// equal), one in the complex case. Never empty.
///
/// Order: ascending `|pz|` — index 0 has the smaller `|pz|`
/// ([`smaller_abs_pz`](Self::smaller_abs_pz)). `Copy`, no heap.
///
/// ```
/// use quarry_lorentz::FourMomentum;
/// use quarry_neutrino::WMassSolver;
/// let e = FourMomentum::from_pt_eta_phi_m(35.0, -1.1, 0.7, quarry_pdg::ELECTRON_MASS);
/// let s = WMassSolver::default().solve(&e, 25.0, -12.0).unwrap();
/// assert_eq!(s.len(), 2);
/// assert!(s.as_slice()[0].p4.pz().abs() <= s.as_slice()[1].p4.pz().abs());
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct NeutrinoSolutions {
    /// Slot 1 repeats slot 0 when `len == 1`, so no slot is ever garbage.
    solutions: [Neutrino; 2],
    len: u8,
}

impl NeutrinoSolutions {
    fn one(nu: Neutrino) -> Self {
        NeutrinoSolutions {
            solutions: [nu, nu],
            len: 1,
        }
    }

    fn two(smaller: Neutrino, larger: Neutrino) -> Self {
        NeutrinoSolutions {
            solutions: [smaller, larger],
            len: 2,
        }
    }

    /// The solutions in ascending `|pz|`.
    ///
    /// ```
    /// use quarry_lorentz::FourMomentum;
    /// use quarry_neutrino::WMassSolver;
    /// let l = FourMomentum::from_pt_eta_phi_m(40.0, 0.2, 0.0, 0.0);
    /// let s = WMassSolver::default().solve(&l, 0.0, 30.0).unwrap();
    /// assert_eq!(s.as_slice().len(), s.len());
    /// ```
    #[inline]
    pub fn as_slice(&self) -> &[Neutrino] {
        &self.solutions[..self.len as usize]
    }

    /// Number of solutions: 2 in the real case, 1 in the complex case.
    ///
    /// ```
    /// use quarry_lorentz::FourMomentum;
    /// use quarry_neutrino::WMassSolver;
    /// let l = FourMomentum::from_pt_eta_phi_m(40.0, 0.2, 0.0, 0.0);
    /// assert_eq!(WMassSolver::default().solve(&l, 0.0, 30.0).unwrap().len(), 2);
    /// ```
    #[inline]
    pub fn len(&self) -> usize {
        self.len as usize
    }

    /// Always `false`: a successful solve has at least one solution.
    ///
    /// ```
    /// use quarry_lorentz::FourMomentum;
    /// use quarry_neutrino::WMassSolver;
    /// let l = FourMomentum::from_pt_eta_phi_m(40.0, 0.2, 0.0, 0.0);
    /// assert!(!WMassSolver::default().solve(&l, 0.0, 30.0).unwrap().is_empty());
    /// ```
    #[inline]
    pub fn is_empty(&self) -> bool {
        self.len == 0
    }

    /// The solution with the smaller `|pz|` (the only one in the complex
    /// case) — the usual single choice when one neutrino is needed.
    ///
    /// ```
    /// use quarry_lorentz::FourMomentum;
    /// use quarry_neutrino::WMassSolver;
    /// let l = FourMomentum::from_pt_eta_phi_m(40.0, 1.5, 0.0, 0.0);
    /// let s = WMassSolver::default().solve(&l, 0.0, 30.0).unwrap();
    /// let nu = s.smaller_abs_pz();
    /// assert!(s.as_slice().iter().all(|n| nu.p4.pz().abs() <= n.p4.pz().abs()));
    /// ```
    #[inline]
    pub fn smaller_abs_pz(&self) -> Neutrino {
        self.solutions[0]
    }

    /// The case that produced the solutions (the same for all of them).
    ///
    /// ```
    /// use quarry_lorentz::FourMomentum;
    /// use quarry_neutrino::{SolutionCase, WMassSolver};
    /// let l = FourMomentum::from_pt_eta_phi_m(40.0, 0.2, 0.0, 0.0);
    /// let s = WMassSolver::default().solve(&l, 0.0, 30.0).unwrap();
    /// assert_eq!(s.case(), SolutionCase::Real);
    /// ```
    #[inline]
    pub fn case(&self) -> SolutionCase {
        self.solutions[0].case
    }
}

/// Why a solve failed. Every variant is a property of the input; the solver
/// never panics and never returns NaN.
///
/// ```
/// use quarry_lorentz::FourMomentum;
/// use quarry_neutrino::{NeutrinoError, WMassSolver};
/// let l = FourMomentum::new(f64::NAN, 0.0, 0.0, 1.0);
/// assert_eq!(WMassSolver::default().solve(&l, 1.0, 1.0), Err(NeutrinoError::NonFiniteInput));
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, thiserror::Error)]
pub enum NeutrinoError {
    /// A lepton component, a MET component or the W mass is NaN or infinite.
    #[error("non-finite input (NaN or infinity) to the neutrino solver")]
    NonFiniteInput,
    /// The lepton has `E ≤ 0` or is space-like beyond rounding
    /// (`m² < −1e−9 E²`).
    #[error("unphysical lepton four-vector (E <= 0 or space-like)")]
    UnphysicalLepton,
    /// The lepton has no transverse mass (`E² − pz² ≤ 0`: massless and along
    /// the beam). The equation degenerates to a linear one and a root runs to
    /// infinity.
    #[error("lepton has zero transverse mass (massless, along the beam axis)")]
    LeptonAlongBeam,
    /// The W mass is not above the lepton mass (or not positive), so the
    /// decay W → ℓν is impossible.
    #[error("W mass must exceed the lepton mass")]
    WMassNotAboveLeptonMass,
    /// An intermediate value overflowed f64 (inputs of order 1e150 GeV and
    /// beyond).
    #[error("numerical overflow in the neutrino solver (inputs too large)")]
    Overflow,
}

/// Solves for the neutrino pz from `m(ℓ + ν) = w_mass`.
///
/// A plain `Copy` struct: set the fields or start from [`Default`] (PDG W mass
/// from `quarry_pdg`, [`ComplexStrategy::default`]).
///
/// ```
/// use quarry_lorentz::FourMomentum;
/// use quarry_neutrino::{ComplexStrategy, SolutionCase, WMassSolver};
/// let solver = WMassSolver { strategy: ComplexStrategy::DropImaginary, ..Default::default() };
/// let e = FourMomentum::from_pt_eta_phi_m(50.0, 0.4, 0.0, 0.0);
/// let s = solver.solve(&e, -150.0, 0.0).unwrap();
/// assert_eq!(s.case(), SolutionCase::DroppedImaginary);
/// assert_eq!(s.len(), 1);
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct WMassSolver {
    /// The W mass imposed on `ℓ + ν`, GeV.
    pub w_mass: f64,
    /// What to do when no real root exists.
    pub strategy: ComplexStrategy,
}

impl Default for WMassSolver {
    fn default() -> Self {
        WMassSolver {
            w_mass: quarry_pdg::W_MASS,
            strategy: ComplexStrategy::default(),
        }
    }
}

impl WMassSolver {
    /// Solves for the neutrino given the charged lepton's four-momentum (its
    /// mass is used as given) and the MET vector `(met_px, met_py)` in GeV.
    ///
    /// Returns two solutions ordered by ascending `|pz|` in the real case, one
    /// in the complex case (see [`ComplexStrategy`]), or a typed error for
    /// non-finite or unphysical input.
    ///
    /// ```
    /// use quarry_lorentz::FourMomentum;
    /// use quarry_neutrino::WMassSolver;
    /// let l = FourMomentum::from_pt_eta_phi_m(45.0, 0.0, 0.0, 0.0);
    /// let s = WMassSolver::default().solve(&l, -20.0, 30.0).unwrap();
    /// // A lepton with pz = 0 gives roots symmetric about 0.
    /// let [a, b] = [s.as_slice()[0].p4.pz(), s.as_slice()[1].p4.pz()];
    /// assert!((a + b).abs() < 1e-9);
    /// ```
    #[inline]
    pub fn solve(
        &self,
        lepton: &FourMomentum,
        met_px: f64,
        met_py: f64,
    ) -> Result<NeutrinoSolutions, NeutrinoError> {
        let (lx, ly, lz, e) = (lepton.px(), lepton.py(), lepton.pz(), lepton.e());
        if !(lepton.is_finite()
            && met_px.is_finite()
            && met_py.is_finite()
            && self.w_mass.is_finite())
        {
            return Err(NeutrinoError::NonFiniteInput);
        }
        if e <= 0.0 {
            return Err(NeutrinoError::UnphysicalLepton);
        }
        // Lepton transverse mass squared, in the form that keeps precision
        // for |pz| ≈ E; the mass² follows from it without a square root.
        let a = (e - lz) * (e + lz);
        let lepton_m2 = a - (lx * lx + ly * ly);
        if !(lepton_m2.is_finite() && a.is_finite()) {
            return Err(NeutrinoError::Overflow);
        }
        if lepton_m2 < -SPACELIKE_TOLERANCE * e * e {
            return Err(NeutrinoError::UnphysicalLepton);
        }
        let lepton_m2 = lepton_m2.max(0.0);
        if self.w_mass <= 0.0 {
            return Err(NeutrinoError::WMassNotAboveLeptonMass);
        }
        let k = 0.5 * (self.w_mass * self.w_mass - lepton_m2);
        if !k.is_finite() {
            return Err(NeutrinoError::Overflow);
        }
        if k <= 0.0 {
            return Err(NeutrinoError::WMassNotAboveLeptonMass);
        }
        if a <= 0.0 {
            return Err(NeutrinoError::LeptonAlongBeam);
        }
        let pt2 = met_px * met_px + met_py * met_py;
        let mu = k + lx * met_px + ly * met_py;
        let disc = mu * mu - a * pt2;
        if !disc.is_finite() {
            return Err(NeutrinoError::Overflow);
        }

        if disc >= 0.0 {
            let beta = mu * lz;
            let root = e * disc.sqrt();
            // q carries the sign of beta so the two terms never cancel.
            let q = if beta >= 0.0 {
                beta + root
            } else {
                beta - root
            };
            let (small, large) = if q == 0.0 {
                // beta = 0 and Δ = 0: the constant term vanishes too (double root at 0).
                (0.0, 0.0)
            } else {
                let c = e * e * pt2 - mu * mu;
                (c / q, q / a)
            };
            // E_ν from the unsquared constraint E·E_ν = μ + pz_ℓ·z: one shared
            // division instead of two square roots, and free of cancellation
            // (|pz_ℓ z| ≤ E E_ν, so μ ≤ 2 E E_ν).
            let inv_e = 1.0 / e;
            let e_small = (mu + lz * small) * inv_e;
            let e_large = (mu + lz * large) * inv_e;
            let nu_small = with_energy(met_px, met_py, small, e_small)?;
            let nu_large = with_energy(met_px, met_py, large, e_large)?;
            // |q/a| ≥ |c/q| by construction; a tie in magnitude keeps this order.
            return Ok(NeutrinoSolutions::two(nu_small, nu_large));
        }

        match self.strategy {
            ComplexStrategy::DropImaginary => {
                let pz = mu * lz / a;
                let nu = massless(met_px, met_py, pz, SolutionCase::DroppedImaginary, 0.0)?;
                Ok(NeutrinoSolutions::one(nu))
            }
            ComplexStrategy::AdjustMet => {
                let (vx, vy) = nearest_on_boundary(lx, ly, lepton_m2, a, k, met_px, met_py);
                let mu_adj = k + lx * vx + ly * vy;
                let pz = mu_adj * lz / a;
                let (dx, dy) = (vx - met_px, vy - met_py);
                let shift = (dx * dx + dy * dy).sqrt();
                if !shift.is_finite() {
                    return Err(NeutrinoError::Overflow);
                }
                let nu = massless(vx, vy, pz, SolutionCase::AdjustedMet, shift)?;
                Ok(NeutrinoSolutions::one(nu))
            }
        }
    }
}

/// A real-case neutrino with its energy already known, or `Overflow` if any
/// component is not finite.
#[inline]
fn with_energy(px: f64, py: f64, pz: f64, e: f64) -> Result<Neutrino, NeutrinoError> {
    if !(e.is_finite() && pz.is_finite()) {
        return Err(NeutrinoError::Overflow);
    }
    Ok(Neutrino {
        p4: FourMomentum::new(px, py, pz, e),
        case: SolutionCase::Real,
        met_shift: 0.0,
    })
}

/// A massless neutrino, or `Overflow` if any component is not finite.
#[inline]
fn massless(
    px: f64,
    py: f64,
    pz: f64,
    case: SolutionCase,
    met_shift: f64,
) -> Result<Neutrino, NeutrinoError> {
    let e = (px * px + py * py + pz * pz).sqrt();
    if !(e.is_finite() && pz.is_finite() && px.is_finite() && py.is_finite()) {
        return Err(NeutrinoError::Overflow);
    }
    Ok(Neutrino {
        p4: FourMomentum::new(px, py, pz, e),
        case,
        met_shift,
    })
}

/// The point of the boundary `Δ(v) = 0` nearest to the MET `(mx, my)`, which
/// lies outside the region `Δ ≥ 0` (see the crate docs for the method).
///
/// Works in the lepton's transverse frame (x along p⃗_T,ℓ), where with
/// `t = λ a`, `s = m_ℓ² / a` and `g = k p_T,ℓ / a` the Lagrange point is
/// `x(t) = (Mx + t g) / (1 + t s)`, `y(t) = My / (1 + t)`, and
/// `F(t) = Δ(v(t)) / a = k²/a + 2 g x − s x² − y²` increases strictly in t.
#[cold]
fn nearest_on_boundary(
    lx: f64,
    ly: f64,
    lepton_m2: f64,
    a: f64,
    k: f64,
    mx: f64,
    my: f64,
) -> (f64, f64) {
    let lpt = (lx * lx + ly * ly).sqrt();
    // Unit vectors along the lepton (u) and perpendicular to it (w); any
    // frame serves when the lepton has no pt (the region is then a disc).
    let (ux, uy) = if lpt > 0.0 {
        (lx / lpt, ly / lpt)
    } else {
        (1.0, 0.0)
    };
    let (wx, wy) = (-uy, ux);
    let m_par = mx * ux + my * uy;
    let m_perp = mx * wx + my * wy;

    let s = (lepton_m2 / a).clamp(0.0, 1.0);
    let g = k * lpt / a;
    let k2a = k * k / a;
    let point = |t: f64| ((m_par + t * g) / (1.0 + t * s), m_perp / (1.0 + t));
    // F and dF/dt, plus the scale of F's terms for the stopping test.
    let eval = |t: f64| {
        let (x, y) = point(t);
        let f = k2a + 2.0 * g * x - s * x * x - y * y;
        let scale = k2a + (2.0 * g * x).abs() + s * x * x + y * y;
        let gx = g - s * m_par;
        let ds = 1.0 + t * s;
        let dt = 1.0 + t;
        let df = 2.0 * gx * gx / (ds * ds * ds) + 2.0 * m_perp * m_perp / (dt * dt * dt);
        (f, df, scale)
    };

    let (mut lo, mut hi) = (0.0_f64, f64::INFINITY);
    let mut t = 0.0_f64;
    for _ in 0..MAX_ADJUST_ITERATIONS {
        let (f, df, scale) = eval(t);
        if f.abs() <= 8.0 * f64::EPSILON * scale {
            break;
        }
        if f < 0.0 {
            lo = t;
        } else {
            hi = t;
        }
        let newton = t - f / df;
        let next = if newton > lo && newton < hi && newton.is_finite() {
            newton
        } else if hi.is_finite() {
            0.5 * (lo + hi)
        } else {
            (2.0 * lo).max(1.0)
        };
        if next == t || (hi.is_finite() && hi - lo <= f64::EPSILON * hi) {
            break;
        }
        t = next;
    }

    let (x, y) = point(t);
    // Radial step onto the curve r(θ) = k / (m_T − p_T cos θ); the
    // denominator is written to avoid cancellation when e → 1 and θ → 0:
    // m_T − p_T cos θ = m²/(m_T + p_T) + p_T (1 − cos θ).
    let rho = (x * x + y * y).sqrt();
    let (x, y) = if rho > 0.0 {
        let one_minus_cos = if x > 0.0 {
            y * y / (rho * (rho + x))
        } else {
            (rho - x) / rho
        };
        let mt = a.sqrt();
        let denom = lepton_m2 / (mt + lpt) + lpt * one_minus_cos;
        if denom > 0.0 {
            let r = k / denom;
            (x * r / rho, y * r / rho)
        } else {
            (x, y)
        }
    } else {
        (x, y)
    };
    (x * ux + y * wx, x * uy + y * wy)
}
