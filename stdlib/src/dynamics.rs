//! Single-spin-flip kinetics in physical time (seconds).
//!
//! Model of time (Jaubert & Holdsworth, Nat. Phys. 5, 258 (2009);
//! physics-reference §5): every spin attempts a flip as a Poisson process
//! with attempt time τ (seconds), and an attempt is accepted with
//! `min(1, e^{−ΔE/T})` (Metropolis) or `1/(1 + e^{ΔE/T})` (Glauber). The
//! attempt time may depend on the spin's environment through its transverse-
//! field class ([`crate::gating`]), so spin `i` flips at rate
//! `r_i = A(ΔE_i, T) / τ(class_i)`.
//!
//! Two executions of the same stochastic process:
//! * [`Execution::AttemptBased`]: attempts at uniformly random sites, each
//!   advancing the clock by `τ_min/N` (N attempts = one shortest attempt time,
//!   the usual "a sweep is τ0" mapping); an attempt on a spin of a slower class
//!   is additionally thinned by `τ_min/τ(class)`, which is exact for Poisson
//!   attempt processes.
//! * [`Execution::RejectionFree`]: the n-fold way of Bortz, Kalos & Lebowitz,
//!   J. Comput. Phys. 17, 10 (1975) (Gillespie's direct method): spins are
//!   grouped into classes by (energy class, gate class); an event class is
//!   drawn with probability ∝ (members × rate), a member uniformly, and the
//!   clock advances by an exponential variate of the total rate. Classes
//!   with equal rates share one bucket ("rate group"; without a field the
//!   nearest-neighbour model has at most 4 distinct Metropolis rates per gate
//!   class, 7 with Glauber), and event selection scans the groups in
//!   descending-rate order, so its cost does not grow with N; each flip moves
//!   the flipped spin, its six neighbours and its further partners
//!   ([`DiscreteFlipEnergy::further_partners`]) between buckets in O(1) each
//!   (swap-remove with an index map).
//!
//! Energetics are pluggable through [`DiscreteFlipEnergy`]: any Hamiltonian
//! whose single-flip energy changes take a finite set of values ("energy
//! classes"), with a cache updated after every accepted flip: the
//! nearest-neighbour model with a uniform Zeeman field
//! ([`NearestNeighbourFlipEnergy`]) and the exchange shells J1–J3'
//! ([`ExchangeFlipEnergy`]). Continuous energy changes (the dipolar term) run
//! on [`DipolarKinetics`] instead, with exact thinning; both engines
//! implement [`KineticEngine`], on which recording and monopole tracking are
//! written once.
//!
//! The engine keeps tetrahedron sums (charges), per-sublattice pseudospin
//! sums (magnetisation in O(1)), charge counts and per-spin gate classes up
//! to date on every flip, so sampling `M(t)` and the monopole count on a
//! uniform time grid costs nothing per flip.

use crate::couplings::CouplingError;
use crate::gating::{AttemptTimes, GateClasses, GatingError, GATE_CLASS_COUNT};
use crate::hamiltonian::NearestNeighbourIce;
use crate::lattice::{easy_axis, LatticeError, Pyrochlore};

use crate::rng::SpinRng;
use rand::{Rng, RngCore};
use serde::{Deserialize, Serialize};
use std::fmt;

mod dipolar;
mod exchange_flips;
mod exponential;
mod protocol;
mod recording;
mod state;
pub use dipolar::{
    nearest_neighbour_transverse_field_kelvin, DipolarGating, DipolarKinetics,
    DIPOLAR_THINNING_BELOW_ACCEPTANCE_TIMES_N,
};
pub use exchange_flips::ExchangeFlipEnergy;
use exponential::ExponentialZiggurat;
pub use protocol::{
    run_kinetics, KineticsModel, KineticsResult, KineticsSettings, LocalFieldTables, Protocol,
    EQUILIBRATION_PROGRESS_LABEL, PREPARATION_PROGRESS_LABEL,
};
pub use recording::{choose_execution, KineticEngine, REJECTION_FREE_BELOW_ACCEPTANCE};
use state::KineticState;

/// μ_B/k_B in K/T (CODATA 2018, physics-reference §2).
pub const BOHR_MAGNETON_KELVIN_PER_TESLA: f64 = 0.671_713_81;

/// Most samples one recording may hold (memory guard for user input).
pub const MAX_SAMPLES: u64 = 50_000_000;

/// Acceptance probability of a proposed flip.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum AcceptanceRule {
    /// `min(1, e^{−ΔE/T})` (Metropolis et al., J. Chem. Phys. 21, 1087 (1953)).
    Metropolis,
    /// `1/(1 + e^{ΔE/T})` (Glauber, J. Math. Phys. 4, 294 (1963)).
    Glauber,
}

impl AcceptanceRule {
    /// Probability of accepting a flip costing `delta_e_kelvin` at
    /// `temperature_kelvin` (T ≤ 0 is read as T → 0⁺).
    pub fn probability(self, delta_e_kelvin: f64, temperature_kelvin: f64) -> f64 {
        let x = if temperature_kelvin > 0.0 {
            delta_e_kelvin / temperature_kelvin
        } else if delta_e_kelvin > 0.0 {
            f64::INFINITY
        } else if delta_e_kelvin < 0.0 {
            f64::NEG_INFINITY
        } else {
            0.0
        };
        match self {
            AcceptanceRule::Metropolis => {
                if x <= 0.0 {
                    1.0
                } else {
                    (-x).exp()
                }
            }
            AcceptanceRule::Glauber => {
                // Written so neither branch overflows.
                if x >= 0.0 {
                    let e = (-x).exp();
                    e / (1.0 + e)
                } else {
                    1.0 / (1.0 + x.exp())
                }
            }
        }
    }
}

/// How the kinetics are executed (both simulate the same process).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum Execution {
    /// Random-site attempts, `τ_min/N` of physical time each.
    AttemptBased,
    /// Bortz–Kalos–Lebowitz n-fold way (J. Comput. Phys. 17, 10 (1975)).
    RejectionFree,
}

/// A uniform magnetic field coupling to the moments as `−μ Σ_i S_i·B`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ZeemanField {
    /// |B| (T).
    pub field_tesla: f64,
    /// Direction of B (any non-zero length; normalised on use).
    pub direction: [f64; 3],
    /// Moment μ per spin in Bohr magnetons (about 10 for Dy and Ho titanates,
    /// physics-reference §2).
    pub moment_bohr_magnetons: f64,
}

impl ZeemanField {
    /// Unit vector along the field, `None` for a zero or non-finite direction.
    pub fn unit_direction(&self) -> Option<[f64; 3]> {
        unit(self.direction)
    }

