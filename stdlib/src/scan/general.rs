//! Temperature scans of coupling-table models (exchange shells, Ewald-summed
//! dipolar term, Zeeman field) on the local-field sampler, with optional
//! ice-manifold loop moves, in one of three ladders:
//!
//! - [`Ladder::Independent`]: one chain per temperature, in parallel (stream
//!   `i` of the seed for temperature `i`, so the numbers do not depend on the
//!   thread count);
//! - [`Ladder::Tempering`]: replica exchange over the ladder (see
//!   [`crate::tempering`]), with the swap acceptance of every neighbouring pair;
//! - [`Ladder::Anneal`]: one chain that carries its state from each
//!   temperature to the next, in the order given (slow cooling).
//!
//! Interrupts are polled before every sweep; finished temperatures are kept
//! (for an anneal, the temperatures before the interrupted one; for
//! tempering, none unless the measurement was complete, since every
//! temperature finishes in the same round).

use super::{BinnedSeries, ScanError, ScanPoint, ScanSettings, PROGRESS_LABEL};
use crate::control::{Interrupt, ProgressFn, SharedProgress};
use crate::couplings::{
    estimated_coupling_table_bytes, CouplingError, CouplingTable, COUPLING_TABLE_LIMIT_BYTES,
};
use crate::engine::{FlipRule, LocalFieldSampler, SamplerError};
use crate::entropy::HighTemperatureTail;
use crate::ewald::{DipolarInteraction, DEFAULT_EWALD_ACCURACY};
use crate::exchange::{ExchangeCouplings, ZeemanField};
use crate::lattice::Pyrochlore;
use crate::loops::LoopMoves;
use crate::metropolis::initial_configuration;
use crate::observe::{Estimate, Sample, ThermodynamicSeries};
use crate::rng::RngStreams;
use crate::tempering::{PairExchange, ParallelTempering};
use rayon::prelude::*;
use serde::{Deserialize, Serialize};
use std::fmt;

/// How the chains of a scan's temperatures are run.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub enum Ladder {
    /// An independent chain per temperature.
    #[default]
    Independent,
    /// Parallel tempering: one replica per temperature, neighbours swap after every sweep.
    Tempering,
    /// One chain cooled (or heated) through the temperatures in the order given.
    Anneal,
}

/// Everything the coupling-table engine needs besides the scan settings.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct GeneralModel {
    /// Exchange shells.
    pub exchange: Option<ExchangeCouplings>,
    /// Dipolar strength D (K), summed by Ewald summation.
    pub dipolar_kelvin: Option<f64>,
    /// Zeeman term.
    pub zeeman: Option<ZeemanField>,
    /// Unit vector for the projected magnetisation ⟨M⟩·n̂/N.
    pub direction: Option<[f64; 3]>,
    /// Single-flip acceptance rule.
    pub rule: FlipRule,
    /// Loop moves attempted after every sweep.
    pub loops_per_sweep: u64,
    /// How the temperatures' chains are run.
    #[serde(default)]
    pub ladder: Ladder,
}

/// One finished temperature of a coupling-table scan.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct GeneralScanPoint {
    /// The thermodynamic estimates.
    pub point: ScanPoint,
    /// ⟨M⟩·n̂/N along [`GeneralModel::direction`] (units of μ), when one is given.
    pub magnetisation_along: Option<Estimate>,
}

/// A finished (or interrupted) coupling-table scan.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct GeneralScanResult {
    /// Finished temperatures, in the order of `settings.temperatures_kelvin`.
    pub points: Vec<GeneralScanPoint>,
    /// Whether the run was interrupted.
    pub interrupted: bool,
    /// The model's high-temperature tail (for the entropy integration).
    pub high_temperature_tail: HighTemperatureTail,
    /// Swap statistics per neighbouring pair of the sorted ladder (tempering only).
    pub pair_exchanges: Vec<PairExchange>,
}

/// Why a coupling-table scan could not run.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub enum GeneralScanError {
    /// Invalid settings (temperatures, sweeps, lattice).
    Settings(ScanError),
    /// The coupling table could not be built (too large, lattice too small, ...).
    Couplings(CouplingError),
    /// The sampler refused its input.
    Sampler(SamplerError),
    /// Fewer samples than error bars need at this temperature (K).
    TooFewSamples {
        /// The temperature (K).
        temperature_kelvin: f64,
    },
}

