//! Time-series analysis: FFT autocorrelation, Welch power spectral density,
//! dynamic susceptibility from the fluctuation–dissipation theorem.
//!
//! Conventions (physics-reference §6):
//! * A series `M_k = M(k Δt)` is sampled at `sample_rate_hertz = 1/Δt`.
//! * [`welch_psd`] returns the one-sided density `S(f)` (unit²/Hz) of
//!   Welch, IEEE Trans. Audio Electroacoust. 15, 70 (1967): the series is cut
//!   into segments of `segment_length` samples overlapping by `overlap`,
//!   each segment is detrended and multiplied by a window `w`, and the
//!   periodograms `|Σ w_n x_n e^{−2πikn/N}|² / (f_s Σ w_n²)` are averaged;
//!   every bin except DC (and Nyquist for even `N`) is doubled to fold the
//!   negative frequencies in. These are the conventions of
//!   `scipy.signal.welch(..., scaling="density", return_onesided=True,
//!   average="mean")` with periodic ("fftbins") windows, so the two agree to
//!   rounding. With that scaling `Σ_k S_k Δf = ⟨x²⟩` per segment (discrete
//!   Parseval), so `∫₀^{f_N} S df = var(M)` for a rectangular window without
//!   overlap on a centred series.
//! * [`autocovariance_fft`] computes `C(t) = Σ_{k} δM_k δM_{k+t} / n` (biased,
//!   a positive-definite sequence, the usual choice for τ_int) or `/ (n − t)`
//!   (unbiased at each lag, noisier at large lags) by a zero-padded FFT
//!   (Wiener–Khinchin; padding to ≥ 2n removes the circular wrap-around).
//! * [`dynamic_susceptibility`] evaluates
//!   `χ(ω) = χ0 [1 − iω ∫₀^∞ C(t) e^{−iωt} dt]` with `χ = χ' − iχ''` and `C`
//!   the normalised autocorrelation; for `C = e^{−t/τ}` this is the Debye
//!   form `χ0/(1 + iωτ)` (derived), whose `χ''` peaks at `ωτ = 1`, so
//!   `τ = 1/(2π f_peak)` ([`relaxation_time_from_peak`]).

use crate::observe::{AutocorrelationTime, WINDOW_FACTOR};
use rustfft::num_complex::Complex;
use rustfft::FftPlanner;
use serde::{Deserialize, Serialize};
use std::f64::consts::PI;
use std::fmt;

/// Why a spectral analysis could not be done.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub enum SpectraError {
    /// The series is shorter than the analysis needs.
    TooShort {
        /// Samples given.
        samples: usize,
        /// Samples needed.
        needed: usize,
    },
    /// NaN or ±∞ at this 0-based index.
    NonFinite {
        /// Index of the first offending value.
        index: usize,
    },
    /// A setting is out of range; the message says which and why.
    InvalidSetting(String),
}

impl fmt::Display for SpectraError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            SpectraError::TooShort { samples, needed } => write!(
                f,
                "the series has {samples} samples but this analysis needs at least {needed}"
            ),
            SpectraError::NonFinite { index } => write!(
                f,
                "sample {} of the series is not a finite number",
                index + 1
            ),
            SpectraError::InvalidSetting(message) => f.write_str(message),
        }
    }
}

impl std::error::Error for SpectraError {}

fn check_finite(series: &[f64]) -> Result<(), SpectraError> {
    match series.iter().position(|x| !x.is_finite()) {
        Some(index) => Err(SpectraError::NonFinite { index }),
        None => Ok(()),
    }
}

/// Taper applied to each Welch segment. All are the periodic ("DFT-even")
/// forms, `w_n` for `n = 0..N` of the symmetric window of length `N + 1`
/// (Harris, Proc. IEEE 66, 51 (1978)), as scipy's `get_window` returns.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum Window {
    /// `w_n = 1`.
    Rectangular,
    /// `w_n = ½ − ½ cos(2πn/N)`.
    Hann,
    /// `w_n = 0.54 − 0.46 cos(2πn/N)`.
    Hamming,
}

impl Window {
    /// Window coefficients for a segment of `length` samples.
    pub fn coefficients(self, length: usize) -> Vec<f64> {
        let n = length as f64;
        (0..length)
            .map(|k| {
                let c = (2.0 * PI * k as f64 / n).cos();
                match self {
                    Window::Rectangular => 1.0,
                    Window::Hann => 0.5 - 0.5 * c,
                    Window::Hamming => 0.54 - 0.46 * c,
                }
            })
            .collect()
    }

