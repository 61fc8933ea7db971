//! The fitter: runs the Newton(–Lagrange) solver of `newton.rs` on a
//! [`KinematicChi2`] through argmin's `Executor`, falls back to argmin's
//! trust region (inside an augmented-Lagrangian loop for hard constraints)
//! when it fails, and packs a Copy [`FitResult`].

use std::cmp::Ordering;

use argmin::core::{
    Executor, IterState, Problem, Solver, State, TerminationReason, TerminationStatus, KV,
};
use argmin::solver::trustregion::TrustRegion;

use crate::dogleg::DoglegStep;
use crate::newton::{NewtonLagrange, Progress, Workspace};
use argmin_math::{ArgminDot, ArgminInv};
use quarry_lorentz::FourMomentum;
use quarry_resolution::ResolutionModel;

use crate::input::{
    FitInput, FitInputError, MAX_COMMON_MASSES, MAX_COMPOSITES, MAX_OBJECTS, MAX_PARAMS,
};
use crate::problem::{
    cholesky, forward_solve, Expansion, HessianMatrix, KinematicChi2, Params, MAX_TERMS,
};
use crate::stats::chi2_survival;

/// How constraints enter the fit.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum ConstraintMode {
    /// Gaussian χ² terms ((m − M)/width)², linearised as
    /// ((m² − M²)/(2M·width))²; the constraint is met only on average.
    Soft,
    /// Constraints met exactly (to [`FitConfig::hard_tolerance`]) by
    /// Newton–Lagrange iterations (see the crate docs).
    #[default]
    Hard,
}

/// Settings of a [`KinematicFitter`].
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FitConfig {
    /// Soft or hard constraints.
    pub mode: ConstraintMode,
    /// Iterations allowed per fit (Newton(–Lagrange) iterations plus, if
    /// the fallback runs, its trust-region iterations over all passes).
    pub max_iterations: u32,
    /// Convergence: the Newton decrement must fall below this — soft mode
    /// gᵀH⁻¹g (twice the χ² decrease the next Newton step predicts;
    /// scale-free), hard mode the squared length of the next
    /// Newton–Lagrange step in σ units. 1e-10 puts the parameters within
    /// ~1e-5 σ of the minimum.
    pub decrement_tolerance: f64,
    /// Hard mode: every |m − M| must end below this (GeV).
    pub hard_tolerance: f64,
    /// Hard mode: most augmented-Lagrangian passes of the fallback method.
    pub max_passes: u32,
    /// Compute uncertainties (σ of fitted parameters, common-mass σ).
    pub uncertainties: bool,
}

impl Default for FitConfig {
    /// Hard constraints to 1 MeV, 150 iterations, decrement tolerance 1e-10,
    /// 12 passes, uncertainties on.
    fn default() -> Self {
        FitConfig {
            mode: ConstraintMode::Hard,
            max_iterations: 150,
            decrement_tolerance: 1e-10,
            hard_tolerance: 1e-3,
            max_passes: 12,
            uncertainties: true,
        }
    }
}

/// Outcome of a fit: the converged flag's reason.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum FitStatus {
    /// Gradient below tolerance, hard constraints met, uncertainties computed.
    Converged,
    /// Converged, but the covariance matrix was singular: sigmas are 0.
    CovarianceFailed,
    /// The iteration limit was reached; values are the best point found.
    IterationLimit,
    /// Hard mode: the passes ran out with a constraint still off by more
    /// than the tolerance; values are the last point.
    ConstraintsNotMet,
    /// A non-finite number appeared during minimisation (or the solver
    /// reported an error); values are the measured inputs, χ² = +∞.
    NumericalFailure,
    /// The input was refused; values are the measured inputs, χ² = +∞.
    InvalidInput(FitInputError),
}

