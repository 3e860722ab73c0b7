//! Execution of a plan against the session: stdlib calls, workspace updates, outputs.
//! Every step commits its result to the workspace before the next one runs, so an error
//! or an interrupt keeps everything computed before it.

use std::panic::{catch_unwind, AssertUnwindSafe};
use std::sync::Mutex;
use std::time::{Duration, Instant};

use icefield_stdlib::control::{Interrupt, Progress, ProgressFn};
use icefield_stdlib::entropy::{
    entropy_by_thermodynamic_integration, EnergyPoint, EntropyPoint, HighTemperatureTail,
    GAS_CONSTANT_JOULE_PER_MOLE_KELVIN,
};
use icefield_stdlib::figure::{render_svg, Axis, AxisScale, LinePlot, Series, SeriesStyle};
use icefield_stdlib::observe::Estimate;
use icefield_stdlib::scan::{run_general_scan, run_scan, EnergyDiagnostics, GeneralScanPoint};
use icefield_stdlib::square_ice::{run_square_ice_scan, SquareIce};
use icefield_stdlib::tempering::PairExchange;

use crate::ast::Span;
use crate::check::data::{self as measured, ExportRecord};
use crate::check::{ColumnSpec, CommandSpec, ExportFormat, PlotSpec, Scale, ShowTarget, Style};
use crate::diagnostic::{CellError, ErrorKind, Problem};
use crate::display::{self, header};
use crate::measures::{
    Measure, DIAGNOSTIC_COLUMNS, EXCHANGE_COLUMN, MEASURES, MOLAR_ENTROPY_COLUMN,
    TEMPERATURE_COLUMN, TEMPERATURE_UNIT,
};
use crate::plan::{Ladder, Plan, ScanEngine, ScanStep, Step};
use crate::script::Script;
use crate::units::format_number;
use crate::workspace::{Column, Figure, FigureSeries, Model, Provenance, Table, Value, Workspace};
use crate::Output;

mod analysis;
mod data;
mod dynamics;
mod equilibrium;
mod monopoles;
mod percolation;

/// Progress updates are sent at most this often (a few per second).
pub const PROGRESS_INTERVAL: Duration = Duration::from_millis(250);

pub struct Runner<'a> {
    pub workspace: &'a mut Workspace,
    pub script: &'a mut Script,
    pub source: &'a str,
    pub cell: u64,
    pub interrupt: &'a Interrupt,
}

fn error_at(source: &str, kind: ErrorKind, span: Span, message: impl Into<String>) -> CellError {
    CellError::from_problems(source, &[Problem::new(kind, span, message)])
}

/// A column of a command's result table: measured, not derived from other columns.
fn column(name: &str, unit: &str, values: Vec<f64>, errors: Option<Vec<f64>>) -> Column {
    Column {
        name: name.to_string(),
        unit: unit.to_string(),
        values,
        errors,
        derived_from: None,
    }
}

