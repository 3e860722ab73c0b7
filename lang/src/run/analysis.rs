//! Running the time-series analysis and fits: spectra, autocorrelation, susceptibility, `fit` commands.
//!
//! Every command reads a column against its axis from the workspace, checks what needs
//! the numbers (a uniform grid, enough samples, a band inside the data), calls
//! `stdlib::spectra` or `stdlib::fit`, and stores a table, a figure (`NAME_figure`) and,
//! for the relaxation analyses, a one-row table of times (`NAME_tau`).

use std::f64::consts::PI;
use std::panic::{catch_unwind, AssertUnwindSafe};

use icefield_stdlib::figure::{render_svg, Axis, AxisScale, LinePlot, Series, SeriesStyle};
use icefield_stdlib::fit::{
    fit_arrhenius, fit_exponential, fit_noise_spectrum, fit_power_law, fit_stretched_exponential,
    FitResult,
};
use icefield_stdlib::spectra::{
    autocorrelation_fft, autocovariance_fft, dynamic_susceptibility,
    integrated_autocorrelation_time_fft, log_spaced_frequencies, relaxation_time_from_peak,
    welch_psd, Detrend, Normalisation, SpectraError, WelchSettings, Window,
};

use super::{column, error_at, Runner};
use crate::ast::Span;
use crate::check::analysis::{
    parameter_units, squared_unit_per, AnalysisSpec, AutocorrelationSpec, Band, FitModel, FitSpec,
    SeriesRef, SpectrumSpec, SusceptibilitySpec, FIGURE_SUFFIX, TAU_SUFFIX,
};
use crate::diagnostic::{CellError, ErrorKind};
use crate::display::{self, format_with_error};
use crate::units::{format_number, with_unit};
use crate::workspace::{Figure, FigureSeries, Model, Provenance, Table, Value};
use crate::Output;

/// Relative tolerance of a uniform grid: a step may differ from the mean step by this
/// fraction (rounding of `t = k Δt` stays far below it for any series that fits memory).
pub const GRID_TOLERANCE: f64 = 1e-6;
/// Fewest samples a spectrum or an autocorrelation accepts.
pub const MIN_SAMPLES: usize = 16;
/// The default Welch segment is the largest power of two with at least this many
/// segments (half overlap) in the series, capped at `MAX_DEFAULT_SEGMENT`.
pub const DEFAULT_SEGMENTS: usize = 8;
pub const MAX_DEFAULT_SEGMENT: usize = 4096;
/// The default largest lag, in integrated relaxation times (C has decayed to e^{−20}
/// for an exponential; common practice is "many τ").
pub const DEFAULT_LAG_TAUS: f64 = 20.0;
const FIGURE_WIDTH: u32 = 640;
const FIGURE_HEIGHT: u32 = 400;

/// A series read from the workspace: values, the axis in base units, the step.
struct Sampled {
    y: Vec<f64>,
    y_errors: Option<Vec<f64>>,
    x: Vec<f64>,
    provenance: Option<Provenance>,
}

