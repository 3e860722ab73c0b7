//! Temperature scans of nearest-neighbour spin ice, parallel over temperatures.
//!
//! Each temperature is an independent Markov chain driven by
//! `RngStreams::new(seed).stream(index_of_temperature)`, so a scan's numbers
//! depend only on its settings, never on the number of rayon threads or on
//! scheduling.
//!
//! Interrupts are checked after every sweep. On interrupt [`run_scan`]
//! returns `Ok` with every temperature that had finished its measurement,
//! `interrupted = true`; a temperature whose measurement was still running is
//! dropped rather than reported with fewer samples than asked for.

use crate::control::{Interrupt, ProgressFn, SharedProgress};
use crate::hamiltonian::NearestNeighbourIce;
use crate::lattice::{LatticeError, Pyrochlore};
use crate::metropolis::{NearestNeighbourMetropolis, Start};
pub use crate::observe::Estimate;
use crate::observe::{Sample, ThermodynamicSeries, Thermodynamics};
use crate::rng::RngStreams;
use rayon::prelude::*;
use serde::{Deserialize, Serialize};
use std::fmt;

mod general;
pub use general::*;

/// What to simulate.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ScanSettings {
    /// L: the lattice has 16 L³ spins.
    pub cells_per_side: usize,
    /// The Hamiltonian.
    pub model: NearestNeighbourIce,
    /// Temperatures (K), each > 0 and finite; order is kept in the result.
    pub temperatures_kelvin: Vec<f64>,
    /// Sweeps discarded before measuring, at each temperature.
    pub equilibration_sweeps: u64,
    /// Sweeps during which samples are taken, at each temperature.
    pub measurement_sweeps: u64,
    /// A sample is taken every this many measurement sweeps.
    pub sample_every_sweeps: u64,
    /// Seed of the random streams.
    pub seed: u64,
    /// Initial configuration at every temperature.
    pub start: Start,
}

/// Thermodynamics at one temperature (per spin, k_B = 1).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ScanPoint {
    /// Temperature (K).
    pub temperature_kelvin: f64,
    /// ⟨E⟩/N (K), blocking error.
    pub energy_per_spin_kelvin: Estimate,
    /// C = (⟨E²⟩ − ⟨E⟩²)/(N T²), jackknife error.
    pub specific_heat_per_spin: Estimate,
    /// ⟨|M|⟩/N in units of μ.
    pub magnetisation_per_spin: Estimate,
    /// χ = (⟨|M|²⟩ − |⟨M⟩|²)/(3 N T) in μ²/K (trace/3 of the fluctuation tensor).
    pub susceptibility_per_spin: Estimate,
    /// Fraction of tetrahedra with |Q| = 1.
    pub single_charge_density: Estimate,
    /// Fraction of tetrahedra with |Q| = 2.
    pub double_charge_density: Estimate,
    /// Σ_t |Q_t| / N.
    pub monopole_density_per_spin: Estimate,
    /// Accepted / attempted flips during measurement.
    pub acceptance_rate: f64,
    /// Samples the estimates are based on.
    pub samples: u64,
    /// τ_int of the energy in sweeps (from the blocking plateau).
    pub integrated_autocorrelation_sweeps: f64,
    /// Whether the energy error bars reached a blocking plateau; `false`
    /// means the run is short compared with the correlation time.
    pub errors_converged: bool,
    /// Equilibration diagnostics of the energy series (absent for fewer than
    /// 8 stored samples).
    #[serde(default)]
    pub diagnostics: Option<EnergyDiagnostics>,
}

/// Whether one temperature's run looks long enough: the integrated
/// autocorrelation time of the energy by the self-consistent window of Madras &
/// Sokal (J. Stat. Phys. 50, 109 (1988); Sokal, "Monte Carlo methods in
/// statistical mechanics: foundations and new algorithms", in Functional
/// Integration, Plenum (1997)) and the drift of the mean energy between the
/// first and the second half of the measurement.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct EnergyDiagnostics {
    /// τ_int of the energy in sweeps (½ sample interval for uncorrelated samples).
    pub tau_int_sweeps: f64,
    /// Whether the window condition W ≥ 6 τ_int was met before a quarter of the series.
    pub tau_window_converged: bool,
    /// (mean of the second half − mean of the first) / its error, each half's
    /// error from blocking.
    pub drift_sigma: f64,
}

