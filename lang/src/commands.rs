//! The command statements: `[NAME =] KEYWORD PHRASE... [, options]`.
//!
//! A command reads like a sentence of a methods section (`noise = evolve for 10 ms at
//! 0.4 K, sample_every = 1 µs`). The grammar (`kw_command`, `command_stmt`) fixes only the
//! shape: a keyword, a phrase of values and connecting words, then options. Each family of
//! commands has one module in `check/` that reads the phrase and resolves it into a typed
//! spec, and one in `run/` that calls stdlib. This table says which keywords run now and
//! which family owns each; a keyword of the grammar that is not listed here is refused as
//! planned (see `syntax::PLANNED_KEYWORDS`).

/// The families of commands, one checker module and one runner module each.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Family {
    /// Physical-time kinetics: the dynamics rule and the protocols that follow it
    /// (`check/dynamics.rs`, `run/dynamics.rs`).
    Dynamics,
    /// Monopole tracking and reachable sites (`check/monopoles.rs`, `run/monopoles.rs`).
    Monopoles,
    /// Time-series analysis and fits (`check/analysis.rs`, `run/analysis.rs`).
    Analysis,
    /// Measured data: import, overlay, calibration (`check/data.rs`, `run/data.rs`).
    Data,
    /// Percolation toolkit (`check/percolation.rs`, `run/percolation.rs`).
    Percolation,
    /// Equilibrium runs beyond `scan`: annealing, tempering, structure factor
    /// (`check/equilibrium.rs`, `run/equilibrium.rs`).
    Equilibrium,
}

/// Runnable command keywords and their family.
pub const COMMANDS: &[(&str, Family)] = &[
    ("spectrum", Family::Analysis),
    ("autocorrelation", Family::Analysis),
    ("susceptibility", Family::Analysis),
    ("fit", Family::Analysis),
    ("dynamics", Family::Dynamics),
    ("evolve", Family::Dynamics),
    ("quench", Family::Dynamics),
    ("step", Family::Dynamics),
    ("anneal", Family::Equilibrium),
    ("structure_factor", Family::Equilibrium),
    ("monopoles", Family::Monopoles),
    ("reachable", Family::Monopoles),
    ("cluster", Family::Monopoles),
    ("import", Family::Data),
    ("calibrate", Family::Data),
    ("percolation", Family::Percolation),
];

/// The family of a runnable command keyword.
pub fn family(keyword: &str) -> Option<Family> {
    COMMANDS
        .iter()
        .find(|(k, _)| *k == keyword)
        .map(|(_, family)| *family)
}

/// Whether `keyword` is a runnable command.
pub fn is_command(keyword: &str) -> bool {
    family(keyword).is_some()
}

/// The runnable command keywords.
pub fn keywords() -> impl Iterator<Item = &'static str> {
    COMMANDS.iter().map(|(k, _)| *k)
}
