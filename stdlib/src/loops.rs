//! Loop moves inside the ice manifold.
//!
//! Short-loop algorithm of Barkema & Newman, PRE 57, 1155 (1998), as used for
//! dipolar spin ice by Melko, den Hertog & Gingras, PRL 87, 067203 (2001):
//! start at a random tetrahedron, repeatedly leave the current tetrahedron
//! along one of its two "out" spins (chosen uniformly), entering the next
//! tetrahedron on an "in" spin, until the walk reaches a tetrahedron it has
//! already visited; keep only the closed part (the tail before the first
//! visit of that tetrahedron is discarded). Flipping the loop reverses every
//! arrow on it, so every tetrahedron keeps one in and one out spin of the
//! loop: all charges are preserved. The flip is accepted with Metropolis on
//! the full energy change, computed from the sampler's local fields plus the
//! pair terms inside the loop.
//!
//! The walk only passes through charge-neutral (two-in–two-out)
//! tetrahedra; it is abandoned (counted as not accepted) if it starts on or
//! runs into a charged one, which keeps each tetrahedron's choice at exactly
//! two exits — the property Barkema & Newman's balance argument uses.
//!
//! A spin is "out" of an up tetrahedron for σ = +1 and out of a down
//! tetrahedron for σ = −1 (easy axes point out of up tetrahedra,
//! physics-reference §1).

use crate::engine::{acceptance, FlipRule, LocalFieldSampler};
use crate::lattice::Pyrochlore;
use rand::Rng;
use serde::{Deserialize, Serialize};

/// What one loop move did.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum LoopOutcome {
    /// The loop of `length` spins was flipped.
    Accepted {
        /// Spins on the loop.
        length: usize,
    },
    /// A loop was built but the Metropolis test refused it.
    Rejected {
        /// Spins on the loop.
        length: usize,
    },
    /// The walk met a charged tetrahedron; nothing changed.
    Abandoned,
}

/// Counters of loop moves.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct LoopStatistics {
    /// Moves attempted.
    pub attempts: u64,
    /// Loops flipped.
    pub accepted: u64,
    /// Walks abandoned at a charged tetrahedron.
    pub abandoned: u64,
    /// Spins flipped by accepted loops.
    pub flipped_spins: u64,
}

/// Reusable scratch space for loop moves (no allocation per move).
#[derive(Clone, Debug)]
pub struct LoopMoves {
    /// Generation stamp per tetrahedron (visited in this walk iff equal to `stamp`).
    visited_stamp: Vec<u32>,
    /// Position in the walk of each visited tetrahedron.
    visited_at: Vec<u32>,
    stamp: u32,
    path_spins: Vec<u32>,
    statistics: LoopStatistics,
}

/// Is `spin` (of tetrahedron `tet`) pointing out of `tet`?
fn is_out(lat: &Pyrochlore, sigma: &[i8], tet: usize, spin: usize) -> bool {
    (sigma[spin] > 0) == lat.is_up(tet)
}

impl LoopMoves {
    /// Scratch space for `lat`.
    pub fn new(lat: &Pyrochlore) -> Self {
        let t = lat.tetrahedron_count();
        Self {
            visited_stamp: vec![0; t],
            visited_at: vec![0; t],
            stamp: 0,
            path_spins: Vec::with_capacity(t),
            statistics: LoopStatistics::default(),
        }
    }

    /// Counters so far.
    pub fn statistics(&self) -> LoopStatistics {
        self.statistics
    }

