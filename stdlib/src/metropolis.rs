//! Equilibrium single-spin-flip Metropolis sampling of nearest-neighbour spin ice.
//!
//! Metropolis, Rosenbluth, Rosenbluth, Teller & Teller, J. Chem. Phys. 21,
//! 1087 (1953): propose flipping one pseudospin, accept with
//! `min(1, e^{−ΔE/T})`. A sweep is N attempts.
//!
//! Site order: each attempt picks its site uniformly at random (not a
//! sequential sweep). Random order satisfies detailed balance for every
//! attempt and stays ergodic at any temperature; a sequential sweep only
//! satisfies (global) balance and, with Metropolis acceptance, degenerates at
//! T → ∞ into flipping every spin each sweep — σ → −σ, a deterministic and
//! non-ergodic map. With random order one sweep is also one attempt time τ0,
//! the unit later issues use for physical-time dynamics (physics-reference §5).
//!
//! Speed (the nearest-neighbour model only has 7 possible ΔE values):
//! * the engine keeps every tetrahedron sum `S_t = Σ_{i∈t} σ_i`, so the local
//!   field is `h_i = S_up + S_down − 2σ_i` (two reads instead of six) and
//!   `ΔE = −2 J_eff σ_i h_i = −2 J_eff k`, `k ∈ {−6, −4, …, 6}`;
//! * acceptance is an integer comparison of raw random bits against a table of
//!   thresholds `⌊p·2^64⌋`, compared lexicographically: the upper 32 bits of
//!   the attempt's u64 decide unless they equal the threshold's upper word
//!   (probability 2^−32), in which case 32 fresh bits decide. That is an exact
//!   comparison `U < ⌊p·2^64⌋` of a 64-bit uniform, so the acceptance
//!   probability is `p` to within 2^−64 ≈ 5·10^−20 absolute while costing
//!   32 random bits per attempt. A plain 32-bit threshold would set every
//!   `p < 2^−32 ≈ 2·10^−10` to zero, i.e. forbid excitations at `T < ΔE/22`,
//!   which a long low-temperature run (10^10 attempts and more) would notice;
//!   at 2^−64 the expected number of wrong decisions stays below 10^−7 for
//!   10^12 attempts.
//! * the lower 32 bits pick the site by Lemire's multiply-shift with
//!   rejection (Lemire, ACM Trans. Model. Comput. Simul. 29, 3 (2019)),
//!   exactly uniform.

use crate::hamiltonian::NearestNeighbourIce;
use crate::lattice::{easy_axis, Pyrochlore};
use crate::rng::SpinRng;
use rand::{Rng, RngCore};
use serde::{Deserialize, Serialize};

/// Initial configuration of a run.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum Start {
    /// Independent random pseudospins (an infinite-temperature state).
    Random,
    /// A two-in–two-out state (σ = +1 on sublattices 0, 1 and −1 on 2, 3):
    /// every tetrahedron has charge 0, E = −N J_eff.
    IceState,
    /// All pseudospins +1: every up tetrahedron all-out (Q = +2), every down
    /// tetrahedron all-in (Q = −2); the maximum-energy state for J_eff > 0.
    AllInAllOut,
}

/// Pseudospins of a starting configuration on `lat`.
pub fn initial_configuration(lat: &Pyrochlore, start: Start, rng: &mut SpinRng) -> Vec<i8> {
    let n = lat.spin_count();
    match start {
        Start::Random => (0..n)
            .map(|_| if rng.gen::<bool>() { 1 } else { -1 })
            .collect(),
        Start::IceState => (0..n)
            .map(|i| if lat.sublattice(i) < 2 { 1 } else { -1 })
            .collect(),
        Start::AllInAllOut => vec![1; n],
    }
}

/// Number of values of `k = σ_i h_i` (−6..=6); tables are indexed by `k + 6`.
const FIELD_SLOTS: usize = 13;

