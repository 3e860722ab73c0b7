//! Least-squares fits of relaxation, noise and activation laws.
//!
//! Every fit minimises `χ² = Σ_i ((y_i − f(x_i; p))/σ_i)²` with the
//! Levenberg–Marquardt method (Levenberg, Q. Appl. Math. 2, 164 (1944);
//! Marquardt, J. SIAM 11, 431 (1963); MINPACK's trust-region form, Moré,
//! Springer LNM 630, 105 (1978), as implemented by the
//! `levenberg-marquardt` crate). Standard errors come from the Jacobian `J`
//! of the weighted residuals at the optimum, `cov = (JᵀJ)⁻¹`, used as it is
//! when the caller gives σ ("absolute" errors) and multiplied by `χ²/dof`
//! when not (σ then estimated from the scatter) — the two conventions of
//! `scipy.optimize.curve_fit` (`absolute_sigma=True/False`).
//!
//! Positive scale parameters (τ, β, prefactors of log fits) are fitted as
//! their logarithms so the search cannot leave the physical domain; the
//! covariance is carried back by the chain rule, which at the optimum is
//! exactly the covariance of the direct parametrisation.
//!
//! Fits done in log space (power law, noise form, Arrhenius, scale) assume
//! multiplicative scatter: a σ given for `y` becomes `σ/y` for `ln y`.

use levenberg_marquardt::{LeastSquaresProblem, LevenbergMarquardt};
use nalgebra::storage::Owned;
use nalgebra::{DMatrix, DVector, Dyn};
use serde::{Deserialize, Serialize};
use std::fmt;

/// Why a fit could not be done.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub enum FitError {
    /// Fewer points than parameters + 1 (no degree of freedom left).
    TooFewPoints {
        /// Points usable (inside the band, if one was given).
        points: usize,
        /// Points needed.
        needed: usize,
    },
    /// Input arrays of different lengths.
    LengthMismatch {
        /// What was compared.
        what: String,
        /// First length.
        left: usize,
        /// Second length.
        right: usize,
    },
    /// NaN or ±∞ in the input.
    NonFinite {
        /// Which input ("x", "y", "sigma").
        what: String,
        /// 0-based index.
        index: usize,
    },
    /// A value that must be positive (log fit, σ, band edge) is not.
    NonPositive {
        /// Which input.
        what: String,
        /// 0-based index.
        index: usize,
        /// The value.
        value: f64,
    },
    /// The parameters are not determined by the data (singular JᵀJ).
    Degenerate(String),
}

impl fmt::Display for FitError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            FitError::TooFewPoints { points, needed } => write!(
                f,
                "the fit has {points} usable points but needs at least {needed}"
            ),
            FitError::LengthMismatch { what, left, right } => {
                write!(f, "{what} have different lengths ({left} and {right})")
            }
            FitError::NonFinite { what, index } => {
                write!(f, "{what} value {} is not a finite number", index + 1)
            }
            FitError::NonPositive { what, index, value } => write!(
                f,
                "{what} value {} is {value}, but this fit needs it > 0",
                index + 1
            ),
            FitError::Degenerate(message) => write!(f, "the fit is degenerate: {message}"),
        }
    }
}

impl std::error::Error for FitError {}

/// Outcome of a fit.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct FitResult {
    /// Model formula, e.g. "y = A exp(-t/tau)".
    pub model: String,
    /// Parameter names, in order (units given in the fit's documentation).
    pub parameter_names: Vec<String>,
    /// Best-fit values.
    pub parameters: Vec<f64>,
    /// One-σ standard errors.
    pub standard_errors: Vec<f64>,
    /// Covariance matrix, row-major `n × n`.
    pub covariance: Vec<Vec<f64>>,
    /// `Σ r_i²` of the weighted residuals (in the fit space: log space for log fits).
    pub chi_squared: f64,
    /// Points − parameters.
    pub degrees_of_freedom: usize,
    /// `χ²/dof`.
    pub reduced_chi_squared: f64,
    /// Whether errors came from given σ (`true`) or from the scatter.
    pub absolute_sigma: bool,
    /// Weighted residuals `(y_i − f_i)/σ_i` of the points used (fit space).
    pub residuals: Vec<f64>,
    /// Whether the minimiser reported convergence.
    pub converged: bool,
    /// Model evaluations used.
    pub evaluations: usize,
}

impl FitResult {
    /// Value and error of parameter `name`, if it exists.
    pub fn parameter(&self, name: &str) -> Option<(f64, f64)> {
        let k = self.parameter_names.iter().position(|n| n == name)?;
        Some((self.parameters[k], self.standard_errors[k]))
    }
}

