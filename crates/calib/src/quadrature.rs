//! Least-squares fit of a resolution that is a sum in quadrature of terms,
//! f(x) = √(Σⱼ pⱼ² gⱼ(x)²): the calorimeter form σ(E)/E = a/√E ⊕ b/E ⊕ c
//! (Fabjan and Gianotti, Rev. Mod. Phys. 75 (2003) 1243), the lepton form
//! σ(pt)/pt = c ⊕ k·pt and the MET form σ = floor ⊕ s·√(Σ pt) are all of
//! this shape, so one fitter serves them.

use nalgebra::{DMatrix, DVector};
use serde::{Deserialize, Serialize};

use crate::Measured;

/// A binned resolution point: abscissa `x`, value `y` ± `error`.
///
/// Invariant (checked by [`fit_quadrature`]): all finite, `error > 0`.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct Point {
    /// Abscissa (e.g. mean true energy in the bin, GeV).
    pub x: f64,
    /// Measured value (e.g. σ(E)/E).
    pub y: f64,
    /// Its statistical uncertainty (> 0).
    pub error: f64,
}

/// The terms gⱼ(x) of a sum in quadrature.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Form {
    /// σ(E)/E = a/√E ⊕ b/E ⊕ c: parameters (a \[√GeV\], b \[GeV\], c).
    Calorimeter,
    /// σ(pt)/pt = c ⊕ k·pt: parameters (c, k \[1/GeV\]).
    Tracker,
    /// σ = floor ⊕ s·√H: parameters (floor \[GeV\], s \[√GeV\]).
    SqrtSum,
}

impl Form {
    /// Number of parameters.
    pub fn n_params(self) -> usize {
        match self {
            Form::Calorimeter => 3,
            Form::Tracker | Form::SqrtSum => 2,
        }
    }

    /// The term gⱼ(x) (x > 0).
    fn term(self, j: usize, x: f64) -> f64 {
        match (self, j) {
            (Form::Calorimeter, 0) => 1.0 / x.sqrt(),
            (Form::Calorimeter, 1) => 1.0 / x,
            (Form::Calorimeter, _) => 1.0,
            (Form::Tracker, 0) => 1.0,
            (Form::Tracker, _) => x,
            (Form::SqrtSum, 0) => 1.0,
            (Form::SqrtSum, _) => x.sqrt(),
        }
    }

    /// f(x) = √(Σⱼ pⱼ² gⱼ(x)²).
    ///
    /// ```
    /// use quarry_calib::Form;
    /// // a = 1, b = 0, c = 0: σ/E = 1/√E.
    /// assert!((Form::Calorimeter.eval(&[1.0, 0.0, 0.0], 100.0) - 0.1).abs() < 1e-12);
    /// ```
    pub fn eval(self, params: &[f64], x: f64) -> f64 {
        params
            .iter()
            .enumerate()
            .map(|(j, p)| (p * self.term(j, x)).powi(2))
            .sum::<f64>()
            .sqrt()
    }
}

/// Result of [`fit_quadrature`].
///
/// Invariants: parameters ≥ 0 and finite; errors finite and ≥ 0.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct QuadratureFit {
    /// The form fitted.
    pub form: Form,
    /// Parameters (their sign is not determined by the form: reported ≥ 0)
    /// with errors from the inverse of JᵀWJ at the minimum (the statistical
    /// errors of the points taken as absolute).
    pub params: Vec<Measured>,
    /// χ² at the minimum.
    pub chi2: f64,
    /// Points − parameters.
    pub ndf: usize,
    /// Levenberg–Marquardt iterations used.
    pub iterations: usize,
}

/// Why a resolution fit gave no answer.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub enum FitError {
    /// Fewer points than parameters + 1.
    #[error("{points} points cannot constrain {params} parameters (need at least {})", params + 1)]
    TooFewPoints {
        /// Points given.
        points: usize,
        /// Parameters of the form.
        params: usize,
    },
    /// A point is not finite, has x ≤ 0 or error ≤ 0.
    #[error("point {index} is unusable (x > 0, finite y and error > 0 required)")]
    BadPoint {
        /// Index of the point.
        index: usize,
    },
    /// The minimisation did not converge.
    #[error("the fit did not converge in {0} iterations")]
    NotConverged(usize),
}

/// Most Levenberg–Marquardt iterations.
pub const MAX_ITERATIONS: usize = 500;

