//! End to end through `Session::execute`: scans, tables, figures, workspace persistence,
//! rhai, interrupts.

mod common;
use common::*;
use icefield_lang::workspace::Value;
use icefield_lang::{Interrupt, Output, Session};

const SCAN: &str =
    "thermo = scan T from 0.5 K to 6 K in 5 steps, sweeps = 200, equilibrate = 50, spacing = log\n";

#[test]
fn the_documented_sketch_runs_and_shows_a_table_and_a_figure() {
    let mut session = Session::new();
    let code = r#"# Invented scenario: "frostine", a fictional pyrochlore oxide; all numbers invented
lattice pyrochlore L = 1
couplings nearest J_eff = 1.8 K
seed 20261201
measure energy, specific_heat, monopole_density
thermo = scan T from 0.3 K to 8 K in 6 steps, sweeps = 400, equilibrate = 100, spacing = log
table thermo
plot thermo.specific_heat against T, xscale = log
rhai {
    fn molar(c) { c * 8.314462618 }
}
column thermo.c_molar = molar(specific_heat) unit "J/(mol K)"
"#;
    let out = ok(&mut session, code);
    assert!(out.progress >= 1, "the scan reports progress");
    assert_eq!(out.displays.len(), 2);
    // The table: plain text with units in the header, HTML, and a record.
    let table = &out.displays[0];
    let header = table.plain.lines().nth(1).unwrap();
    for h in [
        "T [K]",
        "energy [K]",
        "specific_heat [k_B]",
        "monopole_density",
    ] {
        assert!(header.contains(h), "{header}");
    }
    assert!(table.plain.contains(" ± "), "value ± error");
    assert!(table.html.as_ref().unwrap().starts_with("<table"));
    let record = &table.record;
    assert_eq!(record["name"], "thermo");
    assert_eq!(record["kind"], "table");
    assert_eq!(record["units"]["T"], "K");
    assert_eq!(record["units"]["energy"], "K");
    assert_eq!(record["values"]["T"].as_array().unwrap().len(), 6);
    assert_eq!(record["errors"]["energy"].as_array().unwrap().len(), 6);
    assert!(record["errors"].get("T").is_none(), "T has no error bars");
    // The first and last temperatures are exactly the ones asked for.
    assert_eq!(record["values"]["T"][0], 0.3);
    assert_eq!(record["values"]["T"][5], 8.0);
    // The figure: SVG from stdlib with labelled axes, and its data as a record.
    let figure = &out.displays[1];
    let svg = figure.svg.as_ref().unwrap();
    assert!(svg.contains("<svg"));
    assert!(svg.contains("T [K]") && svg.contains("specific_heat [k_B]"));
    assert_eq!(figure.record["kind"], "figure");
    assert_eq!(figure.record["units"]["T"], "K");
    assert_eq!(
        figure.record["values"]["specific_heat"],
        record["values"]["specific_heat"]
    );
    // The derived column: C·R row by row, error bars scaled by R (linear map, exact).
    let t = session.workspace().table("thermo").unwrap();
    let c = t.column("specific_heat").unwrap();
    let molar = t.column("c_molar").unwrap();
    assert_eq!(molar.unit, "J/(mol K)");
    for row in 0..t.row_count() {
        let r = 8.314462618; // R, CODATA 2018 (exact)
        assert!((molar.values[row] - c.values[row] * r).abs() <= 1e-12 * r);
        let e = c.errors.as_ref().unwrap()[row] * r;
        assert!((molar.errors.as_ref().unwrap()[row] - e).abs() <= 1e-9 * e.max(1e-12));
    }
    // Ice physics at 8 K (about 4.4 J_eff): energy per spin between the ice value −J_eff
    // and 0, monopoles present (physics-reference §2, derived bounds).
    let energy = t.column("energy").unwrap().values[5];
    assert!(energy > -1.8 && energy < 0.0, "{energy}");
    assert!(t.column("monopole_density").unwrap().values[5] > 0.0);
}

#[test]
fn a_scan_without_table_or_plot_prints_a_summary() {
    let mut session = Session::new();
    let out = ok(&mut session, &format!("{TINY_MODEL}{SCAN}"));
    assert!(out.displays.is_empty());
    let text = out.streams.join("");
    assert!(
        text.starts_with("thermo: 5 temperatures from 0.5 K to 6 K"),
        "{text}"
    );
    assert!(text.contains("table thermo"));
}

