//! Benchmark workloads of the physical-time kinetics ([`crate::dynamics`]).

use super::BenchRecord;
use crate::control::Interrupt;
use crate::dynamics::{
    AcceptanceRule, Execution, KineticEngine, Kinetics, NearestNeighbourFlipEnergy,
};
use crate::gating::{AttemptTimes, SlowGate, DEFAULT_SLOW_RATIO};
use crate::hamiltonian::NearestNeighbourIce;
use crate::lattice::Pyrochlore;
use crate::metropolis::{initial_configuration, Start};
use crate::rng::RngStreams;
use std::time::{Duration, Instant};

/// Physical time simulated per CPU second, rejection-free over attempt-based.
pub const KINETICS_REJECTION_FREE_SPEEDUP: &str = "kinetics_rejection_free_speedup";
/// Rejection-free events per second with the bimodal gated rule.
pub const KINETICS_GATED_EVENTS: &str = "kinetics_gated_events";
/// Flips per second of the dipolar engine (thinning vs attempts, and the
/// transverse-field what-if).
pub const KINETICS_DIPOLAR_FLIPS: &str = "kinetics_dipolar_flips";

/// Parameters shared by the kinetics benchmarks.
#[derive(Clone, Debug)]
pub struct KineticsBench {
    /// L.
    pub cells_per_side: usize,
    /// J_eff (K).
    pub j_eff_kelvin: f64,
    /// Temperatures (K), one record each for the speed-up benchmark.
    pub temperatures_kelvin: Vec<f64>,
    /// Rejection-free preparation from the ice state, in attempt times τ0
    /// (equilibrates the monopole density; untimed).
    pub preparation_tau0: f64,
    /// Wall time per execution and temperature.
    pub time_per_execution: Duration,
}

impl Default for KineticsBench {
    fn default() -> Self {
        Self {
            cells_per_side: 8,
            j_eff_kelvin: 1.1,
            temperatures_kelvin: vec![0.3, 0.5],
            preparation_tau0: 20_000.0,
            time_per_execution: Duration::from_millis(1500),
        }
    }
}

/// CPU time of the calling thread (Linux `/proc/thread-self/schedstat`,
/// first field, nanoseconds), `None` where unavailable. The machine is
/// shared, so wall time would charge other processes' time slices to
/// whichever execution happened to be running.
fn thread_cpu_time() -> Option<Duration> {
    let text = std::fs::read_to_string("/proc/thread-self/schedstat").ok()?;
    let ns: u64 = text.split_whitespace().next()?.parse().ok()?;
    Some(Duration::from_nanos(ns))
}

/// A clock of thread CPU time, falling back to wall time.
struct CpuClock {
    wall: Instant,
    cpu: Option<Duration>,
}

impl CpuClock {
    fn start() -> Self {
        Self {
            wall: Instant::now(),
            cpu: thread_cpu_time(),
        }
    }

    fn elapsed(&self) -> Duration {
        match (self.cpu, thread_cpu_time()) {
            (Some(a), Some(b)) => b.saturating_sub(a),
            _ => self.wall.elapsed(),
        }
    }

    fn uses_cpu_time(&self) -> bool {
        self.cpu.is_some()
    }
}

/// Simulated seconds and flips of `execution` over about `budget` of CPU
/// time, advancing in chunks of `step_tau0` attempt times (one clock read
/// per chunk); returns (simulated s, flips, CPU s, interrupted).
fn simulate_for<'a, K: KineticEngine<'a>>(
    engine: &mut K,
    execution: Execution,
    budget: Duration,
    step_tau0: f64,
    interrupt: &Interrupt,
) -> (f64, f64, f64, bool) {
    let clock = CpuClock::start();
    let t0 = engine.time_seconds();
    let flips0 = engine.flip_count();
    let mut target = t0;
    loop {
        target += step_tau0;
        while !engine.advance(target, execution, 1 << 16, &mut ()) {
            if interrupt.is_requested() || clock.elapsed() > budget * 4 {
                break;
            }
        }
        let elapsed = clock.elapsed();
        if elapsed >= budget || interrupt.is_requested() {
            return (
                engine.time_seconds() - t0,
                (engine.flip_count() - flips0) as f64,
                elapsed.as_secs_f64().max(1e-9),
                interrupt.is_requested(),
            );
        }
    }
}

/// Simulated seconds per CPU second of `execution` over about `budget`
/// (one thread); also events per CPU second.
fn simulated_per_second(
    engine: &mut Kinetics<'_, NearestNeighbourFlipEnergy>,
    execution: Execution,
    budget: Duration,
    step_tau0: f64,
    interrupt: &Interrupt,
) -> (f64, f64, bool) {
    let (simulated, flips, cpu, interrupted) =
        simulate_for(engine, execution, budget, step_tau0, interrupt);
    (simulated / cpu, flips / cpu, interrupted)
}

