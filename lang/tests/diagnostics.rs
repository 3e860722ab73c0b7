//! Parse and check errors: every error of a cell, with line and column in code points,
//! carets under the offending text and "did you mean" suggestions.

mod common;
use common::*;
use icefield_lang::Session;

#[test]
fn renders_like_the_documented_example() {
    let mut session = Session::new();
    let code =
        "lattice pyrochlore L = 2\ncouplings nearest J_eff = 1.8 K\nseed 3\nmeasure specfic_heat\n";
    let error = fails(&mut session, code);
    assert_eq!(error.kind, "NameError");
    assert_eq!(error.message, "unknown measure `specfic_heat`");
    let d = &error.diagnostics[0];
    assert_eq!((d.line, d.column), (4, 9));
    assert_eq!(d.help.as_deref(), Some("did you mean `specific_heat`?"));
    let expected = "error: unknown measure `specfic_heat`\n  --> cell:4:9\n   |\n 4 | measure specfic_heat\n   |         ^^^^^^^^^^^^ did you mean `specific_heat`?";
    assert_eq!(d.rendered, expected);
    let lines = error.traceback_lines();
    assert_eq!(lines[0], "error: unknown measure `specfic_heat`");
    assert_eq!(lines.len(), 5);
}

#[test]
fn every_syntax_error_of_a_cell_is_reported_with_its_position() {
    let session = Session::new();
    let code = "lattice pyrochlore L =\nseed 5\nthermo = scan T from 0.3 K 8 K in 3 steps\nlattcie pyrochlore L = 2\nplot thermo.x against\n";
    let diagnostics = session.diagnose(code);
    let positions: Vec<(usize, usize)> = diagnostics.iter().map(|d| (d.line, d.column)).collect();
    // Line 1: the value is missing after `=` (column 23 is just past the text);
    // line 3: `to` expected before `8`; line 4: unknown keyword; line 5: x missing.
    assert_eq!(
        positions,
        vec![(1, 23), (3, 28), (4, 1), (5, 22)],
        "{diagnostics:#?}"
    );
    assert!(
        diagnostics[1].message.contains("expected `to`"),
        "{}",
        diagnostics[1].message
    );
    assert_eq!(diagnostics[2].message, "unknown statement `lattcie`");
    assert_eq!(
        diagnostics[2].help.as_deref(),
        Some("did you mean `lattice`?")
    );
}

#[test]
fn syntax_and_check_errors_come_together_in_source_order() {
    let session = Session::new();
    let code = "lattice pyrochlore L = 0\ncouplings nearest J_eff = 1.8\nmeasure energy,, specific_heat\nt = scan T from 1 K to 2 K in 3 steps, sweep = 10\n";
    let diagnostics = session.diagnose(code);
    let lines: Vec<usize> = diagnostics.iter().map(|d| d.line).collect();
    assert_eq!(lines, vec![1, 2, 3, 4], "{diagnostics:#?}");
    assert!(diagnostics[0].message.contains("L"));
    assert_eq!(
        diagnostics[1].message,
        "`J_eff` needs an energy unit: K, mK, meV"
    );
    assert_eq!(
        diagnostics[3].help.as_deref(),
        Some("did you mean `sweeps`?")
    );
}

#[test]
fn a_failed_statement_does_not_cause_follow_up_errors() {
    let session = Session::new();
    // The scan line does not parse, but `thermo` is then not reported as unknown.
    let code = "lattice pyrochlore L = 1\ncouplings nearest J_eff = 1 K\nthermo = scan T from 1 K 2 K in 3 steps\ntable thermo\nplot thermo.energy against T\n";
    let diagnostics = session.diagnose(code);
    assert_eq!(diagnostics.len(), 1, "{diagnostics:#?}");
    assert_eq!(diagnostics[0].line, 3);
}

#[test]
fn columns_count_code_points_not_bytes() {
    let session = Session::new();
    // `µ` (2 bytes) and `Å` (2 bytes) come before the offending `Å`: code-point column 32.
    let code = "lattice pyrochlore L = 1\ncouplings nearest J_eff = 1 K\nt = scan T at [0.5 K, 900 µK, 2 Å]\n";
    let diagnostics = session.diagnose(code);
    assert_eq!(diagnostics.len(), 1, "{diagnostics:#?}");
    let d = &diagnostics[0];
    assert_eq!((d.line, d.column), (3, 33));
    assert!(
        d.rendered.ends_with("^ Å is ångström, 10⁻¹⁰ m"),
        "{}",
        d.rendered
    );
    // The caret sits under the Å: 33 − 1 spaces after "   | ".
    let caret_line = d.rendered.lines().last().unwrap();
    assert_eq!(caret_line.find('^').unwrap(), "   | ".len() + 32);
}