    /// Parse the names "rectangular" (also "boxcar"), "hann", "hamming".
    pub fn from_name(name: &str) -> Option<Window> {
        match name.trim().to_ascii_lowercase().as_str() {
            "rectangular" | "boxcar" | "rect" => Some(Window::Rectangular),
            "hann" | "hanning" => Some(Window::Hann),
            "hamming" => Some(Window::Hamming),
            _ => None,
        }
    }
}

/// Trend removed from each segment before windowing.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum Detrend {
    /// Keep the segment as it is.
    None,
    /// Subtract the segment mean.
    Constant,
    /// Subtract the least-squares straight line through the segment.
    Linear,
}

impl Detrend {
    /// Parse "none", "constant", "linear".
    pub fn from_name(name: &str) -> Option<Detrend> {
        match name.trim().to_ascii_lowercase().as_str() {
            "none" | "false" => Some(Detrend::None),
            "constant" | "mean" => Some(Detrend::Constant),
            "linear" => Some(Detrend::Linear),
            _ => None,
        }
    }
}

/// Settings of a Welch estimate.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct WelchSettings {
    /// `f_s = 1/Δt` (Hz).
    pub sample_rate_hertz: f64,
    /// Samples per segment `N` (also the FFT length), ≥ 2.
    pub segment_length: usize,
    /// Samples shared by consecutive segments, `< N` (N/2 is customary for Hann).
    pub overlap: usize,
    /// Taper.
    pub window: Window,
    /// Trend removal per segment.
    pub detrend: Detrend,
}

impl WelchSettings {
    /// Hann window, half overlap, constant detrend (scipy's defaults for a
    /// given segment length).
    pub fn hann(sample_rate_hertz: f64, segment_length: usize) -> Self {
        Self {
            sample_rate_hertz,
            segment_length,
            overlap: segment_length / 2,
            window: Window::Hann,
            detrend: Detrend::Constant,
        }
    }
}

/// A one-sided power spectral density.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Spectrum {
    /// Bin frequencies `k f_s / N`, `k = 0..=N/2` (Hz).
    pub frequencies_hertz: Vec<f64>,
    /// `S(f_k)` in (unit of the series)²/Hz.
    pub density_per_hertz: Vec<f64>,
    /// Segments averaged.
    pub segments: usize,
    /// Bin width `f_s/N` (Hz).
    pub resolution_hertz: f64,
}

impl Spectrum {
    /// `Σ_k S_k Δf`, the rectangle-rule integral over `[0, f_N]` (equals the
    /// mean square of the detrended segments for the rectangular window).
    pub fn integral(&self) -> f64 {
        self.density_per_hertz.iter().sum::<f64>() * self.resolution_hertz
    }
}

/// Subtract the trend from `segment` in place.
fn detrend_in_place(segment: &mut [Complex<f64>], detrend: Detrend) {
    let n = segment.len() as f64;
    match detrend {
        Detrend::None => {}
        Detrend::Constant => {
            let mean = segment.iter().map(|c| c.re).sum::<f64>() / n;
            for c in segment.iter_mut() {
                c.re -= mean;
            }
        }
        Detrend::Linear => {
            // Least-squares line a + b (k − k̄): b = Σ(k − k̄)x / Σ(k − k̄)².
            let k_mean = 0.5 * (n - 1.0);
            let mut sum_x = 0.0;
            let mut sum_kx = 0.0;
            for (k, c) in segment.iter().enumerate() {
                sum_x += c.re;
                sum_kx += (k as f64 - k_mean) * c.re;
            }
            let sum_kk = n * (n * n - 1.0) / 12.0;
            let a = sum_x / n;
            let b = if sum_kk > 0.0 { sum_kx / sum_kk } else { 0.0 };
            for (k, c) in segment.iter_mut().enumerate() {
                c.re -= a + b * (k as f64 - k_mean);
            }
        }
    }
}

/// Check the settings against a series of `samples` and return the number
/// of segments.
fn welch_segments(samples: usize, settings: &WelchSettings) -> Result<usize, SpectraError> {
    let n = settings.segment_length;
    if !(settings.sample_rate_hertz.is_finite() && settings.sample_rate_hertz > 0.0) {
        return Err(SpectraError::InvalidSetting(format!(
            "the sample rate must be a positive number of hertz (got {})",
            settings.sample_rate_hertz
        )));
    }
    if n < 2 {
        return Err(SpectraError::InvalidSetting(format!(
            "the segment length must be at least 2 samples (got {n})"
        )));
    }
    if settings.overlap >= n {
        return Err(SpectraError::InvalidSetting(format!(
            "the overlap ({}) must be smaller than the segment length ({n})",
            settings.overlap
        )));
    }
    if samples < n {
        return Err(SpectraError::TooShort { samples, needed: n });
    }
    let step = n - settings.overlap;
    Ok((samples - settings.overlap) / step)
}

