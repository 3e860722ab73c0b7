//! Running the monopole commands: tracking through the kinetics (mean-square displacement,
//! distinct sites, hops by gate class), reachable sites in the two search modes, and the
//! picture of one reachable cluster.
//!
//! Physics: physics-reference §5 (kinetics in physical time, gates, tracking) and §8
//! (reachable-site growth). The simulation is stdlib's (`dynamics::Kinetics`,
//! `monopoles::MonopoleTracker`, `monopoles::reachable_sites`); this module prepares the
//! starting state, drives the loops so that it can report progress and stop on interrupt
//! between chunks, and turns the results into tables and a figure.

use std::panic::{catch_unwind, AssertUnwindSafe};
use std::time::Instant;

use icefield_stdlib::control::Progress;
use icefield_stdlib::couplings::CouplingTable;
use icefield_stdlib::dynamics::{
    choose_execution, AcceptanceRule, DipolarKinetics, ExchangeFlipEnergy, Execution,
    KineticEngine, Kinetics, KineticsError, LocalFieldTables, NearestNeighbourFlipEnergy,
    ZeemanField,
};
use icefield_stdlib::engine::{FlipRule, LocalFieldSampler};
use icefield_stdlib::exchange::{CouplingConvention, ExchangeCouplings};
use icefield_stdlib::gating::{GATE_CLASS_COUNT, GATE_CLASS_MAGNITUDES};
use icefield_stdlib::hamiltonian::{charge, NearestNeighbourIce};
use icefield_stdlib::lattice::Pyrochlore;
use icefield_stdlib::loops::LoopMoves;
use icefield_stdlib::metropolis::{initial_configuration, NearestNeighbourMetropolis, Start};
use icefield_stdlib::monopoles::{
    average_growth, open_classes, reachable_sites, render_cluster_svg, MonopoleTracker, ReachMode,
    ReachableCluster,
};
use icefield_stdlib::rng::{splitmix64_mix, RngStreams};

use super::{column, error_at, Runner, PROGRESS_INTERVAL};
use crate::ast::Span;
use crate::check::monopoles::{
    Background, ClusterSpec, MonopolesSpec, Preparation, ReachSpec, TrackSpec, GATE_TABLE_SUFFIX,
};
use crate::diagnostic::{CellError, ErrorKind};
use crate::display;
use crate::plan::GeneralModel;
use crate::units::format_number;
use crate::workspace::{
    DynamicsDecl, ExecutionChoice, Figure, FigureSeries, Model, Provenance, Table,
    TransverseSource, Value, DEFAULT_SEED,
};
use crate::Output;
use icefield_stdlib::scan::coupling_table;

/// Kinetic steps (attempts or events) between two interrupt polls.
const STEPS_PER_POLL: u64 = 1 << 16;
/// Diamond bond (hop) length squared in units of a²: (√3 a/4)² (physics-reference §1,
/// derived). Positions from stdlib are in units of a.
const BOND_SQUARED_IN_A2: f64 = 3.0 / 16.0;
/// A tracking table longer than this is summarised instead of shown.
const SHOWN_ROWS: usize = 30;
/// Random starts tried when placing a monopole pair.
const PAIR_ATTEMPTS: usize = 10_000;
/// Stream indices of the seed (stdlib `RngStreams`): one per use, so that each use draws
/// the same numbers whatever the others do.
const STREAM_START: u64 = 0;
const STREAM_EQUILIBRATION: u64 = 1;
const STREAM_KINETICS: u64 = 2;
const STREAM_PAIRS: u64 = 3;

/// What the monopole commands need of the declared model.
struct KineticModel<'m> {
    cells_per_side: usize,
    j_eff_kelvin: f64,
    /// Exchange shells of a general model (`couplings exchange`).
    exchange: Option<ExchangeCouplings>,
    /// D (K) of a general model (`couplings dipolar`).
    dipolar_kelvin: Option<f64>,
    /// The declared field for the kinetics (`None` without a field or for B = 0).
    field: Option<ZeemanField>,
    /// The declared field for the equilibration engine.
    zeeman: Option<icefield_stdlib::exchange::ZeemanField>,
    dynamics: &'m DynamicsDecl,
    seed: u64,
    lattice_text: String,
    model_text: String,
}

/// Counter-based SplitMix64 draws (Steele, Lea & Flood, OOPSLA 2014, "Fast splittable
/// pseudorandom number generators"): draw k of a stream is mix(key + k·γ), so a stream is
/// one seed key and a counter.
struct Draws {
    key: u64,
    counter: u64,
}