impl FitStatus {
    /// The stable snake_case name of the status, as in the `fit_status`
    /// output column: `converged`, `covariance_failed`, `iteration_limit`,
    /// `constraints_not_met`, `numerical_failure`, `invalid_input` (the
    /// refused input's detail is left out; `Display` shows the same name).
    ///
    /// ```
    /// use quarry_fit::FitStatus;
    /// assert_eq!(FitStatus::IterationLimit.as_str(), "iteration_limit");
    /// assert_eq!(FitStatus::Converged.to_string(), "converged");
    /// ```
    pub fn as_str(&self) -> &'static str {
        match self {
            FitStatus::Converged => "converged",
            FitStatus::CovarianceFailed => "covariance_failed",
            FitStatus::IterationLimit => "iteration_limit",
            FitStatus::ConstraintsNotMet => "constraints_not_met",
            FitStatus::NumericalFailure => "numerical_failure",
            FitStatus::InvalidInput(_) => "invalid_input",
        }
    }
}

impl std::fmt::Display for FitStatus {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.as_str())
    }
}

/// A fitted common mass with its uncertainty.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct CommonMass {
    /// Fitted value (GeV).
    pub value: f64,
    /// Uncertainty (GeV): √C_MM of the fit covariance (see the crate docs);
    /// 0 when not computed.
    pub sigma: f64,
}

/// Result of one fit. `Copy` (fixed-capacity arrays, ~700 bytes).
///
/// Invariant: every number is finite except `chi2`, which is +∞ (with
/// `probability` 0) when the fit failed (`NumericalFailure`,
/// `InvalidInput`). Slices returned by the accessors have the input's
/// lengths.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FitResult {
    /// Why the fit stopped.
    pub status: FitStatus,
    /// Iterations used (Newton(–Lagrange) plus any fallback iterations).
    pub iterations: u32,
    /// Fit χ²: the measurement χ² (objects + MET) plus, in soft mode, the
    /// constraint terms.
    pub chi2: f64,
    /// Degrees of freedom ([`FitInput::ndf`]).
    pub ndf: u32,
    /// χ² probability P(χ²_ndf ≥ chi2).
    pub probability: f64,
    /// Hard mode: largest |m − M| over constraints at the end (GeV)
    /// (also filled in soft mode, where it is the Gaussian's residual).
    pub max_violation: f64,
    n_objects: u8,
    n_composites: u8,
    n_common: u8,
    objects: [FourMomentum; MAX_OBJECTS],
    scales: [f64; MAX_OBJECTS],
    scale_sigmas: [f64; MAX_OBJECTS],
    neutrino: Option<FourMomentum>,
    neutrino_sigmas: [f64; 3],
    composite_masses: [f64; MAX_COMPOSITES],
    common: [CommonMass; MAX_COMMON_MASSES],
}

impl FitResult {
    /// True if the status is [`FitStatus::Converged`].
    pub fn converged(&self) -> bool {
        self.status == FitStatus::Converged
    }
    /// Fitted four-momenta of the measured objects, in input order.
    pub fn objects(&self) -> &[FourMomentum] {
        &self.objects[..self.n_objects as usize]
    }
    /// Fitted scale factors s_i (fitted = s_i · measured).
    pub fn scales(&self) -> &[f64] {
        &self.scales[..self.n_objects as usize]
    }
    /// Uncertainties of the scale factors, so σ(E_fit) = E_meas · σ_s for a
    /// jet and σ(pt_fit) = pt_meas · σ_s for a lepton (0 if not computed).
    pub fn scale_sigmas(&self) -> &[f64] {
        &self.scale_sigmas[..self.n_objects as usize]
    }
    /// Fitted neutrino (massless), if the input had one.
    pub fn neutrino(&self) -> Option<FourMomentum> {
        self.neutrino
    }
    /// Uncertainties of the fitted neutrino's (px, py, pz) (GeV).
    pub fn neutrino_sigmas(&self) -> [f64; 3] {
        self.neutrino_sigmas
    }
    /// Fitted masses of the composites, in input order (GeV).
    pub fn composite_masses(&self) -> &[f64] {
        &self.composite_masses[..self.n_composites as usize]
    }
    /// Fitted common masses, one per `EqualMass` constraint in input order.
    pub fn common_masses(&self) -> &[CommonMass] {
        &self.common[..self.n_common as usize]
    }

