//! The analysis commands: `spectrum`, `autocorrelation`, `susceptibility` and `fit`, run
//! on tables of synthetic series with known parameters, and their error messages.

mod common;
use common::*;
use icefield_lang::workspace::{Column, Table, Value};
use icefield_lang::Session;
use icefield_stdlib::rng::splitmix64_mix;
use std::f64::consts::PI;

/// Uniform variates in (0, 1) from the SplitMix64 finaliser of a counter (Steele, Lea &
/// Flood, OOPSLA 2014, 453): independent of any generator state, so every test series
/// is fixed by its seed.
fn uniforms(seed: u64, n: usize) -> Vec<f64> {
    (0..n as u64)
        .map(|i| {
            let bits = splitmix64_mix(seed.wrapping_mul(0x9e37_79b9_7f4a_7c15) ^ (i + 1));
            ((bits >> 11) as f64 + 0.5) / (1u64 << 53) as f64
        })
        .collect()
}

/// Standard normal variates by Box–Muller (Box & Muller, Ann. Math. Stat. 29, 610 (1958)).
fn normals(seed: u64, n: usize) -> Vec<f64> {
    let u = uniforms(seed, n + 1);
    (0..n)
        .map(|k| {
            let (u1, u2) = (u[k - k % 2], u[k - k % 2 + 1]);
            let r = (-2.0 * u1.ln()).sqrt();
            if k % 2 == 0 {
                r * (2.0 * PI * u2).cos()
            } else {
                r * (2.0 * PI * u2).sin()
            }
        })
        .collect()
}

