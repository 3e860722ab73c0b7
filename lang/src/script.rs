//! The rhai bridge: user functions that persist across cells, top-level rhai code run with
//! the workspace tables visible, and derived columns evaluated row by row.
//!
//! Limits (operations, call depth, sizes) keep a runaway script from hanging the kernel,
//! and the progress hook stops a script as soon as the user interrupts.

use std::sync::{Arc, Mutex};

use rhai::{Dynamic, Engine, EvalAltResult, Map, Position, Scope, AST};

use crate::ast::Span;
use crate::diagnostic::{ErrorKind, Problem};
use crate::workspace::Table;
use icefield_stdlib::control::Interrupt;

/// Operations one rhai run may take (about a minute of work): guards against runaway loops.
pub const MAX_OPERATIONS: u64 = 500_000_000;
/// Nesting of function calls (recursion depth).
pub const MAX_CALL_LEVELS: usize = 128;

/// Built-in rhai functions a derived column may call (rhai's standard math package).
pub const BUILTIN_FUNCTIONS: &[&str] = &[
    "sqrt",
    "exp",
    "ln",
    "log",
    "abs",
    "floor",
    "ceiling",
    "round",
    "int",
    "fraction",
    "sin",
    "cos",
    "tan",
    "asin",
    "acos",
    "atan",
    "sinh",
    "cosh",
    "tanh",
    "asinh",
    "acosh",
    "atanh",
    "hypot",
    "sign",
    "min",
    "max",
    "to_float",
    "to_int",
    "is_nan",
    "is_finite",
    "is_infinite",
    "PI",
    "E",
];

/// Where an offending rhai position is, relative to the text rhai was given.
#[derive(Clone, Debug)]
pub struct ScriptFailure {
    pub message: String,
    /// Byte offset into the rhai text, if rhai reported a position.
    pub offset: Option<usize>,
    pub interrupted: bool,
}

impl ScriptFailure {
    /// The problem in cell coordinates, given where the rhai text starts in the cell.
    pub fn into_problem(self, text_span: Span, text: &str) -> Problem {
        let span = match self.offset {
            Some(offset) => {
                let start = text_span.start + offset;
                let end = text[offset.min(text.len())..]
                    .chars()
                    .take_while(|c| c.is_alphanumeric() || *c == '_')
                    .map(char::len_utf8)
                    .sum::<usize>()
                    .max(1);
                Span::new(start, (start + end).min(text_span.end.max(start + 1)))
            }
            None => text_span,
        };
        let kind = if self.interrupted {
            ErrorKind::Interrupted
        } else {
            ErrorKind::Script
        };
        Problem::new(kind, span, self.message)
    }
}

/// Byte offset of a rhai (line, column) position in `text` (both 1-based, column in chars).
fn offset_of(text: &str, position: Position) -> Option<usize> {
    let line = position.line()?;
    let column = position.position().unwrap_or(1);
    let mut offset = 0usize;
    for (index, line_text) in text.split_inclusive('\n').enumerate() {
        if index + 1 == line {
            let within: usize = line_text
                .chars()
                .take(column.saturating_sub(1))
                .map(char::len_utf8)
                .sum();
            return Some(offset + within);
        }
        offset += line_text.len();
    }
    Some(text.len())
}

fn failure_from_eval(error: &EvalAltResult, text: &str) -> ScriptFailure {
    let interrupted = matches!(error, EvalAltResult::ErrorTerminated(..));
    let message = match error {
        EvalAltResult::ErrorTerminated(..) => "interrupted while running rhai code".to_string(),
        EvalAltResult::ErrorTooManyOperations(..) => format!(
            "rhai code ran more than {MAX_OPERATIONS} operations and was stopped \
             (the limit guards against endless loops)"
        ),
        EvalAltResult::ErrorStackOverflow(..) => format!(
            "rhai function calls nested deeper than {MAX_CALL_LEVELS} levels (endless recursion?)"
        ),
        other => strip_position(&other.to_string()),
    };
    ScriptFailure {
        message: format!("rhai: {message}"),
        offset: offset_of(text, error.position()),
        interrupted,
    }
}

