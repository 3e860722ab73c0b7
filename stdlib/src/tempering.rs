//! Parallel tempering, annealing schedules and equilibration diagnostics.
//!
//! Parallel tempering (replica exchange; Swendsen & Wang, PRL 57, 2607
//! (1986); Hukushima & Nemoto, J. Phys. Soc. Jpn. 65, 1604 (1996)): one
//! replica per temperature of a ladder, each sampled independently (in
//! parallel with rayon, each with its own random stream so results do not
//! depend on the thread count); then neighbouring temperatures try to swap
//! configurations with probability `min(1, e^{(β_k − β_{k+1})(E_k − E_{k+1})})`.
//! The acceptance of every neighbouring pair is reported: a pair that
//! almost never swaps splits the ladder in two.
//!
//! Equilibration diagnostics reuse [`crate::observe`]: the mean energy of the
//! second half of a series against the first (a drift several errors wide
//! means the run was still relaxing) and the integrated autocorrelation time.

use crate::control::Interrupt;
use crate::engine::LocalFieldSampler;
use crate::loops::LoopMoves;
use crate::observe::{blocking_analysis, integrated_autocorrelation_time, Estimate};
use crate::rng::SpinRng;
use rand::Rng;
use rayon::prelude::*;
use serde::{Deserialize, Serialize};

/// Exchange statistics of one neighbouring pair of the ladder.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct PairExchange {
    /// Lower temperature of the pair (K).
    pub lower_temperature_kelvin: f64,
    /// Upper temperature of the pair (K).
    pub upper_temperature_kelvin: f64,
    /// Swaps attempted.
    pub attempts: u64,
    /// Swaps accepted.
    pub accepted: u64,
}

impl PairExchange {
    /// Accepted fraction (0 before any attempt).
    pub fn acceptance_rate(&self) -> f64 {
        if self.attempts == 0 {
            0.0
        } else {
            self.accepted as f64 / self.attempts as f64
        }
    }
}

/// One replica: a sampler plus its loop scratch.
#[derive(Clone, Debug)]
pub struct Replica<'a> {
    /// The single-flip sampler (its temperature is the ladder slot's).
    pub sampler: LocalFieldSampler<'a>,
    /// Loop-move scratch space.
    pub loops: LoopMoves,
}

/// A temperature ladder of replicas. Slot `k` always holds temperature
/// `temperatures_kelvin[k]`; swaps exchange the replicas between slots.
#[derive(Clone, Debug)]
pub struct ParallelTempering<'a> {
    temperatures_kelvin: Vec<f64>,
    replicas: Vec<Replica<'a>>,
    pairs: Vec<PairExchange>,
    exchange_rng: SpinRng,
}

impl<'a> ParallelTempering<'a> {
    /// A ladder from samplers (one per temperature, sorted or not; they are
    /// sorted by increasing temperature). `None` for fewer than 1 sampler.
    pub fn new(mut samplers: Vec<LocalFieldSampler<'a>>, exchange_rng: SpinRng) -> Option<Self> {
        if samplers.is_empty() {
            return None;
        }
        samplers.sort_by(|a, b| a.temperature_kelvin().total_cmp(&b.temperature_kelvin()));
        let temperatures_kelvin: Vec<f64> =
            samplers.iter().map(|s| s.temperature_kelvin()).collect();
        let pairs = temperatures_kelvin
            .windows(2)
            .map(|w| PairExchange {
                lower_temperature_kelvin: w[0],
                upper_temperature_kelvin: w[1],
                attempts: 0,
                accepted: 0,
            })
            .collect();
        let replicas = samplers
            .into_iter()
            .map(|sampler| {
                let loops = LoopMoves::new(sampler.lattice());
                Replica { sampler, loops }
            })
            .collect();
        Some(Self {
            temperatures_kelvin,
            replicas,
            pairs,
            exchange_rng,
        })
    }

