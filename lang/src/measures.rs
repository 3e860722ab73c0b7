//! The measures a scan can record, with the unit of their table column.

use serde::{Deserialize, Serialize};

/// A measure recorded at every temperature of a scan.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
pub enum Measure {
    Energy,
    SpecificHeat,
    Magnetisation,
    Susceptibility,
    MonopoleDensity,
    SingleChargeDensity,
    DoubleChargeDensity,
    AcceptanceRate,
    AutocorrelationTime,
}

pub struct MeasureInfo {
    pub measure: Measure,
    pub name: &'static str,
    pub unit: &'static str,
    pub help: &'static str,
}

pub const MEASURES: &[MeasureInfo] = &[
    MeasureInfo {
        measure: Measure::Energy,
        name: "energy",
        unit: "K",
        help: "mean energy per spin ⟨H⟩/N, in kelvin (k_B = 1), with a blocking error bar",
    },
    MeasureInfo {
        measure: Measure::SpecificHeat,
        name: "specific_heat",
        unit: "k_B",
        help: "specific heat per spin C = (⟨E²⟩ − ⟨E⟩²)/(N T²), in units of k_B; \
               multiply by R = 8.314462618 J/(mol K) for a molar value",
    },
    MeasureInfo {
        measure: Measure::Magnetisation,
        name: "magnetisation",
        unit: "μ",
        help: "magnitude of the magnetisation per spin |M|/N, in units of the moment μ",
    },
    MeasureInfo {
        measure: Measure::Susceptibility,
        name: "susceptibility",
        unit: "μ²/K",
        help: "magnetic susceptibility per spin from fluctuations, trace/3 of the tensor, in μ²/K",
    },
    MeasureInfo {
        measure: Measure::MonopoleDensity,
        name: "monopole_density",
        unit: "",
        help: "monopole density per spin Σ_t |Q_t| / N (a double charge counts twice)",
    },
    MeasureInfo {
        measure: Measure::SingleChargeDensity,
        name: "single_charge_density",
        unit: "",
        help: "fraction of tetrahedra carrying a single charge |Q| = 1",
    },
    MeasureInfo {
        measure: Measure::DoubleChargeDensity,
        name: "double_charge_density",
        unit: "",
        help: "fraction of tetrahedra carrying a double charge |Q| = 2 (all-in or all-out)",
    },
    MeasureInfo {
        measure: Measure::AcceptanceRate,
        name: "acceptance_rate",
        unit: "",
        help: "fraction of accepted single-spin-flip attempts during measurement",
    },
    MeasureInfo {
        measure: Measure::AutocorrelationTime,
        name: "autocorrelation_time",
        unit: "sweeps",
        help: "integrated autocorrelation time of the energy, in sweeps",
    },
];

/// Measures of the designed language that later versions record (REFERENCE.md, "Measures").
pub const PLANNED_MEASURES: &[&str] = &[
    "entropy",
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
    pub fn all() -> Vec<Measure> {
        MEASURES.iter().map(|m| m.measure).collect()
    }
}

/// Name and unit of the temperature column every scan table starts with.
pub const TEMPERATURE_COLUMN: &str = "T";
pub const TEMPERATURE_UNIT: &str = "K";
