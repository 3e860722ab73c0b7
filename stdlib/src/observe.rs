//! Estimators with honest error bars for correlated Monte Carlo series.
//!
//! * Means get blocking (binning) errors: Flyvbjerg & Petersen, J. Chem.
//!   Phys. 91, 461 (1989). Repeatedly averaging neighbouring pairs leaves the
//!   mean unchanged and makes the naive error grow until blocks are longer
//!   than the correlation time; the plateau is the error of the mean.
//! * Integrated autocorrelation time `τ_int = ½ + Σ_{t≥1} ρ(t)` (so that
//!   `var(mean) = 2 τ_int σ²/n`), either from the blocking plateau or directly
//!   with the self-consistent window of Madras & Sokal, J. Stat. Phys. 50,
//!   109 (1988) (memory).
//! * Nonlinear functions of means (specific heat, susceptibility) get
//!   jackknife errors over blocks (Efron, The Jackknife, the Bootstrap and
//!   Other Resampling Plans, SIAM (1982); common practice in Monte Carlo).
//!
//! [`ThermodynamicSeries`] collects per-sample observables of a spin-ice run
//! in bounded memory and turns them into per-spin estimates.

use serde::{Deserialize, Serialize};

/// A value with its one-standard-deviation statistical error.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct Estimate {
    /// Estimated mean.
    pub mean: f64,
    /// One-σ error of `mean` (0 when the series is constant).
    pub error: f64,
}

impl Estimate {
    /// `mean ± error`.
    pub fn new(mean: f64, error: f64) -> Self {
        Self { mean, error }
    }

    /// Multiply mean and error by `factor` (error stays non-negative).
    pub fn scaled(self, factor: f64) -> Self {
        Self::new(self.mean * factor, self.error * factor.abs())
    }
}

/// Minimum number of blocks for a blocking level to be trusted (its error
/// estimate then has a relative uncertainty below 1/√30 ≈ 18 %).
pub const MIN_BLOCKS: usize = 16;

/// One level of a blocking analysis.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct BlockingLevel {
    /// Samples per block (2^level).
    pub block_size: usize,
    /// Number of blocks at this level.
    pub blocks: usize,
    /// Error of the mean estimated from these blocks, `√(c0/(n−1))`.
    pub error: f64,
    /// Uncertainty of `error`, `error/√(2(n−1))` (Flyvbjerg & Petersen eq. 28).
    pub error_of_error: f64,
}

/// Result of a Flyvbjerg–Petersen blocking analysis.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct BlockingAnalysis {
    /// Mean of the whole series.
    pub mean: f64,
    /// Variance of the individual samples (1/n normalisation).
    pub sample_variance: f64,
    /// All levels with at least two blocks.
    pub levels: Vec<BlockingLevel>,
    /// Index into `levels` of the plateau chosen.
    pub chosen_level: usize,
    /// Whether a plateau was seen (a later trusted level exists and none is
    /// significantly larger); `false` means the run is too short for its
    /// correlation time and `error` is a lower bound.
    pub converged: bool,
}

impl BlockingAnalysis {
    /// Error of the mean at the chosen plateau.
    pub fn error(&self) -> f64 {
        self.levels
            .get(self.chosen_level)
            .map(|l| l.error)
            .unwrap_or(0.0)
    }

    /// `mean ± error`.
    pub fn estimate(&self) -> Estimate {
        Estimate::new(self.mean, self.error())
    }

    /// Integrated autocorrelation time in samples, from
    /// `error² = 2 τ_int σ²/n` (at least ½, the uncorrelated value).
    pub fn integrated_autocorrelation_samples(&self, samples: usize) -> f64 {
        if self.sample_variance <= 0.0 || samples == 0 {
            return 0.5;
        }
        let e = self.error();
        (samples as f64 * e * e / (2.0 * self.sample_variance)).max(0.5)
    }
}