/// How an internal (fitted) parameter maps to the reported one.
#[derive(Clone, Copy, Debug, PartialEq)]
enum Reported {
    /// Reported as fitted.
    AsIs,
    /// Fitted as `ln p`, reported as `p`.
    Exp,
}

/// The least-squares problem for the `levenberg-marquardt` crate: weighted
/// residuals `w_i (y_i − f(x_i; q))` of a model with analytic gradient.
struct Problem<'a, F> {
    x: &'a [f64],
    y: &'a [f64],
    weights: &'a [f64],
    model: F,
    params: DVector<f64>,
    gradient: Vec<f64>,
}

impl<F> Problem<'_, F>
where
    F: Fn(f64, &[f64], &mut [f64]) -> f64,
{
    fn residual_vector(&self) -> Option<DVector<f64>> {
        let mut scratch = vec![0.0; self.params.len()];
        let p = self.params.as_slice();
        let r = DVector::from_iterator(
            self.x.len(),
            self.x
                .iter()
                .zip(self.y)
                .zip(self.weights)
                .map(|((&x, &y), &w)| w * (y - (self.model)(x, p, &mut scratch))),
        );
        r.iter().all(|v| v.is_finite()).then_some(r)
    }

    fn jacobian_matrix(&self) -> Option<DMatrix<f64>> {
        let n = self.params.len();
        let p = self.params.as_slice();
        let mut gradient = self.gradient.clone();
        let mut j = DMatrix::zeros(self.x.len(), n);
        for (i, (&x, &w)) in self.x.iter().zip(self.weights).enumerate() {
            (self.model)(x, p, &mut gradient);
            for (k, g) in gradient.iter().enumerate() {
                j[(i, k)] = -w * g;
            }
        }
        j.iter().all(|v| v.is_finite()).then_some(j)
    }
}

impl<F> LeastSquaresProblem<f64, Dyn, Dyn> for Problem<'_, F>
where
    F: Fn(f64, &[f64], &mut [f64]) -> f64,
{
    type ResidualStorage = Owned<f64, Dyn>;
    type JacobianStorage = Owned<f64, Dyn, Dyn>;
    type ParameterStorage = Owned<f64, Dyn>;

    fn set_params(&mut self, x: &DVector<f64>) {
        self.params.copy_from(x);
    }

    fn params(&self) -> DVector<f64> {
        self.params.clone()
    }

    fn residuals(&self) -> Option<DVector<f64>> {
        self.residual_vector()
    }

    fn jacobian(&self) -> Option<DMatrix<f64>> {
        self.jacobian_matrix()
    }
}

/// Everything a model fit needs besides the data.
struct Spec<'a> {
    model: &'a str,
    names: &'a [&'a str],
    reported: &'a [Reported],
    start: Vec<f64>,
}

/// Run Levenberg–Marquardt and build the [`FitResult`].
fn solve<F>(
    x: &[f64],
    y: &[f64],
    sigma: Option<&[f64]>,
    spec: Spec<'_>,
    model: F,
) -> Result<FitResult, FitError>
where
    F: Fn(f64, &[f64], &mut [f64]) -> f64,
{
    let n = spec.start.len();
    let m = x.len();
    if m <= n {
        return Err(FitError::TooFewPoints {
            points: m,
            needed: n + 1,
        });
    }
    let weights: Vec<f64> = match sigma {
        Some(s) => s.iter().map(|s| 1.0 / s).collect(),
        None => vec![1.0; m],
    };
    let problem = Problem {
        x,
        y,
        weights: &weights,
        model,
        params: DVector::from_vec(spec.start.clone()),
        gradient: vec![0.0; n],
    };
    let (problem, report) = LevenbergMarquardt::new()
        .with_patience(400)
        .minimize(problem);
    let residuals = problem.residual_vector().ok_or_else(|| {
        FitError::Degenerate("the model is not finite at the parameters reached".into())
    })?;
    let jacobian = problem.jacobian_matrix().ok_or_else(|| {
        FitError::Degenerate("the model gradient is not finite at the optimum".into())
    })?;
    let chi_squared = residuals.norm_squared();
    let dof = m - n;
    let reduced = chi_squared / dof as f64;
    let normal = jacobian.transpose() * &jacobian;
    let mut covariance = normal.clone().try_inverse().ok_or_else(|| {
        FitError::Degenerate(format!(
            "JᵀJ is singular; the data do not determine all of {:?}",
            spec.names
        ))
    })?;
    if sigma.is_none() {
        covariance *= reduced;
    }
    let q = problem.params;
    // Chain rule to the reported parameters: dp/dq = p for p = e^q.
    let mut parameters = Vec::with_capacity(n);
    let mut derivative = Vec::with_capacity(n);
    for (k, kind) in spec.reported.iter().enumerate() {
        match kind {
            Reported::AsIs => {
                parameters.push(q[k]);
                derivative.push(1.0);
            }
            Reported::Exp => {
                parameters.push(q[k].exp());
                derivative.push(q[k].exp());
            }
        }
    }
    let covariance: Vec<Vec<f64>> = (0..n)
        .map(|i| {
            (0..n)
                .map(|j| derivative[i] * derivative[j] * covariance[(i, j)])
                .collect()
        })
        .collect();
    let standard_errors = (0..n).map(|i| covariance[i][i].max(0.0).sqrt()).collect();
    Ok(FitResult {
        model: spec.model.to_string(),
        parameter_names: spec.names.iter().map(|s| s.to_string()).collect(),
        parameters,
        standard_errors,
        covariance,
        chi_squared,
        degrees_of_freedom: dof,
        reduced_chi_squared: reduced,
        absolute_sigma: sigma.is_some(),
        residuals: residuals.iter().copied().collect(),
        converged: report.termination.was_successful(),
        evaluations: report.number_of_evaluations,
    })
}