    /// `μB (e_a·n̂)` (K) for the four sublattices: the Zeeman energy of a spin
    /// is `−σ` times this, so a flip costs `+2σ` times it.
    pub fn sublattice_energy_kelvin(&self) -> Option<[f64; 4]> {
        let n = self.unit_direction()?;
        if !self.field_tesla.is_finite() || !self.moment_bohr_magnetons.is_finite() {
            return None;
        }
        let mu_b = self.moment_bohr_magnetons * BOHR_MAGNETON_KELVIN_PER_TESLA * self.field_tesla;
        Some([0, 1, 2, 3].map(|a| mu_b * crate::lattice::dot(easy_axis(a), n)))
    }

    /// Single-spin energies `z_a` (K) of an optional field in the convention
    /// of the coupling tables (energy `z_a σ`, i.e. minus
    /// [`Self::sublattice_energy_kelvin`]); zeros without a field.
    pub fn single_spin_kelvin(field: Option<&Self>) -> Result<[f64; 4], KineticsError> {
        match field {
            None => Ok([0.0; 4]),
            Some(f) => Ok(f
                .sublattice_energy_kelvin()
                .ok_or(KineticsError::InvalidField)?
                .map(|e| -e)),
        }
    }
}

fn unit(v: [f64; 3]) -> Option<[f64; 3]> {
    let n = crate::lattice::dot(v, v).sqrt();
    if n.is_finite() && n > 0.0 {
        Some(v.map(|c| c / n))
    } else {
        None
    }
}

/// Read-only view of the engine's spin state passed to energetics.
#[derive(Clone, Copy, Debug)]
pub struct SpinView<'s> {
    /// The lattice.
    pub lattice: &'s Pyrochlore,
    /// Pseudospins ±1.
    pub sigma: &'s [i8],
    /// `S_t = Σ_{i∈t} σ_i` per tetrahedron.
    pub tetrahedron_sums: &'s [i8],
}

