//! The spin state every kinetic engine keeps, with the caches that make
//! sampling free: tetrahedron sums (charges), per-sublattice pseudospin sums
//! (magnetisation in O(1)), charge counts, and per-spin gate classes.
//!
//! One flip costs O(1): two tetrahedron sums, one sublattice sum, and the
//! gate keys of the six nearest neighbours (a flip changes the gate class of
//! its six neighbours only, [`crate::gating`]).

use super::{KineticsError, SpinView};
use crate::gating::{self, GateClasses};
use crate::lattice::{easy_axis, Pyrochlore};

/// Pseudospins and their O(1)-updated caches.
#[derive(Clone, Debug)]
pub(crate) struct KineticState {
    pub(crate) sigma: Vec<i8>,
    pub(crate) tetrahedron_sums: Vec<i8>,
    pub(crate) gates: GateClasses,
    /// Base-3 gate key of every spin ([`gating::gate_key`]), updated in O(1)
    /// per neighbour flip so a flip re-classes its six neighbours from six
    /// bytes instead of their 36 neighbour spins.
    gate_keys: Vec<u8>,
    sublattice_sums: [i64; 4],
    pub(crate) single_charges: u64,
    pub(crate) double_charges: u64,
}

impl KineticState {
    /// The state of an engine starting from `sigma` at `temperature_kelvin`,
    /// both checked (one ±1 per spin; a finite temperature ≥ 0).
    pub(crate) fn checked(
        lat: &Pyrochlore,
        sigma: Vec<i8>,
        temperature_kelvin: f64,
    ) -> Result<Self, KineticsError> {
        if sigma.len() != lat.spin_count() || sigma.iter().any(|&s| s != 1 && s != -1) {
            return Err(KineticsError::InvalidConfiguration {
                expected_spins: lat.spin_count(),
                given: sigma.len(),
            });
        }
        if !(temperature_kelvin >= 0.0 && temperature_kelvin.is_finite()) {
            return Err(KineticsError::InvalidTemperature(temperature_kelvin));
        }
        Ok(Self::new(lat, sigma))
    }

    /// Caches built from `sigma` (already checked: one ±1 per spin).
    fn new(lat: &Pyrochlore, sigma: Vec<i8>) -> Self {
        let tetrahedron_sums: Vec<i8> = (0..lat.tetrahedron_count())
            .map(|t| crate::hamiltonian::tetrahedron_sum(lat, &sigma, t))
            .collect();
        let gates = GateClasses::new(lat, &sigma);
        let gate_keys: Vec<u8> = (0..lat.spin_count())
            .map(|i| gating::gate_key(lat, &sigma, i))
            .collect();
        let mut sublattice_sums = [0i64; 4];
        for (i, &s) in sigma.iter().enumerate() {
            sublattice_sums[i & 3] += s as i64;
        }
        let c = crate::metropolis::ChargeCounts::from_tetrahedron_sums(&tetrahedron_sums);
        Self {
            sigma,
            tetrahedron_sums,
            gates,
            gate_keys,
            sublattice_sums,
            single_charges: c.single,
            double_charges: c.double,
        }
    }

    /// Read-only view for energetics and observers.
    #[inline(always)]
    pub(crate) fn view<'s>(&'s self, lattice: &'s Pyrochlore) -> SpinView<'s> {
        SpinView {
            lattice,
            sigma: &self.sigma,
            tetrahedron_sums: &self.tetrahedron_sums,
        }
    }

    /// `M = Σ_i σ_i e_{a(i)}` (units of μ).
    pub(crate) fn magnetisation(&self) -> [f64; 3] {
        let mut m = [0.0; 3];
        for (a, &n) in self.sublattice_sums.iter().enumerate() {
            let e = easy_axis(a);
            for c in 0..3 {
                m[c] += n as f64 * e[c];
            }
        }
        m
    }

    /// Σ_t |Q_t| (a double charge counts twice).
    pub(crate) fn monopole_count(&self) -> u64 {
        self.single_charges + 2 * self.double_charges
    }

    /// Flip `spin` and update every cache; returns its gate class (which a
    /// flip of the spin itself does not change).
    #[inline(always)]
    pub(crate) fn flip(&mut self, lat: &Pyrochlore, spin: usize) -> u8 {
        let down = lat.down_tetrahedra();
        debug_assert!(spin < self.sigma.len());
        // SAFETY: `spin < N` (every caller draws it from 0..N or from a
        // bucket of spins); `spin >> 2 < N/4` and `down[spin] < N/2` index
        // the tetrahedron sums by construction of the lattice tables.
        let (s, up_t, down_t) = unsafe {
            (
                *self.sigma.get_unchecked(spin),
                spin >> 2,
                *down.get_unchecked(spin) as usize,
            )
        };
        unsafe {
            *self.sigma.get_unchecked_mut(spin) = -s;
            for t in [up_t, down_t] {
                let old = *self.tetrahedron_sums.get_unchecked(t);
                let new = old - 2 * s;
                *self.tetrahedron_sums.get_unchecked_mut(t) = new;
                // Branch-free charge bookkeeping: which of |S| = 2, 4 the
                // tetrahedron leaves and enters is data-dependent and would
                // mispredict about half the time.
                let (o, n) = (old.unsigned_abs() as u64, new.unsigned_abs() as u64);
                self.single_charges = self
                    .single_charges
                    .wrapping_add((n == 2) as u64)
                    .wrapping_sub((o == 2) as u64);
                self.double_charges = self
                    .double_charges
                    .wrapping_add((n == 4) as u64)
                    .wrapping_sub((o == 4) as u64);
            }
            *self.sublattice_sums.get_unchecked_mut(spin & 3) -= 2 * s as i64;
        }
        let gate = self.gates.as_slice()[spin];
        let gates = self.gates.as_mut_slice();
        let a = spin & 3;
        for &j in lat.neighbours(spin) {
            let j = j as usize;
            // SAFETY: neighbour indices are < N = gate_keys.len() =
            // gates.len(); 4·(j & 3) + a < 16.
            unsafe {
                let w = *gating::KEY_WEIGHT.get_unchecked(4 * (j & 3) + a);
                let key = self.gate_keys.get_unchecked_mut(j);
                *key = (*key as i8 - s * w) as u8;
                *gates.get_unchecked_mut(j) = gating::class_of_key(*key);
            }
        }
        gate
    }
}