/// Check lengths and finiteness of `x`, `y` and `sigma` (σ > 0).
fn validate(x: &[f64], y: &[f64], sigma: Option<&[f64]>) -> Result<(), FitError> {
    if x.len() != y.len() {
        return Err(FitError::LengthMismatch {
            what: "x and y".into(),
            left: x.len(),
            right: y.len(),
        });
    }
    for (what, values) in [("x", x), ("y", y)] {
        if let Some(index) = values.iter().position(|v| !v.is_finite()) {
            return Err(FitError::NonFinite {
                what: what.into(),
                index,
            });
        }
    }
    if let Some(s) = sigma {
        if s.len() != y.len() {
            return Err(FitError::LengthMismatch {
                what: "y and sigma".into(),
                left: y.len(),
                right: s.len(),
            });
        }
        if let Some(index) = s.iter().position(|v| !v.is_finite()) {
            return Err(FitError::NonFinite {
                what: "sigma".into(),
                index,
            });
        }
        if let Some((index, &value)) = s.iter().enumerate().find(|(_, v)| **v <= 0.0) {
            return Err(FitError::NonPositive {
                what: "sigma".into(),
                index,
                value,
            });
        }
    }
    Ok(())
}

fn require_positive(what: &str, values: &[f64]) -> Result<(), FitError> {
    match values.iter().enumerate().find(|(_, v)| **v <= 0.0) {
        Some((index, &value)) => Err(FitError::NonPositive {
            what: what.into(),
            index,
            value,
        }),
        None => Ok(()),
    }
}

/// Ordinary least-squares line `y = a + b x`: (a, b); `None` if `x` is constant.
fn line(x: &[f64], y: &[f64]) -> Option<(f64, f64)> {
    let n = x.len() as f64;
    let mx = x.iter().sum::<f64>() / n;
    let my = y.iter().sum::<f64>() / n;
    let sxx: f64 = x.iter().map(|v| (v - mx).powi(2)).sum();
    let sxy: f64 = x.iter().zip(y).map(|(a, b)| (a - mx) * (b - my)).sum();
    (sxx > 0.0).then(|| (my - sxy / sxx * mx, sxy / sxx))
}

/// Starting `(A, τ)` for a decay from the log-linear regression of the
/// positive points; a span-based guess when that is impossible.
fn decay_start(t: &[f64], y: &[f64]) -> (f64, f64) {
    let (tp, lp): (Vec<f64>, Vec<f64>) = t
        .iter()
        .zip(y)
        .filter(|(_, v)| **v > 0.0)
        .map(|(a, b)| (*a, b.ln()))
        .unzip();
    let span = t.iter().cloned().fold(f64::NEG_INFINITY, f64::max)
        - t.iter().cloned().fold(f64::INFINITY, f64::min);
    let amplitude = y.iter().map(|v| v.abs()).fold(0.0, f64::max).max(1e-300);
    match (tp.len() >= 2).then(|| line(&tp, &lp)).flatten() {
        Some((a, b)) if b < 0.0 => (a.exp(), -1.0 / b),
        _ => (amplitude, (0.5 * span).max(1e-300)),
    }
}

