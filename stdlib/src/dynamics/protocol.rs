//! Complete kinetics runs: a model, a protocol (evolve, field quench,
//! temperature step), preparation, and a recording on a uniform time grid,
//! for every Hamiltonian the equilibrium engine knows.
//!
//! The model picks the engine: the nearest-neighbour model and exchange
//! shells have discrete flip energies and run on [`Kinetics`] (attempt-based
//! or the n-fold way); models with the dipolar term run on
//! [`DipolarKinetics`] (attempt-based or thinning). With no execution given,
//! [`choose_execution`] picks one from the starting state and says why.

use super::{
    choose_execution, sample_count, unit, AcceptanceRule, DipolarGating, DipolarKinetics,
    ExchangeFlipEnergy, Execution, KineticEngine, Kinetics, KineticsError,
    NearestNeighbourFlipEnergy, Trajectory, ZeemanField,
};
use crate::control::{Interrupt, Progress, ProgressFn};
use crate::couplings::CouplingTable;
use crate::engine::{FlipRule, LocalFieldSampler};
use crate::ewald::{DipolarInteraction, DEFAULT_EWALD_ACCURACY};
use crate::exchange::ExchangeCouplings;
use crate::gating::{AttemptTimes, TransverseRateLaw};
use crate::hamiltonian::NearestNeighbourIce;
use crate::lattice::Pyrochlore;
use crate::metropolis::{initial_configuration, NearestNeighbourMetropolis, Start};
use crate::rng::{RngStreams, SpinRng};
use serde::{Deserialize, Serialize};

/// Progress label of the equilibration sweeps before a run (done/total in sweeps).
pub const EQUILIBRATION_PROGRESS_LABEL: &str = "kinetics: equilibration sweeps";
/// Progress label of a protocol's preparation (done/total in hundredths of it).
pub const PREPARATION_PROGRESS_LABEL: &str = "kinetics: preparation (hundredths)";
const PREPARATION_STEPS: u64 = 100;

/// What is done before the recording starts at t = 0.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub enum Protocol {
    /// Record at the run temperature, with the run's field (if any) on.
    Evolve,
    /// Evolve `preparation_seconds` with the field on, switch it off at
    /// t = 0 and record the decay.
    FieldQuench {
        /// Time in the field before the switch (s).
        preparation_seconds: f64,
    },
    /// Evolve `preparation_seconds` at `initial_temperature_kelvin`, step
    /// to the run temperature at t = 0 and record.
    TemperatureStep {
        /// Temperature before the step (K).
        initial_temperature_kelvin: f64,
        /// Time at the initial temperature (s).
        preparation_seconds: f64,
    },
}

/// The Hamiltonian of a kinetics run (the field is given separately).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub enum KineticsModel {
    /// `J_eff Σ σσ` over nearest neighbours.
    NearestNeighbour(NearestNeighbourIce),
    /// Exchange shells J1, J2, J3, J3'.
    Exchange(ExchangeCouplings),
    /// The Ewald-summed dipolar term, with optional exchange shells.
    Dipolar {
        /// Exchange shells beside the dipolar term.
        exchange: Option<ExchangeCouplings>,
        /// D (K).
        d_kelvin: f64,
        /// Relative accuracy of the Ewald sums.
        ewald_accuracy: f64,
    },
}

impl KineticsModel {
    /// The dipolar model at the default Ewald accuracy, six-neighbour gates.
    pub fn dipolar(exchange: Option<ExchangeCouplings>, d_kelvin: f64) -> Self {
        KineticsModel::Dipolar {
            exchange,
            d_kelvin,
            ewald_accuracy: DEFAULT_EWALD_ACCURACY,
        }
    }
}

