//! The χ² as an argmin problem: [`KinematicChi2`] implements `CostFunction`,
//! `Gradient` and `Hessian` with analytic derivatives.

use std::cell::RefCell;
use std::ops::Index;
use std::sync::Arc;

use argmin::core::{CostFunction, Error, Gradient, Hessian};
use argmin_math::{ArgminDot, ArgminInv};
use nalgebra::{SMatrix, SVector};
use quarry_lorentz::FourMomentum;
use quarry_resolution::ResolutionModel;

use crate::input::{
    Composite, Constraint, FitInput, FitInputError, MeasuredKind, MAX_COMMON_MASSES,
    MAX_COMPOSITES, MAX_CONSTRAINTS, MAX_OBJECTS, MAX_PARAMS,
};
use quarry_event::Flavour;

/// The fit's parameter vector (internal, dimensionless units; see
/// [`KinematicChi2`]). Entries past [`KinematicChi2::n_params`] are padding.
pub type Params = SVector<f64, MAX_PARAMS>;
/// The (model) Hessian of the cost with respect to [`Params`], as handed
/// to argmin's trust region: the exact analytic Hessian, plus µ·I only where
/// that is needed to make it positive definite (away from the minimum; at a
/// minimum the exact Hessian is positive definite and µ = 0, so Newton's
/// quadratic convergence is kept). It stores the leading n×n block (the
/// padding entries act as the identity) and its Cholesky factor, so the
/// dogleg step's `inv()` is a cheap view and `inv().dot(g)` two triangular
/// solves. Shared behind an `Arc`: argmin moves its iteration state, which
/// holds several Hessians, by value every iteration.
///
/// ```
/// use quarry_fit::HessianMatrix;
/// let h = HessianMatrix::from_block(&[2.0, 0.0, 0.0, 2.0], 2);
/// assert_eq!(h[(1, 1)], 2.0);
/// assert_eq!(h[(5, 5)], 1.0); // padding
/// assert_eq!(h.shift(), 0.0);
/// ```
#[derive(Clone, Debug, PartialEq)]
pub struct HessianMatrix {
    /// Row-major n×n block followed by its row-major Cholesky factor.
    data: Arc<[f64]>,
    n: usize,
    shift: f64,
    inverse: bool,
}

const ONE: f64 = 1.0;
const ZERO: f64 = 0.0;

impl HessianMatrix {
    /// From the row-major leading `n`×`n` block of a symmetric matrix.
    /// Adds the smallest µ·I of the form 0 or 1e-8·2^k·max|H_ii| that makes
    /// the block positive definite.
    ///
    /// # Panics
    /// If `block` has fewer than n² entries or n > [`MAX_PARAMS`].
    pub fn from_block(block: &[f64], n: usize) -> Self {
        assert!(n <= MAX_PARAMS && block.len() >= n * n, "block too small");
        let scale = (0..n).map(|i| block[i * n + i].abs()).fold(1e-12, f64::max);
        let mut shift = 0.0;
        let mut chol = [0.0; MAX_PARAMS * MAX_PARAMS];
        for attempt in 0..80 {
            if cholesky(block, n, shift, &mut chol) {
                break;
            }
            shift = scale * 1e-8 * 2f64.powi(attempt);
        }
        let data: Arc<[f64]> = (0..n * n)
            .map(|k| {
                let (i, j) = (k / n, k % n);
                block[k] + if i == j { shift } else { 0.0 }
            })
            .chain(chol[..n * n].iter().copied())
            .collect();
        HessianMatrix {
            data,
            n,
            shift,
            inverse: false,
        }
    }
    /// The µ added to the diagonal (0 if the exact Hessian was positive
    /// definite).
    pub fn shift(&self) -> f64 {
        self.shift
    }
    /// Size of the stored block.
    pub fn dim(&self) -> usize {
        self.n
    }
}

/// Cholesky of the row-major n×n `h` + shift·I into row-major `l` (lower
/// triangle; the diagonal stores 1/L_jj); false if not positive definite
/// (or not finite).
pub(crate) fn cholesky(h: &[f64], n: usize, shift: f64, l: &mut [f64]) -> bool {
    with_const_dim!(n, cholesky_fixed, (h, shift, 0.0, l))
}

/// Calls `$f::<N>$args` with the constant N equal to `$n` (0 to
/// [`MAX_PARAMS`]; larger values are treated as 0, an empty system).
/// Small dense kernels compiled for a constant size have no bounds checks
/// and unrolled loops: several times faster than the same loops over a
/// run-time size.
macro_rules! with_const_dim {
    ($n:expr, $f:ident, ($($arg:expr),*)) => {
        match $n {
            1 => $f::<1>($($arg),*),
            2 => $f::<2>($($arg),*),
            3 => $f::<3>($($arg),*),
            4 => $f::<4>($($arg),*),
            5 => $f::<5>($($arg),*),
            6 => $f::<6>($($arg),*),
            7 => $f::<7>($($arg),*),
            8 => $f::<8>($($arg),*),
            9 => $f::<9>($($arg),*),
            10 => $f::<10>($($arg),*),
            11 => $f::<11>($($arg),*),
            12 => $f::<12>($($arg),*),
            13 => $f::<13>($($arg),*),
            14 => $f::<14>($($arg),*),
            15 => $f::<15>($($arg),*),
            16 => $f::<16>($($arg),*),
            _ => $f::<0>($($arg),*),
        }
    };
}
pub(crate) use with_const_dim;