/// `y = A e^{−t/τ}`: parameters `A` (units of y) and `tau` (units of t).
/// `sigma`: one-σ errors of `y`, or `None` to estimate them from the scatter.
pub fn fit_exponential(t: &[f64], y: &[f64], sigma: Option<&[f64]>) -> Result<FitResult, FitError> {
    validate(t, y, sigma)?;
    if t.len() < 3 {
        return Err(FitError::TooFewPoints {
            points: t.len(),
            needed: 3,
        });
    }
    let (a0, tau0) = decay_start(t, y);
    solve(
        t,
        y,
        sigma,
        Spec {
            model: "y = A exp(-t/tau)",
            names: &["A", "tau"],
            reported: &[Reported::AsIs, Reported::Exp],
            start: vec![a0, tau0.ln()],
        },
        |t, q, g| {
            let e = (-t * (-q[1]).exp()).exp();
            g[0] = e;
            g[1] = q[0] * e * t * (-q[1]).exp();
            q[0] * e
        },
    )
}

/// Stretched exponential (Kohlrausch, Ann. Phys. 167, 179 (1854);
/// Williams & Watts, Trans. Faraday Soc. 66, 80 (1970)):
/// `y = A exp(−(t/τ)^β)`, `t ≥ 0`; parameters `A`, `tau` (units of t),
/// `beta` (dimensionless, > 0). Starts from the exponential fit.
pub fn fit_stretched_exponential(
    t: &[f64],
    y: &[f64],
    sigma: Option<&[f64]>,
) -> Result<FitResult, FitError> {
    validate(t, y, sigma)?;
    if let Some((index, &value)) = t.iter().enumerate().find(|(_, v)| **v < 0.0) {
        return Err(FitError::NonPositive {
            what: "t (must be ≥ 0)".into(),
            index,
            value,
        });
    }
    if t.len() < 4 {
        return Err(FitError::TooFewPoints {
            points: t.len(),
            needed: 4,
        });
    }
    let (a0, tau0) = match fit_exponential(t, y, sigma) {
        Ok(r) if r.parameters.iter().all(|p| p.is_finite()) && r.parameters[1] > 0.0 => {
            (r.parameters[0], r.parameters[1])
        }
        _ => decay_start(t, y),
    };
    solve(
        t,
        y,
        sigma,
        Spec {
            model: "y = A exp(-(t/tau)^beta)",
            names: &["A", "tau", "beta"],
            reported: &[Reported::AsIs, Reported::Exp, Reported::Exp],
            start: vec![a0, tau0.ln(), 0.0],
        },
        |t, q, g| {
            let beta = q[2].exp();
            // u = (t/τ)^β = exp(β (ln t − q1)); t = 0 gives u = 0.
            let (u, log_ratio) = if t > 0.0 {
                let lr = t.ln() - q[1];
                ((beta * lr).exp(), lr)
            } else {
                (0.0, 0.0)
            };
            let e = (-u).exp();
            g[0] = e;
            // ∂/∂q1 of A e^{−u}: A e^{−u} u β; ∂/∂q2: −A e^{−u} u β lr.
            g[1] = q[0] * e * u * beta;
            g[2] = -q[0] * e * u * beta * log_ratio;
            q[0] * e
        },
    )
}

/// Points inside `band` (inclusive), as (x, y, σ) vectors.
type Selected = (Vec<f64>, Vec<f64>, Option<Vec<f64>>);

fn select_band(
    x: &[f64],
    y: &[f64],
    sigma: Option<&[f64]>,
    band: Option<(f64, f64)>,
) -> Result<Selected, FitError> {
    let (lo, hi) = match band {
        Some((lo, hi)) => {
            if !(lo.is_finite() && hi.is_finite() && hi > lo) {
                return Err(FitError::Degenerate(format!(
                    "the band [{lo}, {hi}] must have finite edges with lower < upper"
                )));
            }
            (lo, hi)
        }
        None => (f64::NEG_INFINITY, f64::INFINITY),
    };
    let keep: Vec<usize> = (0..x.len()).filter(|&i| x[i] >= lo && x[i] <= hi).collect();
    Ok((
        keep.iter().map(|&i| x[i]).collect(),
        keep.iter().map(|&i| y[i]).collect(),
        sigma.map(|s| keep.iter().map(|&i| s[i]).collect()),
    ))
}

/// σ of `ln y` from σ of `y`.
fn log_sigma(y: &[f64], sigma: Option<&[f64]>) -> Option<Vec<f64>> {
    sigma.map(|s| s.iter().zip(y).map(|(s, y)| s / y).collect())
}

