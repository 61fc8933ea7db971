//! Two neutrinos from the dilepton kinematic equations.
//!
//! Method: the analytic solution of L. Sonnenschein, "Analytical solution of
//! tt̄ dilepton equations", Phys. Rev. D 73 (2006) 054015. Two tops (or heavy
//! quarks) decay as `t → b W → b ℓ ν`; the two neutrinos escape and only the
//! sum of their transverse momenta is measured (the MET). Six unknowns (the
//! two neutrino three-momenta) meet six equations: two W masses, two top
//! masses, and the two MET components. The solution set is the intersection
//! of two conics in the first neutrino's `(px, py)`, which is a quartic in
//! `px` with up to four real roots.
//!
//! # The equations
//! For one side, with lepton `ℓ`, b jet `b`, W mass `m_W` and top mass `m_t`,
//! the neutrino `ν = (E, x, y, z)` satisfies two *linear* equations (the mass
//! constraints with `ν² = 0` used):
//!
//! ```text
//! 2 ℓ·ν = m_W² − m_ℓ²                          =: 2A
//! 2 b·ν = m_t² − m_W² − m_b² − 2 ℓ·b            =: 2B
//! ```
//!
//! They fix `E` and `z` as linear functions of `(x, y)`:
//! `D·E = e₀ + e_x x + e_y y` and `D·z = z₀ + z_x x + z_y y`, with
//! `D = ℓ_z b_E − ℓ_E b_z` (= `m_T,ℓ m_T,b sinh(y_ℓ − y_b)`, zero when the
//! lepton and the b jet have the same rapidity). The mass shell `E² = x² +
//! y² + z²`, multiplied by `D²`, is then a conic in `(x, y)`:
//! `(e·v)² − D²(x² + y²) − (z·v)² = 0` with `v = (1, x, y)`. The second
//! neutrino gives a conic in its own `(x₂, y₂) = (MET_x − x, MET_y − y)`. The
//! resultant of the two conics with respect to `y` is a quartic in `x`.
//!
//! # Roots
//! The quartic's roots are the eigenvalues of its companion matrix (nalgebra's
//! real Schur form, a fixed-size matrix on the stack); roots whose imaginary
//! part is small are polished by Newton steps on the quartic (a complex pair
//! with a small imaginary part also contributes `re ± |im|`: two nearby real
//! roots can merge into such a pair in floating point). For each starting
//! `x` the candidates for `y` are the roots of a conic and the common root of
//! both; each `(x, y)` is polished by two-dimensional Newton steps on the two
//! conics, then by Newton steps on the four mass constraints themselves
//! (unknowns `x, y, z_a, z_b`), which removes the amplification of rounding
//! by `1/D`. When the roots cluster (intersections with nearly the same `x`),
//! the same search runs again with `x` and `y` exchanged. Squaring the mass
//! shell admits `E < 0`: such points are rejected, as is every point whose
//! final four-vectors miss a mass constraint by more than [`MASS_TOLERANCE`]
//! (relative). Distinct surviving points are the solutions. All arithmetic
//! is done in units of the largest energy or mass of the event, so the
//! coefficients are of order 1.
//!
//! Measured on 250 000 exact-parton events (top pairs and 0.5-2.5 TeV heavy
//! quark pairs): the true neutrinos were among the solutions to 1e-6
//! relative in all but one, an event with three solutions within 1e-7 of
//! each other in `px`.
//!
//! # Events with no real solution
//! Jet mismeasurement is the usual reason no real solution exists. The
//! treatment here ([`DileptonSolver::solve_or_smear`]) is the common practice
//! of smearing the jets within their resolutions: each b jet's energy is
//! drawn from a Gaussian around its measured value with σ from
//! [`quarry_resolution::ResolutionModel::jet_energy_sigma`] (direction and
//! mass kept), the MET takes the opposite of the change in the jets'
//! transverse momenta, and the equations are solved again. Of
//! [`SmearConfig::draws`] draws, the one with real solutions whose pulls
//! are smallest (`g_a² + g_b²`, the draw's χ²) is kept, and the fraction of
//! draws with real solutions is reported as a weight. The random stream is
//! seeded per event by the caller, so a rerun gives the same result. This
//! is quarry's own choice among the usual variants (averaging the draws with
//! weights is the other); like the single-neutrino `AdjustMet` strategy it
//! picks the smallest change of the measurement that admits a solution.
//!
//! # Limits
//! - Both neutrinos massless; all MET is theirs; W and top on shell at the
//!   given masses (no widths).
//! - `D = 0` (lepton and b jet at equal rapidity on a side) makes the linear
//!   system singular; such an input is reported as
//!   [`DileptonError::Degenerate`]. Near it the solutions lose precision and
//!   may be rejected by the mass check.
//! - Conics that coincide (a continuum of solutions) are reported as
//!   [`DileptonError::Degenerate`].

use nalgebra::{Matrix3, Matrix4, Vector4};
use quarry_lorentz::FourMomentum;
use quarry_resolution::ResolutionModel;
use rand::SeedableRng;
use rand_distr::{Distribution, StandardNormal};
use rand_pcg::Pcg64Mcg;

/// A solution is kept only if `m(ℓ+ν)` and `m(ℓ+ν+b)` of its final
/// (massless) four-vectors are within this relative distance of the W and top
/// masses on both sides. Regular roots meet the constraints to about 1e-12;
/// a double root (conics touching) only to about √ε, hence the margin.
pub const MASS_TOLERANCE: f64 = 1e-6;

/// `|D| ≤ DEGENERATE_D · E_ℓ E_b` (see the module docs) is treated as a
/// singular linear system.
const DEGENERATE_D: f64 = 1e-10;

