//! Further-neighbour exchange (J1, J2, J3, J3') and the Zeeman term.
//!
//! Neighbour shells of the pyrochlore lattice (physics-reference §1), found by
//! distance under the minimum image in exact quarter-cell coordinates:
//!
//! | shell | distance | partners per site | why (derived) |
//! |---|---|---|---|
//! | first | r_nn = a√2/4 | 6 | 3 in each of the two tetrahedra |
//! | second | √3 r_nn | 12 | 4 per kagome plane, each site lies in 3 kagome planes |
//! | third, chain (J3) | 2 r_nn | 6 | the far end of each of the 6 nearest-neighbour bonds continued straight through the common neighbour |
//! | third, hexagon (J3') | 2 r_nn | 6 | the opposite corner of a kagome hexagon, 2 per plane × 3 planes |
//!
//! Both third-neighbour kinds join spins of the same sublattice; a pair is of
//! the chain kind exactly when its midpoint is a lattice site (the common
//! neighbour), and of the hexagon kind when the midpoint is a hexagon centre.
//!
//! Conventions: in the vector convention the energy of a pair is
//! `J S_i·S_j = J (e_a·e_b) σ_i σ_j`, so its σσ coefficient is `J e_a·e_b`
//! (`−J/3` between different sublattices, `J` within one); in the Ising
//! convention the number given is the σσ coefficient itself.
//!
//! Zeeman: `−μ S_i·B = −μ σ_i e_a·B` with μ in Bohr magnetons and B in tesla,
//! converted with μ_B/k_B = 0.67171381 K/T (CODATA 2018).

use crate::couplings::{require_finite, CouplingError, CouplingTable};
use crate::lattice::{dot, easy_axis, Pyrochlore};
use serde::{Deserialize, Serialize};

/// μ_B/k_B in K/T (CODATA 2018: μ_B = 9.2740100783e−24 J/T, k_B = 1.380649e−23 J/K).
pub const BOHR_MAGNETON_OVER_BOLTZMANN_KELVIN_PER_TESLA: f64 = 0.671_713_81;

/// How exchange constants are to be read.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum CouplingConvention {
    /// `J S_i·S_j` with unit vectors `S = σ e_a` (published exchange sets).
    VectorSpins,
    /// `J σ_i σ_j` (the Ising-pseudospin coefficient directly).
    IsingPseudospins,
}

/// Neighbour shell of a pair of spins.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum NeighbourShell {
    /// r_nn.
    First,
    /// √3 r_nn.
    Second,
    /// 2 r_nn along a straight chain through a common neighbour (J3).
    ThirdChain,
    /// 2 r_nn across a kagome hexagon (J3').
    ThirdHexagon,
}

/// Exchange constants (K) of the four shells, read in `convention`.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct ExchangeCouplings {
    /// Nearest neighbours (K).
    pub j1_kelvin: f64,
    /// Second neighbours (K).
    pub j2_kelvin: f64,
    /// Third neighbours along chains (K).
    pub j3_kelvin: f64,
    /// Third neighbours across hexagons (K).
    pub j3_prime_kelvin: f64,
    /// Vector or Ising reading of the numbers.
    pub convention: CouplingConvention,
}

/// A uniform magnetic field acting on moments of a given size.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct ZeemanField {
    /// Field vector (T) in the cubic axes.
    pub field_tesla: [f64; 3],
    /// Moment per spin (μ_B).
    pub moment_bohr_magnetons: f64,
}

impl ZeemanField {
    /// Single-spin term `z_a = −μ (μ_B/k_B) e_a·B` (K): energy `z_a σ`.
    pub fn single_spin_kelvin(&self) -> [f64; 4] {
        let scale = self.moment_bohr_magnetons * BOHR_MAGNETON_OVER_BOLTZMANN_KELVIN_PER_TESLA;
        [0, 1, 2, 3].map(|a| -scale * dot(easy_axis(a), self.field_tesla))
    }
}

/// Quarter-cell coordinates of a spin (exact integers).
fn quarters(lat: &Pyrochlore, spin: usize) -> [i64; 3] {
    lat.position(spin).map(|c| (c * 4.0).round() as i64)
}

