//! Benchmarks of the equilibrium engine: dipolar single flips with local
//! fields, the O(N) field update, the coupling-table size and loop moves.
//! Goals (issue 3, not tests): field updates ≥ 1e9 entries/s (memory speed),
//! table under 4 MB at L = 8.

use super::BenchRecord;
use crate::control::Interrupt;
use crate::couplings::CouplingTable;
use crate::engine::{FlipRule, LocalFieldSampler};
use crate::ewald::{DipolarInteraction, DEFAULT_EWALD_ACCURACY};
use crate::exchange::{CouplingConvention, ExchangeCouplings};
use crate::lattice::Pyrochlore;
use crate::loops::LoopMoves;
use crate::metropolis::{initial_configuration, Start};
use crate::rng::RngStreams;
use rand::Rng;
use std::time::{Duration, Instant};

/// Single-flip Metropolis attempts per second, dipolar spin ice (L = 8, T = 1 K).
pub const DIPOLAR_METROPOLIS_ATTEMPTS: &str = "dipolar_metropolis_attempts";
/// Local-field entries updated per second by accepted flips (L = 8).
pub const DIPOLAR_FIELD_UPDATES: &str = "dipolar_field_updates";
/// Bytes of the translation-invariant dipolar coupling table (L = 8).
pub const DIPOLAR_TABLE_BYTES: &str = "dipolar_table_bytes";
/// Loop moves per second, L = 8, nearest-neighbour and dipolar.
pub const LOOP_MOVES: &str = "loop_moves";

/// Parameters shared by these benchmarks.
#[derive(Clone, Debug)]
pub struct EquilibriumBench {
    /// L.
    pub cells_per_side: usize,
    /// J1 in the vector convention (K); −J1/3 = J_nn.
    pub j1_kelvin: f64,
    /// D (K).
    pub d_kelvin: f64,
    /// Wall time per timed section.
    pub time_budget: Duration,
}

impl Default for EquilibriumBench {
    /// Dipolar spin ice with J_nn = −1.24 K, D = 1.41 K (D_nn = 2.35 K), the
    /// parameter set of den Hertog & Gingras, PRL 84, 3430 (2000) (memory).
    fn default() -> Self {
        Self {
            cells_per_side: 8,
            j1_kelvin: 3.72,
            d_kelvin: 1.41,
            time_budget: Duration::from_millis(1500),
        }
    }
}

fn error_record(name: &str, unit: &str, message: String) -> BenchRecord {
    let mut extra = serde_json::Map::new();
    extra.insert("error".into(), message.into());
    BenchRecord {
        bench: name.into(),
        value: 0.0,
        unit: unit.into(),
        extra,
    }
}

fn dipolar_table(
    lat: &Pyrochlore,
    params: &EquilibriumBench,
    with_dipolar: bool,
) -> Result<(CouplingTable, f64), String> {
    let started = Instant::now();
    let mut table = CouplingTable::zero(lat).map_err(|e| e.to_string())?;
    ExchangeCouplings::nearest_neighbour(params.j1_kelvin, CouplingConvention::VectorSpins)
        .add_to(lat, &mut table)
        .map_err(|e| e.to_string())?;
    if with_dipolar {
        DipolarInteraction {
            d_kelvin: params.d_kelvin,
            accuracy: DEFAULT_EWALD_ACCURACY,
        }
        .add_to(lat, &mut table)
        .map_err(|e| e.to_string())?;
    }
    Ok((table, started.elapsed().as_secs_f64()))
}

/// Run one of this module's benchmarks (`None` for another name).
pub fn run(
    name: &str,
    params: &EquilibriumBench,
    interrupt: &Interrupt,
) -> Option<Vec<BenchRecord>> {
    let lat = match Pyrochlore::new(params.cells_per_side) {
        Ok(l) => l,
        Err(e) => return Some(vec![error_record(name, "", e.to_string())]),
    };
    let record = match name {
        DIPOLAR_METROPOLIS_ATTEMPTS => metropolis_attempts(&lat, params, interrupt),
        DIPOLAR_FIELD_UPDATES => field_updates(&lat, params, interrupt),
        DIPOLAR_TABLE_BYTES => table_bytes(&lat, params),
        LOOP_MOVES => return Some(loop_moves(&lat, params, interrupt)),
        _ => return None,
    };
    Some(vec![record])
}