/// Chunk of physical time between clock reads, in τ0: one τ0 is N attempts
/// of the attempt-based execution (tens of µs at L = 8); the rejection-free
/// execution covers the same physical time in a few events, so it reads the
/// clock every 64 τ0 (hundreds of events) to keep the timer and the
/// discarded last waiting time of each chunk out of its per-event cost.
const ATTEMPT_STEP_TAU0: f64 = 1.0;
const REJECTION_FREE_STEP_TAU0: f64 = 64.0;

/// Alternating timing rounds per execution (attempt, free, attempt, free):
/// both executions see the same mix of machine load; totals are summed.
const ROUNDS: u32 = 2;

fn prepared_engine<'a>(
    lat: &'a Pyrochlore,
    params: &KineticsBench,
    temperature_kelvin: f64,
    attempt_times: AttemptTimes,
    seed: u64,
    interrupt: &Interrupt,
) -> Kinetics<'a, NearestNeighbourFlipEnergy> {
    let model = NearestNeighbourIce::new(params.j_eff_kelvin);
    let streams = RngStreams::new(seed);
    let mut rng = streams.stream(0);
    let sigma = initial_configuration(lat, Start::IceState, &mut rng);
    let mut engine = Kinetics::new(
        lat,
        NearestNeighbourFlipEnergy::new(&model, None).expect("no field"),
        sigma,
        AcceptanceRule::Metropolis,
        temperature_kelvin,
        attempt_times,
        streams.stream(1),
    )
    .expect("valid benchmark parameters");
    let _ = engine.run_for(params.preparation_tau0, Execution::RejectionFree, interrupt);
    engine
}

/// The [`KINETICS_REJECTION_FREE_SPEEDUP`] workload: one record per temperature.
pub fn kinetics_rejection_free_speedup(
    params: &KineticsBench,
    interrupt: &Interrupt,
) -> Vec<BenchRecord> {
    let lat = match Pyrochlore::new(params.cells_per_side) {
        Ok(l) => l,
        Err(e) => {
            let mut extra = serde_json::Map::new();
            extra.insert("error".into(), e.to_string().into());
            return vec![BenchRecord {
                bench: KINETICS_REJECTION_FREE_SPEEDUP.into(),
                value: 0.0,
                unit: "ratio".into(),
                extra,
            }];
        }
    };
    let mut records = Vec::new();
    for (k, &t) in params.temperatures_kelvin.iter().enumerate() {
        let times = AttemptTimes::uniform(1.0).expect("τ0 = 1 s is valid");
        let mut engine = prepared_engine(&lat, params, t, times, 31 + k as u64, interrupt);
        let monopoles = engine.monopole_count();
        let mut sums = [[0.0f64; 3]; 2];
        let mut interrupted = false;
        let round_budget = params.time_per_execution / ROUNDS;
        for _ in 0..ROUNDS {
            for (slot, (execution, step)) in sums.iter_mut().zip([
                (Execution::AttemptBased, ATTEMPT_STEP_TAU0),
                (Execution::RejectionFree, REJECTION_FREE_STEP_TAU0),
            ]) {
                let (simulated, flips, cpu, i) =
                    simulate_for(&mut engine, execution, round_budget, step, interrupt);
                slot[0] += simulated;
                slot[1] += flips;
                slot[2] += cpu;
                interrupted |= i;
            }
            if interrupted {
                break;
            }
        }
        let [[a_sim, a_flips, a_cpu], [f_sim, f_events, f_cpu]] = sums;
        let attempt_rate = a_sim / a_cpu.max(1e-9);
        let attempt_flips = a_flips / a_cpu.max(1e-9);
        let free_rate = f_sim / f_cpu.max(1e-9);
        let free_events = f_events / f_cpu.max(1e-9);
        let mut extra = serde_json::Map::new();
        extra.insert("T".into(), t.into());
        extra.insert("L".into(), params.cells_per_side.into());
        extra.insert("J_eff_K".into(), params.j_eff_kelvin.into());
        extra.insert("spins".into(), lat.spin_count().into());
        extra.insert("threads".into(), 1.into());
        extra.insert("tau0_s".into(), 1.0.into());
        extra.insert("monopoles_at_start".into(), monopoles.into());
        extra.insert(
            "attempt_based_simulated_s_per_cpu_s".into(),
            attempt_rate.into(),
        );
        extra.insert(
            "rejection_free_simulated_s_per_cpu_s".into(),
            free_rate.into(),
        );
        extra.insert("attempt_based_flips_per_s".into(), attempt_flips.into());
        extra.insert("rejection_free_events_per_s".into(), free_events.into());
        extra.insert(
            "rejection_free_ns_per_event".into(),
            (1e9 / free_events.max(1e-9)).into(),
        );
        extra.insert(
            "attempt_based_ns_per_attempt".into(),
            (1e9 / (attempt_rate * lat.spin_count() as f64).max(1e-9)).into(),
        );
        extra.insert(
            "clock".into(),
            if CpuClock::start().uses_cpu_time() {
                "thread CPU time"
            } else {
                "wall time"
            }
            .into(),
        );
        extra.insert("goal".into(), "≥ 200 at T = 0.3 K".into());
        if interrupted {
            extra.insert("interrupted".into(), true.into());
        }
        records.push(BenchRecord {
            bench: KINETICS_REJECTION_FREE_SPEEDUP.into(),
            value: if attempt_rate > 0.0 {
                free_rate / attempt_rate
            } else {
                0.0
            },
            unit: "ratio".into(),
            extra,
        });
        if interrupt.is_requested() {
            break;
        }
    }
    records
}

