//! Running the measured data: `import` and `calibrate` commands.

use icefield_stdlib::figure::{render_svg, Axis, AxisScale, LinePlot, Series, SeriesStyle};
use icefield_stdlib::fit::fit_log_scale;

use super::{column, error_at, Runner};
use crate::ast::Span;
use crate::check::data::{
    convert_value, convert_values, measured_table, measured_tau_factor, read_measured,
    simulated_tau_factor, unit_text, CalibrateSpec, DataSpec, ImportSpec,
};
use crate::diagnostic::{CellError, ErrorKind};
use crate::display::{self, format_with_error, header};
use crate::units::format_number;
use crate::workspace::{Column, Figure, FigureSeries, Model, Table, Value};
use crate::Output;

impl Runner<'_> {
    pub(super) fn run_data(
        &mut self,
        spec: &DataSpec,
        model: &Model,
        span: Span,
        keyword: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let _ = (model, keyword);
        match spec {
            DataSpec::Import(spec) => self.import(spec, span, emit),
            DataSpec::Calibrate(spec) => self.calibrate(spec, span, emit),
        }
    }

    fn import(
        &mut self,
        spec: &ImportSpec,
        span: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let file = read_measured(&spec.path, spec.format)
            .map_err(|e| error_at(self.source, e.kind, span, e.message))?;
        let table = measured_table(&spec.target, &spec.path, &file, &spec.error_columns)
            .map_err(|e| error_at(self.source, e.kind, span, e.message))?;
        for note in &file.notes {
            emit(Output::Stream {
                text: format!("note: {note}\n"),
            });
        }
        let columns: Vec<String> = table
            .columns
            .iter()
            .map(|c| {
                let mut text = header(&c.name, &c.unit);
                if c.errors.is_some() {
                    text.push_str(" ± error");
                }
                text
            })
            .collect();
        emit(Output::Stream {
            text: format!(
                "{}: {} rows from {} ({}); columns {}{}\n",
                spec.target,
                table.row_count(),
                spec.path,
                match file.format {
                    crate::check::data::TableFormat::Csv => "CSV",
                    crate::check::data::TableFormat::Whitespace => "whitespace-separated",
                },
                columns.join(", "),
                if table.provenance.is_some() {
                    "; provenance of the icefield export restored"
                } else {
                    ""
                }
            ),
        });
        self.workspace.insert(&spec.target, Value::Table(table));
        Ok(())
    }

    fn calibrate(
        &mut self,
        spec: &CalibrateSpec,
        span: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let fail = |kind: ErrorKind, message: String| error_at(self.source, kind, span, message);
        let table = |name: &str| {
            self.workspace
                .table(name)
                .ok_or_else(|| fail(ErrorKind::Name, format!("no table `{name}`")))
        };
        let column_of = |t: &'_ Table, name: &str| -> Result<Column, CellError> {
            t.column(name).cloned().ok_or_else(|| {
                fail(
                    ErrorKind::Name,
                    format!("table `{}` has no column `{name}`", t.name),
                )
            })
        };
        let sim_table = table(&spec.simulated.0)?;
        let lab_table = table(&spec.measured.0)?;
        let sim_x = column_of(sim_table, &spec.x_column)?;
        let sim_tau = column_of(sim_table, &spec.simulated.1)?;
        let lab_x = column_of(lab_table, &spec.x_column)?;
        let lab_tau = column_of(lab_table, &spec.measured.1)?;
        let provenance = sim_table.provenance.clone().map(|mut p| {
            p.source = format!(
                "τ0 calibration of {}.{} to {}.{} ({})",
                spec.simulated.0, spec.simulated.1, spec.measured.0, spec.measured.1, p.source
            );
            p.cell = self.cell;
            p
        });
        let sim_factor = simulated_tau_factor(&sim_tau.unit, spec.stated_tau0_seconds)
            .map_err(|m| fail(ErrorKind::Unit, m))?;
        let lab_factor =
            measured_tau_factor(&lab_tau.unit).map_err(|m| fail(ErrorKind::Unit, m))?;
        let x_unit = sim_x.unit.clone();
        let lab_xs = convert_values(&lab_x.values, &lab_x.unit, &x_unit).ok_or_else(|| {
            fail(
                ErrorKind::Unit,
                format!(
                    "`{}.{}` is in {} but `{}.{}` is in {}: they cannot be compared",
                    spec.simulated.0,
                    spec.x_column,
                    unit_text(&x_unit),
                    spec.measured.0,
                    spec.x_column,
                    unit_text(&lab_x.unit)
                ),
            )
        })?;
        let at = |x: f64| crate::units::with_unit(x, &x_unit);

        // The simulated curve: ln τ (in units of τ0) against x, sorted, each x once.
        let mut curve: Vec<(f64, f64, f64)> = Vec::with_capacity(sim_x.values.len());
        for (row, (&x, &tau)) in sim_x.values.iter().zip(&sim_tau.values).enumerate() {
            let tau_units = tau * sim_factor;
            if !(x.is_finite() && tau_units.is_finite() && tau_units > 0.0) {
                return Err(fail(
                    ErrorKind::Value,
                    format!(
                        "{}.{} row {} ({} = {}) is {}: the calibration works in ln τ and needs \
                         positive, finite times",
                        spec.simulated.0,
                        spec.simulated.1,
                        row + 1,
                        spec.x_column,
                        at(x),
                        format_number(tau)
                    ),
                ));
            }
            let sigma_ln = sim_tau
                .errors
                .as_ref()
                .and_then(|e| e.get(row))
                .map_or(0.0, |e| e / tau);
            curve.push((x, tau_units.ln(), sigma_ln));
        }
        curve.sort_by(|a, b| a.0.total_cmp(&b.0));
        if let Some(pair) = curve.windows(2).find(|w| w[0].0 == w[1].0) {
            return Err(fail(
                ErrorKind::Value,
                format!(
                    "{} has two rows at {} = {}; interpolation needs each {} once",
                    spec.simulated.0,
                    spec.x_column,
                    at(pair[0].0),
                    spec.x_column
                ),
            ));
        }
        if curve.len() < 2 {
            return Err(fail(
                ErrorKind::Value,
                format!(
                    "{} has {} row(s); interpolating the simulated τ needs at least 2",
                    spec.simulated.0,
                    curve.len()
                ),
            ));
        }
        let (lo, hi) = (curve[0].0, curve[curve.len() - 1].0);

        // The measured points inside the range, in seconds.
        let range = match &spec.range {
            Some([(a, ua), (b, ub)]) => {
                let convert = |v: f64, u: &str| {
                    convert_value(v, u, &x_unit).ok_or_else(|| {
                        fail(
                            ErrorKind::Unit,
                            format!(
                                "`range` is in {} but {} is in {}",
                                unit_text(u),
                                spec.x_column,
                                unit_text(&x_unit)
                            ),
                        )
                    })
                };
                Some((convert(*a, ua)?, convert(*b, ub)?))
            }
            None => None,
        };
        let mut points: Vec<(f64, f64, Option<f64>)> = Vec::new();
        for (row, (&x, &tau)) in lab_xs.iter().zip(&lab_tau.values).enumerate() {
            if range.is_some_and(|(a, b)| !(a..=b).contains(&x)) {
                continue;
            }
            let seconds = tau * lab_factor;
            if !(x.is_finite() && seconds.is_finite() && seconds > 0.0) {
                return Err(fail(
                    ErrorKind::Value,
                    format!(
                        "{}.{} row {} ({} = {}) is {}: the calibration works in ln τ and needs \
                         positive, finite times",
                        spec.measured.0,
                        spec.measured.1,
                        row + 1,
                        spec.x_column,
                        at(x),
                        format_number(tau)
                    ),
                ));
            }
            let error = lab_tau
                .errors
                .as_ref()
                .and_then(|e| e.get(row))
                .map(|e| e * lab_factor);
            points.push((x, seconds, error));
        }
        let outside: Vec<String> = points
            .iter()
            .filter(|p| p.0 < lo || p.0 > hi)
            .map(|p| at(p.0))
            .collect();
        if !outside.is_empty() {
            return Err(fail(
                ErrorKind::Value,
                format!(
                    "measured {} = {} lie outside the simulated range {} … {}; calibrate \
                     interpolates and does not extrapolate: simulate a wider range or keep \
                     the measured points inside it with `range = [{}, {}] {}`",
                    spec.x_column,
                    outside.join(", "),
                    at(lo),
                    at(hi),
                    format_number(lo),
                    format_number(hi),
                    x_unit
                ),
            ));
        }
        if points.len() < 2 {
            return Err(fail(
                ErrorKind::Value,
                format!(
                    "{} measured point(s) to fit; fitting τ0 with an error needs at least 2",
                    points.len()
                ),
            ));
        }

        // Interpolate ln τ_sim (and its σ) linearly in x at each measured x; fit
        // ln τ_lab = ln τ0 + ln τ_sim by least squares (stdlib::fit::fit_log_scale).
        let curve_x: Vec<f64> = curve.iter().map(|c| c.0).collect();
        let curve_ln: Vec<f64> = curve.iter().map(|c| c.1).collect();
        let curve_sigma: Vec<f64> = curve.iter().map(|c| c.2).collect();
        let reference: Vec<f64> = points
            .iter()
            .map(|p| interpolate(&curve_x, &curve_ln, p.0).exp())
            .collect();
        let measured: Vec<f64> = points.iter().map(|p| p.1).collect();
        let sim_has_errors = sim_tau.errors.is_some();
        let lab_has_errors = lab_tau.errors.is_some();
        let sigma_log: Option<Vec<f64>> = (sim_has_errors || lab_has_errors).then(|| {
            points
                .iter()
                .map(|p| {
                    let lab = p.2.map_or(0.0, |e| e / p.1);
                    let sim = interpolate(&curve_x, &curve_sigma, p.0);
                    (lab * lab + sim * sim).sqrt()
                })
                .collect()
        });
        let sigma_log = match sigma_log {
            Some(s) if s.iter().all(|v| v.is_finite() && *v > 0.0) => Some(s),
            Some(_) => {
                emit(Output::Stream {
                    text: "note: some error bars are zero or missing; τ0 is weighted equally \
                           and its error comes from the scatter\n"
                        .to_string(),
                });
                None
            }
            None => None,
        };
        let fit = fit_log_scale(&reference, &measured, sigma_log.as_deref())
            .map_err(|e| fail(ErrorKind::Runtime, format!("the τ0 fit failed: {e}")))?;
        let Some((tau0, tau0_error)) = fit.parameter("scale") else {
            return Err(fail(
                ErrorKind::Runtime,
                "the τ0 fit returned no scale".into(),
            ));
        };

        // Results: τ0 as a one-row table, the residual table, the figure.
        let calibrated: Vec<f64> = reference.iter().map(|r| tau0 * r).collect();
        let residual: Vec<f64> = measured
            .iter()
            .zip(&calibrated)
            .map(|(m, c)| (m / c).ln())
            .collect();
        let result = Table {
            name: spec.target.clone(),
            columns: vec![
                column("tau0", "s", vec![tau0], Some(vec![tau0_error])),
                column(
                    "reduced_chi_squared",
                    "",
                    vec![fit.reduced_chi_squared],
                    None,
                ),
                column("points", "", vec![points.len() as f64], None),
            ],
            provenance: provenance.clone(),
        };
        let residuals_name = format!("{}_residuals", spec.target);
        let residuals = Table {
            name: residuals_name.clone(),
            columns: vec![
                column(
                    &spec.x_column,
                    &x_unit,
                    points.iter().map(|p| p.0).collect(),
                    None,
                ),
                column(
                    "measured",
                    "s",
                    measured.clone(),
                    lab_has_errors.then(|| points.iter().map(|p| p.2.unwrap_or(0.0)).collect()),
                ),
                column("calibrated", "s", calibrated, None),
                column("residual", "", residual, None),
            ],
            provenance,
        };
        let sim_label = format!("{}.{} × τ0", spec.simulated.0, spec.simulated.1);
        let lab_label = format!("{}.{}", spec.measured.0, spec.measured.1);
        let figure_series = vec![
            FigureSeries {
                label: sim_label,
                x: curve_x.clone(),
                y: curve_ln.iter().map(|l| tau0 * l.exp()).collect(),
                y_error: None,
            },
            FigureSeries {
                label: lab_label,
                x: points.iter().map(|p| p.0).collect(),
                y: measured,
                y_error: lab_has_errors
                    .then(|| points.iter().map(|p| p.2.unwrap_or(0.0)).collect()),
            },
        ];
        let title = format!(
            "τ0 = {} s: {} against {}",
            format_with_error(tau0, tau0_error),
            spec.simulated.0,
            spec.measured.0
        );
        let plot = LinePlot {
            title: title.clone(),
            x: Axis {
                label: spec.x_column.clone(),
                unit: (!x_unit.is_empty()).then(|| x_unit.clone()),
                scale: AxisScale::Linear,
            },
            y: Axis::log("tau", Some("s")),
            series: figure_series
                .iter()
                .zip([SeriesStyle::Line, SeriesStyle::Points])
                .map(|(s, style)| Series {
                    label: s.label.clone(),
                    x: s.x.clone(),
                    y: s.y.clone(),
                    y_error: s.y_error.clone(),
                    style,
                })
                .collect(),
        };
        let svg = render_svg(&plot, 640, 400).map_err(|e| {
            fail(
                ErrorKind::Runtime,
                format!("cannot draw the calibration: {e}"),
            )
        })?;
        let figure_name = format!("{}_plot", spec.target);
        let figure = Figure {
            name: figure_name.clone(),
            title,
            x_label: spec.x_column.clone(),
            x_unit,
            y_label: "tau".to_string(),
            y_unit: "s".to_string(),
            series: figure_series,
            svg,
        };
        emit(Output::Stream {
            text: format!(
                "{}: τ0 = {} s from {} measured points (χ²/dof = {}, errors {}); residuals in \
                 `{residuals_name}`, figure `{figure_name}`\n",
                spec.target,
                format_with_error(tau0, tau0_error),
                points.len(),
                format_number(fit.reduced_chi_squared),
                if fit.absolute_sigma {
                    "from the error bars"
                } else {
                    "from the scatter"
                }
            ),
        });
        emit(Output::Display(display::table(&residuals, None)));
        emit(Output::Display(display::figure(&figure)));
        self.workspace.insert(&spec.target, Value::Table(result));
        self.workspace
            .insert(&residuals_name, Value::Table(residuals));
        self.workspace.insert(&figure_name, Value::Figure(figure));
        Ok(())
    }
}