    /// Build one loop in the current configuration of `sampler`, leaving its
    /// spins in `self.path_spins[start..]`; `None` if the walk is abandoned.
    fn build_loop(&mut self, sampler: &mut LocalFieldSampler<'_>) -> Option<usize> {
        let lat = sampler.lattice();
        self.stamp = self.stamp.wrapping_add(1);
        if self.stamp == 0 {
            self.visited_stamp.iter_mut().for_each(|s| *s = 0);
            self.stamp = 1;
        }
        self.path_spins.clear();
        let tets = lat.tetrahedron_count();
        let mut tet = sampler.rng_mut().gen_range(0..tets);
        loop {
            let sigma = sampler.sigma();
            if crate::hamiltonian::tetrahedron_sum(lat, sigma, tet) != 0 {
                return None;
            }
            self.visited_stamp[tet] = self.stamp;
            self.visited_at[tet] = self.path_spins.len() as u32;
            let spins = lat.spins_of(tet);
            let mut outs = [0usize; 2];
            let mut k = 0;
            for (slot, &s) in spins.iter().enumerate() {
                if is_out(lat, sigma, tet, s as usize) && k < 2 {
                    outs[k] = slot;
                    k += 1;
                }
            }
            let choice = outs[sampler.rng_mut().gen_range(0..2usize)];
            let spin = spins[choice];
            let next = lat.diamond_neighbours(tet)[choice] as usize;
            self.path_spins.push(spin);
            if self.visited_stamp[next] == self.stamp {
                return Some(self.visited_at[next] as usize);
            }
            tet = next;
        }
    }

    /// One loop move on `sampler` (Metropolis on the full energy change,
    /// whatever the sampler's single-flip rule).
    pub fn attempt(&mut self, sampler: &mut LocalFieldSampler<'_>) -> LoopOutcome {
        self.statistics.attempts += 1;
        let Some(start) = self.build_loop(sampler) else {
            self.statistics.abandoned += 1;
            return LoopOutcome::Abandoned;
        };
        let loop_spins = &self.path_spins[start..];
        let length = loop_spins.len();
        let cost = sampler.flip_set_cost_kelvin(loop_spins);
        let p = acceptance(FlipRule::Metropolis, cost, sampler.temperature_kelvin());
        let accept = p >= 1.0 || (p > 0.0 && sampler.rng_mut().gen::<f64>() < p);
        if accept {
            sampler.apply_flip_set(loop_spins, cost);
            self.statistics.accepted += 1;
            self.statistics.flipped_spins += length as u64;
            LoopOutcome::Accepted { length }
        } else {
            LoopOutcome::Rejected { length }
        }
    }