/// The [`KINETICS_GATED_EVENTS`] workload: bimodal gates (h⊥ = 0 spins
/// 10⁴ times slower), rejection-free, at the first temperature of `params`
/// above 0.4 K (0.5 K by default).
pub fn kinetics_gated_events(params: &KineticsBench, interrupt: &Interrupt) -> BenchRecord {
    let t = params
        .temperatures_kelvin
        .iter()
        .copied()
        .find(|&t| t > 0.4)
        .unwrap_or(0.5);
    let mut extra = serde_json::Map::new();
    let lat = match Pyrochlore::new(params.cells_per_side) {
        Ok(l) => l,
        Err(e) => {
            extra.insert("error".into(), e.to_string().into());
            return BenchRecord {
                bench: KINETICS_GATED_EVENTS.into(),
                value: 0.0,
                unit: "events/s".into(),
                extra,
            };
        }
    };
    let times = AttemptTimes::bimodal(1.0, SlowGate::Ratio(DEFAULT_SLOW_RATIO))
        .expect("valid bimodal preset");
    let mut engine = prepared_engine(&lat, params, t, times, 77, interrupt);
    let (simulated, events, interrupted) = simulated_per_second(
        &mut engine,
        Execution::RejectionFree,
        params.time_per_execution,
        REJECTION_FREE_STEP_TAU0,
        interrupt,
    );
    extra.insert("T".into(), t.into());
    extra.insert("L".into(), params.cells_per_side.into());
    extra.insert("J_eff_K".into(), params.j_eff_kelvin.into());
    extra.insert(
        "rule".into(),
        "bimodal gates, slow ratio 1e4, Metropolis".into(),
    );
    extra.insert("execution".into(), "rejection-free".into());
    extra.insert("threads".into(), 1.into());
    extra.insert("simulated_s_per_cpu_s".into(), simulated.into());
    if interrupted {
        extra.insert("interrupted".into(), true.into());
    }
    BenchRecord {
        bench: KINETICS_GATED_EVENTS.into(),
        value: events,
        unit: "events/s".into(),
        extra,
    }
}

