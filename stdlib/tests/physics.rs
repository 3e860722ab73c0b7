//! Physics checks of the nearest-neighbour spin-ice sampler against exact
//! results. Each check names its source beside it.

mod common;

use icefield_stdlib::control::{ignore_progress, Interrupt};
use icefield_stdlib::hamiltonian::{charge, NearestNeighbourIce};
use icefield_stdlib::lattice::Pyrochlore;
use icefield_stdlib::metropolis::reference::StraightforwardMetropolis;
use icefield_stdlib::metropolis::{NearestNeighbourMetropolis, Start};
use icefield_stdlib::observe::{blocking_analysis, Estimate};
use icefield_stdlib::rng::RngStreams;
use icefield_stdlib::scan::{run_scan, ScanPoint, ScanSettings};

const J_EFF: f64 = 1.1;

fn scan_one(
    cells: usize,
    t: f64,
    equilibration: u64,
    measurement: u64,
    start: Start,
    seed: u64,
) -> ScanPoint {
    let settings = ScanSettings {
        cells_per_side: cells,
        model: NearestNeighbourIce::new(J_EFF),
        temperatures_kelvin: vec![t],
        equilibration_sweeps: equilibration,
        measurement_sweeps: measurement,
        sample_every_sweeps: 1,
        seed,
        start,
    };
    let result = run_scan(&settings, &Interrupt::new(), &ignore_progress).expect("valid settings");
    assert!(!result.interrupted);
    result.points.into_iter().next().expect("one point")
}

/// `|estimate − expected| ≤ k σ + bias`, with a readable failure message.
fn assert_agrees(what: &str, got: Estimate, expected: f64, sigmas: f64, bias: f64) {
    let tolerance = sigmas * got.error + bias;
    assert!(
        (got.mean - expected).abs() <= tolerance,
        "{what}: {} ± {} vs expected {expected} (tolerance {tolerance})",
        got.mean,
        got.error
    );
}

#[test]
fn ice_rule_holds_at_low_temperature() {
    // At T ≪ J_eff the ground states obey the ice rule, two in – two out
    // (Bernal & Fowler, J. Chem. Phys. 1, 515 (1933); Pauling, JACS 57, 2680
    // (1935)); a single defect costs 2 J_eff per tetrahedron (4 J_eff a pair,
    // derived, physics-reference §2), so the charge density vanishes like
    // e^{−2J/T} ≈ e^{−13} here. Quenched from a random state, monopoles must
    // annihilate; from the all-in–all-out state, double charges must decay.
    for start in [Start::Random, Start::AllInAllOut] {
        let p = scan_one(2, 0.15 * J_EFF, 4000, 1000, start, 11);
        assert!(
            p.single_charge_density.mean < 1e-3,
            "{start:?}: {:?}",
            p.single_charge_density
        );
        assert!(
            p.double_charge_density.mean < 1e-4,
            "{start:?}: {:?}",
            p.double_charge_density
        );
        assert!(p.monopole_density_per_spin.mean < 1e-3);
        // Ice states have E/N = −J_eff exactly (H = 2J ΣQ² − NJ, derived).
        assert!(
            (p.energy_per_spin_kelvin.mean + J_EFF).abs() < 2e-3 * J_EFF,
            "{p:?}"
        );
    }
}

#[test]
fn one_flip_out_of_an_ice_state_costs_four_j_eff() {
    // Flipping one spin of a two-in–two-out state makes a ±1 charge pair,
    // ΔE = 2J(1 + 1) = 4 J_eff (derived, physics-reference §2). Checked on
    // the constructed ice state and on an ice state found by annealing.
    let lat = Pyrochlore::new(2).unwrap();
    let model = NearestNeighbourIce::new(J_EFF);
    let mut engine = NearestNeighbourMetropolis::new(
        &lat,
        &model,
        0.1 * J_EFF,
        Start::Random,
        RngStreams::new(5).stream(0),
    );
    for _ in 0..5000 {
        engine.sweep();
    }
    let annealed = engine.sigma().to_vec();
    let constructed: Vec<i8> = (0..lat.spin_count())
        .map(|i| if lat.sublattice(i) < 2 { 1 } else { -1 })
        .collect();
    for sigma in [constructed, annealed] {
        assert!(
            (0..lat.tetrahedron_count()).all(|t| charge(&lat, &sigma, t) == 0),
            "ice state"
        );
        let e0 = model.energy_kelvin(&lat, &sigma);
        assert!((e0 + J_EFF * lat.spin_count() as f64).abs() < 1e-9);
        for spin in 0..lat.spin_count() {
            assert!((model.flip_cost_kelvin(&lat, &sigma, spin) - 4.0 * J_EFF).abs() < 1e-12);
            let mut flipped = sigma.clone();
            flipped[spin] = -flipped[spin];
            assert!((model.energy_kelvin(&lat, &flipped) - e0 - 4.0 * J_EFF).abs() < 1e-9);
            let [up, down] = lat.tetrahedra_of(spin);
            let pair = [
                charge(&lat, &flipped, up as usize),
                charge(&lat, &flipped, down as usize),
            ];
            assert!(
                pair == [1, -1] || pair == [-1, 1],
                "a ± monopole pair: {pair:?}"
            );
        }
    }
}

