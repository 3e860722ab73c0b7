//! Cross-check driver for `tests/test_spectra_scipy.py`: reads one JSON
//! object on stdin and prints one JSON object on stdout.
//!
//! * Welch PSD: `{"data": [...], "fs": 1.0, "nperseg": 256, "noverlap": 128,
//!   "window": "hann" | "hamming" | "boxcar", "detrend": "none" | "constant" |
//!   "linear"}` → `{"freqs": [...], "psd": [...]}` (icefield_stdlib::spectra::welch_psd).
//! * Stretched-exponential fit: `{"fit": "stretched_exponential", "t": [...],
//!   "y": [...]}` → `{"parameters": [A, tau, beta], "standard_errors": [...],
//!   "converged": bool}` (icefield_stdlib::fit::fit_stretched_exponential,
//!   errors scaled by the residual variance).
//!
//! Errors go to stderr with exit status 2.

use icefield_stdlib::fit::fit_stretched_exponential;
use icefield_stdlib::spectra::{welch_psd, Detrend, WelchSettings, Window};
use serde_json::{json, Value};
use std::io::Read;

fn numbers(value: &Value, key: &str) -> Result<Vec<f64>, String> {
    value
        .get(key)
        .and_then(Value::as_array)
        .ok_or_else(|| format!("missing array '{key}'"))?
        .iter()
        .enumerate()
        .map(|(i, v)| {
            v.as_f64()
                .ok_or_else(|| format!("'{key}'[{i}] is not a number"))
        })
        .collect()
}

fn count(value: &Value, key: &str) -> Result<usize, String> {
    value
        .get(key)
        .and_then(Value::as_u64)
        .map(|v| v as usize)
        .ok_or_else(|| format!("missing non-negative integer '{key}'"))
}

fn run(input: &str) -> Result<Value, String> {
    let request: Value = serde_json::from_str(input).map_err(|e| format!("bad JSON: {e}"))?;
    if let Some(kind) = request.get("fit") {
        if kind != "stretched_exponential" {
            return Err(format!("unknown fit {kind}"));
        }
        let fit =
            fit_stretched_exponential(&numbers(&request, "t")?, &numbers(&request, "y")?, None)
                .map_err(|e| e.to_string())?;
        return Ok(json!({
            "parameters": fit.parameters,
            "standard_errors": fit.standard_errors,
            "converged": fit.converged,
        }));
    }
    let data = numbers(&request, "data")?;
    let name = |key: &str| -> Result<String, String> {
        request
            .get(key)
            .and_then(Value::as_str)
            .map(str::to_string)
            .ok_or_else(|| format!("missing string '{key}'"))
    };
    let window_name = name("window")?;
    let detrend_name = name("detrend")?;
    let settings = WelchSettings {
        sample_rate_hertz: request
            .get("fs")
            .and_then(Value::as_f64)
            .ok_or("missing number 'fs'")?,
        segment_length: count(&request, "nperseg")?,
        overlap: count(&request, "noverlap")?,
        window: Window::from_name(&window_name)
            .ok_or_else(|| format!("unknown window '{window_name}'"))?,
        detrend: Detrend::from_name(&detrend_name)
            .ok_or_else(|| format!("unknown detrend '{detrend_name}'"))?,
    };
    let spectrum = welch_psd(&data, &settings).map_err(|e| e.to_string())?;
    Ok(json!({"freqs": spectrum.frequencies_hertz, "psd": spectrum.density_per_hertz}))
}

fn main() {
    let mut input = String::new();
    if let Err(e) = std::io::stdin().read_to_string(&mut input) {
        eprintln!("welch_json: cannot read stdin: {e}");
        std::process::exit(2);
    }
    match run(&input) {
        Ok(value) => println!("{value}"),
        Err(message) => {
            eprintln!("welch_json: {message}");
            std::process::exit(2);
        }
    }
}
