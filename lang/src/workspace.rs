//! The workspace: named values that persist across cells (the model declaration, result
//! tables, figures). Everything here is serde-serialisable so a session can be saved.

use icefield_stdlib::dynamics::AcceptanceRule;
use icefield_stdlib::gating::{AttemptTimes, GATE_CLASS_MAGNITUDES};
use serde::{Deserialize, Serialize};

use icefield_stdlib::exchange::{CouplingConvention, ExchangeCouplings, ZeemanField};

use crate::measures::Measure;

/// The lattice the model lives on.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum LatticeKind {
    Pyrochlore,
    /// Two-dimensional six-vertex ice: L×L vertices, 2L² spins on the bonds.
    SquareIce,
}

#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct LatticeDecl {
    pub kind: LatticeKind,
    /// L: the system is L×L×L conventional cubic cells, periodic (square ice: L×L vertices).
    pub cells_per_side: usize,
}

impl LatticeDecl {
    pub fn spin_count(&self) -> usize {
        match self.kind {
            LatticeKind::Pyrochlore => 16 * self.cells_per_side.pow(3),
            LatticeKind::SquareIce => 2 * self.cells_per_side.pow(2),
        }
    }
    pub fn describe(&self) -> String {
        match self.kind {
            LatticeKind::Pyrochlore => format!(
                "pyrochlore, L = {} ({} spins)",
                self.cells_per_side,
                self.spin_count()
            ),
            LatticeKind::SquareIce => format!(
                "square ice, L = {} ({} spins on the bonds of {} vertices)",
                self.cells_per_side,
                self.spin_count(),
                self.cells_per_side * self.cells_per_side
            ),
        }
    }
}

/// The declared couplings: the nearest-neighbour spin-ice model H = J_eff Σ_⟨ij⟩ σ_i σ_j
/// (`couplings nearest`), or a general model of exchange shells and/or the Ewald-summed
/// dipolar term (`couplings exchange`, `couplings dipolar`), which run on stdlib's
/// coupling-table engine.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct CouplingsDecl {
    /// The Ising (σσ) coefficient J_eff in kelvin. For a general model: the effective
    /// nearest-neighbour coefficient J_nn + 5D/3 (physics-reference §2), for orientation.
    pub j_eff_kelvin: f64,
    /// How the user gave it, for provenance ("J1 = 3 K (vector convention), D = 1.4 K").
    pub given_as: String,
    /// Exchange shells J1, J2, J3, J3' (`couplings exchange`).
    #[serde(default)]
    pub exchange: Option<ExchangeCouplings>,
    /// Dipolar strength D in kelvin (`couplings dipolar`), summed by Ewald summation.
    #[serde(default)]
    pub dipolar_kelvin: Option<f64>,
}

/// What one `couplings` statement declares.
#[derive(Clone, Debug, PartialEq)]
pub enum CouplingsUpdate {
    /// `couplings nearest`: replaces every earlier coupling.
    Nearest(CouplingsDecl),
    /// `couplings exchange`: replaces the exchange part of a general model.
    Exchange(ExchangeCouplings),
    /// `couplings dipolar`: replaces the dipolar part of a general model.
    Dipolar { d_kelvin: f64 },
}

impl CouplingsDecl {
    /// Whether this is the nearest-neighbour model alone (the fast engine).
    pub fn is_nearest(&self) -> bool {
        self.exchange.is_none() && self.dipolar_kelvin.is_none()
    }

