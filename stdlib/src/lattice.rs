//! The pyrochlore lattice: corner-sharing tetrahedra on an FCC Bravais lattice.
//!
//! Conventions (physics-reference §1): cubic constant `a` = 1 (positions are
//! in units of `a`), FCC sites `R`, four-site basis
//! r0 = (0,0,0), r1 = (0,¼,¼), r2 = (¼,0,¼), r3 = (¼,¼,0), local easy axes
//! pointing from the up-tetrahedron centre R + (⅛,⅛,⅛) to the site.
//!
//! Indexing (chosen so the Monte Carlo hot loop needs no table for the up
//! tetrahedron):
//! * FCC point `p = ((x·L + y)·L + z)·4 + f`, cell `(x,y,z)`, FCC offset `f`
//!   (offsets (0,0,0), (0,½,½), (½,0,½), (½,½,0), i.e. `2 r_f`);
//! * spin `i = 4p + a` on sublattice `a` at `R_p + r_a`;
//! * up tetrahedron `p` holds spins `4p..4p+4` (centre `R_p + (⅛,⅛,⅛)`);
//! * down tetrahedron `N/4 + p` holds, for each sublattice `b`, the spin at
//!   `R_p − r_b` (centre `R_p − (⅛,⅛,⅛)`). Spin `(R, a)` is therefore in up
//!   tetrahedron `R` and down tetrahedron `R + 2 r_a` (derived: the down
//!   centre is the site displaced once more along `e_a`).
//!
//! Geometry is done in exact integer "quarter" coordinates (units of a/4), so
//! the tables are built without rounding.
//!
//! User input reaches this module only through [`Pyrochlore::new`], which
//! validates it; the accessors index the tables and panic on an out-of-range
//! spin or tetrahedron index, which is a programming error.

use serde::{Deserialize, Serialize};
use std::fmt;

/// Tables larger than this estimate are refused (the machine is shared).
pub const TABLE_MEMORY_LIMIT_BYTES: u64 = 8 << 30;

/// Estimated bytes per spin: lattice tables (6 neighbours, the down
/// tetrahedron, and half a tetrahedron's 4 spins, all u32) plus one sampler's
/// state (pseudospin, half a tetrahedron sum, rounded up to 4 bytes).
const ESTIMATED_BYTES_PER_SPIN: u64 = 6 * 4 + 4 + 8 + 4;

/// FCC offsets `2 r_f` in quarter units.
const FCC_OFFSET_QUARTERS: [[i64; 3]; 4] = [[0, 0, 0], [0, 2, 2], [2, 0, 2], [2, 2, 0]];
/// Basis vectors `r_a` in quarter units.
const BASIS_QUARTERS: [[i64; 3]; 4] = [[0, 0, 0], [0, 1, 1], [1, 0, 1], [1, 1, 0]];

/// Nearest-neighbour distance r_nn = a√2/4 in units of `a` (physics-reference §1).
pub const NEAREST_NEIGHBOUR_DISTANCE: f64 = std::f64::consts::SQRT_2 / 4.0;

/// Local ⟨111⟩ easy axis `e_a` of sublattice `a` (unit vector, physics-reference §1):
/// e0 = (−1,−1,−1)/√3, e1 = (−1,1,1)/√3, e2 = (1,−1,1)/√3, e3 = (1,1,−1)/√3.
/// It points out of up tetrahedra and into down tetrahedra.
///
/// # Panics
/// If `sublattice >= 4` (a programming error, not user input).
pub fn easy_axis(sublattice: usize) -> [f64; 3] {
    const S: f64 = 0.577_350_269_189_625_8; // 1/√3
    const AXES: [[f64; 3]; 4] = [[-S, -S, -S], [-S, S, S], [S, -S, S], [S, S, -S]];
    AXES[sublattice]
}

/// Why a lattice could not be built.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub enum LatticeError {
    /// `L = 0` cells per side.
    ZeroSize,
    /// The tables would not fit the memory budget (or overflow 32-bit indices).
    TooLarge {
        /// Requested `L`.
        cells_per_side: usize,
        /// Spin count 16 L³ (saturating).
        spin_count: u64,
        /// Estimated bytes of tables and sampler state (saturating).
        estimated_bytes: u64,
        /// The budget [`TABLE_MEMORY_LIMIT_BYTES`].
        limit_bytes: u64,
    },
}

