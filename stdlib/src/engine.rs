//! General pseudospin sampler with local-field caches.
//!
//! Works with any [`CouplingTable`] (exchange of any range, Ewald dipolar,
//! Zeeman). It keeps the pair fields `h_i = Σ_{j≠i} K_ij σ_j`, so
//!
//! * a single-flip energy change `ΔE_i = −2σ_i (h_i + z_{a(i)})` is O(1);
//! * an accepted flip of spin `i` changes `h_j` by `−2σ_i K_ij` for every `j`:
//!   one O(N) pass over the translation-invariant row of `i`'s sublattice
//!   (physics-reference §2). The pass runs over runs of contiguous cells, so
//!   it streams two arrays and needs no index table.
//!
//! Single flips use Metropolis, `min(1, e^{−ΔE/T})` (Metropolis et al.,
//! J. Chem. Phys. 21, 1087 (1953)), or heat-bath, `1/(1 + e^{ΔE/T})`
//! (Glauber, J. Math. Phys. 4, 294 (1963)), at uniformly random sites
//! (so every attempt satisfies detailed balance; see [`crate::metropolis`]).

use crate::couplings::{CouplingTable, OFFSET_DIFFERENCE};
use crate::lattice::Pyrochlore;
use crate::metropolis::{magnetisation, ChargeCounts};
use crate::rng::SpinRng;
use rand::Rng;
use serde::{Deserialize, Serialize};
use std::fmt;

/// Acceptance rule of single flips.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum FlipRule {
    /// `min(1, e^{−ΔE/T})`.
    Metropolis,
    /// `1/(1 + e^{ΔE/T})`.
    HeatBath,
}

/// Why a sampler could not be built.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub enum SamplerError {
    /// The coupling table was built for another lattice size.
    TableMismatch {
        /// L of the lattice.
        lattice_cells_per_side: usize,
        /// L of the table.
        table_cells_per_side: usize,
    },
    /// The configuration does not have one ±1 entry per spin.
    BadConfiguration {
        /// Entries given.
        length: usize,
        /// Spins of the lattice.
        spin_count: usize,
    },
}

impl fmt::Display for SamplerError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            SamplerError::TableMismatch {
                lattice_cells_per_side,
                table_cells_per_side,
            } => write!(
                f,
                "the coupling table is for {table_cells_per_side} cells per side but the lattice has {lattice_cells_per_side}"
            ),
            SamplerError::BadConfiguration { length, spin_count } => write!(
                f,
                "a configuration needs {spin_count} pseudospins of ±1 (got {length} entries or a value other than ±1)"
            ),
        }
    }
}

impl std::error::Error for SamplerError {}

