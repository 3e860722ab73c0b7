//! Compilation of checked statements into a plan: a list of typed steps, each one a call
//! into stdlib (or a workspace operation) with every setting resolved.

use icefield_stdlib::engine::FlipRule;
use icefield_stdlib::exchange::{CouplingConvention, ExchangeCouplings};
use icefield_stdlib::hamiltonian::NearestNeighbourIce;
use icefield_stdlib::metropolis::Start;
use icefield_stdlib::scan::ScanSettings;

use crate::ast::Span;
use crate::check::{
    Checked, CheckedStatement, ColumnSpec, CommandSpec, PlotSpec, ScanSpec, ShowTarget, StartState,
};
use crate::diagnostic::{ErrorKind, Problem};
use crate::measures::Measure;
use crate::workspace::{CouplingsDecl, FieldDecl, LatticeDecl, LatticeKind, Model, DEFAULT_SEED};

/// Which engine runs a scan.
#[derive(Clone, Debug, PartialEq)]
pub enum ScanEngine {
    /// `icefield_stdlib::scan::run_scan`: nearest-neighbour couplings alone, Metropolis,
    /// no field, no loop moves (the fast path with integer energy changes).
    NearestNeighbour,
    /// A coupling table (exchange + Ewald dipolar + Zeeman) sampled with the local-field
    /// engine, optionally with ice-manifold loop moves.
    General(Box<GeneralModel>),
    /// `icefield_stdlib::square_ice::run_square_ice_scan`: two-dimensional six-vertex ice,
    /// H = J Σ_v q_v² with J = J_eff.
    SquareIce,
}

/// Everything the coupling-table engine needs besides the scan settings (stdlib's driver
/// runs it; the plan only fills it in).
pub use icefield_stdlib::scan::{GeneralModel, Ladder};

/// A scan: the temperatures, lengths, seed and start (as `ScanSettings`; its model is
/// used only by the nearest-neighbour engine) and the engine that runs it.
#[derive(Clone, Debug)]
pub struct ScanStep {
    pub target: String,
    pub settings: ScanSettings,
    pub engine: ScanEngine,
    pub field: Option<FieldDecl>,
    pub measures: Vec<Measure>,
    pub lattice: LatticeDecl,
    pub couplings: CouplingsDecl,
    /// Whether the seed was declared (or the default used).
    pub seed_declared: bool,
    pub summary: bool,
}

#[derive(Clone, Debug)]
pub enum Plan {
    SetLattice(LatticeDecl),
    SetCouplings(CouplingsDecl),
    SetField(FieldDecl),
    SetSeed(u64),
    SetMeasures(Vec<Measure>),
    Scan(Box<ScanStep>),
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
        format: crate::check::ExportFormat,
    },
    /// A command, with the model declaration in force when it runs.
    Command {
        spec: CommandSpec,
        model: Box<Model>,
    },
}

#[derive(Clone, Debug)]
pub struct Step {
    pub plan: Plan,
    pub span: Span,
    pub keyword: Span,
}

fn start_state(start: StartState) -> Start {
    match start {
        StartState::Random => Start::Random,
        StartState::Ice => Start::IceState,
        StartState::AllInAllOut => Start::AllInAllOut,
    }
}

