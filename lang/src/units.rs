//! Units and dimensions of the language.
//!
//! stdlib takes plain f64 in fixed units named in the argument (kelvin, tesla, seconds,
//! ångström, Bohr magnetons); every number the user writes is converted here. Energies
//! and temperatures share one dimension (k_B = 1) and are converted to kelvin.

use serde::{Deserialize, Serialize};

/// Elementary charge in coulomb, exact in the 2019 SI (CODATA 2018).
pub const ELEMENTARY_CHARGE_COULOMB: f64 = 1.602_176_634e-19;
/// Boltzmann constant in J/K, exact in the 2019 SI (CODATA 2018).
pub const BOLTZMANN_JOULE_PER_KELVIN: f64 = 1.380_649e-23;
/// One millielectronvolt over k_B, in kelvin: 11.604518... K (CODATA 2018, exact ratio).
pub const KELVIN_PER_MILLIELECTRONVOLT: f64 =
    ELEMENTARY_CHARGE_COULOMB * 1e-3 / BOLTZMANN_JOULE_PER_KELVIN;
/// Molar gas constant R = N_A k_B in J/(mol K) (CODATA 2018, exact).
pub const GAS_CONSTANT_JOULE_PER_MOLE_KELVIN: f64 = 8.314_462_618;

/// The physical dimension of a quantity.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum Dimension {
    /// Temperature or energy (k_B = 1), base unit kelvin.
    Energy,
    /// Magnetic field B, base unit tesla.
    MagneticField,
    /// Physical time, base unit second.
    Time,
    /// Length, base unit ångström.
    Length,
    /// Magnetic moment, base unit Bohr magneton.
    Moment,
    /// Frequency, base unit hertz (spectra, fit bands).
    Frequency,
    /// A pure number (counts, ratios).
    Dimensionless,
}

impl Dimension {
    /// Name used in messages ("a temperature", ...).
    pub fn noun(self) -> &'static str {
        match self {
            Dimension::Energy => "an energy or temperature",
            Dimension::MagneticField => "a magnetic field",
            Dimension::Time => "a time",
            Dimension::Length => "a length",
            Dimension::Moment => "a magnetic moment",
            Dimension::Frequency => "a frequency",
            Dimension::Dimensionless => "a pure number",
        }
    }
    /// The unit stdlib receives, as written in names (`temperature_kelvin`).
    pub fn base_unit(self) -> &'static str {
        match self {
            Dimension::Energy => "K",
            Dimension::MagneticField => "T",
            Dimension::Time => "s",
            Dimension::Length => "Å",
            Dimension::Moment => "µB",
            Dimension::Frequency => "Hz",
            Dimension::Dimensionless => "",
        }
    }
    /// The units offered in "needs a ... unit: ..." messages.
    pub fn suggested_units(self) -> &'static str {
        match self {
            Dimension::Energy => "K, mK, meV",
            Dimension::MagneticField => "T, mT",
            Dimension::Time => "s, ms, µs, ns",
            Dimension::Length => "Å, nm",
            Dimension::Moment => "µB",
            Dimension::Frequency => "Hz, kHz, MHz",
            Dimension::Dimensionless => "none",
        }
    }
}

/// One unit symbol the language accepts.
#[derive(Clone, Copy, Debug)]
pub struct UnitDef {
    pub symbol: &'static str,
    pub dimension: Dimension,
    /// Multiply a number in this unit by `to_base` to get the base unit of its dimension.
    pub to_base: f64,
    pub description: &'static str,
}

