//! # icefield-lang — the icefield language
//!
//! A small declarative language for spin-ice simulations that reads like the methods
//! section of a paper:
//!
//! ```text
//! lattice pyrochlore L = 4
//! couplings nearest J_eff = 1.8 K
//! seed 20261201
//! measure energy, specific_heat, monopole_density
//! thermo = scan T from 0.3 K to 8 K in 30 steps, sweeps = 4000, equilibrate = 1000, spacing = log
//! plot thermo.specific_heat against T, xscale = log
//! ```
//!
//! Data flows one way: source → [`syntax`] (pest grammar, every error of the cell) →
//! [`ast`] → [`check`] (names, units, ranges) → [`plan`] (typed stdlib calls) → [`run`]
//! (stdlib, workspace) → [`display`]. The [`Session`] keeps the [`workspace`] of named
//! values and the rhai functions ([`script`]) across cells. The language reference is
//! `lang/REFERENCE.md`.

pub mod ast;
pub mod check;
pub mod commands;
pub mod complete;
pub mod diagnostic;
pub mod display;
pub mod grammar;
pub mod help;
pub mod measures;
pub mod plan;
pub mod run;
pub mod script;
pub mod syntax;
pub mod units;
pub mod workspace;

pub use complete::{is_complete, Completeness, Completions};
pub use diagnostic::{CellError, Diagnostic};
pub use display::Rendering;
pub use icefield_stdlib::control::{Interrupt, Progress};
pub use workspace::Workspace;

use diagnostic::{ErrorKind, Problem};

pub const LANGUAGE_NAME: &str = "icefield";
/// Scripts are NAME.ifld.
pub const FILE_EXTENSION: &str = "ifld";

/// What a running cell produces, in order.
#[derive(Clone, Debug)]
pub enum Output {
    /// Plain text for stdout.
    Stream { text: String },
    /// Long-run progress (a few updates per second at most).
    Progress(Progress),
    /// A value shown during the cell (table, figure).
    Display(Rendering),
}

/// The workspace of named values and the rhai engine; persists across cells.
pub struct Session {
    workspace: Workspace,
    script: script::Script,
    cells: u64,
}

impl Default for Session {
    fn default() -> Self {
        Self::new()
    }
}

impl Session {
    pub fn new() -> Self {
        Session {
            workspace: Workspace::default(),
            script: script::Script::new(),
            cells: 0,
        }
    }

    /// Parse, check, compile and run one cell. Outputs are emitted as they are produced.
    /// Returns Err with all diagnostics if the cell does not parse or check (nothing runs
    /// then), or a runtime error. On error, the workspace keeps everything committed
    /// before it.
    pub fn execute(
        &mut self,
        code: &str,
        interrupt: &Interrupt,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        self.cells += 1;
        self.script.set_interrupt(interrupt);
        let steps = self.prepare(code)?;
        let mut runner = run::Runner {
            workspace: &mut self.workspace,
            script: &mut self.script,
            source: code,
            cell: self.cells,
            interrupt,
        };
        runner.run(steps, emit)
    }

    /// Parse, check and plan a cell without running it.
    pub fn prepare(&self, code: &str) -> Result<Vec<plan::Step>, CellError> {
        // Syntax and check problems are reported together, in source order; statements
        // that did not parse leave hints so the checker adds no follow-up errors.
        let (program, mut problems) = syntax::parse(code);
        let (checked, check_problems) = check::check(&program, &self.workspace, &self.script);
        problems.extend(check_problems);
        if !problems.is_empty() {
            problems.sort_by_key(|p| p.span.start);
            return Err(CellError::from_problems(code, &problems));
        }
        plan::compile(&checked, &self.workspace.model)
            .map_err(|problems| CellError::from_problems(code, &problems))
    }

    /// Every problem of a cell (syntax, then names/units/ranges) without running it.
    pub fn diagnose(&self, code: &str) -> Vec<Diagnostic> {
        match self.prepare(code) {
            Ok(_) => Vec::new(),
            Err(error) => error.diagnostics,
        }
    }

    /// Completions at `cursor_chars` (a position in Unicode code points).
    pub fn complete(&self, code: &str, cursor_chars: usize) -> Completions {
        let functions: Vec<String> = self
            .script
            .functions()
            .into_iter()
            .map(|(n, _)| n)
            .collect();
        complete::complete(&self.workspace, &functions, code, cursor_chars)
    }

    /// Plain-text help for the keyword, measure, option, unit or workspace value at the
    /// cursor (a position in Unicode code points).
    pub fn inspect(&self, code: &str, cursor_chars: usize) -> Option<String> {
        let chars: Vec<char> = code.chars().collect();
        let (start, end) = complete::word_around(&chars, cursor_chars)?;
        let word: String = chars[start..end].iter().collect();
        if let Some((table, column)) = complete::dotted(&chars, start, end) {
            if let Some(text) = help::column_help(&self.workspace, &table, &column) {
                return Some(text);
            }
        }
        if let Some(text) = help::table_help(&self.workspace, &word) {
            return Some(text);
        }
        if let Some((name, arity)) = self
            .script
            .functions()
            .into_iter()
            .find(|(n, _)| *n == word)
        {
            return Some(format!(
                "{name}: rhai function of {arity} argument(s), defined in a `rhai` block"
            ));
        }
        help::word_help(&word)
    }

    /// Names of the workspace values (tables and figures).
    pub fn names(&self) -> Vec<String> {
        self.workspace.names()
    }

    /// The workspace (model declaration, tables, figures).
    pub fn workspace(&self) -> &Workspace {
        &self.workspace
    }

    /// The workspace, to change: for tools and tests that put values in directly.
    pub fn workspace_mut(&mut self) -> &mut Workspace {
        &mut self.workspace
    }
}

/// Renders problems of a cell as a `CellError` (used by tools that check scripts).
pub fn render_problems(code: &str, problems: &[Problem]) -> CellError {
    CellError::from_problems(code, problems)
}

/// The error kind names the kernel may see in `CellError::kind`.
pub fn error_kinds() -> Vec<&'static str> {
    [
        ErrorKind::Syntax,
        ErrorKind::Name,
        ErrorKind::Unit,
        ErrorKind::Value,
        ErrorKind::NotImplemented,
        ErrorKind::Runtime,
        ErrorKind::Script,
        ErrorKind::Interrupted,
    ]
    .iter()
    .map(|k| k.ename())
    .collect()
}
