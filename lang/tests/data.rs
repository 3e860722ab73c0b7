//! Measured data: `import`, `export` (CSV and JSON), overlays of measured and simulated
//! tables, and the τ0 calibration.

mod common;

use common::{fails, ok, TINY_MODEL};
use icefield_lang::workspace::{Column, Figure, Provenance, Table, Value};
use icefield_lang::Session;

/// A path inside `dir` as the language writes it (quoted, forward slashes are fine).
fn quoted(dir: &tempfile::TempDir, name: &str) -> (String, String) {
    let path = dir.path().join(name).display().to_string();
    (path.clone(), format!("\"{path}\""))
}

fn table<'a>(session: &'a Session, name: &str) -> &'a Table {
    match session.workspace().get(name) {
        Some(Value::Table(t)) => t,
        other => panic!("`{name}` is not a table: {other:?}"),
    }
}

fn figure<'a>(session: &'a Session, name: &str) -> &'a Figure {
    match session.workspace().get(name) {
        Some(Value::Figure(f)) => f,
        other => panic!("`{name}` is not a figure: {other:?}"),
    }
}

fn column(name: &str, unit: &str, values: Vec<f64>, errors: Option<Vec<f64>>) -> Column {
    Column {
        name: name.to_string(),
        unit: unit.to_string(),
        values,
        errors,
        derived_from: None,
    }
}

fn provenance(source: &str) -> Provenance {
    Provenance {
        source: source.to_string(),
        lattice: "pyrochlore, L = 1 (16 spins)".to_string(),
        model: "nearest-neighbour spin ice, J_eff = 1.8 K".to_string(),
        seed: 20261201,
        measurement_sweeps: 4000,
        equilibration_sweeps: 1000,
        sample_every_sweeps: 1,
        start: "Random".to_string(),
        temperatures_requested: 4,
        interrupted: false,
        cell: 3,
        kinetics: None,
    }
}

/// Bitwise equality of two float columns (NaN equals NaN: the text "NaN" keeps no payload).
fn same_bits(a: &[f64], b: &[f64]) -> bool {
    a.len() == b.len()
        && a.iter()
            .zip(b)
            .all(|(x, y)| x.to_bits() == y.to_bits() || (x.is_nan() && y.is_nan()))
}

fn assert_same_columns(original: &Table, back: &Table) {
    assert_eq!(original.columns.len(), back.columns.len(), "{back:?}");
    for (a, b) in original.columns.iter().zip(&back.columns) {
        assert_eq!(a.name, b.name);
        assert_eq!(a.unit, b.unit, "unit of {}", a.name);
        assert!(
            same_bits(&a.values, &b.values),
            "{}: {:?} vs {:?}",
            a.name,
            a.values,
            b.values
        );
        match (&a.errors, &b.errors) {
            (Some(x), Some(y)) => assert!(same_bits(x, y), "errors of {}", a.name),
            (None, None) => {}
            other => panic!("errors of {} differ: {other:?}", a.name),
        }
        assert_eq!(a.derived_from, b.derived_from, "{}", a.name);
    }
}

/// Floats that shortest-representation printing must keep: 0.1 + 0.2 (not 0.3), the
/// smallest subnormal, the largest finite double, a value needing 17 significant digits.
fn awkward_table() -> Table {
    Table {
        name: "awkward".to_string(),
        columns: vec![
            column("T", "K", vec![0.1 + 0.2, 1.0 / 3.0, 2.5e-3, 7.0], None),
            column(
                "tau",
                "s",
                vec![5e-324, f64::MAX, 1.000_000_000_000_000_2, -0.0],
                Some(vec![1e-300, 0.1, f64::NAN, 2.0 / 3.0]),
            ),
            column(
                "c_molar",
                "J/(mol K)",
                vec![8.314462618, 1e22, 0.0, -1.5],
                None,
            ),
            Column {
                derived_from: Some("specific_heat * 8.314462618".to_string()),
                ..column("n", "", vec![1.0, 2.0, 3.0, 4.0], None)
            },
        ],
        provenance: Some(provenance("Metropolis temperature scan")),
    }
}