/// Eigenvalues with `|Im| ≤ IMAGINARY_TOLERANCE · (1 + |Re|)` (in the scaled
/// variable) are taken as candidate real roots. Loose on purpose: a false
/// candidate fails the mass check, a lost double root would be lost for good.
const IMAGINARY_TOLERANCE: f64 = 1e-4;

/// Near-real roots closer than this (relative, scaled variable) count as a
/// cluster, which sends the search through the exchanged variable too.
const CLUSTER: f64 = 1e-3;

/// Two solutions closer than this in the scaled `(x, y)` are the same one.
const SAME_POINT: f64 = 1e-7;

/// The inputs of one dilepton solve: side `a` is `(lepton_a, bjet_a)`, side
/// `b` is `(lepton_b, bjet_b)`; the MET is the sum of both neutrinos'
/// transverse momenta. All in GeV. `Copy`.
///
/// ```
/// use quarry_lorentz::FourMomentum;
/// use quarry_neutrino::dilepton::DileptonEvent;
/// let l = FourMomentum::from_pt_eta_phi_m(50.0, 0.1, 0.2, 0.0);
/// let b = FourMomentum::from_pt_eta_phi_m(60.0, -0.4, 1.9, 4.8);
/// let ev = DileptonEvent { lepton_a: l, lepton_b: l, bjet_a: b, bjet_b: b, met: (30.0, -10.0) };
/// assert_eq!(ev.met.0, 30.0);
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct DileptonEvent {
    /// Charged lepton of side a.
    pub lepton_a: FourMomentum,
    /// Charged lepton of side b.
    pub lepton_b: FourMomentum,
    /// b jet of side a.
    pub bjet_a: FourMomentum,
    /// b jet of side b.
    pub bjet_b: FourMomentum,
    /// MET vector `(px, py)`.
    pub met: (f64, f64),
}

/// The mass constraints of a dilepton solve, GeV. Default: PDG W and top
/// masses from `quarry_pdg` on both sides. For a heavy-quark pair set `top_a`
/// and `top_b` to the quark mass hypothesis.
///
/// ```
/// let m = quarry_neutrino::dilepton::DileptonMasses::default();
/// assert_eq!(m.top_a, quarry_pdg::TOP_MASS);
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct DileptonMasses {
    /// W mass imposed on `ℓ_a + ν_a`.
    pub w_a: f64,
    /// W mass imposed on `ℓ_b + ν_b`.
    pub w_b: f64,
    /// Mass imposed on `ℓ_a + ν_a + b_a`.
    pub top_a: f64,
    /// Mass imposed on `ℓ_b + ν_b + b_b`.
    pub top_b: f64,
}

impl Default for DileptonMasses {
    fn default() -> Self {
        DileptonMasses {
            w_a: quarry_pdg::W_MASS,
            w_b: quarry_pdg::W_MASS,
            top_a: quarry_pdg::TOP_MASS,
            top_b: quarry_pdg::TOP_MASS,
        }
    }
}

/// One solution: the two neutrinos (massless, finite, `E > 0`).
///
/// ```
/// use quarry_lorentz::FourMomentum;
/// use quarry_neutrino::dilepton::NeutrinoPair;
/// let p = NeutrinoPair { nu_a: FourMomentum::new(1.0, 0.0, 0.0, 1.0), nu_b: FourMomentum::new(0.0, 1.0, 0.0, 1.0) };
/// assert_eq!(p.nu_a.e(), 1.0);
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct NeutrinoPair {
    /// Neutrino of side a.
    pub nu_a: FourMomentum,
    /// Neutrino of side b.
    pub nu_b: FourMomentum,
}

/// Up to four solutions, on the stack. May be empty (no real solution).
///
/// Order: ascending invariant mass of the whole system
/// `ℓ_a + ℓ_b + b_a + b_b + ν_a + ν_b` (picking the lowest is common
/// practice, from memory).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct DileptonSolutions {
    pairs: [NeutrinoPair; 4],
    len: u8,
}

impl DileptonSolutions {
    const EMPTY: DileptonSolutions = DileptonSolutions {
        pairs: [NeutrinoPair {
            nu_a: FourMomentum::new(0.0, 0.0, 0.0, 0.0),
            nu_b: FourMomentum::new(0.0, 0.0, 0.0, 0.0),
        }; 4],
        len: 0,
    };

    /// The solutions, lowest system mass first.
    #[inline]
    pub fn as_slice(&self) -> &[NeutrinoPair] {
        &self.pairs[..self.len as usize]
    }

    /// Number of solutions (0 to 4).
    #[inline]
    pub fn len(&self) -> usize {
        self.len as usize
    }

    /// True when no real solution exists.
    #[inline]
    pub fn is_empty(&self) -> bool {
        self.len == 0
    }
}

/// The quartic of one event, in the scaled variable `u = px(ν_a) / scale`:
/// `Σ coefficients[i] · uⁱ = 0`, the coefficient vector normalised to a
/// largest magnitude of 1.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Quartic {
    /// `c₀ … c₄`, lowest power first.
    pub coefficients: [f64; 5],
    /// The unit of the scaled variable, GeV (the event's largest energy or
    /// mass).
    pub scale: f64,
}

impl Quartic {
    /// The coefficients for the variable `px(ν_a)` in GeV (`cᵢ / scaleⁱ`),
    /// renormalised to a largest magnitude of 1.
    pub fn in_gev(&self) -> [f64; 5] {
        let mut c = self.coefficients;
        let mut s = 1.0;
        for ci in c.iter_mut() {
            *ci /= s;
            s *= self.scale;
        }
        normalise(&mut c);
        c
    }
}