#[test]
fn the_workspace_persists_across_cells() {
    let mut session = Session::new();
    ok(&mut session, TINY_MODEL);
    ok(&mut session, SCAN);
    assert_eq!(session.names(), vec!["thermo".to_string()]);
    let out = ok(
        &mut session,
        "table thermo, columns = [T, energy]\ncv = plot thermo.specific_heat against T",
    );
    assert_eq!(
        out.displays[0].record["values"].as_object().unwrap().len(),
        2
    );
    assert_eq!(
        session.names(),
        vec!["thermo".to_string(), "cv".to_string()]
    );
    assert!(matches!(
        session.workspace().get("cv"),
        Some(Value::Figure(_))
    ));
    let out = ok(&mut session, "show cv\nshow model");
    assert!(out.displays[0].svg.is_some());
    assert!(out.streams[0].contains("J_eff = 1.8 K"));
    // The workspace serialises (to save a session).
    let json = serde_json::to_string(session.workspace()).unwrap();
    let back: icefield_lang::Workspace = serde_json::from_str(&json).unwrap();
    assert_eq!(back.names(), session.names());
    assert_eq!(back.model, session.workspace().model);
    let (a, b) = (
        back.table("thermo").unwrap(),
        session.workspace().table("thermo").unwrap(),
    );
    assert_eq!(a.column_names(), b.column_names());
    assert_eq!(a.row_count(), b.row_count());
}

#[test]
fn the_same_seed_gives_the_same_numbers() {
    let values = |seed: u64| {
        let mut session = Session::new();
        ok(
            &mut session,
            &TINY_MODEL.replace("seed 7", &format!("seed {seed}")),
        );
        ok(&mut session, SCAN);
        let t = session.workspace().table("thermo").unwrap().clone();
        t.column("energy").unwrap().values.clone()
    };
    assert_eq!(values(11), values(11));
    assert_ne!(values(11), values(12));
    // Re-running the same cell in one session replaces the table with identical numbers.
    let mut session = Session::new();
    ok(&mut session, TINY_MODEL);
    ok(&mut session, SCAN);
    let first = session.workspace().table("thermo").unwrap().columns.clone();
    ok(&mut session, SCAN);
    assert_eq!(session.workspace().table("thermo").unwrap().columns, first);
}

#[test]
fn an_error_keeps_what_ran_before_it() {
    let mut session = Session::new();
    let error = fails(
        &mut session,
        &format!("{TINY_MODEL}{SCAN}plot thermo.energy against T, yscale = log\n"),
    );
    // Energies are negative: the log axis refuses them at run time.
    assert_eq!(error.kind, "RuntimeError");
    assert_eq!(error.diagnostics[0].line, 5);
    assert!(session.workspace().table("thermo").is_some());
    // The session is alive.
    ok(&mut session, "table thermo");
}

#[test]
fn rhai_functions_persist_and_see_tables() {
    let mut session = Session::new();
    ok(&mut session, &format!("{TINY_MODEL}{SCAN}"));
    ok(
        &mut session,
        "rhai {\n  fn double(x) { 2.0 * x }\n  const OFFSET = 1.0;\n}",
    );
    let out = ok(
        &mut session,
        "rhai {\n  let n = thermo.T.len();\n  print(`rows: ${n}`);\n  print(double(thermo.T[0]));\n}",
    );
    assert_eq!(out.streams.join(""), "rows: 5\n1.0\n");
    ok(
        &mut session,
        "column thermo.shifted = double(T) + OFFSET unit \"K\"",
    );
    let t = session.workspace().table("thermo").unwrap();
    let shifted = &t.column("shifted").unwrap().values;
    let temps = &t.column("T").unwrap().values;
    for (s, t) in shifted.iter().zip(temps) {
        assert_eq!(*s, 2.0 * t + 1.0);
    }
    // T has no error bars, so neither has the derived column.
    assert!(t.column("shifted").unwrap().errors.is_none());
    // Derived columns can be redefined, measured ones cannot.
    ok(&mut session, "column thermo.shifted = T - 1 unit \"K\"");
    let error = fails(&mut session, "column thermo.energy = energy * 2");
    assert_eq!(error.kind, "ValueError");
}

#[test]
fn rhai_errors_point_into_the_cell() {
    let mut session = Session::new();
    // A parse error on the third line of the cell, second line of the block.
    let error = fails(&mut session, "seed 1\nrhai {\n  let x = ;\n}");
    assert_eq!(error.kind, "ScriptError");
    assert_eq!(
        (error.diagnostics[0].line, error.diagnostics[0].column),
        (3, 11)
    );
    // A run-time error on the first line of the block, after `rhai { ` and non-ASCII text.
    let error = fails(&mut session, "rhai { let s = \"µÅ\"; let a = [1]; a[3] }");
    assert_eq!(error.kind, "ScriptError");
    // rhai points at the index `3`: code-point column 37 (it would be 39 in bytes).
    assert_eq!(
        (error.diagnostics[0].line, error.diagnostics[0].column),
        (1, 37)
    );
    // Nothing ran in a cell whose block does not compile.
    let out_before = session.names().len();
    assert!(fails(&mut session, "rhai { print(1); }\nrhai { fn (x) }").kind == "ScriptError");
    assert_eq!(session.names().len(), out_before);
}