/// rhai appends " (line L, position P)" to messages; the diagnostic shows that itself.
fn strip_position(message: &str) -> String {
    match message.rfind(" (line ") {
        Some(index) if message.ends_with(')') => message[..index].to_string(),
        _ => message.to_string(),
    }
}

/// Converts a table into a rhai object map of float arrays: `thermo.T`, `thermo.energy`.
pub fn table_to_map(table: &Table) -> Map {
    let mut map = Map::new();
    for column in &table.columns {
        let array: rhai::Array = column
            .values
            .iter()
            .map(|v| Dynamic::from_float(*v))
            .collect();
        map.insert(column.name.as_str().into(), Dynamic::from_array(array));
    }
    map
}

/// A rhai value as a number, if it is one.
pub fn as_number(value: &Dynamic) -> Option<f64> {
    if let Ok(f) = value.as_float() {
        Some(f)
    } else if let Ok(i) = value.as_int() {
        Some(i as f64)
    } else {
        None
    }
}

pub struct Script {
    engine: Engine,
    /// Every function defined so far, in any cell.
    functions: AST,
    /// Top-level variables of rhai blocks, kept across cells.
    scope: Scope<'static>,
    printed: Arc<Mutex<Vec<String>>>,
    interrupt: Arc<Mutex<Option<Interrupt>>>,
}

impl Default for Script {
    fn default() -> Self {
        Self::new()
    }
}

impl Script {
    pub fn new() -> Self {
        let mut engine = Engine::new();
        engine.set_max_operations(MAX_OPERATIONS);
        engine.set_max_call_levels(MAX_CALL_LEVELS);
        engine.set_max_expr_depths(256, 256);
        engine.set_max_string_size(16 * 1024 * 1024);
        engine.set_max_array_size(10_000_000);
        engine.set_max_map_size(1_000_000);
        let printed = Arc::new(Mutex::new(Vec::new()));
        let sink = printed.clone();
        engine.on_print(move |text| keep_printed(&sink, text));
        let sink = printed.clone();
        engine.on_debug(move |text, _, _| keep_printed(&sink, text));
        let interrupt: Arc<Mutex<Option<Interrupt>>> = Arc::new(Mutex::new(None));
        let flag = interrupt.clone();
        engine.on_progress(move |operations| {
            // Looking at the flag every 4096 operations costs nothing noticeable.
            if operations % 4096 != 0 {
                return None;
            }
            let requested = flag
                .lock()
                .ok()
                .and_then(|guard| guard.as_ref().map(Interrupt::is_requested))
                .unwrap_or(false);
            if requested {
                Some(Dynamic::from("interrupted"))
            } else {
                None
            }
        });
        Script {
            engine,
            functions: AST::empty(),
            scope: Scope::new(),
            printed,
            interrupt,
        }
    }

    /// The interrupt flag scripts obey from now on.
    pub fn set_interrupt(&self, interrupt: &Interrupt) {
        if let Ok(mut guard) = self.interrupt.lock() {
            *guard = Some(interrupt.clone());
        }
    }

    /// Lines printed by scripts since the last call.
    pub fn take_printed(&self) -> Vec<String> {
        self.printed
            .lock()
            .map(|mut lines| std::mem::take(&mut *lines))
            .unwrap_or_default()
    }

    /// Compiles a block without running it: the functions it defines (name, arity) and
    /// the top-level variables it declares, or where it fails to parse.
    pub fn compile_block(&self, body: &str) -> Result<BlockInfo, ScriptFailure> {
        match self.engine.compile(body) {
            Ok(ast) => Ok(BlockInfo {
                functions: ast
                    .iter_functions()
                    .map(|f| (f.name.to_string(), f.params.len()))
                    .collect(),
                variables: declared_variables(body),
            }),
            Err(error) => Err(parse_failure(error, body)),
        }
    }

    /// Functions defined so far (name, arity).
    pub fn functions(&self) -> Vec<(String, usize)> {
        self.functions
            .iter_functions()
            .map(|f| (f.name.to_string(), f.params.len()))
            .collect()
    }