#[test]
fn import_of_an_export_round_trips_exactly() {
    // Exact: Rust prints an f64 with the shortest digits that parse back to the same
    // bits (std `{:?}` formatting of floats, Steele & White / Grisu-style round trip).
    let dir = tempfile::tempdir().unwrap();
    let (path, quoted_path) = quoted(&dir, "awkward.csv");
    let mut session = Session::new();
    let original = awkward_table();
    session
        .workspace_mut()
        .insert("awkward", Value::Table(original.clone()));
    ok(&mut session, &format!("export awkward to {quoted_path}"));
    let text = std::fs::read_to_string(&path).unwrap();
    // Provenance as comments first, then a header with a unit on every column.
    assert!(text.starts_with("# icefield "), "{text}");
    assert!(text.contains("# seed: 20261201"), "{text}");
    let header = text.lines().find(|l| !l.starts_with('#')).unwrap();
    assert_eq!(
        header,
        "T [K],tau [s],tau_error [s],c_molar [J/(mol K)],n []"
    );
    ok(&mut session, &format!("back = import {quoted_path}"));
    let back = table(&session, "back");
    assert_same_columns(&original, back);
    assert_eq!(back.provenance, original.provenance);
}

#[test]
fn a_scan_exported_and_imported_in_one_cell_round_trips() {
    let dir = tempfile::tempdir().unwrap();
    let (_, csv) = quoted(&dir, "thermo.csv");
    let mut session = Session::new();
    ok(
        &mut session,
        &format!(
            "{TINY_MODEL}thermo = scan T at [1, 2, 4] K, sweeps = 40, equilibrate = 10\n\
             export thermo to {csv}\nback = import {csv}\n"
        ),
    );
    let thermo = table(&session, "thermo").clone();
    let back = table(&session, "back");
    assert_same_columns(&thermo, back);
    assert_eq!(back.provenance, thermo.provenance);
}

#[test]
fn json_export_carries_units_values_errors_and_provenance() {
    let dir = tempfile::tempdir().unwrap();
    let (path, quoted_path) = quoted(&dir, "awkward.json");
    let (other, quoted_other) = quoted(&dir, "awkward.data");
    let mut session = Session::new();
    let original = awkward_table();
    session
        .workspace_mut()
        .insert("awkward", Value::Table(original.clone()));
    ok(&mut session, &format!("export awkward to {quoted_path}"));
    ok(
        &mut session,
        &format!("export awkward to {quoted_other}, format = json"),
    );
    for file in [&path, &other] {
        let json: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(file).unwrap()).unwrap();
        assert_eq!(json["units"]["c_molar"], "J/(mol K)");
        assert_eq!(json["columns"][1], "tau");
        // serde_json writes the shortest round-trip digits too (ryu); NaN becomes null.
        let tau: Vec<f64> = json["values"]["tau"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_f64().unwrap())
            .collect();
        assert!(same_bits(&tau, &original.columns[1].values));
        assert_eq!(json["errors"]["tau"][2], serde_json::Value::Null);
        assert_eq!(json["errors"]["tau"][0].as_f64(), Some(1e-300));
        assert_eq!(json["provenance"]["seed"], 20261201);
        assert_eq!(
            json["provenance"]["model"],
            "nearest-neighbour spin ice, J_eff = 1.8 K"
        );
        assert_eq!(
            json["provenance"]["icefield_version"],
            env!("CARGO_PKG_VERSION")
        );
        assert!(json["provenance"]["exported_in_cell"].as_u64().is_some());
        assert_eq!(json["derived"]["n"], "specific_heat * 8.314462618");
    }
    let error = fails(&mut session, "export awkward to \"x.txt\"");
    assert_eq!(error.kind, "ValueError");
    assert_eq!(
        (error.diagnostics[0].line, error.diagnostics[0].column),
        (1, 19)
    );
}