/// A run shorter than this many τ_int is flagged (common practice: error bars
/// need many independent samples; Sokal (1997) asks for a run ≫ τ).
pub const MIN_SWEEPS_PER_TAU: f64 = 50.0;
/// A drift between the halves larger than this many errors is flagged
/// (common practice).
pub const MAX_DRIFT_SIGMA: f64 = 3.0;

impl EnergyDiagnostics {
    /// Diagnostics of an energy series sampled every `sweeps_per_sample`
    /// sweeps; `None` for fewer than 8 samples or non-finite values.
    pub fn of_series(energies: &[f64], sweeps_per_sample: f64) -> Option<Self> {
        let d = crate::tempering::equilibration_diagnostics(energies)?;
        let signed = if d.drift_between_halves.error > 0.0 {
            d.drift_between_halves.mean / d.drift_between_halves.error
        } else if d.drift_between_halves.mean == 0.0 {
            0.0
        } else {
            d.drift_between_halves.mean.signum() * f64::INFINITY
        };
        let window = crate::observe::integrated_autocorrelation_time(energies)?;
        Some(EnergyDiagnostics {
            tau_int_sweeps: d.autocorrelation_samples * sweeps_per_sample,
            tau_window_converged: window.converged,
            drift_sigma: signed,
        })
    }

    /// Why a run of `measurement_sweeps` looks too short, if it does.
    pub fn concern(&self, measurement_sweeps: u64) -> Option<String> {
        let mut reasons = Vec::new();
        if !self.tau_window_converged
            || (measurement_sweeps as f64) < MIN_SWEEPS_PER_TAU * self.tau_int_sweeps
        {
            reasons.push(format!(
                "{measurement_sweeps} sweeps are fewer than {MIN_SWEEPS_PER_TAU} τ_int = {:.0}",
                MIN_SWEEPS_PER_TAU * self.tau_int_sweeps
            ));
        }
        if self.drift_sigma.is_nan() || self.drift_sigma.abs() > MAX_DRIFT_SIGMA {
            reasons.push(format!(
                "the energy drifts by {:.1}σ between the halves",
                self.drift_sigma
            ));
        }
        (!reasons.is_empty()).then(|| reasons.join(" and "))
    }
}

/// A scalar series stored as means of bins (bounded memory: adjacent bins
/// merge when full, which keeps the mean exact and only removes blocking
/// levels below the bin width).
#[derive(Clone, Debug, Default, Serialize, Deserialize)]
pub struct BinnedSeries {
    bins: Vec<f64>,
    width: usize,
    partial: f64,
    count: usize,
}

impl BinnedSeries {
    /// Empty series.
    pub fn new() -> Self {
        BinnedSeries {
            bins: Vec::new(),
            width: 1,
            partial: 0.0,
            count: 0,
        }
    }
    /// Add one sample.
    pub fn push(&mut self, value: f64) {
        self.partial += value;
        self.count += 1;
        if self.count == self.width {
            self.bins.push(self.partial / self.width as f64);
            self.partial = 0.0;
            self.count = 0;
            if self.bins.len() >= crate::observe::MAX_STORED_SAMPLES {
                self.bins = self
                    .bins
                    .chunks_exact(2)
                    .map(|p| 0.5 * (p[0] + p[1]))
                    .collect();
                self.width *= 2;
            }
        }
    }
    /// The stored bin means.
    pub fn bins(&self) -> &[f64] {
        &self.bins
    }
    /// Samples per stored bin.
    pub fn bin_width(&self) -> usize {
        self.width
    }
    /// Mean with a Flyvbjerg–Petersen blocking error (J. Chem. Phys. 91, 461 (1989)).
    pub fn estimate(&self) -> Option<Estimate> {
        crate::observe::blocking_analysis(&self.bins).map(|b| b.estimate())
    }
    /// Equilibration diagnostics, for samples taken every `sample_every_sweeps`.
    pub fn diagnostics(&self, sample_every_sweeps: u64) -> Option<EnergyDiagnostics> {
        EnergyDiagnostics::of_series(&self.bins, (self.width as u64 * sample_every_sweeps) as f64)
    }
}