    fn failed(input: &FitInput, status: FitStatus, iterations: u32) -> FitResult {
        let mut objects = [FourMomentum::ZERO; MAX_OBJECTS];
        for (o, m) in objects.iter_mut().zip(input.objects()) {
            *o = m.p4;
        }
        let neutrino = input
            .neutrino()
            .map(|n| crate::problem::neutrino_p4(n.p3[0], n.p3[1], n.p3[2]));
        let mut composite_masses = [0.0; MAX_COMPOSITES];
        for (c, m) in input.composites().iter().zip(composite_masses.iter_mut()) {
            let mut sum = FourMomentum::ZERO;
            for (i, o) in objects.iter().enumerate() {
                if c.contains_object(i) {
                    sum += *o;
                }
            }
            if c.contains_neutrino() {
                sum += neutrino.unwrap_or_default();
            }
            let mm = crate::problem::signed_sqrt(sum.dot(&sum));
            *m = if mm.is_finite() { mm } else { 0.0 };
        }
        let finite = objects.iter().all(|o| o.is_finite());
        FitResult {
            status,
            iterations,
            chi2: f64::INFINITY,
            ndf: input.ndf().max(0) as u32,
            probability: 0.0,
            max_violation: 0.0,
            n_objects: input.objects().len() as u8,
            n_composites: input.composites().len() as u8,
            n_common: input.n_common() as u8,
            objects: if finite {
                objects
            } else {
                [FourMomentum::ZERO; MAX_OBJECTS]
            },
            scales: [1.0; MAX_OBJECTS],
            scale_sigmas: [0.0; MAX_OBJECTS],
            neutrino: neutrino.filter(|n| n.is_finite()),
            neutrino_sigmas: [0.0; 3],
            composite_masses,
            common: [CommonMass::default(); MAX_COMMON_MASSES],
        }
    }

    fn all_finite(&self) -> bool {
        let f = |x: &f64| x.is_finite();
        self.chi2.is_finite()
            && self.probability.is_finite()
            && self.max_violation.is_finite()
            && self.objects().iter().all(|o| o.is_finite())
            && self.scales().iter().all(f)
            && self.scale_sigmas().iter().all(f)
            && self.neutrino.is_none_or(|n| n.is_finite())
            && self.neutrino_sigmas.iter().all(f)
            && self.composite_masses().iter().all(f)
            && self
                .common_masses()
                .iter()
                .all(|c| c.value.is_finite() && c.sigma.is_finite())
    }
}

/// Orders two results for re-ranking: converged fits first, then by χ²
/// ascending (`total_cmp`, so +∞ sorts last), then by status. Equal keys
/// compare `Equal`, so a stable sort keeps the input order among ties.
///
/// ```
/// use std::cmp::Ordering;
/// use quarry_fit::{compare_fits, FitInput, KinematicFitter};
/// let bad = KinematicFitter::default().fit(&FitInput::new()); // refused: no constraints
/// assert_eq!(compare_fits(&bad, &bad), Ordering::Equal);
/// ```
pub fn compare_fits(a: &FitResult, b: &FitResult) -> Ordering {
    let rank = |r: &FitResult| match r.status {
        FitStatus::Converged | FitStatus::CovarianceFailed => 0u8,
        FitStatus::IterationLimit | FitStatus::ConstraintsNotMet => 1,
        FitStatus::NumericalFailure | FitStatus::InvalidInput(_) => 2,
    };
    rank(a)
        .cmp(&rank(b))
        .then_with(|| a.chi2.total_cmp(&b.chi2))
}

/// Re-ranks fits of the K best assignments: indices into `results`, best
/// first, by [`compare_fits`]; ties keep input order (deterministic).
///
/// ```
/// use quarry_fit::{rank_by_chi2, FitInput, KinematicFitter};
/// let r = KinematicFitter::default().fit(&FitInput::new());
/// assert_eq!(rank_by_chi2(&[r, r, r]), vec![0, 1, 2]);
/// ```
pub fn rank_by_chi2(results: &[FitResult]) -> Vec<usize> {
    let mut order: Vec<usize> = (0..results.len()).collect();
    order.sort_by(|&i, &j| compare_fits(&results[i], &results[j]));
    order
}