/// Flyvbjerg–Petersen blocking analysis of `series`.
///
/// The plateau is the first trusted level (≥ [`MIN_BLOCKS`] blocks) that no
/// later trusted level exceeds by more than twice that later level's own
/// uncertainty. Returns `None` for an empty series or one containing NaN/∞.
pub fn blocking_analysis(series: &[f64]) -> Option<BlockingAnalysis> {
    if series.is_empty() || series.iter().any(|x| !x.is_finite()) {
        return None;
    }
    let n = series.len();
    let mean = series.iter().sum::<f64>() / n as f64;
    let sample_variance = series.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / n as f64;
    let mut levels = Vec::new();
    let mut blocks: Vec<f64> = series.to_vec();
    let mut block_size = 1usize;
    if n == 1 {
        levels.push(BlockingLevel {
            block_size: 1,
            blocks: 1,
            error: 0.0,
            error_of_error: 0.0,
        });
    }
    while blocks.len() >= 2 {
        let m = blocks.len();
        let block_mean = blocks.iter().sum::<f64>() / m as f64;
        let c0 = blocks.iter().map(|x| (x - block_mean).powi(2)).sum::<f64>() / m as f64;
        let error = (c0 / (m - 1) as f64).sqrt();
        levels.push(BlockingLevel {
            block_size,
            blocks: m,
            error,
            error_of_error: error / (2.0 * (m - 1) as f64).sqrt(),
        });
        blocks = blocks
            .chunks_exact(2)
            .map(|p| 0.5 * (p[0] + p[1]))
            .collect();
        block_size *= 2;
    }
    let trusted: Vec<usize> = (0..levels.len())
        .filter(|&k| levels[k].blocks >= MIN_BLOCKS)
        .collect();
    let (chosen_level, converged) = if trusted.is_empty() {
        (0, false)
    } else {
        let chosen = trusted
            .iter()
            .copied()
            .find(|&k| {
                trusted
                    .iter()
                    .filter(|&&m| m > k)
                    .all(|&m| levels[m].error <= levels[k].error + 2.0 * levels[m].error_of_error)
            })
            .unwrap_or(*trusted.last().unwrap_or(&0));
        let last = *trusted.last().unwrap_or(&0);
        // A plateau needs evidence: either a later trusted level that agrees,
        // or a constant series.
        (chosen, chosen < last || levels[chosen].error == 0.0)
    };
    Some(BlockingAnalysis {
        mean,
        sample_variance,
        levels,
        chosen_level,
        converged,
    })
}

/// Integrated autocorrelation time with its summation window.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct AutocorrelationTime {
    /// `τ_int` in samples (½ for uncorrelated data).
    pub tau_samples: f64,
    /// Window `W`: `τ_int = ½ + Σ_{t=1}^{W} ρ(t)`.
    pub window: usize,
    /// Whether the window condition `W ≥ c τ_int(W)` was met before `n/4`.
    pub converged: bool,
}

/// Window constant `c` of the Madras–Sokal self-consistent window
/// (`c ≈ 4–10` recommended there; 6 is common practice).
pub const WINDOW_FACTOR: f64 = 6.0;

/// `τ_int` by direct summation of the normalised autocorrelation function
/// with the self-consistent window of Madras & Sokal (1988): the smallest
/// `W` with `W ≥ c·τ_int(W)`. Cost `O(n W)`. `None` for fewer than 4
/// samples or non-finite data.
pub fn integrated_autocorrelation_time(series: &[f64]) -> Option<AutocorrelationTime> {
    let n = series.len();
    if n < 4 || series.iter().any(|x| !x.is_finite()) {
        return None;
    }
    let mean = series.iter().sum::<f64>() / n as f64;
    let centred: Vec<f64> = series.iter().map(|x| x - mean).collect();
    let c0 = centred.iter().map(|x| x * x).sum::<f64>() / n as f64;
    if c0 == 0.0 {
        return Some(AutocorrelationTime {
            tau_samples: 0.5,
            window: 0,
            converged: true,
        });
    }
    let mut tau = 0.5;
    let max_window = n / 4;
    for t in 1..=max_window {
        let ct = centred[..n - t]
            .iter()
            .zip(&centred[t..])
            .map(|(a, b)| a * b)
            .sum::<f64>()
            / n as f64;
        tau += ct / c0;
        if t as f64 >= WINDOW_FACTOR * tau {
            return Some(AutocorrelationTime {
                tau_samples: tau.max(0.5),
                window: t,
                converged: true,
            });
        }
    }
    Some(AutocorrelationTime {
        tau_samples: tau.max(0.5),
        window: max_window,
        converged: false,
    })
}