impl Draws {
    fn new(key: u64) -> Self {
        Draws { key, counter: 0 }
    }
    /// A uniform index below `n` by the multiply-shift map (Lemire, ACM Trans. Model.
    /// Comput. Simul. 29, 3 (2019) (memory)); its bias, at most n/2⁶⁴, is far below anything
    /// a placement could show.
    fn below(&mut self, n: usize) -> usize {
        self.counter += 1;
        let x = splitmix64_mix(
            self.key
                .wrapping_add(self.counter.wrapping_mul(0x9e37_79b9_7f4a_7c15)),
        );
        ((x as u128 * n as u128) >> 64) as usize
    }
}

/// The equilibration engine: the fast nearest-neighbour Metropolis engine, or the
/// coupling-table engine when a field or loop moves are needed.
enum Equilibrator<'l> {
    Fast(NearestNeighbourMetropolis<'l>),
    General {
        sampler: LocalFieldSampler<'l>,
        loops: Option<LoopMoves>,
        loops_per_sweep: u64,
    },
}

impl Equilibrator<'_> {
    /// One sweep of N single-flip attempts, then the loop moves (Barkema & Newman, Phys.
    /// Rev. E 57, 1155 (1998)).
    fn sweep(&mut self) {
        match self {
            Equilibrator::Fast(engine) => {
                engine.sweep();
            }
            Equilibrator::General {
                sampler,
                loops,
                loops_per_sweep,
            } => {
                sampler.sweep();
                if let Some(moves) = loops.as_mut() {
                    for _ in 0..*loops_per_sweep {
                        moves.attempt(sampler);
                    }
                }
            }
        }
    }
    fn sigma(&self) -> &[i8] {
        match self {
            Equilibrator::Fast(engine) => engine.sigma(),
            Equilibrator::General { sampler, .. } => sampler.sigma(),
        }
    }
}

/// The clusters drawn by `reachable` / `cluster`, one list per mode.
struct Drawn {
    clusters: Vec<Vec<ReachableCluster>>,
    /// The open gate classes of the rule.
    open: [bool; GATE_CLASS_COUNT],
    interrupted: bool,
}

/// Sends progress at most every `PROGRESS_INTERVAL`.
struct Throttle {
    last: Instant,
}

impl Throttle {
    fn new() -> Self {
        Throttle {
            last: Instant::now(),
        }
    }
    fn report(&mut self, emit: &mut dyn FnMut(Output), label: &str, done: u64, total: u64) {
        if self.last.elapsed() >= PROGRESS_INTERVAL {
            emit(Output::Progress(Progress {
                label: label.to_string(),
                done,
                total,
            }));
            self.last = Instant::now();
        }
    }
}

/// The other tetrahedron of `spin`.
fn across(lat: &Pyrochlore, spin: usize, tet: usize) -> usize {
    let [up, down] = lat.tetrahedra_of(spin);
    if up as usize == tet {
        down as usize
    } else {
        up as usize
    }
}

/// Places one ± monopole pair `separation` hops apart: a self-avoiding string from a
/// neutral tetrahedron, leaving each tetrahedron on one of its "out" spins (σ = +1 out of
/// an up tetrahedron, −1 out of a down one; physics-reference §1) into a neutral one, is
/// flipped. The first tetrahedron then holds −1, the last +1, and the tetrahedra between
/// stay neutral (each loses an out spin and gains one). The ends must not be neighbours
/// (a neighbouring pair can annihilate at once). Returns the tetrahedron of the +1
/// monopole, or `None` if no such string was found.
fn place_pair(
    lat: &Pyrochlore,
    sigma: &mut [i8],
    draws: &mut Draws,
    separation: u32,
) -> Option<usize> {
    let tets = lat.tetrahedron_count();
    let mut path_tets: Vec<usize> = Vec::with_capacity(separation as usize + 1);
    let mut path_spins: Vec<usize> = Vec::with_capacity(separation as usize);
    'attempt: for _ in 0..PAIR_ATTEMPTS {
        path_tets.clear();
        path_spins.clear();
        let start = draws.below(tets);
        if charge(lat, sigma, start) != 0 {
            continue;
        }
        path_tets.push(start);
        let mut t = start;
        for _ in 0..separation {
            let up = lat.is_up(t);
            let mut choices = [0usize; 4];
            let mut count = 0;
            for &s in lat.spins_of(t) {
                let s = s as usize;
                let next = across(lat, s, t);
                if (sigma[s] > 0) == up
                    && charge(lat, sigma, next) == 0
                    && !path_tets.contains(&next)
                {
                    choices[count] = s;
                    count += 1;
                }
            }
            if count == 0 {
                continue 'attempt;
            }
            let s = choices[draws.below(count)];
            t = across(lat, s, t);
            path_spins.push(s);
            path_tets.push(t);
        }
        if lat.diamond_neighbours(start).contains(&(t as u32)) {
            continue;
        }
        for &s in &path_spins {
            sigma[s] = -sigma[s];
        }
        debug_assert_eq!(charge(lat, sigma, start), -1);
        debug_assert_eq!(charge(lat, sigma, t), 1);
        return Some(t);
    }
    None
}