/// A complete kinetics run.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct KineticsSettings {
    /// L.
    pub cells_per_side: usize,
    /// The Hamiltonian.
    pub model: KineticsModel,
    /// Optional uniform field (on throughout for `Evolve`, switched off at
    /// t = 0 for `FieldQuench`).
    pub field: Option<ZeemanField>,
    /// Temperature of the recording (K).
    pub temperature_kelvin: f64,
    /// Acceptance rule.
    pub rule: AcceptanceRule,
    /// Attempt time per gate class (the rate law of the transverse what-if
    /// replaces it when given).
    pub attempt_times: AttemptTimes,
    /// The transverse-field what-if: attempt times from a rate law of the
    /// magnitude of the full (Ewald-summed) dipolar field normal to each
    /// easy axis, instead of the six-neighbour classes. Works with every
    /// model: only the direction pattern of the dipolar field matters, since
    /// its magnitude is measured in units of one nearest neighbour's field
    /// (so D cancels), and the energies stay those of the model. Runs on
    /// [`DipolarKinetics`].
    #[serde(default)]
    pub transverse_from_dipolar_sum: Option<TransverseRateLaw>,
    /// Execution; `None` lets [`choose_execution`] pick from the state at t = 0.
    pub execution: Option<Execution>,
    /// Protocol.
    pub protocol: Protocol,
    /// Initial configuration.
    pub start: Start,
    /// Equilibrium Metropolis sweeps (zero field) at the starting
    /// temperature before the protocol.
    pub equilibration_sweeps: u64,
    /// Length of the recording (s).
    pub duration_seconds: f64,
    /// Grid spacing (s).
    pub sample_interval_seconds: f64,
    /// Projection axis of M (default: the field direction, else [0, 0, 1]).
    pub projection_axis: Option<[f64; 3]>,
    /// Seed.
    pub seed: u64,
}

/// Settings and trajectory of a finished (or interrupted) run.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct KineticsResult {
    /// What was asked.
    pub settings: KineticsSettings,
    /// What was recorded.
    pub trajectory: Trajectory,
    /// Which execution ran and why (chosen or as asked).
    pub execution_reason: String,
}

/// Everything checked before any work, shared by all engines.
struct Plan {
    temperature_kelvin: f64,
    start_temperature_kelvin: f64,
    preparation_seconds: f64,
    quench: bool,
    axis: [f64; 3],
}

fn plan(settings: &KineticsSettings) -> Result<Plan, KineticsError> {
    sample_count(settings.duration_seconds, settings.sample_interval_seconds)?;
    let t = settings.temperature_kelvin;
    if !(t >= 0.0 && t.is_finite()) {
        return Err(KineticsError::InvalidTemperature(t));
    }
    if let Some(f) = &settings.field {
        f.sublattice_energy_kelvin()
            .ok_or(KineticsError::InvalidField)?;
    }
    let axis = match (settings.projection_axis, &settings.field) {
        (Some(a), _) => a,
        (None, Some(f)) => f.unit_direction().ok_or(KineticsError::InvalidField)?,
        (None, None) => [0.0, 0.0, 1.0],
    };
    unit(axis).ok_or(KineticsError::InvalidProjectionAxis)?;
    let (start_temperature_kelvin, preparation_seconds) = match &settings.protocol {
        Protocol::Evolve => (t, 0.0),
        Protocol::FieldQuench {
            preparation_seconds,
        } => {
            if settings.field.is_none() {
                return Err(KineticsError::MissingField);
            }
            (t, *preparation_seconds)
        }
        Protocol::TemperatureStep {
            initial_temperature_kelvin,
            preparation_seconds,
        } => (*initial_temperature_kelvin, *preparation_seconds),
    };
    if !(start_temperature_kelvin >= 0.0 && start_temperature_kelvin.is_finite()) {
        return Err(KineticsError::InvalidTemperature(start_temperature_kelvin));
    }
    if !(preparation_seconds >= 0.0 && preparation_seconds.is_finite()) {
        return Err(KineticsError::InvalidDuration(preparation_seconds));
    }
    settings.attempt_times.validate()?;
    Ok(Plan {
        temperature_kelvin: t,
        start_temperature_kelvin,
        preparation_seconds,
        quench: matches!(settings.protocol, Protocol::FieldQuench { .. }),
        axis,
    })
}

