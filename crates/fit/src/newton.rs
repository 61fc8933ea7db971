//! The fit's main solver: Newton's method with a line search, and for hard
//! constraints its Newton–Lagrange (SQP) form, as an argmin `Solver`.
//!
//! Hard mode solves min f(x) subject to c̃(x) = 0 (f the measurement χ²,
//! c̃_t = c_t/width_t the scaled residuals) through the Lagrange conditions
//! ∇f + Ãᵀλ = 0, c̃ = 0 (P. Avery, "Applied Fitting Theory VI: Formulas for
//! Kinematic Fitting", CLEO CBX 98-37, linearises exactly these). Each
//! iteration solves the bordered (KKT) system
//!
//! ```text
//! [ H  Ãᵀ ] [ Δ ]     [ ∇f ]
//! [ Ã  0  ] [ λ⁺] = − [ c̃  ]      H = ∇²(f + λᵀc̃), Ã = ∂c̃/∂x
//! ```
//!
//! with the exact Hessian of the Lagrangian (so convergence near the
//! solution is quadratic), by the range-space method: G = H + 2ρÃᵀÃ (the
//! same Δ, since ÃΔ = −c̃) is factorised by Cholesky, G = LLᵀ, then the m×m
//! Schur complement S = Ã G⁻¹ Ãᵀ = WᵀW with W = L⁻¹Ãᵀ. A positive-definite
//! G certifies a local minimum on the constraint surface; where G is not
//! positive definite for any tried ρ, µ·I is added (a modified Newton
//! step). The step length comes from a backtracking line search with the
//! filter test of R. Fletcher and S. Leyffer, "Nonlinear programming
//! without a penalty function", Math. Program. 91 (2002) 239: a trial
//! point is accepted if, against the current point and every earlier
//! iterate, it lowers either the constraint violation Σ|c̃_t| or f by a
//! margin. Unlike a merit function this needs no penalty weight and
//! accepts most full Newton steps even far from the constraint surface; a
//! rejected full step is first retried with a second-order correction
//! (J. Nocedal and S. J. Wright, *Numerical Optimization*, 2nd ed.,
//! Springer 2006, §15.5/§18.3), which avoids the Maratos effect near the
//! solution.
//!
//! Soft mode is the same iteration without constraints: Newton's method
//! with a modified-Cholesky Hessian and an Armijo line search on f.
//!
//! The solver borrows its work arrays from the fitter ([`Workspace`]), so
//! nothing is allocated or copied per fit; the argmin state carries only
//! the parameter vector.

use argmin::core::{Error, IterState, Problem, Solver, TerminationReason, TerminationStatus, KV};

use crate::input::MAX_PARAMS;
use crate::problem::{
    back_solve, cholesky, forward_solve, Expansion, KinematicChi2, Params, MAX_TERMS,
};

/// argmin state of the Newton–Lagrange solver: parameters and cost only.
pub(crate) type NewtonState = IterState<(), (), (), (), (), f64>;

/// Where the solver stands.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum Progress {
    /// Still iterating (or stopped by argmin's iteration limit).
    Running,
    /// Converged: decrement below tolerance (and constraints met).
    Converged,
    /// No acceptable step, singular constraint Jacobian or non-finite
    /// numbers: the caller falls back to the trust-region method.
    Failed,
}

/// Armijo sufficient-decrease constant.
const ARMIJO: f64 = 1e-4;
/// Margin γ of the filter test.
const FILTER_MARGIN: f64 = 1e-4;
/// Most remembered iterates in the filter.
const MAX_FILTER: usize = 48;
/// Most step halvings per line search.
const MAX_BACKTRACKS: usize = 30;
/// Weights ρ of the 2ρÃᵀÃ term tried in turn for a positive-definite G.
const RHO_STEPS: [f64; 2] = [1.0, 1e2];

/// Work arrays of the solver, owned by the fitter and reused for every fit.
#[derive(Clone)]
pub(crate) struct Workspace {
    /// The expansion at the current point and a second one for the trial
    /// point (swapped on acceptance, so an accepted full step costs no
    /// second evaluation).
    buffers: [Expansion; 2],
    cur: usize,
    filter: [(f64, f64); MAX_FILTER],
}