/// [`cholesky`] of h + shift·I for N×N; with `floor` > 0 the modified
/// factorisation of [`modified_cholesky`].
fn cholesky_fixed<const N: usize>(h: &[f64], shift: f64, floor: f64, l: &mut [f64]) -> bool {
    let h = &h[..N * N];
    let l = &mut l[..N * N];
    for j in 0..N {
        let mut d = h[j * N + j] + shift;
        for k in 0..j {
            d -= l[j * N + k] * l[j * N + k];
        }
        if floor > 0.0 && d < floor && d.is_finite() {
            d = d.abs().max(floor);
        }
        if !(d > 0.0 && d.is_finite()) {
            return false;
        }
        let inv = 1.0 / d.sqrt();
        l[j * N + j] = inv; // the diagonal holds 1/L_jj: solves multiply
        for i in j + 1..N {
            let mut v = h[i * N + j];
            for k in 0..j {
                v -= l[i * N + k] * l[j * N + k];
            }
            l[i * N + j] = v * inv;
        }
    }
    true
}

/// Modified Cholesky: like [`cholesky`], but a pivot d_j below
/// `floor` (> 0) is replaced by max(|d_j|, floor), so the factor always
/// exists (of H + E with E ≥ 0 diagonal, zero where H is comfortably
/// positive definite). False only for non-finite input.
pub(crate) fn modified_cholesky(h: &[f64], n: usize, floor: f64, l: &mut [f64]) -> bool {
    with_const_dim!(n, cholesky_fixed, (h, 0.0, floor, l))
}

/// Solves (L Lᵀ) x = b in place for a factor from [`cholesky`].
pub(crate) fn cholesky_solve(l: &[f64], n: usize, x: &mut [f64]) {
    forward_solve(l, n, x);
    back_solve(l, n, x);
}

/// Solves L y = b in place for a factor from [`cholesky`].
pub(crate) fn forward_solve(l: &[f64], n: usize, x: &mut [f64]) {
    with_const_dim!(n, forward_fixed, (l, x))
}

fn forward_fixed<const N: usize>(l: &[f64], x: &mut [f64]) {
    let l = &l[..N * N];
    let x = &mut x[..N];
    for i in 0..N {
        let mut s = x[i];
        for k in 0..i {
            s -= l[i * N + k] * x[k];
        }
        x[i] = s * l[i * N + i];
    }
}

/// Solves Lᵀ x = y in place for a factor from [`cholesky`].
pub(crate) fn back_solve(l: &[f64], n: usize, x: &mut [f64]) {
    with_const_dim!(n, back_fixed, (l, x))
}

fn back_fixed<const N: usize>(l: &[f64], x: &mut [f64]) {
    let l = &l[..N * N];
    let x = &mut x[..N];
    for i in (0..N).rev() {
        let mut s = x[i];
        for k in i + 1..N {
            s -= l[k * N + i] * x[k];
        }
        x[i] = s * l[i * N + i];
    }
}

impl Index<(usize, usize)> for HessianMatrix {
    type Output = f64;
    /// Entry (i, j) of the model Hessian (padding: identity).
    fn index(&self, (i, j): (usize, usize)) -> &f64 {
        if i < self.n && j < self.n {
            &self.data[i * self.n + j]
        } else if i == j {
            &ONE
        } else {
            &ZERO
        }
    }
}

impl ArgminDot<Params, Params> for HessianMatrix {
    /// H·v, or H⁻¹·v for the view returned by `inv()`.
    fn dot(&self, v: &Params) -> Params {
        let n = self.n;
        let mut x = *v; // padding entries: identity
        if !self.inverse {
            let h = &self.data[..n * n];
            for (i, row) in h.chunks_exact(n).enumerate() {
                x[i] = row.iter().zip(v.iter()).map(|(a, b)| a * b).sum();
            }
            return x;
        }
        cholesky_solve(&self.data[n * n..2 * n * n], n, x.as_mut_slice());
        x
    }
}

impl ArgminInv<HessianMatrix> for HessianMatrix {
    /// A view that applies H⁻¹ through the stored Cholesky factor.
    fn inv(&self) -> Result<HessianMatrix, argmin_math::Error> {
        Ok(HessianMatrix {
            data: Arc::clone(&self.data),
            n: self.n,
            shift: self.shift,
            inverse: !self.inverse,
        })
    }
}

/// Most constraint terms: a `Mass` constraint gives one, an `EqualMass` two.
pub(crate) const MAX_TERMS: usize = 2 * MAX_CONSTRAINTS;

/// Neutrino mass² (GeV²) used in E_ν = sqrt(|p|² + ε²): a regulator that
/// keeps E_ν differentiable at p = 0, far below any resolution.
pub(crate) const NEUTRINO_MASS2_REGULATOR: f64 = 1e-12;

#[derive(Clone, Copy, Debug, PartialEq)]
enum Target {
    Fixed(f64),
    Common(usize),
}

#[derive(Clone, Copy, Debug, PartialEq)]
struct Term {
    composite: usize,
    target: Target,
    width: f64,
    linear: f64,
    quadratic: f64,
}

#[derive(Clone, Copy, Debug, PartialEq)]
struct NeutrinoData {
    start: [f64; 3],
    met: [f64; 2],
    /// Inverse MET covariance [xx, xy, yy].
    vinv: [f64; 3],
    scale: [f64; 3],
}

#[derive(Clone, Debug)]
struct Cache {
    x: Params,
    h: HessianMatrix,
}