/// `x_k = φ x_{k−1} + σ ε_k`, started in its stationary distribution.
fn ar1(seed: u64, n: usize, phi: f64, sigma: f64) -> Vec<f64> {
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

fn column(name: &str, unit: &str, values: Vec<f64>) -> Column {
    Column {
        name: name.to_string(),
        unit: unit.to_string(),
        values,
        errors: None,
        derived_from: None,
    }
}

fn insert(session: &mut Session, name: &str, columns: Vec<Column>) {
    session.workspace_mut().insert(
        name,
        Value::Table(Table {
            name: name.to_string(),
            columns,
            provenance: None,
        }),
    );
}

/// A time series table `t` [s], `M` [μ] sampled every `dt` seconds.
fn series_table(session: &mut Session, name: &str, m: Vec<f64>, dt: f64) {
    let t = (0..m.len()).map(|k| k as f64 * dt).collect();
    insert(
        session,
        name,
        vec![column("t", "s", t), column("M", "μ", m)],
    );
}

fn values(session: &Session, table: &str, column: &str) -> Vec<f64> {
    session
        .workspace()
        .table(table)
        .unwrap_or_else(|| panic!("no table {table}"))
        .column(column)
        .unwrap_or_else(|| panic!("no column {table}.{column}"))
        .values
        .clone()
}

fn one(session: &Session, table: &str, column: &str) -> f64 {
    let v = values(session, table, column);
    assert_eq!(v.len(), 1, "{table}.{column}");
    v[0]
}

fn mean_square_deviation(x: &[f64]) -> f64 {
    let mean = x.iter().sum::<f64>() / x.len() as f64;
    x.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / x.len() as f64
}

/// |fitted − true| < 3σ (the 3σ rule for a Gaussian estimate; common practice).
fn assert_within_3_sigma(session: &Session, fit: &str, parameter: &str, truth: f64) {
    let value = one(session, fit, parameter);
    let error = one(session, fit, &format!("{parameter}_error"));
    assert!(
        error.is_finite() && error > 0.0,
        "{parameter}: error {error}"
    );
    assert!(
        (value - truth).abs() < 3.0 * error,
        "{fit}.{parameter} = {value} ± {error}, true {truth}"
    );
}

#[test]
fn welch_spectrum_of_white_noise_integrates_to_its_variance() {
    // Discrete Parseval theorem: for one rectangular segment without detrending
    // Σ_k S_k Δf = (1/N) Σ_n x_n² exactly, and with constant detrending the mean
    // square deviation (exact; e.g. Oppenheim & Schafer, Discrete-Time Signal
    // Processing, 3rd ed. (2010), §8.6 (memory)).
    let mut session = Session::new();
    let dt = 1e-6;
    let m: Vec<f64> = normals(11, 8192).iter().map(|e| 0.7 + 2.5 * e).collect();
    series_table(&mut session, "noise", m.clone(), dt);
    let collected = ok(
        &mut session,
        "whole = spectrum noise.M, segment = 8192, window = rectangular, overlap = 0, detrend = constant\n\
         raw = spectrum noise.M against t, segment = 8192, window = rectangular, overlap = 0, detrend = none",
    );
    let df = 1.0 / (8192.0 * dt);
    let integral = |name: &str| values(&session, name, "psd").iter().sum::<f64>() * df;
    let variance = mean_square_deviation(&m);
    let mean_square = m.iter().map(|v| v * v).sum::<f64>() / m.len() as f64;
    assert!(
        (integral("whole") / variance - 1.0).abs() < 1e-12,
        "{} vs {variance}",
        integral("whole")
    );
    assert!((integral("raw") / mean_square - 1.0).abs() < 1e-12);
    // Several segments: the average of the segments' mean square deviations.
    ok(
        &mut session,
        "split = spectrum noise.M, segment = 1024, window = rectangular, overlap = 0",
    );
    let per_segment: f64 = m.chunks(1024).map(mean_square_deviation).sum::<f64>() / 8.0;
    let split = values(&session, "split", "psd").iter().sum::<f64>() / (1024.0 * dt);
    assert!((split / per_segment - 1.0).abs() < 1e-12);
    // The table's axes: f from 0 to the Nyquist frequency in Hz, psd in μ²/Hz.
    let table = session.workspace().table("whole").unwrap();
    assert_eq!(table.column("f").unwrap().unit, "Hz");
    assert_eq!(table.column("psd").unwrap().unit, "μ²/Hz");
    let f = values(&session, "whole", "f");
    assert_eq!(f.len(), 4097);
    assert!((f[4096] - 0.5 / dt).abs() < 1e-6);
    // A figure is stored beside the table and shown, and the summary quotes Parseval.
    assert!(matches!(
        session.workspace().get("whole_figure"),
        Some(Value::Figure(_))
    ));
    assert!(!collected.displays.is_empty());
    assert!(collected.streams.concat().contains("∫ psd df"));
}

#[test]
fn ar1_spectrum_matches_the_analytic_spectrum() {
    // AR(1), x_k = φ x_{k−1} + σ ε_k, has the one-sided spectrum
    // S(f) = 2 σ² Δt / |1 − φ e^{−2πifΔt}|² for 0 < f < f_N (Priestley, Spectral Analysis
    // and Time Series (1981), §4.12 (memory)).
    let mut session = Session::new();
    let (phi, sigma, dt) = (0.9, 0.3, 2e-6);
    let n = 1 << 18;
    series_table(&mut session, "noise", ar1(5, n, phi, sigma), dt);
    ok(&mut session, "spec = spectrum noise.M, segment = 1024");
    let f = values(&session, "spec", "f");
    let s = values(&session, "spec", "psd");
    let segments = (n - 512) / 512; // 50 % overlap
                                    // Welch estimate: each bin is an average of `segments` periodograms, of which at
                                    // least half do not overlap, so its relative standard deviation is at most
                                    // 1/√(segments/2) (Welch, IEEE Trans. Audio Electroacoust. 15, 70 (1967)).
    let sigma_bin = 1.0 / (segments as f64 / 2.0).sqrt();
    let mut ratios = Vec::new();
    for k in 4..f.len() - 4 {
        let z = 1.0 - 2.0 * phi * (2.0 * PI * f[k] * dt).cos() + phi * phi;
        let analytic = 2.0 * sigma * sigma * dt / z;
        let ratio = s[k] / analytic;
        assert!(
            (ratio - 1.0).abs() < 5.0 * sigma_bin,
            "bin {k}: f = {} Hz, ratio {ratio}",
            f[k]
        );
        ratios.push(ratio);
    }
    // The mean over ~500 bins (adjacent Hann bins correlated, so at most half of them
    // independent) is within 4σ of 1; leakage bias of the Hann window at this
    // resolution (Δf/peak width ≈ 0.06) is below 0.5 % (derived).
    let mean = ratios.iter().sum::<f64>() / ratios.len() as f64;
    let sigma_mean = sigma_bin / (ratios.len() as f64 / 2.0).sqrt();
    assert!(
        (mean - 1.0).abs() < 4.0 * sigma_mean + 0.005,
        "mean ratio {mean}, σ {sigma_mean}"
    );
}

#[test]
fn autocorrelation_of_ar1_gives_its_relaxation_time() {
    // AR(1): ρ(k) = φ^k and τ_int = ½ + Σ_{k≥1} φ^k = (1 + φ)/(2(1 − φ)) samples
    // (derived; the definition of Madras & Sokal, J. Stat. Phys. 50, 109 (1988)).
    let mut session = Session::new();
    let (phi, dt) = (0.95, 1e-6);
    let n = 1 << 18;
    series_table(&mut session, "noise", ar1(8, n, phi, 1.0), dt);
    let collected = ok(
        &mut session,
        "acf = autocorrelation noise.M, max_lag = 200 µs",
    );
    let lag = values(&session, "acf", "lag");
    let c = values(&session, "acf", "C");
    assert_eq!(lag.len(), 201);
    assert!((lag[200] - 200e-6).abs() < 1e-15);
    assert_eq!(c[0], 1.0);
    // Statistical error of ρ(k) for small k is about √(2 τ_int / n) (Bartlett's formula
    // for an AR(1) process; Priestley (1981) §5.3 (memory)): 6σ ≈ 0.047 here.
    let tau_samples = (1.0 + phi) / (2.0 * (1.0 - phi));
    let bound = 6.0 * (2.0 * 2.0 * tau_samples / n as f64).sqrt();
    for k in [1, 5, 20, 60] {
        assert!(
            (c[k] - phi.powi(k as i32)).abs() < bound,
            "C({k}) = {}, φ^k = {}",
            c[k],
            phi.powi(k as i32)
        );
    }
    let tau = one(&session, "acf_tau", "tau_int");
    let error = one(&session, "acf_tau", "tau_int_error");
    assert!(
        (tau - tau_samples * dt).abs() < 3.0 * error,
        "{tau} ± {error} vs {}",
        tau_samples * dt
    );
    assert!(collected.streams.concat().contains("τ_int"));
}

#[test]
fn susceptibility_of_an_exponential_relaxation_is_the_debye_form() {
    // C(t) = e^{−t/τ} gives the Debye form χ0/(1 + iωτ): χ''/χ0 = ωτ/(1 + ω²τ²), which
    // peaks at ωτ = 1 (derived; physics-reference §6). AR(1) with φ = e^{−Δt/τ} has
    // exactly that C at the sample times.
    let (tau, dt): (f64, f64) = (20e-6, 1e-6);
    let phi = (-dt / tau).exp();
    let n = 1 << 18;
    let realisations = 8;
    let mut mean_chi = Vec::new();
    let mut f = Vec::new();
    for seed in 0..realisations {
        let mut session = Session::new();
        let m = ar1(100 + seed, n, phi, 1.0);
        let variance = mean_square_deviation(&m);
        series_table(&mut session, "noise", m, dt);
        ok(&mut session, "chi = susceptibility noise.M at 0.4 K");
        // FDT static limit χ0 = ⟨δM²⟩/(k_B T) (Kubo, J. Phys. Soc. Jpn. 12, 570 (1957)).
        let chi0 = one(&session, "chi_tau", "chi0");
        assert!((chi0 / (variance / 0.4) - 1.0).abs() < 1e-9);
        f = values(&session, "chi", "f");
        let chi_imag = values(&session, "chi", "chi_imag");
        mean_chi.resize(f.len(), 0.0);
        for (sum, c) in mean_chi.iter_mut().zip(&chi_imag) {
            *sum += c / chi0 / realisations as f64;
        }
        if seed == 0 {
            let unit = &session.workspace().table("chi").unwrap();
            assert_eq!(unit.column("chi_imag").unwrap().unit, "μ²/K");
            // The Debye peak is flat, χ''/χ''_max = 1/cosh(ln ωτ), so a relative noise ε
            // of χ'' moves it by about √(2ε) in ln f (derived): ε ≈ 0.02 for one record
            // of 13 000 τ gives ±20 %, so 35 % here.
            let single = one(&session, "chi_tau", "tau");
            assert!((single / tau - 1.0).abs() < 0.35, "τ = {single}");
        }
    }
    // The mean of 8 records: χ''/χ0 follows Debye to 0.03 everywhere (noise of one
    // record ≈ 0.04 near the peak, /√8; piecewise-linear integration of C adds
    // (Δt/τ)²/12 ≈ 2·10⁻⁴; derived); its flat peak gives τ to √(2·0.01) ≈ 15 %, so 20 %.
    for (f, c) in f.iter().zip(&mean_chi) {
        let w = 2.0 * PI * f * tau;
        let debye = w / (1.0 + w * w);
        assert!((c - debye).abs() < 0.03, "f = {f} Hz: {c} vs Debye {debye}");
    }
    let peak = icefield_stdlib::spectra::relaxation_time_from_peak(&f, &mean_chi).unwrap();
    assert!((peak / tau - 1.0).abs() < 0.2, "τ = {peak}");
}

#[test]
fn power_law_fit_over_a_band_recovers_the_exponent() {
    // S = A f^−b with lognormal scatter of 10 % inside 10 Hz – 1 kHz, a flat plateau
    // outside it: only the band enters the fit. 3σ rule (common practice).
    let mut session = Session::new();
    let (a, b) = (3.0e-3, 1.5);
    let f: Vec<f64> = (0..2049).map(|k| k as f64 * 2.0).collect();
    let eps = normals(3, f.len());
    let psd: Vec<f64> = f
        .iter()
        .zip(&eps)
        .map(|(f, e)| {
            if (10.0..=1000.0).contains(f) {
                a * f.powf(-b) * (0.1 * e).exp()
            } else {
                1.0
            }
        })
        .collect();
    insert(
        &mut session,
        "spec",
        vec![column("f", "Hz", f), column("psd", "μ²/Hz", psd)],
    );
    let collected = ok(
        &mut session,
        "slope = fit spec.psd with power_law over f from 10 Hz to 1 kHz",
    );
    assert_within_3_sigma(&session, "slope", "b", b);
    assert_within_3_sigma(&session, "slope", "A", a);
    // The one-row table carries units, the figure the exponent in its legend.
    let table = session.workspace().table("slope").unwrap();
    assert_eq!(table.column("b").unwrap().unit, "");
    assert_eq!(table.column("A").unwrap().unit, "μ²/Hz·Hz^b");
    let Some(Value::Figure(figure)) = session.workspace().get("slope_figure") else {
        panic!("no figure");
    };
    assert!(figure.series[1].label.starts_with("fit: b = 1.5"));
    assert!(figure.svg.contains("fit: b = 1.5"));
    let text = collected.streams.concat();
    assert!(
        text.contains("b = 1.5") && text.contains("χ²/dof"),
        "{text}"
    );
    // The default name is `last_fit`.
    ok(
        &mut session,
        "fit spec.psd with power_law over f from 10 Hz to 1 kHz",
    );
    assert_eq!(one(&session, "last_fit", "b"), one(&session, "slope", "b"));
}

#[test]
fn relaxation_fits_recover_their_parameters() {
    // y = A e^{−t/τ} and A e^{−(t/τ)^β} with Gaussian noise of 0.01; 3σ rule.
    let mut session = Session::new();
    let lag: Vec<f64> = (0..200).map(|k| k as f64 * 1e-6).collect();
    let eps = normals(17, lag.len());
    let exp: Vec<f64> = lag
        .iter()
        .zip(&eps)
        .map(|(t, e)| 0.98 * (-t / 30e-6).exp() + 0.01 * e)
        .collect();
    let stretched: Vec<f64> = lag
        .iter()
        .zip(&eps)
        .map(|(t, e)| (-(t / 25e-6).powf(0.6)).exp() + 0.01 * e)
        .collect();
    insert(
        &mut session,
        "acf",
        vec![
            column("lag", "s", lag),
            column("C", "", exp),
            column("Cs", "", stretched),
        ],
    );
    ok(
        &mut session,
        "e = fit acf.C with exp\ns = fit acf.Cs against lag with stretched_exp",
    );
    assert_within_3_sigma(&session, "e", "A", 0.98);
    assert_within_3_sigma(&session, "e", "tau", 30e-6);
    assert_within_3_sigma(&session, "s", "tau", 25e-6);
    assert_within_3_sigma(&session, "s", "beta", 0.6);
    assert_within_3_sigma(&session, "s", "A", 1.0);
    let table = session.workspace().table("e").unwrap();
    assert_eq!(table.column("tau").unwrap().unit, "s");
    assert_eq!(table.column("tau_error").unwrap().unit, "s");
}

#[test]
fn noise_form_fit_recovers_tau_and_b() {
    // S(ω) = A τ/(1 + (ωτ)^b), ω = 2πf, with 5 % lognormal scatter; 3σ rule.
    let mut session = Session::new();
    let (a, tau, b) = (2.0, 1e-3, 1.5);
    let f: Vec<f64> = (0..400).map(|k| 1.0 + k as f64 * 5.0).collect();
    let eps = normals(29, f.len());
    let psd: Vec<f64> = f
        .iter()
        .zip(&eps)
        .map(|(f, e)| a * tau / (1.0 + (2.0 * PI * f * tau).powf(b)) * (0.05 * e).exp())
        .collect();
    insert(
        &mut session,
        "spec",
        vec![column("f", "Hz", f), column("psd", "μ²/Hz", psd)],
    );
    ok(&mut session, "nf = fit spec.psd with noise_form");
    assert_within_3_sigma(&session, "nf", "tau", tau);
    assert_within_3_sigma(&session, "nf", "b", b);
    assert_within_3_sigma(&session, "nf", "A", a);
}

#[test]
fn arrhenius_fit_uses_the_error_bars_of_tau() {
    // τ = τ∞ e^{Δ/T} with 4 % relative errors given as error bars; 3σ rule.
    let mut session = Session::new();
    let (tau_inf, barrier) = (1e-9, 6.0);
    let t: Vec<f64> = (0..12).map(|k| 0.6 + 0.1 * k as f64).collect();
    let eps = normals(41, t.len());
    let tau: Vec<f64> = t
        .iter()
        .zip(&eps)
        .map(|(t, e)| tau_inf * (barrier / t).exp() * (1.0 + 0.04 * e))
        .collect();
    let errors: Vec<f64> = tau.iter().map(|v| 0.04 * v).collect();
    let mut tau_column = column("tau", "s", tau);
    tau_column.errors = Some(errors);
    insert(&mut session, "taus", vec![column("T", "K", t), tau_column]);
    let collected = ok(&mut session, "act = fit taus.tau against T with arrhenius");
    assert_within_3_sigma(&session, "act", "tau_infinity", tau_inf);
    assert_within_3_sigma(&session, "act", "barrier", barrier);
    let table = session.workspace().table("act").unwrap();
    assert_eq!(table.column("barrier").unwrap().unit, "K");
    assert!(collected
        .streams
        .concat()
        .contains("errors from the column's error bars"));
}

#[test]
fn a_spectrum_and_its_fit_run_in_one_cell() {
    // The checker knows the spectrum's columns, so a fit and a plot of it can follow in
    // the same cell. White noise: S = 2σ²Δt flat, so b ≈ 0 (Priestley (1981) §4.12 (memory)).
    let mut session = Session::new();
    series_table(&mut session, "noise", normals(2, 1 << 15), 1e-6);
    ok(
        &mut session,
        "spec = spectrum noise.M, segment = 512\n\
         flat = fit spec.psd with power_law over f from 10 kHz to 400 kHz\n\
         plot spec.psd against f, xscale = log, yscale = log",
    );
    let b = one(&session, "flat", "b");
    let error = one(&session, "flat", "b_error");
    assert!(b.abs() < 3.0 * error, "b = {b} ± {error}");
}

fn position(code: &str, needle: &str) -> (usize, usize) {
    let offset = code.find(needle).expect(needle);
    let line = code[..offset].matches('\n').count() + 1;
    let line_start = code[..offset].rfind('\n').map_or(0, |i| i + 1);
    (line, code[line_start..offset].chars().count() + 1)
}

#[test]
fn an_unknown_column_is_a_name_error_with_a_suggestion() {
    let mut session = Session::new();
    series_table(&mut session, "noise", normals(1, 256), 1e-6);
    let code = "seed 1\nspec = spectrum noise.MM, segment = 64";
    let error = fails(&mut session, code);
    assert_eq!(error.kind, "NameError");
    assert_eq!(error.message, "table `noise` has no column `MM`");
    let d = &error.diagnostics[0];
    assert_eq!((d.line, d.column), position(code, "MM"));
    assert_eq!(d.help.as_deref(), Some("did you mean `M`?"));
    // An unknown fit model and an unknown table too.
    let error = fails(&mut session, "fit noise.M with power_lwa");
    assert_eq!(error.kind, "NameError");
    assert_eq!(
        error.diagnostics[0].help.as_deref(),
        Some("did you mean `power_law`?")
    );
    let error = fails(&mut session, "spectrum nosie.M");
    assert_eq!(error.kind, "NameError");
    assert_eq!(
        (error.diagnostics[0].line, error.diagnostics[0].column),
        (1, 10)
    );
}

#[test]
fn band_limits_in_the_wrong_unit_are_unit_errors() {
    let mut session = Session::new();
    let f: Vec<f64> = (0..100).map(|k| k as f64).collect();
    let psd = f.iter().map(|f| 1.0 / (1.0 + f)).collect();
    insert(
        &mut session,
        "spec",
        vec![column("f", "Hz", f), column("psd", "μ²/Hz", psd)],
    );
    let code = "fit spec.psd with power_law over f from 10 ms to 1 kHz";
    let error = fails(&mut session, code);
    assert_eq!(error.kind, "UnitError");
    assert!(
        error.message.contains("needs a frequency unit") && error.message.contains("`ms`"),
        "{}",
        error.message
    );
    let d = &error.diagnostics[0];
    assert_eq!((d.line, d.column), position(code, "ms"));
    // A bare number needs a unit; a spectrum needs a time axis; exp needs one too.
    let error = fails(
        &mut session,
        "fit spec.psd with power_law over f from 10 to 20 Hz",
    );
    assert_eq!(error.kind, "UnitError");
    let code = "fit spec.psd with exp";
    let error = fails(&mut session, code);
    assert_eq!(error.kind, "UnitError");
    assert!(
        error.message.contains("needs a time axis"),
        "{}",
        error.message
    );
    let error = fails(&mut session, "spectrum spec.psd against f");
    assert_eq!(error.kind, "UnitError");
    assert_eq!(
        (error.diagnostics[0].line, error.diagnostics[0].column),
        (1, 19)
    );
}

#[test]
fn a_non_uniform_grid_is_a_value_error_naming_the_row() {
    let mut session = Session::new();
    let mut t: Vec<f64> = (0..512).map(|k| k as f64 * 1e-6).collect();
    t[100] += 0.3e-6;
    insert(
        &mut session,
        "noise",
        vec![column("t", "s", t), column("M", "μ", normals(4, 512))],
    );
    let code = "seed 2\nacf = autocorrelation noise.M";
    let error = fails(&mut session, code);
    assert_eq!(error.kind, "ValueError");
    assert!(
        error.message.contains("not a uniform grid") && error.message.contains("row 101"),
        "{}",
        error.message
    );
    let d = &error.diagnostics[0];
    assert_eq!((d.line, d.column), position(code, "noise.M"));
    // Nothing was stored.
    assert!(session.workspace().get("acf").is_none());
    let error = fails(&mut session, "spectrum noise.M, segment = 64");
    assert!(error.message.contains("row 101"), "{}", error.message);
}

#[test]
fn a_band_outside_the_data_is_a_value_error() {
    let mut session = Session::new();
    let f: Vec<f64> = (0..501).map(|k| k as f64).collect();
    let psd = f.iter().map(|f| 1.0 / (1.0 + f)).collect();
    insert(
        &mut session,
        "spec",
        vec![column("f", "Hz", f), column("psd", "μ²/Hz", psd)],
    );
    let code = "fit spec.psd with power_law over f from 10 Hz to 1 MHz";
    let error = fails(&mut session, code);
    assert_eq!(error.kind, "ValueError");
    assert!(
        error.message.contains("outside the data") && error.message.contains("500 Hz"),
        "{}",
        error.message
    );
    let d = &error.diagnostics[0];
    assert_eq!((d.line, d.column), position(code, "1 MHz"));
    // Too few points in a narrow band, an inverted band, a segment longer than the series.
    let error = fails(
        &mut session,
        "fit spec.psd with power_law over f from 10 Hz to 11 Hz",
    );
    assert_eq!(error.kind, "ValueError");
    assert!(
        error.message.contains("at least 3 points"),
        "{}",
        error.message
    );
    let error = fails(
        &mut session,
        "fit spec.psd with power_law over f from 20 Hz to 10 Hz",
    );
    assert_eq!(error.kind, "ValueError");
}

#[test]
fn phrases_that_do_not_fit_are_reported() {
    let mut session = Session::new();
    series_table(&mut session, "noise", normals(1, 256), 1e-6);
    // Susceptibility needs its temperature; a command does not take foreign words.
    let error = fails(&mut session, "susceptibility noise.M");
    assert_eq!(error.kind, "ValueError");
    assert!(error.message.contains("temperature"), "{}", error.message);
    let error = fails(&mut session, "spectrum noise.M with hann");
    assert_eq!(error.message, "`spectrum` does not take `with`");
    let error = fails(&mut session, "susceptibility noise.M at 0.4 T");
    assert_eq!(error.kind, "UnitError");
    let error = fails(&mut session, "spectrum noise.M, window = hammin");
    assert_eq!(
        error.diagnostics[0].help.as_deref(),
        Some("did you mean `hamming`?")
    );
    let error = fails(&mut session, "spectrum noise.M, segment = 4096");
    assert_eq!(error.kind, "ValueError");
    assert!(error.message.contains("longer than"), "{}", error.message);
    let error = fails(&mut session, "autocorrelation noise.M, max_lag = 1 s");
    assert!(
        error.message.contains("beyond the series"),
        "{}",
        error.message
    );
}