/// Jackknife estimate of `f(column means)` over `blocks` equal blocks.
///
/// `columns[c][s]` is sample `s` of column `c` (all columns equally long).
/// The central value uses all samples; the error comes from the `blocks`
/// leave-one-block-out estimates over the first `blocks·⌊n/blocks⌋` samples:
/// `σ² = (B−1)/B Σ_b (θ_b − θ̄)²`. Returns `None` if the columns are empty or
/// ragged, or fewer than 2 blocks are possible.
pub fn jackknife<F>(columns: &[&[f64]], blocks: usize, f: F) -> Option<Estimate>
where
    F: Fn(&[f64]) -> f64,
{
    let n = columns.first()?.len();
    if columns.iter().any(|c| c.len() != n) || n < 2 {
        return None;
    }
    let blocks = blocks.min(n);
    if blocks < 2 {
        return None;
    }
    let width = n / blocks;
    let used = width * blocks;
    let full_means: Vec<f64> = columns
        .iter()
        .map(|c| c.iter().sum::<f64>() / n as f64)
        .collect();
    let central = f(&full_means);
    let block_sums: Vec<Vec<f64>> = columns
        .iter()
        .map(|c| {
            c[..used]
                .chunks_exact(width)
                .map(|b| b.iter().sum())
                .collect()
        })
        .collect();
    let totals: Vec<f64> = block_sums.iter().map(|b| b.iter().sum()).collect();
    let mut leave_out = Vec::with_capacity(blocks);
    let mut means = vec![0.0; columns.len()];
    for b in 0..blocks {
        for ((mean, sums), total) in means.iter_mut().zip(&block_sums).zip(&totals) {
            *mean = (total - sums[b]) / (used - width) as f64;
        }
        leave_out.push(f(&means));
    }
    let average = leave_out.iter().sum::<f64>() / blocks as f64;
    let spread = leave_out.iter().map(|x| (x - average).powi(2)).sum::<f64>();
    let error = ((blocks - 1) as f64 / blocks as f64 * spread).sqrt();
    Some(Estimate::new(central, error))
}

/// Jackknife blocks for a series of `samples` with autocorrelation time
/// `tau_samples`: blocks at least 4·(2τ) long, at most 32 of them, at least 2.
pub fn jackknife_block_count(samples: usize, tau_samples: f64) -> usize {
    let by_correlation = (8.0 * tau_samples.max(0.5)).ceil() as usize;
    let width = by_correlation.max(samples.div_ceil(32)).max(1);
    (samples / width).clamp(2, 32)
}

/// Per-sample columns kept by [`ThermodynamicSeries`].
mod column {
    pub const ENERGY: usize = 0; // E (K), shifted by the first sample
    pub const ENERGY_SQUARED: usize = 1;
    pub const ABS_M: usize = 2; // |M|/N
    pub const MX: usize = 3; // M_c (units of μ), per component
    pub const MX2: usize = 6; // M_c²
    pub const SINGLE: usize = 9; // fraction of tetrahedra |Q| = 1
    pub const DOUBLE: usize = 10; // fraction with |Q| = 2
    pub const MONOPOLE: usize = 11; // Σ|Q| / N
    pub const COUNT: usize = 12;
}

/// Most stored (possibly pre-binned) samples per series; beyond it adjacent
/// pairs are merged, which keeps every column mean exact and only removes
/// blocking levels below the bin width.
pub const MAX_STORED_SAMPLES: usize = 1 << 16;

/// Observables of one Monte Carlo run, sampled at equal intervals, stored as
/// means of bins of `bin_width` consecutive samples (bounded memory).
#[derive(Clone, Debug, Serialize, Deserialize)]
pub struct ThermodynamicSeries {
    spin_count: usize,
    tetrahedron_count: usize,
    energy_offset_kelvin: Option<f64>,
    bins: Vec<[f64; column::COUNT]>,
    bin_width: usize,
    partial: [f64; column::COUNT],
    partial_count: usize,
    samples: u64,
}