/// One-sided PSD of `series` by Welch's method (see the module notes for
/// the exact normalisation, identical to `scipy.signal.welch`).
///
/// Segments are transformed two at a time as the real and imaginary parts
/// of one complex FFT: for `z = a + ib`, `|A_k|² + |B_k|² = (|Z_k|² +
/// |Z_{N−k}|²)/2` (derived from `A_k = (Z_k + Z*_{N−k})/2`,
/// `B_k = (Z_k − Z*_{N−k})/2i`), which halves the work. The segment loop
/// allocates nothing.
pub fn welch_psd(series: &[f64], settings: &WelchSettings) -> Result<Spectrum, SpectraError> {
    check_finite(series)?;
    let segments = welch_segments(series.len(), settings)?;
    let n = settings.segment_length;
    let step = n - settings.overlap;
    let window = settings.window.coefficients(n);
    let window_power: f64 = window.iter().map(|w| w * w).sum();
    let fs = settings.sample_rate_hertz;
    let mut planner = FftPlanner::<f64>::new();
    let fft = planner.plan_fft_forward(n);
    let mut buffer = vec![Complex::new(0.0, 0.0); n];
    let mut second = vec![Complex::new(0.0, 0.0); n];
    let mut scratch = vec![Complex::new(0.0, 0.0); fft.get_inplace_scratch_len()];
    let bins = n / 2 + 1;
    let mut power = vec![0.0f64; bins];
    let mut segment = 0;
    while segment < segments {
        let paired = segment + 1 < segments;
        let first_start = segment * step;
        for (c, &x) in buffer.iter_mut().zip(&series[first_start..first_start + n]) {
            *c = Complex::new(x, 0.0);
        }
        detrend_in_place(&mut buffer, settings.detrend);
        if paired {
            let start = first_start + step;
            for (c, &x) in second.iter_mut().zip(&series[start..start + n]) {
                *c = Complex::new(x, 0.0);
            }
            detrend_in_place(&mut second, settings.detrend);
        }
        for ((c, s), &w) in buffer.iter_mut().zip(&second).zip(&window) {
            c.re *= w;
            c.im = if paired { s.re * w } else { 0.0 };
        }
        fft.process_with_scratch(&mut buffer, &mut scratch);
        if paired {
            for (k, p) in power.iter_mut().enumerate() {
                let mirror = (n - k) % n;
                *p += buffer[k].norm_sqr() + buffer[mirror].norm_sqr();
            }
            segment += 2;
        } else {
            for (p, c) in power.iter_mut().zip(&buffer) {
                *p += 2.0 * c.norm_sqr();
            }
            segment += 1;
        }
    }
    // Each pair contributed 2·(|A|² + |B|²); each lone segment 2|A|².
    let scale = 1.0 / (2.0 * segments as f64 * fs * window_power);
    let nyquist_is_a_bin = n.is_multiple_of(2);
    let density_per_hertz = power
        .iter()
        .enumerate()
        .map(|(k, p)| {
            let one_sided = if k == 0 || (nyquist_is_a_bin && k == n / 2) {
                1.0
            } else {
                2.0
            };
            p * scale * one_sided
        })
        .collect();
    let resolution_hertz = fs / n as f64;
    Ok(Spectrum {
        frequencies_hertz: (0..bins).map(|k| k as f64 * resolution_hertz).collect(),
        density_per_hertz,
        segments,
        resolution_hertz,
    })
}

/// Normalisation of the autocovariance at lag `t`.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum Normalisation {
    /// Divide the lag-`t` sum by `n` (positive definite; lower variance;
    /// what [`crate::observe`] uses).
    Biased,
    /// Divide by `n − t` (unbiased at each lag, noisy at large lags).
    Unbiased,
}

