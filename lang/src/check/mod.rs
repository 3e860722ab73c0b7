//! The checker: resolves names against the workspace (and what earlier statements of the
//! cell define), converts every number to the unit stdlib expects, checks dimensions and
//! ranges, and reports every problem it finds with a "did you mean" hint where one helps.
//!
//! Its output is a list of resolved steps (`Checked`), which `plan` turns into stdlib
//! calls. Nothing runs here.

use icefield_stdlib::lattice;

pub mod analysis;
pub mod data;
pub mod dynamics;
pub mod equilibrium;
pub mod monopoles;
pub mod percolation;
mod phrase;

use crate::ast::*;
use crate::commands::{self, Family};
use crate::diagnostic::{did_you_mean, ErrorKind, Problem};
use crate::measures::{
    Measure, DIAGNOSTIC_COLUMNS, EXCHANGE_COLUMN, MEASURES, PLANNED_MEASURES, TEMPERATURE_COLUMN,
    TEMPERATURE_UNIT,
};
use crate::script::{Script, BUILTIN_FUNCTIONS};
use crate::units::{self, Dimension};
use crate::workspace::{
    CouplingsDecl, CouplingsUpdate, FieldDecl, LatticeDecl, LatticeKind, Model, Value as WsValue,
    Workspace, RESERVED_SHOW_NAMES,
};
use icefield_stdlib::engine::FlipRule;
use icefield_stdlib::exchange::{CouplingConvention, ExchangeCouplings, ZeemanField};
use icefield_stdlib::scan::Ladder;

/// The largest L accepted by the checker (stdlib refuses sizes that do not fit memory).
pub const MAX_CELLS_PER_SIDE: u64 = 1000;
/// The most temperatures one scan may have.
pub const MAX_SCAN_POINTS: u64 = 100_000;
/// The name a scan result gets when the statement does not name it.
pub const DEFAULT_SCAN_NAME: &str = "last_scan";

pub const LATTICE_KINDS: &[&str] = &["pyrochlore", "square_ice"];
pub const PLANNED_LATTICE_KINDS: &[&str] = &[];
/// The measures a square-ice scan records (its sampler keeps the energy only).
pub const SQUARE_ICE_MEASURES: &[Measure] = &[
    Measure::Energy,
    Measure::SpecificHeat,
    Measure::SpecificHeatMolar,
    Measure::AcceptanceRate,
    Measure::AutocorrelationTime,
    Measure::Entropy,
];
pub const COUPLING_KINDS: &[&str] = &["nearest", "exchange", "dipolar"];
pub const PLANNED_COUPLING_KINDS: &[&str] = &[];

pub const LATTICE_OPTIONS: &[&str] = &["L"];
pub const NEAREST_OPTIONS: &[&str] = &["J_eff", "J1", "convention", "D"];
pub const EXCHANGE_OPTIONS: &[&str] = &["J1", "J2", "J3", "J3'", "convention"];
pub const DIPOLAR_OPTIONS: &[&str] = &["D", "moment", "r_nn"];
/// The single-flip acceptance rules of a scan.
pub const ACCEPTANCE_RULES: &[&str] = &["metropolis", "heat_bath"];
/// The most loop moves per sweep a scan accepts.
pub const MAX_LOOPS_PER_SWEEP: u64 = 1_000_000;
pub const FIELD_OPTIONS: &[&str] = &["B", "moment"];
pub const SCAN_OPTIONS: &[&str] = &[
    "sweeps",
    "equilibrate",
    "sample_every",
    "spacing",
    "start",
    "acceptance",
    "loops",
    "tempering",
];
pub const TABLE_OPTIONS: &[&str] = &["columns"];
pub const PLOT_OPTIONS: &[&str] = &[
    "xscale", "yscale", "title", "style", "errors", "width", "height",
];
pub const START_STATES: &[&str] = &["random", "ice", "all_in_all_out"];
/// Fewest samples per temperature (stdlib needs them for error bars).
pub const MIN_SAMPLES: u64 = icefield_stdlib::scan::MIN_SAMPLES;
/// Options of the designed language that later versions use: (statement, option, section).
pub const PLANNED_OPTIONS: &[(&str, &str, &str)] = &[
    ("lattice", "a", "Lattice"),
    ("scan", "moves", "Further runs"),
];
pub const SCAN_VARIABLES: &[&str] = &["T"];
pub const PLANNED_SCAN_VARIABLES: &[&str] = &["B"];