impl Workspace {
    /// A buffer not holding the current point (free between fits).
    pub(crate) fn scratch(&mut self) -> &mut Expansion {
        &mut self.buffers[1 - self.cur]
    }
}

impl Default for Workspace {
    fn default() -> Self {
        Workspace {
            buffers: [Expansion::empty(), Expansion::empty()],
            cur: 0,
            filter: [(0.0, 0.0); MAX_FILTER],
        }
    }
}

impl std::fmt::Debug for Workspace {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("Workspace")
    }
}

/// Newton / Newton–Lagrange iteration (see the module docs).
pub(crate) struct NewtonLagrange<'w> {
    ws: &'w mut Workspace,
    constrained: bool,
    tolerance: f64,
    violation_tolerance: f64,
    x: Params,
    lambda: [f64; MAX_TERMS],
    n_filter: usize,
    progress: Progress,
}

impl<'w> NewtonLagrange<'w> {
    /// A solver starting at `x0` (multipliers `lambda0`, used only if
    /// constrained). `constrained`: the problem's terms are
    /// equality constraints (their cost weights must be zero), met to
    /// `violation_tolerance` GeV in |m − M|. `tolerance`: convergence when
    /// the Newton decrement (soft) or the squared step length in σ units
    /// (hard) falls below it.
    pub(crate) fn new(
        ws: &'w mut Workspace,
        x0: Params,
        lambda0: [f64; MAX_TERMS],
        constrained: bool,
        tolerance: f64,
        violation_tolerance: f64,
    ) -> Self {
        NewtonLagrange {
            ws,
            constrained,
            tolerance,
            violation_tolerance,
            x: x0,
            lambda: lambda0,
            n_filter: 0,
            progress: Progress::Running,
        }
    }

    /// Final parameters.
    pub(crate) fn x(&self) -> &Params {
        &self.x
    }

    /// How the run ended.
    pub(crate) fn progress(&self) -> Progress {
        self.progress
    }

    fn fail(&mut self, state: NewtonState) -> Result<(NewtonState, Option<KV>), Error> {
        self.progress = Progress::Failed;
        Ok((state, None))
    }

    /// The filter test (Fletcher and Leyffer): a trial point (f, h), h the
    /// constraint violation Σ|c̃_t|, is acceptable if against the current
    /// point and every earlier iterate it reduces h or f by a margin.
    fn acceptable(&self, f: f64, h: f64, f0: f64, h0: f64) -> bool {
        let beats =
            |(fj, hj): (f64, f64)| h <= (1.0 - FILTER_MARGIN) * hj || f <= fj - FILTER_MARGIN * h;
        f.is_finite()
            && beats((f0, h0))
            && self.ws.filter[..self.n_filter].iter().all(|&e| beats(e))
    }

    /// Moves to `x` and expands there; false if the expansion is not
    /// finite.
    fn accept(&mut self, problem: &KinematicChi2, x: Params) -> bool {
        self.x = x;
        let e = &mut self.ws.buffers[self.ws.cur];
        problem.expand_into(&self.x, &self.lambda, e);
        let n = problem.n_params();
        e.f.is_finite() && e.g[..n].iter().all(|v| v.is_finite())
    }
}