/// The kinematic-fit χ² for one [`FitInput`], as an argmin problem.
///
/// **Physical parameters θ** (in this order): one scale factor `s_i` per
/// measured object (the fitted four-momentum is `s_i · p_i,measured`, so the
/// direction is fixed and E, pt and m scale together), the neutrino's
/// `(px, py, pz)` if there is one, and one common mass `M_k` per
/// [`Constraint::EqualMass`].
///
/// **Cost** (c_t in GeV, one term t per `Mass` constraint and two per
/// `EqualMass`):
///
/// ```text
/// f = Σ_i ((s_i − 1)/r_i)²  +  dᵀ V⁻¹ d  +  Σ_t (a_t c_t + b_t c_t²)
/// r_i = σ_i / x_i,meas      (jets: σ(E)/E; leptons: σ(pt)/pt; σ from
///                             Measured::sigma, else the model at the measured value)
/// d   = (px_ν − MET_x, py_ν − MET_y),  V = MET covariance
/// c_t = (m_t² − M_t²) / (2 M_t)   (= m_t − M_t to first order; a polynomial
///                                   in the parameters, so no guard for m² < 0)
/// ```
///
/// with `a_t = 0, b_t = 1/width_t²` by default (soft mode: Gaussian terms);
/// the hard mode's augmented Lagrangian sets `a_t = 2λ_t, b_t = ρ_t` through
/// [`set_term_weights`](Self::set_term_weights).
///
/// **Internal parameters x** (what argmin sees) are θ scaled to O(1) so the
/// trust region is round: `s_i = exp(r_i x_i)` (positive for every x),
/// `p_ν = p_ν,start + σ_ν ⊙ x` with σ_ν = (√V_xx, √V_yy, √(V_xx+V_yy)), and
/// `M_k = M_k,start + width_k x` (cost +∞ for M ≤ 0). `x = 0` is the start.
///
/// ```
/// use argmin::core::CostFunction;
/// use quarry_fit::{Composite, Constraint, FitInput, KinematicChi2, Measured, Params};
/// use quarry_lorentz::FourMomentum;
/// let mut input = FitInput::new();
/// input.add_object(Measured::jet(FourMomentum::from_pt_eta_phi_m(45.0, 0.2, 0.3, 0.0))).unwrap();
/// input.add_object(Measured::jet(FourMomentum::from_pt_eta_phi_m(40.0, -0.4, 1.9, 0.0))).unwrap();
/// let w = input.add_composite(Composite::of(&[0, 1], false)).unwrap();
/// input.add_constraint(Constraint::w_mass(w)).unwrap();
/// let problem = KinematicChi2::new(&input, &Default::default()).unwrap();
/// assert_eq!(problem.n_params(), 2);
/// assert!(problem.cost(&Params::zeros()).unwrap() > 0.0);
/// ```
#[derive(Clone, Debug)]
pub struct KinematicChi2(Box<Chi2Data>);

/// The problem's data, boxed: argmin moves the problem into and out of
/// nested executors every iteration, so the problem itself is one pointer.
#[derive(Clone, Debug)]
struct Chi2Data {
    n_objects: usize,
    measured: [FourMomentum; MAX_OBJECTS],
    rel_sigma: [f64; MAX_OBJECTS],
    neutrino: Option<NeutrinoData>,
    composites: [Composite; MAX_COMPOSITES],
    n_composites: usize,
    terms: [Term; MAX_TERMS],
    n_terms: usize,
    common_start: [f64; MAX_COMMON_MASSES],
    common_scale: [f64; MAX_COMMON_MASSES],
    n_common: usize,
    n_params: usize,
    /// Minkowski products p_i·p_j of the measured objects.
    gram: [[f64; MAX_OBJECTS]; MAX_OBJECTS],
    /// Per term: the θ indices its residual depends on.
    support: [[u8; MAX_PARAMS]; MAX_TERMS],
    n_support: [u8; MAX_TERMS],
    cache: RefCell<Option<Cache>>,
}

impl KinematicChi2 {
    /// Builds the problem (soft weights) from a validated input and the
    /// resolution model.
    pub fn new(input: &FitInput, model: &ResolutionModel) -> Result<Self, FitInputError> {
        input.validate()?;
        let n_objects = input.objects().len();
        let mut measured = [FourMomentum::ZERO; MAX_OBJECTS];
        let mut rel_sigma = [1.0; MAX_OBJECTS];
        for (i, o) in input.objects().iter().enumerate() {
            measured[i] = o.p4;
            rel_sigma[i] = match (o.kind, o.sigma) {
                (MeasuredKind::Jet, Some(s)) => s / o.p4.e(),
                (_, Some(s)) => s / o.p4.pt(),
                (MeasuredKind::Jet, None) => {
                    model.jet_energy_sigma(o.p4.e(), o.p4.eta()) / o.p4.e()
                }
                (MeasuredKind::Electron, None) => {
                    model.lepton_pt_sigma(Flavour::Electron, o.p4.pt()) / o.p4.pt()
                }
                (MeasuredKind::Muon, None) => {
                    model.lepton_pt_sigma(Flavour::Muon, o.p4.pt()) / o.p4.pt()
                }
            };
            if !(rel_sigma[i].is_finite() && rel_sigma[i] > 0.0) {
                return Err(FitInputError::NonFinite("object resolution"));
            }
        }
        let neutrino = input.neutrino().map(|n| {
            let [xx, xy, yy] = n.met_cov;
            let det = xx * yy - xy * xy;
            NeutrinoData {
                start: n.p3,
                met: n.met,
                vinv: [yy / det, -xy / det, xx / det],
                scale: [xx.sqrt(), yy.sqrt(), (xx + yy).sqrt()],
            }
        });
        let mut composites = [Composite::new(); MAX_COMPOSITES];
        composites[..input.composites().len()].copy_from_slice(input.composites());
        let mut problem = KinematicChi2(Box::new(Chi2Data {
            n_objects,
            measured,
            rel_sigma,
            neutrino,
            composites,
            n_composites: input.composites().len(),
            terms: [Term {
                composite: 0,
                target: Target::Fixed(1.0),
                width: 1.0,
                linear: 0.0,
                quadratic: 0.0,
            }; MAX_TERMS],
            n_terms: 0,
            common_start: [0.0; MAX_COMMON_MASSES],
            common_scale: [1.0; MAX_COMMON_MASSES],
            n_common: 0,
            n_params: n_objects + if neutrino.is_some() { 3 } else { 0 },
            gram: [[0.0; MAX_OBJECTS]; MAX_OBJECTS],
            support: [[0; MAX_PARAMS]; MAX_TERMS],
            n_support: [0; MAX_TERMS],
            cache: RefCell::new(None),
        }));
        let start_masses = problem.composite_masses(&Params::zeros());
        let push = |p: &mut KinematicChi2, composite, target, width: f64| {
            let t = p.0.n_terms;
            p.0.terms[t] = Term {
                composite,
                target,
                width,
                linear: 0.0,
                quadratic: 1.0 / (width * width),
            };
            p.0.n_terms += 1;
        };
        for c in input.constraints() {
            match *c {
                Constraint::Mass {
                    composite,
                    mass,
                    width,
                } => push(&mut problem, composite, Target::Fixed(mass), width),
                Constraint::EqualMass { a, b, width } => {
                    let k = problem.0.n_common;
                    // Start at the mean of the two starting masses (≥ 1 GeV).
                    problem.0.common_start[k] =
                        (0.5 * (start_masses[a] + start_masses[b])).max(1.0);
                    problem.0.common_scale[k] = width;
                    problem.0.n_common += 1;
                    problem.0.n_params += 1;
                    push(&mut problem, a, Target::Common(k), width);
                    push(&mut problem, b, Target::Common(k), width);
                }
            }
        }
        let d = &mut *problem.0;
        for i in 0..n_objects {
            for j in 0..n_objects {
                d.gram[i][j] = d.measured[i].dot(&d.measured[j]);
            }
        }
        let nu_index = d.neutrino.map(|_| n_objects);
        let common_base = n_objects + if d.neutrino.is_some() { 3 } else { 0 };
        for t in 0..d.n_terms {
            let term = d.terms[t];
            let comp = d.composites[term.composite];
            let mut k = 0;
            let mut push = |i: usize| {
                d.support[t][k] = i as u8;
                k += 1;
            };
            for i in 0..n_objects {
                if comp.contains_object(i) {
                    push(i);
                }
            }
            if let (true, Some(kn)) = (comp.contains_neutrino(), nu_index) {
                (kn..kn + 3).for_each(&mut push);
            }
            if let Target::Common(c) = term.target {
                push(common_base + c);
            }
            d.n_support[t] = k as u8;
        }
        Ok(problem)
    }