/// Autocovariance `C(t)`, `t = 0..=max_lag`, of the mean-subtracted series
/// by a zero-padded FFT (padded to a power of two ≥ 2n, so no circular
/// wrap-around; cost `O(n log n)`). `max_lag` is clamped to `n − 1`.
pub fn autocovariance_fft(
    series: &[f64],
    max_lag: usize,
    normalisation: Normalisation,
) -> Result<Vec<f64>, SpectraError> {
    check_finite(series)?;
    let n = series.len();
    if n < 2 {
        return Err(SpectraError::TooShort {
            samples: n,
            needed: 2,
        });
    }
    let max_lag = max_lag.min(n - 1);
    let padded = (2 * n).next_power_of_two();
    let mean = series.iter().sum::<f64>() / n as f64;
    let mut buffer = vec![Complex::new(0.0, 0.0); padded];
    for (c, &x) in buffer.iter_mut().zip(series) {
        c.re = x - mean;
    }
    let mut planner = FftPlanner::<f64>::new();
    planner.plan_fft_forward(padded).process(&mut buffer);
    for c in buffer.iter_mut() {
        *c = Complex::new(c.norm_sqr(), 0.0);
    }
    planner.plan_fft_inverse(padded).process(&mut buffer);
    Ok(buffer[..=max_lag]
        .iter()
        .enumerate()
        .map(|(t, c)| {
            let divisor = match normalisation {
                Normalisation::Biased => n,
                Normalisation::Unbiased => n - t,
            };
            c.re / (padded as f64 * divisor as f64)
        })
        .collect())
}

/// Normalised autocorrelation `ρ(t) = C(t)/C(0)`; a constant series gives
/// `ρ(0) = 1` and zeros elsewhere.
pub fn autocorrelation_fft(
    series: &[f64],
    max_lag: usize,
    normalisation: Normalisation,
) -> Result<Vec<f64>, SpectraError> {
    let mut c = autocovariance_fft(series, max_lag, normalisation)?;
    let c0 = c[0];
    if c0 > 0.0 {
        for x in c.iter_mut() {
            *x /= c0;
        }
    } else {
        for x in c.iter_mut() {
            *x = 0.0;
        }
        c[0] = 1.0;
    }
    Ok(c)
}

/// Integrated autocorrelation time from the FFT autocorrelation, with the
/// same self-consistent window as [`crate::observe::integrated_autocorrelation_time`]
/// (Madras & Sokal, J. Stat. Phys. 50, 109 (1988)), so both agree, but in
/// `O(n log n)` instead of `O(n W)`: use it for long series.
pub fn integrated_autocorrelation_time_fft(
    series: &[f64],
) -> Result<AutocorrelationTime, SpectraError> {
    let n = series.len();
    if n < 4 {
        return Err(SpectraError::TooShort {
            samples: n,
            needed: 4,
        });
    }
    let max_window = n / 4;
    let c = autocovariance_fft(series, max_window, Normalisation::Biased)?;
    if c[0] == 0.0 {
        return Ok(AutocorrelationTime {
            tau_samples: 0.5,
            window: 0,
            converged: true,
        });
    }
    let mut tau = 0.5;
    for (t, ct) in c.iter().enumerate().skip(1) {
        tau += ct / c[0];
        if t as f64 >= WINDOW_FACTOR * tau {
            return Ok(AutocorrelationTime {
                tau_samples: tau.max(0.5),
                window: t,
                converged: true,
            });
        }
    }
    Ok(AutocorrelationTime {
        tau_samples: tau.max(0.5),
        window: max_window,
        converged: false,
    })
}

/// `χ'(f)` and `χ''(f)` on a frequency grid.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct DynamicSusceptibility {
    /// Frequencies (Hz).
    pub frequencies_hertz: Vec<f64>,
    /// In-phase part χ' (units of `chi0`).
    pub chi_real: Vec<f64>,
    /// Out-of-phase part χ'' (units of `chi0`), with `χ = χ' − iχ''`.
    pub chi_imag: Vec<f64>,
}

/// `∫₀^h (c0 + (c1 − c0) s/h) e^{−iωs} ds` pieces: returns (I0, I1/h) with
/// `I0 = ∫₀^h e^{−iωs} ds`, `I1 = ∫₀^h s e^{−iωs} ds` (exact; series for
/// small ωh to avoid cancellation).
fn linear_piece_weights(omega: f64, h: f64) -> (Complex<f64>, Complex<f64>) {
    let x = omega * h;
    if x.abs() < 1e-3 {
        // e^{−ix} expansions: I0 = h(1 − ix/2 − x²/6 + ix³/24),
        // I1/h = h(1/2 − ix/3 − x²/8 + ix³/30).
        let i0 = Complex::new(1.0 - x * x / 6.0, -x / 2.0 + x * x * x / 24.0) * h;
        let i1 = Complex::new(0.5 - x * x / 8.0, -x / 3.0 + x * x * x / 30.0) * h;
        (i0, i1)
    } else {
        let a = Complex::new(0.0, omega);
        let e = Complex::new(0.0, -x).exp();
        let i0 = (Complex::new(1.0, 0.0) - e) / a;
        let i1 = (Complex::new(1.0, 0.0) - e * (Complex::new(1.0, x))) / (a * a) / h;
        (i0, i1)
    }
}

