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
    back_solve, cholesky, forward_solve, modified_cholesky, Expansion, KinematicChi2, Params,
    MAX_TERMS,
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
/// Weight ρ of the 2ρÃᵀÃ term in G (it leaves the step unchanged when G
/// is positive definite; larger ρ makes that more frequent).
const RHO: f64 = 1e2;

/// Work arrays of the solver, owned by the fitter and reused for every fit.
#[derive(Clone)]
pub(crate) struct Workspace {
    /// The expansion at the current point and a second one for the trial
    /// point (swapped on acceptance, so an accepted full step costs no
    /// second evaluation).
    buffers: [Expansion; 2],
    cur: usize,
    kkt: Kkt,
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
            kkt: Kkt::new(),
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
        let ws = &mut *self.ws;
        let kkt = &mut ws.kkt;
        let e = &ws.buffers[cur];
        if !kkt.solve(p, e, n, m) {
            return self.fail(state);
        }
        let mut delta = Params::zeros();
        delta.as_mut_slice()[..n].copy_from_slice(&kkt.step[..n]);
        let gd = dot(&e.g[..n], &kkt.step[..n]);
        let (f0, h0) = (e.f, e.c[..m].iter().map(|v| v.abs()).sum::<f64>());

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
                ft <= f0
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
                return Ok((state.cost(f0), None));
            }
        }

        // Line search from the full step: Armijo on f without constraints,
        // the filter test with them.
        if m == 0 && (gd >= 0.0 || gd.is_nan()) {
            return self.fail(state);
        }
        let filter = &ws.filter[..self.n_filter];
        let mut alpha = 1.0;
        let mut accepted: Option<(Params, f64)> = None;
        let mut full_step_expanded = false;
        for k in 0..MAX_BACKTRACKS {
            let xt = self.x + delta * alpha;
            let (ft, ct) = if k == 0 {
                // The full step is usually accepted: expand there at once
                // (with the multipliers it brings) into the spare buffer.
                let trial = &mut ws.buffers[1 - cur];
                p.expand_into(&xt, &kkt.lambda, trial);
                (trial.f, trial.c)
            } else {
                p.value_and_residuals(&xt)
            };
            let ht: f64 = ct[..m].iter().map(|v| v.abs()).sum();
            let ok = if m == 0 {
                ft <= f0 + ARMIJO * alpha * gd
            } else {
                filter_accepts(filter, ft, ht, f0, h0)
            };
            if ok {
                accepted = Some((xt, alpha));
                full_step_expanded = k == 0;
                break;
            }
            if k == 0 && m > 0 && ft.is_finite() {
                let xs = xt + kkt.second_order_correction(&ct, n, m);
                let (fs, cs) = p.value_and_residuals(&xs);
                let hs: f64 = cs[..m].iter().map(|v| v.abs()).sum();
                if filter_accepts(filter, fs, hs, f0, h0) {
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
            ws.filter[self.n_filter] = (f0, h0);
            self.n_filter += 1;
        }
        for t in 0..m {
            self.lambda[t] += alpha * (kkt.lambda[t] - self.lambda[t]);
        }
        if full_step_expanded {
            self.x = x_new;
            ws.cur = 1 - cur;
            if !ws.buffers[ws.cur].g[..n].iter().all(|v| v.is_finite()) {
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

/// Scratch space of one Newton–Lagrange step: G = H + 2ρÃᵀÃ, its
/// Cholesky factor L, W = L⁻¹Ãᵀ (rows w_t), the Cholesky factor of
/// S = WᵀW, the step and the new multipliers. Kept in the [`Workspace`]
/// so that no iteration re-zeroes ~10 KB of arrays.
#[derive(Clone)]
struct Kkt {
    g: [f64; MAX_PARAMS * MAX_PARAMS],
    l: [f64; MAX_PARAMS * MAX_PARAMS],
    w: [[f64; MAX_PARAMS]; MAX_TERMS],
    s: [f64; MAX_TERMS * MAX_TERMS],
    s_chol: [f64; MAX_TERMS * MAX_TERMS],
    step: [f64; MAX_PARAMS],
    lambda: [f64; MAX_TERMS],
}

impl Kkt {
    fn new() -> Self {
        Kkt {
            g: [0.0; MAX_PARAMS * MAX_PARAMS],
            l: [0.0; MAX_PARAMS * MAX_PARAMS],
            w: [[0.0; MAX_PARAMS]; MAX_TERMS],
            s: [0.0; MAX_TERMS * MAX_TERMS],
            s_chol: [0.0; MAX_TERMS * MAX_TERMS],
            step: [0.0; MAX_PARAMS],
            lambda: [0.0; MAX_TERMS],
        }
    }

    /// The Newton (m = 0) or Newton–Lagrange step at the expansion `e`
    /// into `step` and `lambda`; false if no factorisation exists or the
    /// step is not finite.
    fn solve(&mut self, p: &KinematicChi2, e: &Expansion, n: usize, m: usize) -> bool {
        // G = H + 2ρÃᵀÃ = LLᵀ, positive definite if possible.
        let rho = if m > 0 { RHO } else { 0.0 };
        if m == 0 {
            // No constraints: the trial expansion must see no multipliers.
            self.lambda = [0.0; MAX_TERMS];
        }
        fill_g(&mut self.g, p, e, n, m, rho);
        if !cholesky(&self.g, n, 0.0, &mut self.l) {
            let scale = (0..n)
                .map(|i| self.g[i * n + i].abs())
                .fold(1e-12, f64::max);
            let factored = if m == 0 {
                // Unconstrained: flip and floor non-positive pivots.
                modified_cholesky(&self.g, n, 1e-8 * scale, &mut self.l)
            } else {
                // The smallest tried µ that makes G + µI positive
                // definite: a small µ keeps the step close to Newton's
                // (a larger first guess, or flipped pivots, measurably
                // slow convergence here).
                let mut shift = 1e-8 * scale;
                let mut ok = false;
                for _ in 0..60 {
                    if cholesky(&self.g, n, shift, &mut self.l) {
                        ok = true;
                        break;
                    }
                    shift *= 4.0;
                }
                ok
            };
            if !factored {
                return false;
            }
        }
        // Range-space solution of the KKT system:
        // u = L⁻¹r with r = −∇f − 2ρÃᵀc̃; S λ⁺ = Wᵀu + c̃; Δ = L⁻ᵀ(u − Wλ⁺).
        let u = &mut self.step;
        for i in 0..n {
            let mut r = -e.g[i];
            for t in 0..m {
                r -= 2.0 * rho * e.a[t][i] * e.c[t];
            }
            u[i] = r;
        }
        forward_solve(&self.l, n, u);
        if m > 0 {
            for t in 0..m {
                self.w[t][..n].copy_from_slice(&e.a[t][..n]);
                forward_solve(&self.l, n, &mut self.w[t]);
            }
            for a in 0..m {
                for b in 0..=a {
                    let sab = dot(&self.w[a][..n], &self.w[b][..n]);
                    self.s[a * m + b] = sab;
                    self.s[b * m + a] = sab;
                }
            }
            if !cholesky(&self.s, m, 0.0, &mut self.s_chol) {
                return false;
            }
            for t in 0..m {
                self.lambda[t] = dot(&self.w[t][..n], &u[..n]) + e.c[t];
            }
            forward_solve(&self.s_chol, m, &mut self.lambda);
            back_solve(&self.s_chol, m, &mut self.lambda);
            for t in 0..m {
                let lt = self.lambda[t];
                for (ui, wi) in u[..n].iter_mut().zip(&self.w[t][..n]) {
                    *ui -= wi * lt;
                }
            }
        }
        back_solve(&self.l, n, u);
        u[..n].iter().all(|v| v.is_finite())
    }

    /// Second-order correction at a trial point with residuals `c`: the
    /// least-G-norm step back onto the linearised constraints,
    /// −G⁻¹Ãᵀ S⁻¹ c = −L⁻ᵀ W S⁻¹ c (after [`solve`](Self::solve)).
    fn second_order_correction(&self, c: &[f64; MAX_TERMS], n: usize, m: usize) -> Params {
        let mut z = *c;
        forward_solve(&self.s_chol, m, &mut z);
        back_solve(&self.s_chol, m, &mut z);
        let mut d = [0.0; MAX_PARAMS];
        for t in 0..m {
            for i in 0..n {
                d[i] -= self.w[t][i] * z[t];
            }
        }
        back_solve(&self.l, n, &mut d);
        let mut out = Params::zeros();
        out.as_mut_slice()[..n].copy_from_slice(&d[..n]);
        out
    }
}

/// The filter test (Fletcher and Leyffer): a trial point (f, h), h the
/// constraint violation Σ|c̃_t|, is acceptable if against the current point
/// (f0, h0) and every earlier iterate in `filter` it reduces h or f by a
/// margin.
fn filter_accepts(filter: &[(f64, f64)], f: f64, h: f64, f0: f64, h0: f64) -> bool {
    let beats =
        |(fj, hj): (f64, f64)| h <= (1.0 - FILTER_MARGIN) * hj || f <= fj - FILTER_MARGIN * h;
    f.is_finite() && beats((f0, h0)) && filter.iter().all(|&e| beats(e))
}

/// G = H + 2ρÃᵀÃ (row-major n×n); each row ã_t is zero outside its
/// term's support.
fn fill_g(
    g: &mut [f64; MAX_PARAMS * MAX_PARAMS],
    p: &KinematicChi2,
    e: &Expansion,
    n: usize,
    m: usize,
    rho: f64,
) {
    g[..n * n].copy_from_slice(&e.h[..n * n]);
    if rho == 0.0 {
        return;
    }
    for (t, a) in e.a[..m].iter().enumerate() {
        let support = p.term_support(t);
        for &i in support {
            let i = i as usize;
            let ai = 2.0 * rho * a[i];
            for &j in support {
                let j = j as usize;
                g[i * n + j] += ai * a[j];
            }
        }
    }
}

#[inline]
fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}