#[test]
fn whitespace_tables_comments_and_error_columns() {
    let dir = tempfile::tempdir().unwrap();
    let (path, quoted_path) = quoted(&dir, "tau.dat");
    std::fs::write(
        &path,
        "# Aldercrest Low-Temperature Laboratory, frostine sample F-2 (invented)\n\
         \n\
         T [K]   tau [ms]   err [ms]   n []\n\
         0.5     12.5       0.5        1\n\
         # a note between rows\n\
         0.75    3.25e0     0.25       2\n",
    )
    .unwrap();
    let mut session = Session::new();
    ok(
        &mut session,
        &format!("lab = import {quoted_path}, tau_error = err"),
    );
    let lab = table(&session, "lab");
    assert_eq!(lab.column_names(), vec!["T", "tau", "n"]);
    let tau = lab.column("tau").unwrap();
    assert_eq!(tau.unit, "ms");
    assert_eq!(tau.values, vec![12.5, 3.25]);
    assert_eq!(tau.errors, Some(vec![0.5, 0.25]));
    assert!(lab.provenance.is_none());
    // Without the option `err` stays a column of its own; `format =` overrides detection.
    ok(
        &mut session,
        &format!("raw = import {quoted_path}, format = whitespace"),
    );
    assert_eq!(
        table(&session, "raw").column_names(),
        vec!["T", "tau", "err", "n"]
    );
    // An error column in another unit of the same dimension is converted to its value's.
    let (csv_path, quoted_csv) = quoted(&dir, "tau.csv");
    std::fs::write(
        &csv_path,
        "T [K],tau [s],tau_error [ms]\n1,0.5,20\n2,0.25,5\n",
    )
    .unwrap();
    ok(&mut session, &format!("lab2 = import {quoted_csv}"));
    assert_eq!(
        table(&session, "lab2").column("tau").unwrap().errors,
        Some(vec![0.02, 0.005])
    );
}

/// Writes `contents`, imports it on line 2 of a cell, returns (kind, line, column, message).
fn import_error(contents: Option<&str>, options: &str) -> (String, usize, usize, String, String) {
    let dir = tempfile::tempdir().unwrap();
    let (path, quoted_path) = quoted(&dir, "bad.csv");
    if let Some(text) = contents {
        std::fs::write(&path, text).unwrap();
    }
    let mut session = Session::new();
    let error = fails(
        &mut session,
        &format!("seed 1\n  lab = import {quoted_path}{options}\n"),
    );
    let d = &error.diagnostics[0];
    (
        error.kind.clone(),
        d.line,
        d.column,
        d.message.clone(),
        path,
    )
}

#[test]
fn file_errors_name_the_file_line_and_column() {
    // Every message starts `PATH:LINE:COLUMN:` in the file; the diagnostic points at the
    // statement in the cell (line 2, column 3).
    let cases: &[(&str, &str, &str, &str)] = &[
        (
            "T [K], tau, err [s]\n1, 2, 3\n",
            "UnitError",
            ":1:8:",
            "column `tau` has no unit in the header line 1 `T [K], tau, err [s]`",
        ),
        (
            "# frostine (invented)\nT [K], tau [s]\n1.0, 2.0\n2.0, abc\n",
            "ValueError",
            ":4:6:",
            "row 2, column `tau`: `abc` is not a number",
        ),
        ("", "ValueError", ":1:1:", "the file is empty"),
        (
            "# only a comment\n\n",
            "ValueError",
            ":1:1:",
            "only comments",
        ),
        (
            "T [K], tau [s]\n1, 2\n3\n",
            "ValueError",
            ":3:2:",
            "row 2 has 1 cell but the header (line 1) has 2 columns",
        ),
        (
            "T [K], tau [s]\n1, 2, 3\n",
            "ValueError",
            ":2:7:",
            "row 1 has 3 cells but the header (line 1) has 2 columns",
        ),
        (
            "T [K], tau [s], T [mK]\n1, 2, 3\n",
            "ValueError",
            ":1:17:",
            "column `T` appears twice in the header (first at column 1)",
        ),
        (
            "T [K]\n",
            "ValueError",
            ":1:1:",
            "the header `T [K]` is followed by no rows of numbers",
        ),
        (
            "T(K), tau [s]\n1, 2\n",
            "ValueError",
            ":1:1:",
            "write the unit in brackets",
        ),
    ];
    for (contents, kind, position, message) in cases {
        let (k, line, column, text, path) = import_error(Some(contents), "");
        assert_eq!(k, *kind, "{text}");
        assert_eq!((line, column), (2, 3), "{text}");
        assert!(
            text.starts_with(&format!("{path}{position}")),
            "{text} should start with {path}{position}"
        );
        assert!(text.contains(message), "{text} should contain {message}");
    }
    let (kind, line, column, text, path) = import_error(None, "");
    assert_eq!(kind, "RuntimeError");
    assert_eq!((line, column), (2, 3));
    assert!(
        text.starts_with(&format!("{path}: file not found")),
        "{text}"
    );
    // An error option naming no column points at the option.
    let (kind, line, column, text, _) =
        import_error(Some("T [K], tau [s]\n1, 2\n"), ", tau_error = err");
    assert_eq!(kind, "NameError");
    assert_eq!(line, 2);
    assert!(column > 3, "{column}");
    assert!(text.contains("the header has no column `err`"), "{text}");
}