impl Runner<'_> {
    /// A runtime error at `span` of this cell.
    fn runtime(&self, span: Span, message: impl Into<String>) -> CellError {
        error_at(self.source, ErrorKind::Runtime, span, message)
    }

    /// The error that ends a cell after an interrupt (what was kept is already stored).
    fn interrupted(&self, keyword: Span, message: String) -> CellError {
        error_at(self.source, ErrorKind::Interrupted, keyword, message)
    }

    /// Runs a command by its family (see `commands`).
    fn command(
        &mut self,
        spec: &CommandSpec,
        model: &Model,
        span: Span,
        keyword: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        match spec {
            CommandSpec::Dynamics(spec) => self.run_dynamics(spec, model, span, keyword, emit),
            CommandSpec::Monopoles(spec) => self.run_monopoles(spec, model, span, keyword, emit),
            CommandSpec::Analysis(spec) => self.run_analysis(spec, model, span, keyword, emit),
            CommandSpec::Data(spec) => self.run_data(spec, model, span, keyword, emit),
            CommandSpec::Percolation(spec) => {
                self.run_percolation(spec, model, span, keyword, emit)
            }
            CommandSpec::Equilibrium(spec) => {
                self.run_equilibrium(spec, model, span, keyword, emit)
            }
        }
    }

    pub fn run(&mut self, steps: Vec<Step>, emit: &mut dyn FnMut(Output)) -> Result<(), CellError> {
        for step in steps {
            if self.interrupt.is_requested() {
                return Err(error_at(
                    self.source,
                    ErrorKind::Interrupted,
                    step.keyword,
                    "interrupted before this statement ran; the results above are kept",
                ));
            }
            self.step(step, emit)?;
        }
        Ok(())
    }

    fn step(&mut self, step: Step, emit: &mut dyn FnMut(Output)) -> Result<(), CellError> {
        match step.plan {
            // The checker already refused sizes that do not fit in memory.
            Plan::SetLattice(lattice) => self.workspace.model.lattice = Some(lattice),
            Plan::SetCouplings(couplings) => self.workspace.model.couplings = Some(couplings),
            Plan::SetField(field) => self.workspace.model.field = Some(field),
            Plan::SetSeed(seed) => self.workspace.model.seed = Some(seed),
            Plan::SetMeasures(measures) => self.workspace.model.measures = Some(measures),
            Plan::Scan(scan) => self.scan(&scan, step.keyword, emit)?,
            Plan::Table { name, columns } => match self.workspace.table(&name) {
                Some(table) => emit(Output::Display(display::table(table, columns.as_deref()))),
                None => {
                    return Err(error_at(
                        self.source,
                        ErrorKind::Name,
                        step.span,
                        format!("no table `{name}`"),
                    ))
                }
            },
            Plan::Show(target) => self.show(&target, step.span, emit)?,
            Plan::Plot(plot) => self.plot(&plot, step.span, emit)?,
            Plan::Rhai { body, body_span } => {
                let tables: Vec<Table> = self
                    .workspace
                    .values
                    .iter()
                    .filter_map(|(_, v)| match v {
                        Value::Table(t) => Some(t.clone()),
                        _ => None,
                    })
                    .collect();
                let refs: Vec<&Table> = tables.iter().collect();
                let result = self.script.run_block(&body, &refs);
                self.flush_prints(emit);
                if let Err(failure) = result {
                    return Err(CellError::from_problems(
                        self.source,
                        &[failure.into_problem(body_span, &body)],
                    ));
                }
            }
            Plan::Column(column) => self.column(&column, emit)?,
            Plan::Export { name, path, format } => {
                self.export(&name, &path, format, step.span, emit)?
            }
            Plan::Command { spec, model } => {
                self.command(&spec, &model, step.span, step.keyword, emit)?
            }
        }
        Ok(())
    }

    fn flush_prints(&self, emit: &mut dyn FnMut(Output)) {
        let lines = self.script.take_printed();
        if !lines.is_empty() {
            let mut text = lines.join("\n");
            text.push('\n');
            emit(Output::Stream { text });
        }
    }

    fn scan(
        &mut self,
        scan: &ScanStep,
        keyword: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let started = Instant::now();
        let result = run_with_progress(scan, self.interrupt, emit);
        let result = match result {
            Ok(result) => result,
            Err(message) => {
                return Err(error_at(self.source, ErrorKind::Runtime, keyword, message));
            }
        };
        let table = scan_table(scan, &result, self.cell);
        let kept = table.row_count();
        let requested = scan.settings.temperatures_kelvin.len();
        if let Some(note) = &result.entropy_note {
            emit(Output::Stream {
                text: format!("note: {note}\n"),
            });
        }
        self.workspace
            .insert(&scan.target, Value::Table(table.clone()));
        if result.interrupted {
            emit(Output::Display(display::table(&table, None)));
            return Err(error_at(
                self.source,
                ErrorKind::Interrupted,
                keyword,
                format!(
                    "interrupted: kept {kept} of {requested} temperatures in `{}`",
                    scan.target
                ),
            ));
        }
        if scan.summary {
            let mut text = summary(scan, &table, started.elapsed());
            text.push_str(&equilibration_warnings(scan, &result));
            emit(Output::Stream { text });
        }
        Ok(())
    }

    fn show(
        &mut self,
        target: &ShowTarget,
        span: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let text = match target {
            ShowTarget::Model => describe_model(self.workspace),
            ShowTarget::Measures => {
                let active = self
                    .workspace
                    .model
                    .measures
                    .clone()
                    .unwrap_or_else(Measure::all);
                let mut text = String::from("measures recorded by the next scan:\n");
                for m in active {
                    text.push_str(&format!("  {}\n", header(m.name(), m.unit())));
                }
                text
            }
            ShowTarget::Workspace => describe_workspace(self.workspace),
            ShowTarget::Value(name) => match self.workspace.get(name) {
                Some(Value::Figure(figure)) => {
                    emit(Output::Display(display::figure(figure)));
                    return Ok(());
                }
                Some(Value::Table(table)) => {
                    emit(Output::Display(display::table(table, None)));
                    return Ok(());
                }
                None => {
                    return Err(error_at(
                        self.source,
                        ErrorKind::Name,
                        span,
                        format!("no value `{name}`"),
                    ))
                }
            },
        };
        emit(Output::Stream { text });
        Ok(())
    }

    fn plot(
        &mut self,
        plot: &PlotSpec,
        span: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let mut series = Vec::new();
        let mut styles = Vec::new();
        let mut units: Option<(String, String)> = None;
        let mut y_names: Vec<String> = Vec::new();
        // A table without provenance was not simulated here (an imported measurement).
        let measured = |t: Option<&Table>| t.is_some_and(|t| t.provenance.is_none());
        let any_measured = plot
            .series
            .iter()
            .any(|(t, _)| measured(self.workspace.table(t)));
        for (table_name, column_name) in &plot.series {
            let table = self.workspace.table(table_name);
            let (Some(x), Some(y)) = (
                table.and_then(|t| t.column(&plot.x_column)),
                table.and_then(|t| t.column(column_name)),
            ) else {
                return Err(error_at(
                    self.source,
                    ErrorKind::Name,
                    span,
                    format!(
                        "`{table_name}` has no columns `{}` and `{column_name}`",
                        plot.x_column
                    ),
                ));
            };
            // Every series is drawn in the units of the first; units of one dimension convert.
            let (x_unit, y_unit) = units
                .get_or_insert_with(|| (x.unit.clone(), y.unit.clone()))
                .clone();
            let label = format!("{table_name}.{column_name}");
            let convert = |values: &[f64], from: &str, to: &str, axis: &str| {
                measured::convert_values(values, from, to).ok_or_else(|| {
                    error_at(
                        self.source,
                        ErrorKind::Unit,
                        span,
                        format!(
                            "{label} is in {} against {}, but the first series sets the {axis} axis in {}: they cannot share it",
                            measured::unit_text(&y.unit),
                            measured::unit_text(&x.unit),
                            measured::unit_text(to)
                        ),
                    )
                })
            };
            let x_values = convert(&x.values, &x.unit, &x_unit, "x")?;
            let y_values = convert(&y.values, &y.unit, &y_unit, "y")?;
            let y_errors = match (&y.errors, plot.error_bars) {
                (Some(e), true) => Some(convert(e, &y.unit, &y_unit, "y")?),
                _ => None,
            };
            for (from, to) in [(&x.unit, &x_unit), (&y.unit, &y_unit)] {
                if from != to {
                    emit(Output::Stream {
                        text: format!("note: {label} is drawn converted from {from} to {to}\n"),
                    });
                }
            }
            if !y_names.contains(column_name) {
                y_names.push(column_name.clone());
            }
            styles.push(match plot.style {
                Some(Style::Line) => SeriesStyle::Line,
                Some(Style::Points) => SeriesStyle::Points,
                Some(Style::Both) => SeriesStyle::LineAndPoints,
                // Measurements are points with error bars; a simulation beside them a line.
                None if measured(table) => SeriesStyle::Points,
                None if any_measured => SeriesStyle::Line,
                None => SeriesStyle::LineAndPoints,
            });
            let (kept, hidden) = points_for_axes(
                &x_values,
                &y_values,
                y_errors.as_deref(),
                plot.x_scale,
                plot.y_scale,
            );
            if hidden > 0 {
                // A physicist plotting a density that vanishes at low T on a log axis
                // expects the zeros to be left out (as plotting tools conventionally
                // mask them), not the whole plot refused: say how many were dropped.
                emit(Output::Stream {
                    text: format!(
                        "note: {hidden} point(s) of {label} with a value ≤ 0 are not shown on the logarithmic axis\n"
                    ),
                });
            }
            if kept.x.is_empty() {
                return Err(error_at(
                    self.source,
                    ErrorKind::Runtime,
                    span,
                    format!("no point of {label} is positive, so none can be shown on a logarithmic axis; use a linear axis"),
                ));
            }
            series.push(FigureSeries {
                label,
                x: kept.x,
                y: kept.y,
                y_error: kept.y_error,
            });
        }
        let title = plot
            .title
            .clone()
            .unwrap_or_else(|| plot.description.clone());
        let y_label = y_names.join(", ");
        let axis = |label: &str, unit: &str, scale: Scale| Axis {
            label: label.to_string(),
            unit: if unit.is_empty() {
                None
            } else {
                Some(unit.to_string())
            },
            scale: match scale {
                Scale::Linear => AxisScale::Linear,
                Scale::Log => AxisScale::Log,
            },
        };
        let (x_unit, y_unit) = units.unwrap_or_default();
        let line_plot = LinePlot {
            title: title.clone(),
            x: axis(&plot.x_column, &x_unit, plot.x_scale),
            y: axis(&y_label, &y_unit, plot.y_scale),
            series: series
                .iter()
                .zip(&styles)
                .map(|(s, &style)| Series {
                    label: s.label.clone(),
                    x: s.x.clone(),
                    y: s.y.clone(),
                    y_error: s.y_error.clone(),
                    style,
                })
                .collect(),
        };
        let svg = match catch_unwind(AssertUnwindSafe(|| {
            render_svg(&line_plot, plot.width_px, plot.height_px)
        })) {
            Ok(Ok(svg)) => svg,
            Ok(Err(error)) => {
                return Err(error_at(
                    self.source,
                    ErrorKind::Runtime,
                    span,
                    format!("cannot draw the plot: {error}"),
                ))
            }
            Err(_) => {
                return Err(error_at(
                    self.source,
                    ErrorKind::Runtime,
                    span,
                    "the plotting library failed on this data",
                ))
            }
        };
        let figure = Figure {
            name: plot.target.clone().unwrap_or_default(),
            title,
            x_label: plot.x_column.clone(),
            x_unit,
            y_label,
            y_unit,
            series,
            svg,
        };
        if let Some(name) = &plot.target {
            self.workspace.insert(name, Value::Figure(figure.clone()));
        }
        emit(Output::Display(display::figure(&figure)));
        Ok(())
    }

    fn column(&mut self, spec: &ColumnSpec, emit: &mut dyn FnMut(Output)) -> Result<(), CellError> {
        let Some(table) = self.workspace.table(&spec.table) else {
            return Err(error_at(
                self.source,
                ErrorKind::Name,
                spec.expression_span,
                format!("no table `{}`", spec.table),
            ));
        };
        let rows = table.row_count();
        let inputs: Vec<(String, Vec<f64>, Option<Vec<f64>>)> = spec
            .inputs
            .iter()
            .filter_map(|name| {
                table
                    .column(name)
                    .map(|c| (name.clone(), c.values.clone(), c.errors.clone()))
            })
            .collect();
        let means: Vec<(String, Vec<f64>)> = inputs
            .iter()
            .map(|(n, v, _)| (n.clone(), v.clone()))
            .collect();
        let place = |failure: crate::script::ScriptFailure| {
            CellError::from_problems(
                self.source,
                &[failure.into_problem(spec.expression_span, &spec.expression)],
            )
        };
        let values = self
            .script
            .evaluate_rows(&spec.expression, &means, rows)
            .map_err(place)?;
        // First-order error propagation by central differences, one input at a time,
        // added in quadrature (inputs treated as independent).
        let mut variance: Option<Vec<f64>> = None;
        for (index, (_, value, errors)) in inputs.iter().enumerate() {
            let Some(errors) = errors else { continue };
            let shifted = |sign: f64| -> Vec<(String, Vec<f64>)> {
                let mut shifted = means.clone();
                shifted[index].1 = value
                    .iter()
                    .zip(errors)
                    .map(|(v, e)| v + sign * e)
                    .collect();
                shifted
            };
            let plus = self
                .script
                .evaluate_rows(&spec.expression, &shifted(1.0), rows)
                .map_err(place)?;
            let minus = self
                .script
                .evaluate_rows(&spec.expression, &shifted(-1.0), rows)
                .map_err(place)?;
            let total = variance.get_or_insert_with(|| vec![0.0; rows]);
            for row in 0..rows {
                let half = (plus[row] - minus[row]) / 2.0;
                total[row] += half * half;
            }
        }
        self.flush_prints(emit);
        let column = Column {
            name: spec.column.clone(),
            unit: spec.unit.clone(),
            values,
            errors: variance.map(|v| v.into_iter().map(f64::sqrt).collect()),
            derived_from: Some(spec.expression.clone()),
        };
        if let Some(table) = self.workspace.table_mut(&spec.table) {
            match table.columns.iter_mut().find(|c| c.name == spec.column) {
                Some(slot) => *slot = column,
                None => table.columns.push(column),
            }
        }
        Ok(())
    }

    fn export(
        &mut self,
        name: &str,
        path: &str,
        format: ExportFormat,
        span: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let Some(table) = self.workspace.table(name) else {
            return Err(error_at(
                self.source,
                ErrorKind::Name,
                span,
                format!("no table `{name}`"),
            ));
        };
        let record = export_record(table, &self.workspace.model, self.cell);
        let text = match format {
            ExportFormat::Csv => csv_with_record(table, &record),
            ExportFormat::Json => json_export(table, &record),
        };
        if let Err(error) = std::fs::write(path, text) {
            return Err(error_at(
                self.source,
                ErrorKind::Runtime,
                span,
                format!("cannot write `{path}`: {error}"),
            ));
        }
        emit(Output::Stream {
            text: format!("wrote {} rows of `{name}` to {path}\n", table.row_count()),
        });
        Ok(())
    }
}

