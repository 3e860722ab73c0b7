//! Running the equilibrium runs beyond `scan`: `anneal` (one chain carried through the
//! temperatures), on the scan machinery (stdlib::scan::run_general_scan with
//! `Ladder::Anneal`).

use std::panic::{catch_unwind, AssertUnwindSafe};
use std::sync::Mutex;
use std::time::{Duration, Instant};

use icefield_stdlib::control::{Progress, ProgressFn};
use icefield_stdlib::heatmap::render_heatmap_svg;
use icefield_stdlib::lattice::Pyrochlore;
use icefield_stdlib::scan::sample_configurations;
use icefield_stdlib::structure_factor::{
    q_line, structure_factor_at, structure_factor_plane, Channel, FormFactor, QPlane,
    StructureFactorSettings,
};

use super::{column, error_at, Runner, PROGRESS_INTERVAL};
use crate::ast::Span;
use crate::check::equilibrium::{
    EquilibriumSpec, QGeometry, StructureFactorSpec, STRUCTURE_FACTOR_UNIT,
};
use crate::check::ScanSpec;
use crate::diagnostic::{CellError, ErrorKind};
use crate::display::{self, header};
use crate::plan::{scan_step, Ladder, ScanEngine};
use crate::units::format_number;
use crate::workspace::{Figure, Model, Provenance, Table, Value};
use crate::Output;

impl Runner<'_> {
    pub(super) fn run_equilibrium(
        &mut self,
        spec: &EquilibriumSpec,
        model: &Model,
        span: Span,
        keyword: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let _ = span;
        match spec {
            EquilibriumSpec::Anneal(scan) => {
                let step = scan_step(scan, model)
                    .map_err(|message| error_at(self.source, ErrorKind::Name, keyword, message))?;
                self.scan(&step, keyword, emit)
            }
            EquilibriumSpec::StructureFactor(sf) => {
                self.run_structure_factor(sf, model, keyword, emit)
            }
        }
    }
}

