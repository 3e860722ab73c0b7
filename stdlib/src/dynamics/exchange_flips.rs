//! Flip energies of the further-neighbour exchange model (J1, J2, J3, J3')
//! with a uniform field, as discrete energy classes for the n-fold way.
//!
//! With `K_c` the σσ coefficient of partner channel `c` (a neighbour shell,
//! split by whether the partner is on the spin's own sublattice), `n_c` the
//! sum of the partners' pseudospins in that channel and `z_a` the single-spin
//! (Zeeman) term, a flip of spin `i` costs
//!
//! `ΔE_i = −2σ_i (Σ_c K_c n_c + z_a)` (derived from
//! `E = Σ_{i<j} K_ij σ_iσ_j + Σ_i z_a σ_i`, physics-reference §2),
//!
//! so `ΔE` is a function of the integer counts `(n_c)`, the sublattice and
//! `σ_i`: finitely many energy classes, whatever the values of the J's. The
//! class of a spin changes only when one of its partners flips, which is what
//! [`DiscreteFlipEnergy::further_partners`] reports beyond the six nearest
//! neighbours. Each spin's class key is kept up to date in O(partners) per
//! flip (the key is a mixed-radix number of the up-partner counts, so one
//! partner flip adds or subtracts one stride).
//!
//! Every channel has the same coefficient for every sublattice: between
//! different sublattices the vector-convention coefficient `J e_a·e_b` is
//! `−J/3` for all pairs, within one sublattice it is `J`, and the Ising
//! convention uses `J` itself (derived; asserted in debug builds when the
//! partner lists are built).

use super::{DiscreteFlipEnergy, KineticsError, SpinView, ZeemanField};
use crate::couplings::CouplingTable;
use crate::exchange::{neighbour_shell, ExchangeCouplings, NeighbourShell};
use crate::lattice::Pyrochlore;
use std::collections::HashMap;

/// Partner channels: 4 shells × {other sublattice, same sublattice}.
const CHANNELS: usize = 8;

fn channel_of(shell: NeighbourShell, same_sublattice: bool) -> usize {
    let s = match shell {
        NeighbourShell::First => 0,
        NeighbourShell::Second => 1,
        NeighbourShell::ThirdChain => 2,
        NeighbourShell::ThirdHexagon => 3,
    };
    2 * s + same_sublattice as usize
}

/// Flip energies of [`ExchangeCouplings`] plus a uniform field.
#[derive(Clone, Debug)]
pub struct ExchangeFlipEnergy {
    /// Coefficient `K_c` (K) of each used channel, in channel order.
    coefficient_kelvin: Vec<f64>,
    /// Partners per spin in each used channel.
    partners_per_channel: Vec<u32>,
    /// Mixed-radix stride of each used channel in the class key.
    stride: Vec<u32>,
    /// Product of (partners + 1) over the used channels.
    key_count: usize,
    /// `z_a` (K): the single-spin energy is `z_a σ`.
    single_spin_kelvin: [f64; 4],
    /// All partners of spin `i`: `partners[i·P .. (i+1)·P]`.
    partners: Vec<u32>,
    /// Key stride (signed on use) of the k-th partner of a spin of sublattice `a`.
    partner_stride: [Vec<u32>; 4],
    /// Partners beyond the nearest-neighbour shell: `further[i·F .. (i+1)·F]`.
    further: Vec<u32>,
    partner_count: usize,
    further_count: usize,
    /// Class key of every spin (up-partner counts, mixed radix).
    key: Vec<u32>,
}