    /// Number of used entries of the parameter vector.
    pub fn n_params(&self) -> usize {
        self.0.n_params
    }

    /// Number of constraint terms (one per `Mass`, two per `EqualMass`, in
    /// constraint order).
    pub fn n_terms(&self) -> usize {
        self.0.n_terms
    }

    /// Relative resolution r_i = σ_i / x_i of object `i` (σ(E)/E for jets,
    /// σ(pt)/pt for leptons), evaluated at the measured value.
    pub fn relative_sigma(&self, i: usize) -> f64 {
        self.0.rel_sigma[i]
    }

    /// Sets term `t`'s weights in `a_t c_t + b_t c_t²` (see the type docs).
    /// Soft mode is `(0, 1/width²)`; the hard mode's augmented Lagrangian
    /// uses `(2λ_t, ρ_t)`. Non-finite values are ignored.
    pub fn set_term_weights(&mut self, t: usize, linear: f64, quadratic: f64) {
        if t < self.0.n_terms && linear.is_finite() && quadratic.is_finite() {
            self.0.terms[t].linear = linear;
            self.0.terms[t].quadratic = quadratic;
            *self.0.cache.get_mut() = None;
        }
    }

    /// Restores the soft-mode weights `(0, 1/width²)` on every term.
    pub fn set_soft_weights(&mut self) {
        for t in 0..self.0.n_terms {
            let w = self.0.terms[t].width;
            self.set_term_weights(t, 0.0, 1.0 / (w * w));
        }
    }

    /// The θ (= x) indices residual `t` depends on: its composite's
    /// objects, the neutrino's three components if a member, its common
    /// mass if any. Its gradient is zero elsewhere.
    pub(crate) fn term_support(&self, t: usize) -> &[u8] {
        &self.0.support[t][..self.0.n_support[t] as usize]
    }

    /// Width of term `t` (GeV).
    pub(crate) fn term_width(&self, t: usize) -> f64 {
        self.0.terms[t].width
    }

    /// Physical parameters θ for internal parameters `x` (same layout).
    pub fn to_physical(&self, x: &Params) -> [f64; MAX_PARAMS] {
        let mut th = [0.0; MAX_PARAMS];
        for i in 0..self.0.n_objects {
            th[i] = (self.0.rel_sigma[i] * x[i]).exp();
        }
        let mut k = self.0.n_objects;
        if let Some(nu) = &self.0.neutrino {
            for a in 0..3 {
                th[k + a] = nu.start[a] + nu.scale[a] * x[k + a];
            }
            k += 3;
        }
        for c in 0..self.0.n_common {
            th[k + c] = self.0.common_start[c] + self.0.common_scale[c] * x[k + c];
        }
        th
    }

    /// dθ/dx and d²θ/dx² per parameter (the map is separable).
    fn jacobian(&self, th: &[f64; MAX_PARAMS]) -> ([f64; MAX_PARAMS], [f64; MAX_PARAMS]) {
        let mut d1 = [0.0; MAX_PARAMS];
        let mut d2 = [0.0; MAX_PARAMS];
        for i in 0..self.0.n_objects {
            let r = self.0.rel_sigma[i];
            d1[i] = r * th[i];
            d2[i] = r * r * th[i];
        }
        let mut k = self.0.n_objects;
        if let Some(nu) = &self.0.neutrino {
            d1[k..k + 3].copy_from_slice(&nu.scale);
            k += 3;
        }
        d1[k..k + self.0.n_common].copy_from_slice(&self.0.common_scale[..self.0.n_common]);
        (d1, d2)
    }

    /// Index of the neutrino's px in θ, if any.
    pub(crate) fn neutrino_index(&self) -> Option<usize> {
        self.0.neutrino.map(|_| self.0.n_objects)
    }

    /// Index of common mass `k` in θ.
    pub(crate) fn common_index(&self, k: usize) -> usize {
        self.0.n_objects + if self.0.neutrino.is_some() { 3 } else { 0 } + k
    }

    /// Number of common masses.
    pub(crate) fn n_common(&self) -> usize {
        self.0.n_common
    }

