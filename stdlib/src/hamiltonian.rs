//! Spin-ice Hamiltonians in the Ising-pseudospin form.
//!
//! Spins are `S_i = σ_i e_{a(i)}` with `σ_i = ±1` stored as `i8`. A model is a
//! set of couplings between pseudospins; this issue implements the
//! nearest-neighbour model `H = J_eff Σ_⟨ij⟩ σ_i σ_j` (physics-reference §2).
//! Further-neighbour exchange (J2, J3, J3'), Zeeman and Ewald-summed dipolar
//! terms will be further types implementing [`PseudospinHamiltonian`], so
//! samplers generic over that trait (static dispatch) keep working.
//!
//! Energies are in kelvin (k_B = 1).

use crate::lattice::Pyrochlore;
use serde::{Deserialize, Serialize};

/// What every pseudospin Hamiltonian offers to samplers and estimators.
pub trait PseudospinHamiltonian {
    /// Total energy (K) of configuration `sigma` on `lat`.
    fn energy_kelvin(&self, lat: &Pyrochlore, sigma: &[i8]) -> f64;
    /// Energy change (K) if `spin` were flipped.
    fn flip_cost_kelvin(&self, lat: &Pyrochlore, sigma: &[i8], spin: usize) -> f64;
}

/// The nearest-neighbour spin-ice model `H = J_eff Σ_⟨ij⟩ σ_i σ_j`, each
/// nearest-neighbour pair counted once.
///
/// `J_eff = J_nn + D_nn` with `J_nn = −J1/3` and `D_nn = 5D/3`
/// (physics-reference §2); `J_eff > 0` gives the ice rule and
/// `H = 2 J_eff Σ_t Q_t² − N J_eff`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct NearestNeighbourIce {
    /// Effective nearest-neighbour coupling (K), positive for spin ice.
    pub j_eff_kelvin: f64,
}

impl NearestNeighbourIce {
    /// Model with coupling `j_eff_kelvin`.
    pub fn new(j_eff_kelvin: f64) -> Self {
        Self { j_eff_kelvin }
    }

    /// Sum over nearest-neighbour pairs of `σ_i σ_j` (dimensionless).
    ///
    /// Every nearest-neighbour bond lies in exactly one tetrahedron, and
    /// `Σ_{pairs in t} σσ = (S_t² − 4)/2` with `S_t` the tetrahedron sum (derived).
    pub fn bond_sum(lat: &Pyrochlore, sigma: &[i8]) -> i64 {
        (0..lat.tetrahedron_count())
            .map(|t| {
                let s = tetrahedron_sum(lat, sigma, t) as i64;
                (s * s - 4) / 2
            })
            .sum()
    }

    /// Total energy (K).
    ///
    /// # Panics
    /// If `sigma.len() != lat.spin_count()`.
    pub fn energy_kelvin(&self, lat: &Pyrochlore, sigma: &[i8]) -> f64 {
        self.j_eff_kelvin * Self::bond_sum(lat, sigma) as f64
    }

    /// Energy change (K) of flipping `spin`: `ΔE = −2 J_eff σ_i Σ_{j∈nn(i)} σ_j`
    /// (the six bonds of `spin` change sign).
    ///
    /// # Panics
    /// If `spin` or one of its neighbours is outside `sigma`.
    pub fn flip_cost_kelvin(&self, lat: &Pyrochlore, sigma: &[i8], spin: usize) -> f64 {
        let field: i32 = lat
            .neighbours(spin)
            .iter()
            .map(|&j| sigma[j as usize] as i32)
            .sum();
        -2.0 * self.j_eff_kelvin * (sigma[spin] as i32 * field) as f64
    }
}

