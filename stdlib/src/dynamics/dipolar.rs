//! Single-spin-flip kinetics of models with long-range couplings (the
//! Ewald-summed dipolar term, plus any exchange shells), in physical time.
//!
//! The flip cost `ΔE_i = −2σ_i (h_i + z_a)` is read from local fields
//! `h_i = Σ_j K_ij σ_j` kept up to date by one O(N) pass per accepted flip
//! ([`crate::engine`]). The costs are not discrete, so the n-fold way of
//! [`super::Kinetics`] does not apply; two exact executions remain:
//!
//! * attempt-based, as for the discrete engine (attempts at random sites
//!   every `τ_min/N`, accepted with `A(ΔE)·τ_min/τ_i`);
//! * **thinning** (Lewis & Shedler, Naval Res. Logist. Q. 26, 403 (1979);
//!   the "rejection-free with bounds" variant of the n-fold way): every spin
//!   sits in a bin with a rate bound `R_b ≥ r_i`; a proposal picks a bin
//!   with probability ∝ (members × bound), a member uniformly, and is
//!   accepted with `r_i/R_b`; the clock advances by an exponential variate
//!   of `Σ_b |b| R_b` at every proposal, accepted or not. This simulates the
//!   same Poisson process exactly. The bins are octaves: energy bins of
//!   width `T ln 2` in `ΔE` (so the acceptance factor is at least ½) times
//!   gate bins (the four six-neighbour classes exactly, or octaves of the
//!   attempt rate for a continuous rate law), so at least one proposal in
//!   four is accepted whatever the temperature (except in the two overflow
//!   bins, `ΔE ≥ 62 T ln 2` and rates below `2^{−47}` of the fastest, whose
//!   weight is negligible), where the attempt-based execution accepts
//!   `~e^{−ΔE/T}` of its attempts.
//!
//! After an accepted flip every spin's cost changes a little, so every spin
//! is re-binned (O(N), the same order as the field update itself).
//!
//! **Transverse-field what-if** ([`DipolarGating::FullDipolarSum`]): the
//! attempt rate of a spin follows a rate law of the magnitude of the full
//! dipolar field normal to its easy axis, kept in three more O(N)-updated
//! field arrays, instead of the six-neighbour classes of [`crate::gating`].

use super::exponential::ExponentialZiggurat;
use super::state::KineticState;
use super::{AcceptanceRule, Execution, FlipEvent, FlipObserver, KineticEngine, KineticsError};
use crate::couplings::CouplingTable;
use crate::engine::add_source_field;
use crate::gating::{AttemptTimes, TransverseRateLaw, GATE_CLASS_COUNT};
use crate::lattice::{dot, easy_axis, Pyrochlore, NEAREST_NEIGHBOUR_DISTANCE};
use crate::rng::SpinRng;
use rand::{Rng, RngCore};

/// Live energy bins (bin 0: `ΔE ≤ 0`; bin `e ≥ 1`: `ΔE ≥ (e−1)·T ln 2`);
/// one more bin holds the spins that cannot move (T = 0, `ΔE > 0`).
const ENERGY_BINS: usize = 64;
/// Live octave bins of a continuous attempt rate; one more for rate 0.
const RATE_OCTAVES: usize = 48;
/// Attempt acceptance below which thinning beats attempts on this engine, times N.
/// Why: an accepted flip costs the O(N) field pass in both executions, but
/// thinning also re-bins every spin after it (measured at L = 4, T = 1 K with
/// `icefield bench kinetics_dipolar_flips`: ≈ 7.6 µs per flip with thinning
/// against ≈ 1.3 µs with attempts, whose rejected attempts cost ≈ 10 ns), so
/// thinning pays once more than ≈ N/1.5 attempts are wasted per flip; the
/// break-even acceptance falls as 1/N.
pub const DIPOLAR_THINNING_BELOW_ACCEPTANCE_TIMES_N: f64 = 1.5;
/// Proposals between exact recomputations of the total bound.
const REFRESH_EVERY: u32 = 4096;