/// Linear interpolation of `ys` at `x` on the ascending grid `xs` (x inside the grid).
fn interpolate(xs: &[f64], ys: &[f64], x: f64) -> f64 {
    let upper = xs.partition_point(|&v| v < x).clamp(1, xs.len() - 1);
    let (x0, x1) = (xs[upper - 1], xs[upper]);
    let (y0, y1) = (ys[upper - 1], ys[upper]);
    if x == x1 {
        return y1;
    }
    y0 + (y1 - y0) * (x - x0) / (x1 - x0)
}

#[cfg(test)]
mod tests {
    use super::interpolate;

    #[test]
    fn interpolation_is_exact_on_lines_and_at_nodes() {
        // A straight line is reproduced exactly by linear interpolation (derived).
        let xs = [0.5, 1.0, 2.0, 4.0];
        let ys: Vec<f64> = xs.iter().map(|x| 3.0 * x - 1.0).collect();
        assert_eq!(interpolate(&xs, &ys, 0.5), ys[0]);
        assert_eq!(interpolate(&xs, &ys, 4.0), ys[3]);
        assert_eq!(interpolate(&xs, &ys, 2.0), ys[2]);
        assert!((interpolate(&xs, &ys, 3.0) - 8.0).abs() < 1e-12);
    }
}