/// Every accepted unit symbol. Both the micro sign (U+00B5) and the Greek mu (U+03BC) are
/// accepted for the prefix µ, and the ASCII spelling `u` / `mu` as well.
pub const UNITS: &[UnitDef] = &[
    UnitDef {
        symbol: "K",
        dimension: Dimension::Energy,
        to_base: 1.0,
        description: "kelvin (temperature; also energy with k_B = 1)",
    },
    UnitDef {
        symbol: "mK",
        dimension: Dimension::Energy,
        to_base: 1e-3,
        description: "millikelvin, 10⁻³ K",
    },
    UnitDef {
        symbol: "µK",
        dimension: Dimension::Energy,
        to_base: 1e-6,
        description: "microkelvin, 10⁻⁶ K",
    },
    UnitDef {
        symbol: "uK",
        dimension: Dimension::Energy,
        to_base: 1e-6,
        description: "microkelvin, 10⁻⁶ K (ASCII spelling of µK)",
    },
    UnitDef {
        symbol: "eV",
        dimension: Dimension::Energy,
        to_base: KELVIN_PER_MILLIELECTRONVOLT * 1e3,
        description: "electronvolt over k_B, 11604.518 K (CODATA 2018)",
    },
    UnitDef {
        symbol: "meV",
        dimension: Dimension::Energy,
        to_base: KELVIN_PER_MILLIELECTRONVOLT,
        description: "millielectronvolt over k_B, 11.604518 K (CODATA 2018)",
    },
    UnitDef {
        symbol: "µeV",
        dimension: Dimension::Energy,
        to_base: KELVIN_PER_MILLIELECTRONVOLT * 1e-3,
        description: "microelectronvolt over k_B, 0.011604518 K (CODATA 2018)",
    },
    UnitDef {
        symbol: "ueV",
        dimension: Dimension::Energy,
        to_base: KELVIN_PER_MILLIELECTRONVOLT * 1e-3,
        description: "microelectronvolt (ASCII spelling of µeV)",
    },
    UnitDef {
        symbol: "T",
        dimension: Dimension::MagneticField,
        to_base: 1.0,
        description: "tesla (magnetic field B)",
    },
    UnitDef {
        symbol: "mT",
        dimension: Dimension::MagneticField,
        to_base: 1e-3,
        description: "millitesla, 10⁻³ T",
    },
    UnitDef {
        symbol: "s",
        dimension: Dimension::Time,
        to_base: 1.0,
        description: "second",
    },
    UnitDef {
        symbol: "ms",
        dimension: Dimension::Time,
        to_base: 1e-3,
        description: "millisecond, 10⁻³ s",
    },
    UnitDef {
        symbol: "µs",
        dimension: Dimension::Time,
        to_base: 1e-6,
        description: "microsecond, 10⁻⁶ s",
    },
    UnitDef {
        symbol: "us",
        dimension: Dimension::Time,
        to_base: 1e-6,
        description: "microsecond (ASCII spelling of µs)",
    },
    UnitDef {
        symbol: "ns",
        dimension: Dimension::Time,
        to_base: 1e-9,
        description: "nanosecond, 10⁻⁹ s",
    },
    UnitDef {
        symbol: "ps",
        dimension: Dimension::Time,
        to_base: 1e-12,
        description: "picosecond, 10⁻¹² s",
    },
    UnitDef {
        symbol: "Å",
        dimension: Dimension::Length,
        to_base: 1.0,
        description: "ångström, 10⁻¹⁰ m",
    },
    UnitDef {
        symbol: "angstrom",
        dimension: Dimension::Length,
        to_base: 1.0,
        description: "ångström (ASCII spelling of Å)",
    },
    UnitDef {
        symbol: "nm",
        dimension: Dimension::Length,
        to_base: 10.0,
        description: "nanometre, 10 Å",
    },
    UnitDef {
        symbol: "pm",
        dimension: Dimension::Length,
        to_base: 0.01,
        description: "picometre, 0.01 Å",
    },
    UnitDef {
        symbol: "µB",
        dimension: Dimension::Moment,
        to_base: 1.0,
        description: "Bohr magneton (magnetic moment)",
    },
    UnitDef {
        symbol: "muB",
        dimension: Dimension::Moment,
        to_base: 1.0,
        description: "Bohr magneton (ASCII spelling of µB)",
    },
    UnitDef {
        symbol: "Hz",
        dimension: Dimension::Frequency,
        to_base: 1.0,
        description: "hertz (frequency)",
    },
    UnitDef {
        symbol: "mHz",
        dimension: Dimension::Frequency,
        to_base: 1e-3,
        description: "millihertz, 10⁻³ Hz",
    },
    UnitDef {
        symbol: "kHz",
        dimension: Dimension::Frequency,
        to_base: 1e3,
        description: "kilohertz, 10³ Hz",
    },
    UnitDef {
        symbol: "MHz",
        dimension: Dimension::Frequency,
        to_base: 1e6,
        description: "megahertz, 10⁶ Hz",
    },
];