/// Stops argmin's trust region once the Newton decrement is below tolerance
/// (the trust-region method itself only stops on iteration count).
#[derive(Clone)]
struct GradientStop<S> {
    inner: S,
    tolerance: f64,
}

type FitState = IterState<Params, Params, (), HessianMatrix, (), f64>;

impl<S: Solver<KinematicChi2, FitState>> Solver<KinematicChi2, FitState> for GradientStop<S> {
    fn name(&self) -> &str {
        "trust region with gradient stop"
    }
    fn init(
        &mut self,
        problem: &mut Problem<KinematicChi2>,
        state: FitState,
    ) -> Result<(FitState, Option<KV>), argmin::core::Error> {
        self.inner.init(problem, state)
    }
    fn next_iter(
        &mut self,
        problem: &mut Problem<KinematicChi2>,
        state: FitState,
    ) -> Result<(FitState, Option<KV>), argmin::core::Error> {
        self.inner.next_iter(problem, state)
    }
    fn terminate(&mut self, state: &FitState) -> TerminationStatus {
        if let (Some(g), Some(h)) = (state.get_gradient(), state.get_hessian()) {
            if let Ok(h_inv) = h.inv() {
                let decrement = g.dot(&h_inv.dot(g));
                if decrement.abs() < self.tolerance {
                    return TerminationStatus::Terminated(TerminationReason::SolverConverged);
                }
            }
        }
        self.inner.terminate(state)
    }
}

/// Hard mode, second attempt: Newton-decrement tolerance of the soft fit
/// that only provides the start point (its last digits do not matter).
const WARM_START_DECREMENT: f64 = 1e-3;
/// Initial trust-region radius in σ units.
const INITIAL_RADIUS: f64 = 3.0;
/// Largest trust-region radius in σ units: small enough that argmin's
/// absolute 10 ε test for a boundary step (which decides whether the radius
/// may grow) still resolves the step norm.
const MAX_RADIUS: f64 = 8.0;
/// Hard mode: Newton-decrement tolerance of the intermediate passes.
const PASS_DECREMENT: f64 = 1e-4;
/// Hard mode: factor on ρ per augmented-Lagrangian pass.
const PENALTY_GROWTH: f64 = 10.0;
/// Hard mode: largest ρ as a multiple of 1/width² (stiffer only slows the
/// Newton steps; the multipliers do the rest).
const MAX_PENALTY: f64 = 1e6;

/// One run of the Newton(–Lagrange) solver.
struct Run {
    /// Hard constraints (Newton–Lagrange), else the soft χ² (Newton).
    hard: bool,
    /// Start point (internal parameters).
    x0: Params,
    /// Start multipliers of the scaled residuals (hard mode).
    lambda0: [f64; MAX_TERMS],
    /// Iteration budget.
    max_iterations: u32,
    /// Newton-decrement tolerance.
    tolerance: f64,
}

enum Outcome {
    Converged,
    IterationLimit,
    Failed,
}

/// The kinematic fitter: a resolution model and settings. Build once, call
/// [`fit`](Self::fit) per assignment.
///
/// Per-fit inputs and results are fixed-capacity values and the solver's
/// work arrays are reused across fits, so a fit allocates only the boxed
/// problem (the rare trust-region fallback also one Hessian block per
/// iteration). [`fit`](Self::fit) takes `&mut self`: give each thread its
/// own fitter (a clone).
///
/// ```
/// use quarry_fit::{Composite, Constraint, FitInput, KinematicFitter, Measured};
/// use quarry_lorentz::FourMomentum;
/// let mut input = FitInput::new();
/// input.add_object(Measured::jet(FourMomentum::from_pt_eta_phi_m(45.0, 0.2, 0.3, 0.0))).unwrap();
/// input.add_object(Measured::jet(FourMomentum::from_pt_eta_phi_m(40.0, -0.4, 1.9, 0.0))).unwrap();
/// let w = input.add_composite(Composite::of(&[0, 1], false)).unwrap();
/// input.add_constraint(Constraint::w_mass(w)).unwrap();
/// let result = KinematicFitter::default().fit(&input);
/// assert!(result.converged());
/// assert!((result.composite_masses()[0] - quarry_pdg::W_MASS).abs() < 0.01);
/// ```
#[derive(Clone, Debug, Default)]
pub struct KinematicFitter {
    model: ResolutionModel,
    config: FitConfig,
    /// The solver's work arrays, reused by every fit.
    workspace: Box<Workspace>,
}