/// Why a dilepton solve failed. A property of the input; the solver never
/// panics and never returns NaN.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, thiserror::Error)]
pub enum DileptonError {
    /// An input component or mass is NaN or infinite, or a mass is not
    /// positive.
    #[error("non-finite or non-positive input to the dilepton solver")]
    NonFiniteInput,
    /// An object has `E ≤ 0`.
    #[error("unphysical four-vector (E <= 0) in the dilepton solver")]
    Unphysical,
    /// A lepton and its b jet have the same rapidity (singular linear
    /// system), or the two conics coincide.
    #[error("degenerate dilepton configuration (lepton and b jet at equal rapidity, or coinciding conics)")]
    Degenerate,
}

/// A conic `xx·x² + xy·xy + yy·y² + x·x + y·y + c = 0` plus the linear maps
/// that give `D·E` and `D·z` of the neutrino from `(x, y)`.
#[derive(Clone, Copy, Debug)]
struct Side {
    /// Scaled lepton and b jet.
    lepton: FourMomentum,
    bjet: FourMomentum,
    /// Right-hand sides of `ℓ·ν = A` and `b·ν = B`.
    a: f64,
    b: f64,
    conic: [f64; 6],
    energy: [f64; 3],
    pz: [f64; 3],
    det: f64,
}

impl Side {
    /// `lepton`, `bjet` and masses in scaled units.
    fn new(
        lepton: &FourMomentum,
        bjet: &FourMomentum,
        w: f64,
        top: f64,
    ) -> Result<Side, DileptonError> {
        let (le, lx, ly, lz) = (lepton.e(), lepton.px(), lepton.py(), lepton.pz());
        let (be, bx, by, bz) = (bjet.e(), bjet.px(), bjet.py(), bjet.pz());
        let ml2 = lepton.m2();
        let mb2 = bjet.m2();
        let lb = lepton.dot(bjet);
        let a = 0.5 * (w * w - ml2);
        let b = 0.5 * (top * top - w * w - mb2 - 2.0 * lb);
        let det = lz * be - le * bz;
        if det.abs() <= DEGENERATE_D * le * be || det.is_nan() {
            return Err(DileptonError::Degenerate);
        }
        // D·E = lz·Q − bz·P and D·z = lE·Q − bE·P with P = A + lx x + ly y,
        // Q = B + bx x + by y (Cramer's rule on the two linear equations).
        let energy = [lz * b - bz * a, lz * bx - bz * lx, lz * by - bz * ly];
        let pz = [le * b - be * a, le * bx - be * lx, le * by - be * ly];
        let d2 = det * det;
        let [e0, ex, ey] = energy;
        let [z0, zx, zy] = pz;
        let mut conic = [
            ex * ex - d2 - zx * zx,
            2.0 * (ex * ey - zx * zy),
            ey * ey - d2 - zy * zy,
            2.0 * (e0 * ex - z0 * zx),
            2.0 * (e0 * ey - z0 * zy),
            e0 * e0 - z0 * z0,
        ];
        normalise(&mut conic);
        Ok(Side {
            lepton: *lepton,
            bjet: *bjet,
            a,
            b,
            conic,
            energy,
            pz,
            det,
        })
    }

    /// The same conic in `(x, y)` where this side's neutrino has
    /// `(mx − x, my − y)`.
    fn mirrored(&self, mx: f64, my: f64) -> [f64; 6] {
        let [a, b, c, d, e, f] = self.conic;
        let mut out = [
            a,
            b,
            c,
            -2.0 * a * mx - b * my - d,
            -b * mx - 2.0 * c * my - e,
            a * mx * mx + b * mx * my + c * my * my + d * mx + e * my + f,
        ];
        normalise(&mut out);
        out
    }

    /// Residuals of `ℓ·ν − A` and `b·ν − B` for the massless neutrino with
    /// momentum `(x, y, z)`, and their gradients in `(x, y, z)`.
    fn residuals(&self, x: f64, y: f64, z: f64) -> ([f64; 2], [[f64; 3]; 2]) {
        let e = (x * x + y * y + z * z).sqrt();
        let mut r = [0.0; 2];
        let mut g = [[0.0; 3]; 2];
        for (k, (v, rhs)) in [(self.lepton, self.a), (self.bjet, self.b)]
            .into_iter()
            .enumerate()
        {
            r[k] = v.e() * e - v.px() * x - v.py() * y - v.pz() * z - rhs;
            let f = if e > 0.0 { v.e() / e } else { 0.0 };
            g[k] = [f * x - v.px(), f * y - v.py(), f * z - v.pz()];
        }
        (r, g)
    }

    /// `(E, z)` of the neutrino with transverse momentum `(x, y)`.
    fn energy_pz(&self, x: f64, y: f64) -> (f64, f64) {
        let e = (self.energy[0] + self.energy[1] * x + self.energy[2] * y) / self.det;
        let z = (self.pz[0] + self.pz[1] * x + self.pz[2] * y) / self.det;
        (e, z)
    }
}

/// Divides by the largest magnitude (no-op for an all-zero vector).
fn normalise<const N: usize>(c: &mut [f64; N]) {
    let m = c.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
    if m > 0.0 && m.is_finite() {
        for v in c.iter_mut() {
            *v /= m;
        }
    }
}

fn conic_value(c: &[f64; 6], x: f64, y: f64) -> f64 {
    c[0] * x * x + c[1] * x * y + c[2] * y * y + c[3] * x + c[4] * y + c[5]
}

fn conic_gradient(c: &[f64; 6], x: f64, y: f64) -> (f64, f64) {
    (
        2.0 * c[0] * x + c[1] * y + c[3],
        c[1] * x + 2.0 * c[2] * y + c[4],
    )
}

/// The conic as a quadratic in y at fixed x: `(α₂, α₁(x), α₀(x))` as
/// polynomials in x, lowest power first.
fn in_y(c: &[f64; 6]) -> (f64, [f64; 2], [f64; 3]) {
    (c[2], [c[4], c[1]], [c[5], c[3], c[0]])
}