#[test]
fn a_bad_file_stops_the_cell_before_anything_runs() {
    let dir = tempfile::tempdir().unwrap();
    let (path, quoted_path) = quoted(&dir, "bad.csv");
    std::fs::write(&path, "T [K], tau\n1, 2\n").unwrap();
    let mut session = Session::new();
    fails(
        &mut session,
        &format!("{TINY_MODEL}early = scan T at [1] K, sweeps = 8\nlab = import {quoted_path}"),
    );
    assert!(session.workspace().get("early").is_none());
}

/// A simulated table (with provenance) and an imported measured one in other units.
fn overlay_session(dir: &tempfile::TempDir) -> Session {
    let mut session = Session::new();
    session.workspace_mut().insert(
        "sim",
        Value::Table(Table {
            name: "sim".to_string(),
            columns: vec![
                column("T", "K", vec![0.5, 1.0, 2.0], None),
                column(
                    "tau",
                    "s",
                    vec![0.1, 0.01, 0.001],
                    Some(vec![0.01, 0.001, 0.0001]),
                ),
            ],
            provenance: Some(provenance("physical-time run")),
        }),
    );
    let (path, quoted_path) = quoted(dir, "lab.csv");
    std::fs::write(
        &path,
        "T [mK], tau [ms], tau_error [ms]\n600, 50, 5\n1500, 2.5, 0.5\n",
    )
    .unwrap();
    ok(&mut session, &format!("lab = import {quoted_path}"));
    session
}

#[test]
fn overlay_draws_each_table_against_its_own_x_in_common_units() {
    let dir = tempfile::tempdir().unwrap();
    let mut session = overlay_session(&dir);
    let out = ok(
        &mut session,
        "fig = plot sim.tau, lab.tau against T, yscale = log",
    );
    let fig = figure(&session, "fig");
    assert_eq!(fig.series.len(), 2);
    assert_eq!(fig.series[0].label, "sim.tau");
    assert_eq!(fig.series[1].label, "lab.tau");
    assert_eq!((fig.x_unit.as_str(), fig.y_unit.as_str()), ("K", "s"));
    // mK → K and ms → s by exact powers of ten (SI prefixes, exact).
    assert_eq!(fig.series[1].x, vec![0.6, 1.5]);
    assert_eq!(fig.series[1].y, vec![0.05, 0.0025]);
    assert_eq!(fig.series[1].y_error, Some(vec![0.005, 0.0005]));
    assert_eq!(fig.series[0].x, vec![0.5, 1.0, 2.0]);
    // The legend names each table.
    assert!(fig.svg.contains("sim.tau") && fig.svg.contains("lab.tau"));
    assert!(out
        .streams
        .iter()
        .any(|s| s.contains("converted from ms to s")));
}