/// Add `delta · K(source, j)` to `field[j]` for every spin `j` (the O(N)
/// update of an accepted flip). `row` is the source sublattice's row.
///
/// Layout (see [`crate::lattice`]): spin `16·cell + 4f + b`, cell
/// `(x·L + y)·L + z`. For a target FCC offset `f_j` the Bravais displacement
/// has offset `g` and a cell shift `s` fixed by `(f_j, f_i)`, so along `z`
/// both the targets and the row entries advance by 16: two contiguous runs
/// per `(f_j, x, y)` (before and after the periodic wrap).
pub(crate) fn add_source_field(
    field: &mut [f64],
    row: &[f64],
    l: usize,
    source: usize,
    delta: f64,
) {
    let n = field.len();
    assert!(row.len() == n && n == 16 * l * l * l && source < n);
    let p_i = source / 4;
    let f_i = p_i % 4;
    let c_i = p_i / 4;
    let li = l as i64;
    let (xi, yi, zi) = (
        (c_i / (l * l)) as i64,
        ((c_i / l) % l) as i64,
        (c_i % l) as i64,
    );
    for (f_j, shifts) in OFFSET_DIFFERENCE.iter().enumerate() {
        let (g, s) = shifts[f_i];
        let z_off = (s[2] - zi).rem_euclid(li) as usize;
        for x_j in 0..l {
            let dx = (x_j as i64 - xi + s[0]).rem_euclid(li) as usize;
            for y_j in 0..l {
                let dy = (y_j as i64 - yi + s[1]).rem_euclid(li) as usize;
                let target_start = (x_j * l + y_j) * l * 16;
                let row_start = (dx * l + dy) * l * 16;
                // Targets z_j ∈ [0, L − off) see dz = z_j + off; the rest dz = z_j + off − L.
                let head = l - z_off;
                // SAFETY: target_start + 16 L ≤ 16 L³ = n and row_start + 16 L ≤ n
                // because x_j, y_j, dx, dy < L. The runs passed below are
                // sub-ranges of those: [target_start, +16·head) with row
                // [row_start + 16·off, +16·head), and [target_start + 16·head,
                // +16·off) with row [row_start, +16·off); head + off = L.
                // Inside a run, entries 16k + 4f_j + b and 16k + 4g + b with
                // k < count, f_j, g, b < 4 stay below 16·count.
                unsafe {
                    let fp = field.as_mut_ptr().add(target_start + 4 * f_j);
                    let rp = row.as_ptr().add(row_start + 4 * g);
                    add_run(fp, rp.add(16 * z_off), head, delta);
                    if z_off > 0 {
                        // (Guarded so the pointer offset never passes the allocation.)
                        add_run(fp.add(16 * head), rp, z_off, delta);
                    }
                }
            }
        }
    }
}

/// `count` blocks of 4 contiguous f64, stride 16: `f[16k+b] += delta·r[16k+b]`.
///
/// # Safety
/// `f` and `r` must be valid for `16·(count−1) + 4` elements; `f` must not alias `r`.
#[inline(always)]
unsafe fn add_run(f: *mut f64, r: *const f64, count: usize, delta: f64) {
    for k in 0..count {
        let fk = f.add(16 * k);
        let rk = r.add(16 * k);
        for b in 0..4 {
            *fk.add(b) += delta * *rk.add(b);
        }
    }
}

/// Single-flip sampler of a [`CouplingTable`] model with local-field caches.
#[derive(Clone, Debug)]
pub struct LocalFieldSampler<'a> {
    lat: &'a Pyrochlore,
    table: &'a CouplingTable,
    sigma: Vec<i8>,
    field_kelvin: Vec<f64>,
    single_kelvin: [f64; 4],
    temperature_kelvin: f64,
    rule: FlipRule,
    rng: SpinRng,
    energy_kelvin: f64,
    attempts: u64,
    accepted: u64,
    field_updates: u64,
}

impl<'a> LocalFieldSampler<'a> {
    /// A sampler starting from `sigma` (one ±1 per spin) at `temperature_kelvin`
    /// (≤ 0 or NaN means T → 0⁺: only moves with ΔE ≤ 0 are accepted).
    /// Builds the fields in O(N²) through the same update as accepted flips.
    pub fn new(
        lat: &'a Pyrochlore,
        table: &'a CouplingTable,
        temperature_kelvin: f64,
        rule: FlipRule,
        sigma: Vec<i8>,
        rng: SpinRng,
    ) -> Result<Self, SamplerError> {
        if table.cells_per_side() != lat.cells_per_side() {
            return Err(SamplerError::TableMismatch {
                lattice_cells_per_side: lat.cells_per_side(),
                table_cells_per_side: table.cells_per_side(),
            });
        }
        if sigma.len() != lat.spin_count() || sigma.iter().any(|&s| s != 1 && s != -1) {
            return Err(SamplerError::BadConfiguration {
                length: sigma.len(),
                spin_count: lat.spin_count(),
            });
        }
        let n = sigma.len();
        let mut field_kelvin = vec![0.0; n];
        for (j, &s) in sigma.iter().enumerate() {
            add_source_field(
                &mut field_kelvin,
                table.row(j % 4),
                lat.cells_per_side(),
                j,
                s as f64,
            );
        }
        let mut sampler = Self {
            lat,
            table,
            sigma,
            field_kelvin,
            single_kelvin: table.single_spin_kelvin(),
            temperature_kelvin,
            rule,
            rng,
            energy_kelvin: 0.0,
            attempts: 0,
            accepted: 0,
            field_updates: 0,
        };
        sampler.energy_kelvin = sampler.energy_from_fields_kelvin();
        Ok(sampler)
    }