/// Energetics the kinetic engine can drive: flip energy changes that take a
/// finite set of values ("energy classes"), plus a cache hook.
///
/// Contract: `energy_class` returns a value below `energy_class_count`; the
/// class of a spin changes only when the spin itself, one of its six nearest
/// neighbours or one of its [`further_partners`](Self::further_partners)
/// flips.
pub trait DiscreteFlipEnergy {
    /// Number of energy classes.
    fn energy_class_count(&self) -> usize;
    /// Energy class of flipping `spin` in `state`.
    fn energy_class(&self, state: &SpinView<'_>, spin: usize) -> usize;
    /// ΔE (K) of a flip in energy class `class`.
    fn energy_class_cost_kelvin(&self, class: usize) -> f64;
    /// Called after `spin` flipped (`state` is the state after the flip), to
    /// update caches such as local fields.
    fn after_flip(&mut self, state: &SpinView<'_>, spin: usize);
    /// Build caches for `state` (called when the engine starts or the
    /// energetics are replaced).
    fn attach(&mut self, _state: &SpinView<'_>) {}
    /// Energy (K) of `state`, without constant terms; O(N), for sampling.
    fn energy_kelvin(&self, state: &SpinView<'_>) -> f64;
    /// Spins beyond the six nearest neighbours whose class changes when
    /// `spin` flips (none for the nearest-neighbour model).
    #[inline(always)]
    fn further_partners(&self, _spin: usize) -> &[u32] {
        &[]
    }
}

/// `H = J_eff Σ_⟨ij⟩ σ_iσ_j − Σ_i σ_i μB(e_a·n̂)` (physics-reference §2).
///
/// Energy class `((k + 6)/2)·8 + 2a + [σ = +1]` with `k = σ_i h_i`,
/// `h_i = Σ_{j∈nn(i)} σ_j` (even, −6..=6), `a` the sublattice:
/// `ΔE = −2 J_eff k + 2σ μB(e_a·n̂)`; 56 classes.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct NearestNeighbourFlipEnergy {
    /// J_eff (K).
    pub j_eff_kelvin: f64,
    /// `μB (e_a·n̂)` (K) per sublattice (zeros without a field).
    pub zeeman_kelvin: [f64; 4],
}

impl NearestNeighbourFlipEnergy {
    /// From the model and an optional field; `None` for an unusable field
    /// (zero direction, non-finite values).
    pub fn new(model: &NearestNeighbourIce, field: Option<&ZeemanField>) -> Option<Self> {
        let zeeman_kelvin = match field {
            None => [0.0; 4],
            Some(f) => f.sublattice_energy_kelvin()?,
        };
        Some(Self {
            j_eff_kelvin: model.j_eff_kelvin,
            zeeman_kelvin,
        })
    }
}

impl DiscreteFlipEnergy for NearestNeighbourFlipEnergy {
    fn energy_class_count(&self) -> usize {
        56
    }

    #[inline(always)]
    fn energy_class(&self, state: &SpinView<'_>, spin: usize) -> usize {
        let s = state.sigma[spin];
        let up = state.tetrahedron_sums[spin >> 2];
        let down = state.tetrahedron_sums[state.lattice.down_tetrahedra()[spin] as usize];
        // k = σ h with h = S_up + S_down − 2σ ∈ {−6, …, 6}.
        let k = (s * (up + down - 2 * s)) as i32;
        (((k + 6) >> 1) as usize) * 8 + (spin & 3) * 2 + (s > 0) as usize
    }

    fn energy_class_cost_kelvin(&self, class: usize) -> f64 {
        let k = (class / 8) as f64 * 2.0 - 6.0;
        let a = (class % 8) / 2;
        let s = if class % 2 == 1 { 1.0 } else { -1.0 };
        -2.0 * self.j_eff_kelvin * k + 2.0 * s * self.zeeman_kelvin[a]
    }

    #[inline(always)]
    fn after_flip(&mut self, _state: &SpinView<'_>, _spin: usize) {}

    fn energy_kelvin(&self, state: &SpinView<'_>) -> f64 {
        // Σ_⟨ij⟩ σσ over the bonds of one tetrahedron is (S_t² − 4)/2 (derived);
        // every bond lies in exactly one tetrahedron.
        let pairs: f64 = state
            .tetrahedron_sums
            .iter()
            .map(|&s| ((s as i32 * s as i32 - 4) / 2) as f64)
            .sum();
        let zeeman: f64 = state
            .sigma
            .iter()
            .enumerate()
            .map(|(i, &s)| -(s as f64) * self.zeeman_kelvin[i & 3])
            .sum();
        self.j_eff_kelvin * pairs + zeeman
    }
}

/// What an observer sees of one flip (the state is the one after it).
#[derive(Clone, Copy, Debug)]
pub struct FlipEvent<'s> {
    /// Physical time of the flip (s).
    pub time_seconds: f64,
    /// The spin that flipped.
    pub spin: usize,
    /// Gate class of the spin when it flipped.
    pub gate_class: u8,
    /// State after the flip.
    pub state: SpinView<'s>,
}

/// Receives every flip (static dispatch; `()` ignores them).
pub trait FlipObserver {
    /// Called once per flip, after the state is updated.
    fn on_flip(&mut self, event: &FlipEvent<'_>);
}

impl FlipObserver for () {
    #[inline(always)]
    fn on_flip(&mut self, _event: &FlipEvent<'_>) {}
}

/// Why a kinetics run could not start.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub enum KineticsError {
    /// The lattice could not be built.
    Lattice(LatticeError),
    /// The attempt-time table is unusable.
    Gating(GatingError),
    /// Configuration length or entries are wrong.
    InvalidConfiguration {
        /// Expected number of spins.
        expected_spins: usize,
        /// Entries given.
        given: usize,
    },
    /// A temperature that is not a finite number ≥ 0.
    InvalidTemperature(f64),
    /// A duration that is not a finite number ≥ 0.
    InvalidDuration(f64),
    /// A sample interval that is not a finite positive number.
    InvalidSampleInterval(f64),
    /// The grid would hold more than [`MAX_SAMPLES`] samples.
    TooManySamples {
        /// Samples requested.
        samples: u64,
    },
    /// The field is unusable (zero direction or non-finite values).
    InvalidField,
    /// A field quench needs a field to switch off.
    MissingField,
    /// A projection axis of zero length or non-finite.
    InvalidProjectionAxis,
    /// The couplings are unusable (non-finite, lattice too small for a
    /// shell, table too large).
    Couplings(CouplingError),
}

impl fmt::Display for KineticsError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            KineticsError::Lattice(e) => write!(f, "{e}"),
            KineticsError::Gating(e) => write!(f, "{e}"),
            KineticsError::InvalidConfiguration {
                expected_spins,
                given,
            } => write!(
                f,
                "a configuration needs {expected_spins} pseudospins, each +1 or −1 (got {given} entries)"
            ),
            KineticsError::InvalidTemperature(t) => {
                write!(f, "the temperature must be a finite number of kelvin ≥ 0 (got {t})")
            }
            KineticsError::InvalidDuration(t) => {
                write!(f, "the duration must be a finite number of seconds ≥ 0 (got {t})")
            }
            KineticsError::InvalidSampleInterval(t) => write!(
                f,
                "the sample interval must be a positive finite number of seconds (got {t})"
            ),
            KineticsError::TooManySamples { samples } => write!(
                f,
                "the time grid would hold {samples} samples, more than {MAX_SAMPLES}; \
                 use a longer sample interval or a shorter run"
            ),
            KineticsError::InvalidField => write!(
                f,
                "the field needs a non-zero direction and finite strength and moment"
            ),
            KineticsError::MissingField => {
                write!(f, "a field quench needs a field to switch off; give one")
            }
            KineticsError::InvalidProjectionAxis => {
                write!(f, "the projection axis needs a non-zero finite direction")
            }
            KineticsError::Couplings(e) => write!(f, "{e}"),
        }
    }
}

impl std::error::Error for KineticsError {}

impl From<GatingError> for KineticsError {
    fn from(e: GatingError) -> Self {
        KineticsError::Gating(e)
    }
}

/// Class buckets of the rejection-free execution.
struct Buckets {
    /// Spins of each rate group.
    members: Vec<Vec<u32>>,
    /// Index of each spin inside its bucket.
    position: Vec<u32>,
    /// Rate group of each spin.
    class_of: Vec<u32>,
    /// Σ_c |members_c| · rate_c (1/s), maintained incrementally and refreshed
    /// exactly every few thousand events to stop rounding drift.
    total_rate: f64,
    events_since_refresh: u32,
}

/// The kinetic engine (see the module documentation).
pub struct Kinetics<'a, E: DiscreteFlipEnergy> {
    lat: &'a Pyrochlore,
    energy: E,
    /// Spins, charges, magnetisation and gate classes.
    state: KineticState,
    /// Exponential variates for the rejection-free clock.
    exponential: Box<ExponentialZiggurat>,
    rule: AcceptanceRule,
    temperature_kelvin: f64,
    attempt_times: AttemptTimes,
    /// Flip rate (1/s) of class `energy_class · 4 + gate_class`.
    class_rate: Vec<f64>,
    /// `class_rate · τ_min`: acceptance of one attempt-based step.
    attempt_probability: Vec<f64>,
    /// Rate group of each class: classes with equal rates share a group, so
    /// the rejection-free scan runs over the few distinct rates only.
    class_group: Vec<u32>,
    /// Rate (1/s) of each group, in descending order.
    group_rate: Vec<f64>,
    shortest_attempt_seconds: f64,
    time_seconds: f64,
    rng: SpinRng,
    attempts: u64,
    flips: u64,
    buckets: Option<Buckets>,
}

impl<'a, E: DiscreteFlipEnergy> Kinetics<'a, E> {
    /// An engine at `temperature_kelvin` from configuration `sigma`.
    pub fn new(
        lat: &'a Pyrochlore,
        energy: E,
        sigma: Vec<i8>,
        rule: AcceptanceRule,
        temperature_kelvin: f64,
        attempt_times: AttemptTimes,
        rng: SpinRng,
    ) -> Result<Self, KineticsError> {
        let state = KineticState::checked(lat, sigma, temperature_kelvin)?;
        attempt_times.validate()?;
        let mut engine = Self {
            lat,
            state,
            energy,
            exponential: Box::new(ExponentialZiggurat::new()),
            rule,
            temperature_kelvin,
            attempt_times,
            class_rate: Vec::new(),
            attempt_probability: Vec::new(),
            class_group: Vec::new(),
            group_rate: Vec::new(),
            shortest_attempt_seconds: 1.0,
            time_seconds: 0.0,
            rng,
            attempts: 0,
            flips: 0,
            buckets: None,
        };
        let view = engine.state.view(lat);
        engine.energy.attach(&view);
        engine.rebuild_rates();
        Ok(engine)
    }