fn base_extra(
    lat: &Pyrochlore,
    params: &EquilibriumBench,
) -> serde_json::Map<String, serde_json::Value> {
    let mut extra = serde_json::Map::new();
    extra.insert("L".into(), params.cells_per_side.into());
    extra.insert("spins".into(), lat.spin_count().into());
    extra.insert("J1_vector_K".into(), params.j1_kelvin.into());
    extra.insert("D_K".into(), params.d_kelvin.into());
    extra.insert("threads".into(), 1.into());
    extra
}

fn metropolis_attempts(
    lat: &Pyrochlore,
    params: &EquilibriumBench,
    interrupt: &Interrupt,
) -> BenchRecord {
    let unit = "attempts/s";
    let (table, build_s) = match dipolar_table(lat, params, true) {
        Ok(t) => t,
        Err(e) => return error_record(DIPOLAR_METROPOLIS_ATTEMPTS, unit, e),
    };
    let mut rng = RngStreams::new(31).stream(0);
    let sigma = initial_configuration(lat, Start::Random, &mut rng);
    let mut s = match LocalFieldSampler::new(lat, &table, 1.0, FlipRule::Metropolis, sigma, rng) {
        Ok(s) => s,
        Err(e) => return error_record(DIPOLAR_METROPOLIS_ATTEMPTS, unit, e.to_string()),
    };
    for _ in 0..20 {
        s.sweep();
    }
    let (a0, acc0, f0) = (
        s.attempt_count(),
        s.accepted_count(),
        s.field_update_count(),
    );
    let started = Instant::now();
    let mut interrupted = false;
    while started.elapsed() < params.time_budget {
        if interrupt.is_requested() {
            interrupted = true;
            break;
        }
        s.sweep();
    }
    let secs = started.elapsed().as_secs_f64().max(1e-9);
    let attempts = s.attempt_count() - a0;
    let mut extra = base_extra(lat, params);
    extra.insert("T_K".into(), 1.0.into());
    extra.insert("table_build_s".into(), build_s.into());
    extra.insert(
        "acceptance_rate".into(),
        ((s.accepted_count() - acc0) as f64 / attempts.max(1) as f64).into(),
    );
    extra.insert(
        "field_updates_per_s".into(),
        ((s.field_update_count() - f0) as f64 / secs).into(),
    );
    if interrupted {
        extra.insert("interrupted".into(), true.into());
    }
    BenchRecord {
        bench: DIPOLAR_METROPOLIS_ATTEMPTS.into(),
        value: attempts as f64 / secs,
        unit: unit.into(),
        extra,
    }
}

fn field_updates(
    lat: &Pyrochlore,
    params: &EquilibriumBench,
    interrupt: &Interrupt,
) -> BenchRecord {
    let unit = "entries/s";
    let (table, _) = match dipolar_table(lat, params, true) {
        Ok(t) => t,
        Err(e) => return error_record(DIPOLAR_FIELD_UPDATES, unit, e),
    };
    let mut rng = RngStreams::new(32).stream(0);
    let sigma = initial_configuration(lat, Start::Random, &mut rng);
    let mut s = match LocalFieldSampler::new(lat, &table, 1.0, FlipRule::Metropolis, sigma, rng) {
        Ok(s) => s,
        Err(e) => return error_record(DIPOLAR_FIELD_UPDATES, unit, e.to_string()),
    };
    // Forced flips of random spins: every one is an accepted-flip update.
    let n = lat.spin_count();
    let mut sites = RngStreams::new(33).stream(0);
    let f0 = s.field_update_count();
    let started = Instant::now();
    let mut interrupted = false;
    while started.elapsed() < params.time_budget {
        if interrupt.is_requested() {
            interrupted = true;
            break;
        }
        for _ in 0..64 {
            let spin = sites.gen_range(0..n) as u32;
            let cost = s.flip_cost_kelvin(spin as usize);
            s.apply_flip_set(&[spin], cost);
        }
    }
    let secs = started.elapsed().as_secs_f64().max(1e-9);
    let mut extra = base_extra(lat, params);
    extra.insert("goal_entries_per_s".into(), 1e9.into());
    if interrupted {
        extra.insert("interrupted".into(), true.into());
    }
    BenchRecord {
        bench: DIPOLAR_FIELD_UPDATES.into(),
        value: (s.field_update_count() - f0) as f64 / secs,
        unit: unit.into(),
        extra,
    }
}

