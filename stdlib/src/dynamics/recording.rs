//! What every kinetic engine offers, and the recording of observables on a
//! uniform physical-time grid written once on top of it.
//!
//! The engines ([`super::Kinetics`] for discrete flip energies,
//! [`super::DipolarKinetics`] for Ewald-summed dipolar models) differ in how
//! they pick the next flip; sampling `M(t)` and charge counts on a grid,
//! progress, interrupts and preparation runs do not depend on that, so they
//! live here as provided methods of [`KineticEngine`].

use super::{sample_count, unit, Execution, FlipObserver, KineticsError, Trajectory};
use crate::control::{Interrupt, Progress, ProgressFn};
use crate::lattice::Pyrochlore;

/// Steps (attempts or events) between two interrupt polls.
pub(crate) const STEPS_PER_POLL: u64 = 1 << 18;

/// A single-spin-flip engine in physical time (seconds).
pub trait KineticEngine<'a> {
    /// Advance towards `t_end_seconds` by at most `max_steps` attempts or
    /// events, reporting every flip to `observer`; returns whether
    /// `t_end_seconds` was reached.
    fn advance<O: FlipObserver>(
        &mut self,
        t_end_seconds: f64,
        execution: Execution,
        max_steps: u64,
        observer: &mut O,
    ) -> bool;
    /// Current physical time (s).
    fn time_seconds(&self) -> f64;
    /// Reset the clock (the state is kept), e.g. at the start of a protocol.
    fn set_time_seconds(&mut self, time_seconds: f64);
    /// Change the temperature (rates are rebuilt; the state is kept).
    fn set_temperature(&mut self, temperature_kelvin: f64) -> Result<(), KineticsError>;
    /// Temperature (K).
    fn temperature_kelvin(&self) -> f64;
    /// The lattice.
    fn lattice(&self) -> &'a Pyrochlore;
    /// Pseudospins.
    fn sigma(&self) -> &[i8];
    /// `M = Σ_i σ_i e_{a(i)}` (units of μ).
    fn magnetisation(&self) -> [f64; 3];
    /// Σ_t |Q_t| (a double charge counts twice).
    fn monopole_count(&self) -> u64;
    /// Tetrahedra with |Q| = 2.
    fn double_charge_count(&self) -> u64;
    /// Flips made so far.
    fn flip_count(&self) -> u64;
    /// Attempts (or thinning proposals) made so far.
    fn attempt_count(&self) -> u64;
    /// Fraction of single-flip attempts at uniformly random sites that would
    /// be accepted in the current state (`Σ_i r_i τ_min / N`): how much an
    /// attempt-based execution would waste, the input of [`choose_execution`].
    fn attempt_acceptance(&self) -> f64;
    /// Energy (K) of the current state without constant terms (O(N)).
    fn energy_kelvin(&self) -> f64;
    /// Attempt acceptance below which the rejection-free execution is the
    /// faster one for this engine (see [`choose_execution`]).
    fn rejection_free_pays_below(&self) -> f64 {
        REJECTION_FREE_BELOW_ACCEPTANCE
    }

    /// Record `duration_seconds` of kinetics sampled every
    /// `sample_interval_seconds` (times relative to the start of the
    /// recording; the first sample is the current state). Polls `interrupt`
    /// at least every 2^18 steps and returns the samples so far, marked
    /// interrupted. Progress counts samples taken out of samples planned
    /// (proportional to simulated time).
    #[allow(clippy::too_many_arguments)]
    fn record<O: FlipObserver>(
        &mut self,
        duration_seconds: f64,
        sample_interval_seconds: f64,
        execution: Execution,
        projection_axis: [f64; 3],
        interrupt: &Interrupt,
        progress: ProgressFn<'_>,
        observer: &mut O,
    ) -> Result<Trajectory, KineticsError> {
        let samples = sample_count(duration_seconds, sample_interval_seconds)?;
        let axis = unit(projection_axis).ok_or(KineticsError::InvalidProjectionAxis)?;
        let mut trajectory = Trajectory {
            execution,
            temperature_kelvin: self.temperature_kelvin(),
            times_seconds: Vec::with_capacity(samples as usize),
            magnetisation: Vec::with_capacity(samples as usize),
            projection_axis: axis,
            magnetisation_projection: Vec::with_capacity(samples as usize),
            monopole_count: Vec::with_capacity(samples as usize),
            double_charge_count: Vec::with_capacity(samples as usize),
            energy_kelvin: Vec::with_capacity(samples as usize),
            spin_count: self.sigma().len(),
            flips: 0,
            attempts: 0,
            interrupted: false,
        };
        let (flips0, attempts0) = (self.flip_count(), self.attempt_count());
        let t0 = self.time_seconds();
        let report_every = (samples / 200).max(1);
        let label = format!("kinetics: samples of simulated time ({execution:?})");
        push_sample(self, &mut trajectory, 0.0);
        'grid: for k in 1..samples {
            let target = t0 + k as f64 * sample_interval_seconds;
            loop {
                if interrupt.is_requested() {
                    trajectory.interrupted = true;
                    break 'grid;
                }
                if self.advance(target, execution, STEPS_PER_POLL, observer) {
                    break;
                }
            }
            // The grid time itself: the attempt-based clock moves in steps of
            // τ_min/N and may stop a rounding short of the grid point (no
            // attempt falls in between, so the state is the grid point's).
            push_sample(self, &mut trajectory, k as f64 * sample_interval_seconds);
            if k % report_every == 0 {
                progress(&Progress {
                    label: label.clone(),
                    done: k + 1,
                    total: samples,
                });
            }
        }
        trajectory.flips = self.flip_count() - flips0;
        trajectory.attempts = self.attempt_count() - attempts0;
        Ok(trajectory)
    }

    /// Run for `duration_seconds` without sampling (preparation), polling
    /// `interrupt`; returns false if interrupted.
    fn run_for(
        &mut self,
        duration_seconds: f64,
        execution: Execution,
        interrupt: &Interrupt,
    ) -> Result<bool, KineticsError> {
        if !(duration_seconds >= 0.0 && duration_seconds.is_finite()) {
            return Err(KineticsError::InvalidDuration(duration_seconds));
        }
        let target = self.time_seconds() + duration_seconds;
        loop {
            if interrupt.is_requested() {
                return Ok(false);
            }
            if self.advance(target, execution, STEPS_PER_POLL, &mut ()) {
                return Ok(true);
            }
        }
    }
}