/// The pair-coupling table of a coupling-table model (no single-spin terms).
fn pair_table(lat: &Pyrochlore, model: &KineticsModel) -> Result<CouplingTable, KineticsError> {
    let mut table = CouplingTable::zero(lat).map_err(KineticsError::Couplings)?;
    match model {
        KineticsModel::NearestNeighbour(m) => {
            ExchangeCouplings::nearest_neighbour(
                m.j_eff_kelvin,
                crate::exchange::CouplingConvention::IsingPseudospins,
            )
            .add_to(lat, &mut table)
            .map_err(KineticsError::Couplings)?;
        }
        KineticsModel::Exchange(c) => c
            .add_to(lat, &mut table)
            .map_err(KineticsError::Couplings)?,
        KineticsModel::Dipolar {
            exchange,
            d_kelvin,
            ewald_accuracy,
            ..
        } => {
            if let Some(c) = exchange {
                c.add_to(lat, &mut table)
                    .map_err(KineticsError::Couplings)?;
            }
            DipolarInteraction {
                d_kelvin: *d_kelvin,
                accuracy: *ewald_accuracy,
            }
            .add_to(lat, &mut table)
            .map_err(KineticsError::Couplings)?;
        }
    }
    Ok(table)
}

/// What the local-field engine ([`DipolarKinetics`]) borrows for a model: its
/// pair table and, for the transverse-field what-if, the dipolar field tables.
pub struct LocalFieldTables {
    /// Pair couplings of the model (no single-spin terms).
    pub pairs: CouplingTable,
    /// Field tables at D = 1 K for the transverse gate: x = |h⊥|/(one
    /// neighbour's |h⊥|) does not depend on D.
    pub transverse: Option<[CouplingTable; 3]>,
}

impl LocalFieldTables {
    /// The tables of `model` on `lat`, with the field tables if
    /// `transverse_gate` (Ewald accuracy of the model, else the default).
    pub fn build(
        lat: &Pyrochlore,
        model: &KineticsModel,
        transverse_gate: bool,
    ) -> Result<Self, KineticsError> {
        let accuracy = match model {
            KineticsModel::Dipolar { ewald_accuracy, .. } => *ewald_accuracy,
            _ => DEFAULT_EWALD_ACCURACY,
        };
        let transverse = if transverse_gate {
            Some(
                DipolarInteraction {
                    d_kelvin: 1.0,
                    accuracy,
                }
                .field_tables(lat)
                .map_err(KineticsError::Couplings)?,
            )
        } else {
            None
        };
        Ok(Self {
            pairs: pair_table(lat, model)?,
            transverse,
        })
    }

    /// The gating: the transverse law on the dipolar field if one is given
    /// (and the field tables were built), else the six-neighbour classes.
    pub fn gating(
        &self,
        lat: &Pyrochlore,
        attempt_times: &AttemptTimes,
        law: Option<&TransverseRateLaw>,
    ) -> DipolarGating<'_> {
        match (law, &self.transverse) {
            (Some(law), Some(tables)) => DipolarGating::FullDipolarSum {
                field_tables: tables,
                unit_kelvin: super::nearest_neighbour_transverse_field_kelvin(lat, 1.0),
                law: law.clone(),
            },
            _ => DipolarGating::NeighbourClasses(attempt_times.clone()),
        }
    }
}