    /// Top-level rhai variables kept across cells.
    pub fn variables(&self) -> Vec<String> {
        self.scope
            .iter()
            .map(|(name, _, _)| name.to_string())
            .collect()
    }

    /// Runs a block: its functions join the session's, its top-level statements run with
    /// every workspace table visible as a map of arrays.
    pub fn run_block(&mut self, body: &str, tables: &[&Table]) -> Result<(), ScriptFailure> {
        let ast = match self.engine.compile(body) {
            Ok(ast) => ast,
            Err(error) => return Err(parse_failure(error, body)),
        };
        for table in tables {
            self.scope
                .set_value(table.name.clone(), Dynamic::from_map(table_to_map(table)));
        }
        // New definitions replace old ones of the same name and arity.
        let merged = self.functions.merge(&ast);
        let result = self.engine.run_ast_with_scope(&mut self.scope, &merged);
        // Keep the functions even if the statements failed: they compiled.
        self.functions = self.functions.merge(&ast.clone_functions_only());
        result.map_err(|error| failure_from_eval(&error, body))
    }

    /// Evaluates `expression` once per row, with the row's columns bound by name.
    /// `inputs`: (name, values) of the columns the expression uses.
    pub fn evaluate_rows(
        &self,
        expression: &str,
        inputs: &[(String, Vec<f64>)],
        rows: usize,
    ) -> Result<Vec<f64>, ScriptFailure> {
        let compiled = match self.engine.compile_expression(expression) {
            Ok(ast) => ast,
            Err(error) => return Err(parse_failure(error, expression)),
        };
        let merged = self.functions.merge(&compiled);
        let mut scope = self.scope.clone();
        for (name, _) in inputs {
            scope.push(name.clone(), 0.0_f64);
        }
        let mut out = Vec::with_capacity(rows);
        for row in 0..rows {
            for (name, values) in inputs {
                scope.set_value(name.clone(), values.get(row).copied().unwrap_or(f64::NAN));
            }
            let value = self
                .engine
                .eval_ast_with_scope::<Dynamic>(&mut scope, &merged)
                .map_err(|error| failure_from_eval(&error, expression))?;
            match as_number(&value) {
                Some(v) => out.push(v),
                None => {
                    return Err(ScriptFailure {
                        message: format!(
                            "the expression gave a {} in row {}, not a number",
                            value.type_name(),
                            row + 1
                        ),
                        offset: None,
                        interrupted: false,
                    })
                }
            }
        }
        Ok(out)
    }
}

/// Lines of script output one cell keeps (a print loop must not exhaust memory).
pub const MAX_PRINTED_LINES: usize = 10_000;

fn keep_printed(sink: &Mutex<Vec<String>>, text: &str) {
    if let Ok(mut lines) = sink.lock() {
        match lines.len() {
            n if n < MAX_PRINTED_LINES => lines.push(text.to_string()),
            n if n == MAX_PRINTED_LINES => lines.push(format!(
                "... (further output dropped after {MAX_PRINTED_LINES} lines)"
            )),
            _ => {}
        }
    }
}

/// What a compiled rhai block defines.
#[derive(Clone, Debug, Default)]
pub struct BlockInfo {
    pub functions: Vec<(String, usize)>,
    pub variables: Vec<String>,
}

fn parse_failure(error: rhai::ParseError, text: &str) -> ScriptFailure {
    ScriptFailure {
        message: format!("rhai: {}", strip_position(&error.0.to_string())),
        offset: offset_of(text, error.1),
        interrupted: false,
    }
}

/// Names declared by `let NAME` / `const NAME` at any depth (a generous over-estimate
/// used only so the checker accepts them in derived-column expressions).
fn declared_variables(body: &str) -> Vec<String> {
    let mut names = Vec::new();
    let words: Vec<&str> = body
        .split(|c: char| !(c.is_alphanumeric() || c == '_'))
        .filter(|w| !w.is_empty())
        .collect();
    for pair in words.windows(2) {
        if pair[0] == "let" || pair[0] == "const" {
            names.push(pair[1].to_string());
        }
    }
    names
}