    /// The couplings after `update`: `exchange` and `dipolar` statements add up (each
    /// replaces only its own part, so re-running a cell is harmless); `nearest` starts over.
    pub fn updated(previous: Option<&CouplingsDecl>, update: &CouplingsUpdate) -> CouplingsDecl {
        let general = previous.filter(|p| !p.is_nearest());
        let (mut exchange, mut dipolar) = (
            general.and_then(|p| p.exchange),
            general.and_then(|p| p.dipolar_kelvin),
        );
        let mut parts: Vec<String> = Vec::new();
        match update {
            CouplingsUpdate::Nearest(decl) => return decl.clone(),
            CouplingsUpdate::Exchange(couplings) => exchange = Some(*couplings),
            CouplingsUpdate::Dipolar { d_kelvin } => dipolar = Some(*d_kelvin),
        }
        let mut j_nn = 0.0;
        if let Some(x) = exchange {
            j_nn = match x.convention {
                CouplingConvention::VectorSpins => -x.j1_kelvin / 3.0,
                CouplingConvention::IsingPseudospins => x.j1_kelvin,
            };
            parts.push(describe_exchange(&x));
        }
        if let Some(d) = dipolar {
            parts.push(format!(
                "dipolar D = {} K (Ewald, conducting boundary)",
                crate::units::format_number(d)
            ));
        }
        CouplingsDecl {
            j_eff_kelvin: j_nn + 5.0 * dipolar.unwrap_or(0.0) / 3.0,
            given_as: parts.join("; "),
            exchange,
            dipolar_kelvin: dipolar,
        }
    }

    pub fn describe(&self) -> String {
        if !self.is_nearest() {
            return format!(
                "{}; effective nearest-neighbour J_eff = {} K (σσ coefficient J_nn + 5D/3)",
                self.given_as,
                crate::units::format_number(self.j_eff_kelvin)
            );
        }
        format!(
            "nearest-neighbour spin ice, J_eff = {} K (σσ coefficient){}",
            crate::units::format_number(self.j_eff_kelvin),
            if self.given_as.is_empty() {
                String::new()
            } else {
                format!("; given as {}", self.given_as)
            }
        )
    }
}

fn describe_exchange(x: &ExchangeCouplings) -> String {
    let f = crate::units::format_number;
    format!(
        "exchange J1 = {} K, J2 = {} K, J3 = {} K, J3' = {} K ({} convention)",
        f(x.j1_kelvin),
        f(x.j2_kelvin),
        f(x.j3_kelvin),
        f(x.j3_prime_kelvin),
        match x.convention {
            CouplingConvention::VectorSpins => "vector",
            CouplingConvention::IsingPseudospins => "Ising",
        }
    )
}

/// A uniform field: the Zeeman term −μ Σ_i S_i·B.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct FieldDecl {
    pub field: ZeemanField,
    /// Unit vector of the field direction (the direction written after `along`, or B/|B|);
    /// `None` for a zero field given by components.
    pub direction: Option<[f64; 3]>,
}

impl FieldDecl {
    pub fn describe(&self) -> String {
        let f = crate::units::format_number;
        let b = self.field.field_tesla;
        format!(
            "B = [{}, {}, {}] T, moment = {} µB",
            f(b[0]),
            f(b[1]),
            f(b[2]),
            f(self.field.moment_bohr_magnetons)
        )
    }
}

/// The model declaration: lattice, couplings, seed, active measures.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct Model {
    pub lattice: Option<LatticeDecl>,
    pub couplings: Option<CouplingsDecl>,
    /// The Zeeman field, if one was declared.
    #[serde(default)]
    pub field: Option<FieldDecl>,
    pub seed: Option<u64>,
    /// The measures a scan records; `None`: all of them.
    pub measures: Option<Vec<Measure>>,
    /// The dynamics rule for physical-time runs, if one was declared.
    #[serde(default)]
    pub dynamics: Option<DynamicsDecl>,
}

/// How a physical-time run is executed (both simulate the same process).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum ExecutionChoice {
    /// The tool picks (rejection-free where the energy changes are discrete and flips
    /// are rare) and says which it used.
    Auto,
    AttemptBased,
    RejectionFree,
}

/// Where the transverse field that gates a spin comes from.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum TransverseSource {
    /// The six nearest neighbours (four |h⊥| classes, physics-reference §5).
    Neighbours,
    /// The full dipolar sum (a what-if; the rate law is applied to its magnitude).
    Dipolar,
}