fn table_bytes(lat: &Pyrochlore, params: &EquilibriumBench) -> BenchRecord {
    let unit = "bytes";
    let (table, build_s) = match dipolar_table(lat, params, true) {
        Ok(t) => t,
        Err(e) => return error_record(DIPOLAR_TABLE_BYTES, unit, e),
    };
    let mut extra = base_extra(lat, params);
    extra.insert("goal_bytes".into(), (4u64 << 20).into());
    extra.insert(
        "layout".into(),
        "16 sublattice pairs x N/4 displacements, f64".into(),
    );
    extra.insert("build_s".into(), build_s.into());
    extra.insert(
        "local_field_bytes".into(),
        (lat.spin_count() * std::mem::size_of::<f64>()).into(),
    );
    BenchRecord {
        bench: DIPOLAR_TABLE_BYTES.into(),
        value: table.table_bytes() as f64,
        unit: unit.into(),
        extra,
    }
}

fn loop_moves(
    lat: &Pyrochlore,
    params: &EquilibriumBench,
    interrupt: &Interrupt,
) -> Vec<BenchRecord> {
    let unit = "loops/s";
    let mut out = Vec::new();
    for (with_dipolar, model, t) in [(false, "nearest_neighbour", 0.3), (true, "dipolar", 0.3)] {
        let (table, _) = match dipolar_table(lat, params, with_dipolar) {
            Ok(t) => t,
            Err(e) => {
                out.push(error_record(LOOP_MOVES, unit, e));
                continue;
            }
        };
        let mut rng = RngStreams::new(34).stream(0);
        let sigma = initial_configuration(lat, Start::IceState, &mut rng);
        let mut s = match LocalFieldSampler::new(lat, &table, t, FlipRule::Metropolis, sigma, rng) {
            Ok(s) => s,
            Err(e) => {
                out.push(error_record(LOOP_MOVES, unit, e.to_string()));
                continue;
            }
        };
        let mut moves = LoopMoves::new(lat);
        let started = Instant::now();
        let mut interrupted = false;
        while started.elapsed() < params.time_budget {
            if interrupt.is_requested() {
                interrupted = true;
                break;
            }
            for _ in 0..16 {
                moves.attempt(&mut s);
            }
        }
        let secs = started.elapsed().as_secs_f64().max(1e-9);
        let st = moves.statistics();
        let mut extra = base_extra(lat, params);
        extra.insert("model".into(), model.into());
        if !with_dipolar {
            extra.remove("D_K");
        }
        extra.insert("T_K".into(), t.into());
        extra.insert(
            "acceptance_rate".into(),
            (st.accepted as f64 / st.attempts.max(1) as f64).into(),
        );
        extra.insert(
            "mean_accepted_loop_spins".into(),
            (st.flipped_spins as f64 / st.accepted.max(1) as f64).into(),
        );
        if interrupted {
            extra.insert("interrupted".into(), true.into());
        }
        out.push(BenchRecord {
            bench: LOOP_MOVES.into(),
            value: st.attempts as f64 / secs,
            unit: unit.into(),
            extra,
        });
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn records_have_values_and_table_is_o_n() {
        let params = EquilibriumBench {
            cells_per_side: 2,
            time_budget: Duration::from_millis(30),
            ..Default::default()
        };
        let i = Interrupt::new();
        for name in [
            DIPOLAR_METROPOLIS_ATTEMPTS,
            DIPOLAR_FIELD_UPDATES,
            LOOP_MOVES,
        ] {
            for r in run(name, &params, &i).unwrap() {
                assert!(r.value > 0.0, "{r:?}");
                assert_eq!(r.bench, name);
            }
        }
        // 4N f64 (derived): L = 2, N = 128 → 4096 bytes.
        let t = run(DIPOLAR_TABLE_BYTES, &params, &i).unwrap();
        assert_eq!(t[0].value, 4096.0);
        assert!(run("nope", &params, &i).is_none());
    }

    #[test]
    #[ignore = "full-size benchmarks (about 10 s): run with --ignored --nocapture to see the records"]
    fn full_size_benchmarks_print_their_records() {
        let i = Interrupt::new();
        for name in [
            DIPOLAR_METROPOLIS_ATTEMPTS,
            DIPOLAR_FIELD_UPDATES,
            DIPOLAR_TABLE_BYTES,
            LOOP_MOVES,
        ] {
            for r in run(name, &EquilibriumBench::default(), &i).unwrap() {
                eprintln!("{}", serde_json::to_string(&r).unwrap());
                assert!(r.value > 0.0, "{r:?}");
            }
        }
    }
}
