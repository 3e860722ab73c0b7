//! Edge cases of the physical-time kinetics: rate laws that validation
//! accepts must give usable rates, and the n-fold way with strong further
//! exchange shells must re-class every partner of a flipped spin (this test
//! fails by ≈ 40σ at 3 K if the further-shell partners are not re-binned;
//! the weak shells of kinetics_models.rs would not notice).

use icefield_stdlib::control::Interrupt;
use icefield_stdlib::couplings::CouplingTable;
use icefield_stdlib::dynamics::{
    AcceptanceRule, ExchangeFlipEnergy, Execution, KineticEngine, Kinetics,
};
use icefield_stdlib::engine::{FlipRule, LocalFieldSampler};
use icefield_stdlib::exchange::{CouplingConvention, ExchangeCouplings};
use icefield_stdlib::gating::{AttemptTimes, TransverseRateLaw};
use icefield_stdlib::lattice::Pyrochlore;
use icefield_stdlib::metropolis::{initial_configuration, Start};
use icefield_stdlib::observe::blocking_analysis;
use icefield_stdlib::rng::RngStreams;

/// Rates of a law at a few x, or the panic message.
fn rates(law: &TransverseRateLaw) -> Result<Vec<f64>, String> {
    std::panic::catch_unwind(|| {
        [0.0, 0.5, 1.0, 3.0, 10.0]
            .iter()
            .map(|&x| law.rate_per_second(x))
            .collect::<Vec<f64>>()
    })
    .map_err(|e| {
        e.downcast_ref::<String>()
            .cloned()
            .or_else(|| e.downcast_ref::<&str>().map(|s| s.to_string()))
            .unwrap_or_default()
    })
}

#[test]
fn a_rate_law_that_validate_accepts_gives_finite_rates() {
    // Contract of `TransverseRateLaw::validate` (gating.rs): a law it accepts
    // is usable, i.e. `rate_per_second` is a finite number ≥ 0 for every
    // x ≥ 0, bounded by `fastest_rate_per_second` (what the thinning bins
    // and the attempt clock of dipolar.rs rely on). Each law below has
    // positive finite attempt times only (common practice: a rate is
    // 1/τ with 0 < τ ≤ ∞).
    let laws = [
        (
            "one grid point",
            TransverseRateLaw::Table {
                x_max: 8.0,
                attempt_time_seconds: vec![1.0],
            },
        ),
        (
            "x_max = 0",
            TransverseRateLaw::Table {
                x_max: 0.0,
                attempt_time_seconds: vec![1.0, 2.0],
            },
        ),
        (
            "x_max = NaN",
            TransverseRateLaw::Table {
                x_max: f64::NAN,
                attempt_time_seconds: vec![1.0, 2.0],
            },
        ),
    ];
    let mut failures = Vec::new();
    for (name, law) in laws {
        if law.validate().is_err() {
            continue; // rejected up front: fine
        }
        let fastest = law.fastest_rate_per_second();
        match rates(&law) {
            Err(message) => failures.push(format!(
                "{name}: validate accepts it, rate panics: {message}"
            )),
            Ok(r) => {
                if r.iter()
                    .any(|&v| !(v.is_finite() && v >= 0.0 && v <= fastest))
                {
                    failures.push(format!("{name}: validate accepts it, rates {r:?}"));
                }
            }
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

#[test]
fn n_fold_way_with_strong_further_shells_samples_the_equilibrium_energy() {
    // Detailed balance gives the Boltzmann law as the stationary law of the
    // n-fold way (Bortz, Kalos & Lebowitz, J. Comput. Phys. 17, 10 (1975)),
    // so its time average of E must equal the equilibrium Metropolis
    // average (Metropolis et al., J. Chem. Phys. 21, 1087 (1953)) within
    // 4σ. Further shells comparable to J1 (values chosen for the test) make
    // a spin left in the bucket of its old class after a second- or
    // third-neighbour flip visible; with the test's weak shells it is not.
    let lat = Pyrochlore::new(2).unwrap();
    let exchange = ExchangeCouplings {
        j1_kelvin: -3.3,
        j2_kelvin: -0.6,
        j3_kelvin: 0.3,
        j3_prime_kelvin: -0.3,
        convention: CouplingConvention::VectorSpins,
    };
    let mut table = CouplingTable::zero(&lat).unwrap();
    exchange.add_to(&lat, &mut table).unwrap();
    let t = 3.0;
    let mut eq = LocalFieldSampler::new(
        &lat,
        &table,
        t,
        FlipRule::Metropolis,
        initial_configuration(&lat, Start::Random, &mut RngStreams::new(8).stream(0)),
        RngStreams::new(8).stream(1),
    )
    .unwrap();
    for _ in 0..500 {
        eq.sweep();
    }
    let mut reference = Vec::new();
    for _ in 0..20_000 {
        eq.sweep();
        reference.push(eq.energy_kelvin());
    }
    let reference = blocking_analysis(&reference).unwrap().estimate();
    let energy = ExchangeFlipEnergy::new(&lat, &exchange, None).unwrap();
    let mut rng = RngStreams::new(9).stream(0);
    let sigma = initial_configuration(&lat, Start::Random, &mut rng);
    let mut engine = Kinetics::new(
        &lat,
        energy,
        sigma,
        AcceptanceRule::Metropolis,
        t,
        AttemptTimes::uniform(1.0).unwrap(),
        rng,
    )
    .unwrap();
    engine
        .run_for(500.0, Execution::RejectionFree, &Interrupt::new())
        .unwrap();
    let mut energies = Vec::new();
    let t0 = engine.time_seconds();
    for k in 1..=20_000 {
        assert!(engine.advance(t0 + k as f64, Execution::RejectionFree, u64::MAX, &mut ()));
        energies.push(table.direct_energy_kelvin(engine.sigma()));
    }
    let got = blocking_analysis(&energies).unwrap().estimate();
    let sigma = (got.error.powi(2) + reference.error.powi(2)).sqrt();
    eprintln!(
        "E: n-fold way {} ± {}, equilibrium {} ± {}",
        got.mean, got.error, reference.mean, reference.error
    );
    assert!(got.error > 0.0 && reference.error > 0.0);
    assert!(
        (got.mean - reference.mean).abs() < 4.0 * sigma,
        "n-fold way {} ± {}, equilibrium {} ± {}",
        got.mean,
        got.error,
        reference.mean,
        reference.error
    );
}