/// Is the point `q` (quarter units) a pyrochlore site? `q − r_b` must be an
/// FCC point: even coordinates summing to a multiple of 4 (derived).
fn is_site(q: [i64; 3]) -> bool {
    const BASIS: [[i64; 3]; 4] = [[0, 0, 0], [0, 1, 1], [1, 0, 1], [1, 1, 0]];
    BASIS.iter().any(|b| {
        let w = [q[0] - b[0], q[1] - b[1], q[2] - b[2]];
        w.iter().all(|c| c.rem_euclid(2) == 0) && (w[0] + w[1] + w[2]).rem_euclid(4) == 0
    })
}

/// Minimum-image displacement in quarter units and the L needed for it to be unique.
fn minimum_image_quarters(lat: &Pyrochlore, i: usize, j: usize) -> [i64; 3] {
    let period = 4 * lat.cells_per_side() as i64;
    let (qi, qj) = (quarters(lat, i), quarters(lat, j));
    [0, 1, 2].map(|k| {
        let d = (qj[k] - qi[k]).rem_euclid(period);
        if 2 * d > period {
            d - period
        } else {
            d
        }
    })
}

/// Smallest L for which each of the four shells is found exactly once under
/// the minimum image: the shell radius must be below half the box (derived:
/// r_nn = 0.354 a fits L = 1; √3 r_nn = 0.612 a and 2 r_nn = 0.707 a need L = 2).
pub fn minimum_cells_for_shell(shell: NeighbourShell) -> usize {
    match shell {
        NeighbourShell::First => 1,
        _ => 2,
    }
}

/// Shell of the pair `(i, j)` (minimum image), or `None` beyond the third shell.
pub fn neighbour_shell(lat: &Pyrochlore, i: usize, j: usize) -> Option<NeighbourShell> {
    if i == j {
        return None;
    }
    let d = minimum_image_quarters(lat, i, j);
    let d2 = d[0] * d[0] + d[1] * d[1] + d[2] * d[2];
    // In quarter units: r_nn² = 2, (√3 r_nn)² = 6, (2 r_nn)² = 8 (derived).
    match d2 {
        2 => Some(NeighbourShell::First),
        6 if lat.cells_per_side() >= 2 => Some(NeighbourShell::Second),
        8 if lat.cells_per_side() >= 2 => {
            let qi = quarters(lat, i);
            let mid = [0, 1, 2].map(|k| qi[k] + d[k] / 2);
            Some(if is_site(mid) {
                NeighbourShell::ThirdChain
            } else {
                NeighbourShell::ThirdHexagon
            })
        }
        _ => None,
    }
}

impl ExchangeCouplings {
    /// Nearest-neighbour exchange only.
    pub fn nearest_neighbour(j1_kelvin: f64, convention: CouplingConvention) -> Self {
        Self {
            j1_kelvin,
            j2_kelvin: 0.0,
            j3_kelvin: 0.0,
            j3_prime_kelvin: 0.0,
            convention,
        }
    }

    fn constant(&self, shell: NeighbourShell) -> f64 {
        match shell {
            NeighbourShell::First => self.j1_kelvin,
            NeighbourShell::Second => self.j2_kelvin,
            NeighbourShell::ThirdChain => self.j3_kelvin,
            NeighbourShell::ThirdHexagon => self.j3_prime_kelvin,
        }
    }

    /// σσ coefficient (K) of a pair of sublattices `a`, `b` in `shell`.
    pub fn pseudospin_coefficient_kelvin(&self, shell: NeighbourShell, a: usize, b: usize) -> f64 {
        let j = self.constant(shell);
        match self.convention {
            CouplingConvention::IsingPseudospins => j,
            CouplingConvention::VectorSpins => j * dot(easy_axis(a), easy_axis(b)),
        }
    }