/// The dynamics rule: how spins flip in physical time (`dynamics ...`).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct DynamicsDecl {
    pub acceptance: AcceptanceRule,
    /// Attempt time per gate class (uniform rates: the same τ0 for all four).
    pub attempt_times: AttemptTimes,
    /// How the rates were given, for `show model` and provenance
    /// ("uniform, τ0 = 1 µs", "bimodal, slow/fast = 10⁴", "law tau_of_h").
    pub rates_description: String,
    pub execution: ExecutionChoice,
    pub transverse: TransverseSource,
    /// The rhai rate law `|h⊥| ↦ attempt time` when the rates were given by one (the
    /// dipolar what-if evaluates it on a continuous |h⊥|).
    pub rate_law: Option<String>,
}

impl DynamicsDecl {
    /// One line for `show model` and provenance: "single-flip, Metropolis, uniform τ0 = 1 µs".
    pub fn describe(&self) -> String {
        let acceptance = match self.acceptance {
            AcceptanceRule::Metropolis => "Metropolis",
            AcceptanceRule::Glauber => "Glauber",
        };
        let mut text = format!("single-flip, {acceptance}, {}", self.rates_description);
        if self.transverse == TransverseSource::Dipolar {
            text.push_str(", h⊥ from the dipolar sum");
        }
        text.push_str(match self.execution {
            ExecutionChoice::Auto => ", execution auto",
            ExecutionChoice::AttemptBased => ", execution attempt-based",
            ExecutionChoice::RejectionFree => ", execution rejection-free",
        });
        text
    }

    /// The attempt time of each gate class, one line per class, for the output of a
    /// `dynamics` statement (so a rate law can be checked against what the run uses).
    pub fn attempt_table(&self) -> String {
        let mut text = String::from("  gate class   |h⊥|/|g|   attempt time\n");
        for (class, (magnitude, time)) in GATE_CLASS_MAGNITUDES
            .iter()
            .zip(self.attempt_times.attempt_time_seconds)
            .enumerate()
        {
            text.push_str(&format!(
                "  {class:<12} {:<10} {}\n",
                crate::units::format_number((magnitude * 1e6).round() / 1e6),
                format_seconds(time)
            ));
        }
        text
    }
}

/// The seed a run uses when none was declared.
pub const DEFAULT_SEED: u64 = 1;

/// One column of a result table.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Column {
    pub name: String,
    /// Unit as shown in headers ("K", "J/(mol K)"); empty for a pure number.
    pub unit: String,
    pub values: Vec<f64>,
    /// One-standard-error bars, when the column has them.
    pub errors: Option<Vec<f64>>,
    /// For a derived column: the expression that made it.
    pub derived_from: Option<String>,
}

/// Where a table came from.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Provenance {
    pub source: String,
    pub lattice: String,
    pub model: String,
    pub seed: u64,
    pub measurement_sweeps: u64,
    pub equilibration_sweeps: u64,
    pub sample_every_sweeps: u64,
    pub start: String,
    /// Temperatures asked for; fewer rows than this means the run was interrupted.
    pub temperatures_requested: usize,
    pub interrupted: bool,
    /// The cell (execution number in this session) that made it.
    pub cell: u64,
    /// For a physical-time run (`evolve`, `quench`, `step`): what ran, in its own terms
    /// (the sweep and temperature counts above do not describe it).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub kinetics: Option<KineticsProvenance>,
}

/// Provenance of a physical-time run: protocol, dynamics rule, execution, temperature.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct KineticsProvenance {
    /// The protocol as run ("evolve for 10 ms at 0.4 K").
    pub protocol: String,
    /// The dynamics rule (`DynamicsDecl::describe`).
    pub dynamics: String,
    /// The execution used and why ("rejection-free (auto: ...)").
    pub execution: String,
    /// Temperature of the recording (K).
    pub temperature_kelvin: f64,
    /// Length of the recording asked for (s).
    pub duration_seconds: f64,
    /// Spacing of the time grid (s).
    pub sample_interval_seconds: f64,
    /// Samples asked for; fewer rows means the run was interrupted.
    pub samples_requested: u64,
    /// Flips during the recording.
    pub flips: u64,
}