impl KinematicFitter {
    /// A fitter with this resolution model and configuration.
    pub fn new(model: ResolutionModel, config: FitConfig) -> Self {
        KinematicFitter {
            model,
            config,
            workspace: Box::default(),
        }
    }
    /// The configuration.
    pub fn config(&self) -> &FitConfig {
        &self.config
    }
    /// The resolution model.
    pub fn model(&self) -> &ResolutionModel {
        &self.model
    }

    /// Fits one assignment. Never panics; failures are a [`FitStatus`].
    pub fn fit(&mut self, input: &FitInput) -> FitResult {
        let problem = match KinematicChi2::new(input, &self.model) {
            Ok(p) => p,
            Err(e) => return FitResult::failed(input, FitStatus::InvalidInput(e), 0),
        };
        let hard = self.config.mode == ConstraintMode::Hard;
        let max = self.config.max_iterations;
        let zeros = [0.0; MAX_TERMS];
        let tol = self.config.decrement_tolerance;
        // 1. Newton(–Lagrange) from the measured point.
        let first = Run {
            hard,
            x0: Params::zeros(),
            lambda0: zeros,
            max_iterations: max,
            tolerance: tol,
        };
        let (mut problem, mut x, mut iterations, mut progress) =
            match self.newton(input, problem, first) {
                Ok(r) => r,
                Err(e) => return FitResult::failed(input, FitStatus::InvalidInput(e), 0),
            };
        if hard && progress != Progress::Converged && iterations < max {
            // 2. Rare: the soft fit from the measured point, then
            //    Newton–Lagrange from its minimum with the multipliers it
            //    implies (∇f + Σ 2c̃_t ∇c̃_t = 0 there, so λ = 2c̃).
            let soft = Run {
                hard: false,
                x0: Params::zeros(),
                lambda0: zeros,
                max_iterations: max - iterations,
                tolerance: tol.max(WARM_START_DECREMENT),
            };
            let Ok((p, xs, it, prog)) = self.newton(input, problem, soft) else {
                return FitResult::failed(input, FitStatus::NumericalFailure, iterations);
            };
            problem = p;
            iterations += it;
            if prog == Progress::Converged && iterations < max {
                let (_, c) = problem.value_and_residuals(&xs);
                let restart = Run {
                    hard: true,
                    x0: xs,
                    lambda0: c.map(|v| 2.0 * v),
                    max_iterations: max - iterations,
                    tolerance: tol,
                };
                let Ok((p, xh, it, prog)) = self.newton(input, problem, restart) else {
                    return FitResult::failed(input, FitStatus::NumericalFailure, iterations);
                };
                problem = p;
                x = xh;
                iterations += it;
                progress = prog;
            }
        }
        let status = if progress == Progress::Converged {
            FitStatus::Converged
        } else {
            // Rarer still: the trust-region method from the start.
            problem.set_soft_weights();
            match self.fit_trust_region(&mut problem, iterations) {
                Ok((xt, status, it)) => {
                    x = xt;
                    iterations = it;
                    status
                }
                Err(iterations) => {
                    return FitResult::failed(input, FitStatus::NumericalFailure, iterations)
                }
            }
        };
        let result = self.pack(input, &problem, &x, status, iterations);
        if result.all_finite() {
            result
        } else {
            FitResult::failed(input, FitStatus::NumericalFailure, iterations)
        }
    }