/// Upper-word threshold meaning "always accept" (greater than any 32-bit value).
const ALWAYS: u64 = 1 << 32;

/// Metropolis acceptance thresholds for `ΔE = −2 J k`, split into upper
/// (`hi`, compared with 32 random bits, `ALWAYS` for p = 1) and lower words.
#[derive(Clone, Copy, Debug)]
struct AcceptanceTable {
    hi: [u64; FIELD_SLOTS],
    lo: [u32; FIELD_SLOTS],
    probability: [f64; FIELD_SLOTS],
}

impl AcceptanceTable {
    /// Temperatures that are not positive (or NaN) are treated as T → 0⁺:
    /// only moves with ΔE ≤ 0 are accepted.
    fn new(j_eff_kelvin: f64, temperature_kelvin: f64) -> Self {
        let mut table = AcceptanceTable {
            hi: [0; FIELD_SLOTS],
            lo: [0; FIELD_SLOTS],
            probability: [0.0; FIELD_SLOTS],
        };
        for slot in 0..FIELD_SLOTS {
            let k = slot as f64 - 6.0;
            let delta_e = -2.0 * j_eff_kelvin * k;
            let p = if delta_e <= 0.0 {
                1.0
            } else if temperature_kelvin > 0.0 {
                (-delta_e / temperature_kelvin).exp()
            } else {
                0.0
            };
            table.probability[slot] = p;
            if p >= 1.0 {
                table.hi[slot] = ALWAYS;
            } else {
                // p < 1 so p·2^64 < 2^64; `as` saturates and maps NaN to 0.
                let t = (p * 18_446_744_073_709_551_616.0) as u64;
                table.hi[slot] = t >> 32;
                table.lo[slot] = t as u32;
            }
        }
        table
    }
}

/// Single-spin-flip Metropolis sampler of [`NearestNeighbourIce`] on a
/// [`Pyrochlore`] lattice, with tetrahedron sums and an integer acceptance
/// table (see the module documentation).
pub struct NearestNeighbourMetropolis<'a> {
    lat: &'a Pyrochlore,
    j_eff_kelvin: f64,
    temperature_kelvin: f64,
    sigma: Vec<i8>,
    /// `S_t` for every tetrahedron (−4..=4).
    tetrahedron_sum: Vec<i8>,
    /// Σ over nearest-neighbour pairs of σσ (energy in units of J_eff).
    bond_sum: i64,
    table: AcceptanceTable,
    rng: SpinRng,
    attempts: u64,
    accepted: u64,
}

impl<'a> NearestNeighbourMetropolis<'a> {
    /// A sampler at `temperature_kelvin` starting from `start` (drawn from
    /// `rng` for [`Start::Random`]).
    pub fn new(
        lat: &'a Pyrochlore,
        model: &NearestNeighbourIce,
        temperature_kelvin: f64,
        start: Start,
        mut rng: SpinRng,
    ) -> Self {
        let sigma = initial_configuration(lat, start, &mut rng);
        Self::from_configuration(lat, model, temperature_kelvin, sigma, rng)
            .expect("initial_configuration has one ±1 entry per spin")
    }

    /// A sampler starting from a given configuration; `None` unless `sigma`
    /// has one entry per spin, each ±1.
    pub fn from_configuration(
        lat: &'a Pyrochlore,
        model: &NearestNeighbourIce,
        temperature_kelvin: f64,
        sigma: Vec<i8>,
        rng: SpinRng,
    ) -> Option<Self> {
        if sigma.len() != lat.spin_count() || sigma.iter().any(|&s| s != 1 && s != -1) {
            return None;
        }
        let tetrahedron_sum: Vec<i8> = (0..lat.tetrahedron_count())
            .map(|t| crate::hamiltonian::tetrahedron_sum(lat, &sigma, t))
            .collect();
        let bond_sum = NearestNeighbourIce::bond_sum(lat, &sigma);
        Some(Self {
            lat,
            j_eff_kelvin: model.j_eff_kelvin,
            temperature_kelvin,
            sigma,
            tetrahedron_sum,
            bond_sum,
            table: AcceptanceTable::new(model.j_eff_kelvin, temperature_kelvin),
            rng,
            attempts: 0,
            accepted: 0,
        })
    }