/// The starting configuration after `equilibration_sweeps` zero-field
/// Metropolis sweeps at the starting temperature; `None` if interrupted.
fn prepared_configuration(
    lat: &Pyrochlore,
    settings: &KineticsSettings,
    table: Option<&CouplingTable>,
    start_temperature_kelvin: f64,
    streams: &RngStreams,
    interrupt: &Interrupt,
    progress: ProgressFn<'_>,
) -> Result<(Vec<i8>, bool), KineticsError> {
    let mut start_rng = streams.stream(0);
    let sigma = initial_configuration(lat, settings.start, &mut start_rng);
    if settings.equilibration_sweeps == 0 {
        return Ok((sigma, false));
    }
    let sweeps = settings.equilibration_sweeps;
    let report_every = (sweeps / 100).max(1);
    let report = |done: u64| {
        if done.is_multiple_of(report_every) {
            progress(&Progress {
                label: EQUILIBRATION_PROGRESS_LABEL.to_string(),
                done,
                total: sweeps,
            });
        }
    };
    match (&settings.model, table) {
        (KineticsModel::NearestNeighbour(model), _) => {
            let mut eq = NearestNeighbourMetropolis::from_configuration(
                lat,
                model,
                start_temperature_kelvin,
                sigma,
                streams.stream(1),
            )
            .expect("initial_configuration has one ±1 entry per spin");
            for k in 0..sweeps {
                if k % 64 == 0 && interrupt.is_requested() {
                    return Ok((eq.sigma().to_vec(), true));
                }
                eq.sweep();
                report(k + 1);
            }
            Ok((eq.sigma().to_vec(), false))
        }
        (_, Some(table)) => {
            let mut eq = LocalFieldSampler::new(
                lat,
                table,
                start_temperature_kelvin,
                FlipRule::Metropolis,
                sigma,
                streams.stream(1),
            )
            .expect("table and configuration are built for this lattice");
            // Dense tables cost O(N) per accepted flip: poll every sweep.
            for k in 0..sweeps {
                if interrupt.is_requested() {
                    return Ok((eq.sigma().to_vec(), true));
                }
                eq.sweep();
                report(k + 1);
            }
            Ok((eq.sigma().to_vec(), false))
        }
        (_, None) => unreachable!("coupling-table models build their table first"),
    }
}

/// Run a kinetics protocol (validates everything first).
pub fn run_kinetics(
    settings: &KineticsSettings,
    interrupt: &Interrupt,
    progress: ProgressFn<'_>,
) -> Result<KineticsResult, KineticsError> {
    let lat = Pyrochlore::new(settings.cells_per_side).map_err(KineticsError::Lattice)?;
    let plan = plan(settings)?;
    let streams = RngStreams::new(settings.seed);
    let field = settings.field.as_ref();
    let engine_rng = streams.stream(2);
    let (trajectory, execution_reason) = match &settings.model {
        _ if settings.transverse_from_dipolar_sum.is_some() => local_field_run(
            &lat, settings, &plan, &streams, engine_rng, interrupt, progress,
        )?,
        KineticsModel::NearestNeighbour(model) => {
            let with_field =
                NearestNeighbourFlipEnergy::new(model, field).ok_or(KineticsError::InvalidField)?;
            let zero_field =
                NearestNeighbourFlipEnergy::new(model, None).ok_or(KineticsError::InvalidField)?;
            discrete_run(
                &lat, settings, &plan, &streams, engine_rng, interrupt, progress, with_field,
                zero_field, None,
            )?
        }
        KineticsModel::Exchange(couplings) => {
            let with_field = ExchangeFlipEnergy::new(&lat, couplings, field)?;
            let zero_field = with_field.without_field();
            // The equilibration runs on the coupling table of the same model.
            let table = pair_table(&lat, &settings.model)?;
            discrete_run(
                &lat,
                settings,
                &plan,
                &streams,
                engine_rng,
                interrupt,
                progress,
                with_field,
                zero_field,
                Some(&table),
            )?
        }
        KineticsModel::Dipolar { .. } => local_field_run(
            &lat, settings, &plan, &streams, engine_rng, interrupt, progress,
        )?,
    };
    Ok(KineticsResult {
        settings: settings.clone(),
        trajectory,
        execution_reason,
    })
}

/// A run on [`DipolarKinetics`]: models with the dipolar term, and every
/// model under the transverse-field what-if.
fn local_field_run(
    lat: &Pyrochlore,
    settings: &KineticsSettings,
    plan: &Plan,
    streams: &RngStreams,
    engine_rng: SpinRng,
    interrupt: &Interrupt,
    progress: ProgressFn<'_>,
) -> Result<(Trajectory, String), KineticsError> {
    let tables = LocalFieldTables::build(
        lat,
        &settings.model,
        settings.transverse_from_dipolar_sum.is_some(),
    )?;
    let table = &tables.pairs;
    let gating = tables.gating(
        lat,
        &settings.attempt_times,
        settings.transverse_from_dipolar_sum.as_ref(),
    );
    let single = ZeemanField::single_spin_kelvin(settings.field.as_ref())?;
    let (sigma, interrupted) = prepared_configuration(
        lat,
        settings,
        Some(table),
        plan.start_temperature_kelvin,
        streams,
        interrupt,
        progress,
    )?;
    let mut engine = DipolarKinetics::new(
        lat,
        table,
        single,
        gating,
        sigma,
        settings.rule,
        plan.start_temperature_kelvin,
        engine_rng,
    )?;
    drive(
        &mut engine,
        settings,
        plan,
        interrupted,
        interrupt,
        progress,
        |e| e.set_single_spin_kelvin([0.0; 4]),
    )
}