    /// One argmin run of the Newton(–Lagrange) solver as `run` says; sets
    /// the problem's term weights to match. If argmin reports an error the
    /// problem is rebuilt from `input` (an error only if `input` is
    /// invalid) and the run counts as failed.
    fn newton(
        &mut self,
        input: &FitInput,
        mut problem: KinematicChi2,
        run: Run,
    ) -> Result<(KinematicChi2, Params, u32, Progress), FitInputError> {
        if run.hard {
            // The terms become equality constraints: no cost weight.
            for t in 0..problem.n_terms() {
                problem.set_term_weights(t, 0.0, 0.0);
            }
        } else {
            problem.set_soft_weights();
        }
        let solver = NewtonLagrange::new(
            &mut self.workspace,
            run.x0,
            run.lambda0,
            run.hard,
            run.tolerance,
            self.config.hard_tolerance,
        );
        let result = Executor::new(problem, solver)
            .configure(|s| s.max_iters(u64::from(run.max_iterations)))
            .timer(false)
            .run();
        // The solver reports its own failures as a status; an argmin error
        // (no problem attached) would lose the problem: rebuild it.
        let (problem, x, iterations, progress) = match result {
            Err(_) => (None, run.x0, 0, Progress::Failed),
            Ok(mut res) => (
                res.problem.take_problem(),
                *res.solver.x(),
                res.state.get_iter() as u32,
                res.solver.progress(),
            ),
        };
        let problem = match problem {
            Some(p) => Ok(p),
            None => KinematicChi2::new(input, &self.model),
        };
        problem.map(|p| (p, x, iterations, progress))
    }

    /// The trust-region fit (soft) or augmented-Lagrangian loop around it
    /// (hard) from x = 0, after `iterations` already spent; `Err` with
    /// the iteration count on a numerical failure.
    fn fit_trust_region(
        &self,
        problem: &mut KinematicChi2,
        iterations: u32,
    ) -> Result<(Params, FitStatus, u32), u32> {
        let mut iterations = iterations;
        let mut x = Params::zeros();
        let mut status;
        match self.config.mode {
            ConstraintMode::Soft => {
                let tolerance = self.config.decrement_tolerance;
                let budget = self.config.max_iterations.saturating_sub(iterations);
                let (p, xn, it, outcome) = self.minimise(problem.clone(), x, tolerance, budget);
                *problem = p;
                x = xn;
                iterations += it;
                status = match outcome {
                    Outcome::Converged => FitStatus::Converged,
                    Outcome::IterationLimit => FitStatus::IterationLimit,
                    Outcome::Failed => return Err(iterations),
                };
            }
            ConstraintMode::Hard => {
                // Augmented Lagrangian: f + Σ (2λ c + ρ c²); pass 0 is the
                // soft fit (ρ = 1/width², λ = 0), then λ += ρ c and ρ ×= 10.
                let n_terms = problem.n_terms();
                let mut lambda = [0.0; MAX_TERMS];
                let mut rho = [0.0; MAX_TERMS];
                let mut rho_max = [0.0; MAX_TERMS];
                for t in 0..n_terms {
                    let w = problem.term_width(t);
                    rho[t] = 1.0 / (w * w);
                    rho_max[t] = MAX_PENALTY * rho[t];
                }
                status = FitStatus::ConstraintsNotMet;
                // Intermediate passes only need an approximate minimum for
                // the multiplier update; the last one is run to full
                // tolerance.
                let mut tight = false;
                for _pass in 0..self.config.max_passes.max(1) {
                    for t in 0..n_terms {
                        problem.set_term_weights(t, 2.0 * lambda[t], rho[t]);
                    }
                    let tolerance = if tight {
                        self.config.decrement_tolerance
                    } else {
                        self.config.decrement_tolerance.max(PASS_DECREMENT)
                    };
                    let budget = self.config.max_iterations.saturating_sub(iterations);
                    if budget == 0 {
                        status = FitStatus::IterationLimit;
                        break;
                    }
                    let (p, xn, it, outcome) = self.minimise(problem.clone(), x, tolerance, budget);
                    *problem = p;
                    x = xn;
                    iterations += it;
                    let th = problem.to_physical(&x);
                    match outcome {
                        Outcome::Failed => return Err(iterations),
                        Outcome::IterationLimit => status = FitStatus::IterationLimit,
                        Outcome::Converged => {
                            if problem.max_violation(&th) < self.config.hard_tolerance {
                                if tight {
                                    status = FitStatus::Converged;
                                    break;
                                }
                                tight = true;
                                continue;
                            }
                            status = FitStatus::ConstraintsNotMet;
                        }
                    }
                    let c = problem.residuals(&th);
                    for t in 0..n_terms {
                        lambda[t] += rho[t] * c[t];
                        rho[t] = (rho[t] * PENALTY_GROWTH).min(rho_max[t]);
                    }
                }
            }
        }
        Ok((x, status, iterations))
    }