impl Runner<'_> {
    pub(super) fn run_analysis(
        &mut self,
        spec: &AnalysisSpec,
        model: &Model,
        span: Span,
        keyword: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let _ = (model, span);
        let _ = keyword;
        match spec {
            AnalysisSpec::Spectrum(s) => self.spectrum(s, emit),
            AnalysisSpec::Autocorrelation(s) => self.autocorrelation(s, emit),
            AnalysisSpec::Susceptibility(s) => self.susceptibility(s, emit),
            AnalysisSpec::Fit(s) => self.fit(s, emit),
        }
    }

    fn fail(&self, kind: ErrorKind, span: Span, message: impl Into<String>) -> CellError {
        error_at(self.source, kind, span, message)
    }

    /// The column and its axis (converted to the axis's base unit).
    fn read(&self, series: &SeriesRef) -> Result<Sampled, CellError> {
        let table = self.workspace.table(&series.table).ok_or_else(|| {
            self.fail(
                ErrorKind::Name,
                series.span,
                format!("no table `{}`", series.table),
            )
        })?;
        let (Some(y), Some(x)) = (table.column(&series.column), table.column(&series.x_column))
        else {
            return Err(self.fail(
                ErrorKind::Name,
                series.span,
                format!(
                    "`{}` has no columns `{}` and `{}`",
                    series.table, series.column, series.x_column
                ),
            ));
        };
        Ok(Sampled {
            y: y.values.clone(),
            y_errors: y.errors.clone(),
            x: x.values.iter().map(|v| series.x_unit.to_base(*v)).collect(),
            provenance: table.provenance.clone(),
        })
    }

    /// The step of a uniform, increasing grid, or a ValueError naming the first bad row.
    fn uniform_step(&self, series: &SeriesRef, data: &Sampled) -> Result<f64, CellError> {
        let n = data.x.len();
        if n < MIN_SAMPLES {
            return Err(self.fail(
                ErrorKind::Value,
                series.span,
                format!(
                    "`{}` has {n} rows; a spectral analysis needs at least {MIN_SAMPLES}",
                    series.label()
                ),
            ));
        }
        let unit = series.x_unit.base_unit();
        if let Some(row) = data.x.iter().position(|v| !v.is_finite()) {
            return Err(self.fail(
                ErrorKind::Value,
                series.x_span,
                format!("`{}` is not a number at row {}", series.x_label(), row + 1),
            ));
        }
        let step = (data.x[n - 1] - data.x[0]) / (n - 1) as f64;
        if step.is_nan() || step <= 0.0 {
            return Err(self.fail(
                ErrorKind::Value,
                series.x_span,
                format!(
                    "`{}` does not increase: a spectral analysis needs a uniform, increasing grid",
                    series.x_label()
                ),
            ));
        }
        for k in 1..n {
            let d = data.x[k] - data.x[k - 1];
            if (d - step).abs() > GRID_TOLERANCE * step {
                return Err(self.fail(
                    ErrorKind::Value,
                    series.x_span,
                    format!(
                        "`{}` is not a uniform grid: row {} is at {}, {} after row {}, but the mean step is {}",
                        series.x_label(),
                        k + 1,
                        with_unit(data.x[k], &unit),
                        with_unit(d, &unit),
                        k,
                        with_unit(step, &unit)
                    ),
                ));
            }
        }
        if let Some(row) = data.y.iter().position(|v| !v.is_finite()) {
            return Err(self.fail(
                ErrorKind::Value,
                series.span,
                format!("`{}` is not a number at row {}", series.label(), row + 1),
            ));
        }
        Ok(step)
    }

    fn spectra_error(&self, span: Span, error: SpectraError) -> CellError {
        // Every spectral failure is a property of the data or the settings.
        self.fail(ErrorKind::Value, span, error.to_string())
    }

    fn spectrum(
        &mut self,
        spec: &SpectrumSpec,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let series = &spec.series;
        let data = self.read(series)?;
        let dt = self.uniform_step(series, &data)?;
        let n = data.y.len();
        let segment = match spec.segment {
            Some((segment, span)) => {
                if segment > n {
                    return Err(self.fail(
                        ErrorKind::Value,
                        span,
                        format!(
                            "a segment of {segment} samples is longer than `{}` ({n} samples)",
                            series.label()
                        ),
                    ));
                }
                segment
            }
            None => default_segment(n),
        };
        let overlap = ((spec.overlap_fraction * segment as f64).round() as usize).min(segment - 1);
        let settings = WelchSettings {
            sample_rate_hertz: 1.0 / dt,
            segment_length: segment,
            overlap,
            window: spec.window,
            detrend: spec.detrend,
        };
        let spectrum =
            welch_psd(&data.y, &settings).map_err(|e| self.spectra_error(series.span, e))?;
        let psd_unit = squared_unit_per(&series.unit, "Hz");
        let source = format!(
            "Welch spectrum of {} ({} segments of {segment} samples, {} overlap, {} window, {} detrend)",
            series.label(),
            spectrum.segments,
            overlap,
            window_name(spec.window),
            detrend_name(spec.detrend)
        );
        let table = Table {
            name: spec.target.clone(),
            columns: vec![
                column("f", "Hz", spectrum.frequencies_hertz.clone(), None),
                column("psd", &psd_unit, spectrum.density_per_hertz.clone(), None),
            ],
            provenance: derived_provenance(&data.provenance, &source),
        };
        self.workspace.insert(&spec.target, Value::Table(table));
        let (fx, fy): (Vec<f64>, Vec<f64>) = spectrum
            .frequencies_hertz
            .iter()
            .zip(&spectrum.density_per_hertz)
            .filter(|(f, s)| **f > 0.0 && **s > 0.0)
            .map(|(f, s)| (*f, *s))
            .unzip();
        let figure = self.figure(
            &spec.target,
            &format!("power spectral density of {}", series.label()),
            ("f", "Hz", AxisScale::Log),
            ("psd", &psd_unit, AxisScale::Log),
            vec![data_series(
                &series.label(),
                fx,
                fy,
                None,
                SeriesStyle::Line,
            )],
            series.span,
        )?;
        emit(Output::Display(display::figure(&figure)));
        let variance = variance(&data.y);
        emit(Output::Stream {
            text: format!(
                "{name}: {source}\n  {bins} frequencies from 0 to {nyquist} (Δf = {df}); \
                 ∫ psd df = {integral} (variance of {label}: {variance})\n  \
                 columns: f [Hz], psd [{psd_unit}]; figure `{name}{FIGURE_SUFFIX}`\n",
                name = spec.target,
                bins = spectrum.frequencies_hertz.len(),
                nyquist = with_unit(0.5 / dt, "Hz"),
                df = with_unit(spectrum.resolution_hertz, "Hz"),
                integral = format_number(spectrum.integral()),
                label = series.label(),
                variance = format_number(variance),
            ),
        });
        Ok(())
    }

    /// The largest lag in samples: the user's, or `DEFAULT_LAG_TAUS` τ_int.
    fn max_lag_samples(
        &self,
        series: &SeriesRef,
        requested: Option<(f64, Span)>,
        dt: f64,
        n: usize,
        tau_samples: f64,
    ) -> Result<usize, CellError> {
        match requested {
            Some((seconds, span)) => {
                let lags = (seconds / dt * (1.0 + 1e-12)).floor();
                if lags < 1.0 {
                    return Err(self.fail(
                        ErrorKind::Value,
                        span,
                        format!(
                            "max_lag = {} is shorter than the sampling step of `{}` ({})",
                            with_unit(seconds, "s"),
                            series.x_label(),
                            with_unit(dt, "s")
                        ),
                    ));
                }
                if lags >= n as f64 {
                    return Err(self.fail(
                        ErrorKind::Value,
                        span,
                        format!(
                            "max_lag = {} reaches beyond the series (`{}` spans {})",
                            with_unit(seconds, "s"),
                            series.x_label(),
                            with_unit(dt * (n - 1) as f64, "s")
                        ),
                    ));
                }
                Ok(lags as usize)
            }
            None => Ok(((DEFAULT_LAG_TAUS * tau_samples).ceil() as usize)
                .max(MIN_SAMPLES)
                .min(n / 2)),
        }
    }

    fn autocorrelation(
        &mut self,
        spec: &AutocorrelationSpec,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let series = &spec.series;
        let data = self.read(series)?;
        let dt = self.uniform_step(series, &data)?;
        let n = data.y.len();
        let time = integrated_autocorrelation_time_fft(&data.y)
            .map_err(|e| self.spectra_error(series.span, e))?;
        let lags = self.max_lag_samples(series, spec.max_lag_seconds, dt, n, time.tau_samples)?;
        let c = autocorrelation_fft(&data.y, lags, spec.normalisation)
            .map_err(|e| self.spectra_error(series.span, e))?;
        let unit = series.x_unit.base_unit();
        let lag: Vec<f64> = (0..c.len()).map(|k| k as f64 * dt).collect();
        let source = format!(
            "FFT autocorrelation of {} ({} normalisation)",
            series.label(),
            match spec.normalisation {
                Normalisation::Biased => "biased",
                Normalisation::Unbiased => "unbiased",
            }
        );
        let provenance = derived_provenance(&data.provenance, &source);
        self.workspace.insert(
            &spec.target,
            Value::Table(Table {
                name: spec.target.clone(),
                columns: vec![
                    column("lag", &unit, lag.clone(), None),
                    column("C", "", c.clone(), None),
                ],
                provenance: provenance.clone(),
            }),
        );
        // Statistical error of τ_int with a window W: var(τ)/τ² ≈ 2(2W + 1)/n
        // (Madras & Sokal, J. Stat. Phys. 50, 109 (1988), eq. 2.19 (memory)).
        let tau = time.tau_samples * dt;
        let tau_error = tau * (2.0 * (2.0 * time.window as f64 + 1.0) / n as f64).sqrt();
        let tau_name = format!("{}{TAU_SUFFIX}", spec.target);
        self.workspace.insert(
            &tau_name,
            Value::Table(Table {
                name: tau_name.clone(),
                columns: vec![
                    column("tau_int", &unit, vec![tau], None),
                    column("tau_int_error", &unit, vec![tau_error], None),
                    column("window", &unit, vec![time.window as f64 * dt], None),
                ],
                provenance,
            }),
        );
        let figure = self.figure(
            &spec.target,
            &format!("autocorrelation of {}", series.label()),
            ("lag", &unit, AxisScale::Linear),
            ("C", "", AxisScale::Linear),
            vec![data_series(
                &series.label(),
                lag,
                c,
                None,
                SeriesStyle::Line,
            )],
            series.span,
        )?;
        emit(Output::Display(display::figure(&figure)));
        let text = format!(
            "{name}: {source}, {count} lags up to {max}\n  integrated relaxation time τ_int = {tau} \
             (window {window}){converged}\n  tables `{name}` ({lag}, C) and `{tau_name}`; figure `{name}{FIGURE_SUFFIX}`\n",
            lag = display::header("lag", &unit),
            name = spec.target,
            count = lags + 1,
            max = with_unit(lags as f64 * dt, &unit),
            tau = with_error_unit(tau, tau_error, &unit),
            window = with_unit(time.window as f64 * dt, &unit),
            converged = if time.converged {
                ""
            } else {
                "; the window did not converge within n/4: the series is too short for a reliable τ_int"
            },
        );
        emit(Output::Stream { text });
        Ok(())
    }

    fn susceptibility(
        &mut self,
        spec: &SusceptibilitySpec,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let series = &spec.series;
        let data = self.read(series)?;
        let dt = self.uniform_step(series, &data)?;
        let n = data.y.len();
        let time = integrated_autocorrelation_time_fft(&data.y)
            .map_err(|e| self.spectra_error(series.span, e))?;
        let lags = self.max_lag_samples(series, spec.max_lag_seconds, dt, n, time.tau_samples)?;
        let c = autocorrelation_fft(&data.y, lags, Normalisation::Biased)
            .map_err(|e| self.spectra_error(series.span, e))?;
        let variance = autocovariance_fft(&data.y, 0, Normalisation::Biased)
            .map_err(|e| self.spectra_error(series.span, e))?[0];
        // Static limit of the fluctuation–dissipation theorem, χ0 = ⟨δM²⟩/(k_B T) with
        // k_B = 1 (physics-reference §6; Kubo, J. Phys. Soc. Jpn. 12, 570 (1957)).
        let chi0 = variance / spec.temperature_kelvin;
        let nyquist = 0.5 / dt;
        let (low, high) = match &spec.band_hertz {
            Some(Band {
                low,
                high,
                high_span,
                ..
            }) => {
                if *high > nyquist * (1.0 + 1e-12) {
                    return Err(self.fail(
                        ErrorKind::Value,
                        *high_span,
                        format!(
                            "{} is above the Nyquist frequency of `{}` ({})",
                            with_unit(*high, "Hz"),
                            series.label(),
                            with_unit(nyquist, "Hz")
                        ),
                    ));
                }
                (*low, *high)
            }
            None => (1.0 / (2.0 * PI * lags as f64 * dt), nyquist),
        };
        let frequencies = log_spaced_frequencies(low, high, spec.points)
            .map_err(|e| self.spectra_error(series.span, e))?;
        let chi = dynamic_susceptibility(&c, dt, chi0, &frequencies)
            .map_err(|e| self.spectra_error(series.span, e))?;
        let chi_unit = squared_unit_per(&series.unit, "K");
        let source = format!(
            "dynamic susceptibility of {} at T = {} by the fluctuation–dissipation theorem",
            series.label(),
            with_unit(spec.temperature_kelvin, "K")
        );
        let provenance = derived_provenance(&data.provenance, &source);
        self.workspace.insert(
            &spec.target,
            Value::Table(Table {
                name: spec.target.clone(),
                columns: vec![
                    column("f", "Hz", frequencies.clone(), None),
                    column("chi_real", &chi_unit, chi.chi_real.clone(), None),
                    column("chi_imag", &chi_unit, chi.chi_imag.clone(), None),
                ],
                provenance: provenance.clone(),
            }),
        );
        let peak = relaxation_time_from_peak(&frequencies, &chi.chi_imag);
        let tau = peak.as_ref().copied().unwrap_or(f64::NAN);
        let tau_name = format!("{}{TAU_SUFFIX}", spec.target);
        self.workspace.insert(
            &tau_name,
            Value::Table(Table {
                name: tau_name.clone(),
                columns: vec![
                    column("tau", "s", vec![tau], None),
                    column("f_peak", "Hz", vec![1.0 / (2.0 * PI * tau)], None),
                    column("chi0", &chi_unit, vec![chi0], None),
                ],
                provenance,
            }),
        );
        let figure = self.figure(
            &spec.target,
            &format!("χ(f) of {}", series.label()),
            ("f", "Hz", AxisScale::Log),
            ("chi", &chi_unit, AxisScale::Linear),
            vec![
                data_series(
                    "chi_real (χ')",
                    frequencies.clone(),
                    chi.chi_real.clone(),
                    None,
                    SeriesStyle::Line,
                ),
                data_series(
                    "chi_imag (χ'')",
                    frequencies.clone(),
                    chi.chi_imag.clone(),
                    None,
                    SeriesStyle::Line,
                ),
            ],
            series.span,
        )?;
        emit(Output::Display(display::figure(&figure)));
        let peak_text = match &peak {
            Ok(tau) => format!(
                "χ'' peaks at f = {}: τ = 1/(2π f_peak) = {}",
                with_unit(1.0 / (2.0 * PI * tau), "Hz"),
                with_unit(*tau, "s")
            ),
            Err(e) => format!("no τ: {e}"),
        };
        emit(Output::Stream {
            text: format!(
                "{name}: {source}\n  χ0 = ⟨δM²⟩/T = {chi0}; {count} frequencies from {low} to {high}, \
                 C(t) up to {max}\n  {peak_text}\n  tables `{name}` and `{tau_name}`; figure `{name}{FIGURE_SUFFIX}`\n",
                name = spec.target,
                chi0 = with_unit(chi0, &chi_unit),
                count = frequencies.len(),
                low = with_unit(low, "Hz"),
                high = with_unit(high, "Hz"),
                max = with_unit(lags as f64 * dt, "s"),
            ),
        });
        Ok(())
    }

    fn fit(&mut self, spec: &FitSpec, emit: &mut dyn FnMut(Output)) -> Result<(), CellError> {
        let series = &spec.series;
        let data = self.read(series)?;
        let x_unit = series.x_unit.base_unit();
        if let Some(row) = data.x.iter().position(|v| !v.is_finite()) {
            return Err(self.fail(
                ErrorKind::Value,
                series.x_span,
                format!("`{}` is not a number at row {}", series.x_label(), row + 1),
            ));
        }
        if data.x.is_empty() {
            return Err(self.fail(
                ErrorKind::Value,
                series.span,
                format!("`{}` is empty", series.label()),
            ));
        }
        let x_min = data.x.iter().copied().fold(f64::INFINITY, f64::min);
        let x_max = data.x.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        if let Some(band) = &spec.band {
            let slack = 1e-9 * (x_max - x_min).abs().max(x_max.abs());
            let outside = |edge: f64| edge < x_min - slack || edge > x_max + slack;
            for (edge, span) in [(band.low, band.low_span), (band.high, band.high_span)] {
                if outside(edge) {
                    return Err(self.fail(
                        ErrorKind::Value,
                        span,
                        format!(
                            "the band edge {} is outside the data: `{}` runs from {} to {}",
                            with_unit(edge, &x_unit),
                            series.x_label(),
                            with_unit(x_min, &x_unit),
                            with_unit(x_max, &x_unit)
                        ),
                    ));
                }
            }
        }
        let sigma_source = if spec.use_errors {
            data.y_errors.as_ref()
        } else {
            None
        };
        // The points the fit uses: inside the band, and at x > 0 for the log fits.
        let mut xs = Vec::new();
        let mut ys = Vec::new();
        let mut ss = Vec::new();
        let mut non_positive = 0usize;
        for (k, (&x, &y)) in data.x.iter().zip(&data.y).enumerate() {
            if let Some(b) = &spec.band {
                if x < b.low || x > b.high {
                    continue;
                }
            }
            if spec.model.needs_positive_x() && x <= 0.0 {
                non_positive += 1;
                continue;
            }
            if !y.is_finite() {
                return Err(self.fail(
                    ErrorKind::Value,
                    series.span,
                    format!("`{}` is not a number at row {}", series.label(), k + 1),
                ));
            }
            xs.push(x);
            ys.push(y);
            if let Some(errors) = sigma_source {
                ss.push(errors.get(k).copied().unwrap_or(f64::NAN));
            }
        }
        let sigma = (sigma_source.is_some() && ss.iter().all(|s| s.is_finite() && *s > 0.0))
            .then_some(ss.as_slice());
        let needed = spec.model.parameters().len() + 1;
        if xs.len() < needed {
            let span = spec
                .band
                .as_ref()
                .map_or(series.span, |b| b.low_span.to(b.high_span));
            return Err(self.fail(
                ErrorKind::Value,
                span,
                format!(
                    "a `{}` fit needs at least {needed} points, but {} of `{}` {}",
                    spec.model.name(),
                    xs.len(),
                    series.label(),
                    if spec.band.is_some() {
                        "lie in the band"
                    } else {
                        "can be used"
                    }
                ),
            ));
        }
        let result = match spec.model {
            FitModel::PowerLaw => fit_power_law(&xs, &ys, sigma, None),
            FitModel::Exponential => fit_exponential(&xs, &ys, sigma),
            FitModel::StretchedExponential => fit_stretched_exponential(&xs, &ys, sigma),
            FitModel::NoiseForm => {
                let omega: Vec<f64> = xs.iter().map(|f| 2.0 * PI * f).collect();
                fit_noise_spectrum(&omega, &ys, sigma, None)
            }
            FitModel::Arrhenius => fit_arrhenius(&xs, &ys, sigma),
        }
        .map_err(|e| {
            self.fail(
                ErrorKind::Value,
                series.span,
                format!(
                    "the `{}` fit of `{}` failed: {e}",
                    spec.model.name(),
                    series.label()
                ),
            )
        })?;
        let parameters = reported_parameters(spec.model, &result);
        let units = parameter_units(spec.model, &series.unit, &x_unit);
        let mut columns = Vec::new();
        for ((name, (value, error)), unit) in
            spec.model.parameters().iter().zip(&parameters).zip(&units)
        {
            columns.push(column(name, unit, vec![*value], None));
            columns.push(column(&format!("{name}_error"), unit, vec![*error], None));
        }
        columns.push(column(
            "chi2_dof",
            "",
            vec![result.reduced_chi_squared],
            None,
        ));
        columns.push(column(
            "dof",
            "",
            vec![result.degrees_of_freedom as f64],
            None,
        ));
        let band_text = spec.band.as_ref().map(|b| {
            format!(
                " over {} from {} to {}",
                series.x_column,
                with_unit(b.low, &x_unit),
                with_unit(b.high, &x_unit)
            )
        });
        let formula = spec.model.formula(&series.column, &series.x_column);
        let source = format!(
            "least-squares fit {formula} to {}{}",
            series.label(),
            band_text.clone().unwrap_or_default()
        );
        let table = Table {
            name: spec.target.clone(),
            columns,
            provenance: derived_provenance(&data.provenance, &source),
        };
        self.workspace
            .insert(&spec.target, Value::Table(table.clone()));
        emit(Output::Display(display::table(&table, None)));
        // The figure: the data, and the fitted curve over the points used.
        let log_x = spec.model.needs_positive_x() && spec.model != FitModel::Arrhenius;
        let log_y = matches!(
            spec.model,
            FitModel::PowerLaw | FitModel::NoiseForm | FitModel::Arrhenius
        );
        let (dx, dy, de) = drawable(&data, sigma_source.is_some(), log_x, log_y);
        let curve_x = curve_grid(
            xs.iter().copied().fold(f64::INFINITY, f64::min),
            xs.iter().copied().fold(f64::NEG_INFINITY, f64::max),
            log_x,
        );
        let curve_y: Vec<f64> = curve_x
            .iter()
            .map(|&x| evaluate(spec.model, &parameters, x))
            .collect();
        let (key, (value, error)) = legend_parameter(spec.model, &parameters);
        let legend = format!("fit: {key} = {}", format_with_error(value, error));
        let scale = |log: bool| {
            if log {
                AxisScale::Log
            } else {
                AxisScale::Linear
            }
        };
        let figure = self.figure(
            &spec.target,
            &format!("{formula}{}", band_text.clone().unwrap_or_default()),
            (&series.x_column, &x_unit, scale(log_x)),
            (&series.column, &series.unit, scale(log_y)),
            vec![
                data_series(&series.label(), dx, dy, de, SeriesStyle::Points),
                data_series(&legend, curve_x, curve_y, None, SeriesStyle::Line),
            ],
            series.span,
        )?;
        emit(Output::Display(display::figure(&figure)));
        let mut text = format!(
            "{name}: {formula}{band}, {points} points{skipped}\n",
            name = spec.target,
            band = band_text.unwrap_or_default(),
            points = xs.len(),
            skipped = if non_positive > 0 {
                format!(
                    " ({non_positive} at {} ≤ 0 left out of the log fit)",
                    series.x_column
                )
            } else {
                String::new()
            },
        );
        for ((name, (value, error)), unit) in
            spec.model.parameters().iter().zip(&parameters).zip(&units)
        {
            text.push_str(&format!(
                "  {name} = {}\n",
                with_error_unit(*value, *error, unit)
            ));
        }
        text.push_str(&format!(
            "  χ²/dof = {} (dof {}; {}){}\n",
            format_number(result.reduced_chi_squared),
            result.degrees_of_freedom,
            if result.absolute_sigma {
                "errors from the column's error bars"
            } else {
                "errors scaled by the scatter"
            },
            if result.converged {
                ""
            } else {
                "; the minimiser did not report convergence"
            }
        ));
        emit(Output::Stream { text });
        Ok(())
    }

    /// Draws and stores `TARGET_figure`.
    fn figure(
        &mut self,
        target: &str,
        title: &str,
        x: (&str, &str, AxisScale),
        y: (&str, &str, AxisScale),
        series: Vec<(FigureSeries, SeriesStyle)>,
        span: Span,
    ) -> Result<Figure, CellError> {
        let axis = |(label, unit, scale): (&str, &str, AxisScale)| Axis {
            label: label.to_string(),
            unit: (!unit.is_empty()).then(|| unit.to_string()),
            scale,
        };
        let plot = LinePlot {
            title: title.to_string(),
            x: axis(x),
            y: axis(y),
            series: series
                .iter()
                .map(|(s, style)| Series {
                    label: s.label.clone(),
                    x: s.x.clone(),
                    y: s.y.clone(),
                    y_error: s.y_error.clone(),
                    style: *style,
                })
                .collect(),
        };
        let svg = match catch_unwind(AssertUnwindSafe(|| {
            render_svg(&plot, FIGURE_WIDTH, FIGURE_HEIGHT)
        })) {
            Ok(Ok(svg)) => svg,
            Ok(Err(error)) => {
                return Err(self.fail(
                    ErrorKind::Runtime,
                    span,
                    format!("cannot draw the figure: {error}"),
                ))
            }
            Err(_) => {
                return Err(self.fail(
                    ErrorKind::Runtime,
                    span,
                    "the plotting library failed on this data",
                ))
            }
        };
        let name = format!("{target}{FIGURE_SUFFIX}");
        let figure = Figure {
            name: name.clone(),
            title: title.to_string(),
            x_label: x.0.to_string(),
            x_unit: x.1.to_string(),
            y_label: y.0.to_string(),
            y_unit: y.1.to_string(),
            series: series.into_iter().map(|(s, _)| s).collect(),
            svg,
        };
        self.workspace.insert(&name, Value::Figure(figure.clone()));
        Ok(figure)
    }
}