fn poly_mul<const A: usize, const B: usize>(a: &[f64; A], b: &[f64; B]) -> [f64; 5] {
    let mut out = [0.0; 5];
    for (i, ai) in a.iter().enumerate() {
        for (j, bj) in b.iter().enumerate() {
            out[i + j] += ai * bj;
        }
    }
    out
}

/// Resultant with respect to y of two conics, a polynomial in x of degree
/// ≤ 4: `Res = u² − v·w` with `u = α₂β₀ − β₂α₀`, `v = α₂β₁ − β₂α₁`,
/// `w = α₁β₀ − α₀β₁` (Sylvester determinant of two quadratics).
fn resultant(p: &[f64; 6], q: &[f64; 6]) -> [f64; 5] {
    let (a2, a1, a0) = in_y(p);
    let (b2, b1, b0) = in_y(q);
    let u = [
        a2 * b0[0] - b2 * a0[0],
        a2 * b0[1] - b2 * a0[1],
        a2 * b0[2] - b2 * a0[2],
    ];
    let v = [a2 * b1[0] - b2 * a1[0], a2 * b1[1] - b2 * a1[1]];
    let ab = poly_mul(&a1, &b0);
    let ba = poly_mul(&a0, &b1);
    let w = [ab[0] - ba[0], ab[1] - ba[1], ab[2] - ba[2], ab[3] - ba[3]];
    let uu = poly_mul(&u, &u);
    let vw = poly_mul(&v, &w);
    let mut out = [0.0; 5];
    for i in 0..5 {
        out[i] = uu[i] - vw[i];
    }
    out
}

fn horner(c: &[f64; 5], x: f64) -> (f64, f64) {
    let mut p = 0.0;
    let mut dp = 0.0;
    for ci in c.iter().rev() {
        dp = dp * x + p;
        p = p * x + ci;
    }
    (p, dp)
}

/// Roots of `Σ cᵢ xⁱ` (degree ≤ 4) as `(re, im)` whose imaginary part is
/// small enough for a real root nearby (see [`IMAGINARY_TOLERANCE`]), from
/// the companion matrix's eigenvalues (nalgebra real Schur form). Leading
/// coefficients below 1e-12 of the largest are dropped (the root they carry
/// is at infinity for this purpose). `None` if all coefficients are zero or
/// any is non-finite.
fn near_real_roots(c: &[f64; 5]) -> Option<([(f64, f64); 4], usize)> {
    let big = c.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
    if !(big > 0.0 && big.is_finite()) || c.iter().any(|v| !v.is_finite()) {
        return None;
    }
    let degree = (0..5)
        .rev()
        .find(|&i| c[i].abs() > 1e-12 * big)
        .unwrap_or(0);
    let mut roots = [(0.0, 0.0); 4];
    let mut n = 0;
    let mut push = |re: f64, im: f64| {
        if im.abs() <= IMAGINARY_TOLERANCE * (1.0 + re.abs()) && re.is_finite() {
            roots[n] = (re, im);
            n += 1;
        }
    };
    let lead = c[degree];
    match degree {
        0 => {}
        1 => push(-c[0] / c[1], 0.0),
        2 => {
            let (a, b, cc) = (c[2], c[1], c[0]);
            let disc = b * b - 4.0 * a * cc;
            if disc >= 0.0 {
                let q = -0.5 * (b + b.signum() * disc.sqrt());
                if q != 0.0 {
                    push(q / a, 0.0);
                    push(cc / q, 0.0);
                } else {
                    push(0.0, 0.0);
                    push(0.0, 0.0);
                }
            } else {
                let im = (-disc).sqrt() / (2.0 * a.abs());
                push(-b / (2.0 * a), im);
                push(-b / (2.0 * a), -im);
            }
        }
        3 => {
            #[rustfmt::skip]
            let m = Matrix3::new(
                0.0, 0.0, -c[0] / lead,
                1.0, 0.0, -c[1] / lead,
                0.0, 1.0, -c[2] / lead,
            );
            for z in m.complex_eigenvalues().iter() {
                push(z.re, z.im);
            }
        }
        _ => {
            #[rustfmt::skip]
            let m = Matrix4::new(
                0.0, 0.0, 0.0, -c[0] / lead,
                1.0, 0.0, 0.0, -c[1] / lead,
                0.0, 1.0, 0.0, -c[2] / lead,
                0.0, 0.0, 1.0, -c[3] / lead,
            );
            for z in m.complex_eigenvalues().iter() {
                push(z.re, z.im);
            }
        }
    }
    Some((roots, n))
}

/// Newton steps on the polynomial from `x`; a step is kept only if it lowers
/// |p|.
fn polish_root(c: &[f64; 5], mut x: f64) -> f64 {
    let (mut best, _) = horner(c, x);
    for _ in 0..8 {
        let (p, dp) = horner(c, x);
        if p == 0.0 || dp == 0.0 {
            break;
        }
        let next = x - p / dp;
        let (pn, _) = horner(c, next);
        if pn.abs() >= best.abs() || pn.is_nan() {
            break;
        }
        best = pn;
        x = next;
    }
    x
}