impl fmt::Display for GeneralScanError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            GeneralScanError::Settings(e) => write!(f, "{e}"),
            GeneralScanError::Couplings(e) => write!(f, "{e}"),
            GeneralScanError::Sampler(e) => write!(f, "{e}"),
            GeneralScanError::TooFewSamples { temperature_kelvin } => {
                write!(
                    f,
                    "too few samples at T = {temperature_kelvin} K for error bars"
                )
            }
        }
    }
}

impl std::error::Error for GeneralScanError {}

/// Estimated bytes of a coupling-table scan with `replicas` samplers alive at
/// once: the table with one sampler's fields, plus N f64 fields and N i8
/// spins for every further replica (saturating).
pub fn estimated_general_scan_bytes(cells_per_side: usize, replicas: usize) -> u64 {
    let l = cells_per_side as u64;
    let n = 16u64.saturating_mul(l).saturating_mul(l).saturating_mul(l);
    let per_replica = n.saturating_mul(9);
    estimated_coupling_table_bytes(cells_per_side)
        .saturating_add(per_replica.saturating_mul(replicas.saturating_sub(1) as u64))
}

/// The memory budget [`estimated_general_scan_bytes`] is compared with.
pub const GENERAL_SCAN_LIMIT_BYTES: u64 = COUPLING_TABLE_LIMIT_BYTES;

/// The coupling table of a model: exchange shells, the Ewald-summed dipolar term
/// (conducting boundary; de Leeuw, Perram & Smith, Proc. R. Soc. A 373, 27 (1980)) and the
/// Zeeman term, added into one translation-invariant table.
pub fn coupling_table(
    lat: &Pyrochlore,
    model: &GeneralModel,
) -> Result<CouplingTable, CouplingError> {
    let mut table = CouplingTable::zero(lat)?;
    if let Some(exchange) = &model.exchange {
        exchange.add_to(lat, &mut table)?;
    }
    if let Some(d_kelvin) = model.dipolar_kelvin {
        DipolarInteraction {
            d_kelvin,
            accuracy: DEFAULT_EWALD_ACCURACY,
        }
        .add_to(lat, &mut table)?;
    }
    if let Some(zeeman) = &model.zeeman {
        zeeman.add_to(&mut table)?;
    }
    Ok(table)
}

/// One sweep: N single-flip attempts, then the loop moves (Barkema & Newman, Phys. Rev.
/// E 57, 1155 (1998); Melko, den Hertog & Gingras, Phys. Rev. Lett. 87, 067203 (2001)),
/// accepted with Metropolis on the full energy change. Returns accepted single flips.
fn sweep(sampler: &mut LocalFieldSampler<'_>, loops: &mut LoopMoves, loops_per_sweep: u64) -> u64 {
    let accepted = sampler.sweep();
    for _ in 0..loops_per_sweep {
        loops.attempt(sampler);
    }
    accepted
}

/// The samples of one temperature's measurement.
struct Measurement {
    series: ThermodynamicSeries,
    energies: BinnedSeries,
    along: Option<BinnedSeries>,
    direction: Option<[f64; 3]>,
    accepted: u64,
    attempted: u64,
}

impl Measurement {
    fn new(lat: &Pyrochlore, direction: Option<[f64; 3]>) -> Self {
        Measurement {
            series: ThermodynamicSeries::new(lat.spin_count(), lat.tetrahedron_count()),
            energies: BinnedSeries::new(),
            along: direction.map(|_| BinnedSeries::new()),
            direction,
            accepted: 0,
            attempted: 0,
        }
    }

    fn record(&mut self, sampler: &LocalFieldSampler<'_>) {
        let charges = sampler.charge_counts();
        let m = sampler.magnetisation();
        let energy_kelvin = sampler.energy_kelvin();
        self.energies.push(energy_kelvin);
        self.series.push(&Sample {
            energy_kelvin,
            magnetisation: m,
            single_charges: charges.single,
            double_charges: charges.double,
        });
        if let (Some(s), Some(d)) = (self.along.as_mut(), self.direction) {
            let n = sampler.sigma().len() as f64;
            s.push((m[0] * d[0] + m[1] * d[1] + m[2] * d[2]) / n);
        }
    }