/// The scan step of a checked scan (or anneal) against the model in force.
pub fn scan_step(scan: &ScanSpec, model: &Model) -> Result<ScanStep, String> {
    let (Some(lattice), Some(couplings)) = (&model.lattice, &model.couplings) else {
        return Err("a scan needs a lattice and couplings declared first".to_string());
    };
    let settings = ScanSettings {
        cells_per_side: lattice.cells_per_side,
        model: NearestNeighbourIce {
            j_eff_kelvin: couplings.j_eff_kelvin,
        },
        temperatures_kelvin: scan.temperatures_kelvin.clone(),
        equilibration_sweeps: scan.equilibration_sweeps,
        measurement_sweeps: scan.measurement_sweeps,
        sample_every_sweeps: scan.sample_every_sweeps,
        seed: model.seed.unwrap_or(DEFAULT_SEED),
        start: start_state(scan.start),
    };
    let general = !couplings.is_nearest()
        || model.field.is_some()
        || scan.rule != FlipRule::Metropolis
        || scan.loops_per_sweep > 0
        || scan.ladder != Ladder::Independent;
    let engine = if lattice.kind == LatticeKind::SquareIce {
        ScanEngine::SquareIce
    } else if general {
        // Nearest-neighbour couplings on the general engine: J_eff is already the σσ
        // coefficient, so it enters in the Ising convention.
        let exchange = if couplings.is_nearest() {
            Some(ExchangeCouplings::nearest_neighbour(
                couplings.j_eff_kelvin,
                CouplingConvention::IsingPseudospins,
            ))
        } else {
            couplings.exchange
        };
        ScanEngine::General(Box::new(GeneralModel {
            exchange,
            dipolar_kelvin: couplings.dipolar_kelvin,
            zeeman: model.field.as_ref().map(|f| f.field),
            direction: model.field.as_ref().and_then(|f| f.direction),
            rule: scan.rule,
            loops_per_sweep: scan.loops_per_sweep,
            ladder: scan.ladder,
        }))
    } else {
        ScanEngine::NearestNeighbour
    };
    Ok(ScanStep {
        target: scan.target.clone(),
        settings,
        engine,
        field: model.field.clone(),
        measures: scan.measures.clone(),
        lattice: lattice.clone(),
        couplings: couplings.clone(),
        seed_declared: model.seed.is_some(),
        summary: scan.summary,
    })
}

/// Compiles a checked cell against the model as it stands before the cell.
pub fn compile(checked: &[CheckedStatement], model: &Model) -> Result<Vec<Step>, Vec<Problem>> {
    let mut model = model.clone();
    let mut steps = Vec::new();
    let mut problems = Vec::new();
    for statement in checked {
        let plan = match &statement.step {
            Checked::Lattice(l) => {
                model.lattice = Some(l.clone());
                Plan::SetLattice(l.clone())
            }
            Checked::Couplings(update) => {
                let decl = CouplingsDecl::updated(model.couplings.as_ref(), update);
                model.couplings = Some(decl.clone());
                Plan::SetCouplings(decl)
            }
            Checked::Field(field) => {
                model.field = Some(field.clone());
                Plan::SetField(field.clone())
            }
            Checked::Seed(s) => {
                model.seed = Some(*s);
                Plan::SetSeed(*s)
            }
            Checked::Measure(m) => {
                model.measures = Some(m.clone());
                Plan::SetMeasures(m.clone())
            }
            Checked::Scan(scan) => match scan_step(scan, &model) {
                Ok(step) => Plan::Scan(Box::new(step)),
                Err(message) => {
                    problems.push(Problem::new(ErrorKind::Name, statement.keyword, message));
                    continue;
                }
            },
            Checked::Table { name, columns } => Plan::Table {
                name: name.clone(),
                columns: columns.clone(),
            },
            Checked::Show(target) => Plan::Show(target.clone()),
            Checked::Plot(plot) => Plan::Plot(plot.clone()),
            Checked::Rhai { body, body_span } => Plan::Rhai {
                body: body.clone(),
                body_span: *body_span,
            },
            Checked::Column(column) => Plan::Column(column.clone()),
            Checked::Export { name, path, format } => Plan::Export {
                name: name.clone(),
                path: path.clone(),
                format: *format,
            },
            // Until every family has a command, `CommandSpec` has no values at all.
            #[allow(unreachable_code)]
            Checked::Command(spec) => {
                spec.declare(&mut model);
                Plan::Command {
                    spec: spec.clone(),
                    model: Box::new(model.clone()),
                }
            }
        };
        steps.push(Step {
            plan,
            span: statement.span,
            keyword: statement.keyword,
        });
    }
    if problems.is_empty() {
        Ok(steps)
    } else {
        Err(problems)
    }
}