/// Default scan lengths, in sweeps.
pub const DEFAULT_MEASUREMENT_SWEEPS: u64 = 2000;
pub const DEFAULT_EQUILIBRATION_SWEEPS: u64 = 500;

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Spacing {
    Linear,
    Log,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum StartState {
    Random,
    Ice,
    AllInAllOut,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Scale {
    Linear,
    Log,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Style {
    Line,
    Points,
    Both,
}

#[derive(Clone, Debug, PartialEq)]
pub struct ScanSpec {
    pub target: String,
    pub temperatures_kelvin: Vec<f64>,
    pub measurement_sweeps: u64,
    pub equilibration_sweeps: u64,
    pub sample_every_sweeps: u64,
    pub start: StartState,
    /// Single-flip acceptance rule.
    pub rule: FlipRule,
    /// Ice-manifold loop moves attempted after every sweep.
    pub loops_per_sweep: u64,
    /// Independent chains, parallel tempering (`tempering = on`) or an anneal.
    pub ladder: Ladder,
    pub measures: Vec<Measure>,
    /// No later statement of the cell shows this table: print a short summary.
    pub summary: bool,
}

/// What `export` writes.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ExportFormat {
    /// CSV, units in every header, provenance as `#` comments.
    Csv,
    /// One JSON object: units, values, errors, provenance.
    Json,
}

/// Options of `export`.
pub const EXPORT_OPTIONS: &[&str] = &["format"];

#[derive(Clone, Debug, PartialEq)]
pub struct PlotSpec {
    pub target: Option<String>,
    /// (table, column) of each series.
    pub series: Vec<(String, String)>,
    pub x_column: String,
    pub x_scale: Scale,
    pub y_scale: Scale,
    pub title: Option<String>,
    /// `None`: by table — measured (imported) tables as points, simulated ones as lines
    /// next to measured data, and both otherwise.
    pub style: Option<Style>,
    pub error_bars: bool,
    pub width_px: u32,
    pub height_px: u32,
    /// How the statement read, for the figure's record name.
    pub description: String,
}

#[derive(Clone, Debug, PartialEq)]
pub struct ColumnSpec {
    pub table: String,
    pub column: String,
    pub expression: String,
    /// Where the expression starts in the cell (to place rhai errors).
    pub expression_span: Span,
    /// Columns of the table the expression reads.
    pub inputs: Vec<String>,
    pub unit: String,
}

/// What `show` shows.
#[derive(Clone, Debug, PartialEq)]
pub enum ShowTarget {
    Value(String),
    Model,
    Workspace,
    Measures,
}

/// A resolved statement, ready to plan.
#[derive(Clone, Debug, PartialEq)]
pub enum Checked {
    Lattice(LatticeDecl),
    Couplings(CouplingsUpdate),
    Field(FieldDecl),
    Seed(u64),
    Measure(Vec<Measure>),
    Scan(ScanSpec),
    Table {
        name: String,
        columns: Option<Vec<String>>,
    },
    Show(ShowTarget),
    Plot(PlotSpec),
    Rhai {
        body: String,
        body_span: Span,
    },
    Column(ColumnSpec),
    Export {
        name: String,
        path: String,
        format: ExportFormat,
    },
    /// A command statement, resolved by its family's checker.
    Command(CommandSpec),
}

/// A resolved command, by family (see `commands`).
#[derive(Clone, Debug, PartialEq)]
pub enum CommandSpec {
    Dynamics(dynamics::DynamicsSpec),
    Monopoles(monopoles::MonopolesSpec),
    Analysis(analysis::AnalysisSpec),
    Data(data::DataSpec),
    Percolation(percolation::PercolationSpec),
    Equilibrium(equilibrium::EquilibriumSpec),
}

impl CommandSpec {
    /// What the command changes in the model declaration (a dynamics rule, say), applied
    /// when the cell is planned so that later statements of the cell see it.
    pub fn declare(&self, model: &mut Model) {
        match self {
            CommandSpec::Dynamics(spec) => spec.declare(model),
            CommandSpec::Monopoles(_)
            | CommandSpec::Analysis(_)
            | CommandSpec::Data(_)
            | CommandSpec::Percolation(_)
            | CommandSpec::Equilibrium(_) => {}
        }
    }
}

#[derive(Clone, Debug, PartialEq)]
pub struct CheckedStatement {
    pub step: Checked,
    pub span: Span,
    pub keyword: Span,
}

/// A column as the checker sees it.
#[derive(Clone, Debug)]
struct ColumnView {
    name: String,
    unit: String,
    derived: bool,
}

#[derive(Clone, Debug)]
enum NameView {
    Table(Vec<ColumnView>),
    Figure,
    /// Defined by a statement that failed to parse: accept anything about it.
    Opaque,
}

/// The workspace as it will be when each statement runs.
struct View {
    names: Vec<(String, NameView)>,
    lattice: bool,
    couplings: bool,
    /// The declared lattice, when it is known (not after a failed declaration).
    lattice_decl: Option<LatticeDecl>,
    /// The declared couplings go beyond the nearest-neighbour model (coupling table).
    general_couplings: bool,
    /// A field with a direction is declared (so `magnetisation_along` has a meaning).
    field_direction: bool,
    /// A dynamics rule is declared (the monopole commands follow it).
    dynamics: bool,
    measures: Vec<Measure>,
    /// The measures were chosen by a `measure` statement (not the default set).
    measures_chosen: bool,
    functions: Vec<(String, usize)>,
    variables: Vec<String>,
    /// A rhai block of the cell failed to parse: accept unknown functions and variables.
    lenient_script: bool,
    /// Files written by earlier `export` statements of the cell (an `import` of one is
    /// read when it runs, not when the cell is checked).
    written_files: Vec<String>,
}

impl View {
    fn new(workspace: &Workspace, script: &Script) -> Self {
        let names = workspace
            .values
            .iter()
            .map(|(name, value)| {
                let view = match value {
                    WsValue::Table(t) => NameView::Table(
                        t.columns
                            .iter()
                            .map(|c| ColumnView {
                                name: c.name.clone(),
                                unit: c.unit.clone(),
                                derived: c.derived_from.is_some(),
                            })
                            .collect(),
                    ),
                    WsValue::Figure(_) => NameView::Figure,
                };
                (name.clone(), view)
            })
            .collect();
        View {
            names,
            lattice: workspace.model.lattice.is_some(),
            couplings: workspace.model.couplings.is_some(),
            lattice_decl: workspace.model.lattice.clone(),
            general_couplings: workspace
                .model
                .couplings
                .as_ref()
                .is_some_and(|c| !c.is_nearest()),
            field_direction: workspace
                .model
                .field
                .as_ref()
                .is_some_and(|f| f.direction.is_some()),
            dynamics: workspace.model.dynamics.is_some(),
            measures_chosen: workspace.model.measures.is_some(),
            measures: workspace
                .model
                .measures
                .clone()
                .unwrap_or_else(Measure::all),
            functions: script.functions(),
            variables: script.variables(),
            lenient_script: false,
            written_files: Vec::new(),
        }
    }
    fn get(&self, name: &str) -> Option<&NameView> {
        self.names.iter().find(|(n, _)| n == name).map(|(_, v)| v)
    }
    fn columns(&self, name: &str) -> Option<&Vec<ColumnView>> {
        match self.get(name) {
            Some(NameView::Table(columns)) => Some(columns),
            _ => None,
        }
    }
    fn set(&mut self, name: &str, value: NameView) {
        match self.names.iter_mut().find(|(n, _)| n == name) {
            Some(slot) => slot.1 = value,
            None => self.names.push((name.to_string(), value)),
        }
    }
    fn is_opaque(&self, name: &str) -> bool {
        matches!(self.get(name), Some(NameView::Opaque))
    }
    /// Applies what a statement that failed to parse would have defined.
    fn assume(&mut self, failed: &Failed) {
        match failed.keyword.as_str() {
            "lattice" => {
                self.lattice = true;
                self.lattice_decl = None;
            }
            "couplings" => self.couplings = true,
            "field" => self.field_direction = true,
            "dynamics" => self.dynamics = true,
            "rhai" => self.lenient_script = true,
            "column" => {
                if let Some((table, column)) =
                    failed.target.as_ref().and_then(|t| t.split_once('.'))
                {
                    if let Some(NameView::Table(columns)) = self
                        .names
                        .iter_mut()
                        .find(|(n, _)| n == table)
                        .map(|(_, v)| v)
                    {
                        if !columns.iter().any(|c| c.name == column) {
                            columns.push(ColumnView {
                                name: column.trim().to_string(),
                                unit: String::new(),
                                derived: true,
                            });
                        }
                    }
                }
                return;
            }
            _ => {}
        }
        if let Some(target) = &failed.target {
            self.set(target, NameView::Opaque);
        }
    }
    fn table_names(&self) -> Vec<&str> {
        self.names
            .iter()
            .filter(|(_, v)| matches!(v, NameView::Table(_)))
            .map(|(n, _)| n.as_str())
            .collect()
    }
    fn all_names(&self) -> Vec<&str> {
        self.names.iter().map(|(n, _)| n.as_str()).collect()
    }
}

/// Checks a parsed cell. Returns the resolved steps of the statements that checked, and
/// every problem found (the cell runs only if there is none).
pub fn check(
    program: &Program,
    workspace: &Workspace,
    script: &Script,
) -> (Vec<CheckedStatement>, Vec<Problem>) {
    let mut view = View::new(workspace, script);
    let mut checker = Checker {
        problems: Vec::new(),
        script,
    };
    let mut steps = Vec::new();
    let mut failed = program.failed.iter().peekable();
    for statement in &program.statements {
        while let Some(f) = failed.next_if(|f| f.start < statement.span.start) {
            view.assume(f);
        }
        let before = checker.problems.len();
        let step = checker.statement(statement, &mut view);
        // A `dynamics` statement declares the rule later statements follow, even when it
        // has errors (so they get no follow-up error).
        if statement.keyword.name == "dynamics" {
            view.dynamics = true;
        }
        if let Some(step) = step {
            if checker.problems.len() == before {
                steps.push(CheckedStatement {
                    step,
                    span: statement.span,
                    keyword: statement.keyword.span,
                });
            }
        }
    }
    mark_summaries(&mut steps);
    let mut problems = checker.problems;
    problems.sort_by_key(|p| p.span.start);
    (steps, problems)
}

/// A scan prints a summary unless a later statement of the cell shows its table.
fn mark_summaries(steps: &mut [CheckedStatement]) {
    for index in 0..steps.len() {
        let target = match &steps[index].step {
            Checked::Scan(scan) => scan.target.clone(),
            Checked::Command(CommandSpec::Equilibrium(equilibrium::EquilibriumSpec::Anneal(
                scan,
            ))) => scan.target.clone(),
            _ => continue,
        };
        let shown = steps[index + 1..].iter().any(|s| match &s.step {
            Checked::Table { name, .. } => *name == target,
            Checked::Show(ShowTarget::Value(name)) => *name == target,
            Checked::Plot(plot) => plot.series.iter().any(|(t, _)| *t == target),
            _ => false,
        });
        match &mut steps[index].step {
            Checked::Scan(scan)
            | Checked::Command(CommandSpec::Equilibrium(equilibrium::EquilibriumSpec::Anneal(
                scan,
            ))) => scan.summary = !shown,
            _ => {}
        }
    }
}

struct Checker<'a> {
    problems: Vec<Problem>,
    script: &'a Script,
}

/// The article-and-noun of a wanted unit: "an energy unit", "a temperature unit".
fn unit_phrase(dimension: Dimension, temperature: bool) -> String {
    let noun = match dimension {
        Dimension::Energy if temperature => "a temperature unit",
        Dimension::Energy => "an energy unit",
        Dimension::MagneticField => "a magnetic-field unit",
        Dimension::Time => "a time unit",
        Dimension::Length => "a length unit",
        Dimension::Moment => "a moment unit",
        Dimension::Frequency => "a frequency unit",
        Dimension::Dimensionless => "no unit",
    };
    format!("{noun}: {}", dimension.suggested_units())
}

impl<'a> Checker<'a> {
    fn push(&mut self, problem: Problem) {
        self.problems.push(problem);
    }

    /// Converts `quantity` to the base unit of `dimension`. `what` names the value in
    /// messages; `temperature` says "temperature" instead of "energy".
    fn convert(
        &mut self,
        quantity: &Quantity,
        unit_override: Option<&Ident>,
        dimension: Dimension,
        what: &str,
        temperature: bool,
    ) -> Option<f64> {
        let value = quantity.number.value;
        if !value.is_finite() {
            self.push(Problem::new(
                ErrorKind::Value,
                quantity.number.span,
                format!("`{}` is not a finite number", quantity.number.text),
            ));
            return None;
        }
        let unit = quantity.unit.as_ref().or(unit_override);
        match (unit, dimension) {
            (None, Dimension::Dimensionless) => Some(value),
            (None, _) => {
                self.push(
                    Problem::new(
                        ErrorKind::Unit,
                        quantity.number.span,
                        format!("{what} needs {}", unit_phrase(dimension, temperature)),
                    )
                    .with_help(format!(
                        "write e.g. `{} {}`",
                        quantity.number.text,
                        dimension.base_unit()
                    )),
                );
                None
            }
            (Some(unit), wanted) => match units::lookup(&unit.name) {
                None => {
                    self.push(
                        Problem::new(
                            ErrorKind::Unit,
                            unit.span,
                            format!("unknown unit `{}`", unit.name),
                        )
                        .with_help_opt(units::unknown_unit_help(&unit.name)),
                    );
                    None
                }
                Some(def) if wanted == Dimension::Dimensionless => {
                    let _ = def;
                    self.push(Problem::new(
                        ErrorKind::Unit,
                        unit.span,
                        format!("{what} is a pure number; remove the unit `{}`", unit.name),
                    ));
                    None
                }
                Some(def) if def.dimension != wanted => {
                    self.push(
                        Problem::new(
                            ErrorKind::Unit,
                            unit.span,
                            format!(
                                "{what} needs {}, but `{}` is {} unit",
                                unit_phrase(wanted, temperature),
                                unit.name,
                                match def.dimension {
                                    Dimension::Energy => "an energy/temperature",
                                    Dimension::MagneticField => "a magnetic-field",
                                    Dimension::Time => "a time",
                                    Dimension::Length => "a length",
                                    Dimension::Moment => "a magnetic-moment",
                                    Dimension::Frequency => "a frequency",
                                    Dimension::Dimensionless => "a dimensionless",
                                }
                            ),
                        )
                        .with_help(format!("{} is {}", unit.name, def.description)),
                    );
                    None
                }
                Some(def) => Some(def.convert(value)),
            },
        }
    }

    /// A whole number without unit, in `[min, max]`.
    fn count(&mut self, value: &Value, what: &str, min: u64, max: u64) -> Option<u64> {
        let quantity = match value {
            Value::Quantity(q) => q,
            other => {
                self.push(Problem::new(
                    ErrorKind::Value,
                    other.span(),
                    format!("{what} is a whole number"),
                ));
                return None;
            }
        };
        let number = self.convert(quantity, None, Dimension::Dimensionless, what, false)?;
        if number.fract() != 0.0 || number < min as f64 || number > max as f64 {
            let range = if max == u64::MAX {
                format!("at least {min}")
            } else {
                format!("from {min} to {max}")
            };
            self.push(Problem::new(
                ErrorKind::Value,
                quantity.span,
                format!(
                    "{what} must be a whole number {range}, not {}",
                    quantity.number.text
                ),
            ));
            return None;
        }
        Some(number as u64)
    }

    /// One of `choices`.
    fn word(&mut self, value: &Value, what: &str, choices: &[&str]) -> Option<String> {
        match value {
            Value::Word(ident) if choices.contains(&ident.name.as_str()) => {
                Some(ident.name.clone())
            }
            Value::Word(ident) => {
                self.push(
                    Problem::new(
                        ErrorKind::Name,
                        ident.span,
                        format!(
                            "{what} is one of {}, not `{}`",
                            list_words(choices),
                            ident.name
                        ),
                    )
                    .with_help_opt(did_you_mean(&ident.name, choices.iter().copied())),
                );
                None
            }
            other => {
                self.push(Problem::new(
                    ErrorKind::Value,
                    other.span(),
                    format!("{what} is one of {}", list_words(choices)),
                ));
                None
            }
        }
    }

    fn text(&mut self, value: &Value, what: &str) -> Option<String> {
        match value {
            Value::Text { text, .. } => Some(text.clone()),
            other => {
                self.push(Problem::new(
                    ErrorKind::Value,
                    other.span(),
                    format!("{what} is a quoted text, e.g. \"Specific heat\""),
                ));
                None
            }
        }
    }

    /// Reports unknown and repeated option names; returns a lookup.
    fn options<'o>(
        &mut self,
        options: &'o [Opt],
        allowed: &[&str],
        statement: &str,
    ) -> Vec<&'o Opt> {
        let mut seen: Vec<&'o Opt> = Vec::new();
        for option in options {
            let key = option.key.name.as_str();
            if let Some((_, section)) = PLANNED_OPTIONS
                .iter()
                .find(|(s, k, _)| statement.starts_with(s) && *k == key)
                .map(|(_, k, section)| (k, section))
            {
                self.push(Problem::new(
                    ErrorKind::NotImplemented,
                    option.key.span,
                    format!(
                        "option `{key}` of `{statement}` belongs to the designed language \
                         (REFERENCE.md, \"{section}\") but this version does not use it yet"
                    ),
                ));
                continue;
            }
            if !allowed.contains(&key) {
                let help = did_you_mean(key, allowed.iter().copied())
                    .unwrap_or_else(|| format!("`{statement}` takes {}", list_words(allowed)));
                self.push(
                    Problem::new(
                        ErrorKind::Name,
                        option.key.span,
                        format!("unknown option `{key}` for `{statement}`"),
                    )
                    .with_help(help),
                );
                continue;
            }
            if seen.iter().any(|o| o.key.name == key) {
                self.push(Problem::new(
                    ErrorKind::Value,
                    option.key.span,
                    format!("option `{key}` is given twice"),
                ));
                continue;
            }
            seen.push(option);
        }
        seen
    }

    fn statement(&mut self, statement: &Statement, view: &mut View) -> Option<Checked> {
        match &statement.kind {
            StatementKind::Lattice { kind, options } => {
                self.lattice(statement, kind, options, view)
            }
            StatementKind::Couplings { kind, options } => {
                self.couplings(statement, kind, options, view)
            }
            StatementKind::Field { options } => self.field(statement, options, view),
            StatementKind::Seed { value } => self.seed(value),
            StatementKind::Measure { names } => self.measure(names, view),
            StatementKind::Scan {
                target,
                variable,
                range,
                options,
            } => self.scan(statement, target.as_ref(), variable, range, options, view),
            StatementKind::Table { name, options } => self.table(name, options, view),
            StatementKind::Show { name, options } => self.show(name, options, view),
            StatementKind::Plot {
                target,
                ys,
                x,
                options,
            } => self.plot(statement, target.as_ref(), ys, x, options, view),
            StatementKind::Rhai { body, body_span } => self.rhai(body, *body_span, view),
            StatementKind::Column {
                target,
                expr,
                expr_text,
                unit,
            } => self.column(target, expr, expr_text, unit.as_ref(), view),
            StatementKind::Export {
                name,
                path,
                options,
            } => self.export(name, path, options, view),
            StatementKind::Command {
                target,
                args,
                options,
            } => {
                let target = target.as_ref();
                match commands::family(&statement.keyword.name)? {
                    Family::Dynamics => self.check_dynamics(statement, target, args, options, view),
                    Family::Monopoles => {
                        self.check_monopoles(statement, target, args, options, view)
                    }
                    Family::Analysis => self.check_analysis(statement, target, args, options, view),
                    Family::Data => self.check_data(statement, target, args, options, view),
                    Family::Percolation => {
                        self.check_percolation(statement, target, args, options, view)
                    }
                    Family::Equilibrium => {
                        self.check_equilibrium(statement, target, args, options, view)
                    }
                }
            }
        }
    }

    /// A physical-time command needs a lattice, couplings and a dynamics rule; reports
    /// each that is missing at the command's keyword. `needs` says what for.
    fn require_physical_time_model(&mut self, statement: &Statement, view: &View, needs: &str) {
        let keyword = &statement.keyword.name;
        if !view.lattice {
            self.push(
                Problem::new(
                    ErrorKind::Name,
                    statement.keyword.span,
                    format!("no lattice declared yet: `{keyword}` needs a model"),
                )
                .with_help("declare one first, e.g. `lattice pyrochlore L = 4`"),
            );
        } else if !view.couplings {
            self.push(
                Problem::new(
                    ErrorKind::Name,
                    statement.keyword.span,
                    format!("no couplings declared yet: `{keyword}` needs a model"),
                )
                .with_help("declare them first, e.g. `couplings nearest J_eff = 1.8 K`"),
            );
        }
        if !view.dynamics {
            self.push(
                Problem::new(
                    ErrorKind::Name,
                    statement.keyword.span,
                    format!("no dynamics rule declared yet: `{keyword}` {needs}"),
                )
                .with_help(
                    "declare a dynamics rule first: dynamics single_flip, attempt_time = 1 µs",
                ),
            );
        }
    }

    fn kind_name(
        &mut self,
        kind: &Ident,
        implemented: &[&str],
        planned: &[&str],
        what: &str,
    ) -> bool {
        if implemented.contains(&kind.name.as_str()) {
            return true;
        }
        if planned.contains(&kind.name.as_str()) {
            self.push(Problem::new(
                ErrorKind::NotImplemented,
                kind.span,
                format!(
                    "{what} `{}` belongs to the designed language (REFERENCE.md) but this version \
                     has only {}",
                    kind.name,
                    list_words(implemented)
                ),
            ));
        } else {
            self.push(
                Problem::new(
                    ErrorKind::Name,
                    kind.span,
                    format!("unknown {what} `{}`", kind.name),
                )
                .with_help(
                    did_you_mean(&kind.name, implemented.iter().chain(planned).copied())
                        .unwrap_or_else(|| format!("available: {}", list_words(implemented))),
                ),
            );
        }
        false
    }

    fn lattice(
        &mut self,
        statement: &Statement,
        kind: &Ident,
        options: &[Opt],
        view: &mut View,
    ) -> Option<Checked> {
        // Even a failed declaration counts as one, so later lines get no follow-up errors.
        view.lattice = true;
        view.lattice_decl = None;
        // Options of another lattice kind are that kind's business.
        if !self.kind_name(kind, LATTICE_KINDS, PLANNED_LATTICE_KINDS, "lattice") {
            return None;
        }
        let before_options = self.problems.len();
        let options = self.options(options, LATTICE_OPTIONS, "lattice");
        if self.problems.len() > before_options {
            return None;
        }
        if kind.name == "square_ice" {
            return self.square_ice_lattice(statement, &options, view);
        }
        let size = match options.iter().find(|o| o.key.name == "L") {
            Some(option) => {
                let size =
                    self.count(&option.value, "`L` (cells per side)", 1, MAX_CELLS_PER_SIDE)?;
                // Refuse sizes whose tables would not fit, without building anything.
                let bytes = lattice::estimated_table_bytes(size as usize);
                let spins = 16 * size * size * size;
                if bytes > lattice::TABLE_MEMORY_LIMIT_BYTES || spins > u32::MAX as u64 {
                    let error = lattice::LatticeError::TooLarge {
                        cells_per_side: size as usize,
                        spin_count: spins,
                        estimated_bytes: bytes,
                        limit_bytes: lattice::TABLE_MEMORY_LIMIT_BYTES,
                    };
                    self.push(Problem::new(
                        ErrorKind::Value,
                        option.value.span(),
                        error.to_string(),
                    ));
                    return None;
                }
                size
            }
            None => {
                self.push(
                    Problem::new(
                        ErrorKind::Value,
                        statement.span,
                        "the lattice needs its size `L` (conventional cubic cells per side)",
                    )
                    .with_help(format!("write `lattice {} L = 4`", kind.name)),
                );
                return None;
            }
        };
        let decl = LatticeDecl {
            kind: LatticeKind::Pyrochlore,
            cells_per_side: size as usize,
        };
        view.lattice_decl = Some(decl.clone());
        Some(Checked::Lattice(decl))
    }

    /// `lattice square_ice L = N`: N×N vertices, 2N² spins (stdlib::square_ice).
    fn square_ice_lattice(
        &mut self,
        statement: &Statement,
        options: &[&Opt],
        view: &mut View,
    ) -> Option<Checked> {
        let Some(option) = options.iter().find(|o| o.key.name == "L") else {
            self.push(
                Problem::new(
                    ErrorKind::Value,
                    statement.span,
                    "the lattice needs its size `L` (vertices per side)",
                )
                .with_help("write `lattice square_ice L = 32`"),
            );
            return None;
        };
        let size = self.count(
            &option.value,
            "`L` (vertices per side of square ice)",
            3,
            icefield_stdlib::square_ice::MAX_SQUARE_ICE_SIDE as u64,
        )?;
        let decl = LatticeDecl {
            kind: LatticeKind::SquareIce,
            cells_per_side: size as usize,
        };
        view.lattice_decl = Some(decl.clone());
        Some(Checked::Lattice(decl))
    }

    fn energy_option(&mut self, option: &Opt, what: &str) -> Option<f64> {
        match &option.value {
            Value::Quantity(q) => self.convert(q, None, Dimension::Energy, what, false),
            other => {
                self.push(Problem::new(
                    ErrorKind::Value,
                    other.span(),
                    format!("{what} is an energy such as `1.8 K`"),
                ));
                None
            }
        }
    }

    fn couplings(
        &mut self,
        statement: &Statement,
        kind: &Ident,
        options: &[Opt],
        view: &mut View,
    ) -> Option<Checked> {
        view.couplings = true;
        if !self.kind_name(kind, COUPLING_KINDS, PLANNED_COUPLING_KINDS, "coupling set") {
            return None;
        }
        view.general_couplings = kind.name != "nearest";
        match kind.name.as_str() {
            "exchange" => return self.exchange(statement, options),
            "dipolar" => return self.dipolar(statement, options),
            _ => {}
        }
        let before_options = self.problems.len();
        let options = self.options(options, NEAREST_OPTIONS, "couplings nearest");
        // A misspelt option already explains a missing one.
        if self.problems.len() > before_options {
            return None;
        }
        let find = |key: &str| options.iter().find(|o| o.key.name == key).copied();
        let j_eff = find("J_eff");
        let j1 = find("J1");
        let convention = find("convention");
        let dipolar = find("D");
        let before = self.problems.len();
        let decl = match (j_eff, j1) {
            (Some(j_eff), None) => {
                for extra in [convention, dipolar].into_iter().flatten() {
                    self.push(Problem::new(
                        ErrorKind::Value,
                        extra.key.span,
                        format!(
                            "`{}` goes with `J1`; `J_eff` is already the total σσ coefficient",
                            extra.key.name
                        ),
                    ));
                }
                let value = self.energy_option(j_eff, "`J_eff`")?;
                CouplingsDecl {
                    j_eff_kelvin: value,
                    given_as: String::new(),
                    exchange: None,
                    dipolar_kelvin: None,
                }
            }
            (None, Some(j1)) => {
                let j1_kelvin = self.energy_option(j1, "`J1`");
                let vector = match convention {
                    Some(c) => self
                        .word(&c.value, "`convention`", &["vector", "ising"])
                        .map(|w| w == "vector"),
                    None => Some(true),
                };
                let d_kelvin = match dipolar {
                    Some(d) => match self.energy_option(d, "`D`") {
                        Some(v) if v < 0.0 => {
                            self.push(Problem::new(
                                ErrorKind::Value,
                                d.value.span(),
                                "the dipolar strength D = μ0μ²/(4π k_B r_nn³) is positive",
                            ));
                            None
                        }
                        other => other,
                    },
                    None => Some(0.0),
                };
                let (j1_kelvin, vector, d_kelvin) = (j1_kelvin?, vector?, d_kelvin?);
                // Vector convention: J1 S_i·S_j with e_a·e_b = −1/3 gives σσ coefficient −J1/3;
                // the nearest-neighbour part of the dipolar sum adds D_nn = 5D/3 (derived,
                // physics-reference §2).
                let j_nn = if vector { -j1_kelvin / 3.0 } else { j1_kelvin };
                let d_nn = 5.0 * d_kelvin / 3.0;
                let mut given_as = format!(
                    "J1 = {} K ({} convention, J_nn = {} K)",
                    units::format_number(j1_kelvin),
                    if vector { "vector" } else { "Ising" },
                    units::format_number(j_nn)
                );
                if dipolar.is_some() {
                    given_as.push_str(&format!(
                        ", D = {} K truncated to nearest neighbours (D_nn = 5D/3 = {} K)",
                        units::format_number(d_kelvin),
                        units::format_number(d_nn)
                    ));
                }
                CouplingsDecl {
                    j_eff_kelvin: j_nn + d_nn,
                    given_as,
                    exchange: None,
                    dipolar_kelvin: None,
                }
            }
            (Some(_), Some(j1)) => {
                self.push(Problem::new(
                    ErrorKind::Value,
                    j1.key.span,
                    "give either `J_eff` or `J1`, not both",
                ));
                return None;
            }
            (None, None) => {
                self.push(
                    Problem::new(
                        ErrorKind::Value,
                        statement.span,
                        "`couplings nearest` needs `J_eff` (the σσ coefficient) or `J1`",
                    )
                    .with_help("write e.g. `couplings nearest J_eff = 1.8 K`"),
                );
                return None;
            }
        };
        if self.problems.len() > before {
            return None;
        }
        Some(Checked::Couplings(CouplingsUpdate::Nearest(decl)))
    }

    /// `convention = vector | ising` (vector by default).
    fn convention(&mut self, option: Option<&Opt>) -> Option<CouplingConvention> {
        match option {
            Some(c) => self
                .word(&c.value, "`convention`", &["vector", "ising"])
                .map(|w| {
                    if w == "vector" {
                        CouplingConvention::VectorSpins
                    } else {
                        CouplingConvention::IsingPseudospins
                    }
                }),
            None => Some(CouplingConvention::VectorSpins),
        }
    }

    /// A positive quantity of `dimension`.
    fn positive(&mut self, option: &Opt, dimension: Dimension, what: &str) -> Option<f64> {
        let Value::Quantity(q) = &option.value else {
            self.push(Problem::new(
                ErrorKind::Value,
                option.value.span(),
                format!("{what} is a number with a unit"),
            ));
            return None;
        };
        let value = self.convert(q, None, dimension, what, false)?;
        if value <= 0.0 {
            self.push(Problem::new(
                ErrorKind::Value,
                q.span,
                format!("{what} must be positive"),
            ));
            return None;
        }
        Some(value)
    }

    /// `couplings exchange J1 = ..., J2 = ..., J3 = ..., J3' = ... [, convention = ...]`.
    fn exchange(&mut self, statement: &Statement, options: &[Opt]) -> Option<Checked> {
        let before = self.problems.len();
        let options = self.options(options, EXCHANGE_OPTIONS, "couplings exchange");
        if self.problems.len() > before {
            return None;
        }
        let find = |key: &str| options.iter().find(|o| o.key.name == key).copied();
        let convention = self.convention(find("convention"));
        let mut shells = [0.0; 4];
        let mut any = false;
        for (slot, key) in shells.iter_mut().zip(["J1", "J2", "J3", "J3'"]) {
            if let Some(option) = find(key) {
                any = true;
                if let Some(v) = self.energy_option(option, &format!("`{key}`")) {
                    *slot = v;
                }
            }
        }
        if !any {
            self.push(
                Problem::new(
                    ErrorKind::Value,
                    statement.span,
                    "`couplings exchange` needs at least one of `J1`, `J2`, `J3`, `J3'`",
                )
                .with_help("write e.g. `couplings exchange J1 = 3.41 K, J2 = -0.14 K`"),
            );
        }
        if self.problems.len() > before {
            return None;
        }
        let couplings = ExchangeCouplings {
            j1_kelvin: shells[0],
            j2_kelvin: shells[1],
            j3_kelvin: shells[2],
            j3_prime_kelvin: shells[3],
            convention: convention?,
        };
        Some(Checked::Couplings(CouplingsUpdate::Exchange(couplings)))
    }

    /// `couplings dipolar D = E` or `couplings dipolar moment = M µB, r_nn = R Å`.
    fn dipolar(&mut self, statement: &Statement, options: &[Opt]) -> Option<Checked> {
        let before = self.problems.len();
        let options = self.options(options, DIPOLAR_OPTIONS, "couplings dipolar");
        if self.problems.len() > before {
            return None;
        }
        let find = |key: &str| options.iter().find(|o| o.key.name == key).copied();
        let d_kelvin = match (find("D"), find("moment"), find("r_nn")) {
            (Some(d), None, None) => {
                let value = self.energy_option(d, "`D`")?;
                if value < 0.0 {
                    self.push(Problem::new(
                        ErrorKind::Value,
                        d.value.span(),
                        "the dipolar strength D = μ0μ²/(4π k_B r_nn³) is positive",
                    ));
                    return None;
                }
                value
            }
            (None, Some(moment), Some(r_nn)) => {
                let mu = self.positive(moment, Dimension::Moment, "`moment`");
                let r = self.positive(r_nn, Dimension::Length, "`r_nn`");
                // D = μ0 μ² / (4π k_B r_nn³) with CODATA constants (physics-reference §2).
                icefield_stdlib::ewald::dipolar_strength_kelvin(mu?, r?)
            }
            (Some(d), _, _) => {
                self.push(Problem::new(
                    ErrorKind::Value,
                    d.key.span,
                    "give either `D` or `moment` and `r_nn`, not both",
                ));
                return None;
            }
            _ => {
                self.push(
                    Problem::new(
                        ErrorKind::Value,
                        statement.span,
                        "`couplings dipolar` needs `D`, or both `moment` and `r_nn`",
                    )
                    .with_help(
                        "write `couplings dipolar D = 1.41 K` or \
                         `couplings dipolar moment = 10 µB, r_nn = 3.54 Å`",
                    ),
                );
                return None;
            }
        };
        Some(Checked::Couplings(CouplingsUpdate::Dipolar { d_kelvin }))
    }

    fn field(
        &mut self,
        statement: &Statement,
        options: &[Opt],
        view: &mut View,
    ) -> Option<Checked> {
        let options = self.options(options, FIELD_OPTIONS, "field");
        let before = self.problems.len();
        let mut field: Option<([f64; 3], Option<[f64; 3]>)> = None;
        let mut moment = None;
        for option in &options {
            match option.key.name.as_str() {
                "B" => field = self.field_vector(&option.value),
                "moment" => moment = self.positive(option, Dimension::Moment, "`moment`"),
                _ => {}
            }
        }
        if !options.iter().any(|o| o.key.name == "B") {
            self.push(
                Problem::new(ErrorKind::Value, statement.span, "`field` needs `B = ...`")
                    .with_help("write e.g. `field B = 0.5 T along [1, 1, 1], moment = 10 µB`"),
            );
        }
        // A wrong field already explains the statement; ask for the moment only otherwise.
        if self.problems.len() == before && !options.iter().any(|o| o.key.name == "moment") {
            self.push(
                Problem::new(
                    ErrorKind::Value,
                    statement.span,
                    "`field` needs the moment per spin, `moment = ...` in µB",
                )
                .with_help("write e.g. `field B = 0.5 T along [1, 1, 1], moment = 10 µB`"),
            );
        }
        // Even a failed declaration counts, so later lines get no follow-up errors.
        view.field_direction = true;
        if self.problems.len() > before {
            return None;
        }
        let (field_tesla, direction) = field?;
        view.field_direction = direction.is_some();
        Some(Checked::Field(FieldDecl {
            field: ZeemanField {
                field_tesla,
                moment_bohr_magnetons: moment?,
            },
            direction,
        }))
    }

    /// `0.5 T along [1, 1, 1]` or `[0, 0, 0.5] T`: the field vector in tesla and the unit
    /// vector of its direction (none for a zero vector given by components).
    fn field_vector(&mut self, value: &Value) -> Option<([f64; 3], Option<[f64; 3]>)> {
        let unit = |v: &[f64]| {
            let norm = (v[0] * v[0] + v[1] * v[1] + v[2] * v[2]).sqrt();
            (norm > 0.0).then(|| [v[0] / norm, v[1] / norm, v[2] / norm])
        };
        match value {
            Value::Directed {
                magnitude,
                direction,
                ..
            } => {
                let b = self.convert(magnitude, None, Dimension::MagneticField, "`B`", false);
                let components = self.vector(direction, Dimension::Dimensionless, "a direction");
                let c = components?;
                let Some(n) = unit(&c) else {
                    self.push(Problem::new(
                        ErrorKind::Value,
                        direction.span(),
                        "the direction [0, 0, 0] has no orientation",
                    ));
                    return None;
                };
                let b = b?;
                Some(([b * n[0], b * n[1], b * n[2]], Some(n)))
            }
            Value::List { .. } => {
                let c = self.vector(value, Dimension::MagneticField, "`B`")?;
                Some(([c[0], c[1], c[2]], unit(&c)))
            }
            other => {
                self.push(
                    Problem::new(
                        ErrorKind::Value,
                        other.span(),
                        "`B` is a vector: give a direction or three components",
                    )
                    .with_help("write `B = 0.5 T along [1, 1, 1]` or `B = [0, 0, 0.5] T`"),
                );
                None
            }
        }
    }

    /// A three-component list.
    fn vector(&mut self, value: &Value, dimension: Dimension, what: &str) -> Option<Vec<f64>> {
        let Value::List { items, unit, span } = value else {
            self.push(Problem::new(
                ErrorKind::Value,
                value.span(),
                format!("{what} is a list of three numbers such as [1, 1, 1]"),
            ));
            return None;
        };
        if items.len() != 3 {
            self.push(Problem::new(
                ErrorKind::Value,
                *span,
                format!("{what} has three components, not {}", items.len()),
            ));
            return None;
        }
        let mut out = Vec::new();
        for item in items {
            match item {
                Value::Quantity(q) => {
                    out.push(self.convert(q, unit.as_ref(), dimension, what, false)?)
                }
                other => {
                    self.push(Problem::new(
                        ErrorKind::Value,
                        other.span(),
                        format!("{what} components are numbers"),
                    ));
                    return None;
                }
            }
        }
        Some(out)
    }

    fn seed(&mut self, value: &Number) -> Option<Checked> {
        match value.text.trim_start_matches('+').parse::<u64>() {
            Ok(seed) => Some(Checked::Seed(seed)),
            Err(_) => {
                self.push(Problem::new(
                    ErrorKind::Value,
                    value.span,
                    format!(
                        "a seed is a whole number from 0 to {}, not {}",
                        u64::MAX,
                        value.text
                    ),
                ));
                None
            }
        }
    }

    fn measure(&mut self, names: &[Ident], view: &mut View) -> Option<Checked> {
        let mut measures = Vec::new();
        let before = self.problems.len();
        for name in names {
            if let Some(m) = Measure::lookup(&name.name) {
                if !measures.contains(&m) {
                    measures.push(m);
                }
            } else if PLANNED_MEASURES.contains(&name.name.as_str()) {
                self.push(Problem::new(
                    ErrorKind::NotImplemented,
                    name.span,
                    format!(
                        "measure `{}` belongs to the designed language (REFERENCE.md, \"Measures\") \
                         but this version does not record it yet",
                        name.name
                    ),
                ));
            } else {
                self.push(
                    Problem::new(
                        ErrorKind::Name,
                        name.span,
                        format!("unknown measure `{}`", name.name),
                    )
                    .with_help_opt(did_you_mean(
                        &name.name,
                        MEASURES
                            .iter()
                            .map(|m| m.name)
                            .chain(PLANNED_MEASURES.iter().copied()),
                    )),
                );
            }
        }
        if self.problems.len() > before {
            return None;
        }
        view.measures = measures.clone();
        view.measures_chosen = true;
        Some(Checked::Measure(measures))
    }

    fn temperature(
        &mut self,
        quantity: &Quantity,
        unit: Option<&Ident>,
        what: &str,
    ) -> Option<f64> {
        let kelvin = self.convert(quantity, unit, Dimension::Energy, what, true)?;
        if kelvin <= 0.0 {
            self.push(Problem::new(
                ErrorKind::Value,
                quantity.span,
                format!(
                    "temperatures must be positive, not {}",
                    units::with_unit(kelvin, "K")
                ),
            ));
            return None;
        }
        Some(kelvin)
    }

    fn target_name(&mut self, target: Option<&Ident>) -> Option<String> {
        match target {
            Some(ident) if RESERVED_SHOW_NAMES.contains(&ident.name.as_str()) => {
                self.push(Problem::new(
                    ErrorKind::Value,
                    ident.span,
                    format!(
                        "`{}` is reserved for `show {}`; choose another name",
                        ident.name, ident.name
                    ),
                ));
                None
            }
            Some(ident) => Some(ident.name.clone()),
            None => Some(DEFAULT_SCAN_NAME.to_string()),
        }
    }

    fn scan(
        &mut self,
        statement: &Statement,
        target: Option<&Ident>,
        variable: &Ident,
        range: &ScanRange,
        options: &[Opt],
        view: &mut View,
    ) -> Option<Checked> {
        let before = self.problems.len();
        let target = self.target_name(target);
        if !SCAN_VARIABLES.contains(&variable.name.as_str()) {
            if PLANNED_SCAN_VARIABLES.contains(&variable.name.as_str()) {
                self.push(Problem::new(
                    ErrorKind::NotImplemented,
                    variable.span,
                    "field scans belong to the designed language (REFERENCE.md, \"Runs\") but \
                     this version scans temperature `T` only",
                ));
            } else {
                self.push(
                    Problem::new(
                        ErrorKind::Name,
                        variable.span,
                        format!("a scan varies the temperature `T`, not `{}`", variable.name),
                    )
                    .with_help("write `scan T from 0.3 K to 8 K in 30 steps`"),
                );
            }
        }
        let options = self.options(options, SCAN_OPTIONS, "scan");
        if self.problems.len() > before && !SCAN_VARIABLES.contains(&variable.name.as_str()) {
            // The range cannot be read without knowing what is scanned.
            return None;
        }
        let find = |key: &str| options.iter().find(|o| o.key.name == key).copied();
        let spacing = match find("spacing") {
            Some(option) => {
                if matches!(range, ScanRange::At(_)) {
                    self.push(Problem::new(
                        ErrorKind::Value,
                        option.key.span,
                        "`spacing` applies to `from ... to ... in N steps`; a list `at [...]` is used as written",
                    ));
                }
                self.word(&option.value, "`spacing`", &["linear", "log"])
                    .map(|w| {
                        if w == "log" {
                            Spacing::Log
                        } else {
                            Spacing::Linear
                        }
                    })
            }
            None => Some(Spacing::Linear),
        };
        let temperatures = match range {
            ScanRange::FromTo { from, to, steps } => {
                let from_kelvin = self.temperature(from, None, "the first temperature");
                let to_kelvin = self.temperature(to, None, "the last temperature");
                let count = self.count(
                    &Value::Quantity(Quantity {
                        number: steps.clone(),
                        unit: None,
                        span: steps.span,
                    }),
                    "the number of steps",
                    1,
                    MAX_SCAN_POINTS,
                );
                match (from_kelvin, to_kelvin, count, spacing) {
                    (Some(a), Some(b), Some(n), Some(spacing)) => {
                        Some(ladder(a, b, n as usize, spacing))
                    }
                    _ => None,
                }
            }
            ScanRange::At(list) => self.temperature_list(list),
        };
        let sweeps = match find("sweeps") {
            Some(o) => self.count(&o.value, "`sweeps`", 1, u64::MAX),
            None => Some(DEFAULT_MEASUREMENT_SWEEPS),
        };
        let equilibrate = match find("equilibrate") {
            Some(o) => self.count(&o.value, "`equilibrate`", 0, u64::MAX),
            None => Some(DEFAULT_EQUILIBRATION_SWEEPS),
        };
        let sample_every = match find("sample_every") {
            Some(o) => self.count(&o.value, "`sample_every`", 1, u64::MAX),
            None => Some(1),
        };
        if let (Some(sweeps), Some(every)) = (sweeps, sample_every) {
            if sweeps / every < MIN_SAMPLES {
                let span = find("sample_every")
                    .or(find("sweeps"))
                    .map(|o| o.value.span())
                    .unwrap_or(statement.keyword.span);
                self.push(Problem::new(
                    ErrorKind::Value,
                    span,
                    format!(
                        "{sweeps} sweeps sampled every {every} give {} samples; error bars need at least {MIN_SAMPLES}",
                        sweeps / every
                    ),
                ));
            }
        }
        let start = match find("start") {
            Some(o) => self
                .word(&o.value, "`start`", START_STATES)
                .map(|w| match w.as_str() {
                    "ice" => StartState::Ice,
                    "all_in_all_out" => StartState::AllInAllOut,
                    _ => StartState::Random,
                }),
            None => Some(StartState::Random),
        };
        let rule = match find("acceptance") {
            Some(o) => self
                .word(&o.value, "`acceptance`", ACCEPTANCE_RULES)
                .map(|w| {
                    if w == "heat_bath" {
                        FlipRule::HeatBath
                    } else {
                        FlipRule::Metropolis
                    }
                }),
            None => Some(FlipRule::Metropolis),
        };
        let loops = match find("loops") {
            Some(o) => self.count(
                &o.value,
                "`loops` (loop moves per sweep)",
                0,
                MAX_LOOPS_PER_SWEEP,
            ),
            None => Some(0),
        };
        let ladder = match find("tempering") {
            Some(o) => self.word(&o.value, "`tempering`", &["on", "off"]).map(|w| {
                if w == "on" {
                    Ladder::Tempering
                } else {
                    Ladder::Independent
                }
            }),
            None => Some(Ladder::Independent),
        };
        let mut measures = view.measures.clone();
        if !view.field_direction {
            if view.measures_chosen && measures.contains(&Measure::MagnetisationAlong) {
                self.push(
                    Problem::new(
                        ErrorKind::Value,
                        statement.keyword.span,
                        "`magnetisation_along` is the projection on the field direction, but no \
                         field with a direction is declared",
                    )
                    .with_help(
                        "declare one first, e.g. `field B = 0.5 T along [1, 1, 1], moment = 10 µB`",
                    ),
                );
            }
            measures.retain(|m| *m != Measure::MagnetisationAlong);
        }
        let square_ice = view
            .lattice_decl
            .as_ref()
            .is_some_and(|l| l.kind == LatticeKind::SquareIce);
        if square_ice {
            self.square_ice_scan(statement, &options, view, &mut measures);
        } else if let (Some(lattice), Some(ladder)) = (&view.lattice_decl, ladder) {
            let general = view.general_couplings
                || view.field_direction
                || rule != Some(FlipRule::Metropolis)
                || loops.is_some_and(|l| l > 0)
                || ladder != Ladder::Independent;
            let replicas = match (ladder, &temperatures) {
                (Ladder::Tempering, Some(t)) => t.len(),
                _ => 1,
            };
            if general {
                self.coupling_table_fits(statement, lattice.cells_per_side, replicas);
            }
        }
        if measures.contains(&Measure::Entropy) {
            if let Some(t) = &temperatures {
                if t.len() < 3 {
                    self.push(Problem::new(
                        ErrorKind::Value,
                        statement.keyword.span,
                        format!(
                            "`entropy` integrates over the scan's temperatures and needs at least \
                             3 of them, not {}",
                            t.len()
                        ),
                    ));
                }
            }
        }
        if !view.lattice {
            self.push(
                Problem::new(
                    ErrorKind::Name,
                    statement.keyword.span,
                    "no lattice declared yet: a scan needs a model",
                )
                .with_help("declare one first, e.g. `lattice pyrochlore L = 4`"),
            );
        } else if !view.couplings {
            self.push(
                Problem::new(
                    ErrorKind::Name,
                    statement.keyword.span,
                    "no couplings declared yet: a scan needs a model",
                )
                .with_help("declare them first, e.g. `couplings nearest J_eff = 1.8 K`"),
            );
        }
        if self.problems.len() > before {
            return None;
        }
        let (target, temperatures, sweeps, equilibrate, sample_every, start) = (
            target?,
            temperatures?,
            sweeps?,
            equilibrate?,
            sample_every?,
            start?,
        );
        let mut columns = vec![ColumnView {
            name: TEMPERATURE_COLUMN.to_string(),
            unit: TEMPERATURE_UNIT.to_string(),
            derived: false,
        }];
        columns.extend(
            measures
                .iter()
                .flat_map(|m| m.columns())
                .map(|(name, unit)| ColumnView {
                    name: name.to_string(),
                    unit: unit.to_string(),
                    derived: false,
                }),
        );
        columns.extend(DIAGNOSTIC_COLUMNS.iter().map(|(name, unit, _)| ColumnView {
            name: name.to_string(),
            unit: unit.to_string(),
            derived: false,
        }));
        if ladder == Some(Ladder::Tempering) {
            columns.push(ColumnView {
                name: EXCHANGE_COLUMN.0.to_string(),
                unit: EXCHANGE_COLUMN.1.to_string(),
                derived: false,
            });
        }
        view.set(&target, NameView::Table(columns));
        Some(Checked::Scan(ScanSpec {
            target,
            temperatures_kelvin: temperatures,
            measurement_sweeps: sweeps,
            equilibration_sweeps: equilibrate,
            sample_every_sweeps: sample_every,
            start,
            rule: rule?,
            loops_per_sweep: loops?,
            ladder: ladder?,
            measures,
            summary: true,
        }))
    }

    /// Refuses, before anything is allocated, a coupling-table scan whose table and
    /// samplers would not fit the memory budget (stdlib's estimate).
    fn coupling_table_fits(
        &mut self,
        statement: &Statement,
        cells_per_side: usize,
        replicas: usize,
    ) {
        use icefield_stdlib::scan::{estimated_general_scan_bytes, GENERAL_SCAN_LIMIT_BYTES};
        let bytes = estimated_general_scan_bytes(cells_per_side, replicas);
        if bytes > GENERAL_SCAN_LIMIT_BYTES {
            let gib = |b: u64| b as f64 / (1u64 << 30) as f64;
            self.push(
                Problem::new(
                    ErrorKind::Value,
                    statement.keyword.span,
                    format!(
                        "this scan needs a coupling table for L = {cells_per_side}{}: about \
                         {:.2} GiB, more than the {:.2} GiB limit",
                        if replicas > 1 {
                            format!(" and {replicas} tempering replicas")
                        } else {
                            String::new()
                        },
                        gib(bytes),
                        gib(GENERAL_SCAN_LIMIT_BYTES)
                    ),
                )
                .with_help(
                    "declare a smaller lattice, or use `couplings nearest` alone (the \
                     nearest-neighbour engine needs no table)",
                ),
            );
        }
    }

    /// What a scan of square ice can do: energy-based measures, the vertex model's J from
    /// `couplings nearest J_eff`, single-flip Metropolis with independent chains.
    fn square_ice_scan(
        &mut self,
        statement: &Statement,
        options: &[&Opt],
        view: &View,
        measures: &mut Vec<Measure>,
    ) {
        if view.general_couplings || view.field_direction {
            self.push(Problem::new(
                ErrorKind::Value,
                statement.keyword.span,
                "square ice runs the vertex model H = J Σ_v q_v² with J from `couplings nearest \
                 J_eff = ...`; exchange shells, dipolar sums and fields belong to the pyrochlore",
            ));
        }
        for option in options {
            let refused = matches!(
                option.key.name.as_str(),
                "loops" | "tempering" | "acceptance" | "start"
            );
            if refused {
                self.push(Problem::new(
                    ErrorKind::Value,
                    option.key.span,
                    format!(
                        "`{}` is not available on square ice: its sampler runs independent \
                         single-flip Metropolis chains from the ordered ice state",
                        option.key.name
                    ),
                ));
            }
        }
        if view.measures_chosen {
            for m in measures.iter() {
                if !SQUARE_ICE_MEASURES.contains(m) {
                    self.push(
                        Problem::new(
                            ErrorKind::Value,
                            statement.keyword.span,
                            format!(
                                "square ice does not record `{}` (its sampler keeps the energy \
                                 only)",
                                m.name()
                            ),
                        )
                        .with_help(format!(
                            "square ice records {}",
                            list_words(
                                &SQUARE_ICE_MEASURES
                                    .iter()
                                    .map(|m| m.name())
                                    .collect::<Vec<_>>()
                            )
                        )),
                    );
                }
            }
        }
        measures.retain(|m| SQUARE_ICE_MEASURES.contains(m));
    }

    fn temperature_list(&mut self, list: &Value) -> Option<Vec<f64>> {
        let Value::List { items, unit, span } = list else {
            return None;
        };
        if items.is_empty() {
            self.push(Problem::new(
                ErrorKind::Value,
                *span,
                "the list of temperatures is empty",
            ));
            return None;
        }
        if items.len() as u64 > MAX_SCAN_POINTS {
            self.push(Problem::new(
                ErrorKind::Value,
                *span,
                format!("a scan has at most {MAX_SCAN_POINTS} temperatures"),
            ));
            return None;
        }
        let mut out = Vec::new();
        let mut ok = true;
        for item in items {
            match item {
                Value::Quantity(q) => match self.temperature(q, unit.as_ref(), "a temperature") {
                    Some(t) => out.push(t),
                    None => ok = false,
                },
                other => {
                    self.push(Problem::new(
                        ErrorKind::Value,
                        other.span(),
                        "a temperature such as `0.5 K`",
                    ));
                    ok = false;
                }
            }
        }
        ok.then_some(out)
    }

    fn unknown_name(&mut self, ident: &Ident, view: &View, what: &str) {
        let mut candidates = view.all_names();
        candidates.extend(RESERVED_SHOW_NAMES.iter().copied());
        let help = did_you_mean(&ident.name, candidates).or_else(|| {
            if view.names.is_empty() {
                Some("the workspace is empty: run a scan first, e.g. `thermo = scan T from 0.5 K to 5 K in 10 steps`".to_string())
            } else {
                Some(format!("defined: {}", list_words(&view.all_names())))
            }
        });
        self.push(
            Problem::new(
                ErrorKind::Name,
                ident.span,
                format!("unknown {what} `{}`", ident.name),
            )
            .with_help_opt(help),
        );
    }

    fn table_exists(&mut self, name: &Ident, view: &View) -> bool {
        match view.get(&name.name) {
            Some(NameView::Table(_)) | Some(NameView::Opaque) => true,
            Some(NameView::Figure) => {
                self.push(
                    Problem::new(
                        ErrorKind::Value,
                        name.span,
                        format!("`{}` is a figure, not a table", name.name),
                    )
                    .with_help(format!("use `show {}`", name.name)),
                );
                false
            }
            None => {
                self.unknown_name(name, view, "table");
                false
            }
        }
    }

    fn column_list(&mut self, table: &str, option: &Opt, view: &View) -> Option<Vec<String>> {
        let columns: Vec<String> = view
            .columns(table)
            .map(|c| c.iter().map(|c| c.name.clone()).collect())
            .unwrap_or_default();
        let Value::List { items, .. } = &option.value else {
            self.push(Problem::new(
                ErrorKind::Value,
                option.value.span(),
                "`columns` is a list such as [T, energy]",
            ));
            return None;
        };
        let mut out = Vec::new();
        for item in items {
            match item {
                Value::Word(ident) if columns.contains(&ident.name) => out.push(ident.name.clone()),
                Value::Word(ident) => self.push(
                    Problem::new(
                        ErrorKind::Name,
                        ident.span,
                        format!("table `{table}` has no column `{}`", ident.name),
                    )
                    .with_help_opt(
                        did_you_mean(&ident.name, columns.iter().map(String::as_str))
                            .or_else(|| Some(format!("columns: {}", columns.join(", ")))),
                    ),
                ),
                other => self.push(Problem::new(
                    ErrorKind::Value,
                    other.span(),
                    "a column name",
                )),
            }
        }
        Some(out)
    }

    fn table(&mut self, name: &Ident, options: &[Opt], view: &View) -> Option<Checked> {
        let options = self.options(options, TABLE_OPTIONS, "table");
        if !self.table_exists(name, view) {
            return None;
        }
        let columns = match options.first() {
            Some(option) => Some(self.column_list(&name.name, option, view)?),
            None => None,
        };
        Some(Checked::Table {
            name: name.name.clone(),
            columns,
        })
    }

    fn show(&mut self, name: &Ident, options: &[Opt], view: &View) -> Option<Checked> {
        let target = match name.name.as_str() {
            "model" => ShowTarget::Model,
            "workspace" => ShowTarget::Workspace,
            "measures" => ShowTarget::Measures,
            other if view.get(other).is_some() => ShowTarget::Value(other.to_string()),
            _ => {
                self.unknown_name(name, view, "name");
                return None;
            }
        };
        if let ShowTarget::Value(table) = &target {
            if view.columns(table).is_some() {
                let options = self.options(options, TABLE_OPTIONS, "show");
                let columns = match options.first() {
                    Some(option) => Some(self.column_list(table, option, view)?),
                    None => None,
                };
                return Some(Checked::Table {
                    name: table.clone(),
                    columns,
                });
            }
        }
        self.options(options, &[], "show");
        Some(Checked::Show(target))
    }

    /// Resolves one `table.column` of a plot.
    fn plot_column(
        &mut self,
        reference: &ColumnRef,
        view: &View,
    ) -> Option<(String, String, String)> {
        let Some(table) = &reference.table else {
            let holders: Vec<&str> = view
                .table_names()
                .into_iter()
                .filter(|t| {
                    view.columns(t)
                        .is_some_and(|c| c.iter().any(|c| c.name == reference.column.name))
                })
                .collect();
            let help = match holders.first() {
                Some(t) => format!("write `{t}.{}`", reference.column.name),
                None => "write `TABLE.COLUMN`, e.g. `thermo.specific_heat`".to_string(),
            };
            self.push(
                Problem::new(
                    ErrorKind::Name,
                    reference.span,
                    format!("say which table `{}` comes from", reference.column.name),
                )
                .with_help(help),
            );
            return None;
        };
        if !self.table_exists(table, view) {
            return None;
        }
        self.column_of(&table.name, &reference.column, view)
            .map(|unit| (table.name.clone(), reference.column.name.clone(), unit))
    }

    /// The unit of `column` in `table`, or a NameError.
    fn column_of(&mut self, table: &str, column: &Ident, view: &View) -> Option<String> {
        let columns = view.columns(table)?;
        match columns.iter().find(|c| c.name == column.name) {
            Some(c) => Some(c.unit.clone()),
            None => {
                let names: Vec<&str> = columns.iter().map(|c| c.name.as_str()).collect();
                let mut help = did_you_mean(&column.name, names.iter().copied());
                if help.is_none() {
                    if let Some(m) = Measure::lookup(&column.name) {
                        help = Some(format!(
                            "`{table}` did not record `{}`: add it to `measure` before the scan",
                            m.name()
                        ));
                    } else {
                        help = Some(format!("columns: {}", names.join(", ")));
                    }
                }
                self.push(
                    Problem::new(
                        ErrorKind::Name,
                        column.span,
                        format!("table `{table}` has no column `{}`", column.name),
                    )
                    .with_help_opt(help),
                );
                None
            }
        }
    }

    fn plot(
        &mut self,
        statement: &Statement,
        target: Option<&Ident>,
        ys: &[ColumnRef],
        x: &ColumnRef,
        options: &[Opt],
        view: &mut View,
    ) -> Option<Checked> {
        let before = self.problems.len();
        let target_name = match target {
            Some(t) => self.target_name(Some(t)),
            None => None,
        };
        let mut series = Vec::new();
        let mut y_unit: Option<(String, String)> = None;
        for y in ys {
            // A table whose columns are known only when it is made (an import of a file an
            // earlier statement writes): its columns and units are checked when it is drawn.
            if let Some(table) = y.table.as_ref().filter(|t| view.is_opaque(&t.name)) {
                series.push((table.name.clone(), y.column.name.clone()));
                continue;
            }
            if let Some((table, column, unit)) = self.plot_column(y, view) {
                match &y_unit {
                    // Units of one dimension (s and ms) are converted to the first series'.
                    Some((first, first_unit)) if !data::units_agree(&unit, first_unit) => {
                        self.push(Problem::new(
                            ErrorKind::Unit,
                            y.span,
                            format!(
                                "`{table}.{column}` is in {} but `{first}` is in {}: they cannot share a y axis",
                                unit_or_pure(&unit),
                                unit_or_pure(first_unit)
                            ),
                        ));
                    }
                    Some(_) => {}
                    None => y_unit = Some((format!("{table}.{column}"), unit)),
                }
                series.push((table, column));
            }
        }
        // x: a column of every plotted table.
        let x_column = x.column.name.clone();
        if let Some(table) = &x.table {
            if self.table_exists(table, view) {
                self.column_of(&table.name, &x.column, view);
                if let Some((other, _)) = series.iter().find(|(t, _)| *t != table.name) {
                    self.push(Problem::new(
                        ErrorKind::Value,
                        x.span,
                        format!(
                            "x comes from `{}` but `{other}` is plotted too; write just `against {}`",
                            table.name, x.column.name
                        ),
                    ));
                }
            }
        } else {
            // Each series is drawn against the x column of its own table; their units must
            // agree (or convert).
            let mut tables: Vec<String> = series.iter().map(|(t, _)| t.clone()).collect();
            tables.dedup();
            let mut x_unit: Option<(String, String)> = None;
            for table in tables {
                if view.is_opaque(&table) {
                    continue;
                }
                let Some(unit) = self.column_of(&table, &x.column, view) else {
                    continue;
                };
                match &x_unit {
                    Some((first, first_unit)) if !data::units_agree(&unit, first_unit) => {
                        self.push(Problem::new(
                            ErrorKind::Unit,
                            x.span,
                            format!(
                                "`{table}.{}` is in {} but `{first}.{}` is in {}: they cannot share an x axis",
                                x.column.name,
                                unit_or_pure(&unit),
                                x.column.name,
                                unit_or_pure(first_unit)
                            ),
                        ));
                    }
                    Some(_) => {}
                    None => x_unit = Some((table.clone(), unit)),
                }
            }
        }
        let options = self.options(options, PLOT_OPTIONS, "plot");
        let find = |key: &str| options.iter().find(|o| o.key.name == key).copied();
        let scale = |checker: &mut Self, key: &str| -> Option<Scale> {
            match find(key) {
                Some(o) => checker
                    .word(&o.value, &format!("`{key}`"), &["linear", "log"])
                    .map(|w| {
                        if w == "log" {
                            Scale::Log
                        } else {
                            Scale::Linear
                        }
                    }),
                None => Some(Scale::Linear),
            }
        };
        let x_scale = scale(self, "xscale");
        let y_scale = scale(self, "yscale");
        let title = match find("title") {
            Some(o) => self.text(&o.value, "`title`").map(Some),
            None => Some(None),
        };
        let style = match find("style") {
            Some(o) => self
                .word(&o.value, "`style`", &["line", "points", "both"])
                .map(|w| match w.as_str() {
                    "line" => Style::Line,
                    "points" => Style::Points,
                    _ => Style::Both,
                })
                .map(Some),
            None => Some(None),
        };
        let error_bars = match find("errors") {
            Some(o) => self
                .word(&o.value, "`errors`", &["on", "off"])
                .map(|w| w == "on"),
            None => Some(true),
        };
        let width = match find("width") {
            Some(o) => self.count(&o.value, "`width` (pixels)", 160, 4000),
            None => Some(640),
        };
        let height = match find("height") {
            Some(o) => self.count(&o.value, "`height` (pixels)", 160, 4000),
            None => Some(400),
        };
        if self.problems.len() > before {
            return None;
        }
        if let Some(name) = &target_name {
            view.set(name, NameView::Figure);
        }
        let description = format!(
            "{} against {}",
            series
                .iter()
                .map(|(t, c)| format!("{t}.{c}"))
                .collect::<Vec<_>>()
                .join(", "),
            x_column
        );
        let _ = statement;
        Some(Checked::Plot(PlotSpec {
            target: target_name,
            series,
            x_column,
            x_scale: x_scale?,
            y_scale: y_scale?,
            title: title?,
            style: style?,
            error_bars: error_bars?,
            width_px: width? as u32,
            height_px: height? as u32,
            description,
        }))
    }

    fn rhai(&mut self, body: &str, body_span: Span, view: &mut View) -> Option<Checked> {
        match self.script.compile_block(body) {
            Ok(info) => {
                for f in info.functions {
                    view.functions.retain(|g| *g != f);
                    view.functions.push(f);
                }
                view.variables.extend(info.variables);
                Some(Checked::Rhai {
                    body: body.to_string(),
                    body_span,
                })
            }
            Err(failure) => {
                self.push(failure.into_problem(body_span, body));
                None
            }
        }
    }

    fn column(
        &mut self,
        target: &ColumnRef,
        expr: &Expr,
        expr_text: &str,
        unit: Option<&(String, Span)>,
        view: &mut View,
    ) -> Option<Checked> {
        let Some(table) = &target.table else {
            self.push(
                Problem::new(
                    ErrorKind::Name,
                    target.span,
                    "a derived column is named `TABLE.NEW_COLUMN`",
                )
                .with_help(format!("e.g. `column thermo.{} = ...`", target.column.name)),
            );
            return None;
        };
        if !self.table_exists(table, view) || view.is_opaque(&table.name) {
            return None;
        }
        let before = self.problems.len();
        let columns = view.columns(&table.name).cloned().unwrap_or_default();
        if let Some(existing) = columns.iter().find(|c| c.name == target.column.name) {
            if !existing.derived {
                self.push(Problem::new(
                    ErrorKind::Value,
                    target.column.span,
                    format!(
                        "`{}` is a measured column of `{}`; a derived column needs a new name",
                        existing.name, table.name
                    ),
                ));
            }
        }
        let column_names: Vec<&str> = columns.iter().map(|c| c.name.as_str()).collect();
        let mut names = Vec::new();
        expr.names(&mut names);
        let mut inputs: Vec<String> = Vec::new();
        for name in &names {
            if column_names.contains(&name.name.as_str()) {
                if !inputs.contains(&name.name) {
                    inputs.push(name.name.clone());
                }
            } else if !view.variables.contains(&name.name) && !view.lenient_script {
                self.push(
                    Problem::new(
                        ErrorKind::Name,
                        name.span,
                        format!("table `{}` has no column `{}`", table.name, name.name),
                    )
                    .with_help_opt(
                        did_you_mean(
                            &name.name,
                            column_names
                                .iter()
                                .copied()
                                .chain(view.variables.iter().map(String::as_str)),
                        )
                        .or_else(|| Some(format!("columns: {}", column_names.join(", ")))),
                    ),
                );
            }
        }
        let mut calls = Vec::new();
        expr.calls(&mut calls);
        for (function, arity) in &calls {
            let user: Vec<&(String, usize)> = view
                .functions
                .iter()
                .filter(|(n, _)| *n == function.name)
                .collect();
            if !user.is_empty() {
                if !user.iter().any(|(_, a)| a == arity) {
                    let arities: Vec<String> = user.iter().map(|(_, a)| a.to_string()).collect();
                    self.push(Problem::new(
                        ErrorKind::Script,
                        function.span,
                        format!(
                            "`{}` takes {} argument(s), given {arity}",
                            function.name,
                            arities.join(" or ")
                        ),
                    ));
                }
            } else if !BUILTIN_FUNCTIONS.contains(&function.name.as_str()) && !view.lenient_script {
                self.push(
                    Problem::new(
                        ErrorKind::Name,
                        function.span,
                        format!("unknown function `{}`", function.name),
                    )
                    .with_help_opt(
                        did_you_mean(
                            &function.name,
                            view.functions
                                .iter()
                                .map(|(n, _)| n.as_str())
                                .chain(BUILTIN_FUNCTIONS.iter().copied()),
                        )
                        .or_else(|| {
                            Some("define it in a `rhai { fn ... }` block first".to_string())
                        }),
                    ),
                );
            }
        }
        if self.problems.len() > before {
            return None;
        }
        let unit_text = unit.map(|(u, _)| u.clone()).unwrap_or_default();
        let mut new_columns = columns;
        new_columns.retain(|c| c.name != target.column.name);
        new_columns.push(ColumnView {
            name: target.column.name.clone(),
            unit: unit_text.clone(),
            derived: true,
        });
        view.set(&table.name, NameView::Table(new_columns));
        Some(Checked::Column(ColumnSpec {
            table: table.name.clone(),
            column: target.column.name.clone(),
            expression: expr_text.to_string(),
            expression_span: expr.span(),
            inputs,
            unit: unit_text,
        }))
    }

    fn export(
        &mut self,
        name: &Ident,
        path: &(String, Span),
        options: &[Opt],
        view: &mut View,
    ) -> Option<Checked> {
        let before = self.problems.len();
        let exists = self.table_exists(name, view);
        let options = self.options(options, EXPORT_OPTIONS, "export");
        let lower = path.0.to_lowercase();
        let by_extension = if lower.ends_with(".csv") {
            Some(ExportFormat::Csv)
        } else if lower.ends_with(".json") {
            Some(ExportFormat::Json)
        } else {
            None
        };
        let format = match options.first() {
            Some(option) => self
                .word(&option.value, "`format`", &["csv", "json"])
                .map(|w| {
                    if w == "json" {
                        ExportFormat::Json
                    } else {
                        ExportFormat::Csv
                    }
                }),
            None => {
                if by_extension.is_none() {
                    self.push(
                        Problem::new(
                            ErrorKind::Value,
                            path.1,
                            "export writes CSV or JSON: name the file `NAME.csv` or `NAME.json`",
                        )
                        .with_help("or say which with `format = csv` / `format = json`"),
                    );
                }
                by_extension
            }
        };
        if path.0.trim().is_empty() {
            self.push(Problem::new(
                ErrorKind::Value,
                path.1,
                "the file name is empty",
            ));
        }
        if !exists || self.problems.len() > before {
            return None;
        }
        view.written_files.push(path.0.clone());
        Some(Checked::Export {
            name: name.name.clone(),
            path: path.0.clone(),
            format: format?,
        })
    }
}

