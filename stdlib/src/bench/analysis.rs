//! Benchmarks of the time-series and percolation analyses.

use super::BenchRecord;
use crate::control::Interrupt;
use crate::percolation::{newman_ziff, LatticeKind, PercolationGraph, PercolationKind};
use crate::rng::RngStreams;
use crate::spectra::{welch_psd, Detrend, WelchSettings, Window};
use rand::Rng;
use std::time::{Duration, Instant};

/// Welch PSD throughput (input samples per second) for a 2^24-sample
/// series, Hann window, 4096-sample segments, half overlap, one thread.
pub const WELCH_SAMPLES: &str = "welch_samples";

/// Full Newman–Ziff bond sweeps per second on the diamond lattice, L = 32
/// (262 144 sites, 524 288 bonds), one thread.
pub const PERCOLATION_SWEEP: &str = "percolation_sweep";

/// Parameters of the analysis benchmarks.
#[derive(Clone, Debug)]
pub struct AnalysisBench {
    /// log2 of the Welch series length.
    pub welch_log2_samples: u32,
    /// Welch segment length.
    pub welch_segment_length: usize,
    /// Timed Welch repetitions (the best counts).
    pub welch_rounds: u32,
    /// Diamond cells per side for the percolation sweep.
    pub percolation_cells_per_side: usize,
    /// Wall time spent sweeping.
    pub percolation_budget: Duration,
}

impl Default for AnalysisBench {
    fn default() -> Self {
        Self {
            welch_log2_samples: 24,
            welch_segment_length: 4096,
            welch_rounds: 3,
            percolation_cells_per_side: 32,
            percolation_budget: Duration::from_secs(3),
        }
    }
}

/// The [`WELCH_SAMPLES`] workload.
pub fn welch_samples(params: &AnalysisBench, interrupt: &Interrupt) -> BenchRecord {
    let n = 1usize << params.welch_log2_samples.min(30);
    let mut rng = RngStreams::new(2026).stream(0);
    // AR(1) with φ = 0.9 from uniform noise: realistic content, cheap to make.
    let mut x = 0.0;
    let series: Vec<f64> = (0..n)
        .map(|_| {
            x = 0.9 * x + (rng.gen::<f64>() - 0.5);
            x
        })
        .collect();
    let settings = WelchSettings {
        sample_rate_hertz: 1.0,
        segment_length: params.welch_segment_length,
        overlap: params.welch_segment_length / 2,
        window: Window::Hann,
        detrend: Detrend::Constant,
    };
    let mut best = 0.0f64;
    let mut extra = serde_json::Map::new();
    for _ in 0..params.welch_rounds.max(1) {
        if interrupt.is_requested() {
            extra.insert("interrupted".into(), true.into());
            break;
        }
        let start = Instant::now();
        match welch_psd(&series, &settings) {
            Ok(s) => {
                std::hint::black_box(&s);
                best = best.max(n as f64 / start.elapsed().as_secs_f64());
            }
            Err(e) => {
                extra.insert("error".into(), e.to_string().into());
                break;
            }
        }
    }
    extra.insert("samples".into(), n.into());
    extra.insert("segment_length".into(), settings.segment_length.into());
    extra.insert("overlap".into(), settings.overlap.into());
    extra.insert("window".into(), "hann".into());
    extra.insert("threads".into(), 1.into());
    BenchRecord {
        bench: WELCH_SAMPLES.into(),
        value: best,
        unit: "samples/s".into(),
        extra,
    }
}

/// The [`PERCOLATION_SWEEP`] workload.
pub fn percolation_sweep(params: &AnalysisBench, interrupt: &Interrupt) -> BenchRecord {
    let mut extra = serde_json::Map::new();
    let l = params.percolation_cells_per_side;
    extra.insert("L".into(), l.into());
    extra.insert("lattice".into(), "diamond".into());
    extra.insert("kind".into(), "bond".into());
    extra.insert("threads".into(), 1.into());
    let graph = match PercolationGraph::lattice(LatticeKind::Diamond, l) {
        Ok(g) => g,
        Err(e) => {
            extra.insert("error".into(), e.to_string().into());
            return BenchRecord {
                bench: PERCOLATION_SWEEP.into(),
                value: 0.0,
                unit: "sweeps/s".into(),
                extra,
            };
        }
    };
    extra.insert("bonds".into(), graph.edge_count().into());
    let mut rng = RngStreams::new(2026).stream(1);
    let start = Instant::now();
    let mut sweeps = 0usize;
    while start.elapsed() < params.percolation_budget {
        if interrupt.is_requested() {
            extra.insert("interrupted".into(), true.into());
            break;
        }
        match newman_ziff(&graph, PercolationKind::Bond, 1, &mut rng, interrupt) {
            Ok(run) => {
                std::hint::black_box(&run);
                sweeps += 1;
            }
            Err(e) => {
                extra.insert("error".into(), e.to_string().into());
                break;
            }
        }
    }
    extra.insert("sweeps".into(), sweeps.into());
    BenchRecord {
        bench: PERCOLATION_SWEEP.into(),
        value: sweeps as f64 / start.elapsed().as_secs_f64(),
        unit: "sweeps/s".into(),
        extra,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn small_analysis_benches_report_their_fields() {
        let params = AnalysisBench {
            welch_log2_samples: 14,
            welch_segment_length: 256,
            welch_rounds: 1,
            percolation_cells_per_side: 3,
            percolation_budget: Duration::from_millis(50),
        };
        let w = serde_json::to_value(welch_samples(&params, &Interrupt::new())).unwrap();
        assert_eq!(w["bench"], "welch_samples");
        assert_eq!(w["samples"], 16384);
        assert!(w["value"].as_f64().unwrap() > 0.0);
        let p = serde_json::to_value(percolation_sweep(&params, &Interrupt::new())).unwrap();
        assert_eq!(p["bench"], "percolation_sweep");
        assert!(p["sweeps"].as_u64().unwrap() >= 1);
        assert!(p["value"].as_f64().unwrap() > 0.0);
    }
}