fn push_sample<'a, K: KineticEngine<'a> + ?Sized>(
    engine: &K,
    trajectory: &mut Trajectory,
    time_seconds: f64,
) {
    let m = engine.magnetisation();
    trajectory.times_seconds.push(time_seconds);
    trajectory
        .magnetisation_projection
        .push(crate::lattice::dot(m, trajectory.projection_axis));
    trajectory.magnetisation.push(m);
    trajectory.monopole_count.push(engine.monopole_count());
    trajectory
        .double_charge_count
        .push(engine.double_charge_count());
    trajectory.energy_kelvin.push(engine.energy_kelvin());
}

/// Below this attempt acceptance the rejection-free execution is chosen.
///
/// Why 0.1: a rejection-free event costs a few times an attempt (exponential
/// variate, bucket scan, re-classing of the flipped spin's partners), so it
/// wins once fewer than about one attempt in ten would be accepted (measured
/// with `icefield bench kinetics_rejection_free_speedup`; common practice).
pub const REJECTION_FREE_BELOW_ACCEPTANCE: f64 = 0.1;

/// The execution `execution = auto` picks for an engine in its current state,
/// with the reason in words.
pub fn choose_execution<'a, K: KineticEngine<'a>>(engine: &K) -> (Execution, String) {
    let acceptance = engine.attempt_acceptance();
    let threshold = engine.rejection_free_pays_below();
    if acceptance < threshold {
        (
            Execution::RejectionFree,
            format!(
                "rejection-free: only {:.3} % of attempts would be accepted in the starting state \
                 (threshold {} %)",
                100.0 * acceptance,
                percent(threshold)
            ),
        )
    } else {
        (
            Execution::AttemptBased,
            format!(
                "attempt-based: {:.1} % of attempts would be accepted in the starting state \
                 (rejection-free pays off below {} %)",
                100.0 * acceptance,
                percent(threshold)
            ),
        )
    }
}

/// A fraction as a percentage with three significant digits ("10", "0.146").
fn percent(fraction: f64) -> String {
    let p = 100.0 * fraction;
    let decimals = if p >= 100.0 || p == 0.0 {
        0
    } else {
        (2 - p.abs().log10().floor() as i32).max(0) as usize
    };
    format!("{p:.decimals$}")
}