    /// Recompute the per-class rate tables (after T, rule, times or energetics change).
    fn rebuild_rates(&mut self) {
        let gate_rates = self.attempt_times.rates_per_second();
        let classes = self.energy.energy_class_count() * GATE_CLASS_COUNT;
        self.class_rate = (0..classes)
            .map(|c| {
                let cost = self.energy.energy_class_cost_kelvin(c / GATE_CLASS_COUNT);
                gate_rates[c % GATE_CLASS_COUNT]
                    * self.rule.probability(cost, self.temperature_kelvin)
            })
            .collect();
        self.shortest_attempt_seconds = self.attempt_times.shortest_seconds();
        let tau = self.shortest_attempt_seconds;
        self.attempt_probability = self.class_rate.iter().map(|r| (r * tau).min(1.0)).collect();
        // Distinct rates (−0 and +0 alike), descending.
        let mut rates: Vec<f64> = self.class_rate.iter().map(|&r| r + 0.0).collect();
        rates.sort_by(|a, b| b.total_cmp(a));
        rates.dedup();
        self.class_group = self
            .class_rate
            .iter()
            .map(|&r| rates.partition_point(|&x| x > r + 0.0) as u32)
            .collect();
        self.group_rate = rates;
        if self.buckets.is_some() {
            // The grouping may have changed: regroup every spin, O(N).
            self.build_buckets();
        }
    }

    /// Change the attempt-time table.
    pub fn set_attempt_times(&mut self, attempt_times: AttemptTimes) -> Result<(), KineticsError> {
        attempt_times.validate()?;
        self.attempt_times = attempt_times;
        self.rebuild_rates();
        Ok(())
    }

    /// Replace the energetics (e.g. switch a field off); classes and rates
    /// are recomputed.
    pub fn set_energy(&mut self, energy: E) {
        self.energy = energy;
        let view = self.state.view(self.lat);
        self.energy.attach(&view);
        self.buckets = None;
        self.rebuild_rates();
    }

    /// The energetics.
    pub fn energy(&self) -> &E {
        &self.energy
    }

    /// Tetrahedron sums `S_t` (`Q_t = ±S_t/2`).
    pub fn tetrahedron_sums(&self) -> &[i8] {
        &self.state.tetrahedron_sums
    }

    /// Per-spin gate classes.
    pub fn gate_classes(&self) -> &GateClasses {
        &self.state.gates
    }

    /// `ΔE` (K) of flipping `spin` now, from its energy class.
    pub fn flip_cost_kelvin(&self, spin: usize) -> f64 {
        let view = self.view();
        self.energy
            .energy_class_cost_kelvin(self.energy.energy_class(&view, spin))
    }

    /// Flip rate (1/s) of `spin` in the current state.
    pub fn flip_rate_per_second(&self, spin: usize) -> f64 {
        let view = self.view();
        let class = self.energy.energy_class(&view, spin) * GATE_CLASS_COUNT
            + self.state.gates.class(spin) as usize;
        self.class_rate[class]
    }

    fn view(&self) -> SpinView<'_> {
        self.state.view(self.lat)
    }

    /// Flip `spin` and update every cache; returns its gate class.
    #[inline(always)]
    fn apply_flip<O: FlipObserver>(&mut self, spin: usize, observer: &mut O) -> u8 {
        let lat = self.lat;
        let gate = self.state.flip(lat, spin);
        let view = self.state.view(lat);
        self.energy.after_flip(&view, spin);
        self.flips += 1;
        observer.on_flip(&FlipEvent {
            time_seconds: self.time_seconds,
            spin,
            gate_class: gate,
            state: view,
        });
        gate
    }

    fn advance_attempts<O: FlipObserver>(
        &mut self,
        t_end: f64,
        max_steps: u64,
        observer: &mut O,
    ) -> bool {
        let n = self.state.sigma.len();
        let dt = self.shortest_attempt_seconds / n as f64;
        let remaining = (t_end - self.time_seconds) / dt;
        // NaN (no time left to compare) counts as reached.
        if remaining.is_nan() || remaining < 1.0 {
            return true;
        }
        // A tiny tolerance so that a grid point exactly k·dt away is reached.
        let wanted = (remaining * (1.0 + 1e-12)).floor() as u64;
        let count = wanted.min(max_steps);
        let n64 = n as u64;
        let reject_below = ((1u64 << 32) % n64) as u32;
        let start_time = self.time_seconds;
        for step in 0..count {
            let bits = self.rng.next_u64();
            // Lemire, ACM Trans. Model. Comput. Simul. 29, 3 (2019): exactly
            // uniform site by multiply-shift with rejection.
            let mut product = (bits & 0xffff_ffff) * n64;
            while (product as u32) < reject_below {
                product = (self.rng.next_u64() >> 32) * n64;
            }
            let site = (product >> 32) as usize;
            let u = (self.rng.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64);
            let view = self.view();
            // SAFETY: site < N = gates.len().
            let gate = unsafe { *self.state.gates.as_slice().get_unchecked(site) } as usize;
            let class = self.energy.energy_class(&view, site) * GATE_CLASS_COUNT + gate;
            let p = self.attempt_probability[class];
            if u < p {
                // Time of this attempt, for observers.
                self.time_seconds = start_time + (step + 1) as f64 * dt;
                self.apply_flip(site, observer);
            }
        }
        self.attempts += count;
        self.time_seconds = start_time + count as f64 * dt;
        count == wanted
    }

    fn build_buckets(&mut self) {
        let groups = self.group_rate.len();
        let n = self.state.sigma.len();
        let mut members: Vec<Vec<u32>> = vec![Vec::new(); groups];
        let mut position = vec![0u32; n];
        let mut class_of = vec![0u32; n];
        {
            let view = self.view();
            for spin in 0..n {
                let class = self.energy.energy_class(&view, spin) * GATE_CLASS_COUNT
                    + self.state.gates.class(spin) as usize;
                let c = self.class_group[class] as usize;
                position[spin] = members[c].len() as u32;
                members[c].push(spin as u32);
                class_of[spin] = c as u32;
            }
        }
        // Head room so that buckets rarely grow (and reallocate) later.
        for m in &mut members {
            let extra = (m.len() + 64).min(n - m.len().min(n));
            m.reserve(extra);
        }
        let total_rate = exact_total(&members, &self.group_rate);
        self.buckets = Some(Buckets {
            members,
            position,
            class_of,
            total_rate,
            events_since_refresh: 0,
        });
    }

    fn advance_events<O: FlipObserver>(
        &mut self,
        t_end: f64,
        max_steps: u64,
        observer: &mut O,
    ) -> bool {
        let Some(mut b) = self.buckets.take() else {
            return true;
        };
        let mut reached = false;
        for _ in 0..max_steps {
            if b.events_since_refresh >= 4096 {
                b.total_rate = exact_total(&b.members, &self.group_rate);
                b.events_since_refresh = 0;
            }
            let total = b.total_rate;
            if total.is_nan() || total <= 1e-300 {
                // Nothing can move: the state is frozen until t_end.
                self.time_seconds = self.time_seconds.max(t_end);
                reached = true;
                break;
            }
            let dt = self.exponential.sample(&mut self.rng) / total;
            if self.time_seconds + dt > t_end {
                // Memoryless: discarding the partial wait is exact.
                self.time_seconds = self.time_seconds.max(t_end);
                reached = true;
                break;
            }
            self.time_seconds += dt;
            let mut target = self.rng.gen::<f64>() * total;
            let mut chosen = usize::MAX;
            let mut last_nonempty = usize::MAX;
            for (c, (m, &rate)) in b.members.iter().zip(&self.group_rate).enumerate() {
                let len = m.len();
                if len == 0 || rate <= 0.0 {
                    continue;
                }
                last_nonempty = c;
                let w = len as f64 * rate;
                if target < w {
                    chosen = c;
                    break;
                }
                target -= w;
            }
            if chosen == usize::MAX {
                // Rounding of the maintained total: fall back to the last
                // class with weight (exactness is restored at the next refresh).
                chosen = last_nonempty;
                if chosen == usize::MAX {
                    b.total_rate = 0.0;
                    continue;
                }
            }
            let bucket = &b.members[chosen];
            let spin = bucket[uniform_index(&mut self.rng, bucket.len())] as usize;
            self.apply_flip(spin, observer);
            // Re-class the flipped spin and its six neighbours.
            let lat = self.lat;
            let nb = lat.neighbours(spin);
            let update = [spin as u32, nb[0], nb[1], nb[2], nb[3], nb[4], nb[5]];
            let view = self.state.view(lat);
            // Two passes: the seven new groups are independent loads and
            // can be computed in parallel; the bucket moves, which chain
            // through shared bucket lengths, follow.
            let mut groups = [0u32; 7];
            for (g, &j) in groups.iter_mut().zip(&update) {
                let j = j as usize;
                // SAFETY: j < N = gates.len().
                let gate = unsafe { *self.state.gates.as_slice().get_unchecked(j) } as usize;
                let class = self.energy.energy_class(&view, j) * GATE_CLASS_COUNT + gate;
                // SAFETY: class < class_group.len() by the DiscreteFlipEnergy contract.
                debug_assert!(class < self.class_group.len());
                *g = unsafe { *self.class_group.get_unchecked(class) };
            }
            for (&g, &j) in groups.iter().zip(&update) {
                b.move_spin(j as usize, g as usize, &self.group_rate);
            }
            for &j in self.energy.further_partners(spin) {
                let j = j as usize;
                let class = self.energy.energy_class(&view, j) * GATE_CLASS_COUNT
                    + self.state.gates.class(j) as usize;
                b.move_spin(j, self.class_group[class] as usize, &self.group_rate);
            }
            b.events_since_refresh += 1;
        }
        self.buckets = Some(b);
        reached
    }
}