/// Real roots of `Σ cᵢ xⁱ` (degree ≤ 4), ascending, at most four: companion
/// matrix eigenvalues (nalgebra real Schur form) whose imaginary part is
/// small (`|Im| ≤ 1e-4 (1 + |Re|)`: a double root computed in floating point
/// may come out as a complex pair), each polished by Newton steps on the
/// polynomial (a step is kept only if it lowers |p|). Leading coefficients
/// below 1e-12 of the largest are dropped. Near-double roots are returned
/// twice; `None` if all coefficients are zero or any is non-finite.
///
/// ```
/// use quarry_neutrino::dilepton::real_roots;
/// // (x − 1)(x − 2)(x² + 1) = x⁴ − 3x³ + 3x² − 3x + 2
/// let (roots, n) = real_roots(&[2.0, -3.0, 3.0, -3.0, 1.0]).unwrap();
/// assert_eq!(n, 2);
/// assert!((roots[0] - 1.0).abs() < 1e-12 && (roots[1] - 2.0).abs() < 1e-12);
/// ```
pub fn real_roots(c: &[f64; 5]) -> Option<([f64; 4], usize)> {
    let (candidates, n) = near_real_roots(c)?;
    let mut roots = [0.0; 4];
    for (r, &(re, _)) in roots.iter_mut().zip(&candidates[..n]) {
        *r = polish_root(c, re);
    }
    roots[..n].sort_by(f64::total_cmp);
    Some((roots, n))
}

/// What [`DileptonSolver::solve_or_smear`] returns.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SmearedSolutions {
    /// The solutions for the kept b jets (empty only if no draw had one).
    pub solutions: DileptonSolutions,
    /// The b jets the solutions belong to (the measured ones when no
    /// smearing was needed).
    pub bjet_a: FourMomentum,
    /// See `bjet_a`.
    pub bjet_b: FourMomentum,
    /// The MET the solutions belong to (changed by the jets' smearing).
    pub met: (f64, f64),
    /// Pull χ² of the kept draw, `g_a² + g_b²` (0 when no smearing was
    /// needed).
    pub pull_chi2: f64,
    /// Fraction of draws with a real solution (1 when no smearing was
    /// needed, 0 when no draw had one): a weight for the event.
    pub weight: f64,
    /// True when the solutions come from smeared jets.
    pub smeared: bool,
}

/// Settings of the smearing treatment of events with no real solution.
///
/// ```
/// assert_eq!(quarry_neutrino::dilepton::SmearConfig::default().draws, 100);
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct SmearConfig {
    /// Number of smeared draws (default 100, a typical value, from memory).
    pub draws: u32,
}

impl Default for SmearConfig {
    fn default() -> Self {
        SmearConfig { draws: 100 }
    }
}

/// Solves the dilepton equations. `Copy`; start from [`Default`] (PDG
/// masses).
///
/// ```
/// use quarry_lorentz::FourMomentum;
/// use quarry_neutrino::dilepton::{DileptonEvent, DileptonSolver};
/// // Exact configuration: two known neutrinos, the masses they give, their MET.
/// let la = FourMomentum::from_pt_eta_phi_m(60.0, 0.3, 0.1, 0.0);
/// let lb = FourMomentum::from_pt_eta_phi_m(45.0, -0.8, 2.5, 0.0);
/// let ba = FourMomentum::from_pt_eta_phi_m(80.0, 0.9, -0.7, 4.8);
/// let bb = FourMomentum::from_pt_eta_phi_m(70.0, -0.2, -2.4, 4.8);
/// let na = FourMomentum::from_pt_eta_phi_m(50.0, -0.5, 0.6, 0.0);
/// let nb = FourMomentum::from_pt_eta_phi_m(40.0, 1.1, 1.9, 0.0);
/// let mut solver = DileptonSolver::default();
/// solver.masses.w_a = (la + na).m();
/// solver.masses.w_b = (lb + nb).m();
/// solver.masses.top_a = (la + na + ba).m();
/// solver.masses.top_b = (lb + nb + bb).m();
/// let met = (na.px() + nb.px(), na.py() + nb.py());
/// let ev = DileptonEvent { lepton_a: la, lepton_b: lb, bjet_a: ba, bjet_b: bb, met };
/// let s = solver.solve(&ev).unwrap();
/// assert!(s.as_slice().iter().any(|p| (p.nu_a.pz() - na.pz()).abs() < 1e-6 * na.e()));
/// ```
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct DileptonSolver {
    /// The W and top (or heavy-quark) masses imposed.
    pub masses: DileptonMasses,
}

/// Distinct solutions collected so far, with their scaled unknowns
/// `(x, y, z_a, z_b)`.
struct Found {
    points: [[f64; 4]; 4],
    pairs: [NeutrinoPair; 4],
    len: usize,
}

impl Found {
    /// True if a solution already found has this `(x, y)` (to the last
    /// polish's precision), so polishing it again would only repeat it.
    fn has_near(&self, x: f64, y: f64) -> bool {
        let size = 1.0 + x.abs() + y.abs();
        self.points[..self.len]
            .iter()
            .any(|q| (q[0] - x).abs() + (q[1] - y).abs() <= 1e-12 * size)
    }

    /// Adds a solution unless one within [`SAME_POINT`] is already there
    /// (or four are).
    fn add(&mut self, pair: NeutrinoPair, point: [f64; 4]) {
        let size: f64 = 1.0 + point.iter().map(|v| v.abs()).sum::<f64>();
        let same = |q: &[f64; 4]| {
            let d: f64 = q.iter().zip(&point).map(|(a, b)| (a - b).abs()).sum();
            d <= SAME_POINT * size
        };
        if self.len < 4 && !self.points[..self.len].iter().any(same) {
            self.points[self.len] = point;
            self.pairs[self.len] = pair;
            self.len += 1;
        }
    }
}

/// The event in scaled units, with both sides' conics.
struct Prepared {
    scale: f64,
    side_a: Side,
    side_b: Side,
    conic_a: [f64; 6],
    conic_b: [f64; 6],
    met: (f64, f64),
}