impl fmt::Display for LatticeError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            LatticeError::ZeroSize => {
                write!(
                    f,
                    "a pyrochlore lattice needs at least 1 cubic cell per side (got 0)"
                )
            }
            LatticeError::TooLarge {
                cells_per_side,
                spin_count,
                estimated_bytes,
                limit_bytes,
            } => write!(
                f,
                "a pyrochlore lattice of {cells_per_side}×{cells_per_side}×{cells_per_side} cells \
                 has {spin_count} spins and needs about {:.1} GiB of tables, more than the \
                 {:.1} GiB limit; use fewer cells per side",
                *estimated_bytes as f64 / (1u64 << 30) as f64,
                *limit_bytes as f64 / (1u64 << 30) as f64
            ),
        }
    }
}

impl std::error::Error for LatticeError {}

/// Estimated memory (bytes) of an `L`-cell lattice plus one sampler, saturating.
pub fn estimated_table_bytes(cells_per_side: usize) -> u64 {
    spin_count_saturating(cells_per_side).saturating_mul(ESTIMATED_BYTES_PER_SPIN)
}

fn spin_count_saturating(cells_per_side: usize) -> u64 {
    let l = cells_per_side as u64;
    16u64.saturating_mul(l).saturating_mul(l).saturating_mul(l)
}

/// A periodic pyrochlore lattice of `L×L×L` conventional cubic cells
/// (N = 16 L³ spins, N/2 tetrahedra: N/4 up then N/4 down).
#[derive(Clone, Debug, Serialize)]
pub struct Pyrochlore {
    cells_per_side: usize,
    #[serde(skip)]
    neighbours: Vec<[u32; 6]>,
    #[serde(skip)]
    down_tetrahedron: Vec<u32>,
    #[serde(skip)]
    tetrahedron_spins: Vec<[u32; 4]>,
}

impl Pyrochlore {
    /// Build the tables for `cells_per_side` = L ≥ 1 cubic cells per side.
    ///
    /// Refuses `L = 0` and sizes whose tables are estimated above
    /// [`TABLE_MEMORY_LIMIT_BYTES`] (the error carries the estimate).
    pub fn new(cells_per_side: usize) -> Result<Pyrochlore, LatticeError> {
        if cells_per_side == 0 {
            return Err(LatticeError::ZeroSize);
        }
        let spin_count = spin_count_saturating(cells_per_side);
        let estimated_bytes = estimated_table_bytes(cells_per_side);
        if estimated_bytes > TABLE_MEMORY_LIMIT_BYTES || spin_count > u32::MAX as u64 {
            return Err(LatticeError::TooLarge {
                cells_per_side,
                spin_count,
                estimated_bytes,
                limit_bytes: TABLE_MEMORY_LIMIT_BYTES,
            });
        }
        let n = spin_count as usize;
        let l = cells_per_side as i64;
        let fcc_count = n / 4;

        // FCC point index from quarter coordinates of an FCC point (any image).
        let period = 4 * l;
        let fcc_index = |q: [i64; 3]| -> usize {
            let w = q.map(|c| c.rem_euclid(period));
            let cell = w.map(|c| c / 4);
            let rest = w.map(|c| c % 4);
            let f = FCC_OFFSET_QUARTERS
                .iter()
                .position(|o| *o == rest)
                .expect("FCC point arithmetic stays on FCC points (derived)");
            (((cell[0] * l + cell[1]) * l + cell[2]) * 4) as usize + f
        };

        let mut down_tetrahedron = vec![0u32; n];
        let mut tetrahedron_spins = vec![[0u32; 4]; n / 2];
        for p in 0..fcc_count {
            let r = fcc_point_quarters(p, cells_per_side);
            let mut up = [0u32; 4];
            for (a, slot) in up.iter_mut().enumerate() {
                *slot = (4 * p + a) as u32;
                // Down tetrahedron of spin (R, a) is indexed by R + 2 r_a.
                let shifted = add(r, FCC_OFFSET_QUARTERS[a]);
                down_tetrahedron[4 * p + a] = (fcc_count + fcc_index(shifted)) as u32;
            }
            tetrahedron_spins[p] = up;
        }
        for p in 0..fcc_count {
            // Down tetrahedron indexed by R contains (R − 2 r_b, b).
            let r = fcc_point_quarters(p, cells_per_side);
            let mut spins = [0u32; 4];
            for (b, slot) in spins.iter_mut().enumerate() {
                let owner = fcc_index(sub(r, FCC_OFFSET_QUARTERS[b]));
                *slot = (4 * owner + b) as u32;
            }
            tetrahedron_spins[fcc_count + p] = spins;
        }
        let mut neighbours = vec![[0u32; 6]; n];
        for (i, slots) in neighbours.iter_mut().enumerate() {
            let a = i % 4;
            let up = &tetrahedron_spins[i / 4];
            let down = &tetrahedron_spins[down_tetrahedron[i] as usize];
            let mut k = 0;
            for t in [up, down] {
                for (b, &j) in t.iter().enumerate() {
                    if b != a {
                        slots[k] = j;
                        k += 1;
                    }
                }
            }
        }
        Ok(Pyrochlore {
            cells_per_side,
            neighbours,
            down_tetrahedron,
            tetrahedron_spins,
        })
    }