    fn finish(
        self,
        temperature_kelvin: f64,
        settings: &ScanSettings,
    ) -> Result<GeneralScanPoint, GeneralScanError> {
        let th = self
            .series
            .thermodynamics(temperature_kelvin)
            .ok_or(GeneralScanError::TooFewSamples { temperature_kelvin })?;
        let mut point = ScanPoint::from_thermodynamics(
            temperature_kelvin,
            &th,
            self.accepted as f64 / self.attempted.max(1) as f64,
            settings.sample_every_sweeps,
        );
        point.diagnostics = self.energies.diagnostics(settings.sample_every_sweeps);
        Ok(GeneralScanPoint {
            point,
            magnetisation_along: self.along.and_then(|s| s.estimate()),
        })
    }
}

/// A temperature scan of a coupling-table model (see the module documentation).
pub fn run_general_scan(
    settings: &ScanSettings,
    model: &GeneralModel,
    interrupt: &Interrupt,
    progress: ProgressFn,
) -> Result<GeneralScanResult, GeneralScanError> {
    settings.validate().map_err(GeneralScanError::Settings)?;
    let lat = Pyrochlore::new(settings.cells_per_side)
        .map_err(|e| GeneralScanError::Settings(e.into()))?;
    let replicas = match model.ladder {
        Ladder::Tempering => settings.temperatures_kelvin.len(),
        _ => 1,
    };
    let estimated_bytes = estimated_general_scan_bytes(settings.cells_per_side, replicas);
    if estimated_bytes > GENERAL_SCAN_LIMIT_BYTES {
        return Err(GeneralScanError::Couplings(CouplingError::TooLarge {
            cells_per_side: settings.cells_per_side,
            estimated_bytes,
            limit_bytes: GENERAL_SCAN_LIMIT_BYTES,
        }));
    }
    let table = coupling_table(&lat, model).map_err(GeneralScanError::Couplings)?;
    let n = lat.spin_count() as f64;
    let high_temperature_tail = HighTemperatureTail {
        infinite_temperature_energy_per_spin_kelvin: table.constant_energy_kelvin() / n,
        energy_variance_per_spin_kelvin2: table.infinite_temperature_energy_variance_per_spin(),
    };
    let counter = SharedProgress::start(PROGRESS_LABEL, settings.total_sweeps(), progress);
    let (outcomes, pair_exchanges) = match model.ladder {
        Ladder::Independent => (
            independent(&lat, &table, settings, model, interrupt, &counter)?,
            Vec::new(),
        ),
        Ladder::Anneal => (
            anneal(&lat, &table, settings, model, interrupt, &counter)?,
            Vec::new(),
        ),
        Ladder::Tempering => tempering(&lat, &table, settings, model, interrupt, &counter)?,
    };
    let interrupted = outcomes.iter().any(Option::is_none);
    Ok(GeneralScanResult {
        points: outcomes.into_iter().flatten().collect(),
        interrupted,
        high_temperature_tail,
        pair_exchanges,
    })
}

type Outcomes = Vec<Option<GeneralScanPoint>>;

fn independent(
    lat: &Pyrochlore,
    table: &CouplingTable,
    settings: &ScanSettings,
    model: &GeneralModel,
    interrupt: &Interrupt,
    counter: &SharedProgress,
) -> Result<Outcomes, GeneralScanError> {
    let streams = RngStreams::new(settings.seed);
    settings
        .temperatures_kelvin
        .par_iter()
        .enumerate()
        .map(|(index, &t)| {
            if interrupt.is_requested() {
                return Ok(None);
            }
            let mut rng = streams.stream(index as u64);
            let sigma = initial_configuration(lat, settings.start, &mut rng);
            let mut sampler = LocalFieldSampler::new(lat, table, t, model.rule, sigma, rng)
                .map_err(GeneralScanError::Sampler)?;
            let mut loops = LoopMoves::new(lat);
            for _ in 0..settings.equilibration_sweeps {
                if interrupt.is_requested() {
                    return Ok(None);
                }
                sweep(&mut sampler, &mut loops, model.loops_per_sweep);
                counter.unit_done();
            }
            measure(
                &mut sampler,
                &mut loops,
                t,
                settings,
                model,
                interrupt,
                counter,
            )
        })
        .collect()
}