impl KineticsProvenance {
    /// The provenance line of a kinetics table with `rows` samples.
    pub fn line(&self, provenance: &Provenance, rows: usize) -> String {
        let mut text = format!(
            "{}; {}; {}; seed {}; dynamics {}; execution {}; start {}; {} flips",
            self.protocol,
            provenance.lattice,
            provenance.model,
            provenance.seed,
            self.dynamics,
            self.execution,
            provenance.start,
            self.flips
        );
        if provenance.interrupted {
            text.push_str(&format!(
                "; INTERRUPTED: {rows} of {} samples (t up to {} of {})",
                self.samples_requested,
                format_seconds(rows.saturating_sub(1) as f64 * self.sample_interval_seconds),
                format_seconds(self.duration_seconds)
            ));
        }
        text
    }
}

/// A time with the prefix that keeps the number readable: "1 µs", "10 ms", "2.5 s";
/// an infinite attempt time reads "frozen".
pub fn format_seconds(seconds: f64) -> String {
    if seconds.is_infinite() && seconds > 0.0 {
        return "frozen".to_string();
    }
    let magnitude = seconds.abs();
    let (scale, unit) = if magnitude == 0.0 || magnitude >= 1.0 {
        (1.0, "s")
    } else if magnitude >= 1e-3 {
        (1e3, "ms")
    } else if magnitude >= 1e-6 {
        (1e6, "µs")
    } else if magnitude >= 1e-9 {
        (1e9, "ns")
    } else {
        (1e12, "ps")
    };
    format!("{} {unit}", crate::units::format_number(seconds * scale))
}

#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Table {
    pub name: String,
    pub columns: Vec<Column>,
    pub provenance: Option<Provenance>,
}

impl Table {
    pub fn column(&self, name: &str) -> Option<&Column> {
        self.columns.iter().find(|c| c.name == name)
    }
    pub fn row_count(&self) -> usize {
        self.columns.first().map(|c| c.values.len()).unwrap_or(0)
    }
    pub fn column_names(&self) -> Vec<String> {
        self.columns.iter().map(|c| c.name.clone()).collect()
    }
}

/// A figure: what was plotted, and its SVG.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Figure {
    pub name: String,
    pub title: String,
    pub x_label: String,
    pub x_unit: String,
    pub y_label: String,
    pub y_unit: String,
    pub series: Vec<FigureSeries>,
    pub svg: String,
}

#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct FigureSeries {
    pub label: String,
    pub x: Vec<f64>,
    pub y: Vec<f64>,
    pub y_error: Option<Vec<f64>>,
}

/// A named value.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub enum Value {
    Table(Table),
    Figure(Figure),
}

impl Value {
    pub fn kind(&self) -> &'static str {
        match self {
            Value::Table(_) => "table",
            Value::Figure(_) => "figure",
        }
    }
}

/// Names of the workspace that are not values: `show model`, `show workspace`.
pub const RESERVED_SHOW_NAMES: &[&str] = &["model", "workspace", "measures"];

#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct Workspace {
    pub model: Model,
    /// Named values in the order they were first defined.
    pub values: Vec<(String, Value)>,
}

impl Workspace {
    pub fn get(&self, name: &str) -> Option<&Value> {
        self.values.iter().find(|(n, _)| n == name).map(|(_, v)| v)
    }
    pub fn table(&self, name: &str) -> Option<&Table> {
        match self.get(name) {
            Some(Value::Table(t)) => Some(t),
            _ => None,
        }
    }
    pub fn table_mut(&mut self, name: &str) -> Option<&mut Table> {
        self.values
            .iter_mut()
            .find(|(n, _)| n == name)
            .and_then(|(_, v)| match v {
                Value::Table(t) => Some(t),
                _ => None,
            })
    }
    /// Stores a value, replacing one of the same name in place.
    pub fn insert(&mut self, name: &str, value: Value) {
        match self.values.iter_mut().find(|(n, _)| n == name) {
            Some(slot) => slot.1 = value,
            None => self.values.push((name.to_string(), value)),
        }
    }
    pub fn names(&self) -> Vec<String> {
        self.values.iter().map(|(n, _)| n.clone()).collect()
    }
}