    /// L, cubic cells per side.
    pub fn cells_per_side(&self) -> usize {
        self.cells_per_side
    }

    /// N = 16 L³.
    pub fn spin_count(&self) -> usize {
        self.neighbours.len()
    }

    /// N/2 (N/4 up tetrahedra, indices `0..N/4`, then N/4 down).
    pub fn tetrahedron_count(&self) -> usize {
        self.tetrahedron_spins.len()
    }

    /// Edge of the periodic box in units of `a` (= L).
    pub fn box_length(&self) -> f64 {
        self.cells_per_side as f64
    }

    /// Position of `spin` in units of `a`, inside `[0, L)³`.
    pub fn position(&self, spin: usize) -> [f64; 3] {
        let q = add(
            fcc_point_quarters(spin / 4, self.cells_per_side),
            BASIS_QUARTERS[spin % 4],
        );
        q.map(|c| c as f64 / 4.0)
    }

    /// Sublattice 0..4 of `spin` (its easy axis is [`easy_axis`] of it).
    pub fn sublattice(&self, spin: usize) -> usize {
        spin % 4
    }

    /// The six nearest neighbours: the three partners in the up tetrahedron
    /// (sublattice order), then the three in the down tetrahedron.
    pub fn neighbours(&self, spin: usize) -> &[u32; 6] {
        &self.neighbours[spin]
    }

    /// `[up, down]` tetrahedra containing `spin`.
    pub fn tetrahedra_of(&self, spin: usize) -> [u32; 2] {
        [(spin / 4) as u32, self.down_tetrahedron[spin]]
    }

    /// Down tetrahedron of every spin, indexed by spin (the up one is `spin / 4`).
    pub fn down_tetrahedra(&self) -> &[u32] {
        &self.down_tetrahedron
    }

    /// The four spins of tetrahedron `tet`, ordered by sublattice 0..4.
    pub fn spins_of(&self, tet: usize) -> &[u32; 4] {
        &self.tetrahedron_spins[tet]
    }

    /// Is `tet` an up tetrahedron (easy axes point out of it)?
    pub fn is_up(&self, tet: usize) -> bool {
        tet < self.tetrahedron_count() / 2
    }

    /// Centre of tetrahedron `tet` (a diamond-lattice site) in units of `a`,
    /// inside `[0, L)³`.
    pub fn tetrahedron_centre(&self, tet: usize) -> [f64; 3] {
        let fcc_count = self.tetrahedron_count() / 2;
        let (p, sign) = if tet < fcc_count {
            (tet, 1.0)
        } else {
            (tet - fcc_count, -1.0)
        };
        let r = fcc_point_quarters(p, self.cells_per_side);
        let l = self.box_length();
        r.map(|c| (c as f64 / 4.0 + sign * 0.125).rem_euclid(l))
    }

