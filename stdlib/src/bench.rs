//! Benchmark workloads, kept beside the code they exercise.
//!
//! `icefield bench [NAME...] --json` (in the kernel crate) prints each
//! [`BenchRecord`] as one JSON line. Speed targets live here and in their
//! records, never in timed tests.

use crate::control::Interrupt;
use crate::hamiltonian::NearestNeighbourIce;
use crate::lattice::Pyrochlore;
use crate::metropolis::reference::StraightforwardMetropolis;
use crate::metropolis::{NearestNeighbourMetropolis, Start};
use crate::rng::RngStreams;
use serde::Serialize;
use std::time::{Duration, Instant};

/// One benchmark result: `bench`, `value`, `unit`, then free-form fields.
#[derive(Clone, Debug, Serialize)]
pub struct BenchRecord {
    /// Benchmark name.
    pub bench: String,
    /// The headline figure.
    pub value: f64,
    /// Its unit.
    pub unit: String,
    /// Parameters and secondary figures, flattened into the JSON object.
    #[serde(flatten)]
    pub extra: serde_json::Map<String, serde_json::Value>,
}

/// Single-flip Metropolis throughput (attempted flips per second),
/// nearest-neighbour spin ice, L = 8, J_eff = 1.1 K, T = 1 K, one thread;
/// optimised engine versus the straightforward reference loops.
pub const NN_METROPOLIS_FLIPS: &str = "nn_metropolis_flips";

pub mod analysis;
pub use analysis::{PERCOLATION_SWEEP, WELCH_SAMPLES};
pub mod kinetics;
pub use kinetics::{
    KINETICS_DIPOLAR_FLIPS, KINETICS_GATED_EVENTS, KINETICS_REJECTION_FREE_SPEEDUP,
};
pub mod equilibrium;
pub use equilibrium::{
    DIPOLAR_FIELD_UPDATES, DIPOLAR_METROPOLIS_ATTEMPTS, DIPOLAR_TABLE_BYTES, LOOP_MOVES,
};

const NAMES: [&str; 10] = [
    NN_METROPOLIS_FLIPS,
    KINETICS_REJECTION_FREE_SPEEDUP,
    KINETICS_GATED_EVENTS,
    KINETICS_DIPOLAR_FLIPS,
    DIPOLAR_METROPOLIS_ATTEMPTS,
    DIPOLAR_FIELD_UPDATES,
    DIPOLAR_TABLE_BYTES,
    LOOP_MOVES,
    WELCH_SAMPLES,
    PERCOLATION_SWEEP,
];

/// Names of all benchmarks.
pub fn names() -> &'static [&'static str] {
    &NAMES
}

/// Run benchmark `name`; `None` if there is no such benchmark.
pub fn run(name: &str, interrupt: &Interrupt) -> Option<Vec<BenchRecord>> {
    match name {
        NN_METROPOLIS_FLIPS => Some(vec![nn_metropolis_flips(
            &NnMetropolisBench::default(),
            interrupt,
        )]),
        KINETICS_REJECTION_FREE_SPEEDUP => Some(kinetics::kinetics_rejection_free_speedup(
            &kinetics::KineticsBench::default(),
            interrupt,
        )),
        KINETICS_GATED_EVENTS => Some(vec![kinetics::kinetics_gated_events(
            &kinetics::KineticsBench::default(),
            interrupt,
        )]),
        KINETICS_DIPOLAR_FLIPS => Some(vec![kinetics::kinetics_dipolar_flips(interrupt)]),
        DIPOLAR_METROPOLIS_ATTEMPTS | DIPOLAR_FIELD_UPDATES | DIPOLAR_TABLE_BYTES | LOOP_MOVES => {
            equilibrium::run(name, &equilibrium::EquilibriumBench::default(), interrupt)
        }
        WELCH_SAMPLES => Some(vec![analysis::welch_samples(
            &analysis::AnalysisBench::default(),
            interrupt,
        )]),
        PERCOLATION_SWEEP => Some(vec![analysis::percolation_sweep(
            &analysis::AnalysisBench::default(),
            interrupt,
        )]),
        _ => None,
    }
}

/// Parameters of the [`NN_METROPOLIS_FLIPS`] benchmark.
#[derive(Clone, Debug)]
pub struct NnMetropolisBench {
    /// L.
    pub cells_per_side: usize,
    /// J_eff (K).
    pub j_eff_kelvin: f64,
    /// T (K).
    pub temperature_kelvin: f64,
    /// Untimed sweeps before each timing (equilibrates and warms caches).
    pub warm_up_sweeps: u64,
    /// Wall time per engine per round.
    pub time_per_round: Duration,
    /// Alternating rounds (reference, optimised, reference, …) per engine;
    /// the best round of each counts, which filters out noise from other
    /// processes on the shared machine.
    pub rounds: u32,
}

impl Default for NnMetropolisBench {
    fn default() -> Self {
        Self {
            cells_per_side: 8,
            j_eff_kelvin: 1.1,
            temperature_kelvin: 1.0,
            warm_up_sweeps: 2000,
            time_per_round: Duration::from_millis(1200),
            rounds: 2,
        }
    }
}

/// Time `sweep` for about `budget`; returns attempted flips per second.
fn flips_per_second(
    spins: u64,
    budget: Duration,
    interrupt: &Interrupt,
    mut sweep: impl FnMut() -> u64,
) -> Option<f64> {
    let start = Instant::now();
    let mut sweeps = 0u64;
    let mut accepted = 0u64;
    loop {
        for _ in 0..16 {
            accepted = accepted.wrapping_add(sweep());
        }
        sweeps += 16;
        let elapsed = start.elapsed();
        if elapsed >= budget {
            std::hint::black_box(accepted);
            return Some((sweeps * spins) as f64 / elapsed.as_secs_f64());
        }
        if interrupt.is_requested() {
            return None;
        }
    }
}