    /// Validate and add these couplings to `table` (built for `lat`).
    pub fn add_to(&self, lat: &Pyrochlore, table: &mut CouplingTable) -> Result<(), CouplingError> {
        require_finite("J1 (K)", self.j1_kelvin)?;
        require_finite("J2 (K)", self.j2_kelvin)?;
        require_finite("J3 (K)", self.j3_kelvin)?;
        require_finite("J3' (K)", self.j3_prime_kelvin)?;
        for (shell, name) in [
            (NeighbourShell::Second, "J2"),
            (NeighbourShell::ThirdChain, "J3"),
            (NeighbourShell::ThirdHexagon, "J3'"),
        ] {
            let needed = minimum_cells_for_shell(shell);
            if self.constant(shell) != 0.0 && lat.cells_per_side() < needed {
                return Err(CouplingError::LatticeTooSmall {
                    cells_per_side: lat.cells_per_side(),
                    minimum_cells_per_side: needed,
                    coupling: name.into(),
                });
            }
        }
        for a in 0..4 {
            for j in 0..lat.spin_count() {
                if let Some(shell) = neighbour_shell(lat, a, j) {
                    let k = self.pseudospin_coefficient_kelvin(shell, a, j % 4);
                    table.add_row_entry(a, j, k);
                }
            }
        }
        Ok(())
    }
}