/// The measurement sweeps at one temperature; `Ok(None)` if interrupted.
fn measure(
    sampler: &mut LocalFieldSampler<'_>,
    loops: &mut LoopMoves,
    temperature_kelvin: f64,
    settings: &ScanSettings,
    model: &GeneralModel,
    interrupt: &Interrupt,
    counter: &SharedProgress,
) -> Result<Option<GeneralScanPoint>, GeneralScanError> {
    // Recompute the energy from the fields so rounding accumulated while equilibrating
    // does not enter the measurement.
    sampler.resynchronise_energy();
    let mut measurement = Measurement::new(sampler.lattice(), model.direction);
    for index in 1..=settings.measurement_sweeps {
        if interrupt.is_requested() {
            return Ok(None);
        }
        measurement.accepted += sweep(sampler, loops, model.loops_per_sweep);
        measurement.attempted += sampler.sigma().len() as u64;
        if index % settings.sample_every_sweeps == 0 {
            measurement.record(sampler);
        }
        counter.unit_done();
    }
    measurement.finish(temperature_kelvin, settings).map(Some)
}

fn anneal(
    lat: &Pyrochlore,
    table: &CouplingTable,
    settings: &ScanSettings,
    model: &GeneralModel,
    interrupt: &Interrupt,
    counter: &SharedProgress,
) -> Result<Outcomes, GeneralScanError> {
    let temperatures = &settings.temperatures_kelvin;
    let mut rng = RngStreams::new(settings.seed).stream(0);
    let sigma = initial_configuration(lat, settings.start, &mut rng);
    let mut sampler = LocalFieldSampler::new(lat, table, temperatures[0], model.rule, sigma, rng)
        .map_err(GeneralScanError::Sampler)?;
    let mut loops = LoopMoves::new(lat);
    let mut outcomes: Outcomes = vec![None; temperatures.len()];
    'temperatures: for (slot, &t) in outcomes.iter_mut().zip(temperatures) {
        // The state of the previous temperature is carried over.
        sampler.set_temperature(t);
        for _ in 0..settings.equilibration_sweeps {
            if interrupt.is_requested() {
                break 'temperatures;
            }
            sweep(&mut sampler, &mut loops, model.loops_per_sweep);
            counter.unit_done();
        }
        match measure(
            &mut sampler,
            &mut loops,
            t,
            settings,
            model,
            interrupt,
            counter,
        )? {
            Some(point) => *slot = Some(point),
            None => break,
        }
    }
    Ok(outcomes)
}