    /// Change the temperature (rebuilds the 13-entry acceptance table).
    pub fn set_temperature(&mut self, temperature_kelvin: f64) {
        self.temperature_kelvin = temperature_kelvin;
        self.table = AcceptanceTable::new(self.j_eff_kelvin, temperature_kelvin);
    }

    /// Current temperature (K).
    pub fn temperature_kelvin(&self) -> f64 {
        self.temperature_kelvin
    }

    /// The lattice sampled.
    pub fn lattice(&self) -> &'a Pyrochlore {
        self.lat
    }

    /// One sweep: N single-flip attempts at uniformly random sites.
    /// Returns the number accepted.
    pub fn sweep(&mut self) -> u64 {
        let n = self.sigma.len() as u64;
        self.run_attempts(n)
    }

    /// `count` single-flip attempts; returns the number accepted.
    pub fn run_attempts(&mut self, count: u64) -> u64 {
        let n = self.sigma.len();
        let n64 = n as u64;
        // Lemire: reject the lowest (2^32 mod n) products to make the site uniform.
        let reject_below = ((1u64 << 32) % n64) as u32;
        let down = self.lat.down_tetrahedra();
        let sigma = &mut self.sigma[..];
        let tets = &mut self.tetrahedron_sum[..];
        let table = &self.table;
        let rng = &mut self.rng;
        debug_assert_eq!(down.len(), n);
        debug_assert_eq!(tets.len(), n / 2);
        let mut accepted = 0u64;
        let mut bond_change = 0i64;
        for _ in 0..count {
            let bits = rng.next_u64();
            let mut product = (bits & 0xffff_ffff) * n64;
            while (product as u32) < reject_below {
                product = (rng.next_u64() >> 32) * n64;
            }
            let site = (product >> 32) as usize;
            // SAFETY: `product < 2^32 · n`, so `site < n = sigma.len() = down.len()`.
            // `site >> 2 < n/4 ≤ tets.len()` and `down[site] < n/2 = tets.len()`
            // by construction of the lattice tables (down tetrahedra are
            // numbered N/4..N/2).
            let (s, up_index, down_index) = unsafe {
                (
                    *sigma.get_unchecked(site),
                    site >> 2,
                    *down.get_unchecked(site) as usize,
                )
            };
            let (s_up, s_down) = unsafe {
                (
                    *tets.get_unchecked(up_index),
                    *tets.get_unchecked(down_index),
                )
            };
            // k = σ_i h_i with h_i = S_up + S_down − 2σ_i ∈ [−6, 6]: each
            // tetrahedron sum minus σ_i is a sum of three ±1 (invariant kept below).
            let k = (s * (s_up + s_down - 2 * s)) as i32;
            let slot = (k + 6) as usize;
            debug_assert!(slot < FIELD_SLOTS);
            // SAFETY: slot ∈ 0..13 by the bound on k just stated.
            let (hi, lo) =
                unsafe { (*table.hi.get_unchecked(slot), *table.lo.get_unchecked(slot)) };
            let upper = bits >> 32;
            // Branch-free accept/reject: at T ~ J_eff about a fifth of the
            // attempts are accepted in no predictable pattern, and a
            // mispredicted branch costs more than three unconditional stores.
            // Only the tie `upper == hi` (probability 2^−32) branches.
            let mut accept = (upper < hi) as i8;
            if upper == hi {
                accept = ((rng.next_u64() as u32) < lo) as i8;
            }
            // 0, or 2σ_i when the flip is accepted.
            let change = 2 * s * accept;
            // SAFETY: same indices as the reads above.
            unsafe {
                *sigma.get_unchecked_mut(site) = s - change;
                *tets.get_unchecked_mut(up_index) = s_up - change;
                *tets.get_unchecked_mut(down_index) = s_down - change;
            }
            bond_change -= 2 * (k * accept as i32) as i64;
            accepted += accept as u64;
        }
        self.bond_sum += bond_change;
        self.attempts += count;
        self.accepted += accepted;
        accepted
    }

    /// Pseudospins σ_i = ±1, indexed like the lattice.
    pub fn sigma(&self) -> &[i8] {
        &self.sigma
    }

    /// Tetrahedron sums `S_t` (so `Q_t = ±S_t/2`).
    pub fn tetrahedron_sums(&self) -> &[i8] {
        &self.tetrahedron_sum
    }

    /// Total energy (K), kept exactly as an integer bond sum times J_eff.
    pub fn energy_kelvin(&self) -> f64 {
        self.j_eff_kelvin * self.bond_sum as f64
    }

    /// Σ_⟨ij⟩ σ_iσ_j (energy in units of J_eff).
    pub fn bond_sum(&self) -> i64 {
        self.bond_sum
    }

    /// Counts of tetrahedra with |Q| = 1 and |Q| = 2.
    pub fn charge_counts(&self) -> ChargeCounts {
        ChargeCounts::from_tetrahedron_sums(&self.tetrahedron_sum)
    }

    /// Magnetisation vector `M = Σ_i σ_i e_{a(i)}` in units of the moment μ.
    pub fn magnetisation(&self) -> [f64; 3] {
        magnetisation(&self.sigma)
    }

    /// Attempts made so far.
    pub fn attempt_count(&self) -> u64 {
        self.attempts
    }

    /// Accepted flips so far.
    pub fn accepted_count(&self) -> u64 {
        self.accepted
    }

    /// Metropolis acceptance probability of a flip with `k = σ_i h_i`, for tests.
    pub fn acceptance_probability(&self, k: i32) -> Option<f64> {
        let slot = usize::try_from(k + 6).ok()?;
        self.table.probability.get(slot).copied()
    }
}