/// Power law `y = A x^α` over `band = (x_min, x_max)` (all points if
/// `None`), fitted as the straight line `ln y = ln A + α ln x`
/// (multiplicative scatter; e.g. a Welch spectrum, whose relative error is
/// the same in every bin). Parameters `A` (units of y per unit x^α) and
/// `alpha`. Needs `x > 0`, `y > 0` in the band and at least 3 points.
pub fn fit_power_law(
    x: &[f64],
    y: &[f64],
    sigma: Option<&[f64]>,
    band: Option<(f64, f64)>,
) -> Result<FitResult, FitError> {
    validate(x, y, sigma)?;
    let (xs, ys, ss) = select_band(x, y, sigma, band)?;
    require_positive("x (log fit)", &xs)?;
    require_positive("y (log fit)", &ys)?;
    if xs.len() < 3 {
        return Err(FitError::TooFewPoints {
            points: xs.len(),
            needed: 3,
        });
    }
    let lx: Vec<f64> = xs.iter().map(|v| v.ln()).collect();
    let ly: Vec<f64> = ys.iter().map(|v| v.ln()).collect();
    let ls = log_sigma(&ys, ss.as_deref());
    let (a, b) = line(&lx, &ly).ok_or_else(|| {
        FitError::Degenerate("all x in the band are equal; no slope can be fitted".into())
    })?;
    solve(
        &lx,
        &ly,
        ls.as_deref(),
        Spec {
            model: "y = A x^alpha (fitted in log-log)",
            names: &["A", "alpha"],
            reported: &[Reported::Exp, Reported::AsIs],
            start: vec![a, b],
        },
        |lx, q, g| {
            g[0] = 1.0;
            g[1] = lx;
            q[0] + q[1] * lx
        },
    )
}

/// Power law with the leading analytic correction to scaling,
/// `y = A x^α (1 + B/x)`, fitted in log space over `band` (common practice
/// in finite-size and growth analyses, e.g. chemical-distance growth
/// N(ℓ) at p_c, where the plain power law converges slowly). Parameters
/// `A`, `alpha`, `B` (units of x). Needs `x > 0`, `y > 0`, ≥ 4 points.
pub fn fit_power_law_with_correction(
    x: &[f64],
    y: &[f64],
    sigma: Option<&[f64]>,
    band: Option<(f64, f64)>,
) -> Result<FitResult, FitError> {
    validate(x, y, sigma)?;
    let (xs, ys, ss) = select_band(x, y, sigma, band)?;
    require_positive("x (log fit)", &xs)?;
    require_positive("y (log fit)", &ys)?;
    if xs.len() < 4 {
        return Err(FitError::TooFewPoints {
            points: xs.len(),
            needed: 4,
        });
    }
    let lx: Vec<f64> = xs.iter().map(|v| v.ln()).collect();
    let ly: Vec<f64> = ys.iter().map(|v| v.ln()).collect();
    let ls = log_sigma(&ys, ss.as_deref());
    let (a, b) = line(&lx, &ly).ok_or_else(|| {
        FitError::Degenerate("all x in the band are equal; no slope can be fitted".into())
    })?;
    solve(
        &xs,
        &ly,
        ls.as_deref(),
        Spec {
            model: "y = A x^alpha (1 + B/x) (fitted in log space)",
            names: &["A", "alpha", "B"],
            reported: &[Reported::Exp, Reported::AsIs, Reported::AsIs],
            start: vec![a, b, 0.0],
        },
        |x, q, g| {
            let c = 1.0 + q[2] / x;
            g[0] = 1.0;
            g[1] = x.ln();
            g[2] = 1.0 / (x * c);
            q[0] + q[1] * x.ln() + c.abs().ln()
        },
    )
}