    /// One argmin run: trust region (dogleg subproblem) from `x0`.
    fn minimise(
        &self,
        problem: KinematicChi2,
        x0: Params,
        tolerance: f64,
        max_iterations: u32,
    ) -> (KinematicChi2, Params, u32, Outcome) {
        let backup = problem.clone();
        let solver = GradientStop {
            inner: TrustRegion::new(DoglegStep::new())
                .with_radius(INITIAL_RADIUS)
                .and_then(|t| t.with_max_radius(MAX_RADIUS))
                .expect("radii > 0"),
            tolerance,
        };
        let run = Executor::new(problem, solver)
            .configure(|s| s.param(x0).max_iters(u64::from(max_iterations)))
            .run();
        match run {
            Err(_) => (backup, x0, 0, Outcome::Failed),
            Ok(mut res) => {
                let iters = res.state.get_iter() as u32;
                let reason = res.state.get_termination_reason().cloned();
                let cost = res.state.get_best_cost();
                let x = res
                    .state
                    .take_best_param()
                    .or_else(|| res.state.take_param());
                let problem = res.problem.take_problem().unwrap_or(backup);
                match x {
                    Some(x) if cost.is_finite() && x.iter().all(|v| v.is_finite()) => {
                        let outcome = match reason {
                            Some(TerminationReason::SolverConverged) => Outcome::Converged,
                            _ => Outcome::IterationLimit,
                        };
                        (problem, x, iters, outcome)
                    }
                    _ => (problem, x0, iters, Outcome::Failed),
                }
            }
        }
    }

    fn pack(
        &mut self,
        input: &FitInput,
        problem: &KinematicChi2,
        x: &Params,
        mut status: FitStatus,
        iterations: u32,
    ) -> FitResult {
        let th = problem.to_physical(x);
        let (objects, neutrino) = problem.four_momenta(&th);
        let chi2 = match self.config.mode {
            ConstraintMode::Soft => problem.value_physical(&th).0,
            ConstraintMode::Hard => problem.measurement_chi2(&th),
        };
        let ndf = input.ndf().max(0) as u32;
        let mut scales = [1.0; MAX_OBJECTS];
        scales[..problem.n_objects()].copy_from_slice(&th[..problem.n_objects()]);
        let mut common = [CommonMass::default(); MAX_COMMON_MASSES];
        for (k, c) in common.iter_mut().enumerate().take(problem.n_common()) {
            c.value = th[problem.common_index(k)];
        }
        let mut result = FitResult {
            status,
            iterations,
            chi2,
            ndf,
            probability: chi2_survival(chi2, ndf),
            max_violation: problem.max_violation(&th),
            n_objects: input.objects().len() as u8,
            n_composites: input.composites().len() as u8,
            n_common: problem.n_common() as u8,
            objects,
            scales,
            scale_sigmas: [0.0; MAX_OBJECTS],
            neutrino,
            neutrino_sigmas: [0.0; 3],
            composite_masses: problem.composite_masses(x),
            common,
        };
        if self.config.uncertainties && status == FitStatus::Converged {
            let scratch = self.workspace.scratch();
            match covariance_diagonal(problem, &th, self.config.mode, scratch) {
                Some(var) => {
                    let sd = |i: usize| var[i].max(0.0).sqrt();
                    for i in 0..problem.n_objects() {
                        result.scale_sigmas[i] = sd(i);
                    }
                    if let Some(k) = problem.neutrino_index() {
                        result.neutrino_sigmas = [sd(k), sd(k + 1), sd(k + 2)];
                    }
                    for k in 0..problem.n_common() {
                        result.common[k].sigma = sd(problem.common_index(k));
                    }
                }
                None => status = FitStatus::CovarianceFailed,
            }
            result.status = status;
        }
        result
    }
}