/// What an export records about a table besides its columns.
pub fn export_record(table: &Table, model: &Model, cell: u64) -> ExportRecord {
    ExportRecord {
        icefield_version: env!("CARGO_PKG_VERSION").to_string(),
        table: table.name.clone(),
        provenance: table.provenance.clone(),
        derived: table
            .columns
            .iter()
            .filter_map(|c| c.derived_from.clone().map(|e| (c.name.clone(), e)))
            .collect(),
        exported_in_cell: Some(cell),
        dynamics_declared: model.dynamics.as_ref().map(describe_dynamics),
    }
}

/// The dynamics rule of a model in one line (for provenance).
pub fn describe_dynamics(dynamics: &crate::workspace::DynamicsDecl) -> String {
    format!(
        "{:?} acceptance, rates {}, execution {:?}, transverse field from {:?}",
        dynamics.acceptance, dynamics.rates_description, dynamics.execution, dynamics.transverse
    )
}

/// A float with Rust's shortest representation that reads back to the same bits.
fn exact(value: f64) -> String {
    format!("{value:?}")
}

/// CSV with the unit in each header ("energy [K]", "energy_error [K]", "n []"), values
/// written to full precision.
pub fn csv(table: &Table) -> String {
    let quote = |text: String| {
        if text.contains(',') || text.contains('"') {
            format!("\"{}\"", text.replace('"', "\"\""))
        } else {
            text
        }
    };
    let bracketed = |name: &str, unit: &str| format!("{name} [{unit}]");
    let mut headers = Vec::new();
    for c in &table.columns {
        headers.push(quote(bracketed(&c.name, &c.unit)));
        if c.errors.is_some() {
            headers.push(quote(bracketed(&format!("{}_error", c.name), &c.unit)));
        }
    }
    let mut out = headers.join(",");
    out.push('\n');
    for row in 0..table.row_count() {
        let mut cells = Vec::new();
        for c in &table.columns {
            cells.push(exact(c.values.get(row).copied().unwrap_or(f64::NAN)));
            if let Some(e) = &c.errors {
                cells.push(exact(e.get(row).copied().unwrap_or(f64::NAN)));
            }
        }
        out.push_str(&cells.join(","));
        out.push('\n');
    }
    out
}

