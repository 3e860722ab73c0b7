//! Property tests: invariants that must hold for every configuration.

use icefield_stdlib::hamiltonian::{charge, NearestNeighbourIce};
use icefield_stdlib::lattice::Pyrochlore;
use icefield_stdlib::metropolis::NearestNeighbourMetropolis;
use icefield_stdlib::rng::RngStreams;
use proptest::prelude::*;

fn configuration(n: usize) -> impl Strategy<Value = Vec<i8>> {
    prop::collection::vec(prop_oneof![Just(1i8), Just(-1i8)], n)
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]

    #[test]
    fn flip_cost_is_the_energy_difference_and_charge_is_conserved(
        sigma in configuration(128), spin in 0usize..128, j in -2.0f64..2.0
    ) {
        // ΔE of one flip equals E(after) − E(before) (derived); a flip moves
        // charge between the spin's two tetrahedra, Σ_t Q_t stays 0 (derived:
        // each spin adds +σ/2 to its up and −σ/2 to its down tetrahedron).
        let lat = Pyrochlore::new(2).unwrap();
        let model = NearestNeighbourIce::new(j);
        let before = model.energy_kelvin(&lat, &sigma);
        let cost = model.flip_cost_kelvin(&lat, &sigma, spin);
        let mut flipped = sigma.clone();
        flipped[spin] = -flipped[spin];
        prop_assert!((model.energy_kelvin(&lat, &flipped) - before - cost).abs() < 1e-9);
        let total: i32 = (0..lat.tetrahedron_count()).map(|t| charge(&lat, &flipped, t) as i32).sum();
        prop_assert_eq!(total, 0);
        // ΔE ∈ 2J·{−6, …, 6}: only seven values (derived: h_i is a sum of six ±1).
        let k = cost / (-2.0 * j);
        prop_assert!(j.abs() < 1e-12 || ((k.round() - k).abs() < 1e-9 && k.abs() <= 6.0 + 1e-9));
    }

    #[test]
    fn engine_bookkeeping_survives_any_start_and_temperature(
        sigma in configuration(128), t in 0.05f64..50.0, seed in any::<u64>()
    ) {
        let lat = Pyrochlore::new(2).unwrap();
        let model = NearestNeighbourIce::new(1.1);
        let mut engine = NearestNeighbourMetropolis::from_configuration(
            &lat, &model, t, sigma, RngStreams::new(seed).stream(0)).unwrap();
        for _ in 0..5 {
            engine.sweep();
        }
        let now = engine.sigma().to_vec();
        prop_assert!((engine.energy_kelvin() - model.energy_kelvin(&lat, &now)).abs() < 1e-9);
        for tet in 0..lat.tetrahedron_count() {
            let s = engine.tetrahedron_sums()[tet];
            prop_assert_eq!(charge(&lat, &now, tet), if lat.is_up(tet) { s / 2 } else { -s / 2 });
        }
    }
}