/// Diagonal of the covariance of the fitted physical parameters θ.
///
/// Soft mode: C = 2 H⁻¹ with H the exact Hessian of the χ² at the minimum
/// (the usual Δχ² = 1 convention). Hard mode: the linearised
/// constrained-least-squares covariance, the top-left block of the inverse
/// of the bordered matrix [[W, Aᵀ], [A, 0]] with W = V⁻¹ (weights of the
/// measured parameters, zero for pz and common masses) and A = ∂c/∂θ;
/// computed as G⁻¹ − G⁻¹Aᵀ(AG⁻¹Aᵀ)⁻¹AG⁻¹ with G = W + AᵀRA, R = diag(1/width²),
/// which has the same block and is invertible when the constraints fix
/// every unmeasured parameter. With G = LLᵀ, V = L⁻¹Aᵀ, S = VᵀV = KKᵀ and
/// y = L⁻¹e_i: C_ii = |y|² − |K⁻¹Vᵀy|². Stack arrays and the scratch
/// expansion `e` only.
fn covariance_diagonal(
    problem: &KinematicChi2,
    th: &[f64; MAX_PARAMS],
    mode: ConstraintMode,
    e: &mut Expansion,
) -> Option<[f64; MAX_PARAMS]> {
    let n = problem.n_params();
    problem.eval_physical_into(th, None, e);
    if !e.f.is_finite() {
        return None;
    }
    let mut g = [0.0; MAX_PARAMS * MAX_PARAMS];
    let mut l = [0.0; MAX_PARAMS * MAX_PARAMS];
    let mut var = [0.0; MAX_PARAMS];
    let unit = |i: usize| {
        let mut y = [0.0; MAX_PARAMS];
        y[i] = 1.0;
        y
    };
    match mode {
        ConstraintMode::Soft => {
            // C = (H/2)⁻¹.
            for (gi, hi) in g[..n * n].iter_mut().zip(&e.h[..n * n]) {
                *gi = 0.5 * hi;
            }
            if !cholesky(&g, n, 0.0, &mut l) {
                return None;
            }
            for (i, v) in var[..n].iter_mut().enumerate() {
                let mut y = unit(i);
                forward_solve(&l, n, &mut y);
                *v = y[..n].iter().map(|a| a * a).sum();
            }
        }
        ConstraintMode::Hard => {
            let m = problem.n_terms();
            let w = problem.measurement_weight();
            for i in 0..n {
                g[i * n..i * n + n].copy_from_slice(&w[i][..n]);
            }
            for t in 0..m {
                let wt = problem.term_width(t);
                let r = 1.0 / (wt * wt);
                let support = problem.term_support(t);
                for &i in support {
                    let ai = r * e.a[t][i as usize];
                    for &j in support {
                        g[i as usize * n + j as usize] += ai * e.a[t][j as usize];
                    }
                }
            }
            if !cholesky(&g, n, 0.0, &mut l) {
                return None;
            }
            let mut vrows = [[0.0; MAX_PARAMS]; MAX_TERMS];
            let mut s = [0.0; MAX_TERMS * MAX_TERMS];
            let mut k = [0.0; MAX_TERMS * MAX_TERMS];
            for t in 0..m {
                vrows[t][..n].copy_from_slice(&e.a[t][..n]);
                forward_solve(&l, n, &mut vrows[t]);
            }
            for a in 0..m {
                for b in 0..m {
                    s[a * m + b] = (0..n).map(|i| vrows[a][i] * vrows[b][i]).sum();
                }
            }
            if !cholesky(&s, m, 0.0, &mut k) {
                return None;
            }
            for (i, v) in var[..n].iter_mut().enumerate() {
                let mut y = unit(i);
                forward_solve(&l, n, &mut y);
                let mut z = [0.0; MAX_TERMS];
                for t in 0..m {
                    z[t] = (0..n).map(|j| vrows[t][j] * y[j]).sum();
                }
                forward_solve(&k, m, &mut z);
                let yy: f64 = y[..n].iter().map(|a| a * a).sum();
                let zz: f64 = z[..m].iter().map(|a| a * a).sum();
                *v = yy - zz;
            }
        }
    }
    Some(var)
}
