//! Log–log figures of data with fitted power laws, the exponents in the
//! legend (for S(f) ∝ f^α bands, N(ℓ) ∝ ℓ^{d_ℓ}, MSD ∝ t^{2/d_w}).
//!
//! Builds a plain [`LinePlot`] (serde), so the language layer can show,
//! store or amend it and draw it with [`crate::figure::render_svg`].

use crate::figure::{Axis, AxisScale, LinePlot, Series, SeriesStyle};
use crate::fit::{FitError, FitResult};
use serde::{Deserialize, Serialize};

/// A fitted power law to draw over `x_range` (the fit band).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct FittedPowerLaw {
    /// Legend text before the exponent, e.g. "gated rates".
    pub label: String,
    /// Result of [`crate::fit::fit_power_law`] or
    /// [`crate::fit::fit_power_law_with_correction`].
    pub fit: FitResult,
    /// Range of x over which to draw the line (> 0).
    pub x_range: (f64, f64),
}

/// Points drawn per fitted line (evenly in log x).
const LINE_POINTS: usize = 48;

/// `y(x)` of a power-law fit result (parameters A, alpha and optionally B).
fn evaluate(fit: &FitResult, x: f64) -> Result<f64, FitError> {
    let (a, _) = fit.parameter("A").ok_or_else(not_power_law)?;
    let (alpha, _) = fit.parameter("alpha").ok_or_else(not_power_law)?;
    let correction = fit.parameter("B").map_or(1.0, |(b, _)| 1.0 + b / x);
    Ok(a * x.powf(alpha) * correction)
}

fn not_power_law() -> FitError {
    FitError::Degenerate("only power-law fits (parameters A and alpha) can be drawn here".into())
}

/// A log–log plot of `data` (drawn as given) plus one line per fit, whose
/// legend reads "label: α = value ± error". Both axes are set to log.
pub fn log_log_with_fits(
    title: &str,
    x: Axis,
    y: Axis,
    data: Vec<Series>,
    fits: &[FittedPowerLaw],
) -> Result<LinePlot, FitError> {
    let mut series = data;
    for f in fits {
        let (lo, hi) = f.x_range;
        if !(lo > 0.0 && hi > lo && hi.is_finite()) {
            return Err(FitError::Degenerate(format!(
                "the line of '{}' needs 0 < x_min < x_max (got {lo}, {hi})",
                f.label
            )));
        }
        let (alpha, error) = f.fit.parameter("alpha").ok_or_else(not_power_law)?;
        let ratio = (hi / lo).ln() / (LINE_POINTS - 1) as f64;
        let xs: Vec<f64> = (0..LINE_POINTS)
            .map(|k| lo * (ratio * k as f64).exp())
            .collect();
        let ys = xs
            .iter()
            .map(|&x| evaluate(&f.fit, x))
            .collect::<Result<Vec<f64>, FitError>>()?;
        series.push(Series {
            label: format!("{}: α = {alpha:.3} ± {error:.3}", f.label),
            x: xs,
            y: ys,
            y_error: None,
            style: SeriesStyle::Line,
        });
    }
    Ok(LinePlot {
        title: title.to_string(),
        x: Axis {
            scale: AxisScale::Log,
            ..x
        },
        y: Axis {
            scale: AxisScale::Log,
            ..y
        },
        series,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::figure::render_svg;
    use crate::fit::{fit_exponential, fit_power_law};

    #[test]
    fn fitted_line_follows_the_fit_and_the_legend_shows_the_exponent() {
        // Exact power law y = 2 x^−1.5: the fit reproduces it to rounding.
        let x: Vec<f64> = (1..40).map(|k| k as f64 * 0.5).collect();
        let y: Vec<f64> = x
            .iter()
            .enumerate()
            .map(|(k, x)| 2.0 * x.powf(-1.5) * (1.0 + 1e-3 * ((k % 3) as f64 - 1.0)))
            .collect();
        let fit = fit_power_law(&x, &y, None, None).unwrap();
        let data = Series {
            label: "simulated".into(),
            x: x.clone(),
            y: y.clone(),
            y_error: None,
            style: SeriesStyle::Points,
        };
        let plot = log_log_with_fits(
            "noise",
            Axis::linear("f", Some("Hz")),
            Axis::linear("S", Some("1/Hz")),
            vec![data],
            &[FittedPowerLaw {
                label: "fit".into(),
                fit,
                x_range: (1.0, 10.0),
            }],
        )
        .unwrap();
        assert_eq!(plot.x.scale, AxisScale::Log);
        let line = &plot.series[1];
        assert!(
            line.label.starts_with("fit: α = -1.500 ± 0.00"),
            "{}",
            line.label
        );
        for (x, y) in line.x.iter().zip(&line.y) {
            assert!((y / (2.0 * x.powf(-1.5)) - 1.0).abs() < 2e-3);
        }
        let svg = render_svg(&plot, 640, 480).unwrap();
        assert!(svg.contains("α = -1.500"));
    }

    #[test]
    fn other_fits_and_bad_ranges_are_refused() {
        let t = [0.0, 1.0, 2.0, 3.0, 4.0];
        let y = [1.0, 0.6, 0.37, 0.22, 0.14];
        let fit = fit_exponential(&t, &y, None).unwrap();
        let attempt = |fit: FitResult, x_range| {
            log_log_with_fits(
                "",
                Axis::log("t", None),
                Axis::log("y", None),
                vec![],
                &[FittedPowerLaw {
                    label: "x".into(),
                    fit,
                    x_range,
                }],
            )
        };
        assert!(attempt(fit.clone(), (1.0, 2.0)).is_err());
        let power = fit_power_law(&[1.0, 2.0, 3.0], &[1.0, 4.0, 9.1], None, None).unwrap();
        assert!(attempt(power.clone(), (0.0, 2.0)).is_err());
        assert!(attempt(power, (1.0, 2.0)).is_ok());
    }
}