    /// Number of objects.
    pub(crate) fn n_objects(&self) -> usize {
        self.0.n_objects
    }

    /// Fitted four-momenta of the objects and the neutrino at θ.
    pub(crate) fn four_momenta(
        &self,
        th: &[f64; MAX_PARAMS],
    ) -> ([FourMomentum; MAX_OBJECTS], Option<FourMomentum>) {
        let mut p = [FourMomentum::ZERO; MAX_OBJECTS];
        for i in 0..self.0.n_objects {
            p[i] = self.0.measured[i] * th[i];
        }
        let nu = self
            .neutrino_index()
            .map(|k| neutrino_p4(th[k], th[k + 1], th[k + 2]));
        (p, nu)
    }

    fn composite_sums(&self, th: &[f64; MAX_PARAMS]) -> [FourMomentum; MAX_COMPOSITES] {
        let d = &*self.0;
        let nu = self
            .neutrino_index()
            .map(|k| neutrino_p4(th[k], th[k + 1], th[k + 2]));
        let mut sums = [FourMomentum::ZERO; MAX_COMPOSITES];
        for (c, sum) in d.composites[..d.n_composites].iter().zip(sums.iter_mut()) {
            let mut mask = c.object_mask();
            while mask != 0 {
                let i = mask.trailing_zeros() as usize;
                mask &= mask - 1;
                *sum += d.measured[i] * th[i];
            }
            if c.contains_neutrino() {
                if let Some(nu) = nu {
                    *sum += nu;
                }
            }
        }
        sums
    }

    /// Masses of all composites (GeV) at internal parameters `x` (m² < 0
    /// gives −√(−m²), as `FourMomentum::m`).
    pub fn composite_masses(&self, x: &Params) -> [f64; MAX_COMPOSITES] {
        let th = self.to_physical(x);
        let sums = self.composite_sums(&th);
        let mut m = [0.0; MAX_COMPOSITES];
        for c in 0..self.0.n_composites {
            m[c] = signed_sqrt(sums[c].dot(&sums[c]));
        }
        m
    }

    /// Largest |m_t − M_t| over all constraint terms (GeV) at θ.
    pub(crate) fn max_violation(&self, th: &[f64; MAX_PARAMS]) -> f64 {
        let sums = self.composite_sums(th);
        let mut worst: f64 = 0.0;
        for t in &self.0.terms[..self.0.n_terms] {
            let m = signed_sqrt(sums[t.composite].dot(&sums[t.composite]));
            let target = self.target_mass(t, th);
            worst = worst.max((m - target).abs());
        }
        worst
    }

    /// Constraint residuals c_t (GeV) at θ.
    pub(crate) fn residuals(&self, th: &[f64; MAX_PARAMS]) -> [f64; MAX_TERMS] {
        self.value_physical(th).1
    }

    fn target_mass(&self, t: &Term, th: &[f64; MAX_PARAMS]) -> f64 {
        match t.target {
            Target::Fixed(m) => m,
            Target::Common(k) => th[self.common_index(k)],
        }
    }

    /// The measurement part of χ² at θ (objects and MET only).
    pub(crate) fn measurement_chi2(&self, th: &[f64; MAX_PARAMS]) -> f64 {
        let mut f = 0.0;
        for i in 0..self.0.n_objects {
            let d = (th[i] - 1.0) / self.0.rel_sigma[i];
            f += d * d;
        }
        if let (Some(nu), Some(k)) = (&self.0.neutrino, self.neutrino_index()) {
            let dx = th[k] - nu.met[0];
            let dy = th[k + 1] - nu.met[1];
            f += dx * dx * nu.vinv[0] + 2.0 * dx * dy * nu.vinv[1] + dy * dy * nu.vinv[2];
        }
        f
    }

    /// Half the Hessian of the measurement χ² in θ, i.e. the weight matrix
    /// V⁻¹ of the measured parameters (zero rows for pz and common masses).
    pub(crate) fn measurement_weight(&self) -> [[f64; MAX_PARAMS]; MAX_PARAMS] {
        let mut w = [[0.0; MAX_PARAMS]; MAX_PARAMS];
        for (i, row) in w.iter_mut().enumerate().take(self.0.n_objects) {
            row[i] = 1.0 / (self.0.rel_sigma[i] * self.0.rel_sigma[i]);
        }
        if let (Some(nu), Some(k)) = (&self.0.neutrino, self.neutrino_index()) {
            w[k][k] = nu.vinv[0];
            w[k][k + 1] = nu.vinv[1];
            w[k + 1][k] = nu.vinv[1];
            w[k + 1][k + 1] = nu.vinv[2];
        }
        w
    }

    /// Cost and raw residuals c_t (GeV) at θ, without derivatives (cost
    /// +∞ outside the domain: a common mass ≤ 0).
    pub(crate) fn value_physical(&self, th: &[f64; MAX_PARAMS]) -> (f64, [f64; MAX_TERMS]) {
        let mut c = [0.0; MAX_TERMS];
        for k in 0..self.0.n_common {
            if th[self.common_index(k)] <= 0.0 {
                return (f64::INFINITY, c);
            }
        }
        let mut f = self.measurement_chi2(th);
        let sums = self.composite_sums(th);
        for (t, term) in self.0.terms[..self.0.n_terms].iter().enumerate() {
            let sum = &sums[term.composite];
            let m2 = sum.dot(sum);
            let mt = self.target_mass(term, th);
            let ct = (m2 - mt * mt) / (2.0 * mt);
            c[t] = ct;
            f += term.linear * ct + term.quadratic * ct * ct;
        }
        (if f.is_finite() { f } else { f64::INFINITY }, c)
    }

    /// Cost and scaled residuals c̃_t = c_t / width_t at internal
    /// parameters `x` (no derivatives; cost +∞ outside the domain).
    pub(crate) fn value_and_residuals(&self, x: &Params) -> (f64, [f64; MAX_TERMS]) {
        let (f, mut c) = self.value_physical(&self.to_physical(x));
        for (t, term) in self.0.terms[..self.0.n_terms].iter().enumerate() {
            c[t] /= term.width;
        }
        (f, c)
    }