impl ExchangeFlipEnergy {
    /// Energetics of `couplings` on `lat` with an optional field; the shells
    /// and their validity (finite J's, L large enough for each shell) are
    /// checked as for the equilibrium coupling table.
    pub fn new(
        lat: &Pyrochlore,
        couplings: &ExchangeCouplings,
        field: Option<&ZeemanField>,
    ) -> Result<Self, KineticsError> {
        // Validation only: the same checks as the equilibrium engine's table.
        let mut check = CouplingTable::zero(lat).map_err(KineticsError::Couplings)?;
        couplings
            .add_to(lat, &mut check)
            .map_err(KineticsError::Couplings)?;
        drop(check);
        let single_spin_kelvin = ZeemanField::single_spin_kelvin(field)?;
        // Partner displacements (quarter units) of the spin of sublattice a
        // at the origin, with their channel; channels with K = 0 are dropped.
        let mut coefficient = [f64::NAN; CHANNELS];
        let mut per_channel = [[0u32; CHANNELS]; 4];
        let mut offsets: [Vec<([i64; 3], usize)>; 4] = Default::default();
        for (a, list) in offsets.iter_mut().enumerate() {
            let origin = lat.position(a);
            for j in 0..lat.spin_count() {
                let Some(shell) = neighbour_shell(lat, a, j) else {
                    continue;
                };
                let b = j % 4;
                let k = couplings.pseudospin_coefficient_kelvin(shell, a, b);
                if k == 0.0 {
                    continue;
                }
                let c = channel_of(shell, a == b);
                if coefficient[c].is_nan() {
                    coefficient[c] = k;
                }
                debug_assert!((coefficient[c] - k).abs() <= 1e-12 * k.abs());
                per_channel[a][c] += 1;
                let d = lat.displacement(origin, lat.position(j));
                list.push((d.map(|x| (x * 4.0).round() as i64), c));
            }
            // Channel order within each list, so partner k has the same
            // channel for every spin of the sublattice.
            list.sort_by_key(|&(_, c)| c);
        }
        debug_assert!(per_channel.iter().all(|p| *p == per_channel[0]));
        let used: Vec<usize> = (0..CHANNELS).filter(|&c| per_channel[0][c] > 0).collect();
        let mut stride = Vec::with_capacity(used.len());
        let mut key_count = 1usize;
        for &c in &used {
            stride.push(key_count as u32);
            key_count *= per_channel[0][c] as usize + 1;
        }
        let channel_stride = |c: usize| stride[used.iter().position(|&u| u == c).unwrap_or(0)];
        let partner_stride: [Vec<u32>; 4] =
            [0, 1, 2, 3].map(|a| offsets[a].iter().map(|&(_, c)| channel_stride(c)).collect());
        // Spin index of every site by its quarter coordinates (wrapped).
        let period = 4 * lat.cells_per_side() as i64;
        let quarters = |i: usize| lat.position(i).map(|x| (x * 4.0).round() as i64);
        let index: HashMap<[i64; 3], u32> = (0..lat.spin_count())
            .map(|i| (quarters(i).map(|q| q.rem_euclid(period)), i as u32))
            .collect();
        let partner_count = offsets[0].len();
        let further_count = offsets[0].iter().filter(|&&(_, c)| c >= 2).count();
        let mut partners = Vec::with_capacity(lat.spin_count() * partner_count);
        let mut further = Vec::with_capacity(lat.spin_count() * further_count);
        for i in 0..lat.spin_count() {
            let q = quarters(i);
            for &(d, c) in &offsets[i % 4] {
                let target = [0, 1, 2].map(|k| (q[k] + d[k]).rem_euclid(period));
                let j = index[&target];
                partners.push(j);
                if c >= 2 {
                    further.push(j);
                }
            }
        }
        Ok(Self {
            coefficient_kelvin: used.iter().map(|&c| coefficient[c]).collect(),
            partners_per_channel: used.iter().map(|&c| per_channel[0][c]).collect(),
            stride,
            key_count,
            single_spin_kelvin,
            partners,
            partner_stride,
            further,
            partner_count,
            further_count,
            key: vec![0; lat.spin_count()],
        })
    }

    /// The same couplings without the field (a field quench).
    pub fn without_field(&self) -> Self {
        Self {
            single_spin_kelvin: [0.0; 4],
            ..self.clone()
        }
    }