    /// Energy `½ Σ σ_i h_i + Σ z σ + const` from the cached fields (O(N)).
    pub fn energy_from_fields_kelvin(&self) -> f64 {
        let mut pair = 0.0;
        let mut single = 0.0;
        for (i, (&s, &h)) in self.sigma.iter().zip(&self.field_kelvin).enumerate() {
            pair += s as f64 * h;
            single += s as f64 * self.single_kelvin[i % 4];
        }
        0.5 * pair + single + self.table.constant_energy_kelvin()
    }

    /// Re-derive the running energy from the fields (removes rounding drift).
    pub fn resynchronise_energy(&mut self) {
        self.energy_kelvin = self.energy_from_fields_kelvin();
    }

    /// Lattice.
    pub fn lattice(&self) -> &'a Pyrochlore {
        self.lat
    }

    /// Coupling table.
    pub fn table(&self) -> &'a CouplingTable {
        self.table
    }

    /// Pseudospins.
    pub fn sigma(&self) -> &[i8] {
        &self.sigma
    }

    /// Cached pair fields `h_i` (K).
    pub fn fields_kelvin(&self) -> &[f64] {
        &self.field_kelvin
    }

    /// Running total energy (K).
    pub fn energy_kelvin(&self) -> f64 {
        self.energy_kelvin
    }

    /// Temperature (K).
    pub fn temperature_kelvin(&self) -> f64 {
        self.temperature_kelvin
    }

    /// Change the temperature.
    pub fn set_temperature(&mut self, temperature_kelvin: f64) {
        self.temperature_kelvin = temperature_kelvin;
    }

    /// Acceptance rule.
    pub fn rule(&self) -> FlipRule {
        self.rule
    }

    /// Single-flip attempts so far.
    pub fn attempt_count(&self) -> u64 {
        self.attempts
    }

    /// Accepted single flips so far.
    pub fn accepted_count(&self) -> u64 {
        self.accepted
    }

    /// Local-field entries updated so far (N per flipped spin).
    pub fn field_update_count(&self) -> u64 {
        self.field_updates
    }

    /// The random stream (loop moves and tempering draw from it too).
    pub fn rng_mut(&mut self) -> &mut SpinRng {
        &mut self.rng
    }

    /// `ΔE` (K) of flipping `spin`, O(1).
    pub fn flip_cost_kelvin(&self, spin: usize) -> f64 {
        -2.0 * self.sigma[spin] as f64 * (self.field_kelvin[spin] + self.single_kelvin[spin % 4])
    }

    /// `ΔE` (K) of flipping all of `spins` (distinct) together:
    /// `Σ_{i∈F} ΔE_i + 4 Σ_{i<j∈F} K_ij σ_i σ_j` (derived: pairs inside the
    /// set keep their sign). O(|F|²).
    pub fn flip_set_cost_kelvin(&self, spins: &[u32]) -> f64 {
        let mut cost = 0.0;
        for (k, &i) in spins.iter().enumerate() {
            let i = i as usize;
            cost += self.flip_cost_kelvin(i);
            for &j in &spins[k + 1..] {
                let j = j as usize;
                cost +=
                    4.0 * self.table.coupling_kelvin(i, j) * (self.sigma[i] * self.sigma[j]) as f64;
            }
        }
        cost
    }

    /// Flip `spin` unconditionally, updating fields (O(N)); the energy changes by `cost_kelvin`.
    fn apply_flip(&mut self, spin: usize) {
        let delta = -2.0 * self.sigma[spin] as f64;
        self.sigma[spin] = -self.sigma[spin];
        let l = self.lat.cells_per_side();
        add_source_field(
            &mut self.field_kelvin,
            self.table.row(spin % 4),
            l,
            spin,
            delta,
        );
        self.field_updates += self.field_kelvin.len() as u64;
    }

    /// Flip all `spins` (distinct) whose joint cost is `cost_kelvin` (from
    /// [`Self::flip_set_cost_kelvin`]).
    pub fn apply_flip_set(&mut self, spins: &[u32], cost_kelvin: f64) {
        for &s in spins {
            self.apply_flip(s as usize);
        }
        self.energy_kelvin += cost_kelvin;
    }

    /// Acceptance probability of a move costing `delta_e_kelvin` under this rule.
    pub fn acceptance_probability(&self, delta_e_kelvin: f64) -> f64 {
        acceptance(self.rule, delta_e_kelvin, self.temperature_kelvin)
    }

    /// `count` single-flip attempts at random sites; returns the number accepted.
    pub fn run_attempts(&mut self, count: u64) -> u64 {
        let n = self.sigma.len();
        let mut accepted = 0;
        for _ in 0..count {
            let site = self.rng.gen_range(0..n);
            let cost = self.flip_cost_kelvin(site);
            let p = acceptance(self.rule, cost, self.temperature_kelvin);
            let accept = p >= 1.0 || (p > 0.0 && self.rng.gen::<f64>() < p);
            if accept {
                self.apply_flip(site);
                self.energy_kelvin += cost;
                accepted += 1;
            }
        }
        self.attempts += count;
        self.accepted += accepted;
        accepted
    }

    /// N attempts; returns the number accepted.
    pub fn sweep(&mut self) -> u64 {
        self.run_attempts(self.sigma.len() as u64)
    }

    /// `M = Σ σ_i e_{a(i)}` (units of μ).
    pub fn magnetisation(&self) -> [f64; 3] {
        magnetisation(&self.sigma)
    }

    /// Tetrahedron sums `S_t`.
    pub fn tetrahedron_sums(&self) -> Vec<i8> {
        (0..self.lat.tetrahedron_count())
            .map(|t| crate::hamiltonian::tetrahedron_sum(self.lat, &self.sigma, t))
            .collect()
    }

    /// Tetrahedra with |Q| = 1 and |Q| = 2.
    pub fn charge_counts(&self) -> ChargeCounts {
        ChargeCounts::from_tetrahedron_sums(&self.tetrahedron_sums())
    }
}