/// Weighted least-squares fit of `form` to `points`: minimises
/// χ² = Σᵢ ((yᵢ − f(xᵢ))/errorᵢ)² over the parameters by
/// Levenberg–Marquardt, started from the linear least-squares solution in
/// the squared parameters (f² is linear in pⱼ²). A parameter that the data
/// push to 0 stays at 0 with the error its curvature allows (the model is
/// even in each pⱼ, so 0 is a stationary point, not a boundary).
///
/// The same χ² and covariance as `scipy.optimize.curve_fit(...,
/// sigma=errors, absolute_sigma=True)` (checked in the tests).
///
/// ```
/// use quarry_calib::{fit_quadrature, Form, Point};
/// let points: Vec<Point> = [20.0, 50.0, 100.0, 200.0, 500.0]
///     .iter()
///     .map(|&e| Point { x: e, y: Form::Calorimeter.eval(&[0.9, 4.0, 0.04], e), error: 0.002 })
///     .collect();
/// let fit = fit_quadrature(Form::Calorimeter, &points).unwrap();
/// assert!((fit.params[0].value - 0.9).abs() < 1e-6);
/// ```
pub fn fit_quadrature(form: Form, points: &[Point]) -> Result<QuadratureFit, FitError> {
    let np = form.n_params();
    if points.len() < np + 1 {
        return Err(FitError::TooFewPoints {
            points: points.len(),
            params: np,
        });
    }
    for (index, p) in points.iter().enumerate() {
        if !(p.x.is_finite()
            && p.x > 0.0
            && p.y.is_finite()
            && p.error.is_finite()
            && p.error > 0.0)
        {
            return Err(FitError::BadPoint { index });
        }
    }
    let mut params = start(form, points);
    let mut chi2 = chi2_of(form, &params, points);
    let mut lambda = 1e-3;
    let mut iterations = 0;
    let mut converged = false;
    while iterations < MAX_ITERATIONS {
        iterations += 1;
        let (jtj, jtr) = normal_equations(form, &params, points);
        let mut damped = jtj.clone();
        for j in 0..np {
            damped[(j, j)] += lambda * jtj[(j, j)].max(1e-12);
        }
        let Some(step) = damped.lu().solve(&jtr) else {
            lambda *= 10.0;
            continue;
        };
        let trial: Vec<f64> = params.iter().zip(step.iter()).map(|(p, s)| p + s).collect();
        let trial_chi2 = chi2_of(form, &trial, points);
        if trial_chi2.is_finite() && trial_chi2 <= chi2 {
            let small = (chi2 - trial_chi2) <= 1e-12 * chi2.max(1e-300)
                && step
                    .iter()
                    .zip(&trial)
                    .all(|(s, p)| s.abs() <= 1e-10 * p.abs().max(1e-8));
            params = trial;
            chi2 = trial_chi2;
            lambda = (lambda / 10.0).max(1e-12);
            if small {
                converged = true;
                break;
            }
        } else {
            lambda *= 10.0;
            if lambda > 1e12 {
                // No step lowers χ²: at the minimum within rounding.
                converged = true;
                break;
            }
        }
    }
    if !converged {
        return Err(FitError::NotConverged(iterations));
    }
    let (jtj, _) = normal_equations(form, &params, points);
    let cov = jtj
        .clone()
        .try_inverse()
        .unwrap_or_else(|| jtj.pseudo_inverse(1e-300).unwrap_or(DMatrix::zeros(np, np)));
    let params = params
        .iter()
        .enumerate()
        .map(|(j, p)| Measured::new(p.abs(), cov[(j, j)].max(0.0).sqrt()))
        .collect();
    Ok(QuadratureFit {
        form,
        params,
        chi2,
        ndf: points.len() - np,
        iterations,
    })
}

impl QuadratureFit {
    /// The fitted curve at `x`.
    pub fn eval(&self, x: f64) -> f64 {
        let p: Vec<f64> = self.params.iter().map(|m| m.value).collect();
        self.form.eval(&p, x)
    }
}

fn chi2_of(form: Form, params: &[f64], points: &[Point]) -> f64 {
    points
        .iter()
        .map(|p| ((p.y - form.eval(params, p.x)) / p.error).powi(2))
        .sum()
}

/// JᵀWJ and JᵀW r for the residuals r = y − f (W = 1/error²), with
/// ∂f/∂pⱼ = pⱼ gⱼ² / f.
fn normal_equations(form: Form, params: &[f64], points: &[Point]) -> (DMatrix<f64>, DVector<f64>) {
    let np = params.len();
    let mut jtj = DMatrix::zeros(np, np);
    let mut jtr = DVector::zeros(np);
    for p in points {
        let f = form.eval(params, p.x).max(1e-300);
        let w = 1.0 / (p.error * p.error);
        let r = p.y - f;
        let grad: Vec<f64> = (0..np)
            .map(|j| params[j] * form.term(j, p.x).powi(2) / f)
            .collect();
        for a in 0..np {
            jtr[a] += w * grad[a] * r;
            for b in 0..np {
                jtj[(a, b)] += w * grad[a] * grad[b];
            }
        }
    }
    (jtj, jtr)
}

/// Starting point: weighted linear least squares of y² on gⱼ² (weights
/// from the propagated error 2y·error), square roots of the (clamped
/// positive) solution; a small positive value where the solution is ≤ 0,
/// so that every derivative ∂f/∂pⱼ starts non-zero.
fn start(form: Form, points: &[Point]) -> Vec<f64> {
    let np = form.n_params();
    let mut a = DMatrix::<f64>::zeros(np, np);
    let mut b = DVector::<f64>::zeros(np);
    for p in points {
        let e2 = (2.0 * p.y.abs() * p.error).max(1e-300);
        let w = 1.0 / (e2 * e2);
        let g: Vec<f64> = (0..np).map(|j| form.term(j, p.x).powi(2)).collect();
        for i in 0..np {
            b[i] += w * g[i] * p.y * p.y;
            for j in 0..np {
                a[(i, j)] += w * g[i] * g[j];
            }
        }
    }
    let solution = a.lu().solve(&b).unwrap_or(DVector::zeros(np));
    // Scale of each parameter for the positive floor: the value that would
    // make its term alone equal the typical y.
    let y_typ = points.iter().map(|p| p.y.abs()).sum::<f64>() / points.len() as f64;
    (0..np)
        .map(|j| {
            let x_mid = points[points.len() / 2].x;
            let floor = 0.05 * y_typ / form.term(j, x_mid).abs().max(1e-300);
            if solution[j] > 0.0 && solution[j].is_finite() {
                solution[j].sqrt().max(floor)
            } else {
                floor
            }
        })
        .collect()
}