/// The CSV of `csv` after `#` lines of provenance for a reader, and one
/// `# icefield-record: {...}` line that `import` reads back.
pub fn csv_with_record(table: &Table, record: &ExportRecord) -> String {
    let one_line = |text: &str| text.replace(['\n', '\r'], " ");
    let mut out = format!(
        "# icefield {} export of table `{}`{}\n",
        record.icefield_version,
        one_line(&table.name),
        record
            .exported_in_cell
            .map(|c| format!(" (cell {c})"))
            .unwrap_or_default()
    );
    match &table.provenance {
        Some(p) => {
            out.push_str(&format!("# source: {}\n", one_line(&p.source)));
            out.push_str(&format!("# lattice: {}\n", one_line(&p.lattice)));
            out.push_str(&format!("# model: {}\n", one_line(&p.model)));
            out.push_str(&format!(
                "# seed: {}; {} sweeps after {} to equilibrate; made in cell {}{}\n",
                p.seed,
                p.measurement_sweeps,
                p.equilibration_sweeps,
                p.cell,
                if p.interrupted { "; INTERRUPTED" } else { "" }
            ));
        }
        None => out.push_str("# source: not simulated by icefield (imported data)\n"),
    }
    if let Some(d) = &record.dynamics_declared {
        out.push_str(&format!(
            "# dynamics declared when exported: {}\n",
            one_line(d)
        ));
    }
    out.push_str(&format!(
        "# {} {}\n",
        measured::RECORD_COMMENT,
        serde_json::to_string(record).unwrap_or_else(|_| "{}".to_string())
    ));
    out.push_str(&csv(table));
    out
}

