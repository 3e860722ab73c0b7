//! Translation-invariant tables of pseudospin couplings on the pyrochlore lattice.
//!
//! Any pair Hamiltonian of the pyrochlore (exchange of any range, Ewald-summed
//! dipolar interactions) depends only on the two sublattices and the FCC
//! (Bravais) displacement between the two spins, so it is stored as
//! 4 source sublattices × N target spins = 16 sublattice pairs × N/4 Bravais
//! displacements of σσ coefficients: O(N) memory instead of O(N²)
//! (physics-reference §2).
//!
//! The energy of a configuration is
//! `E = Σ_{i<j} K_ij σ_i σ_j + Σ_i z_{a(i)} σ_i + ½ Σ_i K_ii`,
//! with `K_ij` the σσ coefficient of the pair (all periodic images summed),
//! `z_a` a single-spin (Zeeman) term per sublattice and `K_ii` the constant
//! interaction of a spin with its own images (it never changes on a flip and
//! is kept only so absolute Ewald energies are right).
//!
//! Row `a` of the table holds `K` between the spin of sublattice `a` at the
//! origin FCC point and every spin `j` (indexed like [`Pyrochlore`]); the pair
//! `(i, j)` is found by translating `i` to the origin. Energies in kelvin.

use crate::lattice::Pyrochlore;
use serde::{Deserialize, Serialize};
use std::fmt;

/// Coupling tables (rows plus one sampler's local fields) larger than this
/// estimate are refused before allocation (the machine is shared).
pub const COUPLING_TABLE_LIMIT_BYTES: u64 = 4 << 30;

/// FCC offsets `2 r_f` in quarter units (same order as the lattice's).
pub(crate) const FCC_OFFSET_QUARTERS: [[i64; 3]; 4] = [[0, 0, 0], [0, 2, 2], [2, 0, 2], [2, 2, 0]];

/// Why a coupling table could not be built.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub enum CouplingError {
    /// The table would not fit the memory budget.
    TooLarge {
        /// L of the lattice.
        cells_per_side: usize,
        /// Estimated bytes of the table and one sampler's local fields.
        estimated_bytes: u64,
        /// The budget [`COUPLING_TABLE_LIMIT_BYTES`].
        limit_bytes: u64,
    },
    /// Further-neighbour shells are ambiguous under the minimum image below this size.
    LatticeTooSmall {
        /// L of the lattice.
        cells_per_side: usize,
        /// Smallest L for which the requested couplings are well defined.
        minimum_cells_per_side: usize,
        /// Which coupling needs it.
        coupling: String,
    },
    /// A parameter that must be finite (and for some, positive) is not.
    InvalidParameter {
        /// Parameter name with unit.
        name: String,
        /// Its value.
        value: f64,
        /// What was expected.
        expected: String,
    },
}

impl fmt::Display for CouplingError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            CouplingError::TooLarge {
                cells_per_side,
                estimated_bytes,
                limit_bytes,
            } => write!(
                f,
                "a coupling table for {cells_per_side}×{cells_per_side}×{cells_per_side} cells needs \
                 about {:.2} GiB, more than the {:.2} GiB limit; use fewer cells per side",
                *estimated_bytes as f64 / (1u64 << 30) as f64,
                *limit_bytes as f64 / (1u64 << 30) as f64
            ),
            CouplingError::LatticeTooSmall {
                cells_per_side,
                minimum_cells_per_side,
                coupling,
            } => write!(
                f,
                "{coupling} needs at least {minimum_cells_per_side} cells per side so that each \
                 neighbour shell is found once under the minimum image (got {cells_per_side})"
            ),
            CouplingError::InvalidParameter {
                name,
                value,
                expected,
            } => write!(f, "{name} = {value} is invalid: expected {expected}"),
        }
    }
}

impl std::error::Error for CouplingError {}