/// Dynamic susceptibility from the fluctuation–dissipation theorem
/// (physics-reference §6; Kubo, J. Phys. Soc. Jpn. 12, 570 (1957)):
/// `χ(ω) = χ0 [1 − iω ∫₀^∞ C(t) e^{−iωt} dt]`, `χ = χ' − iχ''`, with
/// `C(t_k) = autocorrelation[k]` the normalised autocorrelation sampled at
/// `t_k = k Δt`. The integral is exact for the piecewise-linear
/// interpolation of `C` (a Filon-type rule, accurate even for `ωΔt ~ 1`)
/// and is cut where the samples end, so pass `C` until it has decayed.
pub fn dynamic_susceptibility(
    autocorrelation: &[f64],
    time_step_seconds: f64,
    chi0: f64,
    frequencies_hertz: &[f64],
) -> Result<DynamicSusceptibility, SpectraError> {
    check_finite(autocorrelation)?;
    if autocorrelation.len() < 2 {
        return Err(SpectraError::TooShort {
            samples: autocorrelation.len(),
            needed: 2,
        });
    }
    if !(time_step_seconds.is_finite() && time_step_seconds > 0.0) {
        return Err(SpectraError::InvalidSetting(format!(
            "the time step must be a positive number of seconds (got {time_step_seconds})"
        )));
    }
    if !chi0.is_finite() {
        return Err(SpectraError::InvalidSetting(
            "the static susceptibility chi0 must be finite".into(),
        ));
    }
    if let Some(f) = frequencies_hertz
        .iter()
        .find(|f| !(f.is_finite() && **f >= 0.0))
    {
        return Err(SpectraError::InvalidSetting(format!(
            "frequencies must be finite and ≥ 0 Hz (got {f})"
        )));
    }
    let h = time_step_seconds;
    let mut chi_real = Vec::with_capacity(frequencies_hertz.len());
    let mut chi_imag = Vec::with_capacity(frequencies_hertz.len());
    for &f in frequencies_hertz {
        let omega = 2.0 * PI * f;
        let (w0, w1) = linear_piece_weights(omega, h);
        // Phase e^{−iω t_k} advanced by a constant rotation per step.
        let rotation = Complex::new(0.0, -omega * h).exp();
        let mut phase = Complex::new(1.0, 0.0);
        let mut integral = Complex::new(0.0, 0.0);
        for (k, pair) in autocorrelation.windows(2).enumerate() {
            if k % 1024 == 0 {
                // Re-anchor the rotated phase to bound accumulated rounding.
                phase = Complex::new(0.0, -omega * h * k as f64).exp();
            }
            integral += phase * (w0 * pair[0] + w1 * (pair[1] - pair[0]));
            phase *= rotation;
        }
        let chi = (Complex::new(1.0, 0.0) - Complex::new(0.0, omega) * integral) * chi0;
        chi_real.push(chi.re);
        chi_imag.push(-chi.im);
    }
    Ok(DynamicSusceptibility {
        frequencies_hertz: frequencies_hertz.to_vec(),
        chi_real,
        chi_imag,
    })
}