/// One JSON object: name, column order, units, values, errors (NaN as null), derived
/// expressions and provenance (with the icefield version and the exporting cell).
pub fn json_export(table: &Table, record: &ExportRecord) -> String {
    use serde_json::{json, Map, Value as Json};
    let mut units = Map::new();
    let mut values = Map::new();
    let mut errors = Map::new();
    for c in &table.columns {
        units.insert(c.name.clone(), json!(c.unit));
        values.insert(c.name.clone(), json!(c.values));
        if let Some(e) = &c.errors {
            errors.insert(c.name.clone(), json!(e));
        }
    }
    let mut provenance = match &table.provenance {
        Some(p) => serde_json::to_value(p).unwrap_or(Json::Null),
        None => json!({"source": "not simulated by icefield (imported data)"}),
    };
    if let Json::Object(map) = &mut provenance {
        map.insert("icefield_version".into(), json!(record.icefield_version));
        map.insert("exported_in_cell".into(), json!(record.exported_in_cell));
        map.insert("dynamics_declared".into(), json!(record.dynamics_declared));
    }
    let object = json!({
        "name": table.name,
        "kind": "table",
        "columns": table.columns.iter().map(|c| c.name.clone()).collect::<Vec<_>>(),
        "units": units,
        "values": values,
        "errors": errors,
        "derived": record
            .derived
            .iter()
            .map(|(k, v)| (k.clone(), json!(v)))
            .collect::<Map<String, Json>>(),
        "provenance": provenance,
    });
    let mut text = serde_json::to_string_pretty(&object).unwrap_or_else(|_| "{}".to_string());
    text.push('\n');
    text
}

/// The outcome of a scan, whichever engine ran it.
#[derive(Clone, Debug)]
pub struct ScanOutcome {
    /// Finished temperatures, in the order they were asked for.
    pub points: Vec<ScanRecord>,
    pub interrupted: bool,
    /// S(T) at each finished temperature, when `entropy` is recorded and it could be done.
    pub entropy: Option<Vec<EntropyPoint>>,
    /// Why the entropy column is empty, when it is.
    pub entropy_note: Option<String>,
    /// Swap statistics per neighbouring pair of the sorted ladder (tempering only).
    pub pair_exchanges: Vec<PairExchange>,
}

/// One finished temperature (stdlib's record of a coupling-table scan; nearest-neighbour
/// points are wrapped in it without a projected magnetisation).
pub type ScanRecord = GeneralScanPoint;

/// Runs a scan on a worker thread while this thread forwards throttled progress.
fn run_with_progress(
    scan: &ScanStep,
    interrupt: &Interrupt,
    emit: &mut dyn FnMut(Output),
) -> Result<ScanOutcome, String> {
    let latest: Mutex<Option<Progress>> = Mutex::new(None);
    let callback = |p: &Progress| {
        if let Ok(mut slot) = latest.lock() {
            *slot = Some(p.clone());
        }
    };
    let label = |p: Progress| Progress {
        label: format!("{}: {}", scan.target, p.label),
        ..p
    };
    std::thread::scope(|scope| {
        let worker = scope.spawn(|| {
            catch_unwind(AssertUnwindSafe(|| {
                run_scan_step(scan, interrupt, &callback)
            }))
        });
        let mut last_sent = Instant::now();
        while !worker.is_finished() {
            std::thread::sleep(Duration::from_millis(20));
            if last_sent.elapsed() >= PROGRESS_INTERVAL {
                let progress = latest.lock().ok().and_then(|mut slot| slot.take());
                if let Some(p) = progress {
                    emit(Output::Progress(label(p)));
                    last_sent = Instant::now();
                }
            }
        }
        let outcome = worker.join();
        if let Some(p) = latest.lock().ok().and_then(|mut slot| slot.take()) {
            emit(Output::Progress(label(p)));
        }
        match outcome {
            Ok(Ok(result)) => result,
            _ => Err("the scan failed inside the simulation library".to_string()),
        }
    })
}

