// Shared helpers for the integration tests (included with `mod common;`).
#![allow(dead_code)]

use icefield_lang::{CellError, Interrupt, Output, Rendering, Session};

/// What a cell produced.
#[derive(Default)]
pub struct Collected {
    pub streams: Vec<String>,
    pub progress: usize,
    pub displays: Vec<Rendering>,
}

pub fn run(session: &mut Session, code: &str) -> (Collected, Result<(), CellError>) {
    let interrupt = Interrupt::new();
    run_with(session, code, &interrupt)
}

pub fn run_with(
    session: &mut Session,
    code: &str,
    interrupt: &Interrupt,
) -> (Collected, Result<(), CellError>) {
    let mut collected = Collected::default();
    let result = session.execute(code, interrupt, &mut |output| match output {
        Output::Stream { text } => collected.streams.push(text),
        Output::Progress(_) => collected.progress += 1,
        Output::Display(rendering) => collected.displays.push(rendering),
    });
    (collected, result)
}

/// Runs a cell that must succeed.
pub fn ok(session: &mut Session, code: &str) -> Collected {
    let (collected, result) = run(session, code);
    if let Err(error) = result {
        panic!("cell failed:\n{}", error.traceback_lines().join("\n"));
    }
    collected
}

/// Runs a cell that must fail; returns the error.
pub fn fails(session: &mut Session, code: &str) -> CellError {
    match run(session, code).1 {
        Ok(()) => panic!("cell should have failed:\n{code}"),
        Err(error) => error,
    }
}

/// A tiny model: L = 1 (16 spins), fast to scan.
pub const TINY_MODEL: &str = "lattice pyrochlore L = 1\ncouplings nearest J_eff = 1.8 K\nseed 7\n";