/// `τ = 1/(2π f_peak)` from the maximum of `χ''(f)` (how ac-susceptibility
/// experiments define τ; physics-reference §6). The peak is refined by a
/// parabola through the largest point and its neighbours in `ln f`, so a
/// log-spaced grid gives τ to well below its spacing. Errors if the
/// maximum is at either end of the grid (no peak inside it).
pub fn relaxation_time_from_peak(
    frequencies_hertz: &[f64],
    chi_imag: &[f64],
) -> Result<f64, SpectraError> {
    if frequencies_hertz.len() != chi_imag.len() {
        return Err(SpectraError::InvalidSetting(format!(
            "{} frequencies but {} values of chi''",
            frequencies_hertz.len(),
            chi_imag.len()
        )));
    }
    check_finite(chi_imag)?;
    if frequencies_hertz.len() < 3 {
        return Err(SpectraError::TooShort {
            samples: frequencies_hertz.len(),
            needed: 3,
        });
    }
    if frequencies_hertz
        .windows(2)
        .any(|w| !(w[0] > 0.0 && w[1] > w[0] && w[1].is_finite()))
    {
        return Err(SpectraError::InvalidSetting(
            "frequencies must be positive and strictly increasing".into(),
        ));
    }
    let mut best = 0;
    for (k, v) in chi_imag.iter().enumerate() {
        if *v > chi_imag[best] {
            best = k;
        }
    }
    if best == 0 || best == chi_imag.len() - 1 {
        return Err(SpectraError::InvalidSetting(
            "chi'' has no maximum inside the frequency grid; widen the grid".into(),
        ));
    }
    let (x0, x1, x2) = (
        frequencies_hertz[best - 1].ln(),
        frequencies_hertz[best].ln(),
        frequencies_hertz[best + 1].ln(),
    );
    let (y0, y1, y2) = (chi_imag[best - 1], chi_imag[best], chi_imag[best + 1]);
    // Vertex of the parabola through three points (Lagrange form).
    let numerator = (x1 - x0).powi(2) * (y1 - y2) - (x1 - x2).powi(2) * (y1 - y0);
    let denominator = (x1 - x0) * (y1 - y2) - (x1 - x2) * (y1 - y0);
    let x_peak = if denominator != 0.0 {
        (x1 - 0.5 * numerator / denominator).clamp(x0, x2)
    } else {
        x1
    };
    Ok(1.0 / (2.0 * PI * x_peak.exp()))
}

/// `n` frequencies spaced evenly in `log f` from `lowest` to `highest` (Hz).
pub fn log_spaced_frequencies(
    lowest_hertz: f64,
    highest_hertz: f64,
    n: usize,
) -> Result<Vec<f64>, SpectraError> {
    if !(lowest_hertz > 0.0 && highest_hertz > lowest_hertz && highest_hertz.is_finite()) || n < 2 {
        return Err(SpectraError::InvalidSetting(format!(
            "need 0 < lowest < highest and at least 2 points (got {lowest_hertz}, {highest_hertz}, {n})"
        )));
    }
    let ratio = (highest_hertz / lowest_hertz).ln() / (n - 1) as f64;
    Ok((0..n)
        .map(|k| lowest_hertz * (ratio * k as f64).exp())
        .collect())
}

/// AR(1) helpers shared by the tests of this module and of [`crate::fit`].
#[cfg(test)]
pub(crate) mod test_series {
    use crate::rng::RngStreams;
    use rand::Rng;

    /// Standard normal variates by Box–Muller (Box & Muller, Ann. Math.
    /// Stat. 29, 610 (1958)).
    pub fn normals(seed: u64, n: usize) -> Vec<f64> {
        let mut rng = RngStreams::new(seed).stream(0);
        let mut out = Vec::with_capacity(n + 1);
        while out.len() < n {
            let u1: f64 = 1.0 - rng.gen::<f64>();
            let u2: f64 = rng.gen::<f64>();
            let r = (-2.0 * u1.ln()).sqrt();
            out.push(r * (2.0 * std::f64::consts::PI * u2).cos());
            out.push(r * (2.0 * std::f64::consts::PI * u2).sin());
        }
        out.truncate(n);
        out
    }