/// Check that `value` is finite.
pub(crate) fn require_finite(name: &str, value: f64) -> Result<(), CouplingError> {
    if value.is_finite() {
        Ok(())
    } else {
        Err(CouplingError::InvalidParameter {
            name: name.into(),
            value,
            expected: "a finite number".into(),
        })
    }
}

/// Estimated bytes of a coupling table for `L` cells per side plus one
/// sampler's local fields: 4N + N f64 (saturating).
pub fn estimated_coupling_table_bytes(cells_per_side: usize) -> u64 {
    let l = cells_per_side as u64;
    let n = 16u64.saturating_mul(l).saturating_mul(l).saturating_mul(l);
    n.saturating_mul(5 * 8)
}

/// `(g, s)` such that `o_{f_j} − o_{f_i} = o_g + 4 s` (quarter units), with
/// `s ∈ {−1, 0}³`, indexed `[f_j][f_i]`. The difference of two FCC offsets is
/// an FCC vector whose residue mod one cubic cell is one of the offsets (derived).
pub(crate) const fn offset_difference_table() -> [[(usize, [i64; 3]); 4]; 4] {
    let mut table = [[(0usize, [0i64; 3]); 4]; 4];
    let mut fj = 0;
    while fj < 4 {
        let mut fi = 0;
        while fi < 4 {
            let mut d = [0i64; 3];
            let mut s = [0i64; 3];
            let mut k = 0;
            while k < 3 {
                d[k] = FCC_OFFSET_QUARTERS[fj][k] - FCC_OFFSET_QUARTERS[fi][k];
                if d[k] < 0 {
                    d[k] += 4;
                    s[k] = -1;
                }
                k += 1;
            }
            let mut g = 0;
            while g < 4 {
                let o = FCC_OFFSET_QUARTERS[g];
                if o[0] == d[0] && o[1] == d[1] && o[2] == d[2] {
                    table[fj][fi] = (g, s);
                }
                g += 1;
            }
            fi += 1;
        }
        fj += 1;
    }
    table
}

pub(crate) const OFFSET_DIFFERENCE: [[(usize, [i64; 3]); 4]; 4] = offset_difference_table();

/// A translation-invariant table of σσ couplings, single-spin terms and the
/// self-image constant (see the module documentation).
#[derive(Clone, Debug, Serialize, Deserialize)]
pub struct CouplingTable {
    cells_per_side: usize,
    /// `rows[a·N + j]`: K between spin `a` (origin FCC point) and spin `j`;
    /// the entry `j = a` is 0 (a spin does not act on itself).
    rows: Vec<f64>,
    /// `K_ii` per sublattice (interaction with own periodic images, Ewald self term).
    self_interaction_kelvin: [f64; 4],
    /// `z_a`: energy `z_a σ` of a lone spin of sublattice `a` (Zeeman).
    single_spin_kelvin: [f64; 4],
}

impl CouplingTable {
    /// An all-zero table for `lat`, refused before allocation if it would
    /// exceed [`COUPLING_TABLE_LIMIT_BYTES`].
    pub fn zero(lat: &Pyrochlore) -> Result<Self, CouplingError> {
        let estimated_bytes = estimated_coupling_table_bytes(lat.cells_per_side());
        if estimated_bytes > COUPLING_TABLE_LIMIT_BYTES {
            return Err(CouplingError::TooLarge {
                cells_per_side: lat.cells_per_side(),
                estimated_bytes,
                limit_bytes: COUPLING_TABLE_LIMIT_BYTES,
            });
        }
        Ok(Self {
            cells_per_side: lat.cells_per_side(),
            rows: vec![0.0; 4 * lat.spin_count()],
            self_interaction_kelvin: [0.0; 4],
            single_spin_kelvin: [0.0; 4],
        })
    }

    /// L of the lattice the table belongs to.
    pub fn cells_per_side(&self) -> usize {
        self.cells_per_side
    }

    /// N.
    pub fn spin_count(&self) -> usize {
        self.rows.len() / 4
    }

    /// Bytes held by the coupling rows (4N f64).
    pub fn table_bytes(&self) -> usize {
        self.rows.len() * std::mem::size_of::<f64>()
    }

