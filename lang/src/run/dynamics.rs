//! Running the physical-time kinetics: the dynamics rule, `evolve`, `quench`, `step` commands.
//!
//! A `dynamics` statement becomes the model's `DynamicsDecl` (a rhai rate law is
//! evaluated here, once per gate class, into an attempt-time table: the hot loop never
//! calls rhai). A protocol builds `stdlib::dynamics::KineticsSettings`, runs
//! `run_kinetics` on a worker thread while this thread forwards progress with an estimate
//! of the time left, and stores the time series as a table, partial if interrupted.

use std::panic::{catch_unwind, AssertUnwindSafe};
use std::sync::Mutex;
use std::time::{Duration, Instant};

use icefield_stdlib::control::{Interrupt, Progress};
use icefield_stdlib::dynamics::{
    run_kinetics, Execution, KineticsModel, KineticsResult, KineticsSettings, Protocol,
    ZeemanField as KineticsField, EQUILIBRATION_PROGRESS_LABEL, PREPARATION_PROGRESS_LABEL,
};
use icefield_stdlib::exchange::ExchangeCouplings;
use icefield_stdlib::gating::{
    AttemptTimes, TransverseRateLaw, GATE_CLASS_COUNT, GATE_CLASS_MAGNITUDES,
};
use icefield_stdlib::hamiltonian::NearestNeighbourIce;
use icefield_stdlib::metropolis::Start;

use super::{error_at, Runner, PROGRESS_INTERVAL};
use crate::ast::Span;
use crate::check::dynamics::{
    DynamicsSpec, ProtocolKind, ProtocolSpec, RatesSpec, RuleSpec, TIME_SERIES_COLUMNS,
};
use crate::check::StartState;
use crate::diagnostic::{CellError, ErrorKind};
use crate::units::{format_number, with_unit};
use crate::workspace::{
    format_seconds, Column, CouplingsDecl, DynamicsDecl, ExecutionChoice, KineticsProvenance,
    Model, Provenance, Table, TransverseSource, Value, DEFAULT_SEED,
};
use crate::Output;

/// A progress label is `IDENTITY — DETAIL`: the identity names the run and stays fixed
/// (the kernel keeps one bar per identity), the detail after the separator changes as
/// the run goes (simulated time, time left). Kept in step with
/// `icefield-kernel`'s `mime::progress_identity`.
pub const PROGRESS_DETAIL_SEPARATOR: &str = " — ";

/// The rhai variable a rate law is called with (|h⊥| in units of |g|).
const RATE_LAW_ARGUMENT: &str = "h_over_g";

/// Grid of the dipolar what-if's tabulated rate law: x from 0 to 8 (twice the largest
/// six-neighbour magnitude, 4; beyond it the last value holds) in 256 steps.
const DIPOLAR_LAW_X_MAX: f64 = 8.0;
const DIPOLAR_LAW_POINTS: usize = 257;