#[test]
fn unknown_names_get_suggestions() {
    let mut session = Session::new();
    ok(&mut session, &format!("{TINY_MODEL}thermo = scan T from 1 K to 3 K in 3 steps, sweeps = 40, equilibrate = 10\n"));
    let cases: &[(&str, &str, &str)] = &[
        ("table thremo", "NameError", "did you mean `thermo`?"),
        (
            "plot thermo.specfic_heat against T",
            "NameError",
            "did you mean `specific_heat`?",
        ),
        (
            "plot thermo.energy against T, xsale = log",
            "NameError",
            "did you mean `xscale`?",
        ),
        (
            "plot thermo.energy against T, xscale = lg",
            "NameError",
            "did you mean `log`?",
        ),
        (
            "lattice pyrochlor L = 2",
            "NameError",
            "did you mean `pyrochlore`?",
        ),
        (
            "couplings nearest Jeff = 1 K",
            "NameError",
            "did you mean `J_eff`?",
        ),
        ("sead 4", "SyntaxError", "did you mean `seed`?"),
        (
            "column thermo.x = sqrt(enrgy) unit \"K\"",
            "NameError",
            "did you mean `energy`?",
        ),
        (
            "couplings nearest J_eff = 1 Kelvin",
            "UnitError",
            "did you mean `K`?",
        ),
        (
            "couplings nearest J_eff = 1 mev",
            "UnitError",
            "did you mean `meV`?",
        ),
    ];
    for (code, kind, help) in cases {
        let error = fails(&mut session, code);
        assert_eq!(error.kind, *kind, "{code}");
        assert_eq!(error.diagnostics[0].help.as_deref(), Some(*help), "{code}");
    }
}

#[test]
fn out_of_range_values_are_refused() {
    let mut session = Session::new();
    let cases: &[(&str, &str)] = &[
        ("lattice pyrochlore L = 0", "L"),
        ("lattice pyrochlore L = 2.5", "whole number"),
        ("seed -1", "seed"),
        ("lattice pyrochlore L = 1\ncouplings nearest J_eff = 1 K\nt = scan T from 1 K to 2 K in 0 steps", "steps"),
        ("lattice pyrochlore L = 1\ncouplings nearest J_eff = 1 K\nt = scan T from -1 K to 2 K in 3 steps", "positive"),
        ("lattice pyrochlore L = 1\ncouplings nearest J_eff = 1 K\nt = scan T at [1, 0] K", "positive"),
        ("lattice pyrochlore L = 1\ncouplings nearest J_eff = 1 K\nt = scan T at [1] K, sweeps = 2", "samples"),
    ];
    for (code, needle) in cases {
        let error = fails(&mut session, code);
        assert_eq!(error.kind, "ValueError", "{code}");
        assert!(error.message.contains(needle), "{code}: {}", error.message);
    }
    // A lattice too large for memory is refused at the size, with stdlib's estimate,
    // before anything is allocated.
    let error = fails(&mut session, "lattice pyrochlore L = 600");
    assert_eq!(error.kind, "ValueError");
    assert!(error.message.contains("GiB"), "{}", error.message);
    assert_eq!(error.diagnostics[0].column, 24);
    // Nothing was committed by the failed cells.
    assert!(session.workspace().model.lattice.is_none());
}

#[test]
fn planned_statements_say_so() {
    let session = Session::new();
    for (code, kind) in [
        ("state = equilibrate at 0.5 K", "NotImplementedError"),
        ("measure structure_factor", "NotImplementedError"),
        (
            "lattice pyrochlore L = 4, a = 10.1 Å",
            "NotImplementedError",
        ),
        (
            "mh = scan B from 0 T to 1 T in 20 steps",
            "NotImplementedError",
        ),
    ] {
        let error = match session.prepare(code) {
            Ok(_) => panic!("{code} should fail"),
            Err(e) => e,
        };
        assert_eq!(error.kind, kind, "{code}");
    }
    // A field in kelvin is a unit error.
    let error = session
        .prepare("field B = 0.5 K along [1, 1, 1]")
        .err()
        .unwrap();
    assert_eq!(error.kind, "UnitError");
}

#[test]
fn brackets_left_open_or_stray_are_reported() {
    let session = Session::new();
    let diagnostics = session.diagnose("seed 1\ntable )\n");
    assert_eq!(diagnostics[0].message, "`)` closes nothing");
    assert_eq!((diagnostics[0].line, diagnostics[0].column), (2, 7));
    let diagnostics = session.diagnose("rhai {\n  fn f(x) { x }\n");
    assert_eq!(diagnostics.len(), 1);
    assert_eq!(diagnostics[0].message, "`{` is never closed");
}