/// Runs the scan on its engine, then integrates the entropy if it is recorded.
pub fn run_scan_step(
    scan: &ScanStep,
    interrupt: &Interrupt,
    progress: ProgressFn,
) -> Result<ScanOutcome, String> {
    let (points, interrupted, tail, pair_exchanges) = match &scan.engine {
        ScanEngine::NearestNeighbour => {
            let result =
                run_scan(&scan.settings, interrupt, progress).map_err(|e| e.to_string())?;
            let j = scan.settings.model.j_eff_kelvin;
            // H = J_eff Σ_⟨ij⟩ σσ: E_∞ = 0 and v = 3 J_eff² (3 bonds per spin, each
            // ⟨(σσ)²⟩ = 1; derived).
            let tail = HighTemperatureTail {
                infinite_temperature_energy_per_spin_kelvin: 0.0,
                energy_variance_per_spin_kelvin2: 3.0 * j * j,
            };
            let points = result
                .points
                .into_iter()
                .map(|point| ScanRecord {
                    point,
                    magnetisation_along: None,
                })
                .collect();
            (points, result.interrupted, tail, Vec::new())
        }
        ScanEngine::SquareIce => {
            let result = run_square_ice_scan(&scan.settings, interrupt, progress)
                .map_err(|e| e.to_string())?;
            let tail = SquareIce::new(scan.settings.cells_per_side)
                .ok_or_else(|| "square ice needs at least 3 vertices per side".to_string())?
                .high_temperature_tail(scan.settings.model.j_eff_kelvin);
            let points = result
                .points
                .into_iter()
                .map(|point| ScanRecord {
                    point,
                    magnetisation_along: None,
                })
                .collect();
            (points, result.interrupted, tail, Vec::new())
        }
        ScanEngine::General(model) => {
            let result = run_general_scan(&scan.settings, model, interrupt, progress)
                .map_err(|e| e.to_string())?;
            (
                result.points,
                result.interrupted,
                result.high_temperature_tail,
                result.pair_exchanges,
            )
        }
    };
    let mut outcome = ScanOutcome {
        points,
        interrupted,
        entropy: None,
        entropy_note: None,
        pair_exchanges,
    };
    if scan.measures.contains(&Measure::Entropy) {
        let energies: Vec<EnergyPoint> = outcome
            .points
            .iter()
            .map(|r| EnergyPoint {
                temperature_kelvin: r.point.temperature_kelvin,
                energy_per_spin_kelvin: r.point.energy_per_spin_kelvin,
            })
            .collect();
        match entropy_by_thermodynamic_integration(&energies, tail) {
            Ok(entropy) => outcome.entropy = Some(entropy),
            Err(error) => {
                outcome.entropy_note = Some(format!("the entropy could not be integrated: {error}"))
            }
        }
    }
    Ok(outcome)
}

fn point_value(record: &ScanRecord, measure: Measure) -> (f64, Option<f64>) {
    let point = &record.point;
    let estimate = |e: &Estimate| (e.mean, Some(e.error));
    match measure {
        Measure::Energy => estimate(&point.energy_per_spin_kelvin),
        Measure::SpecificHeat => estimate(&point.specific_heat_per_spin),
        Measure::SpecificHeatMolar => estimate(
            &point
                .specific_heat_per_spin
                .scaled(GAS_CONSTANT_JOULE_PER_MOLE_KELVIN),
        ),
        Measure::Magnetisation => estimate(&point.magnetisation_per_spin),
        Measure::Susceptibility => estimate(&point.susceptibility_per_spin),
        Measure::MonopoleDensity => estimate(&point.monopole_density_per_spin),
        Measure::SingleChargeDensity => estimate(&point.single_charge_density),
        Measure::DoubleChargeDensity => estimate(&point.double_charge_density),
        Measure::AcceptanceRate => (point.acceptance_rate, None),
        Measure::AutocorrelationTime => (point.integrated_autocorrelation_sweeps, None),
        Measure::MagnetisationAlong => match &record.magnetisation_along {
            Some(e) => estimate(e),
            None => (f64::NAN, Some(f64::NAN)),
        },
        // Filled from the integration in `scan_table`.
        Measure::Entropy => (f64::NAN, Some(f64::NAN)),
    }
}

/// The entropy of the row at `temperature_kelvin`, per spin and in J/(mol K).
fn entropy_at(outcome: &ScanOutcome, temperature_kelvin: f64) -> Option<(Estimate, Estimate)> {
    outcome
        .entropy
        .as_ref()?
        .iter()
        .find(|e| e.temperature_kelvin == temperature_kelvin)
        .map(|e| (e.entropy_per_spin, e.entropy_joule_per_mole_kelvin))
}