    /// `x_t = φ x_{t−1} + σ ε_t`, started from the stationary distribution.
    pub fn ar1(seed: u64, n: usize, phi: f64, sigma: f64) -> Vec<f64> {
        let eps = normals(seed, n);
        let mut x = eps[0] * sigma / (1.0 - phi * phi).sqrt();
        let mut out = Vec::with_capacity(n);
        out.push(x);
        for e in &eps[1..] {
            x = phi * x + sigma * e;
            out.push(x);
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::test_series::{ar1, normals};
    use super::*;

    /// Straightforward Welch (one FFT per segment, naive DFT) to check the
    /// paired-FFT implementation against.
    fn naive_welch(series: &[f64], s: &WelchSettings) -> Vec<f64> {
        let n = s.segment_length;
        let w = s.window.coefficients(n);
        let wp: f64 = w.iter().map(|x| x * x).sum();
        let step = n - s.overlap;
        let segs = (series.len() - s.overlap) / step;
        let mut out = vec![0.0; n / 2 + 1];
        for seg in 0..segs {
            let mut buf: Vec<Complex<f64>> = series[seg * step..seg * step + n]
                .iter()
                .map(|&x| Complex::new(x, 0.0))
                .collect();
            detrend_in_place(&mut buf, s.detrend);
            for (k, o) in out.iter_mut().enumerate() {
                let mut acc = Complex::new(0.0, 0.0);
                for (j, c) in buf.iter().enumerate() {
                    let ang = -2.0 * PI * (k * j) as f64 / n as f64;
                    acc += c.re * w[j] * Complex::new(ang.cos(), ang.sin());
                }
                let two = if k == 0 || (n.is_multiple_of(2) && k == n / 2) {
                    1.0
                } else {
                    2.0
                };
                *o += two * acc.norm_sqr() / (s.sample_rate_hertz * wp) / segs as f64;
            }
        }
        out
    }

    #[test]
    fn paired_fft_welch_equals_the_textbook_definition() {
        // Welch 1967, eqs. for the averaged modified periodogram; checked for
        // odd and even segment counts and lengths, every window and detrend.
        let x = ar1(5, 301, 0.6, 1.3);
        for (n, overlap) in [(32, 16), (31, 10), (64, 0), (50, 49)] {
            for window in [Window::Rectangular, Window::Hann, Window::Hamming] {
                for detrend in [Detrend::None, Detrend::Constant, Detrend::Linear] {
                    let s = WelchSettings {
                        sample_rate_hertz: 2.5,
                        segment_length: n,
                        overlap,
                        window,
                        detrend,
                    };
                    let fast = welch_psd(&x, &s).unwrap();
                    let slow = naive_welch(&x, &s);
                    let peak = slow.iter().cloned().fold(0.0, f64::max);
                    for (a, b) in fast.density_per_hertz.iter().zip(&slow) {
                        assert!((a - b).abs() <= 1e-10 * peak, "{s:?}: {a} vs {b}");
                    }
                    assert_eq!(fast.frequencies_hertz.len(), n / 2 + 1);
                }
            }
        }
    }

    #[test]
    fn parseval_rectangular_window_without_overlap() {
        // Discrete Parseval theorem (derived): Σ_k S_k Δf = mean square.
        let mut x = ar1(11, 4096, 0.9, 1.0);
        let mean = x.iter().sum::<f64>() / x.len() as f64;
        x.iter_mut().for_each(|v| *v -= mean);
        let var = x.iter().map(|v| v * v).sum::<f64>() / x.len() as f64;
        for n in [256, 255, 4096] {
            let s = WelchSettings {
                sample_rate_hertz: 7.0,
                segment_length: n,
                overlap: 0,
                window: Window::Rectangular,
                detrend: Detrend::None,
            };
            let spectrum = welch_psd(&x[..(x.len() / n) * n], &s).unwrap();
            let used = &x[..(x.len() / n) * n];
            let used_ms = used.iter().map(|v| v * v).sum::<f64>() / used.len() as f64;
            assert!((spectrum.integral() - used_ms).abs() < 1e-12 * used_ms);
            if n == 4096 {
                assert!((spectrum.integral() - var).abs() < 1e-12 * var);
            }
        }
    }

    #[test]
    fn ar1_series_matches_its_analytic_spectrum() {
        // S(f) = 2σ²Δt / |1 − φ e^{−2πifΔt}|² (derived from the AR(1)
        // transfer function; one-sided). Welch estimates are χ²-distributed
        // around S with relative s.d. ≈ 1/√(K·0.95) for Hann at 50 % overlap
        // (Welch 1967, Table 1 (memory)); K = 4095 segments → ≈ 1.6 %.
        let (phi, sigma, dt) = (0.8, 0.7, 0.01);
        let x = ar1(2027, 1 << 20, phi, sigma);
        // No detrending: subtracting each segment's mean removes the power
        // that the Hann main lobe (±2 bins) carries from DC into bins 1–2.
        let s = WelchSettings {
            detrend: Detrend::None,
            ..WelchSettings::hann(1.0 / dt, 512)
        };
        let spectrum = welch_psd(&x, &s).unwrap();
        assert_eq!(spectrum.segments, 4095);
        let relative_sd = 1.0 / (spectrum.segments as f64 * 0.95).sqrt();
        let mut sum_ratio = 0.0;
        let mut count = 0;
        for (f, estimate) in spectrum
            .frequencies_hertz
            .iter()
            .zip(&spectrum.density_per_hertz)
            .skip(1)
            .take(255)
        {
            let z = Complex::new(0.0, -2.0 * PI * f * dt).exp();
            let exact = 2.0 * sigma * sigma * dt / (Complex::new(1.0, 0.0) - z * phi).norm_sqr();
            let ratio = estimate / exact;
            assert!((ratio - 1.0).abs() < 6.0 * relative_sd, "f = {f}: {ratio}");
            sum_ratio += ratio;
            count += 1;
        }
        let mean_ratio = sum_ratio / count as f64;
        assert!((mean_ratio - 1.0).abs() < 4.0 * relative_sd / (count as f64).sqrt() + 2e-3);
    }

    #[test]
    fn welch_rejects_bad_input() {
        let s = WelchSettings::hann(1.0, 8);
        assert!(matches!(
            welch_psd(&[1.0; 5], &s),
            Err(SpectraError::TooShort { .. })
        ));
        assert!(matches!(
            welch_psd(&[1.0, f64::NAN, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0], &s),
            Err(SpectraError::NonFinite { index: 1 })
        ));
        let bad_overlap = WelchSettings {
            overlap: 8,
            ..s.clone()
        };
        assert!(welch_psd(&[1.0; 16], &bad_overlap).is_err());
        let bad_rate = WelchSettings {
            sample_rate_hertz: 0.0,
            ..s
        };
        assert!(welch_psd(&[1.0; 16], &bad_rate).is_err());
    }

    #[test]
    fn fft_autocovariance_equals_direct_sums() {
        // Definition of the sample autocovariance (common practice).
        let x = normals(3, 257);
        let n = x.len();
        let mean = x.iter().sum::<f64>() / n as f64;
        for norm in [Normalisation::Biased, Normalisation::Unbiased] {
            let c = autocovariance_fft(&x, 300, norm).unwrap();
            assert_eq!(c.len(), n);
            for (t, ct) in c.iter().enumerate() {
                let direct: f64 = (0..n - t).map(|k| (x[k] - mean) * (x[k + t] - mean)).sum();
                let d = match norm {
                    Normalisation::Biased => n,
                    Normalisation::Unbiased => n - t,
                };
                assert!((ct - direct / d as f64).abs() < 1e-12, "t = {t}");
            }
        }
        let rho = autocorrelation_fft(&[2.0; 10], 3, Normalisation::Biased).unwrap();
        assert_eq!(rho, vec![1.0, 0.0, 0.0, 0.0]);
    }

    #[test]
    fn fft_tau_int_agrees_with_observe_and_the_ar1_value() {
        // AR(1): ρ(t) = φ^t, τ_int = ½ + φ/(1−φ) = (1+φ)/(2(1−φ)) (derived).
        let phi = 0.9;
        let x = ar1(77, 200_000, phi, 1.0);
        let fft = integrated_autocorrelation_time_fft(&x).unwrap();
        let direct = crate::observe::integrated_autocorrelation_time(&x).unwrap();
        assert_eq!(fft.window, direct.window);
        assert!((fft.tau_samples - direct.tau_samples).abs() < 1e-9);
        let exact = (1.0 + phi) / (2.0 * (1.0 - phi));
        // Statistical error of τ_int: ≈ τ √(2(2W+1)/n) (Madras & Sokal 1988).
        let err = exact * (2.0 * (2.0 * fft.window as f64 + 1.0) / x.len() as f64).sqrt();
        assert!(
            (fft.tau_samples - exact).abs() < 4.0 * err,
            "{fft:?} vs {exact}"
        );
    }

    #[test]
    fn debye_relaxation_gives_debye_susceptibility_and_its_peak() {
        // C = e^{−t/τ} ⇒ χ/χ0 = 1/(1 + iωτ) (derived from the FDT integral).
        let tau = 2.0e-3;
        let dt = tau / 100.0;
        let c: Vec<f64> = (0..4000).map(|k| (-(k as f64) * dt / tau).exp()).collect();
        let freqs = log_spaced_frequencies(1.0, 1.0e4, 61).unwrap();
        let chi = dynamic_susceptibility(&c, dt, 3.0, &freqs).unwrap();
        for ((f, re), im) in freqs.iter().zip(&chi.chi_real).zip(&chi.chi_imag) {
            let wt = 2.0 * PI * f * tau;
            let exact_re = 3.0 / (1.0 + wt * wt);
            let exact_im = 3.0 * wt / (1.0 + wt * wt);
            assert!((re - exact_re).abs() < 3e-4, "f = {f}: {re} vs {exact_re}");
            assert!((im - exact_im).abs() < 3e-4, "f = {f}: {im} vs {exact_im}");
        }
        let tau_peak = relaxation_time_from_peak(&freqs, &chi.chi_imag).unwrap();
        assert!((tau_peak / tau - 1.0).abs() < 0.01, "{tau_peak}");
        // A monotone χ'' has no peak inside the grid.
        assert!(relaxation_time_from_peak(&freqs[..10], &chi.chi_imag[..10]).is_err());
    }
}
