//! The measures a scan can record, with the unit of their table column.

use serde::{Deserialize, Serialize};

/// A measure recorded at every temperature of a scan.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
pub enum Measure {
    Energy,
    SpecificHeat,
    /// The specific heat per mole of spins (magnetic ions), C·R, in J/(mol K).
    SpecificHeatMolar,
    Magnetisation,
    Susceptibility,
    MonopoleDensity,
    SingleChargeDensity,
    DoubleChargeDensity,
    AcceptanceRate,
    AutocorrelationTime,
    /// ⟨M⟩·n̂/N along the field direction (recorded only when a field is declared).
    MagnetisationAlong,
    /// S(T) by thermodynamic integration of the scan's energies (only when named).
    Entropy,
}

pub struct MeasureInfo {
    pub measure: Measure,
    pub name: &'static str,
    pub unit: &'static str,
    pub help: &'static str,
    /// Recorded when no `measure` statement chooses the measures.
    pub by_default: bool,
}

pub const MEASURES: &[MeasureInfo] = &[
    MeasureInfo {
        measure: Measure::Energy,
        name: "energy",
        unit: "K",
        help: "mean energy per spin ⟨H⟩/N, in kelvin (k_B = 1), with a blocking error bar",
        by_default: true,
    },
    MeasureInfo {
        measure: Measure::SpecificHeat,
        name: "specific_heat",
        unit: "k_B",
        help: "specific heat per spin C = (⟨E²⟩ − ⟨E⟩²)/(N T²), in units of k_B; \
               multiply by R = 8.314462618 J/(mol K) for a molar value",
        by_default: true,
    },
    MeasureInfo {
        measure: Measure::SpecificHeatMolar,
        name: "specific_heat_molar",
        unit: "J/(mol K)",
        help: "specific heat per mole of magnetic ions, C·R with C per spin in k_B and \
               R = N_A k_B = 8.314462618 J/(mol K) (exact, CODATA 2018)",
        by_default: true,
    },
    MeasureInfo {
        measure: Measure::Magnetisation,
        name: "magnetisation",
        unit: "μ",
        help: "magnitude of the magnetisation per spin |M|/N, in units of the moment μ",
        by_default: true,
    },
    MeasureInfo {
        measure: Measure::Susceptibility,
        name: "susceptibility",
        unit: "μ²/K",
        help: "magnetic susceptibility per spin from fluctuations, trace/3 of the tensor, in μ²/K",
        by_default: true,
    },
    MeasureInfo {
        measure: Measure::MonopoleDensity,
        name: "monopole_density",
        unit: "",
        help: "monopole density per spin Σ_t |Q_t| / N (a double charge counts twice)",
        by_default: true,
    },
    MeasureInfo {
        measure: Measure::SingleChargeDensity,
        name: "single_charge_density",
        unit: "",
        help: "fraction of tetrahedra carrying a single charge |Q| = 1",
        by_default: true,
    },
    MeasureInfo {
        measure: Measure::DoubleChargeDensity,
        name: "double_charge_density",
        unit: "",
        help: "fraction of tetrahedra carrying a double charge |Q| = 2 (all-in or all-out)",
        by_default: true,
    },
    MeasureInfo {
        measure: Measure::AcceptanceRate,
        name: "acceptance_rate",
        unit: "",
        help: "fraction of accepted single-spin-flip attempts during measurement",
        by_default: true,
    },
    MeasureInfo {
        measure: Measure::AutocorrelationTime,
        name: "autocorrelation_time",
        unit: "sweeps",
        help: "integrated autocorrelation time of the energy, in sweeps",
        by_default: true,
    },
    MeasureInfo {
        measure: Measure::MagnetisationAlong,
        name: "magnetisation_along",
        unit: "μ",
        help: "magnetisation per spin projected on the field direction, ⟨M⟩·n̂/N, in units of \
               the moment μ; recorded only when a `field` is declared (the [111] kagome-ice \
               plateau is μ/3, saturation μ/2)",
        by_default: true,
    },
    MeasureInfo {
        measure: Measure::Entropy,
        name: "entropy",
        unit: "k_B",
        help: "entropy per spin S(T) = ln 2 − ∫_T^∞ C/T' dT' by thermodynamic integration of the \
               scan's energies from its highest temperature (with the analytic high-T tail \
               beyond it), also in J/(mol K) as `entropy_molar`; the scan must reach a \
               temperature well above the couplings (T_max ≳ 10 J_eff) for ln 2 to be the right \
               starting point; recorded only when named in `measure`",
        by_default: false,
    },
];