/// One sample of the raw observables, as the sampler reports them.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct Sample {
    /// Total energy (K).
    pub energy_kelvin: f64,
    /// Magnetisation vector `Σ σ_i e_i` (units of μ).
    pub magnetisation: [f64; 3],
    /// Tetrahedra with |Q| = 1.
    pub single_charges: u64,
    /// Tetrahedra with |Q| = 2.
    pub double_charges: u64,
}

/// Per-spin thermodynamic estimates at one temperature.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Thermodynamics {
    /// ⟨E⟩/N (K).
    pub energy_per_spin_kelvin: Estimate,
    /// C = (⟨E²⟩ − ⟨E⟩²)/(N T²) (k_B = 1).
    pub specific_heat_per_spin: Estimate,
    /// ⟨|M|⟩/N (units of μ).
    pub magnetisation_per_spin: Estimate,
    /// χ = (⟨|M|²⟩ − |⟨M⟩|²)/(3 N T) (μ²/K): a third of the trace of the
    /// fluctuation tensor, so χT → μ²/3 at high T for local ⟨111⟩ Ising spins.
    pub susceptibility_per_spin: Estimate,
    /// Fraction of tetrahedra with |Q| = 1.
    pub single_charge_density: Estimate,
    /// Fraction of tetrahedra with |Q| = 2.
    pub double_charge_density: Estimate,
    /// Σ_t |Q_t| / N.
    pub monopole_density_per_spin: Estimate,
    /// τ_int of the energy, in samples.
    pub energy_autocorrelation_samples: f64,
    /// Whether the energy blocking analysis reached a plateau.
    pub blocking_converged: bool,
    /// Samples taken.
    pub samples: u64,
}

impl ThermodynamicSeries {
    /// Empty series for a system of `spin_count` spins and `tetrahedron_count` tetrahedra.
    pub fn new(spin_count: usize, tetrahedron_count: usize) -> Self {
        Self {
            spin_count,
            tetrahedron_count,
            energy_offset_kelvin: None,
            bins: Vec::new(),
            bin_width: 1,
            partial: [0.0; column::COUNT],
            partial_count: 0,
            samples: 0,
        }
    }

    /// Samples recorded.
    pub fn samples(&self) -> u64 {
        self.samples
    }

    /// Record one sample.
    pub fn push(&mut self, sample: &Sample) {
        let n = self.spin_count as f64;
        let tets = self.tetrahedron_count as f64;
        // Shifting E by a fixed reference leaves the variance unchanged and
        // avoids cancellation in ⟨E²⟩ − ⟨E⟩² for large systems.
        let offset = *self
            .energy_offset_kelvin
            .get_or_insert(sample.energy_kelvin);
        let e = sample.energy_kelvin - offset;
        let m = sample.magnetisation;
        let mut row = [0.0; column::COUNT];
        row[column::ENERGY] = e;
        row[column::ENERGY_SQUARED] = e * e;
        row[column::ABS_M] = (m[0] * m[0] + m[1] * m[1] + m[2] * m[2]).sqrt() / n;
        for c in 0..3 {
            row[column::MX + c] = m[c];
            row[column::MX2 + c] = m[c] * m[c];
        }
        row[column::SINGLE] = sample.single_charges as f64 / tets;
        row[column::DOUBLE] = sample.double_charges as f64 / tets;
        row[column::MONOPOLE] = (sample.single_charges + 2 * sample.double_charges) as f64 / n;
        for (acc, v) in self.partial.iter_mut().zip(row) {
            *acc += v;
        }
        self.partial_count += 1;
        self.samples += 1;
        if self.partial_count == self.bin_width {
            let w = self.bin_width as f64;
            self.bins.push(self.partial.map(|s| s / w));
            self.partial = [0.0; column::COUNT];
            self.partial_count = 0;
            if self.bins.len() >= MAX_STORED_SAMPLES {
                self.bins = self
                    .bins
                    .chunks_exact(2)
                    .map(|p| std::array::from_fn(|c| 0.5 * (p[0][c] + p[1][c])))
                    .collect();
                self.bin_width *= 2;
            }
        }
    }

    fn column(&self, c: usize) -> Vec<f64> {
        self.bins.iter().map(|row| row[c]).collect()
    }