/// Replaces the Greek small mu (U+03BC) by the micro sign (U+00B5) so both spellings match,
/// and the ångström sign (U+212B) by the letter Å (U+00C5).
pub fn normalise_symbol(symbol: &str) -> String {
    symbol
        .replace('\u{3bc}', "\u{b5}")
        .replace('\u{212b}', "\u{c5}")
}

/// Looks a unit symbol up (exact case: `mK` is not `MK`).
pub fn lookup(symbol: &str) -> Option<&'static UnitDef> {
    let symbol = normalise_symbol(symbol);
    UNITS.iter().find(|u| u.symbol == symbol)
}

/// Why a unit symbol was refused, with a hint.
pub fn unknown_unit_help(symbol: &str) -> Option<String> {
    match symbol {
        "A" => Some("`A` would read as ampere; write `Å` or `angstrom` for ångström".to_string()),
        "G" | "Oe" => Some("write magnetic fields in T or mT (1 G = 0.1 mT)".to_string()),
        _ => {
            // Spelled-out names point to their symbol.
            const NAMES: &[(&str, &str)] = &[
                ("kelvin", "K"),
                ("millikelvin", "mK"),
                ("tesla", "T"),
                ("millitesla", "mT"),
                ("second", "s"),
                ("seconds", "s"),
                ("sec", "s"),
                ("millisecond", "ms"),
                ("microsecond", "µs"),
                ("nanosecond", "ns"),
                ("ub", "µB"),
                ("mu_b", "µB"),
                ("bohr", "µB"),
                ("ev", "eV"),
                ("mev", "meV"),
                ("angstroms", "Å"),
                ("hz", "Hz"),
                ("hertz", "Hz"),
                ("khz", "kHz"),
            ];
            let lower = symbol.to_lowercase();
            NAMES
                .iter()
                .find(|(name, _)| *name == lower)
                .map(|(_, unit)| format!("did you mean `{unit}`?"))
                .or_else(|| crate::diagnostic::did_you_mean(symbol, UNITS.iter().map(|u| u.symbol)))
        }
    }
}

/// A number converted to the base unit of its dimension.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct BaseValue {
    pub value: f64,
    pub dimension: Dimension,
}

/// Converts `value` written in `symbol` to the base unit (None for an unknown symbol).
pub fn to_base(value: f64, symbol: &str) -> Option<BaseValue> {
    lookup(symbol).map(|unit| BaseValue {
        value: unit.convert(value),
        dimension: unit.dimension,
    })
}

impl UnitDef {
    /// `value` in the base unit. Decimal submultiples divide by an exact power of ten, so
    /// that 3 ns is exactly the double nearest 3e-9 s (multiplying by 1e-9 is not).
    pub fn convert(&self, value: f64) -> f64 {
        if self.to_base < 1.0 {
            let inverse = 1.0 / self.to_base;
            let rounded = inverse.round();
            if (inverse - rounded).abs() <= 1e-9 * rounded {
                return value / rounded;
            }
        }
        value * self.to_base
    }
}

/// Formats a value with its unit for messages and tables: "0.3 K", "1024" (no unit).
pub fn with_unit(value: f64, unit: &str) -> String {
    if unit.is_empty() {
        format_number(value)
    } else {
        format!("{} {unit}", format_number(value))
    }
}

/// A compact number: up to 6 significant digits, no trailing zeros.
pub fn format_number(value: f64) -> String {
    if !value.is_finite() {
        return format!("{value}");
    }
    if value == 0.0 {
        return "0".to_string();
    }
    let magnitude = value.abs();
    if !(1e-4..1e7).contains(&magnitude) {
        let text = format!("{value:.5e}");
        // 1.20000e-5 -> 1.2e-5
        if let Some((mantissa, exponent)) = text.split_once('e') {
            let mantissa = trim_zeros(mantissa);
            return format!("{mantissa}e{exponent}");
        }
        return text;
    }
    let digits_before = magnitude.log10().floor() as i32 + 1;
    let decimals = (6 - digits_before).clamp(0, 10) as usize;
    trim_zeros(&format!("{value:.decimals$}")).to_string()
}

fn trim_zeros(text: &str) -> &str {
    if text.contains('.') {
        text.trim_end_matches('0').trim_end_matches('.')
    } else {
        text
    }
}