/// The [`KINETICS_DIPOLAR_FLIPS`] workload: the dipolar model of L = 4
/// (D = 1.41 K, J1 = 3.72 K in the vector convention; den Hertog & Gingras,
/// Phys. Rev. Lett. 84, 3430 (2000), memory) at 1 K from an equilibrated
/// state, one thread. Value: flips per CPU second with thinning; beside it
/// the attempt-based execution measured in alternating rounds (simulated
/// time ratio) and the transverse-field what-if with the bimodal step.
pub fn kinetics_dipolar_flips(interrupt: &Interrupt) -> BenchRecord {
    use crate::dynamics::{
        nearest_neighbour_transverse_field_kelvin, DipolarGating, DipolarKinetics,
    };
    use crate::engine::{FlipRule, LocalFieldSampler};
    use crate::ewald::{DipolarInteraction, DEFAULT_EWALD_ACCURACY};
    use crate::exchange::{CouplingConvention, ExchangeCouplings};
    use crate::gating::TransverseRateLaw;
    let (l, t, d) = (4usize, 1.0, 1.41);
    let lat = Pyrochlore::new(l).expect("L = 4");
    let mut table = crate::couplings::CouplingTable::zero(&lat).expect("small table");
    ExchangeCouplings::nearest_neighbour(3.72, CouplingConvention::VectorSpins)
        .add_to(&lat, &mut table)
        .expect("valid exchange");
    let dipolar = DipolarInteraction {
        d_kelvin: d,
        accuracy: DEFAULT_EWALD_ACCURACY,
    };
    dipolar
        .add_to(&lat, &mut table)
        .expect("valid dipolar term");
    let field_tables = dipolar.field_tables(&lat).expect("valid dipolar term");
    let streams = RngStreams::new(5);
    let sigma = initial_configuration(&lat, Start::IceState, &mut streams.stream(0));
    let mut eq = LocalFieldSampler::new(
        &lat,
        &table,
        t,
        FlipRule::Metropolis,
        sigma,
        streams.stream(1),
    )
    .expect("matching table");
    for _ in 0..200 {
        if interrupt.is_requested() {
            break;
        }
        eq.sweep();
    }
    let budget = Duration::from_millis(1500) / ROUNDS;
    let uniform = DipolarGating::NeighbourClasses(AttemptTimes::uniform(1.0).expect("τ0 = 1 s"));
    let mut engine = DipolarKinetics::new(
        &lat,
        &table,
        [0.0; 4],
        uniform,
        eq.sigma().to_vec(),
        AcceptanceRule::Metropolis,
        t,
        streams.stream(2),
    )
    .expect("valid engine");
    let mut sums = [[0.0f64; 3]; 2];
    let mut interrupted = false;
    for _ in 0..ROUNDS {
        for (slot, (execution, step)) in sums.iter_mut().zip([
            (Execution::AttemptBased, ATTEMPT_STEP_TAU0),
            (Execution::RejectionFree, ATTEMPT_STEP_TAU0),
        ]) {
            let (simulated, flips, cpu, i) =
                simulate_for(&mut engine, execution, budget, step, interrupt);
            slot[0] += simulated;
            slot[1] += flips;
            slot[2] += cpu;
            interrupted |= i;
        }
    }
    let what_if = DipolarGating::FullDipolarSum {
        field_tables: &field_tables,
        unit_kelvin: nearest_neighbour_transverse_field_kelvin(&lat, d),
        law: TransverseRateLaw::bimodal(1.0, SlowGate::Ratio(DEFAULT_SLOW_RATIO))
            .expect("valid preset"),
    };
    let mut gated = DipolarKinetics::new(
        &lat,
        &table,
        [0.0; 4],
        what_if,
        eq.sigma().to_vec(),
        AcceptanceRule::Metropolis,
        t,
        streams.stream(3),
    )
    .expect("valid engine");
    let (_, g_flips, g_cpu, i) = simulate_for(
        &mut gated,
        Execution::RejectionFree,
        budget,
        ATTEMPT_STEP_TAU0,
        interrupt,
    );
    interrupted |= i;
    let [[a_sim, a_flips, a_cpu], [f_sim, f_flips, f_cpu]] = sums;
    let mut extra = serde_json::Map::new();
    extra.insert("T".into(), t.into());
    extra.insert("L".into(), l.into());
    extra.insert("spins".into(), lat.spin_count().into());
    extra.insert("D_K".into(), d.into());
    extra.insert("threads".into(), 1.into());
    extra.insert(
        "attempt_based_flips_per_cpu_s".into(),
        (a_flips / a_cpu).into(),
    );
    extra.insert(
        "thinning_over_attempts_simulated_time".into(),
        ((f_sim / f_cpu) / (a_sim / a_cpu).max(1e-30)).into(),
    );
    extra.insert(
        "dipolar_transverse_what_if_flips_per_cpu_s".into(),
        (g_flips / g_cpu).into(),
    );
    if interrupted {
        extra.insert("interrupted".into(), true.into());
    }
    BenchRecord {
        bench: KINETICS_DIPOLAR_FLIPS.into(),
        value: f_flips / f_cpu,
        unit: "flips/s".into(),
        extra,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn records_have_the_documented_fields() {
        let params = KineticsBench {
            cells_per_side: 2,
            preparation_tau0: 20.0,
            time_per_execution: Duration::from_millis(30),
            ..Default::default()
        };
        let records = kinetics_rejection_free_speedup(&params, &Interrupt::new());
        assert_eq!(records.len(), 2);
        for (r, t) in records.iter().zip([0.3, 0.5]) {
            let json = serde_json::to_value(r).unwrap();
            assert_eq!(json["bench"], KINETICS_REJECTION_FREE_SPEEDUP);
            assert_eq!(json["T"], t);
            let a = json["attempt_based_simulated_s_per_cpu_s"]
                .as_f64()
                .unwrap();
            let b = json["rejection_free_simulated_s_per_cpu_s"]
                .as_f64()
                .unwrap();
            assert!(a > 0.0 && b > 0.0);
            assert!((json["value"].as_f64().unwrap() - b / a).abs() < 1e-9 * (b / a));
        }
        let gated =
            serde_json::to_value(kinetics_gated_events(&params, &Interrupt::new())).unwrap();
        assert_eq!(gated["unit"], "events/s");
        assert!(gated["value"].as_f64().unwrap() > 0.0);
    }
}