#[test]
fn high_temperature_curie_constant() {
    // Local ⟨111⟩ Ising spins: χT → μ²/3 per spin at high T (derived,
    // physics-reference §9). Leading correction (derived): 3χT = 1 +
    // Σ_{j∈nn} e_i·e_j ⟨σ_iσ_j⟩ + O(t²) = 1 + 6·(−1/3)·(−t) = 1 + 2t with
    // t = tanh(J/T). At T = 100 J_eff: 2t/3 = 0.0067, resolved here; O(t²)
    // terms (further-neighbour correlations) are allowed for as 20t²/3.
    let t_over_j = 100.0;
    let p = scan_one(2, t_over_j * J_EFF, 200, 200_000, Start::Random, 21);
    let temperature = p.temperature_kelvin;
    let t = (1.0 / t_over_j).tanh();
    let chi_t = p.susceptibility_per_spin.scaled(temperature);
    assert_agrees("χT", chi_t, (1.0 + 2.0 * t) / 3.0, 3.0, 20.0 * t * t / 3.0);
    // The error bar must be small enough to resolve the 2t/3 = 0.0067
    // correction, or the test could not tell χT = (1 + 2t)/3 from 1/3.
    assert!(chi_t.error < 1e-3, "{chi_t:?}");
}

#[test]
fn energy_per_spin_at_high_temperature() {
    // E/N = 3 J ⟨σ_iσ_j⟩_nn (3 bonds per spin). High-temperature expansion
    // (derived): ⟨σ_iσ_j⟩ = −t + 2t² − 2t³ + O(t⁴), t = tanh(J/T): the single
    // bond, then the 2 paths of length 2 and the 2 of length 3 inside the
    // shared tetrahedron (the pyrochlore lattice has no other loops shorter
    // than hexagons). O(t⁴) allowance 3J·10t⁴ plus 3σ.
    let t_over_j = 20.0;
    let p = scan_one(3, t_over_j * J_EFF, 200, 40_000, Start::IceState, 31);
    let t = (1.0 / t_over_j).tanh();
    let series = 3.0 * J_EFF * (-t + 2.0 * t * t - 2.0 * t.powi(3));
    assert_agrees(
        "E/N at T = 20 J",
        p.energy_per_spin_kelvin,
        series,
        3.0,
        30.0 * J_EFF * t.powi(4),
    );
    // The leading term alone (−3J tanh(J/T)) is off by 6 J t² ≈ 0.016 K: the
    // estimate must be precise enough to tell.
    assert!(p.energy_per_spin_kelvin.error < 1e-3);

    // T → ∞: E/N → 0 (derived), from the fully ordered ice start.
    let p = scan_one(3, 1e4 * J_EFF, 200, 5_000, Start::IceState, 32);
    assert_agrees(
        "E/N at T = 10⁴ J",
        p.energy_per_spin_kelvin,
        0.0,
        3.0,
        3.0 * J_EFF * 1e-4,
    );
}

#[test]
fn infinite_temperature_charge_densities() {
    // Independent spins: per tetrahedron P(|Q| = 1) = 8/16 = 1/2,
    // P(|Q| = 2) = 2/16 = 1/8, so Σ|Q|/N = (N/2)(1/2 + 2/8)/N = 3/8 (derived).
    // At T = 10⁴ J_eff corrections are O(J/T) = 10⁻⁴.
    let p = scan_one(3, 1e4 * J_EFF, 100, 20_000, Start::AllInAllOut, 41);
    assert_agrees("single", p.single_charge_density, 0.5, 3.0, 1e-3);
    assert_agrees("double", p.double_charge_density, 0.125, 3.0, 1e-3);
    assert_agrees("Σ|Q|/N", p.monopole_density_per_spin, 0.375, 3.0, 1e-3);
    // Magnetisation of N random unit-length moments: |M|/N ~ √(8/(3πN))
    // (Maxwell distribution of a 3D Gaussian with variance N/3 per
    // component, derived).
    let n = 16.0 * 27.0;
    assert_agrees(
        "|M|/N",
        p.magnetisation_per_spin,
        (8.0 / (3.0 * std::f64::consts::PI * n)).sqrt(),
        3.0,
        5e-3 * (1.0 / n).sqrt(),
    );
}