/// How many tetrahedra carry a single (|Q| = 1) or double (|Q| = 2) charge.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct ChargeCounts {
    /// Tetrahedra with |Q| = 1 (three-in–one-out or one-in–three-out).
    pub single: u64,
    /// Tetrahedra with |Q| = 2 (all-in or all-out).
    pub double: u64,
}

impl ChargeCounts {
    /// From tetrahedron sums `S_t = ±2 Q_t`.
    pub fn from_tetrahedron_sums(sums: &[i8]) -> Self {
        let mut counts = ChargeCounts::default();
        for &s in sums {
            match s.unsigned_abs() {
                2 => counts.single += 1,
                4 => counts.double += 1,
                _ => {}
            }
        }
        counts
    }

    /// Σ_t |Q_t|.
    pub fn total_charge_magnitude(&self) -> u64 {
        self.single + 2 * self.double
    }
}

/// `M = Σ_i σ_i e_{a(i)}` (units of μ) for pseudospins indexed like
/// [`Pyrochlore`] (sublattice = index mod 4).
pub fn magnetisation(sigma: &[i8]) -> [f64; 3] {
    let mut per_sublattice = [0i64; 4];
    for cell in sigma.chunks_exact(4) {
        for (acc, &s) in per_sublattice.iter_mut().zip(cell) {
            *acc += s as i64;
        }
    }
    let mut m = [0.0; 3];
    for (a, &count) in per_sublattice.iter().enumerate() {
        let e = easy_axis(a);
        for k in 0..3 {
            m[k] += count as f64 * e[k];
        }
    }
    m
}