/// `n` temperatures from `a` to `b`, evenly spaced in T or in ln T; both ends included.
pub fn ladder(a: f64, b: f64, n: usize, spacing: Spacing) -> Vec<f64> {
    if n <= 1 {
        return vec![a];
    }
    (0..n)
        .map(|i| {
            let f = i as f64 / (n - 1) as f64;
            if i == n - 1 {
                return b;
            }
            match spacing {
                Spacing::Linear => a + (b - a) * f,
                Spacing::Log => (a.ln() + (b.ln() - a.ln()) * f).exp(),
            }
        })
        .collect()
}

fn unit_or_pure(unit: &str) -> String {
    if unit.is_empty() {
        "pure numbers".to_string()
    } else {
        format!("`{unit}`")
    }
}

/// "`a`, `b` or `c`".
pub fn list_words(words: &[&str]) -> String {
    let quoted: Vec<String> = words.iter().map(|w| format!("`{w}`")).collect();
    match quoted.len() {
        0 => "nothing".to_string(),
        1 => quoted[0].clone(),
        n => format!("{} or {}", quoted[..n - 1].join(", "), quoted[n - 1]),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ladders_include_both_ends() {
        assert_eq!(ladder(1.0, 3.0, 3, Spacing::Linear), vec![1.0, 2.0, 3.0]);
        assert_eq!(ladder(2.0, 5.0, 1, Spacing::Log), vec![2.0]);
        let log = ladder(0.1, 10.0, 5, Spacing::Log);
        // Evenly spaced in ln T: 0.1, 0.316…, 1, 3.16…, 10 (derived).
        assert!((log[2] - 1.0).abs() < 1e-12);
        assert!((log[1] - 10f64.sqrt() / 10.0).abs() < 1e-12);
        // Descending ladders are allowed.
        assert_eq!(ladder(3.0, 1.0, 3, Spacing::Linear), vec![3.0, 2.0, 1.0]);
    }

    #[test]
    fn word_lists_read_as_prose() {
        assert_eq!(list_words(&["a"]), "`a`");
        assert_eq!(list_words(&["a", "b", "c"]), "`a`, `b` or `c`");
    }
}