impl ScanPoint {
    /// The point a run at `temperature_kelvin` reports from its estimates; every
    /// scan driver (nearest-neighbour or coupling-table) builds its points here.
    pub fn from_thermodynamics(
        temperature_kelvin: f64,
        th: &Thermodynamics,
        acceptance_rate: f64,
        sample_every_sweeps: u64,
    ) -> Self {
        ScanPoint {
            temperature_kelvin,
            energy_per_spin_kelvin: th.energy_per_spin_kelvin,
            specific_heat_per_spin: th.specific_heat_per_spin,
            magnetisation_per_spin: th.magnetisation_per_spin,
            susceptibility_per_spin: th.susceptibility_per_spin,
            single_charge_density: th.single_charge_density,
            double_charge_density: th.double_charge_density,
            monopole_density_per_spin: th.monopole_density_per_spin,
            acceptance_rate,
            samples: th.samples,
            integrated_autocorrelation_sweeps: th.energy_autocorrelation_samples
                * sample_every_sweeps as f64,
            errors_converged: th.blocking_converged,
            diagnostics: None,
        }
    }
}

/// A finished (or interrupted) scan.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ScanResult {
    /// The settings that produced it.
    pub settings: ScanSettings,
    /// Finished temperatures, in the order of `settings.temperatures_kelvin`.
    pub points: Vec<ScanPoint>,
    /// Whether the run was interrupted (then `points` may be incomplete).
    pub interrupted: bool,
}

/// Why a scan could not run.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub enum ScanError {
    /// The lattice could not be built.
    Lattice(LatticeError),
    /// No temperatures were given.
    NoTemperatures,
    /// A temperature is zero, negative or not finite.
    InvalidTemperature {
        /// Position in the list (0-based).
        index: usize,
        /// The value given (K).
        temperature_kelvin: f64,
    },
    /// The coupling is not finite.
    InvalidCoupling {
        /// The value given (K).
        j_eff_kelvin: f64,
    },
    /// `measurement_sweeps` is 0.
    NoMeasurementSweeps,
    /// `sample_every_sweeps` is 0.
    ZeroSampleInterval,
    /// Fewer than [`MIN_SAMPLES`] samples would be taken.
    TooFewSamples {
        /// `measurement_sweeps / sample_every_sweeps`.
        samples: u64,
    },
    /// A square-ice side outside `3..=MAX_SQUARE_ICE_SIDE`.
    SquareIceSize {
        /// The side given.
        side: usize,
    },
}

/// Fewest samples per temperature for which error bars make sense.
pub const MIN_SAMPLES: u64 = 4;

impl fmt::Display for ScanError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ScanError::Lattice(e) => write!(f, "{e}"),
            ScanError::NoTemperatures => write!(f, "the temperature list is empty"),
            ScanError::InvalidTemperature {
                index,
                temperature_kelvin,
            } => write!(
                f,
                "temperature number {} is {temperature_kelvin} K; temperatures must be positive and finite",
                index + 1
            ),
            ScanError::InvalidCoupling { j_eff_kelvin } => {
                write!(f, "the coupling J_eff = {j_eff_kelvin} K is not a finite number")
            }
            ScanError::NoMeasurementSweeps => {
                write!(f, "measurement_sweeps is 0; at least {MIN_SAMPLES} sweeps are needed")
            }
            ScanError::ZeroSampleInterval => write!(f, "sample_every_sweeps must be at least 1"),
            ScanError::TooFewSamples { samples } => write!(
                f,
                "only {samples} samples per temperature (measurement_sweeps / sample_every_sweeps); \
                 at least {MIN_SAMPLES} are needed for error bars"
            ),
            ScanError::SquareIceSize { side } => write!(
                f,
                "square ice needs from 3 to {} vertices per side, not {side}",
                crate::square_ice::MAX_SQUARE_ICE_SIDE
            ),
        }
    }
}