    /// Row of source sublattice `a` (length N), see the module documentation.
    ///
    /// # Panics
    /// If `a >= 4` (a programming error).
    pub fn row(&self, a: usize) -> &[f64] {
        let n = self.spin_count();
        &self.rows[a * n..(a + 1) * n]
    }

    /// Index into row `a(i)` of the partner `j` of spin `i` (translate `i` to the origin).
    pub fn relative_index(&self, i: usize, j: usize) -> usize {
        let l = self.cells_per_side as i64;
        let (pi, pj) = (i / 4, j / 4);
        let (fi, fj) = (pi % 4, pj % 4);
        let (ci, cj) = (pi / 4, pj / 4);
        let (g, s) = OFFSET_DIFFERENCE[fj][fi];
        let coords = |c: usize| {
            let c = c as i64;
            [c / (l * l), (c / l) % l, c % l]
        };
        let (xi, xj) = (coords(ci), coords(cj));
        let mut cell = 0i64;
        for k in 0..3 {
            cell = cell * l + (xj[k] - xi[k] + s[k]).rem_euclid(l);
        }
        ((cell * 4 + g as i64) * 4) as usize + j % 4
    }

    /// σσ coefficient `K_ij` (K) of the pair `(i, j)`; 0 for `i == j`.
    pub fn coupling_kelvin(&self, i: usize, j: usize) -> f64 {
        self.row(i % 4)[self.relative_index(i, j)]
    }

    /// `K_ii` of a spin of sublattice `a` (constant self-image term).
    pub fn self_interaction_kelvin(&self, a: usize) -> f64 {
        self.self_interaction_kelvin[a]
    }

    /// Single-spin term `z_a` (K): a spin of sublattice `a` contributes `z_a σ`.
    pub fn single_spin_kelvin(&self) -> [f64; 4] {
        self.single_spin_kelvin
    }

    /// Add `value` (K) to the coefficient between spin `a` at the origin and spin `j`.
    /// The caller supplies a symmetric pair function, so the table stays
    /// symmetric (`K_ij = K_ji`); `j == a` goes to the self-image constant.
    pub(crate) fn add_row_entry(&mut self, a: usize, j: usize, value: f64) {
        if j == a {
            self.self_interaction_kelvin[a] += value;
        } else {
            let n = self.spin_count();
            self.rows[a * n + j] += value;
        }
    }

    /// Add `value` (K) to the single-spin term of sublattice `a`.
    pub(crate) fn add_single_spin(&mut self, a: usize, value: f64) {
        self.single_spin_kelvin[a] += value;
    }

    /// Add another table of the same lattice size term by term.
    pub fn add(&mut self, other: &CouplingTable) -> Result<(), CouplingError> {
        if other.cells_per_side != self.cells_per_side {
            return Err(CouplingError::InvalidParameter {
                name: "cells_per_side of the added table".into(),
                value: other.cells_per_side as f64,
                expected: format!("{}", self.cells_per_side),
            });
        }
        for (x, y) in self.rows.iter_mut().zip(&other.rows) {
            *x += y;
        }
        for a in 0..4 {
            self.self_interaction_kelvin[a] += other.self_interaction_kelvin[a];
            self.single_spin_kelvin[a] += other.single_spin_kelvin[a];
        }
        Ok(())
    }

    /// Constant `½ Σ_i K_ii` (K) for a lattice with this table's N.
    pub fn constant_energy_kelvin(&self) -> f64 {
        let per_sublattice = self.spin_count() as f64 / 4.0;
        0.5 * per_sublattice * self.self_interaction_kelvin.iter().sum::<f64>()
    }

    /// Pair fields `h_i = Σ_{j≠i} K_ij σ_j` by direct O(N²) summation.
    pub fn direct_fields(&self, sigma: &[i8]) -> Vec<f64> {
        (0..sigma.len())
            .map(|i| {
                (0..sigma.len())
                    .filter(|&j| j != i)
                    .map(|j| self.coupling_kelvin(i, j) * sigma[j] as f64)
                    .sum()
            })
            .collect()
    }