    /// Cost, residuals and derivatives in θ into `out` (θ-space
    /// [`Expansion`]: `a` holds ∇_θ c_t of the raw residuals). With
    /// `multipliers` λ, `h` is the Hessian of the Lagrangian
    /// cost + Σ_t λ_t c_t / width_t and `gl` the gradient of the multiplier
    /// part (the cost's own gradient stays in `g`). Only the leading n
    /// (parameters) and m (terms) entries are written.
    pub(crate) fn eval_physical_into(
        &self,
        th: &[f64; MAX_PARAMS],
        multipliers: Option<&[f64; MAX_TERMS]>,
        out: &mut Expansion,
    ) {
        let d = &*self.0;
        let n = d.n_params;
        out.f = f64::INFINITY;
        for k in 0..d.n_common {
            if th[self.common_index(k)] <= 0.0 {
                return;
            }
        }
        let h = &mut out.h[..n * n];
        h.fill(0.0);
        out.g[..n].fill(0.0);
        out.gl[..n].fill(0.0);
        let mut f = self.measurement_chi2(th);
        for i in 0..d.n_objects {
            let w = 1.0 / (d.rel_sigma[i] * d.rel_sigma[i]);
            h[i * n + i] = 2.0 * w;
            out.g[i] = 2.0 * (th[i] - 1.0) * w;
        }
        let nu_p4 = match (&d.neutrino, self.neutrino_index()) {
            (Some(nu), Some(k)) => {
                let dx = th[k] - nu.met[0];
                let dy = th[k + 1] - nu.met[1];
                out.g[k] = 2.0 * (nu.vinv[0] * dx + nu.vinv[1] * dy);
                out.g[k + 1] = 2.0 * (nu.vinv[1] * dx + nu.vinv[2] * dy);
                h[k * n + k] = 2.0 * nu.vinv[0];
                h[k * n + k + 1] = 2.0 * nu.vinv[1];
                h[(k + 1) * n + k] = 2.0 * nu.vinv[1];
                h[(k + 1) * n + k + 1] = 2.0 * nu.vinv[2];
                Some(neutrino_p4(th[k], th[k + 1], th[k + 2]))
            }
            _ => None,
        };
        let sums = self.composite_sums(th);
        for (t, term) in d.terms[..d.n_terms].iter().enumerate() {
            let sum = &sums[term.composite];
            let m2 = sum.dot(sum);
            let mt = self.target_mass(term, th);
            let c = (m2 - mt * mt) / (2.0 * mt);
            out.c[t] = c;
            f += term.linear * c + term.quadratic * c * c;
            // ∇c: (∇m²)/(2M), and −m²/(2M²) − ½ for a free common mass.
            let dc = &mut out.a[t];
            dc[..n].fill(0.0);
            let comp = &d.composites[term.composite];
            let inv_mt = 1.0 / mt;
            let mut mask = comp.object_mask();
            while mask != 0 {
                let i = mask.trailing_zeros() as usize;
                mask &= mask - 1;
                dc[i] = sum.dot(&d.measured[i]) * inv_mt;
            }
            let nu_k = match (nu_p4, self.neutrino_index()) {
                (Some(nu), Some(k)) if comp.contains_neutrino() => {
                    let ratio = sum.e() / nu.e();
                    let (p, s) = (nu.p3(), sum.p3());
                    for a in 0..3 {
                        dc[k + a] = (ratio * p[a] - s[a]) * inv_mt;
                    }
                    Some((nu, k))
                }
                _ => None,
            };
            let common = match term.target {
                Target::Common(k) => Some(self.common_index(k)),
                Target::Fixed(_) => None,
            };
            if let Some(km) = common {
                dc[km] = -m2 / (2.0 * mt * mt) - 0.5;
            }
            // d(a c + b c²)/dc and its second derivative; the multiplier
            // adds λ/width to the first.
            let w1 = term.linear + 2.0 * term.quadratic * c;
            let wl = multipliers.map_or(0.0, |l| l[t] / term.width);
            let w2 = 2.0 * term.quadratic;
            let support = &d.support[t][..d.n_support[t] as usize];
            for &i in support {
                let i = i as usize;
                out.g[i] += w1 * dc[i];
                out.gl[i] += wl * dc[i];
                if w2 != 0.0 {
                    for &j in support {
                        let j = j as usize;
                        h[i * n + j] += w2 * dc[i] * dc[j];
                    }
                }
            }
            let wc = w1 + wl;
            if wc == 0.0 {
                continue;
            }
            // wc · ∇²c = wc/(2M) ∇²m² + the free common mass's rows.
            let k2 = wc * inv_mt; // 2 · wc/(2M)
            let mut mi = comp.object_mask();
            while mi != 0 {
                let i = mi.trailing_zeros() as usize;
                mi &= mi - 1;
                let mut mj = comp.object_mask();
                while mj != 0 {
                    let j = mj.trailing_zeros() as usize;
                    mj &= mj - 1;
                    h[i * n + j] += k2 * d.gram[i][j];
                }
            }
            if let Some((nu, kn)) = nu_k {
                let e = nu.e();
                let p = nu.p3();
                let mut mi = comp.object_mask();
                while mi != 0 {
                    let i = mi.trailing_zeros() as usize;
                    mi &= mi - 1;
                    let q = &d.measured[i];
                    let qp = q.p3();
                    for a in 0..3 {
                        let v = k2 * (q.e() * p[a] / e - qp[a]);
                        h[i * n + kn + a] += v;
                        h[(kn + a) * n + i] += v;
                    }
                }
                let ec = sum.e();
                for a in 0..3 {
                    for b in 0..3 {
                        let delta = if a == b { 1.0 } else { 0.0 };
                        let pab = p[a] * p[b];
                        let v = pab / (e * e) + ec * (delta / e - pab / (e * e * e)) - delta;
                        h[(kn + a) * n + kn + b] += k2 * v;
                    }
                }
            }
            if let Some(km) = common {
                for &j in support {
                    let j = j as usize;
                    if j != km {
                        // −wc ∂m²/∂θ_j / (2M²) with ∂m²/∂θ_j = 2M dc_j.
                        let v = -wc * dc[j] * inv_mt;
                        h[j * n + km] += v;
                        h[km * n + j] += v;
                    }
                }
                h[km * n + km] += wc * m2 * inv_mt * inv_mt * inv_mt;
            }
        }
        out.f = if f.is_finite() { f } else { f64::INFINITY };
    }