impl std::error::Error for ScanError {}

impl From<LatticeError> for ScanError {
    fn from(e: LatticeError) -> Self {
        ScanError::Lattice(e)
    }
}

impl ScanSettings {
    /// Check the settings without running anything.
    pub fn validate(&self) -> Result<(), ScanError> {
        if self.temperatures_kelvin.is_empty() {
            return Err(ScanError::NoTemperatures);
        }
        if let Some((index, &t)) = self
            .temperatures_kelvin
            .iter()
            .enumerate()
            .find(|(_, t)| !(t.is_finite() && **t > 0.0))
        {
            return Err(ScanError::InvalidTemperature {
                index,
                temperature_kelvin: t,
            });
        }
        if !self.model.j_eff_kelvin.is_finite() {
            return Err(ScanError::InvalidCoupling {
                j_eff_kelvin: self.model.j_eff_kelvin,
            });
        }
        if self.measurement_sweeps == 0 {
            return Err(ScanError::NoMeasurementSweeps);
        }
        if self.sample_every_sweeps == 0 {
            return Err(ScanError::ZeroSampleInterval);
        }
        let samples = self.measurement_sweeps / self.sample_every_sweeps;
        if samples < MIN_SAMPLES {
            return Err(ScanError::TooFewSamples { samples });
        }
        Ok(())
    }

    /// Total sweeps of the scan (progress denominator), saturating.
    pub fn total_sweeps(&self) -> u64 {
        self.equilibration_sweeps
            .saturating_add(self.measurement_sweeps)
            .saturating_mul(self.temperatures_kelvin.len() as u64)
    }
}

/// Label of scan progress reports.
pub const PROGRESS_LABEL: &str = "temperature scan";

/// Run a temperature scan (see the module documentation for interrupts and
/// reproducibility).
pub fn run_scan(
    settings: &ScanSettings,
    interrupt: &Interrupt,
    progress: ProgressFn,
) -> Result<ScanResult, ScanError> {
    settings.validate()?;
    let lat = Pyrochlore::new(settings.cells_per_side)?;
    let total = settings.total_sweeps();
    let counter = SharedProgress::start(PROGRESS_LABEL, total, progress);
    let streams = RngStreams::new(settings.seed);
    let outcomes: Vec<Option<ScanPoint>> = settings
        .temperatures_kelvin
        .par_iter()
        .enumerate()
        .map(|(index, &t)| {
            simulate_temperature(
                &lat,
                settings,
                t,
                streams.stream(index as u64),
                interrupt,
                &counter,
            )
        })
        .collect();
    let complete = outcomes.iter().all(Option::is_some);
    Ok(ScanResult {
        settings: settings.clone(),
        points: outcomes.into_iter().flatten().collect(),
        interrupted: !complete,
    })
}