/// Acceptance probability of `rule` for `ΔE` at `T` (T ≤ 0 or NaN: T → 0⁺).
pub fn acceptance(rule: FlipRule, delta_e_kelvin: f64, temperature_kelvin: f64) -> f64 {
    // NaN counts as cold too.
    let cold = temperature_kelvin.is_nan() || temperature_kelvin <= 0.0;
    match rule {
        FlipRule::Metropolis => {
            if delta_e_kelvin <= 0.0 {
                1.0
            } else if cold {
                0.0
            } else {
                (-delta_e_kelvin / temperature_kelvin).exp()
            }
        }
        FlipRule::HeatBath => {
            if cold {
                if delta_e_kelvin < 0.0 {
                    1.0
                } else if delta_e_kelvin == 0.0 {
                    0.5
                } else {
                    0.0
                }
            } else {
                1.0 / (1.0 + (delta_e_kelvin / temperature_kelvin).exp())
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::ewald::DipolarInteraction;
    use crate::exchange::{CouplingConvention, ExchangeCouplings, ZeemanField};
    use crate::rng::RngStreams;

    fn full_model(lat: &Pyrochlore) -> CouplingTable {
        let mut table = CouplingTable::zero(lat).unwrap();
        ExchangeCouplings {
            j1_kelvin: -3.72,
            j2_kelvin: 0.05,
            j3_kelvin: -0.02,
            j3_prime_kelvin: 0.03,
            convention: CouplingConvention::VectorSpins,
        }
        .add_to(lat, &mut table)
        .unwrap();
        DipolarInteraction {
            d_kelvin: 1.41,
            accuracy: 1e-10,
        }
        .add_to(lat, &mut table)
        .unwrap();
        ZeemanField {
            field_tesla: [0.1, 0.2, -0.05],
            moment_bohr_magnetons: 10.0,
        }
        .add_to(&mut table)
        .unwrap();
        table
    }

    #[test]
    fn cached_fields_and_energy_equal_direct_recomputation() {
        // The incremental engine must reproduce the O(N²) pair sum (derived).
        let lat = Pyrochlore::new(2).unwrap();
        let table = full_model(&lat);
        for rule in [FlipRule::Metropolis, FlipRule::HeatBath] {
            let mut rng = RngStreams::new(5).stream(0);
            let sigma: Vec<i8> = (0..lat.spin_count())
                .map(|_| if rng.gen::<bool>() { 1 } else { -1 })
                .collect();
            let mut s = LocalFieldSampler::new(&lat, &table, 2.0, rule, sigma, rng).unwrap();
            for _ in 0..30 {
                s.sweep();
            }
            assert!(s.accepted_count() > 100);
            let direct = table.direct_energy_kelvin(s.sigma());
            assert!((s.energy_kelvin() - direct).abs() < 1e-9 * direct.abs().max(1.0));
            let fields = table.direct_fields(s.sigma());
            for (a, b) in fields.iter().zip(s.fields_kelvin()) {
                assert!((a - b).abs() < 1e-10);
            }
            // O(1) flip cost equals the trait's O(N) cost.
            use crate::hamiltonian::PseudospinHamiltonian;
            for spin in [0, 7, 100] {
                let c = table.flip_cost_kelvin(&lat, s.sigma(), spin);
                assert!((c - s.flip_cost_kelvin(spin)).abs() < 1e-10);
            }
        }
    }

    #[test]
    fn sampled_energy_matches_exact_enumeration_for_both_rules() {
        // L = 1 (16 spins, 2^16 states) with exchange + dipolar + field: the
        // sampled ⟨E⟩ must agree with the exact Boltzmann average (exact
        // enumeration; 5σ with blocking errors, Flyvbjerg & Petersen 1989).
        let lat = Pyrochlore::new(1).unwrap();
        let mut table = CouplingTable::zero(&lat).unwrap();
        ExchangeCouplings::nearest_neighbour(1.0, CouplingConvention::IsingPseudospins)
            .add_to(&lat, &mut table)
            .unwrap();
        DipolarInteraction {
            d_kelvin: 0.3,
            accuracy: 1e-10,
        }
        .add_to(&lat, &mut table)
        .unwrap();
        ZeemanField {
            field_tesla: [0.3, 0.1, 0.2],
            moment_bohr_magnetons: 1.0,
        }
        .add_to(&mut table)
        .unwrap();
        let t = 1.5;
        let n = lat.spin_count();
        let energies: Vec<f64> = (0..1u32 << n)
            .map(|bits| {
                let sigma: Vec<i8> = (0..n)
                    .map(|k| if bits >> k & 1 == 1 { 1 } else { -1 })
                    .collect();
                table.direct_energy_kelvin(&sigma)
            })
            .collect();
        let e0 = energies.iter().cloned().fold(f64::INFINITY, f64::min);
        let (mut z, mut ez) = (0.0, 0.0);
        for &e in &energies {
            let w = (-(e - e0) / t).exp();
            z += w;
            ez += w * e;
        }
        let exact = ez / z;
        for (k, rule) in [FlipRule::Metropolis, FlipRule::HeatBath]
            .into_iter()
            .enumerate()
        {
            let mut s = LocalFieldSampler::new(
                &lat,
                &table,
                t,
                rule,
                vec![1; n],
                RngStreams::new(9).stream(k as u64),
            )
            .unwrap();
            for _ in 0..1000 {
                s.sweep();
            }
            let series: Vec<f64> = (0..100_000)
                .map(|_| {
                    s.sweep();
                    s.energy_kelvin()
                })
                .collect();
            let b = crate::observe::blocking_analysis(&series).unwrap();
            assert!(
                (b.mean - exact).abs() < 5.0 * b.error(),
                "{rule:?}: {} ± {} vs {exact}",
                b.mean,
                b.error()
            );
        }
    }

    #[test]
    fn field_along_111_gives_kagome_ice_plateau_then_saturation() {
        // Projected magnetisation per spin along [111]: μ/3 on the kagome-ice
        // plateau (apical spins pinned, kagome planes two-in–one-out) and μ/2
        // at saturation (three-in–one-out everywhere) (physics-reference §9,
        // derived). nn ice J_eff = 1 K, μ = 1 μ_B, annealed to 0.05 K.
        let lat = Pyrochlore::new(2).unwrap();
        let n111 = [1.0 / 3f64.sqrt(); 3];
        let per_spin_along_111 = |b_tesla: f64| {
            let mut table = CouplingTable::zero(&lat).unwrap();
            ExchangeCouplings::nearest_neighbour(1.0, CouplingConvention::IsingPseudospins)
                .add_to(&lat, &mut table)
                .unwrap();
            ZeemanField {
                field_tesla: n111.map(|c| c * b_tesla),
                moment_bohr_magnetons: 1.0,
            }
            .add_to(&mut table)
            .unwrap();
            let mut rng = RngStreams::new(17).stream(0);
            let sigma: Vec<i8> = (0..lat.spin_count())
                .map(|_| if rng.gen::<bool>() { 1 } else { -1 })
                .collect();
            let mut s = LocalFieldSampler::new(&lat, &table, 3.0, FlipRule::Metropolis, sigma, rng)
                .unwrap();
            let mut loops = crate::loops::LoopMoves::new(&lat);
            crate::tempering::AnnealingSchedule {
                start_kelvin: 3.0,
                end_kelvin: 0.05,
                steps: 30,
                sweeps_per_step: 40,
                loop_moves_per_sweep: 4,
                shape: crate::tempering::ScheduleShape::Geometric,
            }
            .run(&mut s, &mut loops, &crate::control::Interrupt::new());
            let m = s.magnetisation();
            crate::lattice::dot(m, n111) / lat.spin_count() as f64
        };
        // 1 T: Zeeman 0.67 K per spin, far below the 4 J_eff pair cost; 30 T:
        // a kagome spin gains 2·20·(1/3) K > the 2 J_eff per charge created.
        let plateau = per_spin_along_111(1.0);
        let saturated = per_spin_along_111(30.0);
        assert!((plateau - 1.0 / 3.0).abs() < 1e-9, "plateau {plateau}");
        assert!((saturated - 0.5).abs() < 1e-9, "saturation {saturated}");
    }

    #[test]
    fn bad_inputs_are_errors() {
        let lat = Pyrochlore::new(1).unwrap();
        let lat2 = Pyrochlore::new(2).unwrap();
        let table = CouplingTable::zero(&lat2).unwrap();
        let rng = RngStreams::new(1).stream(0);
        assert!(matches!(
            LocalFieldSampler::new(
                &lat,
                &table,
                1.0,
                FlipRule::Metropolis,
                vec![1; 16],
                rng.clone()
            ),
            Err(SamplerError::TableMismatch { .. })
        ));
        let table1 = CouplingTable::zero(&lat).unwrap();
        assert!(
            LocalFieldSampler::new(&lat, &table1, 1.0, FlipRule::Metropolis, vec![0; 16], rng)
                .is_err()
        );
        assert_eq!(acceptance(FlipRule::Metropolis, 1.0, 0.0), 0.0);
        assert_eq!(acceptance(FlipRule::HeatBath, 0.0, f64::NAN), 0.5);
    }
}