impl Runner<'_> {
    fn run_structure_factor(
        &mut self,
        spec: &StructureFactorSpec,
        model: &Model,
        keyword: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let fail = |runner: &Self, kind: ErrorKind, message: String| {
            error_at(runner.source, kind, keyword, message)
        };
        // The model on the coupling-table engine, through the scan planner.
        let probe = ScanSpec {
            target: spec.target.clone(),
            temperatures_kelvin: vec![spec.temperature_kelvin],
            measurement_sweeps: spec.sweeps_between * spec.samples,
            equilibration_sweeps: spec.equilibration_sweeps,
            sample_every_sweeps: 1,
            start: spec.start,
            rule: icefield_stdlib::engine::FlipRule::Metropolis,
            loops_per_sweep: spec.loops_per_sweep,
            ladder: Ladder::Anneal,
            measures: Vec::new(),
            summary: false,
        };
        let step = scan_step(&probe, model).map_err(|m| fail(self, ErrorKind::Name, m))?;
        let ScanEngine::General(general) = &step.engine else {
            return Err(fail(
                self,
                ErrorKind::Value,
                "the structure factor is computed on the pyrochlore lattice".to_string(),
            ));
        };
        let mut general = (**general).clone();
        general.ladder = Ladder::Independent;
        let settings = step.settings.clone();
        let samples = spec.samples as usize;
        let between = spec.sweeps_between;
        let t = spec.temperature_kelvin;
        let interrupt = self.interrupt;
        let label = format!("{}: structure factor", spec.target);
        let sampled = with_progress(&label, emit, |progress| {
            sample_configurations(
                &settings, &general, t, samples, between, interrupt, progress,
            )
        });
        let (configurations, interrupted) = match sampled {
            Some(Ok(result)) => result,
            Some(Err(e)) => return Err(fail(self, ErrorKind::Runtime, e.to_string())),
            None => {
                return Err(fail(
                    self,
                    ErrorKind::Runtime,
                    "the sampler failed inside the simulation library".to_string(),
                ))
            }
        };
        if configurations.is_empty() {
            return Err(fail(
                self,
                ErrorKind::Interrupted,
                "interrupted before the first configuration; nothing was kept".to_string(),
            ));
        }
        let lat = Pyrochlore::new(settings.cells_per_side)
            .map_err(|e| fail(self, ErrorKind::Runtime, e.to_string()))?;
        let channels: Vec<(&str, Channel)> = if spec.polarisation.is_some() {
            vec![
                ("total", Channel::Total),
                ("sf", Channel::SpinFlip),
                ("nsf", Channel::NonSpinFlip),
            ]
        } else {
            vec![("total", Channel::Total)]
        };
        let sq_settings = |channel| StructureFactorSettings {
            channel,
            polarisation: spec.polarisation,
            form_factor: spec.form_factor.map(|(ion, a)| FormFactor {
                ion,
                lattice_constant_angstrom: a,
            }),
        };
        let r = spec.range_rlu;
        let mut columns = Vec::new();
        let mut figure = None;
        let description = match &spec.geometry {
            QGeometry::Plane { origin, u, v, axes } => {
                let plane = QPlane {
                    origin: *origin,
                    u: *u,
                    v: *v,
                    x_range: [-r, r],
                    y_range: [-r, r],
                    points: [spec.points, spec.points],
                };
                let mut maps = Vec::new();
                for (_, channel) in &channels {
                    let map = structure_factor_plane(
                        &lat,
                        &configurations,
                        &plane,
                        &sq_settings(*channel),
                    )
                    .map_err(|e| fail(self, ErrorKind::Value, e.to_string()))?;
                    maps.push(map);
                }
                let first = &maps[0];
                let (nx, ny) = (first.x.len(), first.y.len());
                let xs: Vec<f64> = (0..ny).flat_map(|_| first.x.iter().copied()).collect();
                let ys: Vec<f64> = first
                    .y
                    .iter()
                    .flat_map(|&y| std::iter::repeat_n(y, nx))
                    .collect();
                columns.push(column(&axes[0], "r.l.u.", xs, None));
                columns.push(column(&axes[1], "r.l.u.", ys, None));
                for ((name, _), map) in channels.iter().zip(&maps) {
                    columns.push(column(
                        name,
                        STRUCTURE_FACTOR_UNIT,
                        map.values.iter().flatten().copied().collect(),
                        None,
                    ));
                }
                // The map drawn: the spin-flip channel when polarised (where the pinch
                // points of ice show), otherwise the total.
                let (shown_name, shown) = if maps.len() > 1 {
                    ("spin-flip", &maps[1])
                } else {
                    ("total", &maps[0])
                };
                let plane_name = plane_label(*u, *v, axes);
                let title = format!(
                    "S(Q) {shown_name}, {plane_name} plane, T = {} K",
                    format_number(spec.temperature_kelvin)
                );
                let svg = render_heatmap_svg(shown, &title, 640, 560).map_err(|e| {
                    fail(
                        self,
                        ErrorKind::Runtime,
                        format!("cannot draw the map: {e}"),
                    )
                })?;
                figure = Some(Figure {
                    name: format!("{}_map", spec.target),
                    title,
                    x_label: axes[0].clone(),
                    x_unit: "r.l.u.".to_string(),
                    y_label: axes[1].clone(),
                    y_unit: "r.l.u.".to_string(),
                    series: Vec::new(),
                    svg,
                });
                format!("{nx}×{ny} points of the {plane_name} plane")
            }
            QGeometry::Line {
                through,
                direction,
                axis,
            } => {
                let d2: f64 = direction.iter().map(|x| x * x).sum();
                let x0 = (0..3).map(|k| through[k] * direction[k]).sum::<f64>() / d2;
                let start = [0, 1, 2].map(|k| through[k] - r * direction[k]);
                let end = [0, 1, 2].map(|k| through[k] + r * direction[k]);
                let qs = q_line(start, end, spec.points)
                    .map_err(|e| fail(self, ErrorKind::Value, e.to_string()))?;
                let n = qs.len();
                let xs: Vec<f64> = (0..n)
                    .map(|i| x0 - r + 2.0 * r * i as f64 / (n - 1) as f64)
                    .collect();
                columns.push(column(axis, "r.l.u.", xs, None));
                for (name, channel) in &channels {
                    let values =
                        structure_factor_at(&lat, &configurations, &qs, &sq_settings(*channel))
                            .map_err(|e| fail(self, ErrorKind::Value, e.to_string()))?;
                    columns.push(column(name, STRUCTURE_FACTOR_UNIT, values, None));
                }
                format!("{n} points along {axis}")
            }
        };
        let table = Table {
            name: spec.target.clone(),
            columns,
            provenance: Some(Provenance {
                source: format!(
                    "neutron structure factor, {description}, averaged over {} configurations{}{}",
                    configurations.len(),
                    match spec.polarisation {
                        Some(p) => format!(
                            ", polarisation [{}, {}, {}]",
                            format_number(p[0]),
                            format_number(p[1]),
                            format_number(p[2])
                        ),
                        None => String::new(),
                    },
                    match spec.form_factor {
                        Some((ion, a)) => format!(
                            ", dipole form factor {ion:?} with a = {} Å",
                            format_number(a)
                        ),
                        None => String::new(),
                    }
                ),
                lattice: step.lattice.describe(),
                model: step.couplings.describe(),
                seed: settings.seed,
                measurement_sweeps: spec.sweeps_between * configurations.len() as u64,
                equilibration_sweeps: spec.equilibration_sweeps,
                sample_every_sweeps: spec.sweeps_between,
                start: format!("{:?}", settings.start),
                temperatures_requested: 1,
                interrupted,
                cell: self.cell,
                kinetics: None,
            }),
        };
        self.workspace
            .insert(&spec.target, Value::Table(table.clone()));
        match figure {
            Some(figure) => {
                self.workspace
                    .insert(&figure.name.clone(), Value::Figure(figure.clone()));
                emit(Output::Display(display::figure(&figure)));
                emit(Output::Stream {
                    text: format!(
                        "{}: S(Q) on {description} at T = {} K from {} configurations; columns {}; the map is stored as `{}`\n",
                        spec.target,
                        format_number(spec.temperature_kelvin),
                        configurations.len(),
                        table.columns.iter().map(|c| header(&c.name, &c.unit)).collect::<Vec<_>>().join(", "),
                        figure.name
                    ),
                });
            }
            None => emit(Output::Display(display::table(&table, None))),
        }
        if interrupted {
            return Err(fail(
                self,
                ErrorKind::Interrupted,
                format!(
                    "interrupted: `{}` keeps S(Q) from the {} of {} configurations taken",
                    spec.target,
                    configurations.len(),
                    spec.samples
                ),
            ));
        }
        Ok(())
    }
}