fn data_series(
    label: &str,
    x: Vec<f64>,
    y: Vec<f64>,
    y_error: Option<Vec<f64>>,
    style: SeriesStyle,
) -> (FigureSeries, SeriesStyle) {
    (
        FigureSeries {
            label: label.to_string(),
            x,
            y,
            y_error,
        },
        style,
    )
}

/// The input's provenance with the analysis in front of its source.
fn derived_provenance(input: &Option<Provenance>, what: &str) -> Option<Provenance> {
    input.as_ref().map(|p| Provenance {
        source: format!("{what}; from: {}", p.source),
        ..p.clone()
    })
}

/// The largest power of two ≤ n / DEFAULT_SEGMENTS, between 16 and MAX_DEFAULT_SEGMENT
/// (and never longer than the series).
fn default_segment(n: usize) -> usize {
    let target = (n / DEFAULT_SEGMENTS).max(1);
    let power = 1usize << (usize::BITS - 1 - target.leading_zeros());
    power.clamp(MIN_SAMPLES, MAX_DEFAULT_SEGMENT).min(n)
}

fn window_name(window: Window) -> &'static str {
    match window {
        Window::Hann => "Hann",
        Window::Hamming => "Hamming",
        Window::Rectangular => "rectangular",
    }
}

fn detrend_name(detrend: Detrend) -> &'static str {
    match detrend {
        Detrend::None => "no",
        Detrend::Constant => "constant",
        Detrend::Linear => "linear",
    }
}