fn describe_preparation(preparation: &Preparation, temperature_kelvin: f64) -> String {
    let mut text = match preparation.background {
        Background::Random => "random".to_string(),
        Background::Ice => "ice".to_string(),
    };
    if preparation.equilibration_sweeps > 0 {
        text.push_str(&format!(
            ", {} Metropolis sweeps at {} K",
            preparation.equilibration_sweeps,
            format_number(temperature_kelvin)
        ));
        if preparation.loops_per_sweep > 0 {
            text.push_str(&format!(
                " with {} loop moves each",
                preparation.loops_per_sweep
            ));
        }
    }
    if let Some(k) = preparation.pair_separation_hops {
        text.push_str(&format!(", then a ± monopole pair {k} hops apart"));
    }
    text
}

fn seconds(value: f64) -> String {
    format!("{} s", format_number(value))
}

impl Runner<'_> {
    pub(super) fn run_monopoles(
        &mut self,
        spec: &MonopolesSpec,
        model: &Model,
        span: Span,
        keyword: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let _ = span;
        match spec {
            MonopolesSpec::Track(spec) => self.track(spec, model, keyword, emit),
            MonopolesSpec::Reachable(spec) => self.reachable(spec, model, keyword, emit),
            MonopolesSpec::Cluster(spec) => self.cluster(spec, model, keyword, emit),
        }
    }

    /// The model as the monopole commands need it, or a clear error.
    fn kinetic_model<'m>(
        &self,
        model: &'m Model,
        keyword: Span,
        what: &str,
    ) -> Result<KineticModel<'m>, CellError> {
        let fail = |kind, message: String| Err(error_at(self.source, kind, keyword, message));
        let (Some(lattice), Some(couplings)) = (&model.lattice, &model.couplings) else {
            return fail(
                ErrorKind::Name,
                format!("`{what}` needs a lattice and couplings declared first"),
            );
        };
        let Some(dynamics) = &model.dynamics else {
            return Err(CellError::from_problems(
                self.source,
                &[crate::diagnostic::Problem::new(
                    ErrorKind::Name,
                    keyword,
                    format!(
                        "no dynamics rule declared yet: `{what}` follows the rule's attempt times"
                    ),
                )
                .with_help(
                    "declare a dynamics rule first: dynamics single_flip, attempt_time = 1 µs",
                )],
            ));
        };
        if dynamics.transverse == TransverseSource::Dipolar && what != "monopoles" {
            return fail(
                ErrorKind::NotImplemented,
                format!(
                    "`{what}` judges open spins by the six-neighbour gate classes; the dipolar \
                     transverse-field what-if is offered for `monopoles` and `evolve` only in this version"
                ),
            );
        }
        let (field, zeeman) = match &model.field {
            Some(decl) => {
                let b = decl.field.field_tesla;
                let magnitude = (b[0] * b[0] + b[1] * b[1] + b[2] * b[2]).sqrt();
                if magnitude > 0.0 {
                    (
                        Some(ZeemanField {
                            field_tesla: magnitude,
                            direction: b,
                            moment_bohr_magnetons: decl.field.moment_bohr_magnetons,
                        }),
                        Some(decl.field),
                    )
                } else {
                    (None, None)
                }
            }
            None => (None, None),
        };
        let mut model_text = couplings.describe();
        if let Some(decl) = &model.field {
            model_text.push_str(&format!("; field {}", decl.describe()));
        }
        Ok(KineticModel {
            cells_per_side: lattice.cells_per_side,
            j_eff_kelvin: couplings.j_eff_kelvin,
            exchange: couplings.exchange,
            dipolar_kelvin: couplings.dipolar_kelvin,
            field,
            zeeman,
            dynamics,
            seed: model.seed.unwrap_or(DEFAULT_SEED),
            lattice_text: lattice.describe(),
            model_text,
        })
    }

    /// The equilibration engine for `preparation` at `temperature_kelvin`.
    #[allow(clippy::too_many_arguments)]
    fn equilibrator<'l>(
        &self,
        lat: &'l Pyrochlore,
        table: Option<&'l CouplingTable>,
        km: &KineticModel<'_>,
        preparation: &Preparation,
        temperature_kelvin: f64,
        streams: RngStreams,
        keyword: Span,
    ) -> Result<Equilibrator<'l>, CellError> {
        let start = match preparation.background {
            Background::Random => Start::Random,
            Background::Ice => Start::IceState,
        };
        let sigma = initial_configuration(lat, start, &mut streams.stream(STREAM_START));
        let rng = streams.stream(STREAM_EQUILIBRATION);
        match table {
            None => NearestNeighbourMetropolis::from_configuration(
                lat,
                &NearestNeighbourIce::new(km.j_eff_kelvin),
                temperature_kelvin,
                sigma,
                rng,
            )
            .map(Equilibrator::Fast)
            .ok_or_else(|| self.runtime(keyword, "the starting configuration is malformed")),
            Some(table) => {
                let sampler = LocalFieldSampler::new(
                    lat,
                    table,
                    temperature_kelvin,
                    FlipRule::Metropolis,
                    sigma,
                    rng,
                )
                .map_err(|e| self.runtime(keyword, e.to_string()))?;
                Ok(Equilibrator::General {
                    sampler,
                    loops: (preparation.loops_per_sweep > 0).then(|| LoopMoves::new(lat)),
                    loops_per_sweep: preparation.loops_per_sweep,
                })
            }
        }
    }

    /// The coupling table the equilibration needs (a field or loop moves), if any.
    fn equilibration_table(
        &self,
        lat: &Pyrochlore,
        km: &KineticModel<'_>,
        preparation: &Preparation,
        keyword: Span,
    ) -> Result<Option<CouplingTable>, CellError> {
        let nearest = km.exchange.is_none() && km.dipolar_kelvin.is_none();
        if nearest && km.zeeman.is_none() && preparation.loops_per_sweep == 0 {
            return Ok(None);
        }
        let general = GeneralModel {
            exchange: km.exchange.or(nearest.then(|| {
                ExchangeCouplings::nearest_neighbour(
                    km.j_eff_kelvin,
                    CouplingConvention::IsingPseudospins,
                )
            })),
            dipolar_kelvin: km.dipolar_kelvin,
            zeeman: km.zeeman,
            direction: None,
            rule: FlipRule::Metropolis,
            loops_per_sweep: preparation.loops_per_sweep,
            ladder: Default::default(),
        };
        coupling_table(lat, &general)
            .map(Some)
            .map_err(|e| self.runtime(keyword, e.to_string()))
    }

    /// Runs `sweeps` sweeps; `false` if interrupted.
    fn sweeps(
        &self,
        engine: &mut Equilibrator<'_>,
        sweeps: u64,
        label: &str,
        throttle: &mut Throttle,
        emit: &mut dyn FnMut(Output),
    ) -> bool {
        for k in 0..sweeps {
            if self.interrupt.is_requested() {
                return false;
            }
            engine.sweep();
            throttle.report(emit, label, k + 1, sweeps);
        }
        true
    }

    fn track(
        &mut self,
        spec: &TrackSpec,
        model: &Model,
        keyword: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let km = self.kinetic_model(model, keyword, "monopoles")?;
        let lat =
            Pyrochlore::new(km.cells_per_side).map_err(|e| self.runtime(keyword, e.to_string()))?;
        let streams = RngStreams::new(km.seed);
        let t = spec.temperature_kelvin;
        let mut throttle = Throttle::new();
        let table = self.equilibration_table(&lat, &km, &spec.preparation, keyword)?;
        let mut equilibrator = self.equilibrator(
            &lat,
            table.as_ref(),
            &km,
            &spec.preparation,
            t,
            streams,
            keyword,
        )?;
        let label = format!("{}: equilibrating (sweeps)", spec.target);
        if !self.sweeps(
            &mut equilibrator,
            spec.preparation.equilibration_sweeps,
            &label,
            &mut throttle,
            emit,
        ) {
            return Err(self.interrupted(
                keyword,
                format!(
                    "interrupted while equilibrating; nothing was recorded in `{}`",
                    spec.target
                ),
            ));
        }
        let mut sigma = equilibrator.sigma().to_vec();
        drop(equilibrator);
        if let Some(k) = spec.preparation.pair_separation_hops {
            let mut draws = Draws::new(streams.stream_key(STREAM_PAIRS));
            if place_pair(&lat, &mut sigma, &mut draws, k).is_none() {
                return Err(self.runtime(
                    keyword,
                    format!(
                        "could not place a monopole pair {k} hops apart through neutral tetrahedra \
                         ({PAIR_ATTEMPTS} starts tried); use a smaller `separation` or a larger lattice"
                    ),
                ));
            }
        }
        let decl = km.dynamics;
        let transverse = match decl.transverse {
            TransverseSource::Neighbours => None,
            TransverseSource::Dipolar => self.transverse_rate_law(decl, keyword, emit)?,
        };
        // Dipolar models, and every model under the transverse what-if, run on the
        // local-field engine; its tables outlive the tracking (the tracker borrows them).
        let local_field = km.dipolar_kelvin.is_some() || transverse.is_some();
        let tables = if local_field {
            let model =
                super::dynamics::kinetics_model_of(km.j_eff_kelvin, km.exchange, km.dipolar_kelvin);
            Some(
                LocalFieldTables::build(&lat, &model, transverse.is_some())
                    .map_err(|e| self.runtime(keyword, e.to_string()))?,
            )
        } else {
            None
        };
        let rng = streams.stream(STREAM_KINETICS);
        let fail = |e: KineticsError| self.runtime(keyword, e.to_string());
        let tracked = match (&km.exchange, &tables) {
            (None, None) => {
                let energy = NearestNeighbourFlipEnergy::new(
                    &NearestNeighbourIce::new(km.j_eff_kelvin),
                    km.field.as_ref(),
                )
                .ok_or(KineticsError::InvalidField)
                .map_err(fail)?;
                let mut engine = Kinetics::new(
                    &lat,
                    energy,
                    sigma,
                    decl.acceptance,
                    t,
                    decl.attempt_times.clone(),
                    rng,
                )
                .map_err(fail)?;
                self.track_engine(&mut engine, spec, decl.execution, &mut throttle, emit)
            }
            (Some(exchange), None) => {
                let energy =
                    ExchangeFlipEnergy::new(&lat, exchange, km.field.as_ref()).map_err(fail)?;
                let mut engine = Kinetics::new(
                    &lat,
                    energy,
                    sigma,
                    decl.acceptance,
                    t,
                    decl.attempt_times.clone(),
                    rng,
                )
                .map_err(fail)?;
                self.track_engine(&mut engine, spec, decl.execution, &mut throttle, emit)
            }
            (_, Some(tables)) => {
                let gating = tables.gating(&lat, &decl.attempt_times, transverse.as_ref());
                let single = ZeemanField::single_spin_kelvin(km.field.as_ref()).map_err(fail)?;
                let mut engine = DipolarKinetics::new(
                    &lat,
                    &tables.pairs,
                    single,
                    gating,
                    sigma,
                    decl.acceptance,
                    t,
                    rng,
                )
                .map_err(fail)?;
                self.track_engine(&mut engine, spec, decl.execution, &mut throttle, emit)
            }
        };
        let Tracked {
            times,
            distinct,
            counts,
            hops,
            tracker,
            interrupted,
            execution_text,
        } = tracked;
        let dt = spec.sample_interval_seconds;
        let samples = (spec.duration_seconds / dt * (1.0 + 1e-12)).floor() as usize + 1;
        let kept = times.len();
        let history = tracker.into_history(times.clone(), interrupted);
        let mut msd = vec![0.0];
        msd.extend(
            history
                .mean_square_displacement(kept.saturating_sub(1))
                .iter()
                .map(|p| p.mean_square_displacement / BOND_SQUARED_IN_A2),
        );
        // Monopole time (s) on the grid, for the hop rate quoted in the provenance.
        let exposure: f64 = counts.iter().take(kept.saturating_sub(1)).sum::<f64>() * dt;
        let fastest = decl.attempt_times.shortest_seconds();
        let source = format!(
            "monopole tracking: {} at {} K sampled every {}; dynamics {}, {}, {execution_text}; \
             {} hops{}, {} pair creations, {} annihilations; msd in units of the diamond bond (hop) \
             length squared, (√3 a/4)²; start: {}",
            seconds(spec.duration_seconds),
            format_number(t),
            seconds(dt),
            acceptance_name(decl.acceptance),
            if decl.transverse == TransverseSource::Dipolar {
                format!("{}, h⊥ from the dipolar sum", decl.rates_description)
            } else {
                decl.rates_description.clone()
            },
            history.hops,
            if exposure > 0.0 {
                format!(
                    " ({} per monopole per fastest attempt time {})",
                    format_number(history.hops as f64 * fastest / exposure),
                    seconds(fastest)
                )
            } else {
                String::new()
            },
            history.creations,
            history.annihilations,
            describe_preparation(&spec.preparation, t),
        );
        let provenance = Provenance {
            source,
            lattice: km.lattice_text.clone(),
            model: km.model_text.clone(),
            seed: km.seed,
            measurement_sweeps: 0,
            equilibration_sweeps: spec.preparation.equilibration_sweeps,
            sample_every_sweeps: 0,
            start: describe_preparation(&spec.preparation, t),
            temperatures_requested: 1,
            interrupted,
            cell: self.cell,
            kinetics: None,
        };
        let main = Table {
            name: spec.target.clone(),
            columns: vec![
                column("t", "s", times, None),
                column("msd", "bond²", msd, None),
                column("distinct_sites", "", distinct, None),
                column("monopoles", "", counts, None),
                column("hops", "", hops, None),
            ],
            provenance: Some(provenance.clone()),
        };
        let total_hops = history.hops.max(1) as f64;
        let gates_name = format!("{}{GATE_TABLE_SUFFIX}", spec.target);
        let gates = Table {
            name: gates_name.clone(),
            columns: vec![
                column(
                    "gate_class",
                    "",
                    (0..GATE_CLASS_COUNT).map(|c| c as f64).collect(),
                    None,
                ),
                column("h_perp", "g", GATE_CLASS_MAGNITUDES.to_vec(), None),
                column(
                    "attempt_time",
                    "s",
                    decl.attempt_times.attempt_time_seconds.to_vec(),
                    None,
                ),
                column(
                    "hops",
                    "",
                    history.hop_gate_classes.iter().map(|&h| h as f64).collect(),
                    None,
                ),
                column(
                    "share",
                    "",
                    history
                        .hop_gate_classes
                        .iter()
                        .map(|&h| h as f64 / total_hops)
                        .collect(),
                    None,
                ),
            ],
            provenance: Some(provenance),
        };
        self.workspace
            .insert(&spec.target, Value::Table(main.clone()));
        self.workspace
            .insert(&gates_name, Value::Table(gates.clone()));
        if main.row_count() <= SHOWN_ROWS {
            emit(Output::Display(display::table(&main, None)));
        } else {
            emit(Output::Stream {
                text: format!(
                    "{name}: {rows} grid times from 0 to {end}; columns t [s], msd [bond²], distinct_sites, \
                     monopoles, hops\nshow it with `table {name}` or `plot {name}.msd against t, xscale = log, \
                     yscale = log`\n",
                    name = spec.target,
                    rows = main.row_count(),
                    end = seconds(values_last(&main)),
                ),
            });
        }
        emit(Output::Display(display::table(&gates, None)));
        if interrupted {
            return Err(self.interrupted(
                keyword,
                format!(
                    "interrupted: kept {kept} of {samples} samples in `{}` (hops by gate class in `{gates_name}`)",
                    spec.target
                ),
            ));
        }
        Ok(())
    }

    /// Prepares the background and draws the clusters of `reachable` / `cluster`:
    /// `samples` states, each the background (re-equilibrated by `between` sweeps after the
    /// first) with a pair placed in it, and from its +1 monopole one cluster per mode.
    /// Returns the clusters by mode and whether the run was interrupted.
    #[allow(clippy::too_many_arguments)]
    fn clusters(
        &mut self,
        km: &KineticModel<'_>,
        preparation: &Preparation,
        temperature_kelvin: f64,
        open_ratio: f64,
        max_hops: u32,
        modes: &[ReachMode],
        samples: u64,
        between: u64,
        target: &str,
        keyword: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<Drawn, CellError> {
        let lat =
            Pyrochlore::new(km.cells_per_side).map_err(|e| self.runtime(keyword, e.to_string()))?;
        let streams = RngStreams::new(km.seed);
        let open = open_classes(&km.dynamics.attempt_times, open_ratio);
        let table = self.equilibration_table(&lat, km, preparation, keyword)?;
        let mut equilibrator = self.equilibrator(
            &lat,
            table.as_ref(),
            km,
            preparation,
            temperature_kelvin,
            streams,
            keyword,
        )?;
        let mut throttle = Throttle::new();
        let mut clusters: Vec<Vec<ReachableCluster>> = vec![Vec::new(); modes.len()];
        let label = format!("{target}: equilibrating (sweeps)");
        if !self.sweeps(
            &mut equilibrator,
            preparation.equilibration_sweeps,
            &label,
            &mut throttle,
            emit,
        ) {
            return Ok(Drawn {
                clusters,
                open,
                interrupted: true,
            });
        }
        let separation = preparation.pair_separation_hops.unwrap_or(2);
        let mut draws = Draws::new(streams.stream_key(STREAM_PAIRS));
        let label = format!("{target}: reachable-site samples");
        for sample in 0..samples {
            if self.interrupt.is_requested() {
                return Ok(Drawn {
                    clusters,
                    open,
                    interrupted: true,
                });
            }
            if sample > 0 && !self.sweeps(&mut equilibrator, between, &label, &mut throttle, emit) {
                return Ok(Drawn {
                    clusters,
                    open,
                    interrupted: true,
                });
            }
            let mut sigma = equilibrator.sigma().to_vec();
            let Some(plus) = place_pair(&lat, &mut sigma, &mut draws, separation) else {
                return Err(self.runtime(
                    keyword,
                    format!(
                        "could not place a monopole pair {separation} hops apart through neutral tetrahedra \
                         ({PAIR_ATTEMPTS} starts tried); use a smaller `separation`, a larger lattice or a lower temperature"
                    ),
                ));
            };
            for (slot, &mode) in clusters.iter_mut().zip(modes) {
                slot.push(reachable_sites(&lat, &sigma, plus, 1, open, max_hops, mode));
            }
            throttle.report(emit, &label, sample + 1, samples);
        }
        Ok(Drawn {
            clusters,
            open,
            interrupted: false,
        })
    }

    fn reachable(
        &mut self,
        spec: &ReachSpec,
        model: &Model,
        keyword: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let km = self.kinetic_model(model, keyword, "reachable")?;
        let mut modes = Vec::new();
        if spec.modes.path() {
            modes.push(ReachMode::PathDependent);
        }
        if spec.modes.r#static() {
            modes.push(ReachMode::StaticSnapshot);
        }
        let Drawn {
            clusters,
            open,
            interrupted,
        } = self.clusters(
            &km,
            &spec.preparation,
            spec.temperature_kelvin,
            spec.open_ratio,
            spec.max_hops,
            &modes,
            spec.samples,
            spec.decorrelation_sweeps,
            &spec.target,
            keyword,
            emit,
        )?;
        let kept = clusters.first().map(Vec::len).unwrap_or(0);
        if kept == 0 {
            return Err(self.interrupted(
                keyword,
                format!(
                    "interrupted before the first sample; nothing was stored in `{}`",
                    spec.target
                ),
            ));
        }
        let mut columns = vec![column(
            "n",
            "",
            (0..=spec.max_hops).map(f64::from).collect(),
            None,
        )];
        for (mode, set) in modes.iter().zip(&clusters) {
            let growth = average_growth(set);
            let name = match mode {
                ReachMode::PathDependent => "sites_path",
                ReachMode::StaticSnapshot => "sites_static",
            };
            columns.push(column(
                name,
                "",
                growth.iter().map(|e| e.mean).collect(),
                Some(growth.iter().map(|e| e.error).collect()),
            ));
        }
        let source = format!(
            "reachable diamond sites within n hops: {kept} of {} samples, each from the +1 end of a monopole pair \
             {} hops apart placed in a state prepared at {} K (start: {}; {} sweeps between samples); open gate \
             classes {} (attempt time at most {}× the fastest) of the rule {}; sites_path: path-dependent search \
             (each hop flips its spin, which changes the gates of the next), sites_static: static-snapshot \
             approximation (the gates of the snapshot); mean ± standard error over samples",
            spec.samples,
            spec.preparation.pair_separation_hops.unwrap_or(2),
            format_number(spec.temperature_kelvin),
            describe_preparation(&spec.preparation, spec.temperature_kelvin),
            spec.decorrelation_sweeps,
            describe_open(open),
            format_number(spec.open_ratio),
            km.dynamics.rates_description,
        );
        let table = Table {
            name: spec.target.clone(),
            columns,
            provenance: Some(Provenance {
                source,
                lattice: km.lattice_text.clone(),
                model: km.model_text.clone(),
                seed: km.seed,
                measurement_sweeps: 0,
                equilibration_sweeps: spec.preparation.equilibration_sweeps,
                sample_every_sweeps: spec.decorrelation_sweeps,
                start: describe_preparation(&spec.preparation, spec.temperature_kelvin),
                temperatures_requested: 1,
                interrupted,
                cell: self.cell,
                kinetics: None,
            }),
        };
        self.workspace
            .insert(&spec.target, Value::Table(table.clone()));
        emit(Output::Display(display::table(&table, None)));
        if interrupted {
            return Err(self.interrupted(
                keyword,
                format!(
                    "interrupted: kept {kept} of {} samples in `{}`",
                    spec.samples, spec.target
                ),
            ));
        }
        Ok(())
    }

    fn cluster(
        &mut self,
        spec: &ClusterSpec,
        model: &Model,
        keyword: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let km = self.kinetic_model(model, keyword, "cluster")?;
        let mode = if spec.path_dependent {
            ReachMode::PathDependent
        } else {
            ReachMode::StaticSnapshot
        };
        let Drawn {
            clusters,
            open,
            interrupted,
        } = self.clusters(
            &km,
            &spec.preparation,
            spec.temperature_kelvin,
            spec.open_ratio,
            spec.max_hops,
            &[mode],
            1,
            0,
            &spec.target,
            keyword,
            emit,
        )?;
        let Some(cluster) = clusters
            .into_iter()
            .next()
            .and_then(|c| c.into_iter().next())
        else {
            let _ = interrupted;
            return Err(self.interrupted(
                keyword,
                format!(
                    "interrupted before the cluster was found; nothing was stored in `{}`",
                    spec.target
                ),
            ));
        };
        let svg = match catch_unwind(AssertUnwindSafe(|| {
            render_cluster_svg(&cluster, spec.width_px, spec.height_px)
        })) {
            Ok(Ok(svg)) => svg,
            Ok(Err(error)) => {
                return Err(self.runtime(keyword, format!("cannot draw the cluster: {error}")))
            }
            Err(_) => {
                return Err(self.runtime(keyword, "the plotting library failed on this cluster"))
            }
        };
        let title = format!(
            "reachable cluster within {} hops at {} K ({}; open gate classes {})",
            spec.max_hops,
            format_number(spec.temperature_kelvin),
            match mode {
                ReachMode::PathDependent => "path-dependent",
                ReachMode::StaticSnapshot => "static snapshot",
            },
            describe_open(open)
        );
        let figure = Figure {
            name: spec.target.clone(),
            title,
            x_label: "n".to_string(),
            x_unit: String::new(),
            y_label: "sites".to_string(),
            y_unit: String::new(),
            series: vec![FigureSeries {
                label: "sites_within".to_string(),
                x: (0..cluster.sites_within.len()).map(|n| n as f64).collect(),
                y: cluster.sites_within.iter().map(|&s| s as f64).collect(),
                y_error: None,
            }],
            svg,
        };
        self.workspace
            .insert(&spec.target, Value::Figure(figure.clone()));
        emit(Output::Display(display::figure(&figure)));
        Ok(())
    }
}

