//! A dogleg subproblem for argmin's `TrustRegion`.
//!
//! argmin 0.11's own `Dogleg` returns a zero step when the Cauchy point lies
//! outside the trust region (its τ search only covers the second leg), after
//! which the radius collapses to zero and the fit stalls. This is the
//! textbook dogleg (J. Nocedal and S. J. Wright, *Numerical Optimization*,
//! 2nd ed., Springer 2006, §4.1), plugged into argmin as a subproblem solver
//! exactly like argmin's own.

use argmin::core::{
    Error, IterState, Problem, Solver, State, TerminationReason, TerminationStatus,
    TrustRegionRadius, KV,
};
use argmin_math::{ArgminDot, ArgminInv};

use crate::problem::{HessianMatrix, KinematicChi2, Params};

type SubState = IterState<Params, Params, (), HessianMatrix, (), f64>;

/// One dogleg step on a positive-definite model Hessian.
#[derive(Clone, Copy, Debug)]
pub(crate) struct DoglegStep {
    radius: f64,
}

impl DoglegStep {
    pub(crate) fn new() -> Self {
        DoglegStep { radius: 1.0 }
    }

    /// The step minimising gᵀp + ½pᵀHp along the dogleg path within |p| ≤ Δ.
    /// A step on the boundary is rescaled until its computed norm equals Δ
    /// to rounding: argmin's `TrustRegion` only enlarges the radius when
    /// |‖p‖ − Δ| ≤ 10 ε (absolute), so a boundary step off by a few ulps
    /// would freeze the radius and slow the fit to a crawl.
    pub(crate) fn step(&self, g: &Params, h: &HessianMatrix) -> Params {
        let p = self.raw_step(g, h);
        let delta = self.radius;
        let norm = p.norm();
        if norm > 0.0 && (norm - delta).abs() <= 1e-9 * delta {
            let mut q = p * (delta / norm);
            for _ in 0..2 {
                let nq = q.norm();
                if nq == delta {
                    break;
                }
                q *= delta / nq;
            }
            return q;
        }
        p
    }

    fn raw_step(&self, g: &Params, h: &HessianMatrix) -> Params {
        let delta = self.radius;
        let h_inv = h.inv().expect("view, infallible");
        let pb = -h_inv.dot(g);
        if pb.norm() <= delta {
            return pb;
        }
        let gg = g.dot(g);
        let ghg = g.dot(&h.dot(g));
        let gnorm = gg.sqrt();
        if gnorm == 0.0 {
            return Params::zeros();
        }
        if ghg <= 0.0 {
            return -g * (delta / gnorm);
        }
        let pu = -g * (gg / ghg);
        let pu_norm = pu.norm();
        if pu_norm >= delta {
            return -g * (delta / gnorm);
        }
        // |pu + τ (pb − pu)| = Δ, τ ∈ [0, 1].
        let d = pb - pu;
        let a = d.dot(&d);
        let b = pu.dot(&d);
        let c = pu_norm * pu_norm - delta * delta;
        let tau = if a > 0.0 {
            ((-b + (b * b - a * c).max(0.0).sqrt()) / a).clamp(0.0, 1.0)
        } else {
            0.0
        };
        pu + d * tau
    }
}

impl TrustRegionRadius<f64> for DoglegStep {
    fn set_radius(&mut self, radius: f64) {
        self.radius = radius;
    }
}

impl Solver<KinematicChi2, SubState> for DoglegStep {
    fn name(&self) -> &str {
        "dogleg step"
    }

    fn next_iter(
        &mut self,
        _problem: &mut Problem<KinematicChi2>,
        mut state: SubState,
    ) -> Result<(SubState, Option<KV>), Error> {
        let (Some(g), Some(h)) = (state.take_gradient(), state.take_hessian()) else {
            return Err(Error::msg("dogleg step: gradient and Hessian must be set"));
        };
        let p = self.step(&g, &h);
        Ok((state.param(p).gradient(g).hessian(h), None))
    }

    fn terminate(&mut self, state: &SubState) -> TerminationStatus {
        if state.get_iter() >= 1 {
            TerminationStatus::Terminated(TerminationReason::SolverConverged)
        } else {
            TerminationStatus::NotTerminated
        }
    }
}