/// The [`NN_METROPOLIS_FLIPS`] workload with explicit parameters.
pub fn nn_metropolis_flips(params: &NnMetropolisBench, interrupt: &Interrupt) -> BenchRecord {
    let mut extra = serde_json::Map::new();
    let lat = match Pyrochlore::new(params.cells_per_side) {
        Ok(lat) => lat,
        Err(e) => {
            extra.insert("error".into(), e.to_string().into());
            return BenchRecord {
                bench: NN_METROPOLIS_FLIPS.into(),
                value: 0.0,
                unit: "flips/s".into(),
                extra,
            };
        }
    };
    let model = NearestNeighbourIce::new(params.j_eff_kelvin);
    let t = params.temperature_kelvin;
    let streams = RngStreams::new(2024);
    let mut fast =
        NearestNeighbourMetropolis::new(&lat, &model, t, Start::Random, streams.stream(0));
    let mut reference =
        StraightforwardMetropolis::new(&lat, &model, t, Start::Random, streams.stream(1));
    for _ in 0..params.warm_up_sweeps {
        fast.sweep();
        reference.sweep();
        if interrupt.is_requested() {
            break;
        }
    }
    let spins = lat.spin_count() as u64;
    // Three loops, timed in alternation: the optimised engine, the
    // straightforward loop in the same (random) site order, and the
    // straightforward loop in sequential order (the faster plain loop, used
    // as the headline baseline so the speed-up is not flattered).
    let mut best = [0.0f64; 3];
    let mut interrupted = false;
    'rounds: for _ in 0..params.rounds.max(1) {
        for (k, slot) in best.iter_mut().enumerate() {
            let rate = match k {
                0 => flips_per_second(spins, params.time_per_round, interrupt, || {
                    reference.sequential_sweep()
                }),
                1 => flips_per_second(spins, params.time_per_round, interrupt, || {
                    reference.sweep()
                }),
                _ => flips_per_second(spins, params.time_per_round, interrupt, || fast.sweep()),
            };
            match rate {
                Some(r) => *slot = slot.max(r),
                None => {
                    interrupted = true;
                    break 'rounds;
                }
            }
        }
    }
    let [best_reference, best_random_reference, best_fast] = best;
    extra.insert("L".into(), params.cells_per_side.into());
    extra.insert("T_K".into(), t.into());
    extra.insert("J_eff_K".into(), params.j_eff_kelvin.into());
    extra.insert("spins".into(), spins.into());
    extra.insert("threads".into(), 1.into());
    extra.insert("site_order".into(), "random".into());
    extra.insert("baseline_flips_per_s".into(), best_reference.into());
    extra.insert(
        "baseline".into(),
        "straightforward loop, sequential order".into(),
    );
    extra.insert(
        "random_order_straightforward_flips_per_s".into(),
        best_random_reference.into(),
    );
    let speedup = if best_reference > 0.0 {
        best_fast / best_reference
    } else {
        0.0
    };
    extra.insert("speedup".into(), speedup.into());
    let same_order_speedup = if best_random_reference > 0.0 {
        best_fast / best_random_reference
    } else {
        0.0
    };
    extra.insert(
        "speedup_vs_random_order_straightforward".into(),
        same_order_speedup.into(),
    );
    extra.insert(
        "acceptance_rate".into(),
        (fast.accepted_count() as f64 / fast.attempt_count().max(1) as f64).into(),
    );
    if interrupted {
        extra.insert("interrupted".into(), true.into());
    }
    BenchRecord {
        bench: NN_METROPOLIS_FLIPS.into(),
        value: best_fast,
        unit: "flips/s".into(),
        extra,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn unknown_bench_is_none_and_names_are_listed() {
        assert!(run("no_such_bench", &Interrupt::new()).is_none());
        assert!(names().contains(&"nn_metropolis_flips"));
    }

    #[test]
    fn record_has_the_documented_fields() {
        let params = NnMetropolisBench {
            cells_per_side: 2,
            warm_up_sweeps: 10,
            time_per_round: Duration::from_millis(20),
            rounds: 1,
            ..Default::default()
        };
        let record = nn_metropolis_flips(&params, &Interrupt::new());
        let json = serde_json::to_value(&record).unwrap();
        assert_eq!(json["bench"], "nn_metropolis_flips");
        assert_eq!(json["unit"], "flips/s");
        assert_eq!(json["L"], 2);
        assert!(json["value"].as_f64().unwrap() > 0.0);
        let baseline = json["baseline_flips_per_s"].as_f64().unwrap();
        assert!(baseline > 0.0);
        let ratio = json["value"].as_f64().unwrap() / baseline;
        assert!((json["speedup"].as_f64().unwrap() - ratio).abs() < 1e-9);
    }

    #[test]
    fn interrupted_bench_returns_promptly_and_says_so() {
        let interrupt = Interrupt::new();
        interrupt.request();
        let params = NnMetropolisBench {
            cells_per_side: 2,
            warm_up_sweeps: 1,
            time_per_round: Duration::from_secs(30),
            rounds: 1,
            ..Default::default()
        };
        let started = Instant::now();
        let json = serde_json::to_value(nn_metropolis_flips(&params, &interrupt)).unwrap();
        assert!(started.elapsed() < Duration::from_secs(5));
        assert_eq!(json["interrupted"], true);
    }
}