/// The result table of a scan: T, then the columns of each measure.
pub fn scan_table(scan: &ScanStep, result: &ScanOutcome, cell: u64) -> Table {
    let mut columns = vec![Column {
        name: TEMPERATURE_COLUMN.to_string(),
        unit: TEMPERATURE_UNIT.to_string(),
        values: result
            .points
            .iter()
            .map(|r| r.point.temperature_kelvin)
            .collect(),
        errors: None,
        derived_from: None,
    }];
    for &measure in &scan.measures {
        if measure == Measure::Entropy {
            let pairs: Vec<(Estimate, Estimate)> = result
                .points
                .iter()
                .map(|r| {
                    entropy_at(result, r.point.temperature_kelvin).unwrap_or((
                        Estimate::new(f64::NAN, f64::NAN),
                        Estimate::new(f64::NAN, f64::NAN),
                    ))
                })
                .collect();
            for (index, (name, unit)) in measure.columns().into_iter().enumerate() {
                let pick = |p: &(Estimate, Estimate)| if index == 0 { p.0 } else { p.1 };
                columns.push(Column {
                    name: name.to_string(),
                    unit: unit.to_string(),
                    values: pairs.iter().map(|p| pick(p).mean).collect(),
                    errors: Some(pairs.iter().map(|p| pick(p).error).collect()),
                    derived_from: None,
                });
            }
            debug_assert_eq!(measure.columns()[1], MOLAR_ENTROPY_COLUMN);
            continue;
        }
        let pairs: Vec<(f64, Option<f64>)> = result
            .points
            .iter()
            .map(|p| point_value(p, measure))
            .collect();
        let has_errors =
            MEASURES.iter().any(|m| m.measure == measure) && pairs.iter().all(|(_, e)| e.is_some());
        columns.push(Column {
            name: measure.name().to_string(),
            unit: measure.unit().to_string(),
            values: pairs.iter().map(|(v, _)| *v).collect(),
            errors: if has_errors && !pairs.is_empty() {
                Some(pairs.iter().map(|(_, e)| e.unwrap_or(0.0)).collect())
            } else if has_errors {
                Some(Vec::new())
            } else {
                None
            },
            derived_from: None,
        });
    }
    let diagnostic = |pick: &dyn Fn(&EnergyDiagnostics) -> f64| -> Vec<f64> {
        result
            .points
            .iter()
            .map(|r| r.point.diagnostics.as_ref().map(pick).unwrap_or(f64::NAN))
            .collect()
    };
    let picks: [&dyn Fn(&EnergyDiagnostics) -> f64; 2] =
        [&|d| d.tau_int_sweeps, &|d| d.drift_sigma];
    for ((name, unit, _), pick) in DIAGNOSTIC_COLUMNS.iter().zip(picks) {
        columns.push(Column {
            name: name.to_string(),
            unit: unit.to_string(),
            values: diagnostic(pick),
            errors: None,
            derived_from: None,
        });
    }
    if is_tempering(scan) {
        columns.push(Column {
            name: EXCHANGE_COLUMN.0.to_string(),
            unit: EXCHANGE_COLUMN.1.to_string(),
            values: result
                .points
                .iter()
                .map(|r| exchange_acceptance(result, r.point.temperature_kelvin))
                .collect(),
            errors: None,
            derived_from: None,
        });
    }
    let settings = &scan.settings;
    let source = match &scan.engine {
        ScanEngine::NearestNeighbour => "Metropolis temperature scan".to_string(),
        ScanEngine::SquareIce => {
            "Metropolis temperature scan of square ice (H = J Σ_v q_v², J = J_eff)".to_string()
        }
        ScanEngine::General(model) => format!(
            "{} {} on the coupling-table engine{}{}",
            match model.rule {
                icefield_stdlib::engine::FlipRule::Metropolis => "Metropolis",
                icefield_stdlib::engine::FlipRule::HeatBath => "heat-bath",
            },
            match model.ladder {
                Ladder::Independent => "temperature scan",
                Ladder::Tempering => "parallel-tempering temperature scan",
                Ladder::Anneal => "anneal (state carried from each temperature to the next)",
            },
            if model.loops_per_sweep > 0 {
                format!(", {} loop moves per sweep", model.loops_per_sweep)
            } else {
                String::new()
            },
            match &scan.field {
                Some(field) => format!(", field {}", field.describe()),
                None => String::new(),
            }
        ),
    };
    Table {
        name: scan.target.clone(),
        columns,
        provenance: Some(Provenance {
            source,
            lattice: scan.lattice.describe(),
            model: scan.couplings.describe(),
            seed: settings.seed,
            measurement_sweeps: settings.measurement_sweeps,
            equilibration_sweeps: settings.equilibration_sweeps,
            sample_every_sweeps: settings.sample_every_sweeps,
            start: format!("{:?}", settings.start),
            temperatures_requested: settings.temperatures_kelvin.len(),
            interrupted: result.interrupted,
            cell,
            kinetics: None,
        }),
    }
}

fn is_tempering(scan: &ScanStep) -> bool {
    matches!(&scan.engine, ScanEngine::General(m) if m.ladder == Ladder::Tempering)
}

/// The swap acceptance of the temperature `t` with the next higher one of the ladder.
fn exchange_acceptance(result: &ScanOutcome, temperature_kelvin: f64) -> f64 {
    result
        .pair_exchanges
        .iter()
        .find(|p| p.lower_temperature_kelvin == temperature_kelvin)
        .map(|p| p.acceptance_rate())
        .unwrap_or(f64::NAN)
}

/// Warning lines about temperatures whose runs look too short, and tempering pairs that
/// hardly swap.
fn equilibration_warnings(scan: &ScanStep, result: &ScanOutcome) -> String {
    let sweeps = scan.settings.measurement_sweeps;
    let mut short = Vec::new();
    let mut first_reason = None;
    for r in &result.points {
        if let Some(reason) = r.point.diagnostics.and_then(|d| d.concern(sweeps)) {
            short.push(format_number(r.point.temperature_kelvin));
            first_reason.get_or_insert(reason);
        }
    }
    let mut text = String::new();
    if let Some(reason) = first_reason {
        text.push_str(&format!(
            "warning: the run looks too short at T = {} K (at the first: {reason}); see the \
             columns tau_int_energy and drift_sigma, and raise `sweeps` or `equilibrate` \
             (or add `loops = N` at low temperature)\n",
            short.join(", ")
        ));
    }
    let stuck: Vec<String> = result
        .pair_exchanges
        .iter()
        .filter(|p| p.acceptance_rate() < MIN_EXCHANGE_ACCEPTANCE)
        .map(|p| {
            format!(
                "{}–{} K ({:.3})",
                format_number(p.lower_temperature_kelvin),
                format_number(p.upper_temperature_kelvin),
                p.acceptance_rate()
            )
        })
        .collect();
    if !stuck.is_empty() {
        text.push_str(&format!(
            "warning: tempering pairs that rarely swap (acceptance below {MIN_EXCHANGE_ACCEPTANCE}): \
             {}; add temperatures between them\n",
            stuck.join(", ")
        ));
    }
    text
}