    /// Ladder temperatures (K), increasing.
    pub fn temperatures_kelvin(&self) -> &[f64] {
        &self.temperatures_kelvin
    }

    /// Replica currently at slot `k`.
    pub fn replica(&self, k: usize) -> Option<&Replica<'a>> {
        self.replicas.get(k)
    }

    /// Exchange statistics per neighbouring pair.
    pub fn pair_exchanges(&self) -> &[PairExchange] {
        &self.pairs
    }

    /// One round: `sweeps` single-flip sweeps and `loop_moves` loop moves per
    /// sweep in every replica (in parallel), then one exchange attempt for
    /// every neighbouring pair (even pairs, then odd pairs).
    pub fn round(&mut self, sweeps: u64, loop_moves_per_sweep: u64) {
        self.sweep_all(sweeps, loop_moves_per_sweep);
        self.exchange_all();
    }

    /// The sampling half of a round: `sweeps` sweeps (each followed by
    /// `loop_moves_per_sweep` loop moves) in every replica, in parallel;
    /// returns the accepted single flips of the replica in each slot.
    pub fn sweep_all(&mut self, sweeps: u64, loop_moves_per_sweep: u64) -> Vec<u64> {
        self.replicas
            .par_iter_mut()
            .map(|r| {
                let mut accepted = 0;
                for _ in 0..sweeps {
                    accepted += r.sampler.sweep();
                    for _ in 0..loop_moves_per_sweep {
                        r.loops.attempt(&mut r.sampler);
                    }
                }
                accepted
            })
            .collect()
    }

    /// The exchange half of a round: one swap attempt for every neighbouring
    /// pair, even pairs first, then odd pairs.
    pub fn exchange_all(&mut self) {
        for parity in 0..2 {
            let mut k = parity;
            while k + 1 < self.replicas.len() {
                self.try_swap(k);
                k += 2;
            }
        }
    }

    /// Recompute every replica's running energy from its fields (removes the
    /// rounding accumulated over many flips).
    pub fn resynchronise_energies(&mut self) {
        for r in &mut self.replicas {
            r.sampler.resynchronise_energy();
        }
    }

    fn try_swap(&mut self, k: usize) {
        let (t0, t1) = (self.temperatures_kelvin[k], self.temperatures_kelvin[k + 1]);
        let (e0, e1) = (
            self.replicas[k].sampler.energy_kelvin(),
            self.replicas[k + 1].sampler.energy_kelvin(),
        );
        let x = (1.0 / t0 - 1.0 / t1) * (e0 - e1);
        let accept = x >= 0.0 || self.exchange_rng.gen::<f64>() < x.exp();
        self.pairs[k].attempts += 1;
        if accept {
            self.pairs[k].accepted += 1;
            self.replicas.swap(k, k + 1);
            self.replicas[k].sampler.set_temperature(t0);
            self.replicas[k + 1].sampler.set_temperature(t1);
        }
    }

    /// Run `rounds` rounds, recording every slot's energy after each round;
    /// stops early on interrupt and returns what it recorded
    /// (`series[k]` is slot `k`'s energy series in K).
    pub fn run(
        &mut self,
        rounds: u64,
        sweeps_per_round: u64,
        loop_moves_per_sweep: u64,
        interrupt: &Interrupt,
    ) -> Vec<Vec<f64>> {
        let mut series = vec![Vec::with_capacity(rounds as usize); self.replicas.len()];
        for _ in 0..rounds {
            if interrupt.is_requested() {
                break;
            }
            self.round(sweeps_per_round, loop_moves_per_sweep);
            for (s, r) in series.iter_mut().zip(&self.replicas) {
                s.push(r.sampler.energy_kelvin());
            }
        }
        series
    }
}

/// Shape of an annealing schedule.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum ScheduleShape {
    /// Equal steps in T.
    Linear,
    /// Equal ratios of T (equal steps in ln T).
    Geometric,
}

