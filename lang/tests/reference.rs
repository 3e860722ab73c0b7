//! Keeps REFERENCE.md honest: every statement in its code examples either checks in a
//! session that holds the tables the examples name, or is refused as not implemented —
//! never a syntax or name error.

mod common;
use common::*;
use icefield_lang::syntax::split;
use icefield_lang::Session;

fn example_blocks(markdown: &str) -> Vec<String> {
    let mut blocks = Vec::new();
    let mut current: Option<String> = None;
    for line in markdown.lines() {
        if line.starts_with("```") {
            match current.take() {
                Some(block) => blocks.push(block),
                None if line.trim() == "```text" => current = Some(String::new()),
                None => current = Some("SKIP".to_string()),
            }
            continue;
        }
        if let Some(block) = current.as_mut() {
            block.push_str(line);
            block.push('\n');
        }
    }
    blocks
        .into_iter()
        .filter(|b| {
            !b.starts_with("SKIP") && !b.starts_with("error:") && !b.contains("statement  =")
        })
        .collect()
}

/// The tables the examples of §9 name: a time series `noise` (t [s], M [μ]), a spectrum
/// `spec`, an autocorrelation `acf` and relaxation times `taus` (only their columns matter:
/// the examples are checked, not run).
fn analysis_tables(session: &mut Session) {
    use icefield_lang::workspace::{Column, Table, Value};
    let tables: [(&str, [(&str, &str); 2]); 4] = [
        ("noise", [("t", "s"), ("M", "μ")]),
        ("spec", [("f", "Hz"), ("psd", "μ²/Hz")]),
        ("acf", [("lag", "s"), ("C", "")]),
        ("taus", [("T", "K"), ("tau", "s")]),
    ];
    for (name, columns) in tables {
        let columns = columns
            .iter()
            .map(|(column, unit)| Column {
                name: column.to_string(),
                unit: unit.to_string(),
                values: vec![1.0, 2.0, 3.0],
                errors: None,
                derived_from: None,
            })
            .collect();
        session.workspace_mut().insert(
            name,
            Value::Table(Table {
                name: name.to_string(),
                columns,
                provenance: None,
            }),
        );
    }
}

#[test]
fn reference_examples_check_or_are_marked_planned() {
    let reference =
        std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/REFERENCE.md")).unwrap();
    let blocks = example_blocks(&reference);
    assert!(blocks.len() >= 15, "{}", blocks.len());
    let mut session = Session::new();
    ok(
        &mut session,
        &format!("{TINY_MODEL}thermo = scan T at [1, 2] K, sweeps = 40, equilibrate = 10\ncool = scan T at [1, 2] K, sweeps = 40, equilibrate = 10"),
    );
    analysis_tables(&mut session);
    // A dynamics rule, as a `dynamics` statement declares it, for the commands that follow
    // one (each example statement is checked on its own).
    session.workspace_mut().model.dynamics = Some(icefield_lang::workspace::DynamicsDecl {
        acceptance: icefield_stdlib::dynamics::AcceptanceRule::Metropolis,
        attempt_times: icefield_stdlib::gating::AttemptTimes::uniform(1e-6).unwrap(),
        rates_description: "uniform, τ0 = 1 µs".into(),
        execution: icefield_lang::workspace::ExecutionChoice::Auto,
        transverse: icefield_lang::workspace::TransverseSource::Neighbours,
        rate_law: None,
    });
    let mut checked = 0;
    for block in &blocks {
        let parts = split(block);
        for piece in parts.pieces {
            let statement = &block[piece.start..piece.end];
            if statement.trim_start().starts_with("rhai")
                || statement.trim_start().starts_with("dynamics")
            {
                // Run rhai blocks so the functions they define exist for later examples,
                // and dynamics rules so the runs of §5.2 have one (neither simulates).
                ok(&mut session, statement);
                checked += 1;
                continue;
            }
            match session.prepare(statement) {
                Ok(_) => checked += 1,
                Err(error) => {
                    for d in &error.diagnostics {
                        assert_eq!(
                            error.kind, "NotImplementedError",
                            "REFERENCE.md example fails:\n{statement}\n{}",
                            d.rendered
                        );
                    }
                }
            }
        }
    }
    assert!(checked >= 25, "{checked}");
}
