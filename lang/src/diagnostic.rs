//! Diagnostics: byte spans inside a cell turned into 1-based line/column positions
//! counted in Unicode code points, rendered with the offending source line and a caret
//! underline, as a physicist reading a notebook traceback expects to see them.

use serde::Serialize;

use crate::ast::Span;

/// What went wrong, in the short ename-like words a Jupyter front end shows.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
pub enum ErrorKind {
    /// The text does not follow the grammar (or names an unknown statement).
    Syntax,
    /// An unknown name: measure, workspace value, column, option, lattice, function.
    Name,
    /// A missing unit, an unknown unit, or a unit of the wrong dimension.
    Unit,
    /// A value outside its allowed range (L = 0, negative temperature, ...).
    Value,
    /// A statement of the designed language that this version does not run yet.
    NotImplemented,
    /// A failure while running (stdlib refused, I/O failed, ...).
    Runtime,
    /// A rhai block or derived-column expression failed.
    Script,
    /// The user interrupted a long run.
    Interrupted,
}

impl ErrorKind {
    /// The `ename` shown by the kernel.
    pub fn ename(self) -> &'static str {
        match self {
            ErrorKind::Syntax => "SyntaxError",
            ErrorKind::Name => "NameError",
            ErrorKind::Unit => "UnitError",
            ErrorKind::Value => "ValueError",
            ErrorKind::NotImplemented => "NotImplementedError",
            ErrorKind::Runtime => "RuntimeError",
            ErrorKind::Script => "ScriptError",
            ErrorKind::Interrupted => "Interrupted",
        }
    }
}

/// A problem found in a cell, still in byte offsets (converted when rendered).
#[derive(Clone, Debug, PartialEq)]
pub struct Problem {
    pub kind: ErrorKind,
    pub message: String,
    pub span: Span,
    /// Shown after the caret, e.g. "did you mean `specific_heat`?".
    pub help: Option<String>,
}

impl Problem {
    pub fn new(kind: ErrorKind, span: Span, message: impl Into<String>) -> Self {
        Problem {
            kind,
            message: message.into(),
            span,
            help: None,
        }
    }
    pub fn with_help(mut self, help: impl Into<String>) -> Self {
        self.help = Some(help.into());
        self
    }
    pub fn with_help_opt(mut self, help: Option<String>) -> Self {
        self.help = help;
        self
    }
}

/// A rendered diagnostic (public contract type).
#[derive(Clone, Debug, Serialize)]
pub struct Diagnostic {
    pub message: String,
    /// 1-based line in the cell.
    pub line: usize,
    /// 1-based column, counted in Unicode code points.
    pub column: usize,
    pub help: Option<String>,
    /// "error: ...", the `--> cell:L:C` pointer, the source line and the caret underline.
    pub rendered: String,
}

/// The error returned by `Session::execute` (public contract type).
#[derive(Clone, Debug, Serialize)]
pub struct CellError {
    /// "SyntaxError", "NameError", "UnitError", "ValueError", "NotImplementedError",
    /// "RuntimeError", "ScriptError" or "Interrupted".
    pub kind: String,
    /// The first diagnostic's message, one line.
    pub message: String,
    pub diagnostics: Vec<Diagnostic>,
}

impl CellError {
    /// Human-readable lines for a Jupyter traceback: every rendered diagnostic, separated
    /// by an empty line.
    pub fn traceback_lines(&self) -> Vec<String> {
        let mut lines = Vec::new();
        if self.diagnostics.is_empty() {
            lines.push(format!("{}: {}", self.kind, self.message));
        }
        for (index, diagnostic) in self.diagnostics.iter().enumerate() {
            if index > 0 {
                lines.push(String::new());
            }
            lines.extend(diagnostic.rendered.lines().map(str::to_string));
        }
        lines
    }

    /// An error with no position in the cell (e.g. a failure inside stdlib).
    pub fn without_position(kind: ErrorKind, message: impl Into<String>) -> Self {
        let message = message.into();
        CellError {
            kind: kind.ename().to_string(),
            message: message.clone(),
            diagnostics: vec![Diagnostic {
                message: message.clone(),
                line: 0,
                column: 0,
                help: None,
                rendered: format!("error: {message}"),
            }],
        }
    }

    /// Builds the error for a non-empty list of problems in `source`.
    pub fn from_problems(source: &str, problems: &[Problem]) -> Self {
        let map = SourceMap::new(source);
        let diagnostics: Vec<Diagnostic> = problems.iter().map(|p| map.render(p)).collect();
        let kind = problems
            .first()
            .map(|p| p.kind.ename())
            .unwrap_or("RuntimeError");
        CellError {
            kind: kind.to_string(),
            message: problems
                .first()
                .map(|p| p.message.clone())
                .unwrap_or_default(),
            diagnostics,
        }
    }
}