/// Phenomenological noise spectrum `S(ω) = A τ / (1 + (ωτ)^b)` (b = 2:
/// Lorentzian; physics-reference §6), fitted in log space. `omega`:
/// angular frequencies (rad/s, > 0); parameters `A` (units of S per second),
/// `tau` (s) and `b`.
pub fn fit_noise_spectrum(
    omega: &[f64],
    spectrum: &[f64],
    sigma: Option<&[f64]>,
    band: Option<(f64, f64)>,
) -> Result<FitResult, FitError> {
    validate(omega, spectrum, sigma)?;
    let (xs, ys, ss) = select_band(omega, spectrum, sigma, band)?;
    require_positive("omega (log fit)", &xs)?;
    require_positive("S (log fit)", &ys)?;
    if xs.len() < 4 {
        return Err(FitError::TooFewPoints {
            points: xs.len(),
            needed: 4,
        });
    }
    let ly: Vec<f64> = ys.iter().map(|v| v.ln()).collect();
    let ls = log_sigma(&ys, ss.as_deref());
    // Start: plateau from the lowest frequencies, b from the top quarter's
    // log slope, τ from where S drops to half the plateau.
    let m = xs.len();
    let plateau = ly[0];
    let top = (3 * m / 4).min(m - 2);
    let lx_top: Vec<f64> = xs[top..].iter().map(|v| v.ln()).collect();
    let b0 = line(&lx_top, &ly[top..])
        .map(|(_, s)| (-s).clamp(0.3, 4.0))
        .unwrap_or(2.0);
    let half = ly
        .iter()
        .position(|v| *v < plateau - std::f64::consts::LN_2)
        .unwrap_or(m / 2);
    let tau0 = 1.0 / xs[half];
    solve(
        &xs,
        &ly,
        ls.as_deref(),
        Spec {
            model: "S(omega) = A tau / (1 + (omega tau)^b) (fitted in log space)",
            names: &["A", "tau", "b"],
            reported: &[Reported::Exp, Reported::Exp, Reported::AsIs],
            start: vec![plateau - tau0.ln(), tau0.ln(), b0],
        },
        |omega, q, g| {
            // z = b ln(ωτ); ln(1 + e^z) and its derivative e^z/(1 + e^z)
            // written to stay finite for large |z|.
            let lwt = omega.ln() + q[1];
            let z = q[2] * lwt;
            let (softplus, d) = if z > 0.0 {
                let e = (-z).exp();
                (z + e.ln_1p(), 1.0 / (1.0 + e))
            } else {
                let e = z.exp();
                (e.ln_1p(), e / (1.0 + e))
            };
            g[0] = 1.0;
            g[1] = 1.0 - q[2] * d;
            g[2] = -lwt * d;
            q[0] + q[1] - softplus
        },
    )
}

/// Arrhenius law `τ = τ_∞ e^{Δ/T}` (k_B = 1, Δ in kelvin), fitted as
/// `ln τ = ln τ_∞ + Δ/T`. Parameters `tau_infinity` (units of τ) and
/// `barrier_kelvin`. Needs `T > 0`, `τ > 0`.
pub fn fit_arrhenius(
    temperature_kelvin: &[f64],
    tau: &[f64],
    sigma: Option<&[f64]>,
) -> Result<FitResult, FitError> {
    validate(temperature_kelvin, tau, sigma)?;
    require_positive("temperature (K)", temperature_kelvin)?;
    require_positive("tau (log fit)", tau)?;
    if tau.len() < 3 {
        return Err(FitError::TooFewPoints {
            points: tau.len(),
            needed: 3,
        });
    }
    let inverse: Vec<f64> = temperature_kelvin.iter().map(|t| 1.0 / t).collect();
    let lt: Vec<f64> = tau.iter().map(|v| v.ln()).collect();
    let ls = log_sigma(tau, sigma);
    let (a, b) = line(&inverse, &lt).ok_or_else(|| {
        FitError::Degenerate("all temperatures are equal; no barrier can be fitted".into())
    })?;
    solve(
        &inverse,
        &lt,
        ls.as_deref(),
        Spec {
            model: "tau = tau_infinity exp(barrier/T)",
            names: &["tau_infinity", "barrier_kelvin"],
            reported: &[Reported::Exp, Reported::AsIs],
            start: vec![a, b],
        },
        |inv_t, q, g| {
            g[0] = 1.0;
            g[1] = inv_t;
            q[0] + q[1] * inv_t
        },
    )
}