/// Name and unit of the molar entropy column that goes with `entropy`.
pub const MOLAR_ENTROPY_COLUMN: (&str, &str) = ("entropy_molar", "J/(mol K)");

/// Measures of the designed language that later versions record (REFERENCE.md, "Measures").
pub const PLANNED_MEASURES: &[&str] = &[
    "structure_factor",
    "magnetisation_series",
    "autocorrelation",
    "spectrum",
    "relaxation_time",
    "monopole_tracks",
    "msd",
    "sites_visited",
    "reachable_sites",
    "percolation",
];

/// Accepted alternative spellings.
const ALIASES: &[(&str, Measure)] = &[
    ("magnetization", Measure::Magnetisation),
    ("heat_capacity", Measure::SpecificHeat),
];

impl Measure {
    pub fn info(self) -> &'static MeasureInfo {
        MEASURES
            .iter()
            .find(|m| m.measure == self)
            .unwrap_or(&MEASURES[0])
    }
    pub fn name(self) -> &'static str {
        self.info().name
    }
    pub fn unit(self) -> &'static str {
        self.info().unit
    }
    pub fn lookup(name: &str) -> Option<Measure> {
        MEASURES
            .iter()
            .find(|m| m.name == name)
            .map(|m| m.measure)
            .or_else(|| ALIASES.iter().find(|(a, _)| *a == name).map(|(_, m)| *m))
    }
    /// The measures recorded when no `measure` statement chooses (entropy must be named).
    pub fn all() -> Vec<Measure> {
        MEASURES
            .iter()
            .filter(|m| m.by_default)
            .map(|m| m.measure)
            .collect()
    }
    /// The table columns (name, unit) this measure adds.
    pub fn columns(self) -> Vec<(&'static str, &'static str)> {
        let mut columns = vec![(self.name(), self.unit())];
        if self == Measure::Entropy {
            columns.push(MOLAR_ENTROPY_COLUMN);
        }
        columns
    }
}

/// Columns every scan table ends with, whatever the measures: the equilibration
/// diagnostics of the energy at each temperature (name, unit, help).
pub const DIAGNOSTIC_COLUMNS: &[(&str, &str, &str)] = &[
    (
        "tau_int_energy",
        "sweeps",
        "integrated autocorrelation time of the energy, in sweeps, by the self-consistent \
         window of Madras & Sokal (J. Stat. Phys. 50, 109 (1988)); a run shorter than 50 τ_int \
         is flagged in the summary",
    ),
    (
        "drift_sigma",
        "",
        "(mean energy of the second half of the measurement − mean of the first half) / its \
         error; |drift_sigma| > 3 means the run was still relaxing and is flagged in the summary",
    ),
];

/// The column a tempering scan adds: the swap acceptance of each temperature with the
/// next higher one of the ladder (empty for the highest).
pub const EXCHANGE_COLUMN: (&str, &str, &str) = (
    "exchange_acceptance",
    "",
    "parallel tempering: accepted fraction of swaps between this temperature and the next \
     higher one of the ladder (empty for the highest); a pair that almost never swaps splits \
     the ladder",
);

/// Name and unit of the temperature column every scan table starts with.
pub const TEMPERATURE_COLUMN: &str = "T";
pub const TEMPERATURE_UNIT: &str = "K";