    /// The spins of the last loop built (accepted or not).
    pub fn last_loop(&self) -> &[u32] {
        &self.path_spins
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::couplings::CouplingTable;
    use crate::ewald::DipolarInteraction;
    use crate::exchange::{CouplingConvention, ExchangeCouplings, ZeemanField};
    use crate::hamiltonian::charge;
    use crate::metropolis::{initial_configuration, Start};
    use crate::rng::RngStreams;
    use std::collections::HashMap;

    #[test]
    fn loops_preserve_every_charge_and_energy_stays_exact() {
        // Flipping a directed loop keeps one in and one out per tetrahedron
        // (Barkema & Newman 1998): every Q_t unchanged (derived).
        let lat = Pyrochlore::new(2).unwrap();
        let mut table = CouplingTable::zero(&lat).unwrap();
        ExchangeCouplings::nearest_neighbour(-1.24 * 3.0, CouplingConvention::VectorSpins)
            .add_to(&lat, &mut table)
            .unwrap();
        DipolarInteraction {
            d_kelvin: 1.41,
            accuracy: 1e-10,
        }
        .add_to(&lat, &mut table)
        .unwrap();
        let mut rng = RngStreams::new(3).stream(0);
        let mut sigma = initial_configuration(&lat, Start::IceState, &mut rng);
        // Two defects so the walk must also avoid charged tetrahedra.
        sigma[0] = -sigma[0];
        let charges: Vec<i8> = (0..lat.tetrahedron_count())
            .map(|t| charge(&lat, &sigma, t))
            .collect();
        let mut s =
            LocalFieldSampler::new(&lat, &table, 0.3, FlipRule::Metropolis, sigma, rng).unwrap();
        let mut moves = LoopMoves::new(&lat);
        for _ in 0..2000 {
            moves.attempt(&mut s);
            if moves.statistics().attempts.is_multiple_of(200) {
                for (t, &q) in charges.iter().enumerate() {
                    assert_eq!(charge(&lat, s.sigma(), t), q);
                }
            }
        }
        let st = moves.statistics();
        assert!(st.accepted > 50 && st.abandoned > 0, "{st:?}");
        let direct = table.direct_energy_kelvin(s.sigma());
        assert!((s.energy_kelvin() - direct).abs() < 1e-8 * direct.abs());
    }

    #[test]
    fn loop_moves_satisfy_detailed_balance_on_an_enumerable_system() {
        // L = 1 (16 spins): enumerate all two-in–two-out states, weight them
        // by e^{−E/T} with a weak field that splits them, and compare the
        // frequencies sampled by loop moves alone with a chi-square test
        // (Pearson; threshold dof + 6√(2 dof), common practice, with samples
        // spaced to decorrelate).
        let lat = Pyrochlore::new(1).unwrap();
        let mut table = CouplingTable::zero(&lat).unwrap();
        ExchangeCouplings::nearest_neighbour(1.0, CouplingConvention::IsingPseudospins)
            .add_to(&lat, &mut table)
            .unwrap();
        ZeemanField {
            field_tesla: [0.25, 0.6, 0.9],
            moment_bohr_magnetons: 1.0,
        }
        .add_to(&mut table)
        .unwrap();
        let t = 0.5;
        let n = lat.spin_count();
        let mut weights: HashMap<u32, f64> = HashMap::new();
        for bits in 0..1u32 << n {
            let sigma: Vec<i8> = (0..n)
                .map(|k| if bits >> k & 1 == 1 { 1 } else { -1 })
                .collect();
            if (0..lat.tetrahedron_count()).all(|tt| charge(&lat, &sigma, tt) == 0) {
                weights.insert(bits, (-table.direct_energy_kelvin(&sigma) / t).exp());
            }
        }
        // Ice states of one cubic cell: more than the 6^? naive bound says; all
        // we need is several distinct weights.
        assert!(weights.len() > 20, "{}", weights.len());
        let z: f64 = weights.values().sum();
        let mut rng = RngStreams::new(11).stream(0);
        let sigma = initial_configuration(&lat, Start::IceState, &mut rng);
        let mut s =
            LocalFieldSampler::new(&lat, &table, t, FlipRule::Metropolis, sigma, rng).unwrap();
        let mut moves = LoopMoves::new(&lat);
        let mut counts: HashMap<u32, u64> = HashMap::new();
        let samples = 200_000u64;
        for _ in 0..200 {
            moves.attempt(&mut s);
        }
        for _ in 0..samples {
            for _ in 0..4 {
                moves.attempt(&mut s);
            }
            let key = s
                .sigma()
                .iter()
                .enumerate()
                .fold(0u32, |acc, (k, &x)| acc | (((x > 0) as u32) << k));
            *counts.entry(key).or_default() += 1;
        }
        assert!(
            counts.keys().all(|k| weights.contains_key(k)),
            "left the ice manifold"
        );
        let mut chi2 = 0.0;
        for (key, w) in &weights {
            let expected = samples as f64 * w / z;
            let observed = *counts.get(key).unwrap_or(&0) as f64;
            chi2 += (observed - expected).powi(2) / expected;
        }
        let dof = (weights.len() - 1) as f64;
        assert!(
            chi2 < dof + 6.0 * (2.0 * dof).sqrt(),
            "chi2 = {chi2}, dof = {dof}"
        );
        // And the test can fail: uniform frequencies (ignoring the field) are far off.
        let mut chi2_uniform = 0.0;
        for (key, w) in &weights {
            let expected = samples as f64 * w / z;
            let uniform = samples as f64 / weights.len() as f64;
            chi2_uniform += (uniform - expected).powi(2) / expected;
            let _ = key;
        }
        assert!(
            chi2_uniform > dof + 6.0 * (2.0 * dof).sqrt(),
            "{chi2_uniform}"
        );
    }
}