impl PseudospinHamiltonian for NearestNeighbourIce {
    fn energy_kelvin(&self, lat: &Pyrochlore, sigma: &[i8]) -> f64 {
        NearestNeighbourIce::energy_kelvin(self, lat, sigma)
    }
    fn flip_cost_kelvin(&self, lat: &Pyrochlore, sigma: &[i8], spin: usize) -> f64 {
        NearestNeighbourIce::flip_cost_kelvin(self, lat, sigma, spin)
    }
}

/// `Σ_{i∈t} σ_i` for tetrahedron `tet` (−4..=4, even).
pub fn tetrahedron_sum(lat: &Pyrochlore, sigma: &[i8], tet: usize) -> i8 {
    lat.spins_of(tet).iter().map(|&s| sigma[s as usize]).sum()
}

/// Magnetic charge of tetrahedron `tet`: `Q_t = ±(Σ_{i∈t} σ_i)/2`, `+` for up,
/// `−` for down tetrahedra, so `Q = (n_out − n_in)/2` (physics-reference §1).
pub fn charge(lat: &Pyrochlore, sigma: &[i8], tet: usize) -> i8 {
    let half = tetrahedron_sum(lat, sigma, tet) / 2;
    if lat.is_up(tet) {
        half
    } else {
        -half
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{Rng, SeedableRng};

    fn random_sigma(n: usize, seed: u64) -> Vec<i8> {
        let mut rng = rand_xoshiro::Xoshiro256PlusPlus::seed_from_u64(seed);
        (0..n)
            .map(|_| if rng.gen::<bool>() { 1 } else { -1 })
            .collect()
    }

    #[test]
    fn energy_by_tetrahedra_equals_pair_sum() {
        let lat = Pyrochlore::new(2).unwrap();
        let model = NearestNeighbourIce::new(1.3);
        let sigma = random_sigma(lat.spin_count(), 5);
        let mut pairs = 0i64;
        for i in 0..lat.spin_count() {
            for &j in lat.neighbours(i) {
                if (j as usize) > i {
                    pairs += (sigma[i] * sigma[j as usize]) as i64;
                }
            }
        }
        assert!((model.energy_kelvin(&lat, &sigma) - 1.3 * pairs as f64).abs() < 1e-9);
    }

    #[test]
    fn flip_cost_equals_energy_difference() {
        let lat = Pyrochlore::new(2).unwrap();
        let model = NearestNeighbourIce::new(0.7);
        let mut sigma = random_sigma(lat.spin_count(), 9);
        for spin in [0, 17, 63, 127] {
            let before = model.energy_kelvin(&lat, &sigma);
            let cost = model.flip_cost_kelvin(&lat, &sigma, spin);
            sigma[spin] = -sigma[spin];
            let after = model.energy_kelvin(&lat, &sigma);
            assert!((after - before - cost).abs() < 1e-9);
        }
    }

    #[test]
    fn energy_is_two_j_sum_of_charge_squared_minus_n_j() {
        // H = 2 J Σ_t Q_t² − N J (derived, physics-reference §2).
        let lat = Pyrochlore::new(2).unwrap();
        let model = NearestNeighbourIce::new(1.1);
        let sigma = random_sigma(lat.spin_count(), 11);
        let q2: i64 = (0..lat.tetrahedron_count())
            .map(|t| (charge(&lat, &sigma, t) as i64).pow(2))
            .sum();
        let expected = 2.0 * 1.1 * q2 as f64 - lat.spin_count() as f64 * 1.1;
        assert!((model.energy_kelvin(&lat, &sigma) - expected).abs() < 1e-9);
    }

    #[test]
    fn all_out_up_tetrahedron_has_charge_plus_two() {
        // σ = +1 everywhere: easy axes point out of up tetrahedra (Q = +2) and
        // into down tetrahedra (Q = −2) (physics-reference §1).
        let lat = Pyrochlore::new(1).unwrap();
        let sigma = vec![1i8; lat.spin_count()];
        for t in 0..lat.tetrahedron_count() {
            assert_eq!(charge(&lat, &sigma, t), if lat.is_up(t) { 2 } else { -2 });
        }
    }
}