/// Cooling (or heating) from `start_kelvin` to `end_kelvin` in `steps` stages.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct AnnealingSchedule {
    /// First temperature (K).
    pub start_kelvin: f64,
    /// Last temperature (K).
    pub end_kelvin: f64,
    /// Number of temperatures (≥ 1).
    pub steps: usize,
    /// Single-flip sweeps at each temperature.
    pub sweeps_per_step: u64,
    /// Loop moves after each sweep.
    pub loop_moves_per_sweep: u64,
    /// Spacing.
    pub shape: ScheduleShape,
}

impl AnnealingSchedule {
    /// The temperatures of the schedule; `None` unless both ends are positive
    /// and finite and `steps ≥ 1`.
    pub fn temperatures_kelvin(&self) -> Option<Vec<f64>> {
        let ok = |t: f64| t.is_finite() && t > 0.0;
        if !ok(self.start_kelvin) || !ok(self.end_kelvin) || self.steps == 0 {
            return None;
        }
        if self.steps == 1 {
            return Some(vec![self.end_kelvin]);
        }
        let m = (self.steps - 1) as f64;
        Some(
            (0..self.steps)
                .map(|k| {
                    let x = k as f64 / m;
                    match self.shape {
                        ScheduleShape::Linear => {
                            self.start_kelvin + x * (self.end_kelvin - self.start_kelvin)
                        }
                        ScheduleShape::Geometric => {
                            self.start_kelvin * (self.end_kelvin / self.start_kelvin).powf(x)
                        }
                    }
                })
                .collect(),
        )
    }

    /// Anneal `sampler` along the schedule; returns `(T, E at the end of the
    /// stage)` per finished stage (stops early on interrupt).
    pub fn run(
        &self,
        sampler: &mut LocalFieldSampler<'_>,
        loops: &mut LoopMoves,
        interrupt: &Interrupt,
    ) -> Vec<(f64, f64)> {
        let mut out = Vec::new();
        for t in self.temperatures_kelvin().unwrap_or_default() {
            sampler.set_temperature(t);
            for _ in 0..self.sweeps_per_step {
                if interrupt.is_requested() {
                    return out;
                }
                sampler.sweep();
                for _ in 0..self.loop_moves_per_sweep {
                    loops.attempt(sampler);
                }
            }
            out.push((t, sampler.energy_kelvin()));
        }
        out
    }
}

/// Whether a series looks equilibrated.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct EquilibrationDiagnostics {
    /// Mean of the second half minus the mean of the first, with its error.
    pub drift_between_halves: Estimate,
    /// |drift| / error (∞ if the error is 0 and the drift is not).
    pub drift_in_errors: f64,
    /// Integrated autocorrelation time in samples (Madras–Sokal window).
    pub autocorrelation_samples: f64,
    /// Samples per autocorrelation time: `n / (2 τ_int)`.
    pub independent_samples: f64,
    /// Drift below 3 errors, τ window converged and ≥ 50 independent samples
    /// (common practice).
    pub looks_equilibrated: bool,
}