#[test]
fn an_interrupted_scan_keeps_its_finished_temperatures() {
    let mut session = Session::new();
    ok(
        &mut session,
        "lattice pyrochlore L = 2\ncouplings nearest J_eff = 1 K\nseed 5\nmeasure energy",
    );
    let interrupt = Interrupt::new();
    let mut displayed = Vec::new();
    let result = session.execute(
        "long = scan T from 0.5 K to 5 K in 400 steps, sweeps = 4000, equilibrate = 100",
        &interrupt,
        &mut |output| match output {
            // Interrupt once a quarter of the work is done.
            Output::Progress(p) if p.done * 4 >= p.total && p.done < p.total => interrupt.request(),
            Output::Display(r) => displayed.push(r),
            _ => {}
        },
    );
    let error = result.expect_err("the scan was interrupted");
    assert_eq!(error.kind, "Interrupted");
    let kept = session.workspace().table("long").unwrap().row_count();
    assert!(kept > 0 && kept < 400, "{kept}");
    assert_eq!(
        error.message,
        format!("interrupted: kept {kept} of 400 temperatures in `long`")
    );
    // The partial table was displayed, and records the interruption.
    assert_eq!(displayed.len(), 1);
    assert_eq!(
        displayed[0].record["values"]["T"].as_array().unwrap().len(),
        kept
    );
    let provenance = session
        .workspace()
        .table("long")
        .unwrap()
        .provenance
        .clone()
        .unwrap();
    assert!(provenance.interrupted);
    assert_eq!(provenance.temperatures_requested, 400);
    // The kept temperatures are the first ones of the ladder, in order.
    let t = &session
        .workspace()
        .table("long")
        .unwrap()
        .column("T")
        .unwrap()
        .values;
    assert_eq!(t[0], 0.5);
    assert!(t.windows(2).all(|w| w[0] < w[1]));
}

#[test]
fn an_interrupt_stops_an_endless_rhai_loop() {
    let mut session = Session::new();
    let interrupt = Interrupt::new();
    let flag = interrupt.clone();
    let timer = std::thread::spawn(move || {
        std::thread::sleep(std::time::Duration::from_millis(300));
        flag.request();
    });
    let started = std::time::Instant::now();
    let (_, result) = run_with(
        &mut session,
        "rhai {\n  let i = 0;\n  loop { i += 1; }\n}",
        &interrupt,
    );
    timer.join().unwrap();
    let error = result.expect_err("interrupted");
    assert_eq!(error.kind, "Interrupted");
    assert!(started.elapsed().as_secs() < 20);
    // The session still works afterwards.
    interrupt.clear();
    let (out, result) = run_with(&mut session, "rhai { print(\"alive\"); }", &interrupt);
    result.unwrap();
    assert_eq!(out.streams, vec!["alive\n".to_string()]);
}

#[test]
fn export_writes_csv_with_units_in_the_header() {
    let mut session = Session::new();
    ok(
        &mut session,
        &format!("{TINY_MODEL}measure energy, acceptance_rate\n{SCAN}"),
    );
    let dir = std::env::temp_dir().join(format!("icefield-lang-test-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let path = dir.join("thermo.csv");
    ok(
        &mut session,
        &format!("export thermo to \"{}\"", path.display()),
    );
    let text = std::fs::read_to_string(&path).unwrap();
    // Provenance comes first as `#` lines; every header carries a unit (`[]`: pure number).
    let mut lines = text.lines().skip_while(|l| l.starts_with('#'));
    assert_eq!(
        lines.next().unwrap(),
        "T [K],energy [K],energy_error [K],acceptance_rate [],tau_int_energy [sweeps],drift_sigma []"
    );
    assert_eq!(lines.count(), 5);
    std::fs::remove_dir_all(&dir).ok();
}

#[test]
fn session_can_move_to_another_thread() {
    fn assert_send<T: Send>() {}
    assert_send::<Session>();
}

#[test]
fn script_output_is_capped() {
    let mut session = Session::new();
    let out = ok(&mut session, "rhai { for i in 0..20000 { print(i); } }");
    let text = out.streams.join("");
    let lines: Vec<&str> = text.lines().collect();
    assert_eq!(lines.len(), icefield_lang::script::MAX_PRINTED_LINES + 1);
    assert_eq!(lines[0], "0");
    assert!(lines.last().unwrap().contains("dropped"));
}