    /// The [`Expansion`] at internal parameters `x` with multipliers λ of
    /// the scaled residuals, into `out` (cost +∞ and nothing else
    /// meaningful outside the domain).
    pub(crate) fn expand_into(
        &self,
        x: &Params,
        multipliers: &[f64; MAX_TERMS],
        out: &mut Expansion,
    ) {
        let th = self.to_physical(x);
        self.eval_physical_into(&th, Some(multipliers), out);
        if !out.f.is_finite() {
            return;
        }
        let (d1, d2) = self.jacobian(&th);
        with_const_dim!(self.0.n_params, to_internal_fixed, (out, &d1, &d2));
        for (t, term) in self.0.terms[..self.0.n_terms].iter().enumerate() {
            let inv_w = 1.0 / term.width;
            out.c[t] *= inv_w;
            for &j in &self.0.support[t][..self.0.n_support[t] as usize] {
                let j = j as usize;
                out.a[t][j] *= d1[j] * inv_w;
            }
        }
    }

    /// The exact analytic Hessian in internal parameters x (without the
    /// positive-definite shift of [`HessianMatrix`]); padding rows are the
    /// identity.
    pub fn exact_hessian(&self, x: &Params) -> SMatrix<f64, MAX_PARAMS, MAX_PARAMS> {
        let mut block = [0.0; MAX_PARAMS * MAX_PARAMS];
        self.eval_exact(x, &mut block);
        let n = self.0.n_params;
        SMatrix::from_fn(|i, j| {
            if i < n && j < n {
                block[i * n + j]
            } else if i == j {
                1.0
            } else {
                0.0
            }
        })
    }

    fn eval_internal(&self, x: &Params) -> (f64, Params, HessianMatrix) {
        let mut block = [0.0; MAX_PARAMS * MAX_PARAMS];
        let (f, g) = self.eval_exact(x, &mut block);
        (f, g, HessianMatrix::from_block(&block, self.0.n_params))
    }

    /// Cost and gradient in internal parameters x; the exact Hessian's
    /// leading n×n block goes row-major into `block`.
    fn eval_exact(&self, x: &Params, block: &mut [f64; MAX_PARAMS * MAX_PARAMS]) -> (f64, Params) {
        let mut e = Expansion::empty();
        self.expand_into(x, &[0.0; MAX_TERMS], &mut e);
        let n = self.0.n_params;
        let mut g = Params::zeros();
        if !e.f.is_finite() {
            for i in 0..n {
                block[i * n + i] = 1.0;
            }
            return (f64::INFINITY, g);
        }
        block[..n * n].copy_from_slice(&e.h[..n * n]);
        g.as_mut_slice()[..n].copy_from_slice(&e.g[..n]);
        (e.f, g)
    }
}

/// The chain rule θ → x for the gradient and Hessian of an N-parameter
/// expansion (the map is separable: dθ_i/dx_i = d1_i, d²θ_i/dx_i² = d2_i).
fn to_internal_fixed<const N: usize>(
    out: &mut Expansion,
    d1: &[f64; MAX_PARAMS],
    d2: &[f64; MAX_PARAMS],
) {
    let h = &mut out.h[..N * N];
    for i in 0..N {
        for j in 0..N {
            h[i * N + j] *= d1[i] * d1[j];
        }
        h[i * N + i] += d2[i] * (out.g[i] + out.gl[i]);
        out.g[i] *= d1[i];
    }
}

/// Value and derivatives at one point, in physical parameters θ
/// ([`KinematicChi2::eval_physical_into`]) or internal parameters x
/// ([`KinematicChi2::expand_into`]): the cost with its gradient, the
/// Hessian of the Lagrangian and the constraint residuals with their
/// Jacobian (in x: scaled, c̃_t = c_t / width_t). Arrays are row-major over
/// the leading n (parameters) and m (terms) entries. Reused across
/// iterations, so it is written in place rather than returned.
#[derive(Clone)]
pub(crate) struct Expansion {
    /// Cost (+∞ outside the domain: a common mass ≤ 0).
    pub f: f64,
    /// Gradient of the cost.
    pub g: [f64; MAX_PARAMS],
    /// Gradient of the multiplier part Σ λ_t c_t / width_t.
    pub gl: [f64; MAX_PARAMS],
    /// Hessian of cost + Σ_t λ_t c_t / width_t, row-major n×n.
    pub h: [f64; MAX_PARAMS * MAX_PARAMS],
    /// Residuals.
    pub c: [f64; MAX_TERMS],
    /// Residual gradients, row t.
    pub a: [[f64; MAX_PARAMS]; MAX_TERMS],
}

impl Expansion {
    /// All zeros (a placeholder until the first evaluation).
    pub(crate) fn empty() -> Self {
        Expansion {
            f: 0.0,
            g: [0.0; MAX_PARAMS],
            gl: [0.0; MAX_PARAMS],
            h: [0.0; MAX_PARAMS * MAX_PARAMS],
            c: [0.0; MAX_TERMS],
            a: [[0.0; MAX_PARAMS]; MAX_TERMS],
        }
    }
}

impl CostFunction for KinematicChi2 {
    type Param = Params;
    type Output = f64;