/// A run on [`Kinetics`] (discrete flip energies): equilibration (on `table`
/// for coupling-table models), then the protocol; the field is switched off
/// by replacing `with_field` with `zero_field`.
#[allow(clippy::too_many_arguments)]
fn discrete_run<E: super::DiscreteFlipEnergy>(
    lat: &Pyrochlore,
    settings: &KineticsSettings,
    plan: &Plan,
    streams: &RngStreams,
    engine_rng: SpinRng,
    interrupt: &Interrupt,
    progress: ProgressFn<'_>,
    with_field: E,
    zero_field: E,
    table: Option<&CouplingTable>,
) -> Result<(Trajectory, String), KineticsError> {
    let (sigma, interrupted) = prepared_configuration(
        lat,
        settings,
        table,
        plan.start_temperature_kelvin,
        streams,
        interrupt,
        progress,
    )?;
    let mut engine = Kinetics::new(
        lat,
        with_field,
        sigma,
        settings.rule,
        plan.start_temperature_kelvin,
        settings.attempt_times.clone(),
        engine_rng,
    )?;
    drive(
        &mut engine,
        settings,
        plan,
        interrupted,
        interrupt,
        progress,
        |e| e.set_energy(zero_field),
    )
}

/// Preparation, switch at t = 0, recording: the same for every engine.
#[allow(clippy::too_many_arguments)]
fn drive<'a, K: KineticEngine<'a>>(
    engine: &mut K,
    settings: &KineticsSettings,
    plan: &Plan,
    mut interrupted: bool,
    interrupt: &Interrupt,
    progress: ProgressFn<'_>,
    switch_field_off: impl FnOnce(&mut K),
) -> Result<(Trajectory, String), KineticsError> {
    let (execution, reason) = match settings.execution {
        Some(e) => (
            e,
            match e {
                Execution::AttemptBased => "attempt-based (as asked)".to_string(),
                Execution::RejectionFree => "rejection-free (as asked)".to_string(),
            },
        ),
        None => choose_execution(engine),
    };
    if !interrupted && plan.preparation_seconds > 0.0 {
        // In hundredths, so a long preparation shows progress too.
        let chunk = plan.preparation_seconds / PREPARATION_STEPS as f64;
        for k in 1..=PREPARATION_STEPS {
            if !engine.run_for(chunk, execution, interrupt)? {
                interrupted = true;
                break;
            }
            progress(&Progress {
                label: PREPARATION_PROGRESS_LABEL.to_string(),
                done: k,
                total: PREPARATION_STEPS,
            });
        }
    }
    if plan.quench {
        switch_field_off(engine);
    }
    engine.set_temperature(plan.temperature_kelvin)?;
    engine.set_time_seconds(0.0);
    // After a quench or a step the recording's conditions differ from the
    // preparation's: choose again (a 10 K → 0.3 K step wants attempts while
    // hot and the rejection-free execution once cold).
    let (execution, reason) = match settings.execution {
        None => {
            let (recording, why) = choose_execution(engine);
            if recording == execution {
                (execution, reason)
            } else {
                (recording, format!("preparation {reason}; recording {why}"))
            }
        }
        _ => (execution, reason),
    };
    let mut trajectory = if interrupted {
        let mut tr = engine.record(
            0.0,
            settings.sample_interval_seconds,
            execution,
            plan.axis,
            &Interrupt::new(),
            progress,
            &mut (),
        )?;
        tr.interrupted = true;
        tr
    } else {
        engine.record(
            settings.duration_seconds,
            settings.sample_interval_seconds,
            execution,
            plan.axis,
            interrupt,
            progress,
            &mut (),
        )?
    };
    trajectory.temperature_kelvin = plan.temperature_kelvin;
    Ok((trajectory, reason))
}