impl<'a, E: DiscreteFlipEnergy> KineticEngine<'a> for Kinetics<'a, E> {
    fn advance<O: FlipObserver>(
        &mut self,
        t_end_seconds: f64,
        execution: Execution,
        max_steps: u64,
        observer: &mut O,
    ) -> bool {
        match execution {
            Execution::AttemptBased => {
                self.buckets = None;
                self.advance_attempts(t_end_seconds, max_steps, observer)
            }
            Execution::RejectionFree => {
                if self.buckets.is_none() {
                    self.build_buckets();
                }
                self.advance_events(t_end_seconds, max_steps, observer)
            }
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
        self.rebuild_rates();
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
        (total * self.shortest_attempt_seconds / n as f64).min(1.0)
    }

    fn energy_kelvin(&self) -> f64 {
        self.energy.energy_kelvin(&self.state.view(self.lat))
    }
}

impl Buckets {
    #[inline(always)]
    fn move_spin(&mut self, spin: usize, new: usize, rate: &[f64]) {
        // SAFETY: spin < N (= position.len() = class_of.len()); classes are
        // < rate.len() = members.len() by the DiscreteFlipEnergy contract,
        // checked in debug builds.
        debug_assert!(new < self.members.len());
        // Branch-free: whether the group changes is data-dependent, so the
        // spin is always swap-removed and pushed; with old == new it just
        // moves to the end of its bucket.
        unsafe {
            let old = *self.class_of.get_unchecked(spin) as usize;
            let p = *self.position.get_unchecked(spin) as usize;
            let bucket = self.members.get_unchecked_mut(old);
            // The spin is in its bucket, so it is not empty.
            debug_assert!(p < bucket.len());
            let last_index = bucket.len() - 1;
            let last = *bucket.get_unchecked(last_index);
            *bucket.get_unchecked_mut(p) = last;
            *self.position.get_unchecked_mut(last as usize) = p as u32;
            bucket.set_len(last_index);
            let target = self.members.get_unchecked_mut(new);
            *self.position.get_unchecked_mut(spin) = target.len() as u32;
            target.push(spin as u32);
            *self.class_of.get_unchecked_mut(spin) = new as u32;
            self.total_rate += *rate.get_unchecked(new) - *rate.get_unchecked(old);
        }
    }
}

/// Exactly uniform index in `0..len` (`len ≥ 1`) by Lemire's multiply-shift
/// with rejection (ACM Trans. Model. Comput. Simul. 29, 3 (2019)).
#[inline(always)]
fn uniform_index(rng: &mut SpinRng, len: usize) -> usize {
    let n = len as u64;
    let mut m = rng.next_u64() as u128 * n as u128;
    if (m as u64) < n {
        let threshold = n.wrapping_neg() % n;
        while (m as u64) < threshold {
            m = rng.next_u64() as u128 * n as u128;
        }
    }
    (m >> 64) as usize
}

fn exact_total(members: &[Vec<u32>], rate: &[f64]) -> f64 {
    members
        .iter()
        .zip(rate)
        .map(|(m, r)| m.len() as f64 * r)
        .sum()
}

fn sample_count(duration_seconds: f64, interval_seconds: f64) -> Result<u64, KineticsError> {
    if !(duration_seconds >= 0.0 && duration_seconds.is_finite()) {
        return Err(KineticsError::InvalidDuration(duration_seconds));
    }
    if !(interval_seconds > 0.0 && interval_seconds.is_finite()) {
        return Err(KineticsError::InvalidSampleInterval(interval_seconds));
    }
    let steps = (duration_seconds / interval_seconds * (1.0 + 1e-12)).floor();
    if steps + 1.0 > MAX_SAMPLES as f64 {
        return Err(KineticsError::TooManySamples {
            samples: (steps + 1.0).min(u64::MAX as f64) as u64,
        });
    }
    Ok(steps as u64 + 1)
}

