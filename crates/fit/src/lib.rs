//! Constrained kinematic fit of one jet/lepton/neutrino assignment, built on
//! `argmin`.
//!
//! Given the objects an assignment search chose (jets, charged leptons, a
//! neutrino start and the MET), the fit moves their energies within the
//! detector resolutions so that the hypothesis' composites get the masses it
//! demands (W masses, top masses, equal masses of a pair-produced quark
//! pair), and reports how well that worked (χ², χ² probability) together
//! with the improved four-vectors and masses.
//!
//! **Design decision:** the fit problem is a plain struct, [`KinematicChi2`],
//! implementing argmin's `CostFunction`, `Gradient` and `Hessian` with
//! analytic derivatives, and every per-fit value is an inline, fixed-capacity
//! `Copy` type ([`FitInput`], [`FitResult`], a 16-entry parameter vector), so
//! inputs and results cost no allocation and the fit knows nothing about
//! hypotheses: the pipeline converts a search result into a [`FitInput`].
//! The solver's work arrays live in the [`KinematicFitter`] and are reused,
//! so a fit allocates only the boxed problem.
//!
//! # The χ² (see [`KinematicChi2`] for the exact formula)
//! - **Measured quantities**: each jet's energy (σ(E) from the calorimeter
//!   model of `quarry-resolution`, per |η| bin) and each lepton's pt (σ(pt));
//!   the fitted object is `s · p_measured`, i.e. only the magnitude moves.
//!   Directions are fixed: jet and lepton angular resolutions (~0.01–0.05 in
//!   η, φ) are much better than the energy resolution (~10 % for jets), so
//!   fitting them adds parameters that barely move (common practice).
//! - **Neutrino**: px, py, pz are free parameters. Its transverse momentum is
//!   *measured* by MET with a χ² term (p_T,ν − MET)ᵀ V⁻¹ (p_T,ν − MET), V the
//!   MET covariance (the event's own, else the resolution model's). This
//!   treats MET as an independent measurement of p_T,ν: the unclustered
//!   recoil and the correlation of MET with the fitted jet energies are not
//!   modelled (a simple, consistent, common choice). pz is unmeasured.
//! - **Constraints**: `Mass` (m = M) and `EqualMass` (m_a = m_b = M, M free).
//!   In [`ConstraintMode::Soft`] each is a Gaussian term with the given width
//!   (e.g. the PDG width from `quarry_pdg`); in [`ConstraintMode::Hard`] they
//!   hold to better than [`FitConfig::hard_tolerance`] (default 1 MeV).
//!   Residuals are written c = (m² − M²)/(2M) — equal to m − M to first order
//!   and polynomial in the parameters, so m² < 0 needs no special guard.
//!
//! # Method
//! 1. Parameters: log-scale factors for object magnitudes (so energies stay
//!    positive), neutrino (px, py, pz), common masses; all scaled to σ units.
//! 2. Minimiser: a Newton-type argmin `Solver` of this crate (`newton.rs`),
//!    driven by argmin's `Executor`, on the exact analytic derivatives:
//!    - hard mode: Newton–Lagrange (SQP), the Lagrange-multiplier method of
//!      P. Avery, "Applied Fitting Theory VI: Formulas for Kinematic
//!      Fitting", CLEO CBX 98-37, iterated to convergence: min χ² subject to
//!      c = 0 via the Lagrange conditions ∇χ² + Aᵀλ = 0, c = 0. Each
//!      iteration solves the bordered (KKT) system [[H, Aᵀ], [A, 0]] with H
//!      the exact Hessian of the Lagrangian χ² + λᵀc (range-space: Cholesky
//!      of H + 2ρAᵀA, then the Schur complement), so every full step meets
//!      the linearised constraints and convergence near the solution is
//!      quadratic; a backtracking line search with the filter test of
//!      Fletcher and Leyffer (Math. Program. 91 (2002) 239) and a
//!      second-order correction (Nocedal and Wright, *Numerical
//!      Optimization*, 2nd ed., §15.5/§18.3) globalises it. No penalty
//!      passes. On the bW-pair benchmark a right assignment takes ~6
//!      iterations from the measured point, a wrong one ~10 (a long tail
//!      for some wrong ones); the constraints end met to ~1e-9 GeV;
//!    - soft mode: Newton's method with a modified-Cholesky Hessian
//!      (non-positive pivots flipped and floored) and an Armijo line search;
//!      ~8 iterations for a right assignment, 10–17 for wrong ones;
//!    - both stop when the Newton decrement (soft: gᵀH⁻¹g; hard: the squared
//!      step length in σ units) is below [`FitConfig::decrement_tolerance`]
//!      (1e-10) and, in hard mode, every |m − M| is below
//!      [`FitConfig::hard_tolerance`].
//! 3. Fallbacks in hard mode. If Newton–Lagrange finds no acceptable step
//!    (~1.5 % of bW-pair fits, mostly wrong assignments far from the
//!    constraint surface), the soft fit runs and Newton–Lagrange restarts
//!    from its minimum with λ = 2c/width² (the multipliers the soft minimum
//!    implies). If that fails too (~0.2 %), the previous method runs from
//!    the measured point: argmin's `TrustRegion` with a textbook dogleg
//!    subproblem (argmin's own dogleg can stall; see `dogleg.rs`) on the
//!    exact Hessian (shifted by µ·I only where it is not positive definite,
//!    see [`HessianMatrix`]) inside an augmented-Lagrangian loop
//!    χ² + Σ (2λ c + ρ c²) from ρ = 1/width², λ ← λ + ρc, ρ ← 10ρ, until
//!    every |m − M| < tolerance. (Soft mode falls back to the trust region
//!    directly.)
//! 4. Uncertainties: soft mode C = 2H⁻¹ (Δχ² = 1); hard mode the linearised
//!    constrained covariance of the bordered (Lagrange) matrix, as in P. Avery,
//!    "Applied Fitting Theory VI: Formulas for Kinematic Fitting", CLEO CBX
//!    98-37. The common mass's σ is √C_MM.
//! 5. ndf = constraint equations − unmeasured parameters ([`FitInput::ndf`]);
//!    probability from [`chi2_survival`].
//!
//! Limits and assumptions:
//! - one neutrino at most; at most [`MAX_OBJECTS`] objects, [`MAX_COMPOSITES`]
//!   composites, [`MAX_CONSTRAINTS`] constraints, [`MAX_COMMON_MASSES`] free
//!   common masses;
//! - resolutions are Gaussian and, unless [`Measured::sigma`] is given,
//!   evaluated at the *measured* value. On toys smeared at the true value this
//!   shifts the pulls of low-energy jets by O(σ/E) ≈ 0.1;
//! - no MET–jet correlation (MET is an independent measurement of p_T,ν);
//! - the fit finds the local minimum near its start: run it once per
//!   neutrino pz solution if both matter;
//! - the pulls are unbiased in the linear regime; at the default resolutions
//!   the leptonic side of tt̄ → ℓ+jets shows pull means of about −0.07
//!   (b_lep) and −0.17 (lepton pt) from the nonlinear constraints with the
//!   unmeasured pz (they scale with the resolution; see `tests/pulls.rs`);
//! - hard mode ends where the bordered matrix certifies a local minimum on
//!   the constraint surface when it can, but like any local method it can
//!   end at a different local minimum than another minimiser would from
//!   the same start (wrong assignments far from the constraint surface);
//!   a few in 10⁴ fits stop unconverged (status
//!   [`FitStatus::IterationLimit`] or [`FitStatus::ConstraintsNotMet`]).
//!
//! ```
//! use quarry_fit::{Composite, Constraint, FitInput, KinematicFitter, Measured, NeutrinoStart};
//! use quarry_lorentz::FourMomentum;
//! // W → ℓν with a measured lepton and MET: pz is solved by the W mass.
//! let mut input = FitInput::new();
//! let lep = input.add_object(Measured::muon(FourMomentum::from_pt_eta_phi_m(40.0, 0.3, 0.0, 0.0))).unwrap();
//! input.set_neutrino(NeutrinoStart { p3: [-35.0, 5.0, 0.0], met: [-35.0, 5.0], met_cov: [100.0, 0.0, 100.0] }).unwrap();
//! let w = input.add_composite(Composite::of(&[lep], true)).unwrap();
//! input.add_constraint(Constraint::w_mass(w)).unwrap();
//! let mut fitter = KinematicFitter::default();
//! let r = fitter.fit(&input);
//! assert_eq!(r.ndf, 0);
//! assert!(r.converged() && r.chi2 < 1e-6);
//! assert!((r.composite_masses()[0] - quarry_pdg::W_MASS).abs() < 0.01);
//! ```
#![deny(missing_docs)]
// Dense small-matrix code indexes several arrays with one index; iterator
// chains would hide the formulas.
#![allow(clippy::needless_range_loop)]

mod dogleg;
mod fitter;
mod input;
mod newton;
mod problem;
pub mod stats;

pub use fitter::{
    compare_fits, rank_by_chi2, CommonMass, ConstraintMode, FitConfig, FitResult, FitStatus,
    KinematicFitter,
};
pub use input::{
    Composite, Constraint, FitInput, FitInputError, Measured, MeasuredKind, NeutrinoStart,
    MAX_COMMON_MASSES, MAX_COMPOSITES, MAX_CONSTRAINTS, MAX_OBJECTS, MAX_PARAMS,
};
pub use problem::{HessianMatrix, KinematicChi2, Params};
pub use stats::chi2_survival;