/// Swap acceptance below which a tempering pair is flagged (common practice: about 0.2 to
/// 0.3 is the usual aim, a pair far below it splits the ladder).
pub const MIN_EXCHANGE_ACCEPTANCE: f64 = 0.1;

fn summary(scan: &ScanStep, table: &Table, elapsed: Duration) -> String {
    let t = &scan.settings.temperatures_kelvin;
    let lo = t.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = t.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let columns: Vec<String> = table
        .columns
        .iter()
        .map(|c| header(&c.name, &c.unit))
        .collect();
    let example = table
        .columns
        .iter()
        .find(|c| c.name == "specific_heat")
        .or_else(|| table.columns.get(1))
        .map(|c| c.name.clone())
        .unwrap_or_else(|| "energy".to_string());
    format!(
        "{name}: {n} temperatures from {lo} K to {hi} K in {secs:.1} s; {lattice}; J_eff = {j} K; \
         seed {seed}{default}; {sweeps} sweeps after {eq} to equilibrate\n\
         columns: {columns}\n\
         show it with `table {name}` or `plot {name}.{example} against T`\n",
        name = scan.target,
        n = table.row_count(),
        lo = format_number(lo),
        hi = format_number(hi),
        secs = elapsed.as_secs_f64(),
        lattice = scan.lattice.describe(),
        j = format_number(scan.couplings.j_eff_kelvin),
        seed = scan.settings.seed,
        default = if scan.seed_declared {
            ""
        } else {
            " (default; declare one with `seed N`)"
        },
        sweeps = scan.settings.measurement_sweeps,
        eq = scan.settings.equilibration_sweeps,
        columns = columns.join(", "),
    )
}

pub fn describe_model(workspace: &Workspace) -> String {
    let model = &workspace.model;
    let mut text = String::from("model\n");
    text.push_str(&format!(
        "  lattice:   {}\n",
        model
            .lattice
            .as_ref()
            .map(|l| l.describe())
            .unwrap_or_else(|| "not declared".to_string())
    ));
    text.push_str(&format!(
        "  couplings: {}\n",
        model
            .couplings
            .as_ref()
            .map(|c| c.describe())
            .unwrap_or_else(|| "not declared".to_string())
    ));
    if let Some(field) = &model.field {
        text.push_str(&format!("  field:     {}\n", field.describe()));
    }
    if let Some(dynamics) = &model.dynamics {
        text.push_str(&format!("  dynamics:  {}\n", dynamics.describe()));
    }
    text.push_str(&format!(
        "  seed:      {}\n",
        model
            .seed
            .map(|s| s.to_string())
            .unwrap_or_else(|| format!("{} (default)", crate::workspace::DEFAULT_SEED))
    ));
    let measures = model.measures.clone().unwrap_or_else(Measure::all);
    text.push_str(&format!(
        "  measures:  {}\n",
        measures
            .iter()
            .map(|m| m.name())
            .collect::<Vec<_>>()
            .join(", ")
    ));
    text
}

pub fn describe_workspace(workspace: &Workspace) -> String {
    if workspace.values.is_empty() {
        return "the workspace holds no tables or figures yet\n".to_string();
    }
    let mut text = String::from("workspace\n");
    for (name, value) in &workspace.values {
        match value {
            Value::Table(t) => text.push_str(&format!(
                "  {name}: table, {} rows; columns {}\n",
                t.row_count(),
                t.columns
                    .iter()
                    .map(|c| header(&c.name, &c.unit))
                    .collect::<Vec<_>>()
                    .join(", ")
            )),
            Value::Figure(f) => text.push_str(&format!(
                "  {name}: figure, {} against {}\n",
                header(&f.y_label, &f.y_unit),
                header(&f.x_label, &f.x_unit)
            )),
        }
    }
    text
}

/// The points of one series that can be drawn on the chosen axes.
struct DrawablePoints {
    x: Vec<f64>,
    y: Vec<f64>,
    y_error: Option<Vec<f64>>,
}

/// Keeps the points whose coordinates are positive on every logarithmic axis;
/// returns them with the number left out.
fn points_for_axes(
    x: &[f64],
    y: &[f64],
    y_error: Option<&[f64]>,
    x_scale: Scale,
    y_scale: Scale,
) -> (DrawablePoints, usize) {
    let shown = |value: f64, scale: Scale| !matches!(scale, Scale::Log) || value > 0.0;
    let mut kept = DrawablePoints {
        x: Vec::with_capacity(x.len()),
        y: Vec::with_capacity(y.len()),
        y_error: y_error.map(|_| Vec::with_capacity(y.len())),
    };
    let mut hidden = 0;
    for (index, (&xv, &yv)) in x.iter().zip(y).enumerate() {
        if shown(xv, x_scale) && shown(yv, y_scale) {
            kept.x.push(xv);
            kept.y.push(yv);
            if let (Some(out), Some(errors)) = (kept.y_error.as_mut(), y_error) {
                out.push(errors.get(index).copied().unwrap_or(0.0));
            }
        } else {
            hidden += 1;
        }
    }
    (kept, hidden)
}