impl Runner<'_> {
    pub(super) fn run_dynamics(
        &mut self,
        spec: &DynamicsSpec,
        model: &Model,
        span: Span,
        keyword: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let _ = span;
        match spec {
            DynamicsSpec::Rule(rule) => self.declare_dynamics(rule, emit),
            DynamicsSpec::Protocol(protocol) => self.run_protocol(protocol, model, keyword, emit),
        }
    }

    /// Puts the rule in the model; a rate law is evaluated once per gate class here.
    fn declare_dynamics(
        &mut self,
        rule: &RuleSpec,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let mut decl = rule.declaration();
        if let RatesSpec::Law { function, span } = &rule.rates {
            decl.attempt_times = self.evaluate_rate_law(function, *span, emit)?;
        }
        if !matches!(rule.rates, RatesSpec::Uniform { .. }) {
            // The table the run will use, so a law or preset can be checked by eye.
            emit(Output::Stream {
                text: format!("dynamics: {}\n{}", decl.describe(), decl.attempt_table()),
            });
        }
        self.workspace.model.dynamics = Some(decl);
        Ok(())
    }

    /// Calls the rhai rate law at the four |h⊥|/|g| of the gate classes (0, 2, 2√3, 4;
    /// physics-reference §5) and checks every attempt time it returns.
    fn evaluate_rate_law(
        &mut self,
        function: &str,
        span: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<AttemptTimes, CellError> {
        let values = self.rate_law_values(function, span, &GATE_CLASS_MAGNITUDES, emit)?;
        let mut table = [0.0; GATE_CLASS_COUNT];
        table.copy_from_slice(&values);
        AttemptTimes::from_table(table).map_err(|error| {
            error_at(
                self.source,
                ErrorKind::Value,
                span,
                format!("the rate law `{function}`: {error}"),
            )
        })
    }

    /// The rate law's attempt times (s) at `magnitudes` of |h⊥|/|g|, each checked.
    fn rate_law_values(
        &mut self,
        function: &str,
        span: Span,
        magnitudes: &[f64],
        emit: &mut dyn FnMut(Output),
    ) -> Result<Vec<f64>, CellError> {
        let expression = format!("{function}({RATE_LAW_ARGUMENT})");
        let inputs = [(RATE_LAW_ARGUMENT.to_string(), magnitudes.to_vec())];
        let result = self
            .script
            .evaluate_rows(&expression, &inputs, magnitudes.len());
        self.flush_prints(emit);
        let values = result.map_err(|failure| {
            let kind = if failure.interrupted {
                ErrorKind::Interrupted
            } else {
                ErrorKind::Script
            };
            error_at(
                self.source,
                kind,
                span,
                format!("the rate law `{function}` failed: {}", failure.message),
            )
        })?;
        for (&magnitude, &seconds) in magnitudes.iter().zip(&values) {
            if seconds.is_nan() || seconds <= 0.0 {
                let class = GATE_CLASS_MAGNITUDES
                    .iter()
                    .position(|&m| m == magnitude)
                    .map(|c| format!(" (gate class {c})"))
                    .unwrap_or_default();
                return Err(error_at(
                    self.source,
                    ErrorKind::Value,
                    span,
                    format!(
                        "the rate law `{function}` gives {} for |h⊥| = {} |g|{class}; an \
                         attempt time must be a positive number of seconds",
                        format_number(seconds),
                        format_number((magnitude * 1e6).round() / 1e6)
                    ),
                ));
            }
        }
        Ok(values)
    }

    /// The rate law of the dipolar transverse-field what-if: a declared rhai law is
    /// tabulated at [`DIPOLAR_LAW_POINTS`] points over `0 ≤ x ≤` [`DIPOLAR_LAW_X_MAX`]
    /// (x = |h⊥| in units of one nearest neighbour's transverse field, which is what
    /// |h⊥|/|g| means for the six-neighbour classes); the bimodal preset becomes a step
    /// at x = 1, half-way between the closed class (0) and the smallest open one (2).
    /// `None` for uniform rates, where h⊥ does not matter.
    pub(super) fn transverse_rate_law(
        &mut self,
        dynamics: &DynamicsDecl,
        keyword: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<Option<TransverseRateLaw>, CellError> {
        let fail = |message: String| error_at(self.source, ErrorKind::Value, keyword, message);
        if let Some(function) = &dynamics.rate_law {
            let grid: Vec<f64> = (0..DIPOLAR_LAW_POINTS)
                .map(|k| DIPOLAR_LAW_X_MAX * k as f64 / (DIPOLAR_LAW_POINTS - 1) as f64)
                .collect();
            let times = self.rate_law_values(function, keyword, &grid, emit)?;
            return TransverseRateLaw::Table {
                x_max: DIPOLAR_LAW_X_MAX,
                attempt_time_seconds: times,
            }
            .validate_into()
            .map(Some)
            .map_err(|e| fail(format!("the rate law `{function}`: {e}")));
        }
        let t = dynamics.attempt_times.attempt_time_seconds;
        if dynamics.attempt_times.is_uniform() {
            return Ok(None);
        }
        Ok(Some(TransverseRateLaw::Step {
            threshold: icefield_stdlib::gating::CONTINUOUS_GATE_THRESHOLD,
            fast_seconds: t[1],
            slow_seconds: t[0],
        }))
    }

    fn run_protocol(
        &mut self,
        spec: &ProtocolSpec,
        model: &Model,
        keyword: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let source = self.source;
        let fail = |kind: ErrorKind, message: String| error_at(source, kind, keyword, message);
        let (Some(lattice), Some(couplings)) = (&model.lattice, &model.couplings) else {
            return Err(fail(
                ErrorKind::Name,
                format!(
                    "`{}` needs a lattice and couplings declared first",
                    spec.keyword
                ),
            ));
        };
        let Some(mut dynamics) = model.dynamics.clone() else {
            return Err(fail(
                ErrorKind::Name,
                format!("`{}` needs a dynamics rule declared first", spec.keyword),
            ));
        };
        if dynamics.attempt_times.validate().is_err() {
            if let Some(law) = dynamics.rate_law.clone() {
                // Declared in this cell: the `dynamics` statement that ran just before
                // evaluated the law into the workspace's model.
                dynamics.attempt_times = match &self.workspace.model.dynamics {
                    Some(current)
                        if current.rate_law == dynamics.rate_law
                            && current.attempt_times.validate().is_ok() =>
                    {
                        current.attempt_times.clone()
                    }
                    _ => self.evaluate_rate_law(&law, keyword, emit)?,
                };
            }
        }
        let kinetics_model = kinetics_model(couplings);
        let mut notes = Vec::new();
        let transverse_from_dipolar_sum = match dynamics.transverse {
            TransverseSource::Neighbours => None,
            TransverseSource::Dipolar => {
                let law = self.transverse_rate_law(&dynamics, keyword, emit)?;
                if law.is_none() {
                    notes.push(
                        "`transverse = dipolar` changes nothing with uniform rates: every spin \
                         attempts every τ0 whatever its h⊥"
                            .to_string(),
                    );
                }
                law
            }
        };
        let field = match &spec.protocol {
            ProtocolKind::Quench {
                field_tesla,
                direction,
                moment_bohr_magnetons,
                ..
            } => {
                let moment = moment_bohr_magnetons
                    .or(model.field.as_ref().map(|f| f.field.moment_bohr_magnetons));
                let Some(moment) = moment else {
                    return Err(fail(
                        ErrorKind::Value,
                        "`quench` needs the moment per spin: give `moment = 10 µB`".to_string(),
                    ));
                };
                if model.field.is_some() {
                    notes.push(
                        "the quench field replaces the declared field before t = 0; after t = 0 \
                         the field is zero"
                            .to_string(),
                    );
                }
                Some(KineticsField {
                    field_tesla: *field_tesla,
                    direction: *direction,
                    moment_bohr_magnetons: moment,
                })
            }
            ProtocolKind::Evolve | ProtocolKind::Step { .. } => declared_field(model),
        };
        let execution = match dynamics.execution {
            ExecutionChoice::Auto => None,
            ExecutionChoice::AttemptBased => Some(Execution::AttemptBased),
            ExecutionChoice::RejectionFree => Some(Execution::RejectionFree),
        };
        let protocol = match &spec.protocol {
            ProtocolKind::Evolve => Protocol::Evolve,
            ProtocolKind::Quench {
                preparation_seconds,
                ..
            } => Protocol::FieldQuench {
                preparation_seconds: *preparation_seconds,
            },
            ProtocolKind::Step {
                initial_temperature_kelvin,
                preparation_seconds,
            } => Protocol::TemperatureStep {
                initial_temperature_kelvin: *initial_temperature_kelvin,
                preparation_seconds: *preparation_seconds,
            },
        };
        let settings = KineticsSettings {
            cells_per_side: lattice.cells_per_side,
            model: kinetics_model,
            field,
            temperature_kelvin: spec.temperature_kelvin,
            rule: dynamics.acceptance,
            attempt_times: dynamics.attempt_times.clone(),
            transverse_from_dipolar_sum,
            execution,
            protocol,
            start: start_state(spec.start),
            equilibration_sweeps: spec.equilibration_sweeps,
            duration_seconds: spec.duration_seconds,
            sample_interval_seconds: spec.sample_interval_seconds,
            projection_axis: spec.axis,
            seed: model.seed.unwrap_or(DEFAULT_SEED),
        };
        let started = Instant::now();
        let result = run_with_time_left(&settings, spec, self.interrupt, emit)
            .map_err(|message| fail(ErrorKind::Runtime, message))?;
        let execution_text = execution_description(dynamics.execution, &result);
        let provenance = Provenance {
            source: spec.description.clone(),
            lattice: lattice.describe(),
            model: match &model.field {
                Some(f) => format!("{}; field {}", couplings.describe(), f.describe()),
                None => couplings.describe(),
            },
            seed: settings.seed,
            measurement_sweeps: 0,
            equilibration_sweeps: spec.equilibration_sweeps,
            sample_every_sweeps: 0,
            start: format!(
                "{:?}, {} Metropolis sweeps at {} first",
                settings.start,
                spec.equilibration_sweeps,
                with_unit(start_temperature(spec), "K")
            ),
            temperatures_requested: 1,
            interrupted: result.trajectory.interrupted,
            cell: self.cell,
            kinetics: Some(KineticsProvenance {
                protocol: spec.description.clone(),
                dynamics: dynamics.describe(),
                execution: execution_text.clone(),
                temperature_kelvin: spec.temperature_kelvin,
                duration_seconds: spec.duration_seconds,
                sample_interval_seconds: spec.sample_interval_seconds,
                samples_requested: spec.samples,
                flips: result.trajectory.flips,
            }),
        };
        let table = series_table(&spec.target, &result, provenance);
        let rows = table.row_count();
        self.workspace.insert(&spec.target, Value::Table(table));
        for note in &notes {
            emit(Output::Stream {
                text: format!("note: {note}\n"),
            });
        }
        if result.trajectory.interrupted {
            let reached = rows.saturating_sub(1) as f64 * spec.sample_interval_seconds;
            return Err(fail(
                ErrorKind::Interrupted,
                format!(
                    "interrupted at t = {} of {}: kept {rows} of {} samples in `{}` (its \
                     provenance says interrupted)",
                    format_seconds(reached),
                    format_seconds(spec.duration_seconds),
                    spec.samples,
                    spec.target
                ),
            ));
        }
        emit(Output::Stream {
            text: format!(
                "{}: {rows} samples, {}; dynamics {}; execution {}; {} flips in {:.1} s of \
                 computing\n",
                spec.target,
                spec.description,
                dynamics.describe(),
                execution_text,
                result.trajectory.flips,
                started.elapsed().as_secs_f64()
            ),
        });
        Ok(())
    }
}

/// The Hamiltonian of a physical-time run: the nearest-neighbour model runs on the
/// discrete engine with J_eff, exchange shells on the discrete engine with shell-count
/// classes, anything with the dipolar term on the local-field engine.
fn kinetics_model(couplings: &CouplingsDecl) -> KineticsModel {
    kinetics_model_of(
        couplings.j_eff_kelvin,
        couplings.exchange,
        couplings.dipolar_kelvin,
    )
}

/// [`kinetics_model`] from its parts (the monopole commands keep them apart).
pub(super) fn kinetics_model_of(
    j_eff_kelvin: f64,
    exchange: Option<ExchangeCouplings>,
    dipolar_kelvin: Option<f64>,
) -> KineticsModel {
    match (exchange, dipolar_kelvin) {
        (_, Some(d_kelvin)) => KineticsModel::dipolar(exchange, d_kelvin),
        (Some(exchange), None) => KineticsModel::Exchange(exchange),
        (None, None) => KineticsModel::NearestNeighbour(NearestNeighbourIce { j_eff_kelvin }),
    }
}

/// The execution that ran, in words (with the reason when `execution = auto` chose).
fn execution_description(choice: ExecutionChoice, result: &KineticsResult) -> String {
    let engine = match (
        &result.settings.model,
        &result.settings.transverse_from_dipolar_sum,
    ) {
        (KineticsModel::Dipolar { .. }, _) | (_, Some(_)) => "thinning over rate bins",
        _ => "n-fold way",
    };
    match (choice, result.trajectory.execution) {
        (ExecutionChoice::Auto, _) => format!(
            "{} (chosen by `execution = auto`{})",
            result.execution_reason,
            match result.trajectory.execution {
                Execution::RejectionFree => format!("; {engine}"),
                Execution::AttemptBased => String::new(),
            }
        ),
        (_, Execution::AttemptBased) => "attempt-based".to_string(),
        (_, Execution::RejectionFree) => format!("rejection-free ({engine})"),
    }
}

/// The declared field as the kinetics engine takes it (`None` for a zero field).
fn declared_field(model: &Model) -> Option<KineticsField> {
    let field = model.field.as_ref()?;
    let b = field.field.field_tesla;
    let magnitude = (b[0] * b[0] + b[1] * b[1] + b[2] * b[2]).sqrt();
    (magnitude > 0.0).then(|| KineticsField {
        field_tesla: magnitude,
        direction: field.direction.unwrap_or([
            b[0] / magnitude,
            b[1] / magnitude,
            b[2] / magnitude,
        ]),
        moment_bohr_magnetons: field.field.moment_bohr_magnetons,
    })
}

fn start_state(start: StartState) -> Start {
    match start {
        StartState::Random => Start::Random,
        StartState::Ice => Start::IceState,
        StartState::AllInAllOut => Start::AllInAllOut,
    }
}

/// The temperature the equilibration sweeps run at.
fn start_temperature(spec: &ProtocolSpec) -> f64 {
    match spec.protocol {
        ProtocolKind::Step {
            initial_temperature_kelvin,
            ..
        } => initial_temperature_kelvin,
        _ => spec.temperature_kelvin,
    }
}

/// The time series as a table (CONTRACT: t [s], M [μ] on the run's axis, Mx, My, Mz [μ],
/// monopole_density = Σ|Q|/N, double_charge_density = fraction of tetrahedra with |Q| = 2).
fn series_table(name: &str, result: &KineticsResult, provenance: Provenance) -> Table {
    let trajectory = &result.trajectory;
    let spins = trajectory.spin_count.max(1) as f64;
    let tetrahedra = spins / 2.0;
    let component = |c: usize| trajectory.magnetisation.iter().map(|m| m[c]).collect();
    let values: [Vec<f64>; 8] = [
        trajectory.times_seconds.clone(),
        trajectory.magnetisation_projection.clone(),
        component(0),
        component(1),
        component(2),
        trajectory
            .monopole_count
            .iter()
            .map(|&q| q as f64 / spins)
            .collect(),
        trajectory
            .double_charge_count
            .iter()
            .map(|&d| d as f64 / tetrahedra)
            .collect(),
        // Per spin, as the `energy` measure of a scan.
        trajectory
            .energy_kelvin
            .iter()
            .map(|&e| e / spins)
            .collect(),
    ];
    let columns = TIME_SERIES_COLUMNS
        .iter()
        .zip(values)
        .map(|((column, unit), values)| Column {
            name: column.to_string(),
            unit: unit.to_string(),
            values,
            errors: None,
            derived_from: None,
        })
        .collect();
    Table {
        name: name.to_string(),
        columns,
        provenance: Some(provenance),
    }
}

/// Estimates the wall-clock time left from the rate at which samples arrive (measured
/// from the first report of the recording, so equilibration and preparation do not
/// distort it).
#[derive(Default)]
struct TimeLeft {
    first: Option<(Instant, u64)>,
}

impl TimeLeft {
    fn estimate(&mut self, progress: &Progress, now: Instant) -> Option<Duration> {
        let Some((t0, d0)) = self.first else {
            if progress.done > 0 {
                self.first = Some((now, progress.done));
            }
            return None;
        };
        let done = progress.done.checked_sub(d0).filter(|d| *d > 0)?;
        let per_sample = now.duration_since(t0).as_secs_f64() / done as f64;
        let left = progress.total.saturating_sub(progress.done) as f64 * per_sample;
        Some(Duration::from_secs_f64(left.min(1e9)))
    }
}

/// "about 12 s", "about 3 min", "about 1.5 h".
fn describe_time_left(left: Duration) -> String {
    let s = left.as_secs_f64();
    if s < 1.0 {
        "less than a second left".to_string()
    } else if s < 120.0 {
        format!("about {} s left", s.round())
    } else if s < 7200.0 {
        format!("about {} min left", (s / 60.0).round())
    } else {
        format!("about {:.1} h left", s / 3600.0)
    }
}

fn progress_label(spec: &ProtocolSpec, progress: &Progress, left: Option<Duration>) -> String {
    let identity = format!("{}: {}", spec.target, spec.keyword);
    let detail = if progress.label == EQUILIBRATION_PROGRESS_LABEL {
        format!(
            "equilibrating: {} of {} sweeps",
            progress.done, progress.total
        )
    } else if progress.label == PREPARATION_PROGRESS_LABEL {
        format!("preparing: {} %", progress.done)
    } else if progress.done == 0 {
        "equilibrating and preparing".to_string()
    } else {
        let t = (progress.done - 1) as f64 * spec.sample_interval_seconds;
        format!(
            "t = {} of {}, {}",
            format_seconds(t),
            format_seconds(spec.duration_seconds),
            left.map(describe_time_left)
                .unwrap_or_else(|| "estimating the time left".to_string())
        )
    };
    format!("{identity}{PROGRESS_DETAIL_SEPARATOR}{detail}")
}

/// Runs the kinetics on a worker thread while this thread forwards throttled progress
/// with the estimated time left. The worker polls the interrupt itself (stdlib checks it
/// every 2^18 steps) and returns the samples it has.
fn run_with_time_left(
    settings: &KineticsSettings,
    spec: &ProtocolSpec,
    interrupt: &Interrupt,
    emit: &mut dyn FnMut(Output),
) -> Result<KineticsResult, String> {
    let latest: Mutex<Option<Progress>> = Mutex::new(None);
    let callback = |p: &Progress| {
        if let Ok(mut slot) = latest.lock() {
            *slot = Some(p.clone());
        }
    };
    let mut time_left = TimeLeft::default();
    let mut forward = |p: Progress, emit: &mut dyn FnMut(Output)| {
        // Equilibration and preparation come before the first sample: the bar stays at
        // zero samples and the label says how far they are.
        let before_recording =
            p.label == EQUILIBRATION_PROGRESS_LABEL || p.label == PREPARATION_PROGRESS_LABEL;
        let left = if before_recording {
            None
        } else {
            time_left.estimate(&p, Instant::now())
        };
        emit(Output::Progress(Progress {
            label: progress_label(spec, &p, left),
            done: if before_recording { 0 } else { p.done },
            total: spec.samples,
        }));
    };
    forward(
        Progress {
            label: String::new(),
            done: 0,
            total: spec.samples,
        },
        emit,
    );
    std::thread::scope(|scope| {
        let worker = scope.spawn(|| {
            catch_unwind(AssertUnwindSafe(|| {
                run_kinetics(settings, interrupt, &callback)
            }))
        });
        let mut last_sent = Instant::now();
        while !worker.is_finished() {
            std::thread::sleep(Duration::from_millis(20));
            if last_sent.elapsed() >= PROGRESS_INTERVAL {
                let progress = latest.lock().ok().and_then(|mut slot| slot.take());
                if let Some(p) = progress {
                    forward(p, emit);
                    last_sent = Instant::now();
                }
            }
        }
        let outcome = worker.join();
        let outcome = match outcome {
            Ok(Ok(result)) => result.map_err(|e| e.to_string()),
            _ => Err("the kinetics run failed inside the simulation library".to_string()),
        };
        // The bar ends where the run stopped.
        if let Ok(result) = &outcome {
            let done = result.trajectory.times_seconds.len() as u64;
            forward(
                Progress {
                    label: String::new(),
                    done,
                    total: spec.samples,
                },
                emit,
            );
        }
        outcome
    })
}