/// How attempt rates depend on a spin's environment.
#[derive(Clone, Debug)]
pub enum DipolarGating<'a> {
    /// By the six-neighbour transverse-field classes ([`crate::gating`]).
    NeighbourClasses(AttemptTimes),
    /// By the magnitude of the full dipolar field normal to the easy axis.
    FullDipolarSum {
        /// Field tables of [`crate::ewald::DipolarInteraction::field_tables`].
        field_tables: &'a [CouplingTable; 3],
        /// The unit of `x`: [`nearest_neighbour_transverse_field_kelvin`].
        unit_kelvin: f64,
        /// Attempt time as a function of `x = |h⊥|/unit`.
        law: TransverseRateLaw,
    },
}

/// Magnitude (K per unit pseudospin) of the bare dipolar field of one
/// nearest neighbour normal to a spin's easy axis: the unit of the
/// continuous gate variable `x`. All nearest-neighbour pairs give the same
/// value by symmetry (`D·|(1 − e e)(e' − 3(e'·r̂)r̂)|`, derived).
pub fn nearest_neighbour_transverse_field_kelvin(lat: &Pyrochlore, d_kelvin: f64) -> f64 {
    let i = 0usize;
    let j = lat.neighbours(i)[0] as usize;
    let r = lat.displacement(lat.position(i), lat.position(j));
    let rhat = r.map(|c| c / NEAREST_NEIGHBOUR_DISTANCE);
    let (ei, ej) = (easy_axis(i % 4), easy_axis(j % 4));
    let b = [0, 1, 2].map(|c| d_kelvin * (ej[c] - 3.0 * dot(ej, rhat) * rhat[c]));
    let along = dot(b, ei);
    let t = [0, 1, 2].map(|c| b[c] - along * ei[c]);
    dot(t, t).sqrt()
}

struct Transverse<'a> {
    tables: &'a [CouplingTable; 3],
    field: [Vec<f64>; 3],
    inverse_unit: f64,
    law: TransverseRateLaw,
}

/// Thinning bins (see the module documentation).
struct Bins {
    members: Vec<Vec<u32>>,
    position: Vec<u32>,
    bin_of: Vec<u32>,
    bound: Vec<f64>,
    total: f64,
    since_refresh: u32,
}

impl Bins {
    #[inline(always)]
    fn move_spin(&mut self, spin: usize, new: usize) {
        let old = self.bin_of[spin] as usize;
        if old == new {
            return;
        }
        let p = self.position[spin] as usize;
        let bucket = &mut self.members[old];
        let last = bucket.pop().expect("a spin is in its bin");
        if last as usize != spin {
            bucket[p] = last;
            self.position[last as usize] = p as u32;
        }
        let target = &mut self.members[new];
        self.position[spin] = target.len() as u32;
        target.push(spin as u32);
        self.bin_of[spin] = new as u32;
        self.total += self.bound[new] - self.bound[old];
    }

    fn exact_total(&self) -> f64 {
        self.members
            .iter()
            .zip(&self.bound)
            .map(|(m, b)| m.len() as f64 * b)
            .sum()
    }
}

/// The kinetic engine for coupling-table models (see the module documentation).
pub struct DipolarKinetics<'a> {
    lat: &'a Pyrochlore,
    table: &'a CouplingTable,
    state: KineticState,
    field_kelvin: Vec<f64>,
    single_kelvin: [f64; 4],
    attempt_times: AttemptTimes,
    transverse: Option<Transverse<'a>>,
    rule: AcceptanceRule,
    temperature_kelvin: f64,
    rng: SpinRng,
    exponential: Box<ExponentialZiggurat>,
    time_seconds: f64,
    flips: u64,
    attempts: u64,
    bins: Option<Bins>,
}