pub mod reference {
    //! The straightforward single-flip Metropolis loop, kept as the reference
    //! the optimised engine is validated and benchmarked against: random site
    //! from `gen_range`, local field from the six-entry neighbour table, an
    //! f64 acceptance table compared with a uniform f64. [`StraightforwardMetropolis::sweep`]
    //! is the same algorithm and site order as [`super::NearestNeighbourMetropolis`]
    //! with none of its tricks; [`StraightforwardMetropolis::sequential_sweep`]
    //! is the sequential-order textbook loop, the faster of the two plain loops
    //! and the benchmark's baseline.

    use super::{initial_configuration, Start};
    use crate::hamiltonian::NearestNeighbourIce;
    use crate::lattice::Pyrochlore;
    use crate::rng::SpinRng;
    use rand::Rng;

    /// Reference Metropolis sampler (see the module documentation).
    pub struct StraightforwardMetropolis<'a> {
        lat: &'a Pyrochlore,
        j_eff_kelvin: f64,
        sigma: Vec<i8>,
        /// Acceptance probability indexed by `σ_i h_i + 6`.
        probability: [f64; 13],
        bond_sum: i64,
        rng: SpinRng,
    }

    impl<'a> StraightforwardMetropolis<'a> {
        /// Sampler at `temperature_kelvin` (> 0) from `start`.
        pub fn new(
            lat: &'a Pyrochlore,
            model: &NearestNeighbourIce,
            temperature_kelvin: f64,
            start: Start,
            mut rng: SpinRng,
        ) -> Self {
            let sigma = initial_configuration(lat, start, &mut rng);
            let bond_sum = NearestNeighbourIce::bond_sum(lat, &sigma);
            let mut probability = [0.0; 13];
            for (slot, p) in probability.iter_mut().enumerate() {
                let delta_e = -2.0 * model.j_eff_kelvin * (slot as f64 - 6.0);
                *p = (-delta_e / temperature_kelvin).exp().min(1.0);
            }
            Self {
                lat,
                j_eff_kelvin: model.j_eff_kelvin,
                sigma,
                probability,
                bond_sum,
                rng,
            }
        }

        /// N attempts; returns the number accepted.
        pub fn sweep(&mut self) -> u64 {
            let n = self.sigma.len();
            let mut accepted = 0;
            for _ in 0..n {
                let i = self.rng.gen_range(0..n);
                let h: i32 = self
                    .lat
                    .neighbours(i)
                    .iter()
                    .map(|&j| self.sigma[j as usize] as i32)
                    .sum();
                let k = self.sigma[i] as i32 * h;
                let p = self.probability[(k + 6) as usize];
                if p >= 1.0 || self.rng.gen::<f64>() < p {
                    self.sigma[i] = -self.sigma[i];
                    self.bond_sum -= 2 * k as i64;
                    accepted += 1;
                }
            }
            accepted
        }

        /// N attempts in sequential site order 0, 1, …, N−1 (the textbook
        /// loop; satisfies balance but not detailed balance, and is not
        /// ergodic at T → ∞). Kept as the speed baseline. Returns the number
        /// accepted.
        pub fn sequential_sweep(&mut self) -> u64 {
            let mut accepted = 0;
            for i in 0..self.sigma.len() {
                let h: i32 = self
                    .lat
                    .neighbours(i)
                    .iter()
                    .map(|&j| self.sigma[j as usize] as i32)
                    .sum();
                let k = self.sigma[i] as i32 * h;
                let p = self.probability[(k + 6) as usize];
                if p >= 1.0 || self.rng.gen::<f64>() < p {
                    self.sigma[i] = -self.sigma[i];
                    self.bond_sum -= 2 * k as i64;
                    accepted += 1;
                }
            }
            accepted
        }

        /// Pseudospins.
        pub fn sigma(&self) -> &[i8] {
            &self.sigma
        }

        /// Total energy (K).
        pub fn energy_kelvin(&self) -> f64 {
            self.j_eff_kelvin * self.bond_sum as f64
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::hamiltonian::charge;
    use crate::rng::RngStreams;

    #[test]
    fn incremental_state_matches_recomputation() {
        let lat = Pyrochlore::new(2).unwrap();
        let model = NearestNeighbourIce::new(1.1);
        let mut engine = NearestNeighbourMetropolis::new(
            &lat,
            &model,
            1.7,
            Start::Random,
            RngStreams::new(1).stream(0),
        );
        for _ in 0..50 {
            engine.sweep();
        }
        let sigma = engine.sigma().to_vec();
        assert!((engine.energy_kelvin() - model.energy_kelvin(&lat, &sigma)).abs() < 1e-9);
        for t in 0..lat.tetrahedron_count() {
            let q = charge(&lat, &sigma, t);
            let s = engine.tetrahedron_sums()[t];
            assert_eq!(q, if lat.is_up(t) { s / 2 } else { -s / 2 });
        }
        assert!(engine.accepted_count() > 0 && engine.attempt_count() == 50 * 128);
    }

    #[test]
    fn acceptance_table_is_metropolis() {
        let lat = Pyrochlore::new(1).unwrap();
        let model = NearestNeighbourIce::new(1.0);
        let engine = NearestNeighbourMetropolis::new(
            &lat,
            &model,
            2.0,
            Start::IceState,
            RngStreams::new(1).stream(0),
        );
        // k = σh = −2 in an ice state: ΔE = 4 J, p = e^{−4J/T} (derived).
        assert!((engine.acceptance_probability(-2).unwrap() - (-2.0f64).exp()).abs() < 1e-15);
        assert_eq!(engine.acceptance_probability(0), Some(1.0));
        assert_eq!(engine.acceptance_probability(7), None);
    }

    #[test]
    fn integer_thresholds_accept_at_the_tabulated_rate() {
        // Empirical acceptance of the bit comparison for p = e^{-2}: binomial,
        // 5σ tolerance (common practice).
        let table = AcceptanceTable::new(1.0, 2.0);
        let mut rng = RngStreams::new(3).stream(0);
        let slot = 4; // k = −2
        let n = 400_000;
        let mut hits = 0;
        for _ in 0..n {
            let upper = rng.next_u64() >> 32;
            if upper < table.hi[slot]
                || (upper == table.hi[slot] && (rng.next_u64() as u32) < table.lo[slot])
            {
                hits += 1;
            }
        }
        let p = table.probability[slot];
        let sd = (p * (1.0 - p) / n as f64).sqrt();
        assert!(((hits as f64 / n as f64) - p).abs() < 5.0 * sd);
    }

    #[test]
    fn tiny_probabilities_are_not_rounded_to_zero() {
        // p = e^{−40} ≈ 4e−18 is below 2^−32 but above 2^−64: it must survive.
        let table = AcceptanceTable::new(1.0, 0.1);
        let slot = 4; // ΔE = 4 J, p = e^{−40}
        assert_eq!(table.hi[slot], 0);
        assert!(table.lo[slot] > 0);
        // Threshold resolution is 2^−64 absolute (derived from the construction).
        let t = table.lo[slot] as f64 / 18_446_744_073_709_551_616.0;
        assert!((t - (-40.0f64).exp()).abs() <= 2f64.powi(-64));
    }

    #[test]
    fn rejects_malformed_configurations() {
        let lat = Pyrochlore::new(1).unwrap();
        let model = NearestNeighbourIce::new(1.0);
        let rng = RngStreams::new(0).stream(0);
        assert!(NearestNeighbourMetropolis::from_configuration(
            &lat,
            &model,
            1.0,
            vec![1; 15],
            rng.clone()
        )
        .is_none());
        assert!(NearestNeighbourMetropolis::from_configuration(
            &lat,
            &model,
            1.0,
            vec![0; 16],
            rng
        )
        .is_none());
    }
}