/// One-parameter scale `measured ≈ scale · reference`, least squares in log
/// space: `ln y_i = ln scale + ln r_i` (e.g. calibrating the attempt time
/// τ0 that maps simulated relaxation times in units of τ0 onto measured
/// ones). `sigma_log`: σ of `ln measured` (relative errors), or `None` for
/// the scatter. Parameter `scale` (units of measured / reference).
pub fn fit_log_scale(
    reference: &[f64],
    measured: &[f64],
    sigma_log: Option<&[f64]>,
) -> Result<FitResult, FitError> {
    validate(reference, measured, sigma_log)?;
    require_positive("reference (log fit)", reference)?;
    require_positive("measured (log fit)", measured)?;
    if measured.len() < 2 {
        return Err(FitError::TooFewPoints {
            points: measured.len(),
            needed: 2,
        });
    }
    let lr: Vec<f64> = reference.iter().map(|v| v.ln()).collect();
    let lm: Vec<f64> = measured.iter().map(|v| v.ln()).collect();
    let start = lm.iter().zip(&lr).map(|(m, r)| m - r).sum::<f64>() / lm.len() as f64;
    solve(
        &lr,
        &lm,
        sigma_log,
        Spec {
            model: "measured = scale * reference (fitted in log space)",
            names: &["scale"],
            reported: &[Reported::Exp],
            start: vec![start],
        },
        |lr, q, g| {
            g[0] = 1.0;
            q[0] + lr
        },
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::spectra::test_series::normals;

    /// |fitted − true| within 3σ for every parameter (the 3σ rule; common practice).
    fn assert_within_3_sigma(fit: &FitResult, truth: &[f64]) {
        assert!(fit.converged, "{fit:?}");
        for ((p, e), t) in fit.parameters.iter().zip(&fit.standard_errors).zip(truth) {
            assert!(e.is_finite() && *e > 0.0, "{fit:?}");
            assert!((p - t).abs() < 3.0 * e, "{}: {p} ± {e} vs {t}", fit.model);
        }
    }

    #[test]
    fn exponential_recovers_parameters_and_honest_errors() {
        // Pulls (fit − truth)/σ over independent noise realisations have unit
        // variance if the covariance is right (least-squares theory, e.g.
        // Press et al., Numerical Recipes 3rd ed. §15.6 (memory)).
        let t: Vec<f64> = (0..60).map(|k| 0.1 * k as f64).collect();
        let (a, tau, noise) = (2.0, 1.3, 0.03);
        let mut pulls = Vec::new();
        for seed in 0..150 {
            let eps = normals(seed, t.len());
            let y: Vec<f64> = t
                .iter()
                .zip(&eps)
                .map(|(t, e)| a * (-t / tau).exp() + noise * e)
                .collect();
            let fit = fit_exponential(&t, &y, None).unwrap();
            if seed == 0 {
                assert_within_3_sigma(&fit, &[a, tau]);
                assert_eq!(fit.degrees_of_freedom, 58);
                assert!((fit.reduced_chi_squared / (noise * noise) - 1.0).abs() < 0.5);
            }
            pulls.push((fit.parameters[1] - tau) / fit.standard_errors[1]);
        }
        let n = pulls.len() as f64;
        let mean = pulls.iter().sum::<f64>() / n;
        let var = pulls.iter().map(|p| (p - mean).powi(2)).sum::<f64>() / (n - 1.0);
        assert!(mean.abs() < 0.3, "mean pull {mean}");
        assert!((var.sqrt() - 1.0).abs() < 0.2, "pull s.d. {}", var.sqrt());
    }

    #[test]
    fn stretched_exponential_with_given_sigma() {
        let t: Vec<f64> = (0..80).map(|k| 0.05 * k as f64).collect();
        let (a, tau, beta) = (1.0, 0.7, 0.6);
        let eps = normals(99, t.len());
        let sigma = vec![0.01; t.len()];
        let y: Vec<f64> = t
            .iter()
            .zip(&eps)
            .map(|(t, e)| a * (-(t / tau).powf(beta)).exp() + 0.01 * e)
            .collect();
        let fit = fit_stretched_exponential(&t, &y, Some(&sigma)).unwrap();
        assert!(fit.absolute_sigma);
        assert_within_3_sigma(&fit, &[a, tau, beta]);
        // χ²/dof ≈ 1 ± √(2/dof) for correct σ (χ² distribution).
        assert!((fit.reduced_chi_squared - 1.0).abs() < 4.0 * (2.0 / 77.0f64).sqrt());
    }

    #[test]
    fn power_law_in_a_band() {
        // y = 3 f^−1.5 × lognormal(5 %) inside [1, 100]; outside the band the
        // data follow another law, which must not bias the fit.
        let f: Vec<f64> = (0..200).map(|k| 0.1 * 1.04f64.powi(k)).collect();
        let eps = normals(5, f.len());
        let y: Vec<f64> = f
            .iter()
            .zip(&eps)
            .map(|(f, e)| {
                let law = if *f < 1.0 { 3.0 } else { 3.0 * f.powf(-1.5) };
                law * (0.05 * e).exp()
            })
            .collect();
        let fit = fit_power_law(&f, &y, None, Some((1.0, 100.0))).unwrap();
        assert_within_3_sigma(&fit, &[3.0, -1.5]);
        let all = fit_power_law(&f, &y, None, None).unwrap();
        assert!((all.parameters[1] + 1.5).abs() > 10.0 * all.standard_errors[1]);
    }

    #[test]
    fn power_law_with_correction_recovers_its_parameters() {
        let x: Vec<f64> = (2..60).map(f64::from).collect();
        let eps = normals(31, x.len());
        let y: Vec<f64> = x
            .iter()
            .zip(&eps)
            .map(|(x, e)| 0.6 * x.powf(1.8) * (1.0 + 3.0 / x) * (0.01 * e).exp())
            .collect();
        let fit = fit_power_law_with_correction(&x, &y, None, None).unwrap();
        assert_within_3_sigma(&fit, &[0.6, 1.8, 3.0]);
    }

    #[test]
    fn noise_spectrum_form() {
        let omega: Vec<f64> = (0..120).map(|k| 1.0 * 1.08f64.powi(k)).collect();
        let (a, tau, b) = (5.0, 0.02, 1.5);
        let eps = normals(8, omega.len());
        let s: Vec<f64> = omega
            .iter()
            .zip(&eps)
            .map(|(w, e)| a * tau / (1.0 + (w * tau).powf(b)) * (0.04 * e).exp())
            .collect();
        let fit = fit_noise_spectrum(&omega, &s, None, None).unwrap();
        assert_within_3_sigma(&fit, &[a, tau, b]);
    }

    #[test]
    fn arrhenius_and_scale_fits() {
        let temps: Vec<f64> = (0..12).map(|k| 0.4 + 0.05 * k as f64).collect();
        let (tau_inf, barrier) = (1e-4, 4.5);
        let eps = normals(21, temps.len());
        let rel = 0.05;
        let tau: Vec<f64> = temps
            .iter()
            .zip(&eps)
            .map(|(t, e)| tau_inf * (barrier / t).exp() * (rel * e).exp())
            .collect();
        let sigma: Vec<f64> = tau.iter().map(|t| rel * t).collect();
        let fit = fit_arrhenius(&temps, &tau, Some(&sigma)).unwrap();
        assert_within_3_sigma(&fit, &[tau_inf, barrier]);

        // Scale: measured = τ0 × simulated, τ0 = 3.2e-6 s.
        let simulated: Vec<f64> = temps.iter().map(|t| (barrier / t).exp()).collect();
        let measured: Vec<f64> = simulated.iter().map(|s| 3.2e-6 * s).collect();
        let noisy: Vec<f64> = measured
            .iter()
            .zip(&eps)
            .map(|(m, e)| m * (rel * e).exp())
            .collect();
        let fit = fit_log_scale(&simulated, &noisy, Some(&vec![rel; temps.len()])).unwrap();
        assert_within_3_sigma(&fit, &[3.2e-6]);
        // Error of the mean of 12 log residuals: τ0 · rel/√12 (derived).
        let expected = 3.2e-6 * rel / 12f64.sqrt();
        assert!((fit.standard_errors[0] / expected - 1.0).abs() < 0.05);
        let exact = fit_log_scale(&simulated, &measured, None).unwrap();
        assert!((exact.parameters[0] / 3.2e-6 - 1.0).abs() < 1e-12);
    }

    #[test]
    fn bad_input_is_an_error() {
        let t = [0.0, 1.0, 2.0, 3.0];
        assert!(matches!(
            fit_exponential(&t[..2], &[1.0, 0.5], None),
            Err(FitError::TooFewPoints { .. })
        ));
        assert!(matches!(
            fit_exponential(&t, &[1.0, f64::NAN, 0.3, 0.1], None),
            Err(FitError::NonFinite { index: 1, .. })
        ));
        assert!(matches!(
            fit_power_law(&[1.0, 2.0, 3.0], &[1.0, -2.0, 3.0], None, None),
            Err(FitError::NonPositive { index: 1, .. })
        ));
        assert!(matches!(
            fit_arrhenius(&[1.0, 2.0], &[1.0, 2.0, 3.0], None),
            Err(FitError::LengthMismatch { .. })
        ));
        assert!(matches!(
            fit_power_law(&[1.0, 2.0, 3.0], &[1.0, 2.0, 3.0], None, Some((5.0, 9.0))),
            Err(FitError::TooFewPoints { points: 0, .. })
        ));
        assert!(fit_exponential(&t, &[1.0, 0.5, 0.2, 0.1], Some(&[0.1, 0.0, 0.1, 0.1])).is_err());
        assert!(fit_arrhenius(&[1.0, 1.0, 1.0], &[1.0, 2.0, 3.0], None).is_err());
    }
}
