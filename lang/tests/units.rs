//! Unit conversion and dimension checks.

mod common;
use common::*;
use icefield_lang::units::{self, Dimension};
use icefield_lang::Session;

fn j_eff_after(code: &str) -> f64 {
    let mut session = Session::new();
    ok(&mut session, code);
    session
        .workspace()
        .model
        .couplings
        .as_ref()
        .unwrap()
        .j_eff_kelvin
}

#[test]
fn millielectronvolt_in_kelvin_is_codata_2018() {
    // 1 eV / k_B = 11604.518 K: e = 1.602176634e-19 C and k_B = 1.380649e-23 J/K are exact
    // in the 2019 SI (CODATA 2018).
    let mev = units::to_base(1.0, "meV").unwrap();
    assert_eq!(mev.dimension, Dimension::Energy);
    assert!((mev.value - 11.604518).abs() < 1e-6, "{}", mev.value);
    assert!((mev.value - 11.604_518_12).abs() < 1e-8);
    let micro = units::to_base(1.0, "µeV").unwrap().value;
    assert!((micro - 11.604518e-3).abs() < 1e-9);
    // Through the language: J_eff = 0.155 meV.
    let j = j_eff_after("couplings nearest J_eff = 0.155 meV");
    assert!((j - 0.155 * 11.604518).abs() < 1e-6, "{j}");
}

#[test]
fn decimal_prefixes_are_exact() {
    // 1 mK = 1e-3 K by definition of the SI prefix milli.
    assert_eq!(units::to_base(1.0, "mK").unwrap().value, 1e-3);
    assert_eq!(units::to_base(250.0, "mT").unwrap().value, 0.25);
    assert_eq!(units::to_base(3.0, "ms").unwrap().value, 3e-3);
    assert_eq!(units::to_base(3.0, "ns").unwrap().value, 3e-9);
    assert_eq!(units::to_base(1.0, "nm").unwrap().value, 10.0); // 1 nm = 10 Å
    assert_eq!(j_eff_after("couplings nearest J_eff = 1800 mK"), 1.8);
}

#[test]
fn micro_and_angstrom_have_every_spelling() {
    // Micro sign U+00B5, Greek mu U+03BC and ASCII `u`/`mu` are the same prefix.
    for symbol in ["\u{b5}s", "\u{3bc}s", "us"] {
        let v = units::to_base(2.0, symbol).unwrap();
        assert_eq!(v.dimension, Dimension::Time, "{symbol}");
        assert_eq!(v.value, 2e-6, "{symbol}");
    }
    for symbol in ["\u{b5}B", "\u{3bc}B", "muB"] {
        assert_eq!(
            units::to_base(10.0, symbol).unwrap().dimension,
            Dimension::Moment
        );
    }
    // Å as a letter (U+00C5) or as the ångström sign (U+212B), or spelled out.
    for symbol in ["\u{c5}", "\u{212b}", "angstrom"] {
        let v = units::to_base(3.54, symbol).unwrap();
        assert_eq!(
            (v.dimension, v.value),
            (Dimension::Length, 3.54),
            "{symbol}"
        );
    }
    // `A` would be ampere: refused with a hint.
    assert!(units::lookup("A").is_none());
    assert!(units::unknown_unit_help("A").unwrap().contains("Å"));
}

#[test]
fn a_missing_unit_is_an_error_naming_the_units() {
    let mut session = Session::new();
    let error = fails(&mut session, "couplings nearest J_eff = 1.8");
    assert_eq!(error.kind, "UnitError");
    assert_eq!(error.message, "`J_eff` needs an energy unit: K, mK, meV");
    assert_eq!(
        error.diagnostics[0].help.as_deref(),
        Some("write e.g. `1.8 K`")
    );
}

#[test]
fn wrong_dimensions_are_errors() {
    let mut session = Session::new();
    ok(&mut session, TINY_MODEL);
    // A temperature in tesla.
    let error = fails(&mut session, "t = scan T from 0.3 T to 8 K in 3 steps");
    assert_eq!(error.kind, "UnitError");
    assert!(
        error.message.contains("temperature unit"),
        "{}",
        error.message
    );
    assert_eq!(
        (error.diagnostics[0].line, error.diagnostics[0].column),
        (1, 21)
    );
    // An energy in seconds, a size with a unit, a field in kelvin.
    for code in [
        "couplings nearest J_eff = 2 ms",
        "lattice pyrochlore L = 4 K",
        "field B = [0, 0, 1] K",
        "t = scan T at [1 K, 2 µB]",
        "t = scan T from 1 K to 2 K in 3 steps, sweeps = 100 s",
    ] {
        let error = fails(&mut session, code);
        assert_eq!(error.kind, "UnitError", "{code}: {}", error.message);
    }
}

#[test]
fn exchange_conventions_give_the_sigma_sigma_coefficient() {
    // Vector convention: J_nn = −J1/3 (e_a·e_b = −1/3, physics-reference §1, derived).
    assert!((j_eff_after("couplings nearest J1 = -3 K") - 1.0).abs() < 1e-12);
    assert!((j_eff_after("couplings nearest J1 = -3 K, convention = ising") + 3.0).abs() < 1e-12);
    // Nearest-neighbour part of the dipolar sum: D_nn = 5D/3 (derived, physics-reference §2).
    let j = j_eff_after("couplings nearest J1 = 3.72 K, D = 1.41 K");
    assert!((j - (-3.72 / 3.0 + 5.0 * 1.41 / 3.0)).abs() < 1e-12, "{j}");
    // The vector and Ising forms of the same number differ as −1/3.
    let mut session = Session::new();
    let error = fails(&mut session, "couplings nearest J_eff = 1 K, D = 1 K");
    assert_eq!(error.kind, "ValueError");
}

#[test]
fn scan_temperatures_convert_and_space() {
    let session = Session::new();
    let steps = session
        .prepare("lattice pyrochlore L = 1\ncouplings nearest J_eff = 1 K\nt = scan T from 300 mK to 30 K in 3 steps, spacing = log")
        .unwrap();
    let scan = steps
        .iter()
        .find_map(|s| match &s.plan {
            icefield_lang::plan::Plan::Scan(scan) => Some(scan.clone()),
            _ => None,
        })
        .unwrap();
    let t = &scan.settings.temperatures_kelvin;
    assert_eq!(t.len(), 3);
    assert!((t[0] - 0.3).abs() < 1e-15 && (t[2] - 30.0).abs() < 1e-15);
    // Geometric midpoint of 0.3 K and 30 K is 3 K (derived).
    assert!((t[1] - 3.0).abs() < 1e-12, "{t:?}");
}