    fn cost(&self, x: &Params) -> Result<f64, Error> {
        Ok(self.value_physical(&self.to_physical(x)).0)
    }
}

impl Gradient for KinematicChi2 {
    type Param = Params;
    type Gradient = Params;

    /// Computes gradient and Hessian together and keeps the Hessian for the
    /// `hessian` call that argmin's trust region makes next at the same x.
    fn gradient(&self, x: &Params) -> Result<Params, Error> {
        let (_, g, h) = self.eval_internal(x);
        *self.0.cache.borrow_mut() = Some(Cache { x: *x, h });
        Ok(g)
    }
}

impl Hessian for KinematicChi2 {
    type Param = Params;
    type Hessian = HessianMatrix;

    fn hessian(&self, x: &Params) -> Result<HessianMatrix, Error> {
        if let Some(c) = self.0.cache.borrow().as_ref() {
            if c.x == *x {
                return Ok(c.h.clone());
            }
        }
        Ok(self.eval_internal(x).2)
    }
}

/// The massless neutrino four-momentum (with the tiny regulator).
#[inline]
pub(crate) fn neutrino_p4(px: f64, py: f64, pz: f64) -> FourMomentum {
    let e = (px * px + py * py + pz * pz + NEUTRINO_MASS2_REGULATOR).sqrt();
    FourMomentum::new(px, py, pz, e)
}

#[inline]
pub(crate) fn signed_sqrt(m2: f64) -> f64 {
    if m2 >= 0.0 {
        m2.sqrt()
    } else {
        -(-m2).sqrt()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::input::{Composite, Constraint, FitInput, Measured, NeutrinoStart};

    /// A bW-pair-like input: 4 jets, a muon, a neutrino, two W masses and
    /// an equal-mass pair.
    fn input() -> FitInput {
        let mut input = FitInput::new();
        let jets = [
            (120.0, 0.3, 0.1, 8.0),
            (60.0, -0.5, 1.3, 5.0),
            (45.0, 0.9, 2.2, 4.0),
            (150.0, -1.1, -2.0, 9.0),
        ];
        for (pt, eta, phi, m) in jets {
            let p4 = FourMomentum::from_pt_eta_phi_m(pt, eta, phi, m);
            input.add_object(Measured::jet(p4)).unwrap();
        }
        let mu = FourMomentum::from_pt_eta_phi_m(70.0, 0.2, -1.0, 0.1);
        let lep = input.add_object(Measured::muon(mu)).unwrap();
        input
            .set_neutrino(NeutrinoStart {
                p3: [40.0, -30.0, 25.0],
                met: [45.0, -25.0],
                met_cov: [300.0, 20.0, 250.0],
            })
            .unwrap();
        let wh = input.add_composite(Composite::of(&[1, 2], false)).unwrap();
        let wl = input.add_composite(Composite::of(&[lep], true)).unwrap();
        let bh = input
            .add_composite(Composite::of(&[0, 1, 2], false))
            .unwrap();
        let bl = input.add_composite(Composite::of(&[3, lep], true)).unwrap();
        input.add_constraint(Constraint::w_mass(wh)).unwrap();
        input.add_constraint(Constraint::w_mass(wl)).unwrap();
        input
            .add_constraint(Constraint::EqualMass {
                a: bh,
                b: bl,
                width: 25.0,
            })
            .unwrap();
        input
    }

    /// The solver's expansion (cost gradient, residual Jacobian, Hessian
    /// of the Lagrangian) against central finite differences, for both
    /// soft and constraint-only weights.
    #[test]
    fn expansion_matches_finite_differences() {
        let model = ResolutionModel::default();
        {
            for hard in [false, true] {
                let mut p = KinematicChi2::new(&input(), &model).unwrap();
                if hard {
                    for t in 0..p.n_terms() {
                        p.set_term_weights(t, 0.0, 0.0);
                    }
                }
                let (n, m) = (p.n_params(), p.n_terms());
                let mut x = Params::zeros();
                for i in 0..n {
                    x[i] = 0.3 * ((i as f64) * 1.7).sin();
                }
                let lambda = [
                    0.7, -1.3, 0.4, 2.1, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0,
                ];
                let mut e = Expansion::empty();
                p.expand_into(&x, &lambda, &mut e);
                let lagrangian = |x: &Params| {
                    let (f, c) = p.value_and_residuals(x);
                    f + (0..m).map(|t| lambda[t] * c[t]).sum::<f64>()
                };
                let h = 1e-5;
                for i in 0..n {
                    let (mut xp, mut xm) = (x, x);
                    xp[i] += h;
                    xm[i] -= h;
                    let (fp, cp) = p.value_and_residuals(&xp);
                    let (fm, cm) = p.value_and_residuals(&xm);
                    let fd = (fp - fm) / (2.0 * h);
                    assert!((fd - e.g[i]).abs() < 1e-5 * (1.0 + fd.abs()), "g[{i}]");
                    for t in 0..m {
                        let fd = (cp[t] - cm[t]) / (2.0 * h);
                        assert!(
                            (fd - e.a[t][i]).abs() < 1e-5 * (1.0 + fd.abs()),
                            "a[{t}][{i}]"
                        );
                    }
                    for j in 0..n {
                        let mut v = [0.0; 4];
                        for (k, (si, sj)) in [(1.0, 1.0), (1.0, -1.0), (-1.0, 1.0), (-1.0, -1.0)]
                            .iter()
                            .enumerate()
                        {
                            let mut xx = x;
                            xx[i] += si * 1e-4;
                            xx[j] += sj * 1e-4;
                            v[k] = lagrangian(&xx);
                        }
                        let fd = (v[0] - v[1] - v[2] + v[3]) / 4e-8;
                        let an = e.h[i * n + j];
                        assert!(
                            (fd - an).abs() < 1e-3 * (1.0 + an.abs()),
                            "hard {hard} h[{i}][{j}]: {an} vs {fd}"
                        );
                    }
                }
            }
        }
    }
}