impl<'a> DipolarKinetics<'a> {
    /// An engine for the pair couplings `table` (exchange and dipolar terms;
    /// its single-spin terms are ignored) with single-spin energies
    /// `single_spin_kelvin` (`z_a σ`, e.g. a Zeeman field), from `sigma`.
    #[allow(clippy::too_many_arguments)]
    pub fn new(
        lat: &'a Pyrochlore,
        table: &'a CouplingTable,
        single_spin_kelvin: [f64; 4],
        gating: DipolarGating<'a>,
        sigma: Vec<i8>,
        rule: AcceptanceRule,
        temperature_kelvin: f64,
        rng: SpinRng,
    ) -> Result<Self, KineticsError> {
        if table.cells_per_side() != lat.cells_per_side() {
            return Err(KineticsError::InvalidConfiguration {
                expected_spins: lat.spin_count(),
                given: table.spin_count(),
            });
        }
        let state = KineticState::checked(lat, sigma, temperature_kelvin)?;
        if single_spin_kelvin.iter().any(|z| !z.is_finite()) {
            return Err(KineticsError::InvalidField);
        }
        let l = lat.cells_per_side();
        let sources = |row_of: &dyn Fn(usize) -> &'a [f64]| {
            let mut field = vec![0.0; state.sigma.len()];
            for (j, &s) in state.sigma.iter().enumerate() {
                add_source_field(&mut field, row_of(j % 4), l, j, s as f64);
            }
            field
        };
        let field_kelvin = sources(&|a| table.row(a));
        let (attempt_times, transverse) = match gating {
            DipolarGating::NeighbourClasses(times) => {
                times.validate()?;
                (times, None)
            }
            DipolarGating::FullDipolarSum {
                field_tables,
                unit_kelvin,
                law,
            } => {
                law.validate()?;
                if !(unit_kelvin > 0.0 && unit_kelvin.is_finite())
                    || field_tables.iter().any(|t| t.cells_per_side() != l)
                {
                    return Err(KineticsError::InvalidField);
                }
                let field = [0, 1, 2].map(|c| sources(&|a| field_tables[c].row(a)));
                (
                    AttemptTimes::uniform(1.0 / law.fastest_rate_per_second())?,
                    Some(Transverse {
                        tables: field_tables,
                        field,
                        inverse_unit: 1.0 / unit_kelvin,
                        law,
                    }),
                )
            }
        };
        Ok(Self {
            lat,
            table,
            state,
            field_kelvin,
            single_kelvin: single_spin_kelvin,
            attempt_times,
            transverse,
            rule,
            temperature_kelvin,
            rng,
            exponential: Box::new(ExponentialZiggurat::new()),
            time_seconds: 0.0,
            flips: 0,
            attempts: 0,
            bins: None,
        })
    }

    /// Replace the single-spin energies (switch a field off or on).
    pub fn set_single_spin_kelvin(&mut self, single_spin_kelvin: [f64; 4]) {
        self.single_kelvin = single_spin_kelvin;
        self.bins = None;
    }

    /// The local pair fields `h_i` (K).
    pub fn fields_kelvin(&self) -> &[f64] {
        &self.field_kelvin
    }

    /// Tetrahedron sums `S_t`.
    pub fn tetrahedron_sums(&self) -> &[i8] {
        &self.state.tetrahedron_sums
    }

    /// `ΔE` (K) of flipping `spin` now.
    #[inline(always)]
    pub fn flip_cost_kelvin(&self, spin: usize) -> f64 {
        -2.0 * self.state.sigma[spin] as f64
            * (self.field_kelvin[spin] + self.single_kelvin[spin & 3])
    }

    /// `x = |h⊥|/unit` of `spin` from the full dipolar sum (`None` without
    /// the transverse what-if).
    pub fn transverse_magnitude(&self, spin: usize) -> Option<f64> {
        self.transverse.as_ref().map(|t| transverse_x(t, spin))
    }

    /// Attempt rate (1/s) of `spin` before the energy acceptance.
    #[inline(always)]
    fn attempt_rate(&self, spin: usize) -> f64 {
        match &self.transverse {
            None => {
                1.0 / self.attempt_times.attempt_time_seconds[self.state.gates.class(spin) as usize]
            }
            Some(t) => t.law.rate_per_second(transverse_x(t, spin)),
        }
    }

    fn fastest_attempt_rate(&self) -> f64 {
        1.0 / self.attempt_times.shortest_seconds()
    }

    /// Flip rate (1/s) of `spin` in the current state.
    pub fn flip_rate_per_second(&self, spin: usize) -> f64 {
        self.rule
            .probability(self.flip_cost_kelvin(spin), self.temperature_kelvin)
            * self.attempt_rate(spin)
    }

    fn gate_bins(&self) -> usize {
        match self.transverse {
            None => GATE_CLASS_COUNT,
            Some(_) => RATE_OCTAVES + 1,
        }
    }

    /// Width (K) of the energy bins, `T ln 2`.
    #[inline(always)]
    fn energy_bin_width_kelvin(&self) -> f64 {
        self.temperature_kelvin * std::f64::consts::LN_2
    }

    #[inline(always)]
    fn gate_bin(&self, spin: usize) -> usize {
        match &self.transverse {
            None => self.state.gates.class(spin) as usize,
            Some(t) => {
                let r = t.law.rate_per_second(transverse_x(t, spin));
                if r <= 0.0 {
                    RATE_OCTAVES
                } else {
                    let octave = (self.fastest_attempt_rate() / r).log2().max(0.0);
                    (octave as usize).min(RATE_OCTAVES - 1)
                }
            }
        }
    }

    #[inline(always)]
    fn bin_of(&self, spin: usize) -> usize {
        energy_bin(self.flip_cost_kelvin(spin), self.energy_bin_width_kelvin()) * self.gate_bins()
            + self.gate_bin(spin)
    }

    /// Move every spin whose bin changed (after a flip every cost changes a
    /// little). The six-neighbour case is the common one and runs as one
    /// pass over σ, h and the gate classes.
    fn rebin_all(&self, bins: &mut Bins) {
        let width = self.energy_bin_width_kelvin();
        match &self.transverse {
            None => {
                let z = self.single_kelvin;
                let gates = self.state.gates.as_slice();
                for (j, ((&s, &h), &g)) in self
                    .state
                    .sigma
                    .iter()
                    .zip(&self.field_kelvin)
                    .zip(gates)
                    .enumerate()
                {
                    let cost = -2.0 * s as f64 * (h + z[j & 3]);
                    let b = energy_bin(cost, width) * GATE_CLASS_COUNT + g as usize;
                    bins.move_spin(j, b);
                }
            }
            Some(_) => {
                for j in 0..self.state.sigma.len() {
                    bins.move_spin(j, self.bin_of(j));
                }
            }
        }
    }

    fn bin_bounds(&self) -> Vec<f64> {
        let width = self.temperature_kelvin * std::f64::consts::LN_2;
        let energy: Vec<f64> = (0..=ENERGY_BINS)
            .map(|e| match e {
                0 => 1.0,
                e if e == ENERGY_BINS => 0.0,
                e => self
                    .rule
                    .probability((e - 1) as f64 * width, self.temperature_kelvin),
            })
            .collect();
        let gate: Vec<f64> = match &self.transverse {
            None => self.attempt_times.rates_per_second().to_vec(),
            Some(_) => (0..=RATE_OCTAVES)
                .map(|g| {
                    if g == RATE_OCTAVES {
                        0.0
                    } else {
                        self.fastest_attempt_rate() * 0.5f64.powi(g as i32)
                    }
                })
                .collect(),
        };
        energy
            .iter()
            .flat_map(|&a| gate.iter().map(move |&r| a * r))
            .collect()
    }

    fn build_bins(&mut self) {
        let bound = self.bin_bounds();
        let n = self.state.sigma.len();
        let mut members = vec![Vec::new(); bound.len()];
        let mut position = vec![0u32; n];
        let mut bin_of = vec![0u32; n];
        for spin in 0..n {
            let b = self.bin_of(spin);
            position[spin] = members[b].len() as u32;
            members[b].push(spin as u32);
            bin_of[spin] = b as u32;
        }
        let mut bins = Bins {
            members,
            position,
            bin_of,
            bound,
            total: 0.0,
            since_refresh: 0,
        };
        bins.total = bins.exact_total();
        self.bins = Some(bins);
    }

    /// Flip `spin`, update fields, caches and (if present) bins.
    fn apply_flip<O: FlipObserver>(&mut self, spin: usize, observer: &mut O) {
        let lat = self.lat;
        let gate = self.state.flip(lat, spin);
        let delta = 2.0 * self.state.sigma[spin] as f64;
        let l = lat.cells_per_side();
        add_source_field(
            &mut self.field_kelvin,
            self.table.row(spin & 3),
            l,
            spin,
            delta,
        );
        if let Some(t) = &mut self.transverse {
            for c in 0..3 {
                add_source_field(&mut t.field[c], t.tables[c].row(spin & 3), l, spin, delta);
            }
        }
        self.flips += 1;
        if let Some(mut bins) = self.bins.take() {
            self.rebin_all(&mut bins);
            self.bins = Some(bins);
        }
        observer.on_flip(&FlipEvent {
            time_seconds: self.time_seconds,
            spin,
            gate_class: gate,
            state: self.state.view(lat),
        });
    }

    fn advance_attempts<O: FlipObserver>(
        &mut self,
        t_end: f64,
        max_steps: u64,
        observer: &mut O,
    ) -> bool {
        let n = self.state.sigma.len();
        let fastest = self.fastest_attempt_rate();
        let dt = 1.0 / (fastest * n as f64);
        let remaining = (t_end - self.time_seconds) / dt;
        if remaining.is_nan() || remaining < 1.0 {
            return true;
        }
        let wanted = (remaining * (1.0 + 1e-12)).floor() as u64;
        let count = wanted.min(max_steps);
        let start_time = self.time_seconds;
        for step in 0..count {
            let site = self.rng.gen_range(0..n);
            let u = (self.rng.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64);
            let p = self.flip_rate_per_second(site) / fastest;
            if u < p {
                self.time_seconds = start_time + (step + 1) as f64 * dt;
                self.apply_flip(site, observer);
            }
        }
        self.attempts += count;
        self.time_seconds = start_time + count as f64 * dt;
        count == wanted
    }

    fn advance_thinned<O: FlipObserver>(
        &mut self,
        t_end: f64,
        max_steps: u64,
        observer: &mut O,
    ) -> bool {
        if self.bins.is_none() {
            self.build_bins();
        }
        for _ in 0..max_steps {
            let (total, chosen, spin) = {
                let Some(bins) = self.bins.as_mut() else {
                    return true;
                };
                if bins.since_refresh >= REFRESH_EVERY {
                    bins.total = bins.exact_total();
                    bins.since_refresh = 0;
                }
                bins.since_refresh += 1;
                let total = bins.total;
                if total.is_nan() || total <= 1e-300 {
                    self.time_seconds = self.time_seconds.max(t_end);
                    return true;
                }
                let dt = self.exponential.sample(&mut self.rng) / total;
                if self.time_seconds + dt > t_end {
                    // Memoryless: discarding the partial wait is exact.
                    self.time_seconds = self.time_seconds.max(t_end);
                    return true;
                }
                self.time_seconds += dt;
                let mut target = self.rng.gen::<f64>() * total;
                let mut chosen = usize::MAX;
                for (b, (m, &bound)) in bins.members.iter().zip(&bins.bound).enumerate() {
                    if m.is_empty() || bound <= 0.0 {
                        continue;
                    }
                    chosen = b;
                    let w = m.len() as f64 * bound;
                    if target < w {
                        break;
                    }
                    target -= w;
                }
                if chosen == usize::MAX {
                    bins.total = 0.0;
                    continue;
                }
                let bucket = &bins.members[chosen];
                let spin = bucket[self.rng.gen_range(0..bucket.len())] as usize;
                (total, chosen, spin)
            };
            let _ = total;
            self.attempts += 1;
            let bound = self.bins.as_ref().map_or(0.0, |b| b.bound[chosen]);
            let accept = self.flip_rate_per_second(spin) / bound;
            debug_assert!(accept <= 1.0 + 1e-9, "rate above its bin bound: {accept}");
            if self.rng.gen::<f64>() < accept {
                self.apply_flip(spin, observer);
            }
        }
        false
    }
}