/// The mean-square deviation (the biased variance, what Parseval's sum gives).
fn variance(values: &[f64]) -> f64 {
    let n = values.len() as f64;
    let mean = values.iter().sum::<f64>() / n;
    values.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / n
}

fn with_error_unit(value: f64, error: f64, unit: &str) -> String {
    let text = format_with_error(value, error);
    if unit.is_empty() {
        text
    } else {
        format!("({text}) {unit}")
    }
}

/// The stored parameters (value, error) in the order of `FitModel::parameters`.
fn reported_parameters(model: FitModel, fit: &FitResult) -> Vec<(f64, f64)> {
    let get = |name: &str| fit.parameter(name).unwrap_or((f64::NAN, f64::NAN));
    match model {
        FitModel::PowerLaw => {
            // stdlib fits y = A x^α; the language reports S = A f^−b, b = −α.
            let (alpha, error) = get("alpha");
            vec![get("A"), (-alpha, error)]
        }
        FitModel::Exponential => vec![get("A"), get("tau")],
        FitModel::StretchedExponential => vec![get("A"), get("tau"), get("beta")],
        FitModel::NoiseForm => vec![get("A"), get("tau"), get("b")],
        FitModel::Arrhenius => vec![get("tau_infinity"), get("barrier_kelvin")],
    }
}

