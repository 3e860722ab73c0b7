//! is_complete, complete and inspect, with positions in Unicode code points.

mod common;
use common::*;
use icefield_lang::{is_complete, Completeness, Session};

fn incomplete() -> Completeness {
    Completeness::Incomplete {
        indent: "    ".to_string(),
    }
}

#[test]
fn completeness_follows_brackets_blocks_and_continued_lines() {
    assert_eq!(
        is_complete("lattice pyrochlore L = 4"),
        Completeness::Complete
    );
    assert_eq!(is_complete(""), Completeness::Complete);
    assert_eq!(is_complete("rhai {\n  fn f(x) {"), incomplete());
    assert_eq!(
        is_complete("rhai {\n  fn f(x) { x }\n}"),
        Completeness::Complete
    );
    assert_eq!(is_complete("t = scan T at [1, 2"), incomplete());
    assert_eq!(
        is_complete("t = scan T from 1 K to 2 K in 3 steps,"),
        incomplete()
    );
    // Braces inside rhai strings, comments and map literals are not brackets.
    assert_eq!(
        is_complete("rhai { let s = \"}\"; // }\n let m = #{a: 1}; }"),
        Completeness::Complete
    );
    assert_eq!(
        is_complete("rhai { let s = \"{\"; }"),
        Completeness::Complete
    );
    assert_eq!(is_complete("rhai { let s = `multi\nline"), incomplete());
    // A `#` starts a comment outside rhai: brackets in it do not count.
    assert_eq!(is_complete("seed 1 # (unbalanced"), Completeness::Complete);
    assert_eq!(is_complete("table thermo)"), Completeness::Invalid);
    assert_eq!(is_complete("measure energy µ ]"), Completeness::Invalid);
}

#[test]
fn completes_keywords_measures_options_and_units() {
    let session = Session::new();
    let c = session.complete("mea", 3);
    assert_eq!(
        (c.matches, c.start, c.end),
        (vec!["measure".to_string()], 0, 3)
    );
    let c = session.complete("measure energy, spec", 20);
    assert_eq!(c.matches, vec!["specific_heat", "specific_heat_molar"]);
    assert_eq!((c.start, c.end), (16, 20));
    let code = "t = scan T from 1 K to 2 K in 3 steps, sw";
    let c = session.complete(code, code.chars().count());
    assert_eq!(c.matches, vec!["sweeps"]);
    let code = "plot t.energy against T, xscale = l";
    assert_eq!(
        session.complete(code, code.chars().count()).matches,
        vec!["linear", "log"]
    );
    let c = session.complete("lattice py", 10);
    assert_eq!(c.matches, vec!["pyrochlore"]);
}

#[test]
fn unit_completion_counts_code_points() {
    let session = Session::new();
    // The prefix `µ` is one code point (two bytes).
    let code = "couplings nearest J_eff = 1.8 µ";
    let cursor = code.chars().count();
    let c = session.complete(code, cursor);
    assert_eq!((c.start, c.end), (cursor - 1, cursor));
    for unit in ["µK", "µeV", "µs", "µB"] {
        assert!(c.matches.contains(&unit.to_string()), "{:?}", c.matches);
    }
    assert!(!c.matches.contains(&"mK".to_string()));
    // Text with Å and µ on an earlier line shifts byte offsets but not code points.
    let code = "# r_nn = 3.54 Å, µ = 10 µB\nmeasure mono";
    let cursor = code.chars().count();
    let c = session.complete(code, cursor);
    assert_eq!(c.matches, vec!["monopole_density"]);
    assert_eq!((c.start, c.end), (cursor - 4, cursor));
    // A cursor past the end is clamped, not a panic.
    let c = session.complete("mea", 99);
    assert_eq!((c.start, c.end), (0, 3));
}

#[test]
fn completes_workspace_names_and_columns_after_a_dot() {
    let mut session = Session::new();
    ok(&mut session, &format!("{TINY_MODEL}measure energy, specific_heat\nthermo = scan T at [1, 2] K, sweeps = 40, equilibrate = 10"));
    let c = session.complete("table th", 8);
    assert_eq!(c.matches, vec!["thermo"]);
    let code = "plot thermo.sp";
    let c = session.complete(code, 14);
    assert_eq!(
        (c.matches, c.start, c.end),
        (vec!["specific_heat".to_string()], 12, 14)
    );
    let code = "plot thermo.";
    let c = session.complete(code, 12);
    assert_eq!(
        c.matches,
        vec![
            "T",
            "energy",
            "specific_heat",
            "tau_int_energy",
            "drift_sigma"
        ]
    );
    // After a non-ASCII comment on the same line before the cursor.
    let code = "plot thermo.e";
    let with_comment = format!("# Å µ\n{code}");
    let c = session.complete(&with_comment, with_comment.chars().count());
    assert_eq!(c.matches, vec!["energy"]);
    assert_eq!(c.start, with_comment.chars().count() - 1);
}

#[test]
fn inspect_explains_keywords_measures_units_and_values() {
    let mut session = Session::new();
    assert!(session
        .inspect("lattice pyrochlore L = 4", 2)
        .unwrap()
        .starts_with("lattice KIND"));
    assert!(session
        .inspect("measure monopole_density", 12)
        .unwrap()
        .contains("Σ_t |Q_t| / N"));
    assert!(session
        .inspect("sweeps = 10", 0)
        .unwrap()
        .contains("sweeps"));
    // Cursor on the unit µB after non-ASCII text; positions are code points.
    let code = "field B = 0.5 T along [1,1,1], moment = 10 µB";
    let cursor = code.chars().position(|c| c == 'µ').unwrap() + 1;
    assert!(session
        .inspect(code, cursor)
        .unwrap()
        .contains("Bohr magneton"));
    let code = "# Å\nx = 3.54 Å";
    let cursor = code.chars().count();
    assert!(session.inspect(code, cursor).unwrap().contains("ångström"));
    assert!(session
        .inspect("lattice pyrochlore", 100)
        .unwrap()
        .contains("FCC"));
    assert!(session.inspect("   ", 1).is_none());
    assert!(session.inspect("frobnicate", 3).is_none());
    ok(&mut session, &format!("{TINY_MODEL}measure energy\nthermo = scan T at [1, 2] K, sweeps = 40, equilibrate = 10"));
    let text = session.inspect("table thermo", 8).unwrap();
    assert!(text.contains("2 rows"), "{text}");
    assert!(text.contains("energy [K] ± error"), "{text}");
    assert!(text.contains("seed 7"), "{text}");
    assert!(text.contains("J_eff = 1.8 K"), "{text}");
    let text = session.inspect("plot thermo.energy against T", 14).unwrap();
    assert!(
        text.starts_with("thermo.energy [K]: 2 values with error bars"),
        "{text}"
    );
}
