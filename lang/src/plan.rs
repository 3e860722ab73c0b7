//! Compilation of checked statements into a plan: a list of typed steps, each one a call
//! into stdlib (or a workspace operation) with every setting resolved.

use icefield_stdlib::hamiltonian::NearestNeighbourIce;
use icefield_stdlib::metropolis::Start;
use icefield_stdlib::scan::ScanSettings;

use crate::ast::Span;
use crate::check::{Checked, CheckedStatement, ColumnSpec, PlotSpec, ShowTarget, StartState};
use crate::diagnostic::{ErrorKind, Problem};
use crate::measures::Measure;
use crate::workspace::{CouplingsDecl, LatticeDecl, Model, DEFAULT_SEED};

/// A scan, ready for `icefield_stdlib::scan::run_scan`.
#[derive(Clone, Debug)]
pub struct ScanStep {
    pub target: String,
    pub settings: ScanSettings,
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
            Checked::Couplings(c) => {
                model.couplings = Some(c.clone());
                Plan::SetCouplings(c.clone())
            }
            Checked::Seed(s) => {
                model.seed = Some(*s);
                Plan::SetSeed(*s)
            }
            Checked::Measure(m) => {
                model.measures = Some(m.clone());
                Plan::SetMeasures(m.clone())
            }
            Checked::Scan(scan) => {
                let (Some(lattice), Some(couplings)) = (&model.lattice, &model.couplings) else {
                    problems.push(Problem::new(
                        ErrorKind::Name,
                        statement.keyword,
                        "a scan needs a lattice and couplings declared first",
                    ));
                    continue;
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
                Plan::Scan(Box::new(ScanStep {
                    target: scan.target.clone(),
                    settings,
                    measures: scan.measures.clone(),
                    lattice: lattice.clone(),
                    couplings: couplings.clone(),
                    seed_declared: model.seed.is_some(),
                    summary: scan.summary,
                }))
            }
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
            Checked::Export { name, path } => Plan::Export {
                name: name.clone(),
                path: path.clone(),
            },
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