/// The fitted curve at `x` (x in the axis's base unit; noise form: x is f in Hz).
fn evaluate(model: FitModel, p: &[(f64, f64)], x: f64) -> f64 {
    match model {
        FitModel::PowerLaw => p[0].0 * x.powf(-p[1].0),
        FitModel::Exponential => p[0].0 * (-x / p[1].0).exp(),
        FitModel::StretchedExponential => p[0].0 * (-(x / p[1].0).powf(p[2].0)).exp(),
        FitModel::NoiseForm => {
            let omega_tau = 2.0 * PI * x * p[1].0;
            p[0].0 * p[1].0 / (1.0 + omega_tau.powf(p[2].0))
        }
        FitModel::Arrhenius => p[0].0 * (p[1].0 / x).exp(),
    }
}

/// The parameter shown in the legend: the exponent where there is one.
fn legend_parameter(model: FitModel, p: &[(f64, f64)]) -> (&'static str, (f64, f64)) {
    match model {
        FitModel::PowerLaw => ("b", p[1]),
        FitModel::Exponential => ("tau", p[1]),
        FitModel::StretchedExponential => ("beta", p[2]),
        FitModel::NoiseForm => ("b", p[2]),
        FitModel::Arrhenius => ("barrier", p[1]),
    }
}

/// 96 points from `lo` to `hi`, even in log x on a log axis.
fn curve_grid(lo: f64, hi: f64, log: bool) -> Vec<f64> {
    const POINTS: usize = 96;
    (0..POINTS)
        .map(|k| {
            let s = k as f64 / (POINTS - 1) as f64;
            if log {
                (lo.ln() + (hi.ln() - lo.ln()) * s).exp()
            } else {
                lo + (hi - lo) * s
            }
        })
        .collect()
}

/// The data points that can be drawn on the chosen axes (positive on a log axis).
fn drawable(
    data: &Sampled,
    with_errors: bool,
    log_x: bool,
    log_y: bool,
) -> (Vec<f64>, Vec<f64>, Option<Vec<f64>>) {
    let mut x = Vec::new();
    let mut y = Vec::new();
    let mut e = Vec::new();
    for (k, (&xv, &yv)) in data.x.iter().zip(&data.y).enumerate() {
        if (log_x && xv <= 0.0) || (log_y && yv <= 0.0) || !xv.is_finite() || !yv.is_finite() {
            continue;
        }
        x.push(xv);
        y.push(yv);
        if let Some(errors) = &data.y_errors {
            e.push(errors.get(k).copied().unwrap_or(0.0));
        }
    }
    let errors = (with_errors && data.y_errors.is_some()).then_some(e);
    (x, y, errors)
}