impl Solver<KinematicChi2, NewtonState> for NewtonLagrange<'_> {
    fn name(&self) -> &str {
        "Newton-Lagrange"
    }

    fn init(
        &mut self,
        problem: &mut Problem<KinematicChi2>,
        state: NewtonState,
    ) -> Result<(NewtonState, Option<KV>), Error> {
        let Some(p) = problem.problem.as_ref() else {
            return Err(Error::msg("Newton-Lagrange: no problem"));
        };
        if !self.accept(p, self.x) {
            self.progress = Progress::Failed;
        }
        let f = self.ws.buffers[self.ws.cur].f;
        Ok((state.cost(f), None))
    }

    fn next_iter(
        &mut self,
        problem: &mut Problem<KinematicChi2>,
        state: NewtonState,
    ) -> Result<(NewtonState, Option<KV>), Error> {
        // Direct access: argmin's counting wrapper hashes a string per call.
        let Some(p) = problem.problem.as_ref() else {
            return Err(Error::msg("Newton-Lagrange: no problem"));
        };
        let n = p.n_params();
        let m = if self.constrained { p.n_terms() } else { 0 };
        let cur = self.ws.cur;
        let e = &self.ws.buffers[cur];

        // G = H + 2ρÃᵀÃ = LLᵀ, positive definite if possible.
        let mut g_mat = [0.0; MAX_PARAMS * MAX_PARAMS];
        let mut l = [0.0; MAX_PARAMS * MAX_PARAMS];
        let mut factored = false;
        let rho_steps: &[f64] = if m > 0 { &RHO_STEPS } else { &[0.0] };
        let mut rho = 0.0;
        for &r in rho_steps {
            rho = r;
            fill_g(&mut g_mat, e, n, m, rho);
            if cholesky(&g_mat, n, 0.0, &mut l) {
                factored = true;
                break;
            }
        }
        if !factored {
            // Modified Newton: the smallest tried µ that makes G + µI
            // positive definite (a small µ keeps the step close to
            // Newton's; larger first guesses measurably slow convergence).
            let scale = (0..n).map(|i| g_mat[i * n + i].abs()).fold(1e-12, f64::max);
            let mut shift = 1e-8 * scale;
            for _ in 0..60 {
                if cholesky(&g_mat, n, shift, &mut l) {
                    factored = true;
                    break;
                }
                shift *= 4.0;
            }
            if !factored {
                return self.fail(state);
            }
        }

        // Range-space solution of the KKT system:
        // u = L⁻¹ r with r = −∇f − 2ρÃᵀc̃, W = L⁻¹Ãᵀ (rows w_t),
        // S λ⁺ = Wᵀu + c̃, Δ = L⁻ᵀ(u − Wλ⁺).
        let mut u = [0.0; MAX_PARAMS];
        for i in 0..n {
            let mut r = -e.g[i];
            for t in 0..m {
                r -= 2.0 * rho * e.a[t][i] * e.c[t];
            }
            u[i] = r;
        }
        forward_solve(&l, n, &mut u);
        let mut w = [[0.0; MAX_PARAMS]; MAX_TERMS];
        let mut s_chol = [0.0; MAX_TERMS * MAX_TERMS];
        let mut lambda_new = [0.0; MAX_TERMS];
        let mut v = u;
        if m > 0 {
            let mut s = [0.0; MAX_TERMS * MAX_TERMS];
            for t in 0..m {
                w[t][..n].copy_from_slice(&e.a[t][..n]);
                forward_solve(&l, n, &mut w[t]);
            }
            for a in 0..m {
                for b in 0..=a {
                    let sab = dot(&w[a][..n], &w[b][..n]);
                    s[a * m + b] = sab;
                    s[b * m + a] = sab;
                }
            }
            if !cholesky(&s, m, 0.0, &mut s_chol) {
                return self.fail(state);
            }
            for t in 0..m {
                lambda_new[t] = dot(&w[t][..n], &u[..n]) + e.c[t];
            }
            forward_solve(&s_chol, m, &mut lambda_new);
            back_solve(&s_chol, m, &mut lambda_new);
            for t in 0..m {
                for i in 0..n {
                    v[i] -= w[t][i] * lambda_new[t];
                }
            }
        }
        let mut step = v;
        back_solve(&l, n, &mut step);
        if !step[..n].iter().all(|v| v.is_finite()) {
            return self.fail(state);
        }
        let mut delta = Params::zeros();
        delta.as_mut_slice()[..n].copy_from_slice(&step[..n]);
        let gd = dot(&e.g[..n], &step[..n]);

        // Convergence: the full step is negligible.
        let converging = if m == 0 {
            -gd < self.tolerance
        } else {
            delta.norm_squared() < self.tolerance
        };
        if converging {
            let xt = self.x + delta;
            let (ft, _) = p.value_and_residuals(&xt);
            let ok = if m == 0 {
                ft <= e.f
            } else {
                ft.is_finite() && p.max_violation(&p.to_physical(&xt)) < self.violation_tolerance
            };
            if ok {
                self.x = xt;
                self.progress = Progress::Converged;
                return Ok((state.cost(ft), None));
            }
            if m == 0 {
                // Already at the minimum to rounding.
                self.progress = Progress::Converged;
                let f = e.f;
                return Ok((state.cost(f), None));
            }
        }

        // Line search from the full step: Armijo on f without constraints,
        // the filter test with them.
        let h0: f64 = e.c[..m].iter().map(|v| v.abs()).sum();
        let f0 = e.f;
        if m == 0 && (gd >= 0.0 || gd.is_nan()) {
            return self.fail(state);
        }
        let mut alpha = 1.0;
        let mut accepted: Option<(Params, f64)> = None;
        let mut full_step_expanded = false;
        for k in 0..MAX_BACKTRACKS {
            let xt = self.x + delta * alpha;
            let (ft, ct) = if k == 0 {
                // The full step is usually accepted: expand there at once
                // (with the multipliers it brings) into the spare buffer.
                let trial = &mut self.ws.buffers[1 - cur];
                p.expand_into(&xt, &lambda_new, trial);
                (trial.f, trial.c)
            } else {
                p.value_and_residuals(&xt)
            };
            let ht: f64 = ct[..m].iter().map(|v| v.abs()).sum();
            let ok = if m == 0 {
                ft <= f0 + ARMIJO * alpha * gd
            } else {
                self.acceptable(ft, ht, f0, h0)
            };
            if ok {
                accepted = Some((xt, alpha));
                full_step_expanded = k == 0;
                break;
            }
            if k == 0 && m > 0 && ft.is_finite() {
                // Second-order correction: the least-G-norm step back onto
                // the linearised constraints at the trial point,
                // −G⁻¹Ãᵀ S⁻¹ c̃(x + Δ) = −L⁻ᵀ W S⁻¹ c̃(x + Δ).
                let mut z = [0.0; MAX_TERMS];
                z[..m].copy_from_slice(&ct[..m]);
                forward_solve(&s_chol, m, &mut z);
                back_solve(&s_chol, m, &mut z);
                let mut d = [0.0; MAX_PARAMS];
                for t in 0..m {
                    for i in 0..n {
                        d[i] -= w[t][i] * z[t];
                    }
                }
                back_solve(&l, n, &mut d);
                let mut xs = xt;
                for i in 0..n {
                    xs[i] += d[i];
                }
                let (fs, cs) = p.value_and_residuals(&xs);
                let hs: f64 = cs[..m].iter().map(|v| v.abs()).sum();
                if self.acceptable(fs, hs, f0, h0) {
                    accepted = Some((xs, 1.0));
                    break;
                }
            }
            alpha *= 0.5;
        }
        let Some((x_new, alpha)) = accepted else {
            return self.fail(state);
        };
        if m > 0 && self.n_filter < MAX_FILTER {
            self.ws.filter[self.n_filter] = (f0, h0);
            self.n_filter += 1;
        }
        for t in 0..m {
            self.lambda[t] += alpha * (lambda_new[t] - self.lambda[t]);
        }
        if full_step_expanded {
            self.x = x_new;
            self.ws.cur = 1 - cur;
            if !self.ws.buffers[self.ws.cur].g[..n]
                .iter()
                .all(|v| v.is_finite())
            {
                return self.fail(state);
            }
        } else if !self.accept(p, x_new) {
            return self.fail(state);
        }
        let f = self.ws.buffers[self.ws.cur].f;
        Ok((state.cost(f), None))
    }

    fn terminate(&mut self, _state: &NewtonState) -> TerminationStatus {
        match self.progress {
            Progress::Running => TerminationStatus::NotTerminated,
            Progress::Converged => {
                TerminationStatus::Terminated(TerminationReason::SolverConverged)
            }
            Progress::Failed => {
                TerminationStatus::Terminated(TerminationReason::SolverExit(String::new()))
            }
        }
    }
}

/// G = H + 2ρÃᵀÃ (row-major n×n).
fn fill_g(g: &mut [f64; MAX_PARAMS * MAX_PARAMS], e: &Expansion, n: usize, m: usize, rho: f64) {
    g[..n * n].copy_from_slice(&e.h[..n * n]);
    if rho == 0.0 {
        return;
    }
    for t in 0..m {
        let a = &e.a[t];
        for i in 0..n {
            if a[i] == 0.0 {
                continue;
            }
            let ai = 2.0 * rho * a[i];
            let row = &mut g[i * n..i * n + n];
            for j in 0..n {
                row[j] += ai * a[j];
            }
        }
    }
}

#[inline]
fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}