/// Diagnostics of `series` (e.g. the energy per sample); `None` for fewer
/// than 8 samples or non-finite values.
pub fn equilibration_diagnostics(series: &[f64]) -> Option<EquilibrationDiagnostics> {
    if series.len() < 8 {
        return None;
    }
    let half = series.len() / 2;
    let first = blocking_analysis(&series[..half])?;
    let second = blocking_analysis(&series[series.len() - half..])?;
    let drift = second.mean - first.mean;
    let error = first.error().hypot(second.error());
    let drift_in_errors = if error > 0.0 {
        drift.abs() / error
    } else if drift == 0.0 {
        0.0
    } else {
        f64::INFINITY
    };
    let tau = integrated_autocorrelation_time(series)?;
    let independent = series.len() as f64 / (2.0 * tau.tau_samples);
    Some(EquilibrationDiagnostics {
        drift_between_halves: Estimate::new(drift, error),
        drift_in_errors,
        autocorrelation_samples: tau.tau_samples,
        independent_samples: independent,
        looks_equilibrated: drift_in_errors < 3.0 && tau.converged && independent >= 50.0,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::couplings::CouplingTable;
    use crate::engine::FlipRule;
    use crate::exchange::{CouplingConvention, ExchangeCouplings};
    use crate::lattice::Pyrochlore;
    use crate::rng::RngStreams;

    #[test]
    fn tempering_samples_each_temperature_correctly() {
        // Free spins in a field-free nearest-neighbour model are hard to check
        // exactly; use L = 1 nn ice and compare each slot's ⟨E⟩ with exact
        // enumeration of the 2^16 states (exact; 5σ blocking errors).
        let lat = Pyrochlore::new(1).unwrap();
        let mut table = CouplingTable::zero(&lat).unwrap();
        ExchangeCouplings::nearest_neighbour(1.0, CouplingConvention::IsingPseudospins)
            .add_to(&lat, &mut table)
            .unwrap();
        let temps = [0.6, 0.9, 1.4, 2.2];
        let streams = RngStreams::new(21);
        let samplers = temps
            .iter()
            .enumerate()
            .map(|(k, &t)| {
                LocalFieldSampler::new(
                    &lat,
                    &table,
                    t,
                    FlipRule::Metropolis,
                    vec![1; 16],
                    streams.stream(k as u64),
                )
                .unwrap()
            })
            .collect();
        let mut pt = ParallelTempering::new(samplers, streams.stream(99)).unwrap();
        pt.run(200, 1, 1, &Interrupt::new());
        let series = pt.run(40_000, 1, 1, &Interrupt::new());
        let n = 16;
        for (k, &t) in temps.iter().enumerate() {
            let (mut z, mut ez) = (0.0, 0.0);
            for bits in 0..1u32 << n {
                let sigma: Vec<i8> = (0..n)
                    .map(|b| if bits >> b & 1 == 1 { 1 } else { -1 })
                    .collect();
                let e = table.direct_energy_kelvin(&sigma);
                let w = (-(e + 16.0) / t).exp();
                z += w;
                ez += w * e;
            }
            let b = blocking_analysis(&series[k]).unwrap();
            assert!(
                (b.mean - ez / z).abs() < 5.0 * b.error(),
                "T={t}: {} ± {} vs {}",
                b.mean,
                b.error(),
                ez / z
            );
        }
        for p in pt.pair_exchanges() {
            assert!(p.attempts > 0 && p.acceptance_rate() > 0.05, "{p:?}");
        }
        let d = equilibration_diagnostics(&series[0]).unwrap();
        assert!(d.looks_equilibrated, "{d:?}");
    }

    #[test]
    fn drifting_series_is_flagged_and_schedules_are_validated() {
        // A linear ramp has a drift of many errors (derived).
        let ramp: Vec<f64> = (0..4000)
            .map(|i| i as f64 * 1e-3 + ((i * 7919) % 13) as f64 * 1e-4)
            .collect();
        let d = equilibration_diagnostics(&ramp).unwrap();
        assert!(!d.looks_equilibrated && d.drift_in_errors > 10.0, "{d:?}");
        let s = AnnealingSchedule {
            start_kelvin: 4.0,
            end_kelvin: 0.25,
            steps: 5,
            sweeps_per_step: 1,
            loop_moves_per_sweep: 0,
            shape: ScheduleShape::Geometric,
        };
        let t = s.temperatures_kelvin().unwrap();
        // Geometric: ratio (0.25/4)^{1/4} = 0.5 (derived).
        for (a, b) in t.iter().zip([4.0, 2.0, 1.0, 0.5, 0.25]) {
            assert!((a - b).abs() < 1e-12);
        }
        assert!(AnnealingSchedule {
            end_kelvin: -1.0,
            ..s
        }
        .temperatures_kelvin()
        .is_none());
    }
}