#[test]
fn scan_matches_exact_enumeration_of_the_16_spin_lattice() {
    // The L = 1 lattice has 2^16 states: canonical averages are exact sums
    // (derived). Every estimator must agree within 4σ, and the error bars
    // must be small enough for the comparison to mean something.
    let settings = ScanSettings {
        cells_per_side: 1,
        model: NearestNeighbourIce::new(J_EFF),
        temperatures_kelvin: vec![0.6 * J_EFF, 1.2 * J_EFF, 3.0 * J_EFF],
        equilibration_sweeps: 1000,
        measurement_sweeps: 200_000,
        sample_every_sweeps: 1,
        seed: 51,
        start: Start::Random,
    };
    let result = run_scan(&settings, &Interrupt::new(), &ignore_progress).unwrap();
    for p in &result.points {
        let exact = common::exact_l1(J_EFF, p.temperature_kelvin);
        let checks = [
            ("E/N", p.energy_per_spin_kelvin, exact.energy_per_spin),
            ("C", p.specific_heat_per_spin, exact.specific_heat_per_spin),
            (
                "|M|/N",
                p.magnetisation_per_spin,
                exact.magnetisation_per_spin,
            ),
            (
                "χ",
                p.susceptibility_per_spin,
                exact.susceptibility_per_spin,
            ),
            (
                "single",
                p.single_charge_density,
                exact.single_charge_density,
            ),
            (
                "double",
                p.double_charge_density,
                exact.double_charge_density,
            ),
            (
                "Σ|Q|/N",
                p.monopole_density_per_spin,
                exact.monopole_density_per_spin,
            ),
        ];
        for (name, got, expected) in checks {
            let what = format!("{name} at T = {} K", p.temperature_kelvin);
            // 10⁻⁶ absolute allowance: events rarer than that (double charges
            // at T = 0.6 J, 10⁻⁸) are legitimately never seen in 3·10⁶ attempts.
            assert_agrees(&what, got, expected, 4.0, 1e-6);
            assert!(
                got.error <= 0.03 * expected.abs() + 1e-4,
                "{what}: error bar {} too large to test {expected}",
                got.error
            );
        }
        assert!(p.errors_converged, "{p:?}");
    }
}

#[test]
fn optimised_engine_has_the_thermodynamics_of_the_straightforward_loop() {
    // Same Markov chain family (random-site Metropolis, Metropolis et al.,
    // J. Chem. Phys. 21, 1087 (1953)), different implementation: mean energy
    // and monopole density must agree within 4 combined σ (common practice).
    let lat = Pyrochlore::new(2).unwrap();
    let model = NearestNeighbourIce::new(J_EFF);
    for (k, t_over_j) in [0.5, 1.0, 3.0].into_iter().enumerate() {
        let t = t_over_j * J_EFF;
        let streams = RngStreams::new(61 + k as u64);
        let mut fast =
            NearestNeighbourMetropolis::new(&lat, &model, t, Start::Random, streams.stream(0));
        let mut plain =
            StraightforwardMetropolis::new(&lat, &model, t, Start::Random, streams.stream(1));
        let mut sequential =
            StraightforwardMetropolis::new(&lat, &model, t, Start::Random, streams.stream(2));
        for _ in 0..2000 {
            fast.sweep();
            plain.sweep();
            sequential.sequential_sweep();
        }
        let n = lat.spin_count() as f64;
        let (mut e_fast, mut e_plain, mut e_seq) = (Vec::new(), Vec::new(), Vec::new());
        let (mut q_fast, mut q_plain) = (Vec::new(), Vec::new());
        let monopoles = |sigma: &[i8]| {
            (0..lat.tetrahedron_count())
                .map(|t| charge(&lat, sigma, t).unsigned_abs() as f64)
                .sum::<f64>()
                / n
        };
        for _ in 0..30_000 {
            fast.sweep();
            plain.sweep();
            sequential.sequential_sweep();
            e_fast.push(fast.energy_kelvin() / n);
            e_plain.push(plain.energy_kelvin() / n);
            e_seq.push(sequential.energy_kelvin() / n);
            q_fast.push(fast.charge_counts().total_charge_magnitude() as f64 / n);
            q_plain.push(monopoles(plain.sigma()));
        }
        let compare = |what: &str, a: &[f64], b: &[f64]| {
            let (a, b) = (blocking_analysis(a).unwrap(), blocking_analysis(b).unwrap());
            let combined = (a.error().powi(2) + b.error().powi(2)).sqrt();
            assert!(
                (a.mean - b.mean).abs() <= 4.0 * combined,
                "{what} at T = {t_over_j} J: {} ± {} vs {} ± {}",
                a.mean,
                a.error(),
                b.mean,
                b.error()
            );
            assert!(combined < 0.01 * J_EFF);
        };
        compare("E/N fast vs plain", &e_fast, &e_plain);
        compare("E/N fast vs sequential", &e_fast, &e_seq);
        compare("Σ|Q|/N fast vs plain", &q_fast, &q_plain);
        // The engine's incremental energy equals a recomputation.
        assert!((fast.energy_kelvin() - model.energy_kelvin(&lat, fast.sigma())).abs() < 1e-9);
        assert!((plain.energy_kelvin() - model.energy_kelvin(&lat, plain.sigma())).abs() < 1e-9);
    }
}

#[test]
fn metropolis_acceptance_of_free_spins() {
    // J = 0: every ΔE = 0, Metropolis accepts every attempt (derived).
    let lat = Pyrochlore::new(1).unwrap();
    let mut engine = NearestNeighbourMetropolis::new(
        &lat,
        &NearestNeighbourIce::new(0.0),
        1.0,
        Start::Random,
        RngStreams::new(71).stream(0),
    );
    assert_eq!(engine.sweep(), lat.spin_count() as u64);
}