    /// Energy (K) by direct O(N²) summation over pairs (the reference the
    /// incremental engines are tested against).
    pub fn direct_energy_kelvin(&self, sigma: &[i8]) -> f64 {
        let fields = self.direct_fields(sigma);
        let pair: f64 = 0.5
            * fields
                .iter()
                .zip(sigma)
                .map(|(h, &s)| h * s as f64)
                .sum::<f64>();
        let single: f64 = sigma
            .iter()
            .enumerate()
            .map(|(i, &s)| self.single_spin_kelvin[i % 4] * s as f64)
            .sum();
        pair + single + self.constant_energy_kelvin()
    }

    /// Variance per spin of the energy over independent random pseudospins
    /// (`Σ_{i<j} K_ij² + Σ_i z_i²`)/N, K²: the leading high-temperature
    /// coefficient `E/N = −β·variance + O(β²)` (derived).
    pub fn infinite_temperature_energy_variance_per_spin(&self) -> f64 {
        let pairs: f64 = 0.5 * self.rows.iter().map(|k| k * k).sum::<f64>() / 4.0;
        let single: f64 = self.single_spin_kelvin.iter().map(|z| z * z).sum::<f64>() / 4.0;
        pairs + single
    }
}

impl crate::hamiltonian::PseudospinHamiltonian for CouplingTable {
    fn energy_kelvin(&self, _lat: &Pyrochlore, sigma: &[i8]) -> f64 {
        self.direct_energy_kelvin(sigma)
    }
    fn flip_cost_kelvin(&self, _lat: &Pyrochlore, sigma: &[i8], spin: usize) -> f64 {
        let h: f64 = (0..sigma.len())
            .filter(|&j| j != spin)
            .map(|j| self.coupling_kelvin(spin, j) * sigma[j] as f64)
            .sum();
        -2.0 * sigma[spin] as f64 * (h + self.single_spin_kelvin[spin % 4])
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn relative_index_is_the_translation_to_the_origin() {
        // Translating both spins by the same FCC vector must not change the
        // index, and i itself maps to its own sublattice at the origin (derived).
        for l in [1, 2, 3] {
            let lat = Pyrochlore::new(l).unwrap();
            let table = CouplingTable::zero(&lat).unwrap();
            let q = |s: usize| lat.position(s).map(|c| (c * 4.0).round() as i64);
            for i in 0..lat.spin_count() {
                assert_eq!(table.relative_index(i, i), i % 4);
                for j in 0..lat.spin_count() {
                    let r = table.relative_index(i, j);
                    // Displacement of j from i equals that of r from spin a(i).
                    let period = 4 * l as i64;
                    let d1 = [0, 1, 2].map(|k| (q(j)[k] - q(i)[k]).rem_euclid(period));
                    let d2 = [0, 1, 2].map(|k| (q(r)[k] - q(i % 4)[k]).rem_euclid(period));
                    assert_eq!(d1, d2, "L={l} i={i} j={j}");
                    assert_eq!(r % 4, j % 4);
                }
            }
        }
    }

    #[test]
    fn oversized_tables_are_refused_with_the_estimate() {
        // L = 60: N = 3.456e6, 5 f64 per spin ≈ 138 MB: allowed; L = 300 is not.
        assert!(estimated_coupling_table_bytes(60) < COUPLING_TABLE_LIMIT_BYTES);
        let big = estimated_coupling_table_bytes(300);
        assert!(big > COUPLING_TABLE_LIMIT_BYTES);
        let err = CouplingError::TooLarge {
            cells_per_side: 300,
            estimated_bytes: big,
            limit_bytes: COUPLING_TABLE_LIMIT_BYTES,
        };
        assert!(err.to_string().contains("GiB"));
        assert_eq!(estimated_coupling_table_bytes(usize::MAX), u64::MAX);
    }
}