/// Energy bin of a flip costing `cost_kelvin` with bins of `width_kelvin`:
/// 0 for `ΔE ≤ 0`, `1 + ⌊ΔE/width⌋` (capped) above, and the dead bin for
/// `ΔE > 0` at T = 0, where such a flip never happens.
#[inline(always)]
fn energy_bin(cost_kelvin: f64, width_kelvin: f64) -> usize {
    if cost_kelvin <= 0.0 {
        0
    } else if width_kelvin <= 0.0 {
        ENERGY_BINS
    } else {
        (1 + (cost_kelvin / width_kelvin) as usize).min(ENERGY_BINS - 1)
    }
}

#[inline(always)]
fn transverse_x(t: &Transverse<'_>, spin: usize) -> f64 {
    let b = [t.field[0][spin], t.field[1][spin], t.field[2][spin]];
    let e = easy_axis(spin & 3);
    let along = dot(b, e);
    let perp = [
        b[0] - along * e[0],
        b[1] - along * e[1],
        b[2] - along * e[2],
    ];
    dot(perp, perp).sqrt() * t.inverse_unit
}

impl<'a> KineticEngine<'a> for DipolarKinetics<'a> {
    fn advance<O: FlipObserver>(
        &mut self,
        t_end_seconds: f64,
        execution: Execution,
        max_steps: u64,
        observer: &mut O,
    ) -> bool {
        // An accepted flip costs O(N) here (field pass, re-binning), so the
        // caller's step budget between interrupt polls is cut to keep one
        // chunk to milliseconds whatever N (2^22/N steps: ≈ 15 ms at L = 4).
        let max_steps = max_steps.min(((1usize << 22) / self.state.sigma.len()).max(16) as u64);
        match execution {
            Execution::AttemptBased => {
                self.bins = None;
                self.advance_attempts(t_end_seconds, max_steps, observer)
            }
            Execution::RejectionFree => self.advance_thinned(t_end_seconds, max_steps, observer),
        }
    }

    fn time_seconds(&self) -> f64 {
        self.time_seconds
    }

    fn set_time_seconds(&mut self, time_seconds: f64) {
        self.time_seconds = time_seconds;
    }

    fn set_temperature(&mut self, temperature_kelvin: f64) -> Result<(), KineticsError> {
        if !(temperature_kelvin >= 0.0 && temperature_kelvin.is_finite()) {
            return Err(KineticsError::InvalidTemperature(temperature_kelvin));
        }
        self.temperature_kelvin = temperature_kelvin;
        self.bins = None;
        Ok(())
    }

    fn temperature_kelvin(&self) -> f64 {
        self.temperature_kelvin
    }

    fn lattice(&self) -> &'a Pyrochlore {
        self.lat
    }

    fn sigma(&self) -> &[i8] {
        &self.state.sigma
    }

    fn magnetisation(&self) -> [f64; 3] {
        self.state.magnetisation()
    }

    fn monopole_count(&self) -> u64 {
        self.state.monopole_count()
    }

    fn double_charge_count(&self) -> u64 {
        self.state.double_charges
    }

    fn flip_count(&self) -> u64 {
        self.flips
    }

    fn attempt_count(&self) -> u64 {
        self.attempts
    }

    fn attempt_acceptance(&self) -> f64 {
        let n = self.state.sigma.len();
        let total: f64 = (0..n).map(|i| self.flip_rate_per_second(i)).sum();
        (total / (self.fastest_attempt_rate() * n as f64)).min(1.0)
    }

    fn energy_kelvin(&self) -> f64 {
        // ½ Σ σ h + Σ z σ: the pair energy from the cached fields, without the
        // constant self-image term of the Ewald sum.
        self.state
            .sigma
            .iter()
            .zip(&self.field_kelvin)
            .enumerate()
            .map(|(i, (&s, &h))| s as f64 * (0.5 * h + self.single_kelvin[i & 3]))
            .sum()
    }

    fn rejection_free_pays_below(&self) -> f64 {
        DIPOLAR_THINNING_BELOW_ACCEPTANCE_TIMES_N / self.state.sigma.len() as f64
    }
}