fn tempering(
    lat: &Pyrochlore,
    table: &CouplingTable,
    settings: &ScanSettings,
    model: &GeneralModel,
    interrupt: &Interrupt,
    counter: &SharedProgress,
) -> Result<(Outcomes, Vec<PairExchange>), GeneralScanError> {
    let temperatures = &settings.temperatures_kelvin;
    let count = temperatures.len();
    let streams = RngStreams::new(settings.seed);
    let samplers = temperatures
        .iter()
        .enumerate()
        .map(|(index, &t)| {
            let mut rng = streams.stream(index as u64);
            let sigma = initial_configuration(lat, settings.start, &mut rng);
            LocalFieldSampler::new(lat, table, t, model.rule, sigma, rng)
                .map_err(GeneralScanError::Sampler)
        })
        .collect::<Result<Vec<_>, _>>()?;
    // The exchange decisions get a stream no temperature uses.
    let Some(mut ladder) = ParallelTempering::new(samplers, streams.stream(u32::MAX as u64)) else {
        return Err(GeneralScanError::Settings(ScanError::NoTemperatures));
    };
    // Slot k of the (sorted) ladder holds the temperature asked for at position order[k].
    let mut order: Vec<usize> = (0..count).collect();
    order.sort_by(|&a, &b| temperatures[a].total_cmp(&temperatures[b]));
    let unfinished = || (vec![None; count], Vec::new());
    for _ in 0..settings.equilibration_sweeps {
        if interrupt.is_requested() {
            return Ok(unfinished());
        }
        ladder.sweep_all(1, model.loops_per_sweep);
        ladder.exchange_all();
        for _ in 0..count {
            counter.unit_done();
        }
    }
    ladder.resynchronise_energies();
    let mut measurements: Vec<Measurement> = (0..count)
        .map(|_| Measurement::new(lat, model.direction))
        .collect();
    for index in 1..=settings.measurement_sweeps {
        if interrupt.is_requested() {
            return Ok(unfinished());
        }
        let accepted = ladder.sweep_all(1, model.loops_per_sweep);
        for (k, m) in measurements.iter_mut().enumerate() {
            m.accepted += accepted[k];
            m.attempted += lat.spin_count() as u64;
            if index % settings.sample_every_sweeps == 0 {
                if let Some(replica) = ladder.replica(k) {
                    m.record(&replica.sampler);
                }
            }
        }
        ladder.exchange_all();
        for _ in 0..count {
            counter.unit_done();
        }
    }
    let mut outcomes: Outcomes = vec![None; count];
    for (k, m) in measurements.into_iter().enumerate() {
        let position = order[k];
        outcomes[position] = Some(m.finish(temperatures[position], settings)?);
    }
    Ok((outcomes, ladder.pair_exchanges().to_vec()))
}

/// Configurations for ensemble averages (e.g. the structure factor): one chain at
/// `temperature_kelvin` (stream 0 of the seed), `equilibration_sweeps` discarded, then
/// `count` configurations taken every `sweeps_between` sweeps. On interrupt the
/// configurations taken so far are returned with `true`.
#[allow(clippy::too_many_arguments)]
pub fn sample_configurations(
    settings: &ScanSettings,
    model: &GeneralModel,
    temperature_kelvin: f64,
    count: usize,
    sweeps_between: u64,
    interrupt: &Interrupt,
    progress: ProgressFn,
) -> Result<(Vec<Vec<i8>>, bool), GeneralScanError> {
    if !(temperature_kelvin.is_finite() && temperature_kelvin > 0.0) {
        return Err(GeneralScanError::Settings(ScanError::InvalidTemperature {
            index: 0,
            temperature_kelvin,
        }));
    }
    let lat = Pyrochlore::new(settings.cells_per_side)
        .map_err(|e| GeneralScanError::Settings(e.into()))?;
    let estimated_bytes = estimated_general_scan_bytes(settings.cells_per_side, 1);
    if estimated_bytes > GENERAL_SCAN_LIMIT_BYTES {
        return Err(GeneralScanError::Couplings(CouplingError::TooLarge {
            cells_per_side: settings.cells_per_side,
            estimated_bytes,
            limit_bytes: GENERAL_SCAN_LIMIT_BYTES,
        }));
    }
    let table = coupling_table(&lat, model).map_err(GeneralScanError::Couplings)?;
    let total = settings
        .equilibration_sweeps
        .saturating_add(sweeps_between.max(1).saturating_mul(count as u64));
    let counter = SharedProgress::start(PROGRESS_LABEL, total, progress);
    let mut rng = RngStreams::new(settings.seed).stream(0);
    let sigma = initial_configuration(&lat, settings.start, &mut rng);
    let mut sampler =
        LocalFieldSampler::new(&lat, &table, temperature_kelvin, model.rule, sigma, rng)
            .map_err(GeneralScanError::Sampler)?;
    let mut loops = LoopMoves::new(&lat);
    let mut configurations = Vec::with_capacity(count);
    for _ in 0..settings.equilibration_sweeps {
        if interrupt.is_requested() {
            return Ok((configurations, true));
        }
        sweep(&mut sampler, &mut loops, model.loops_per_sweep);
        counter.unit_done();
    }
    for _ in 0..count {
        for _ in 0..sweeps_between.max(1) {
            if interrupt.is_requested() {
                return Ok((configurations, true));
            }
            sweep(&mut sampler, &mut loops, model.loops_per_sweep);
            counter.unit_done();
        }
        configurations.push(sampler.sigma().to_vec());
    }
    Ok((configurations, false))
}