    /// The four diamond-lattice neighbours of `tet`: the other tetrahedron of
    /// each of its spins, in the order of [`Pyrochlore::spins_of`]. Entry `k`
    /// is joined to `tet` by the diamond bond `spins_of(tet)[k]`.
    pub fn diamond_neighbours(&self, tet: usize) -> [u32; 4] {
        let up = self.is_up(tet);
        self.tetrahedron_spins[tet].map(|s| {
            if up {
                self.down_tetrahedron[s as usize]
            } else {
                s / 4
            }
        })
    }

    /// Minimum-image displacement `r_j − r_i` in units of `a`.
    pub fn displacement(&self, from: [f64; 3], to: [f64; 3]) -> [f64; 3] {
        let l = self.box_length();
        let mut d = [0.0; 3];
        for k in 0..3 {
            let x = to[k] - from[k];
            d[k] = x - l * (x / l).round();
        }
        d
    }
}

/// Quarter coordinates of FCC point `p`.
fn fcc_point_quarters(p: usize, cells_per_side: usize) -> [i64; 3] {
    let l = cells_per_side;
    let f = p % 4;
    let cell = p / 4;
    let (x, y, z) = (cell / (l * l), (cell / l) % l, cell % l);
    add(
        [4 * x as i64, 4 * y as i64, 4 * z as i64],
        FCC_OFFSET_QUARTERS[f],
    )
}

fn add(a: [i64; 3], b: [i64; 3]) -> [i64; 3] {
    [a[0] + b[0], a[1] + b[1], a[2] + b[2]]
}

fn sub(a: [i64; 3], b: [i64; 3]) -> [i64; 3] {
    [a[0] - b[0], a[1] - b[1], a[2] - b[2]]
}

/// Dot product of two 3-vectors.
pub fn dot(a: [f64; 3], b: [f64; 3]) -> f64 {
    a[0] * b[0] + a[1] * b[1] + a[2] * b[2]
}

#[cfg(test)]
mod tests {
    use super::*;

    fn norm(d: [f64; 3]) -> f64 {
        dot(d, d).sqrt()
    }

    #[test]
    fn counts() {
        for l in 1..4 {
            let lat = Pyrochlore::new(l).unwrap();
            assert_eq!(lat.spin_count(), 16 * l * l * l);
            assert_eq!(lat.tetrahedron_count(), 8 * l * l * l);
            let ups = (0..lat.tetrahedron_count())
                .filter(|&t| lat.is_up(t))
                .count();
            assert_eq!(ups, lat.spin_count() / 4);
        }
    }

    #[test]
    fn refuses_zero_and_oversized_lattices() {
        assert_eq!(Pyrochlore::new(0).unwrap_err(), LatticeError::ZeroSize);
        let err = Pyrochlore::new(1000).unwrap_err();
        match &err {
            LatticeError::TooLarge {
                estimated_bytes, ..
            } => assert!(*estimated_bytes > TABLE_MEMORY_LIMIT_BYTES),
            other => panic!("unexpected {other:?}"),
        }
        let message = err.to_string();
        assert!(
            message.contains("GiB") && message.contains("1000"),
            "{message}"
        );
        // Absurd sizes must not overflow.
        assert!(Pyrochlore::new(usize::MAX).is_err());
    }

    #[test]
    fn neighbour_distances_equal_r_nn() {
        // r_nn = a√2/4 (physics-reference §1, derived), minimum image.
        for l in [1, 2, 3] {
            let lat = Pyrochlore::new(l).unwrap();
            for i in 0..lat.spin_count() {
                let ri = lat.position(i);
                let mut seen = std::collections::BTreeSet::new();
                for &j in lat.neighbours(i) {
                    let d = norm(lat.displacement(ri, lat.position(j as usize)));
                    assert!(
                        (d - NEAREST_NEIGHBOUR_DISTANCE).abs() < 1e-12,
                        "L={l} i={i} j={j} d={d}"
                    );
                    assert!(seen.insert(j), "duplicate neighbour");
                    assert!(lat.neighbours(j as usize).contains(&(i as u32)), "symmetry");
                }
            }
        }
    }

    #[test]
    fn no_other_site_is_as_close_as_the_six_neighbours() {
        let lat = Pyrochlore::new(2).unwrap();
        for i in 0..lat.spin_count() {
            let close = (0..lat.spin_count())
                .filter(|&j| j != i)
                .filter(|&j| {
                    let d = norm(lat.displacement(lat.position(i), lat.position(j)));
                    d < NEAREST_NEIGHBOUR_DISTANCE + 1e-9
                })
                .count();
            assert_eq!(close, 6);
        }
    }