/// Mean distinct sites visited since t = 0 by the monopoles of the initial state that are
/// still alive (NaN when none is).
fn mean_distinct_sites(tracker: &MonopoleTracker<'_>, initial: usize) -> f64 {
    let (sum, alive) = tracker.records()[..initial]
        .iter()
        .filter(|r| r.died_seconds.is_none())
        .fold((0usize, 0usize), |(s, n), r| (s + r.distinct_sites, n + 1));
    if alive == 0 {
        f64::NAN
    } else {
        sum as f64 / alive as f64
    }
}

/// The last grid time of a tracking table.
fn values_last(table: &Table) -> f64 {
    table
        .column("t")
        .and_then(|c| c.values.last().copied())
        .unwrap_or(0.0)
}

/// What one tracking run recorded.
struct Tracked<'l> {
    times: Vec<f64>,
    distinct: Vec<f64>,
    counts: Vec<f64>,
    hops: Vec<f64>,
    tracker: MonopoleTracker<'l>,
    interrupted: bool,
    execution_text: String,
}

impl Runner<'_> {
    /// Tracks monopoles on any engine over the spec's time grid, with progress and
    /// interrupt between chunks; `auto` asks the engine which execution pays.
    fn track_engine<'l, K: KineticEngine<'l>>(
        &self,
        engine: &mut K,
        spec: &TrackSpec,
        choice: ExecutionChoice,
        throttle: &mut Throttle,
        emit: &mut dyn FnMut(Output),
    ) -> Tracked<'l> {
        let (execution, execution_text) = match choice {
            ExecutionChoice::Auto => {
                let (execution, why) = choose_execution(engine);
                (execution, format!("{why} (chosen by `execution = auto`)"))
            }
            ExecutionChoice::AttemptBased => (
                Execution::AttemptBased,
                "attempt-based execution".to_string(),
            ),
            ExecutionChoice::RejectionFree => (
                Execution::RejectionFree,
                "rejection-free execution".to_string(),
            ),
        };
        let dt = spec.sample_interval_seconds;
        let samples = (spec.duration_seconds / dt * (1.0 + 1e-12)).floor() as usize + 1;
        let mut tracker = MonopoleTracker::new(engine.lattice(), engine.sigma());
        let initial = tracker.records().len();
        let mut times = Vec::with_capacity(samples);
        let mut distinct = Vec::with_capacity(samples);
        let mut counts = Vec::with_capacity(samples);
        let mut hops = Vec::with_capacity(samples);
        let mut interrupted = false;
        let label = format!(
            "{}: monopole tracking (samples of simulated time)",
            spec.target
        );
        'grid: for k in 0..samples {
            if k > 0 {
                let target = k as f64 * dt;
                loop {
                    if self.interrupt.is_requested() {
                        interrupted = true;
                        break 'grid;
                    }
                    if engine.advance(target, execution, STEPS_PER_POLL, &mut tracker) {
                        break;
                    }
                    throttle.report(emit, &label, k as u64, samples as u64);
                }
            }
            tracker.sample(k);
            times.push(k as f64 * dt);
            distinct.push(mean_distinct_sites(&tracker, initial));
            counts.push(engine.monopole_count() as f64);
            hops.push(tracker.hop_count() as f64);
            throttle.report(emit, &label, k as u64 + 1, samples as u64);
        }
        Tracked {
            times,
            distinct,
            counts,
            hops,
            tracker,
            interrupted,
            execution_text,
        }
    }
}

fn acceptance_name(rule: AcceptanceRule) -> &'static str {
    match rule {
        AcceptanceRule::Metropolis => "Metropolis",
        AcceptanceRule::Glauber => "Glauber",
    }
}

fn describe_open(open: [bool; GATE_CLASS_COUNT]) -> String {
    let classes: Vec<String> = (0..GATE_CLASS_COUNT)
        .filter(|&c| open[c])
        .map(|c| c.to_string())
        .collect();
    format!("[{}]", classes.join(", "))
}