/// Observables on a uniform physical-time grid.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Trajectory {
    /// Execution used.
    pub execution: Execution,
    /// Temperature during the recording (K).
    pub temperature_kelvin: f64,
    /// Sample times (s) from the start of the recording.
    pub times_seconds: Vec<f64>,
    /// `M = Σ σ_i e_a` (units of μ) per sample.
    pub magnetisation: Vec<[f64; 3]>,
    /// Unit axis of the projection.
    pub projection_axis: [f64; 3],
    /// `M·n̂` (units of μ) per sample.
    pub magnetisation_projection: Vec<f64>,
    /// Σ_t |Q_t| per sample.
    pub monopole_count: Vec<u64>,
    /// Tetrahedra with |Q| = 2 per sample.
    pub double_charge_count: Vec<u64>,
    /// Energy (K, without constant terms: the self-image part of an Ewald
    /// sum) per sample, of the Hamiltonian running at that time (after a
    /// quench: without the field).
    #[serde(default)]
    pub energy_kelvin: Vec<f64>,
    /// N.
    pub spin_count: usize,
    /// Flips during the recording.
    pub flips: u64,
    /// Attempts (attempt-based) or thinning proposals (rejection-free on the
    /// dipolar engine) during the recording; 0 for the n-fold way.
    pub attempts: u64,
    /// Stopped early on interrupt (the samples so far are kept).
    pub interrupted: bool,
}