    /// `ΔE` (K) of flipping `spin` in `sigma`, summed directly over its
    /// partners (for tests and cross-checks; the engine uses classes).
    pub fn direct_flip_cost_kelvin(&self, sigma: &[i8], spin: usize) -> f64 {
        let a = spin % 4;
        let mut by_channel = vec![0i64; self.stride.len()];
        let list = &self.partners[spin * self.partner_count..(spin + 1) * self.partner_count];
        for (k, &j) in list.iter().enumerate() {
            let c = self
                .stride
                .iter()
                .position(|&s| s == self.partner_stride[a][k])
                .unwrap_or(0);
            by_channel[c] += sigma[j as usize] as i64;
        }
        let h: f64 = by_channel
            .iter()
            .zip(&self.coefficient_kelvin)
            .map(|(&n, &k)| k * n as f64)
            .sum();
        -2.0 * sigma[spin] as f64 * (h + self.single_spin_kelvin[a])
    }
}

impl DiscreteFlipEnergy for ExchangeFlipEnergy {
    fn energy_class_count(&self) -> usize {
        self.key_count * 8
    }

    #[inline(always)]
    fn energy_class(&self, state: &SpinView<'_>, spin: usize) -> usize {
        // SAFETY-free indexing: the key table has one entry per spin.
        let key = self.key[spin] as usize;
        (key * 4 + (spin & 3)) * 2 + (state.sigma[spin] > 0) as usize
    }

    fn energy_class_cost_kelvin(&self, class: usize) -> f64 {
        let s = if class % 2 == 1 { 1.0 } else { -1.0 };
        let a = (class / 2) % 4;
        let mut key = class / 8;
        // Sum in channel order, so equal counts give bit-identical costs.
        let mut h = 0.0;
        for (z, k) in self
            .partners_per_channel
            .iter()
            .zip(&self.coefficient_kelvin)
        {
            let radix = *z as usize + 1;
            let up = (key % radix) as f64;
            key /= radix;
            h += k * (2.0 * up - *z as f64);
        }
        -2.0 * s * (h + self.single_spin_kelvin[a])
    }

    fn attach(&mut self, state: &SpinView<'_>) {
        let p = self.partner_count;
        for (i, key) in self.key.iter_mut().enumerate() {
            let strides = &self.partner_stride[i % 4];
            *key = self.partners[i * p..(i + 1) * p]
                .iter()
                .zip(strides)
                .filter(|(&j, _)| state.sigma[j as usize] > 0)
                .map(|(_, &s)| s)
                .sum();
        }
    }

    #[inline(always)]
    fn after_flip(&mut self, state: &SpinView<'_>, spin: usize) {
        let p = self.partner_count;
        // The partner relation is symmetric and channels are symmetric too
        // (same shell, same-sublattice-ness), so the stride of `spin` seen
        // from partner j is the stride of j seen from `spin`.
        let up = state.sigma[spin] > 0;
        let strides = &self.partner_stride[spin % 4];
        for (&j, &s) in self.partners[spin * p..(spin + 1) * p].iter().zip(strides) {
            let key = &mut self.key[j as usize];
            *key = if up { *key + s } else { *key - s };
        }
    }

    fn energy_kelvin(&self, state: &SpinView<'_>) -> f64 {
        // ½ Σ_i σ_i h_i (each pair counted from both ends) + Σ_i z_a σ_i, with
        // h_i decoded from the class key like the flip cost.
        let mut total = 0.0;
        for (i, (&key, &s)) in self.key.iter().zip(state.sigma).enumerate() {
            let mut key = key as usize;
            let mut h = 0.0;
            for (z, k) in self
                .partners_per_channel
                .iter()
                .zip(&self.coefficient_kelvin)
            {
                let radix = *z as usize + 1;
                h += k * (2.0 * (key % radix) as f64 - *z as f64);
                key /= radix;
            }
            total += s as f64 * (0.5 * h + self.single_spin_kelvin[i & 3]);
        }
        total
    }

    #[inline(always)]
    fn further_partners(&self, spin: usize) -> &[u32] {
        let f = self.further_count;
        &self.further[spin * f..(spin + 1) * f]
    }
}