    #[test]
    fn each_spin_in_exactly_one_up_and_one_down_tetrahedron() {
        let lat = Pyrochlore::new(2).unwrap();
        let mut up_count = vec![0; lat.spin_count()];
        let mut down_count = vec![0; lat.spin_count()];
        for t in 0..lat.tetrahedron_count() {
            let spins = lat.spins_of(t);
            for (b, &s) in spins.iter().enumerate() {
                assert_eq!(
                    lat.sublattice(s as usize),
                    b,
                    "spins_of ordered by sublattice"
                );
                if lat.is_up(t) {
                    up_count[s as usize] += 1;
                } else {
                    down_count[s as usize] += 1;
                }
                let [u, d] = lat.tetrahedra_of(s as usize);
                assert!(u as usize == t || d as usize == t);
            }
        }
        assert!(up_count.iter().all(|&c| c == 1));
        assert!(down_count.iter().all(|&c| c == 1));
        for s in 0..lat.spin_count() {
            let [u, d] = lat.tetrahedra_of(s);
            assert!(lat.is_up(u as usize) && !lat.is_up(d as usize));
        }
    }

    #[test]
    fn easy_axes_point_from_up_centre_to_site_and_meet_at_minus_one_third() {
        // e_a·e_b = −1/3 for a ≠ b (derived, physics-reference §1).
        for a in 0..4 {
            let ea = easy_axis(a);
            assert!((dot(ea, ea) - 1.0).abs() < 1e-15);
            for b in 0..4 {
                if a != b {
                    assert!((dot(ea, easy_axis(b)) + 1.0 / 3.0).abs() < 1e-15);
                }
            }
        }
        // Site minus up-centre is along +e_a; site minus down-centre along −e_a.
        let lat = Pyrochlore::new(2).unwrap();
        for s in 0..lat.spin_count() {
            let [u, d] = lat.tetrahedra_of(s);
            let e = easy_axis(lat.sublattice(s));
            let r = lat.position(s);
            let from_up = lat.displacement(lat.tetrahedron_centre(u as usize), r);
            let from_down = lat.displacement(lat.tetrahedron_centre(d as usize), r);
            let len = 3f64.sqrt() / 8.0; // |(⅛,⅛,⅛)| (derived)
            for k in 0..3 {
                assert!((from_up[k] - len * e[k]).abs() < 1e-12);
                assert!((from_down[k] + len * e[k]).abs() < 1e-12);
            }
        }
    }

    #[test]
    fn diamond_graph_is_four_regular_and_bipartite() {
        // Diamond lattice: every site has 4 neighbours at distance √3/4 a, all of
        // the other (up/down) class (derived).
        for l in [1, 2, 3] {
            let lat = Pyrochlore::new(l).unwrap();
            for t in 0..lat.tetrahedron_count() {
                let nb = lat.diamond_neighbours(t);
                let distinct: std::collections::BTreeSet<u32> = nb.iter().copied().collect();
                assert_eq!(distinct.len(), 4);
                for (k, &u) in nb.iter().enumerate() {
                    assert_ne!(lat.is_up(t), lat.is_up(u as usize));
                    assert!(lat.diamond_neighbours(u as usize).contains(&(t as u32)));
                    let bond = lat.spins_of(t)[k];
                    assert!(lat.spins_of(u as usize).contains(&bond));
                    let d = norm(lat.displacement(
                        lat.tetrahedron_centre(t),
                        lat.tetrahedron_centre(u as usize),
                    ));
                    assert!((d - 3f64.sqrt() / 4.0).abs() < 1e-12);
                }
            }
        }
    }

    #[test]
    fn positions_are_distinct_and_in_the_box() {
        let lat = Pyrochlore::new(2).unwrap();
        let mut keys = std::collections::BTreeSet::new();
        for s in 0..lat.spin_count() {
            let r = lat.position(s);
            assert!(r.iter().all(|&c| (0.0..2.0).contains(&c)));
            keys.insert(r.map(|c| (c * 4.0).round() as i64));
        }
        assert_eq!(keys.len(), lat.spin_count());
    }
}