/// Line starts of a cell, to turn byte offsets into (line, column) in code points.
pub struct SourceMap<'a> {
    source: &'a str,
    line_starts: Vec<usize>,
}

impl<'a> SourceMap<'a> {
    pub fn new(source: &'a str) -> Self {
        let mut line_starts = vec![0];
        for (index, byte) in source.bytes().enumerate() {
            if byte == b'\n' {
                line_starts.push(index + 1);
            }
        }
        SourceMap {
            source,
            line_starts,
        }
    }

    /// Clamps a byte offset into the source and onto a char boundary.
    fn clamp(&self, offset: usize) -> usize {
        let mut offset = offset.min(self.source.len());
        while offset > 0 && !self.source.is_char_boundary(offset) {
            offset -= 1;
        }
        offset
    }

    /// 1-based line and code-point column of a byte offset.
    pub fn line_column(&self, offset: usize) -> (usize, usize) {
        let offset = self.clamp(offset);
        let line_index = match self.line_starts.binary_search(&offset) {
            Ok(index) => index,
            Err(index) => index - 1,
        };
        let start = self.line_starts[line_index];
        let column = self.source[start..offset].chars().count() + 1;
        (line_index + 1, column)
    }

    /// The text of a 1-based line, without its newline.
    pub fn line_text(&self, line: usize) -> &'a str {
        let start = self.line_starts.get(line - 1).copied().unwrap_or(0);
        let end = self
            .line_starts
            .get(line)
            .map(|next| next - 1)
            .unwrap_or(self.source.len());
        self.source[start..end.max(start)].trim_end_matches('\r')
    }

    pub fn render(&self, problem: &Problem) -> Diagnostic {
        let (line, column) = self.line_column(problem.span.start);
        let text = self.line_text(line);
        // The underline stays on the first line of the span, at least one caret wide.
        let (end_line, end_column) = self.line_column(problem.span.end.max(problem.span.start));
        let line_chars = text.chars().count();
        let width = if end_line == line {
            end_column.saturating_sub(column).max(1)
        } else {
            (line_chars + 1).saturating_sub(column).max(1)
        };
        let number = line.to_string();
        let gutter = " ".repeat(number.len());
        // Keep tabs under tabs so the caret lines up in any tab width.
        let lead: String = text
            .chars()
            .take(column - 1)
            .map(|c| if c == '\t' { '\t' } else { ' ' })
            .collect();
        let mut rendered = String::new();
        rendered.push_str(&format!("error: {}\n", problem.message));
        rendered.push_str(&format!("{gutter} --> cell:{line}:{column}\n"));
        rendered.push_str(&format!("{gutter}  |\n"));
        rendered.push_str(&format!(" {number} | {text}\n"));
        rendered.push_str(&format!("{gutter}  | {lead}{}", "^".repeat(width)));
        if let Some(help) = &problem.help {
            rendered.push(' ');
            rendered.push_str(help);
        }
        Diagnostic {
            message: problem.message.clone(),
            line,
            column,
            help: problem.help.clone(),
            rendered,
        }
    }
}

/// The closest candidate to `word` for a "did you mean" hint, if any is close enough.
pub fn suggest<'c>(word: &str, candidates: impl IntoIterator<Item = &'c str>) -> Option<String> {
    let lower = word.to_lowercase();
    let mut best: Option<(f64, &str)> = None;
    for candidate in candidates {
        if candidate == word {
            continue;
        }
        let score = if candidate.to_lowercase() == lower {
            1.0
        } else {
            let distance = strsim::damerau_levenshtein(&lower, &candidate.to_lowercase());
            let longest = lower.chars().count().max(candidate.chars().count()).max(1);
            // Accept about one edit in three characters (and always one edit).
            if distance > 1 && distance * 3 > longest {
                continue;
            }
            1.0 - distance as f64 / longest as f64
                + 0.01 * strsim::jaro_winkler(&lower, &candidate.to_lowercase())
        };
        if best.is_none_or(|(s, _)| score > s) {
            best = Some((score, candidate));
        }
    }
    best.map(|(_, c)| c.to_string())
}

/// "did you mean `x`?" text for a suggestion.
pub fn did_you_mean<'c>(
    word: &str,
    candidates: impl IntoIterator<Item = &'c str>,
) -> Option<String> {
    suggest(word, candidates).map(|s| format!("did you mean `{s}`?"))
}