impl ZeemanField {
    /// Validate and add the Zeeman term to `table`.
    pub fn add_to(&self, table: &mut CouplingTable) -> Result<(), CouplingError> {
        for (k, &b) in self.field_tesla.iter().enumerate() {
            require_finite(&format!("B[{k}] (T)"), b)?;
        }
        require_finite("moment (μ_B)", self.moment_bohr_magnetons)?;
        for (a, z) in self.single_spin_kelvin().into_iter().enumerate() {
            table.add_single_spin(a, z);
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::hamiltonian::NearestNeighbourIce;
    use rand::{Rng, SeedableRng};

    fn random_sigma(n: usize, seed: u64) -> Vec<i8> {
        let mut rng = rand_xoshiro::Xoshiro256PlusPlus::seed_from_u64(seed);
        (0..n)
            .map(|_| if rng.gen::<bool>() { 1 } else { -1 })
            .collect()
    }

    #[test]
    fn shell_counts_are_6_12_6_6() {
        // Counts derived in the module table (physics-reference §1).
        for l in [2, 3] {
            let lat = Pyrochlore::new(l).unwrap();
            for i in 0..lat.spin_count() {
                let mut counts = [0usize; 4];
                for j in 0..lat.spin_count() {
                    match neighbour_shell(&lat, i, j) {
                        Some(NeighbourShell::First) => counts[0] += 1,
                        Some(NeighbourShell::Second) => counts[1] += 1,
                        Some(NeighbourShell::ThirdChain) => {
                            counts[2] += 1;
                            assert_eq!(i % 4, j % 4, "third neighbours share a sublattice");
                        }
                        Some(NeighbourShell::ThirdHexagon) => {
                            counts[3] += 1;
                            assert_eq!(i % 4, j % 4);
                        }
                        None => {}
                    }
                }
                assert_eq!(counts, [6, 12, 6, 6], "L={l} i={i}");
                // The first shell is the lattice's own neighbour table.
                for &j in lat.neighbours(i) {
                    assert_eq!(
                        neighbour_shell(&lat, i, j as usize),
                        Some(NeighbourShell::First)
                    );
                }
            }
        }
    }

    #[test]
    fn chain_partners_are_nearest_neighbours_of_a_common_neighbour_in_line() {
        // A chain partner j of i is a nearest neighbour of some nearest
        // neighbour k of i with r_j − r_k = r_k − r_i (derived); hexagon
        // partners have no such k.
        let lat = Pyrochlore::new(2).unwrap();
        for i in 0..lat.spin_count() {
            for j in 0..lat.spin_count() {
                let shell = neighbour_shell(&lat, i, j);
                if !matches!(
                    shell,
                    Some(NeighbourShell::ThirdChain | NeighbourShell::ThirdHexagon)
                ) {
                    continue;
                }
                let dij = minimum_image_quarters(&lat, i, j);
                let in_line = lat.neighbours(i).iter().any(|&k| {
                    let dik = minimum_image_quarters(&lat, i, k as usize);
                    dik.map(|c| 2 * c) == dij
                });
                assert_eq!(in_line, shell == Some(NeighbourShell::ThirdChain));
            }
        }
    }

    #[test]
    fn vector_j1_gives_minus_one_third_and_matches_the_nearest_neighbour_model() {
        // σσ coefficient of J1 S·S is −J1/3 (physics-reference §2, derived).
        let lat = Pyrochlore::new(2).unwrap();
        let mut table = CouplingTable::zero(&lat).unwrap();
        ExchangeCouplings::nearest_neighbour(-3.3, CouplingConvention::VectorSpins)
            .add_to(&lat, &mut table)
            .unwrap();
        let model = NearestNeighbourIce::new(1.1);
        for seed in 0..3 {
            let sigma = random_sigma(lat.spin_count(), seed);
            let e = table.direct_energy_kelvin(&sigma);
            assert!((e - model.energy_kelvin(&lat, &sigma)).abs() < 1e-9);
        }
        assert!((table.coupling_kelvin(0, 1) - 1.1).abs() < 1e-15);
    }

    #[test]
    fn further_shells_enter_with_their_own_constants() {
        // Ising convention: E = Σ_shell J_shell Σ_pairs σσ; compare with a
        // brute-force pair sum over the shells (derived).
        let lat = Pyrochlore::new(2).unwrap();
        let couplings = ExchangeCouplings {
            j1_kelvin: 1.0,
            j2_kelvin: 0.1,
            j3_kelvin: -0.07,
            j3_prime_kelvin: 0.03,
            convention: CouplingConvention::IsingPseudospins,
        };
        let mut table = CouplingTable::zero(&lat).unwrap();
        couplings.add_to(&lat, &mut table).unwrap();
        let sigma = random_sigma(lat.spin_count(), 4);
        let mut expected = 0.0;
        for i in 0..lat.spin_count() {
            for j in i + 1..lat.spin_count() {
                let k = match neighbour_shell(&lat, i, j) {
                    Some(NeighbourShell::First) => 1.0,
                    Some(NeighbourShell::Second) => 0.1,
                    Some(NeighbourShell::ThirdChain) => -0.07,
                    Some(NeighbourShell::ThirdHexagon) => 0.03,
                    None => 0.0,
                };
                expected += k * (sigma[i] * sigma[j]) as f64;
            }
        }
        assert!((table.direct_energy_kelvin(&sigma) - expected).abs() < 1e-9);
        // Symmetry K_ij = K_ji.
        for (i, j) in [(0, 77), (5, 120), (33, 2)] {
            assert_eq!(table.coupling_kelvin(i, j), table.coupling_kelvin(j, i));
        }
    }

    #[test]
    fn further_shells_on_a_single_cell_are_refused() {
        let lat = Pyrochlore::new(1).unwrap();
        let mut table = CouplingTable::zero(&lat).unwrap();
        let mut c = ExchangeCouplings::nearest_neighbour(1.0, CouplingConvention::IsingPseudospins);
        assert!(c.add_to(&lat, &mut table).is_ok());
        c.j3_prime_kelvin = 0.1;
        let err = c.add_to(&lat, &mut table).unwrap_err();
        assert!(err.to_string().contains("J3'"), "{err}");
        c.j3_prime_kelvin = f64::NAN;
        assert!(matches!(
            c.add_to(&lat, &mut table),
            Err(CouplingError::InvalidParameter { .. })
        ));
    }

    #[test]
    fn zeeman_term_uses_codata_bohr_magneton() {
        // μ_B/k_B = 0.67171381 K/T (CODATA 2018). Field 1 T along [111],
        // μ = 10 μ_B: sublattice 0 (e0 = −[111]/√3) has z = +10·0.6717·1 (derived).
        let z = ZeemanField {
            field_tesla: [1.0 / 3f64.sqrt(); 3],
            moment_bohr_magnetons: 10.0,
        }
        .single_spin_kelvin();
        assert!((z[0] - 6.717_138_1).abs() < 1e-9);
        for &zb in &z[1..] {
            assert!((zb + 6.717_138_1 / 3.0).abs() < 1e-9); // e_b·[111]/√3 = 1/3
        }
    }
}