impl DileptonSolver {
    fn prepare(&self, ev: &DileptonEvent) -> Result<Prepared, DileptonError> {
        let m = self.masses;
        let vectors = [ev.lepton_a, ev.lepton_b, ev.bjet_a, ev.bjet_b];
        let masses = [m.w_a, m.w_b, m.top_a, m.top_b];
        if !(vectors.iter().all(|v| v.is_finite())
            && ev.met.0.is_finite()
            && ev.met.1.is_finite()
            && masses.iter().all(|v| v.is_finite() && *v > 0.0))
        {
            return Err(DileptonError::NonFiniteInput);
        }
        // Finite by the check above, so `<=` also catches every non-positive E.
        if vectors.iter().any(|v| v.e() <= 0.0) {
            return Err(DileptonError::Unphysical);
        }
        let scale = vectors
            .iter()
            .map(|v| v.e())
            .chain(masses)
            .chain([ev.met.0.hypot(ev.met.1)])
            .fold(0.0_f64, f64::max);
        if !(scale.is_finite() && scale > 0.0) {
            return Err(DileptonError::NonFiniteInput);
        }
        let k = 1.0 / scale;
        let s = |v: &FourMomentum| *v * k;
        let side_a = Side::new(&s(&ev.lepton_a), &s(&ev.bjet_a), m.w_a * k, m.top_a * k)?;
        let side_b = Side::new(&s(&ev.lepton_b), &s(&ev.bjet_b), m.w_b * k, m.top_b * k)?;
        let met = (ev.met.0 * k, ev.met.1 * k);
        let conic_a = side_a.conic;
        let conic_b = side_b.mirrored(met.0, met.1);
        Ok(Prepared {
            scale,
            side_a,
            side_b,
            conic_a,
            conic_b,
            met,
        })
    }

    /// The event's quartic in `px(ν_a)` (see the module docs).
    ///
    /// # Errors
    /// As [`solve`](Self::solve).
    pub fn quartic(&self, ev: &DileptonEvent) -> Result<Quartic, DileptonError> {
        let p = self.prepare(ev)?;
        let mut coefficients = resultant(&p.conic_a, &p.conic_b);
        normalise(&mut coefficients);
        Ok(Quartic {
            coefficients,
            scale: p.scale,
        })
    }

    /// All real solutions (0 to 4), lowest system mass first.
    ///
    /// # Errors
    /// Non-finite input or non-positive masses, an object with `E ≤ 0`, a
    /// degenerate configuration (see the module docs).
    pub fn solve(&self, ev: &DileptonEvent) -> Result<DileptonSolutions, DileptonError> {
        let p = self.prepare(ev)?;
        let mut found = Found {
            points: [[0.0; 4]; 4],
            pairs: DileptonSolutions::EMPTY.pairs,
            len: 0,
        };
        let clustered = self.intersections(ev, &p, false, &mut found)?;
        if clustered {
            // Intersections that share (nearly) the same x merge into a root
            // cluster the eigenvalues cannot resolve; the same search with x
            // and y exchanged separates them.
            self.intersections(ev, &p, true, &mut found)?;
        }
        let visible = ev.lepton_a + ev.lepton_b + ev.bjet_a + ev.bjet_b;
        let system_mass = |pair: &NeutrinoPair| (visible + pair.nu_a + pair.nu_b).m();
        let n = found.len;
        found.pairs[..n].sort_by(|a, b| system_mass(a).total_cmp(&system_mass(b)));
        Ok(DileptonSolutions {
            pairs: found.pairs,
            len: n as u8,
        })
    }

    /// Adds to `found` the solutions reached from the real roots of the
    /// resultant in x (in y when `swapped`); returns whether the roots were
    /// clustered (a complex pair with a small imaginary part, or two roots
    /// within [`CLUSTER`]), where intersections may have been missed.
    fn intersections(
        &self,
        ev: &DileptonEvent,
        p: &Prepared,
        swapped: bool,
        found: &mut Found,
    ) -> Result<bool, DileptonError> {
        let swap = |c: &[f64; 6]| [c[2], c[1], c[0], c[4], c[3], c[5]];
        let (cp, cq) = if swapped {
            (swap(&p.conic_a), swap(&p.conic_b))
        } else {
            (p.conic_a, p.conic_b)
        };
        let mut quartic = resultant(&cp, &cq);
        normalise(&mut quartic);
        let Some((roots, n)) = near_real_roots(&quartic) else {
            return Err(DileptonError::Degenerate);
        };
        // Starting points: each polished root; for a complex pair with a
        // small imaginary part also re ± |im|. Two intersections closer than
        // about √(ε / spread of the other roots) can merge into such a pair
        // in floating point; the two-dimensional polish below separates them.
        let mut starts = [0.0; 12];
        let mut n_starts = 0;
        let mut clustered = false;
        for (i, &(re, im)) in roots[..n].iter().enumerate() {
            clustered |= im != 0.0
                || roots[..i]
                    .iter()
                    .any(|&(other, _)| (other - re).abs() <= CLUSTER * (1.0 + re.abs()));
            starts[n_starts] = polish_root(&quartic, re);
            n_starts += 1;
            if im != 0.0 {
                starts[n_starts] = re - im.abs();
                starts[n_starts + 1] = re + im.abs();
                n_starts += 2;
            }
        }
        for &s in &starts[..n_starts] {
            let candidates = y_candidates(&cp, &cq, s);
            for (k, t) in candidates.iter().enumerate() {
                let Some(t) = *t else { continue };
                if candidates[..k].contains(&Some(t)) {
                    continue;
                }
                let (s, t) = polish(&cp, &cq, s, t);
                let (x, y) = if swapped { (t, s) } else { (s, t) };
                if found.has_near(x, y) {
                    continue;
                }
                if let Some((pair, point)) = self.accept(ev, p, x, y) {
                    found.add(pair, point);
                }
            }
        }
        Ok(clustered)
    }