    /// Estimates at `temperature_kelvin`. `None` with fewer than 2 complete
    /// bins (an incomplete last bin is ignored).
    pub fn thermodynamics(&self, temperature_kelvin: f64) -> Option<Thermodynamics> {
        if self.bins.len() < 2 {
            return None;
        }
        let n = self.spin_count as f64;
        let t = temperature_kelvin;
        let energy = self.column(column::ENERGY);
        let energy_blocking = blocking_analysis(&energy)?;
        let raw_variance = {
            let mean_e = energy_blocking.mean;
            let mean_e2 =
                self.column(column::ENERGY_SQUARED).iter().sum::<f64>() / self.bins.len() as f64;
            (mean_e2 - mean_e * mean_e).max(0.0)
        };
        // τ_int from the plateau: error² = 2τσ²/n in raw samples.
        let raw_samples = self.bins.len() * self.bin_width;
        let error = energy_blocking.error();
        let tau = if raw_variance > 0.0 {
            (raw_samples as f64 * error * error / (2.0 * raw_variance)).max(0.5)
        } else {
            0.5
        };
        let tau_bins = tau / self.bin_width as f64;
        let blocks = jackknife_block_count(self.bins.len(), tau_bins);
        let offset = self.energy_offset_kelvin.unwrap_or(0.0);
        let energy_per_spin = Estimate::new((energy_blocking.mean + offset) / n, error / n);
        let e2 = self.column(column::ENERGY_SQUARED);
        let specific_heat = jackknife(&[&energy, &e2], blocks, |m| {
            (m[1] - m[0] * m[0]) / (n * t * t)
        })?;
        let mc: Vec<Vec<f64>> = (0..3).map(|c| self.column(column::MX + c)).collect();
        let mc2: Vec<Vec<f64>> = (0..3).map(|c| self.column(column::MX2 + c)).collect();
        let susceptibility = jackknife(
            &[&mc[0], &mc[1], &mc[2], &mc2[0], &mc2[1], &mc2[2]],
            blocks,
            |m| {
                ((m[3] - m[0] * m[0]) + (m[4] - m[1] * m[1]) + (m[5] - m[2] * m[2])) / (3.0 * n * t)
            },
        )?;
        let mean_of = |c: usize| blocking_analysis(&self.column(c)).map(|b| b.estimate());
        Some(Thermodynamics {
            energy_per_spin_kelvin: energy_per_spin,
            specific_heat_per_spin: specific_heat,
            magnetisation_per_spin: mean_of(column::ABS_M)?,
            susceptibility_per_spin: susceptibility,
            single_charge_density: mean_of(column::SINGLE)?,
            double_charge_density: mean_of(column::DOUBLE)?,
            monopole_density_per_spin: mean_of(column::MONOPOLE)?,
            energy_autocorrelation_samples: tau,
            blocking_converged: energy_blocking.converged,
            samples: (self.bins.len() * self.bin_width) as u64,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{Rng, SeedableRng};

    /// AR(1) series x_t = φ x_{t−1} + ε_t with unit-variance Gaussian noise
    /// (Box–Muller).
    fn ar1(phi: f64, n: usize, seed: u64) -> Vec<f64> {
        let mut rng = rand_xoshiro::Xoshiro256PlusPlus::seed_from_u64(seed);
        let mut x = 0.0;
        let mut out = Vec::with_capacity(n);
        for _ in 0..n {
            let u1: f64 = 1.0 - rng.gen::<f64>();
            let u2: f64 = rng.gen();
            let g = (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos();
            x = phi * x + g;
            out.push(x);
        }
        out
    }

    #[test]
    fn autocorrelation_time_of_ar1_matches_exact_value() {
        // ρ(t) = φ^t ⇒ τ_int = ½ + φ/(1−φ) = (1+φ)/(2(1−φ)) (derived).
        let phi = 0.8;
        let exact = (1.0 + phi) / (2.0 * (1.0 - phi)); // 4.5
        let x = ar1(phi, 400_000, 1);
        let direct = integrated_autocorrelation_time(&x).unwrap();
        assert!(direct.converged);
        assert!(
            (direct.tau_samples / exact - 1.0).abs() < 0.05,
            "{direct:?}"
        );
        let blocked = blocking_analysis(&x).unwrap();
        assert!(blocked.converged);
        let tau_blocking = blocked.integrated_autocorrelation_samples(x.len());
        assert!((tau_blocking / exact - 1.0).abs() < 0.15, "{tau_blocking}");
    }

    #[test]
    fn blocking_error_of_uncorrelated_data_is_naive_error() {
        // For iid data the error of the mean is σ/√n (common practice).
        let x = ar1(0.0, 100_000, 2);
        let b = blocking_analysis(&x).unwrap();
        let naive = (b.sample_variance / x.len() as f64).sqrt();
        assert!((b.error() / naive - 1.0).abs() < 0.2);
        assert!(b.mean.abs() < 5.0 * naive);
    }

    #[test]
    fn blocking_error_covers_the_true_spread_of_correlated_means() {
        // 200 independent AR(1) runs: the spread of their means must agree
        // with the typical blocking error (within 25 %).
        let phi = 0.9;
        let runs: Vec<Vec<f64>> = (0..200).map(|s| ar1(phi, 8192, 100 + s)).collect();
        let means: Vec<f64> = runs
            .iter()
            .map(|r| r.iter().sum::<f64>() / r.len() as f64)
            .collect();
        let grand = means.iter().sum::<f64>() / means.len() as f64;
        let spread = (means.iter().map(|m| (m - grand).powi(2)).sum::<f64>()
            / (means.len() - 1) as f64)
            .sqrt();
        let typical: f64 = runs
            .iter()
            .map(|r| blocking_analysis(r).unwrap().error())
            .sum::<f64>()
            / runs.len() as f64;
        assert!(
            (typical / spread - 1.0).abs() < 0.25,
            "typical {typical} spread {spread}"
        );
    }

    #[test]
    fn jackknife_of_variance_matches_direct_variance() {
        let x = ar1(0.0, 20_000, 3);
        let x2: Vec<f64> = x.iter().map(|v| v * v).collect();
        let est = jackknife(&[&x, &x2], 32, |m| m[1] - m[0] * m[0]).unwrap();
        // Unit-variance noise: var = 1 with error ≈ √(2/n) (Gaussian, derived).
        assert!((est.mean - 1.0).abs() < 5.0 * (2.0 / 20_000f64).sqrt());
        assert!((est.error / (2.0 / 20_000f64).sqrt() - 1.0).abs() < 0.5);
    }

    #[test]
    fn degenerate_inputs_give_none_not_panics() {
        assert!(blocking_analysis(&[]).is_none());
        assert!(blocking_analysis(&[1.0, f64::NAN]).is_none());
        assert!(integrated_autocorrelation_time(&[1.0, 2.0]).is_none());
        assert!(jackknife(&[&[1.0][..]], 4, |m| m[0]).is_none());
        assert!(jackknife(&[&[1.0, 2.0][..], &[1.0][..]], 2, |m| m[0]).is_none());
        let constant = blocking_analysis(&[2.0; 64]).unwrap();
        assert_eq!(constant.error(), 0.0);
        assert!(constant.converged);
    }

    #[test]
    fn series_binning_keeps_means_exact() {
        let mut s = ThermodynamicSeries::new(16, 8);
        let count = MAX_STORED_SAMPLES * 2 + 6;
        let mut sum = 0.0;
        for i in 0..count {
            let e = (i % 7) as f64;
            sum += e;
            s.push(&Sample {
                energy_kelvin: e,
                magnetisation: [0.0, 0.0, 0.0],
                single_charges: 1,
                double_charges: 0,
            });
        }
        assert!(s.bins.len() < MAX_STORED_SAMPLES);
        let th = s.thermodynamics(1.0).unwrap();
        let used = th.samples as usize;
        let exact: f64 = (0..used).map(|i| (i % 7) as f64).sum::<f64>() / used as f64 / 16.0;
        assert!((th.energy_per_spin_kelvin.mean - exact).abs() < 1e-12);
        assert!(used <= count && count - used < 4);
        assert!(sum > 0.0);
        assert!((th.single_charge_density.mean - 1.0 / 8.0).abs() < 1e-15);
        assert!((th.monopole_density_per_spin.mean - 1.0 / 16.0).abs() < 1e-15);
    }
}