/// Normalised autocorrelation `⟨M(0)·M(t)⟩/⟨M·M⟩` of the magnetisation
/// vector (mean removed per component) over all time origins, for lags
/// `0..=max_lag` samples. A plain O(n·lags) estimator used by the tests and
/// monopole statistics here; FFT-based estimators live in the spectra module.
pub fn magnetisation_autocorrelation(trajectory: &Trajectory, max_lag: usize) -> Vec<f64> {
    let m = &trajectory.magnetisation;
    let n = m.len();
    if n == 0 {
        return Vec::new();
    }
    let mut mean = [0.0; 3];
    for v in m {
        for c in 0..3 {
            mean[c] += v[c] / n as f64;
        }
    }
    let centred: Vec<[f64; 3]> = m
        .iter()
        .map(|v| [v[0] - mean[0], v[1] - mean[1], v[2] - mean[2]])
        .collect();
    let lag_sum = |lag: usize| -> f64 {
        centred[..n - lag]
            .iter()
            .zip(&centred[lag..])
            .map(|(a, b)| crate::lattice::dot(*a, *b))
            .sum::<f64>()
            / (n - lag) as f64
    };
    let c0 = lag_sum(0);
    if c0 <= 0.0 {
        return vec![1.0; max_lag.min(n - 1) + 1];
    }
    (0..=max_lag.min(n - 1)).map(|k| lag_sum(k) / c0).collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::control::{ignore_progress, Interrupt};
    use crate::metropolis::{initial_configuration, NearestNeighbourMetropolis, Start};
    use crate::observe::integrated_autocorrelation_time;
    use crate::rng::RngStreams;

    fn free_spin_engine(
        lat: &Pyrochlore,
        rule: AcceptanceRule,
        seed: u64,
    ) -> Kinetics<'_, NearestNeighbourFlipEnergy> {
        let energy = NearestNeighbourFlipEnergy::new(&NearestNeighbourIce::new(0.0), None).unwrap();
        let mut rng = RngStreams::new(seed).stream(0);
        let sigma = initial_configuration(lat, Start::Random, &mut rng);
        Kinetics::new(
            lat,
            energy,
            sigma,
            rule,
            1.0,
            AttemptTimes::uniform(1e-3).unwrap(),
            rng,
        )
        .unwrap()
    }

    #[test]
    fn acceptance_rules() {
        // Metropolis min(1, e^{−x}); Glauber 1/(1+e^{x}) (physics-reference §5).
        let m = AcceptanceRule::Metropolis;
        let g = AcceptanceRule::Glauber;
        assert_eq!(m.probability(-1.0, 1.0), 1.0);
        assert!((m.probability(2.0, 1.0) - (-2.0f64).exp()).abs() < 1e-15);
        assert!((g.probability(0.0, 1.0) - 0.5).abs() < 1e-15);
        assert!((g.probability(2.0, 1.0) - 1.0 / (1.0 + 2.0f64.exp())).abs() < 1e-15);
        assert!((g.probability(-2.0, 1.0) - 1.0 / (1.0 + (-2.0f64).exp())).abs() < 1e-15);
        assert_eq!(g.probability(1e6, 1.0), 0.0);
        assert_eq!(m.probability(1.0, 0.0), 0.0);
        assert_eq!(g.probability(0.0, 0.0), 0.5);
    }

    #[test]
    fn energy_classes_reproduce_flip_costs_with_a_field() {
        let lat = Pyrochlore::new(2).unwrap();
        let model = NearestNeighbourIce::new(1.3);
        let field = ZeemanField {
            field_tesla: 0.7,
            direction: [1.0, 1.0, 0.0],
            moment_bohr_magnetons: 10.0,
        };
        let energy = NearestNeighbourFlipEnergy::new(&model, Some(&field)).unwrap();
        let mut rng = RngStreams::new(3).stream(0);
        let sigma = initial_configuration(&lat, Start::Random, &mut rng);
        let sums: Vec<i8> = (0..lat.tetrahedron_count())
            .map(|t| crate::hamiltonian::tetrahedron_sum(&lat, &sigma, t))
            .collect();
        let view = SpinView {
            lattice: &lat,
            sigma: &sigma,
            tetrahedron_sums: &sums,
        };
        let n = field.unit_direction().unwrap();
        let mu_b = 10.0 * BOHR_MAGNETON_KELVIN_PER_TESLA * 0.7;
        let zeeman = |s: &[i8]| -> f64 {
            (0..s.len())
                .map(|i| -mu_b * s[i] as f64 * crate::lattice::dot(easy_axis(i % 4), n))
                .sum()
        };
        for spin in 0..lat.spin_count() {
            let class = energy.energy_class(&view, spin);
            assert!(class < energy.energy_class_count());
            let mut flipped = sigma.clone();
            flipped[spin] = -flipped[spin];
            // Direct energy difference from the Hamiltonian (physics-reference §2).
            let direct = model.energy_kelvin(&lat, &flipped) + zeeman(&flipped)
                - model.energy_kelvin(&lat, &sigma)
                - zeeman(&sigma);
            assert!((energy.energy_class_cost_kelvin(class) - direct).abs() < 1e-9);
        }
    }

    /// Normalised M autocorrelation at a few lags against e^{−t/τ}.
    fn check_free_spin_decay(rule: AcceptanceRule, execution: Execution, tau_over_tau0: f64) {
        // Free spins (J = 0, B = 0): ⟨σ(0)σ(t)⟩ = e^{−2 A t/τ0} with A the
        // acceptance of a ΔE = 0 move: 1 for Metropolis, ½ for Glauber, so
        // e^{−2t/τ0} and e^{−t/τ0} (physics-reference §9, derived). M is a sum
        // of independent spins, so its normalised autocorrelation is the same.
        let lat = Pyrochlore::new(2).unwrap();
        let mut engine = free_spin_engine(&lat, rule, 11);
        let tau0 = 1e-3;
        let interval = 0.05 * tau0;
        let tr = engine
            .record(
                20_000.0 * tau0,
                interval,
                execution,
                [0.0, 0.0, 1.0],
                &Interrupt::new(),
                &ignore_progress,
                &mut (),
            )
            .unwrap();
        let c = magnetisation_autocorrelation(&tr, 40);
        // Bartlett's variance of an exponential autocorrelation estimate with
        // 4·10⁵ samples is σ ≈ 0.003 per lag (common practice); 0.02 ≈ 6σ.
        for lag in [5usize, 10, 20, 40] {
            let t = lag as f64 * interval;
            let expected = (-t / (tau_over_tau0 * tau0)).exp();
            assert!(
                (c[lag] - expected).abs() < 0.02,
                "{rule:?} {execution:?} lag {lag}: C = {} expected {expected}",
                c[lag]
            );
        }
    }

    #[test]
    fn free_spins_metropolis_decay_as_exp_minus_2t_over_tau0() {
        for execution in [Execution::AttemptBased, Execution::RejectionFree] {
            check_free_spin_decay(AcceptanceRule::Metropolis, execution, 0.5);
        }
    }

    #[test]
    fn free_spins_glauber_decay_as_exp_minus_t_over_tau0() {
        for execution in [Execution::AttemptBased, Execution::RejectionFree] {
            check_free_spin_decay(AcceptanceRule::Glauber, execution, 1.0);
        }
    }

    #[test]
    fn incremental_state_matches_recomputation_in_both_executions() {
        let lat = Pyrochlore::new(2).unwrap();
        let model = NearestNeighbourIce::new(1.1);
        let field = ZeemanField {
            field_tesla: 0.2,
            direction: [1.0, 1.0, 1.0],
            moment_bohr_magnetons: 10.0,
        };
        let energy = NearestNeighbourFlipEnergy::new(&model, Some(&field)).unwrap();
        let mut rng = RngStreams::new(5).stream(0);
        let sigma = initial_configuration(&lat, Start::Random, &mut rng);
        let mut engine = Kinetics::new(
            &lat,
            energy,
            sigma,
            AcceptanceRule::Glauber,
            1.0,
            AttemptTimes::bimodal(1.0, crate::gating::SlowGate::Ratio(5.0)).unwrap(),
            rng,
        )
        .unwrap();
        for (k, execution) in [
            Execution::AttemptBased,
            Execution::RejectionFree,
            Execution::AttemptBased,
            Execution::RejectionFree,
        ]
        .into_iter()
        .enumerate()
        {
            engine.advance((k + 1) as f64 * 20.0, execution, u64::MAX, &mut ());
            assert!((engine.time_seconds() - (k + 1) as f64 * 20.0).abs() < 1e-6);
            let s = engine.sigma().to_vec();
            assert_eq!(engine.gate_classes(), &GateClasses::new(&lat, &s));
            let sums: Vec<i8> = (0..lat.tetrahedron_count())
                .map(|t| crate::hamiltonian::tetrahedron_sum(&lat, &s, t))
                .collect();
            assert_eq!(engine.tetrahedron_sums(), &sums[..]);
            let m = crate::metropolis::magnetisation(&s);
            let em = engine.magnetisation();
            for c in 0..3 {
                assert!((m[c] - em[c]).abs() < 1e-9);
            }
            let counts = crate::metropolis::ChargeCounts::from_tetrahedron_sums(&sums);
            assert_eq!(engine.monopole_count(), counts.total_charge_magnitude());
        }
        assert!(engine.flip_count() > 100, "{}", engine.flip_count());
        if let Some(b) = &engine.buckets {
            let s = engine.sigma().to_vec();
            let sums = engine.tetrahedron_sums().to_vec();
            let view = SpinView {
                lattice: &lat,
                sigma: &s,
                tetrahedron_sums: &sums,
            };
            for spin in 0..lat.spin_count() {
                let true_class = engine.energy().energy_class(&view, spin) * GATE_CLASS_COUNT
                    + engine.gate_classes().class(spin) as usize;
                assert_eq!(b.class_of[spin], engine.class_group[true_class]);
            }
            for (c, m) in b.members.iter().enumerate() {
                for (p, &s) in m.iter().enumerate() {
                    assert_eq!(b.class_of[s as usize] as usize, c);
                    assert_eq!(b.position[s as usize] as usize, p);
                }
            }
            let exact = exact_total(&b.members, &engine.group_rate);
            assert!((b.total_rate - exact).abs() <= 1e-9 * exact);
        } else {
            panic!("the last execution was rejection-free, so buckets exist");
        }
    }

    /// τ_int of M·ẑ (units of the sample interval) for independent replicas.
    fn relaxation_times(temperature_kelvin: f64, execution: Execution) -> (f64, f64) {
        relaxation_times_with(temperature_kelvin, execution, 24, 0)
    }

    fn relaxation_times_with(
        temperature_kelvin: f64,
        execution: Execution,
        replicas: u64,
        seed_offset: u64,
    ) -> (f64, f64) {
        let lat = Pyrochlore::new(2).unwrap();
        let model = NearestNeighbourIce::new(1.1);
        let tau0 = 1.0;
        let mut taus = Vec::new();
        for r in 0..replicas {
            let mut eq = NearestNeighbourMetropolis::new(
                &lat,
                &model,
                temperature_kelvin,
                Start::Random,
                RngStreams::new(100 + r + seed_offset).stream(0),
            );
            for _ in 0..500 {
                eq.sweep();
            }
            let mut engine = Kinetics::new(
                &lat,
                NearestNeighbourFlipEnergy::new(&model, None).unwrap(),
                eq.sigma().to_vec(),
                AcceptanceRule::Metropolis,
                temperature_kelvin,
                AttemptTimes::uniform(tau0).unwrap(),
                RngStreams::new(200 + r + seed_offset).stream(match execution {
                    Execution::AttemptBased => 1,
                    Execution::RejectionFree => 2,
                }),
            )
            .unwrap();
            let tr = engine
                .record(
                    4000.0 * tau0,
                    0.5 * tau0,
                    execution,
                    [0.0, 0.0, 1.0],
                    &Interrupt::new(),
                    &ignore_progress,
                    &mut (),
                )
                .unwrap();
            let tau = integrated_autocorrelation_time(&tr.magnetisation_projection).unwrap();
            taus.push(tau.tau_samples * 0.5 * tau0);
        }
        let mean = taus.iter().sum::<f64>() / replicas as f64;
        let var = taus.iter().map(|t| (t - mean).powi(2)).sum::<f64>() / (replicas - 1) as f64;
        (mean, (var / replicas as f64).sqrt())
    }

    #[test]
    fn rejection_free_and_attempt_based_relax_alike_at_three_temperatures() {
        // Both executions sample the same Poisson process (Bortz, Kalos &
        // Lebowitz, J. Comput. Phys. 17, 10 (1975)), so the integrated
        // autocorrelation time of M must agree within 2σ (issue 4).
        for t in [0.8, 1.2, 2.0] {
            let (a, sa) = relaxation_times(t, Execution::AttemptBased);
            let (b, sb) = relaxation_times(t, Execution::RejectionFree);
            let sigma = (sa * sa + sb * sb).sqrt();
            assert!(
                (a - b).abs() < 2.0 * sigma,
                "T = {t}: attempt {a} ± {sa}, rejection-free {b} ± {sb}"
            );
            assert!(
                sigma < 0.2 * a,
                "errors too large to mean anything: {sigma} vs {a}"
            );
        }
    }

    #[test]
    fn field_quench_magnetisation_decays_and_interrupt_keeps_samples() {
        let settings = KineticsSettings {
            cells_per_side: 2,
            model: KineticsModel::NearestNeighbour(NearestNeighbourIce::new(1.1)),
            field: Some(ZeemanField {
                field_tesla: 1.0,
                direction: [0.0, 0.0, 1.0],
                moment_bohr_magnetons: 10.0,
            }),
            temperature_kelvin: 1.5,
            rule: AcceptanceRule::Metropolis,
            attempt_times: AttemptTimes::uniform(1e-3).unwrap(),
            transverse_from_dipolar_sum: None,
            execution: Some(Execution::RejectionFree),
            protocol: Protocol::FieldQuench {
                preparation_seconds: 0.2,
            },
            start: Start::Random,
            equilibration_sweeps: 0,
            duration_seconds: 0.5,
            sample_interval_seconds: 1e-3,
            projection_axis: None,
            seed: 9,
        };
        let result = run_kinetics(&settings, &Interrupt::new(), &ignore_progress).unwrap();
        let m = &result.trajectory.magnetisation_projection;
        assert_eq!(m.len(), 501);
        // In 1 T along [001] each spin gains μB/√3 ≈ 3.9 K by pointing along
        // the field, so M·ẑ starts near saturation N/√3 (derived) and decays
        // to ≈ 0 once the field is off.
        let saturation = 128.0 / 3f64.sqrt();
        assert!(m[0] > 0.5 * saturation, "M(0) = {}", m[0]);
        let tail: f64 = m[400..].iter().sum::<f64>() / 101.0;
        assert!(tail.abs() < 0.15 * saturation, "tail {tail}");
        assert!(result.trajectory.times_seconds[500] - 0.5 < 1e-9);
        // Round trip through serde (exchanged value).
        let json = serde_json::to_string(&result).unwrap();
        let back: KineticsResult = serde_json::from_str(&json).unwrap();
        assert_eq!(back.trajectory.times_seconds.len(), 501);

        let interrupt = Interrupt::new();
        interrupt.request();
        let stopped = run_kinetics(&settings, &interrupt, &ignore_progress).unwrap();
        assert!(stopped.trajectory.interrupted);
        assert_eq!(stopped.trajectory.times_seconds.len(), 1);
    }

    #[test]
    fn temperature_step_and_bad_input() {
        let mut settings = KineticsSettings {
            cells_per_side: 2,
            model: KineticsModel::NearestNeighbour(NearestNeighbourIce::new(1.1)),
            field: None,
            temperature_kelvin: 0.6,
            rule: AcceptanceRule::Glauber,
            attempt_times: AttemptTimes::uniform(1e-3).unwrap(),
            transverse_from_dipolar_sum: None,
            execution: Some(Execution::AttemptBased),
            protocol: Protocol::TemperatureStep {
                initial_temperature_kelvin: 10.0,
                preparation_seconds: 0.05,
            },
            start: Start::Random,
            equilibration_sweeps: 10,
            duration_seconds: 2.0,
            sample_interval_seconds: 0.01,
            projection_axis: None,
            seed: 2,
        };
        let tr = run_kinetics(&settings, &Interrupt::new(), &ignore_progress)
            .unwrap()
            .trajectory;
        // After a step from 10 K to 0.6 K the charge density falls (monopoles
        // annihilate; e^{−4J/T} ≈ 6·10⁻⁴ per tetrahedron at the end, derived
        // from H = 2J ΣQ²).
        let first = tr.monopole_count[0] as f64;
        let last = *tr.monopole_count.last().unwrap() as f64;
        assert!(first > 20.0 && last < 0.5 * first, "{first} → {last}");
        settings.sample_interval_seconds = 0.0;
        assert!(matches!(
            run_kinetics(&settings, &Interrupt::new(), &ignore_progress),
            Err(KineticsError::InvalidSampleInterval(_))
        ));
        settings.sample_interval_seconds = 1e-12;
        assert!(matches!(
            run_kinetics(&settings, &Interrupt::new(), &ignore_progress),
            Err(KineticsError::TooManySamples { .. })
        ));
        settings.sample_interval_seconds = 0.01;
        settings.protocol = Protocol::FieldQuench {
            preparation_seconds: 1.0,
        };
        let err = run_kinetics(&settings, &Interrupt::new(), &ignore_progress).unwrap_err();
        assert_eq!(err, KineticsError::MissingField);
        assert!(err.to_string().contains("field"));
        settings.temperature_kelvin = f64::NAN;
        assert!(run_kinetics(&settings, &Interrupt::new(), &ignore_progress).is_err());
    }
}