    /// The neutrinos at scaled `(x, y)`, after the final polish, if both have
    /// `E > 0` and every mass constraint holds within [`MASS_TOLERANCE`];
    /// with the polished unknowns `(x, y, z_a, z_b)`.
    fn accept(
        &self,
        ev: &DileptonEvent,
        p: &Prepared,
        x: f64,
        y: f64,
    ) -> Option<(NeutrinoPair, [f64; 4])> {
        let (xb, yb) = (p.met.0 - x, p.met.1 - y);
        let (ea, za) = p.side_a.energy_pz(x, y);
        let (eb, zb) = p.side_b.energy_pz(xb, yb);
        if !(ea > 0.0 && eb > 0.0) {
            return None;
        }
        let (x, y, za, zb) = polish_full(p, x, y, za, zb);
        let (xb, yb) = (p.met.0 - x, p.met.1 - y);
        let s = p.scale;
        let massless = |x: f64, y: f64, z: f64| {
            let (x, y, z) = (x * s, y * s, z * s);
            FourMomentum::new(x, y, z, (x * x + y * y + z * z).sqrt())
        };
        let nu_a = massless(x, y, za);
        let nu_b = massless(xb, yb, zb);
        if !(nu_a.is_finite() && nu_b.is_finite()) {
            return None;
        }
        let m = self.masses;
        let close = |got: f64, want: f64| (got - want).abs() <= MASS_TOLERANCE * want;
        let ok = close((ev.lepton_a + nu_a).m(), m.w_a)
            && close((ev.lepton_b + nu_b).m(), m.w_b)
            && close((ev.lepton_a + nu_a + ev.bjet_a).m(), m.top_a)
            && close((ev.lepton_b + nu_b + ev.bjet_b).m(), m.top_b);
        ok.then_some((NeutrinoPair { nu_a, nu_b }, [x, y, za, zb]))
    }

    /// [`solve`](Self::solve); if that finds no real solution, the smearing
    /// treatment of the module docs: `config.draws` draws of both b-jet
    /// energies within their resolutions from `resolution`, from a random
    /// stream seeded by `seed` (give each event its own, e.g. its id), the
    /// draw with solutions and the smallest pull χ² kept.
    ///
    /// # Errors
    /// As [`solve`](Self::solve) on the measured event.
    pub fn solve_or_smear(
        &self,
        ev: &DileptonEvent,
        resolution: &ResolutionModel,
        config: SmearConfig,
        seed: u64,
    ) -> Result<SmearedSolutions, DileptonError> {
        let direct = self.solve(ev)?;
        let mut best = SmearedSolutions {
            solutions: direct,
            bjet_a: ev.bjet_a,
            bjet_b: ev.bjet_b,
            met: ev.met,
            pull_chi2: 0.0,
            weight: 1.0,
            smeared: false,
        };
        if !direct.is_empty() {
            return Ok(best);
        }
        best.weight = 0.0;
        best.pull_chi2 = f64::INFINITY;
        let sigma_a = resolution.jet_energy_sigma(ev.bjet_a.e(), ev.bjet_a.eta());
        let sigma_b = resolution.jet_energy_sigma(ev.bjet_b.e(), ev.bjet_b.eta());
        let mut rng = Pcg64Mcg::seed_from_u64(seed);
        let mut with_solutions = 0u32;
        for _ in 0..config.draws {
            let ga: f64 = StandardNormal.sample(&mut rng);
            let gb: f64 = StandardNormal.sample(&mut rng);
            let (Some(ja), Some(jb)) = (
                with_energy(&ev.bjet_a, ev.bjet_a.e() + ga * sigma_a),
                with_energy(&ev.bjet_b, ev.bjet_b.e() + gb * sigma_b),
            ) else {
                continue;
            };
            // The MET balances the change of the jets' transverse momenta.
            let met = (
                ev.met.0 - (ja.px() - ev.bjet_a.px()) - (jb.px() - ev.bjet_b.px()),
                ev.met.1 - (ja.py() - ev.bjet_a.py()) - (jb.py() - ev.bjet_b.py()),
            );
            let trial = DileptonEvent {
                bjet_a: ja,
                bjet_b: jb,
                met,
                ..*ev
            };
            let Ok(s) = self.solve(&trial) else {
                continue;
            };
            if s.is_empty() {
                continue;
            }
            with_solutions += 1;
            let chi2 = ga * ga + gb * gb;
            if chi2 < best.pull_chi2 {
                best = SmearedSolutions {
                    solutions: s,
                    bjet_a: ja,
                    bjet_b: jb,
                    met,
                    pull_chi2: chi2,
                    weight: 0.0,
                    smeared: true,
                };
            }
        }
        if with_solutions == 0 {
            best.pull_chi2 = 0.0;
        }
        best.weight = if config.draws == 0 {
            0.0
        } else {
            f64::from(with_solutions) / f64::from(config.draws)
        };
        Ok(best)
    }
}