#[test]
fn overlay_refuses_units_of_different_dimensions() {
    let dir = tempfile::tempdir().unwrap();
    let mut session = overlay_session(&dir);
    let error = fails(&mut session, "seed 1\nplot sim.tau, lab.T against T");
    assert_eq!(error.kind, "UnitError");
    let d = &error.diagnostics[0];
    assert_eq!((d.line, d.column), (2, 15));
    assert!(d.message.contains("cannot share a y axis"), "{}", d.message);
}

/// SplitMix64 (Steele, Lea & Flood, OOPSLA 2014) and Box–Muller normals (Box & Muller,
/// Ann. Math. Stat. 29, 610 (1958)): a seeded noise source for synthetic data.
fn normals(seed: u64, count: usize) -> Vec<f64> {
    let mut state = seed;
    let mut uniform = move || {
        state = state.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = state;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64
    };
    (0..count)
        .map(|_| {
            let u = 1.0 - uniform();
            let v = uniform();
            (-2.0 * u.ln()).sqrt() * (2.0 * std::f64::consts::PI * v).cos()
        })
        .collect()
}

/// Simulated τ(T)/τ0 = exp(Δ/T) on a grid, a measured file at grid temperatures with
/// τ = τ0 exp(Δ/T) e^{σε} and error bars σ·τ. Returns the noise draws.
fn synthetic(
    dir: &tempfile::TempDir,
    session: &mut Session,
    sim_unit: &str,
    tau0: f64,
    sigma: f64,
) -> Vec<f64> {
    let barrier_kelvin = 3.2;
    let grid: Vec<f64> = (0..=20).map(|k| 0.6 + 0.07 * k as f64).collect();
    let sim_scale = if sim_unit.is_empty() { 1.0 } else { 1e-6 };
    session.workspace_mut().insert(
        "sim",
        Value::Table(Table {
            name: "sim".to_string(),
            columns: vec![
                column("T", "K", grid.clone(), None),
                column(
                    "tau",
                    sim_unit,
                    grid.iter()
                        .map(|t| sim_scale * (barrier_kelvin / t).exp())
                        .collect(),
                    None,
                ),
            ],
            provenance: Some(provenance("physical-time run")),
        }),
    );
    let lab_t: Vec<f64> = grid.iter().copied().step_by(2).skip(1).collect();
    let eps = normals(20261202, lab_t.len());
    let mut text = String::from("# invented frostine data, Aldercrest Low-Temperature Laboratory\nT [K], tau [s], err [s]\n");
    for (t, e) in lab_t.iter().zip(&eps) {
        let tau = tau0 * (barrier_kelvin / t).exp() * (sigma * e).exp();
        text.push_str(&format!("{t:?}, {tau:?}, {:?}\n", sigma * tau));
    }
    let (path, quoted_path) = quoted(dir, "tau.csv");
    std::fs::write(&path, text).unwrap();
    ok(
        session,
        &format!("lab = import {quoted_path}, tau_error = err"),
    );
    eps
}

#[test]
fn calibration_recovers_the_attempt_time_of_synthetic_data() {
    let (tau0, sigma) = (2.5e-6, 0.08);
    let dir = tempfile::tempdir().unwrap();
    let mut session = Session::new();
    let eps = synthetic(&dir, &mut session, "", tau0, sigma);
    let out = ok(&mut session, "cal = calibrate sim.tau to lab.tau against T");
    let cal = table(&session, "cal");
    let fitted = cal.column("tau0").unwrap();
    let (value, error) = (fitted.values[0], fitted.errors.as_ref().unwrap()[0]);
    assert_eq!(fitted.unit, "s");
    // Exact by construction: the measured temperatures are grid points (no interpolation
    // error) and all σ_ln τ are equal, so least squares in ln τ gives
    // ln τ0_fit = ln τ0 + σ·mean(ε) and σ(ln τ0_fit) = σ/√n (derived).
    let n = eps.len() as f64;
    let mean_eps = eps.iter().sum::<f64>() / n;
    assert!(
        (value.ln() - (tau0.ln() + sigma * mean_eps)).abs() < 1e-9,
        "{value} vs {}",
        tau0 * (sigma * mean_eps).exp()
    );
    assert!(((error / value) - sigma / n.sqrt()).abs() < 1e-6 * sigma);
    // And it recovers the true τ0 within its error (3σ rule; common practice).
    assert!(
        (value - tau0).abs() < 3.0 * error,
        "{value} ± {error} vs {tau0}"
    );
    // The residual table: ln(measured/calibrated) = σ(ε − mean ε) (derived).
    let residuals = table(&session, "cal_residuals");
    assert_eq!(
        residuals.column_names(),
        vec!["T", "measured", "calibrated", "residual"]
    );
    for (r, e) in residuals
        .column("residual")
        .unwrap()
        .values
        .iter()
        .zip(&eps)
    {
        assert!((r - sigma * (e - mean_eps)).abs() < 1e-9);
    }
    // Both curves redrawn on one figure.
    let fig = figure(&session, "cal_plot");
    assert_eq!(fig.series.len(), 2);
    assert_eq!(fig.series[1].label, "lab.tau");
    assert!(fig.svg.contains("lab.tau"));
    assert!(out.streams.iter().any(|s| s.contains("τ0 = ")));
}