/// "(h,h,l)"-style name of a plane from its axis letters.
fn plane_label(u: [f64; 3], v: [f64; 3], axes: &[String; 2]) -> String {
    let letter = |k: usize| {
        if u[k] != 0.0 {
            axes[0].clone()
        } else if v[k] != 0.0 {
            axes[1].clone()
        } else {
            "0".to_string()
        }
    };
    format!("({}, {}, {})", letter(0), letter(1), letter(2))
}

/// Runs `work` on a worker thread while this thread forwards throttled progress; `None`
/// if the work panicked.
fn with_progress<R: Send>(
    label: &str,
    emit: &mut dyn FnMut(Output),
    work: impl FnOnce(ProgressFn) -> R + Send,
) -> Option<R> {
    let latest: Mutex<Option<Progress>> = Mutex::new(None);
    let callback = |p: &Progress| {
        if let Ok(mut slot) = latest.lock() {
            *slot = Some(p.clone());
        }
    };
    let relabel = |p: Progress| Progress {
        label: label.to_string(),
        ..p
    };
    std::thread::scope(|scope| {
        let worker = scope.spawn(|| catch_unwind(AssertUnwindSafe(|| work(&callback))));
        let mut last_sent = Instant::now();
        while !worker.is_finished() {
            std::thread::sleep(Duration::from_millis(20));
            if last_sent.elapsed() >= PROGRESS_INTERVAL {
                if let Some(p) = latest.lock().ok().and_then(|mut slot| slot.take()) {
                    emit(Output::Progress(relabel(p)));
                    last_sent = Instant::now();
                }
            }
        }
        let outcome = worker.join();
        if let Some(p) = latest.lock().ok().and_then(|mut slot| slot.take()) {
            emit(Output::Progress(relabel(p)));
        }
        outcome.ok().and_then(Result::ok)
    })
}