/// Newton steps on the four mass constraints themselves, unknowns `(x, y,
/// z_a, z_b)` with both neutrinos massless and `ν_b,T = MET − ν_a,T`. The
/// conic intersection fixes `(x, y)` accurately, but `z = (z₀ + z_x x +
/// z_y y)/D` amplifies its rounding when `D` is small; these steps remove
/// that. Returns the visited point with the smallest largest residual.
fn polish_full(p: &Prepared, x: f64, y: f64, za: f64, zb: f64) -> (f64, f64, f64, f64) {
    let eval = |u: &[f64; 4]| {
        let (ra, ga) = p.side_a.residuals(u[0], u[1], u[2]);
        let (rb, gb) = p.side_b.residuals(p.met.0 - u[0], p.met.1 - u[1], u[3]);
        let r = Vector4::new(ra[0], ra[1], rb[0], rb[1]);
        #[rustfmt::skip]
        let j = Matrix4::new(
            ga[0][0], ga[0][1], ga[0][2], 0.0,
            ga[1][0], ga[1][1], ga[1][2], 0.0,
            -gb[0][0], -gb[0][1], 0.0, gb[0][2],
            -gb[1][0], -gb[1][1], 0.0, gb[1][2],
        );
        (r, j)
    };
    let mut u = [x, y, za, zb];
    let (r0, _) = eval(&u);
    let mut best = (r0.amax(), u);
    for _ in 0..8 {
        let (r, j) = eval(&u);
        // Residuals are differences of terms of order 1 (scaled units):
        // below this, a step cannot improve them.
        if r.amax() <= 1e-15 {
            break;
        }
        let Some(step) = j.lu().solve(&r) else {
            break;
        };
        let next = [
            u[0] - step[0],
            u[1] - step[1],
            u[2] - step[2],
            u[3] - step[3],
        ];
        if next.iter().any(|v| !v.is_finite()) {
            break;
        }
        let (rn, _) = eval(&next);
        if rn.amax() >= best.0 || rn.amax().is_nan() {
            break;
        }
        best = (rn.amax(), next);
        u = next;
    }
    let u = best.1;
    (u[0], u[1], u[2], u[3])
}

/// `jet` with energy `e`, same direction and mass; `None` if `e` is not
/// above the jet's mass.
fn with_energy(jet: &FourMomentum, e: f64) -> Option<FourMomentum> {
    let m2 = jet.m2().max(0.0);
    let p2 = e * e - m2;
    let p_old = jet.p();
    if !(e > 0.0 && p2 > 0.0 && p_old > 0.0) {
        return None;
    }
    let k = p2.sqrt() / p_old;
    Some(FourMomentum::new(
        jet.px() * k,
        jet.py() * k,
        jet.pz() * k,
        e,
    ))
}

/// Candidate y values at a root x: both roots of the first conic (or its
/// vertex when they are complex by rounding) and the common root of both
/// conics, `y = −u/v` (see [`resultant`]).
fn y_candidates(p: &[f64; 6], q: &[f64; 6], x: f64) -> [Option<f64>; 3] {
    let (a2, a1, a0) = in_y(p);
    let (b2, b1, b0) = in_y(q);
    let (a1, a0) = (a1[0] + a1[1] * x, a0[0] + (a0[1] + a0[2] * x) * x);
    let (b1, b0) = (b1[0] + b1[1] * x, b0[0] + (b0[1] + b0[2] * x) * x);
    let mut out = [None; 3];
    let u = a2 * b0 - b2 * a0;
    let v = a2 * b1 - b2 * a1;
    if v != 0.0 {
        out[0] = Some(-u / v);
    }
    // Roots of whichever conic has the larger y² coefficient.
    let (c2, c1, c0) = if a2.abs() >= b2.abs() {
        (a2, a1, a0)
    } else {
        (b2, b1, b0)
    };
    if c2 != 0.0 {
        let disc = c1 * c1 - 4.0 * c2 * c0;
        if disc >= 0.0 {
            let q = -0.5 * (c1 + c1.signum() * disc.sqrt());
            out[1] = Some(q / c2);
            out[2] = if q != 0.0 { Some(c0 / q) } else { Some(0.0) };
        } else {
            out[1] = Some(-c1 / (2.0 * c2));
        }
    } else if c1 != 0.0 {
        out[1] = Some(-c0 / c1);
    }
    out
}

/// Newton steps on the two conics in `(x, y)`; returns the visited point
/// with the smallest residual, so a point never ends farther from a solution
/// than it started (a step may overshoot when the conics nearly touch).
fn polish(p: &[f64; 6], q: &[f64; 6], x0: f64, y0: f64) -> (f64, f64) {
    let residual = |x: f64, y: f64| conic_value(p, x, y).abs() + conic_value(q, x, y).abs();
    let (mut x, mut y) = (x0, y0);
    let mut best = (residual(x, y), x, y);
    let mut stalled = 0;
    for _ in 0..40 {
        let (f, g) = (conic_value(p, x, y), conic_value(q, x, y));
        if f == 0.0 && g == 0.0 {
            break;
        }
        let (fx, fy) = conic_gradient(p, x, y);
        let (gx, gy) = conic_gradient(q, x, y);
        let det = fx * gy - fy * gx;
        if det == 0.0 || !det.is_finite() {
            break;
        }
        let dx = (f * gy - g * fy) / det;
        let dy = (fx * g - gx * f) / det;
        x -= dx;
        y -= dy;
        if !(x.is_finite() && y.is_finite()) {
            break;
        }
        let r = residual(x, y);
        if r < best.0 {
            best = (r, x, y);
            stalled = 0;
        } else {
            stalled += 1;
            if stalled == 3 {
                break;
            }
        }
        if dx.abs() + dy.abs() <= 4.0 * f64::EPSILON * (1.0 + x.abs() + y.abs()) {
            break;
        }
    }
    (best.1, best.2)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn resultant_of_two_circles_has_their_intersections_as_roots() {
        // x² + y² − 1 = 0 and (x − 1)² + y² − 1 = 0 meet at x = 1/2 (twice,
        // y = ±√3/2): the resultant in y is (2x − 1)² up to a factor.
        let p = [1.0, 0.0, 1.0, 0.0, 0.0, -1.0];
        let q = [1.0, 0.0, 1.0, -2.0, 0.0, 0.0];
        let r = resultant(&p, &q);
        let (roots, n) = real_roots(&r).unwrap();
        assert_eq!(n, 2);
        for x in &roots[..n] {
            assert!((x - 0.5).abs() < 1e-12, "{x}");
        }
    }
}