/// One temperature; `None` if interrupted before its measurement finished.
fn simulate_temperature(
    lat: &Pyrochlore,
    settings: &ScanSettings,
    temperature_kelvin: f64,
    rng: crate::rng::SpinRng,
    interrupt: &Interrupt,
    counter: &SharedProgress,
) -> Option<ScanPoint> {
    if interrupt.is_requested() {
        return None;
    }
    let mut engine = NearestNeighbourMetropolis::new(
        lat,
        &settings.model,
        temperature_kelvin,
        settings.start,
        rng,
    );
    for _ in 0..settings.equilibration_sweeps {
        if interrupt.is_requested() {
            return None;
        }
        engine.sweep();
        counter.unit_done();
    }
    let mut series = ThermodynamicSeries::new(lat.spin_count(), lat.tetrahedron_count());
    let mut energies = BinnedSeries::new();
    let mut accepted = 0u64;
    let mut attempted = 0u64;
    for sweep in 1..=settings.measurement_sweeps {
        // Checked before each sweep, so a temperature whose last sweep is
        // done is always reported.
        if interrupt.is_requested() {
            return None;
        }
        accepted += engine.sweep();
        attempted += lat.spin_count() as u64;
        if sweep % settings.sample_every_sweeps == 0 {
            let charges = engine.charge_counts();
            energies.push(engine.energy_kelvin());
            series.push(&Sample {
                energy_kelvin: engine.energy_kelvin(),
                magnetisation: engine.magnetisation(),
                single_charges: charges.single,
                double_charges: charges.double,
            });
        }
        counter.unit_done();
    }
    let th = series.thermodynamics(temperature_kelvin)?;
    let mut point = ScanPoint::from_thermodynamics(
        temperature_kelvin,
        &th,
        accepted as f64 / attempted.max(1) as f64,
        settings.sample_every_sweeps,
    );
    point.diagnostics = energies.diagnostics(settings.sample_every_sweeps);
    Some(point)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::control::{ignore_progress, Progress};
    use std::sync::Mutex;

    fn settings() -> ScanSettings {
        ScanSettings {
            cells_per_side: 1,
            model: NearestNeighbourIce::new(1.0),
            temperatures_kelvin: vec![0.6, 1.0, 2.0, 5.0],
            equilibration_sweeps: 50,
            measurement_sweeps: 400,
            sample_every_sweeps: 2,
            seed: 99,
            start: Start::Random,
        }
    }

    fn in_pool<T: Send>(threads: usize, f: impl FnOnce() -> T + Send) -> T {
        rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .expect("thread pool")
            .install(f)
    }

    #[test]
    fn results_do_not_depend_on_thread_count() {
        let s = settings();
        let one = in_pool(1, || run_scan(&s, &Interrupt::new(), &ignore_progress)).unwrap();
        let two = in_pool(2, || run_scan(&s, &Interrupt::new(), &ignore_progress)).unwrap();
        assert!(!one.interrupted && one.points.len() == 4);
        // Bit-identical, compared through the serialised form.
        assert_eq!(
            serde_json::to_string(&one).unwrap(),
            serde_json::to_string(&two).unwrap()
        );
        let temperatures: Vec<f64> = one.points.iter().map(|p| p.temperature_kelvin).collect();
        assert_eq!(temperatures, s.temperatures_kelvin);
        let mut other_seed = s.clone();
        other_seed.seed = 100;
        let three = in_pool(2, || {
            run_scan(&other_seed, &Interrupt::new(), &ignore_progress)
        })
        .unwrap();
        assert_ne!(
            one.points[0].energy_per_spin_kelvin,
            three.points[0].energy_per_spin_kelvin
        );
    }

    #[test]
    fn progress_counts_every_sweep_once() {
        let s = settings();
        let seen = Mutex::new(Vec::new());
        let record = |p: &Progress| seen.lock().unwrap().push(p.clone());
        in_pool(2, || run_scan(&s, &Interrupt::new(), &record)).unwrap();
        let seen = seen.into_inner().unwrap();
        let total = s.total_sweeps();
        assert_eq!(total, 4 * 450);
        assert!(seen
            .iter()
            .all(|p| p.total == total && p.label == PROGRESS_LABEL));
        assert_eq!(seen.first().map(|p| p.done), Some(0));
        assert_eq!(seen.iter().map(|p| p.done).max(), Some(total));
        assert!(seen.len() > 50, "reports about every 0.5 %");
    }

    #[test]
    fn interrupt_keeps_finished_temperatures() {
        let s = settings();
        let interrupt = Interrupt::new();
        let total = s.total_sweeps();
        // Raise the interrupt from the progress callback during the third temperature.
        let trigger = interrupt.clone();
        let stop_midway = move |p: &Progress| {
            if p.done >= total * 5 / 8 {
                trigger.request();
            }
        };
        let partial = in_pool(1, || run_scan(&s, &interrupt, &stop_midway)).unwrap();
        assert!(partial.interrupted);
        assert_eq!(partial.points.len(), 2);
        let full = in_pool(1, || run_scan(&s, &Interrupt::new(), &ignore_progress)).unwrap();
        assert_eq!(partial.points[..], full.points[..2]);
        // An interrupt raised before the start returns at once with nothing.
        let raised = Interrupt::new();
        raised.request();
        let none = run_scan(&s, &raised, &ignore_progress).unwrap();
        assert!(none.interrupted && none.points.is_empty());
    }

    #[test]
    fn diagnostics_of_an_ar1_series_give_its_exact_tau_int() {
        // x_t = ρ x_{t−1} + ε_t has ρ(t) = ρ^t, so τ_int = ½ + ρ/(1 − ρ) = (1 + ρ)/(2(1 − ρ))
        // (exact); ρ = 0.8 gives 4.5 samples, i.e. 9 sweeps at 2 sweeps per sample.
        use rand::Rng;
        let mut rng = crate::rng::RngStreams::new(3).stream(0);
        let rho = 0.8;
        let mut x = 0.0f64;
        let mut series = BinnedSeries::new();
        for _ in 0..60_000 {
            // Box–Muller normal variate.
            let (u, v): (f64, f64) = (rng.gen::<f64>().max(1e-300), rng.gen());
            let noise = (-2.0 * u.ln()).sqrt() * (2.0 * std::f64::consts::PI * v).cos();
            x = rho * x + noise;
            series.push(x);
        }
        let d = series.diagnostics(2).unwrap();
        assert!((d.tau_int_sweeps - 9.0).abs() < 1.0, "{d:?}");
        assert!(d.tau_window_converged);
        // A stationary series shows no drift beyond 4σ, and 60000 samples are ≫ 50 τ_int.
        assert!(d.drift_sigma.abs() < 4.0, "{d:?}");
        assert!(d.concern(60_000 * 2).is_none());
        // A run of 400 sweeps is shorter than 50 τ_int = 450 sweeps.
        assert!(d.concern(400).unwrap().contains("50 τ_int"));
        // A ramp drifts (derived: the halves' means differ by many errors).
        let mut ramp = BinnedSeries::new();
        for i in 0..4000 {
            ramp.push(i as f64 * 1e-3 + ((i * 7919) % 13) as f64 * 1e-4);
        }
        let r = ramp.diagnostics(1).unwrap();
        assert!(r.drift_sigma > 10.0 && r.concern(4000).is_some(), "{r:?}");
    }

    #[test]
    fn invalid_settings_are_clear_errors() {
        let check = |edit: &dyn Fn(&mut ScanSettings), expected: ScanError, words: &str| {
            let mut s = settings();
            edit(&mut s);
            let err = run_scan(&s, &Interrupt::new(), &ignore_progress).unwrap_err();
            assert_eq!(err, expected);
            assert!(err.to_string().contains(words), "{err}");
        };
        check(
            &|s| s.temperatures_kelvin.clear(),
            ScanError::NoTemperatures,
            "empty",
        );
        check(
            &|s| s.temperatures_kelvin[2] = -1.0,
            ScanError::InvalidTemperature {
                index: 2,
                temperature_kelvin: -1.0,
            },
            "number 3",
        );
        check(
            &|s| s.temperatures_kelvin[0] = 0.0,
            ScanError::InvalidTemperature {
                index: 0,
                temperature_kelvin: 0.0,
            },
            "positive",
        );
        check(
            &|s| s.measurement_sweeps = 0,
            ScanError::NoMeasurementSweeps,
            "measurement_sweeps",
        );
        check(
            &|s| s.sample_every_sweeps = 0,
            ScanError::ZeroSampleInterval,
            "sample_every_sweeps",
        );
        check(
            &|s| s.sample_every_sweeps = 200,
            ScanError::TooFewSamples { samples: 2 },
            "only 2 samples",
        );
        check(
            &|s| s.cells_per_side = 0,
            ScanError::Lattice(LatticeError::ZeroSize),
            "at least 1",
        );
        let mut nan = settings();
        nan.temperatures_kelvin[1] = f64::NAN;
        assert!(matches!(
            nan.validate(),
            Err(ScanError::InvalidTemperature { index: 1, .. })
        ));
        let mut bad_j = settings();
        bad_j.model.j_eff_kelvin = f64::INFINITY;
        assert!(matches!(
            bad_j.validate(),
            Err(ScanError::InvalidCoupling { .. })
        ));
    }
}