#[test]
fn calibration_reads_a_simulation_in_seconds_for_a_stated_attempt_time() {
    // sim τ in s computed with τ0 = 1 µs: the same fit as in units of τ0 (derived).
    let (tau0, sigma) = (2.5e-6, 0.08);
    let dir = tempfile::tempdir().unwrap();
    let mut session = Session::new();
    let eps = synthetic(&dir, &mut session, "s", tau0, sigma);
    let error = fails(&mut session, "cal = calibrate sim.tau to lab.tau against T");
    assert_eq!(error.kind, "UnitError");
    assert!(error.message.contains("tau0 = 1 µs"), "{}", error.message);
    ok(
        &mut session,
        "cal = calibrate sim.tau to lab.tau against T, tau0 = 1 µs",
    );
    let value = table(&session, "cal").column("tau0").unwrap().values[0];
    let mean_eps = eps.iter().sum::<f64>() / eps.len() as f64;
    assert!((value.ln() - (tau0.ln() + sigma * mean_eps)).abs() < 1e-9);
    // A dimensionless simulated τ with a stated τ0 is a contradiction, refused.
    session.workspace_mut().insert(
        "sim_units",
        Value::Table(Table {
            name: "sim_units".to_string(),
            columns: vec![
                column("T", "K", vec![0.5, 3.0], None),
                column("tau", "", vec![100.0, 2.0], None),
            ],
            provenance: None,
        }),
    );
    let error = fails(
        &mut session,
        "calibrate sim_units.tau to lab.tau against T, tau0 = 1 µs",
    );
    assert_eq!(error.kind, "UnitError");
    assert_eq!(error.diagnostics[0].column, 11);
}

#[test]
fn calibration_refuses_to_extrapolate() {
    let dir = tempfile::tempdir().unwrap();
    let mut session = Session::new();
    synthetic(&dir, &mut session, "", 1e-6, 0.05);
    let (path, quoted_path) = quoted(&dir, "wide.csv");
    std::fs::write(
        &path,
        "T [K], tau [s]\n0.4, 1\n1.0, 0.1\n1.5, 0.01\n2.5, 0.001\n",
    )
    .unwrap();
    ok(&mut session, &format!("wide = import {quoted_path}"));
    let error = fails(
        &mut session,
        "seed 1\ncal = calibrate sim.tau to wide.tau against T",
    );
    assert_eq!(error.kind, "ValueError");
    let d = &error.diagnostics[0];
    assert_eq!((d.line, d.column), (2, 1));
    assert!(
        d.message
            .contains("T = 0.4 K, 2.5 K lie outside the simulated range 0.6 K … 2 K"),
        "{}",
        d.message
    );
    assert!(session.workspace().get("cal").is_none());
    ok(
        &mut session,
        "cal = calibrate sim.tau to wide.tau against T, range = [0.6, 2] K",
    );
    assert_eq!(
        table(&session, "cal").column("points").unwrap().values,
        vec![2.0]
    );
}
