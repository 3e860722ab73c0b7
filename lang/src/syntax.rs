//! From cell text to a syntax tree plus every syntax error.
//!
//! A cell is first cut into statements: a newline ends a statement unless a bracket or a
//! rhai block is open or the line ends with a comma; `;` also separates statements. Each
//! piece is then parsed on its own, so one bad line does not hide the errors of the others.

use pest::error::{ErrorVariant, InputLocation};
use pest::iterators::Pair;
use pest::Parser;

use crate::ast::*;
use crate::commands;
use crate::diagnostic::{did_you_mean, ErrorKind, Problem};
use crate::grammar::{describe, IcefieldParser, Rule};

/// Statement keywords this version runs.
pub const KEYWORDS: &[&str] = &[
    "lattice",
    "couplings",
    "field",
    "seed",
    "measure",
    "scan",
    "table",
    "show",
    "plot",
    "column",
    "rhai",
    "export",
];

/// Statement keywords of the designed language that later versions run (REFERENCE.md),
/// with the section that describes them.
pub const PLANNED_KEYWORDS: &[(&str, &str)] = &[("equilibrate", "Runs"), ("map", "Plots")];

/// One statement's place in the cell.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Piece {
    pub start: usize,
    pub end: usize,
}

/// The cut of a cell into statements, and what was left open at its end.
#[derive(Clone, Debug, Default)]
pub struct Split {
    pub pieces: Vec<Piece>,
    /// Brackets still open at the end of the cell: (character, byte offset).
    pub open: Vec<(char, usize)>,
    /// Closing brackets with no opener: (character, byte offset).
    pub unmatched: Vec<(char, usize)>,
    /// The cell ends inside a string or block comment.
    pub open_string: bool,
    /// The last significant character is a comma (the statement continues).
    pub trailing_comma: bool,
    /// Where brackets first nest deeper than the parser allows (one offset per cell part).
    pub too_deep: Vec<usize>,
}

/// Deepest bracket nesting the statement grammar accepts (guards the recursive parser).
pub const MAX_BRACKET_DEPTH: usize = 32;
/// Deepest brace nesting inside a rhai block.
pub const MAX_RHAI_DEPTH: usize = 128;
/// Most operators in one derived-column expression.
pub const MAX_EXPRESSION_TERMS: usize = 256;

fn matching(open: char) -> char {
    match open {
        '(' => ')',
        '[' => ']',
        _ => '}',
    }
}

/// Cuts a cell into statements (see the module comment).
pub fn split(source: &str) -> Split {
    let bytes = source.as_bytes();
    let mut split = Split::default();
    let mut stack: Vec<(char, usize)> = Vec::new();
    let mut start = 0usize;
    let mut has_content = false;
    let mut last_significant: Option<char> = None;
    // Depth of braces inside a rhai block (0: not inside one).
    let mut rhai_depth = 0usize;
    let mut i = 0usize;
    let finish = |split: &mut Split, start: usize, end: usize, has_content: bool| {
        if has_content {
            split.pieces.push(Piece { start, end });
        }
    };
    while i < bytes.len() {
        let c = bytes[i];
        if rhai_depth > 0 {
            match c {
                b'"' | b'`' => {
                    let quote = c;
                    i += 1;
                    while i < bytes.len() && bytes[i] != quote {
                        if bytes[i] == b'\\' && quote == b'"' {
                            i += 1;
                        }
                        i += 1;
                    }
                    if i >= bytes.len() {
                        split.open_string = true;
                    }
                }
                b'\'' => {
                    // A character literal: 'x' or '\n'; anything else is left alone.
                    if i + 2 < bytes.len() && bytes[i + 1] != b'\\' && bytes[i + 2] == b'\'' {
                        i += 2;
                    } else if i + 3 < bytes.len() && bytes[i + 1] == b'\\' && bytes[i + 3] == b'\''
                    {
                        i += 3;
                    }
                }
                b'/' if bytes.get(i + 1) == Some(&b'/') => {
                    while i < bytes.len() && bytes[i] != b'\n' {
                        i += 1;
                    }
                    continue;
                }
                b'/' if bytes.get(i + 1) == Some(&b'*') => {
                    i += 2;
                    while i < bytes.len() && !(bytes[i] == b'*' && bytes.get(i + 1) == Some(&b'/'))
                    {
                        i += 1;
                    }
                    if i >= bytes.len() {
                        split.open_string = true;
                    }
                    i += 1;
                }
                b'{' => {
                    rhai_depth += 1;
                    if rhai_depth == MAX_RHAI_DEPTH + 1 {
                        split.too_deep.push(i);
                    }
                }
                b'}' => {
                    rhai_depth -= 1;
                    if rhai_depth == 0 {
                        stack.pop();
                        last_significant = Some('}');
                    }
                }
                _ => {}
            }
            i += 1;
            continue;
        }
        match c {
            b'#' => {
                while i < bytes.len() && bytes[i] != b'\n' {
                    i += 1;
                }
                continue;
            }
            b'"' => {
                has_content = true;
                i += 1;
                while i < bytes.len() && bytes[i] != b'"' && bytes[i] != b'\n' {
                    if bytes[i] == b'\\' {
                        i += 1;
                    }
                    i += 1;
                }
                if i >= bytes.len() {
                    split.open_string = true;
                }
                last_significant = Some('"');
            }
            b'(' | b'[' | b'{' => {
                has_content = true;
                let open = c as char;
                if open == '{' && stack.is_empty() && is_rhai_head(&source[start..i]) {
                    rhai_depth = 1;
                }
                stack.push((open, i));
                if stack.len() == MAX_BRACKET_DEPTH + 1 {
                    split.too_deep.push(i);
                }
                last_significant = Some(open);
            }
            b')' | b']' | b'}' => {
                has_content = true;
                let close = c as char;
                match stack.last() {
                    Some(&(open, _)) if matching(open) == close => {
                        stack.pop();
                    }
                    _ => split.unmatched.push((close, i)),
                }
                last_significant = Some(close);
            }
            b'\n' | b';' if stack.is_empty() && (c == b';' || last_significant != Some(',')) => {
                finish(&mut split, start, i, has_content);
                start = i + 1;
                has_content = false;
                last_significant = None;
            }
            b' ' | b'\t' | b'\r' | b'\n' => {}
            _ => {
                has_content = true;
                last_significant = Some(c as char);
            }
        }
        i += 1;
    }
    finish(&mut split, start, source.len(), has_content);
    split.trailing_comma = last_significant == Some(',');
    split.open = stack;
    split
}

/// Whether the statement text before a `{` is `rhai` (comments and spaces aside).
fn is_rhai_head(text: &str) -> bool {
    let code: String = text
        .lines()
        .map(|line| line.split('#').next().unwrap_or(""))
        .collect::<Vec<_>>()
        .join(" ");
    code.trim() == "rhai"
}

/// The first word of a statement: its text and byte range (absolute, given the offset).
fn word_at(text: &str, from: usize) -> Option<(String, usize, usize)> {
    let bytes = text.as_bytes();
    let mut i = from;
    loop {
        while i < bytes.len() && (bytes[i] as char).is_ascii_whitespace() {
            i += 1;
        }
        if i < bytes.len() && bytes[i] == b'#' {
            while i < bytes.len() && bytes[i] != b'\n' {
                i += 1;
            }
            continue;
        }
        break;
    }
    let start = i;
    while i < bytes.len() && (bytes[i].is_ascii_alphanumeric() || bytes[i] == b'_') {
        i += 1;
    }
    if i == start {
        return None;
    }
    Some((text[start..i].to_string(), start, i))
}

/// Offset of the first non-space character at or after `from`.
fn skip_spaces(text: &str, from: usize) -> usize {
    let bytes = text.as_bytes();
    let mut i = from;
    while i < bytes.len() && (bytes[i] == b' ' || bytes[i] == b'\t') {
        i += 1;
    }
    i
}

fn all_statement_words() -> impl Iterator<Item = &'static str> {
    KEYWORDS
        .iter()
        .copied()
        .chain(commands::keywords())
        .chain(PLANNED_KEYWORDS.iter().map(|(k, _)| *k))
}

/// Whether `word` starts a statement this version runs.
pub fn is_statement_word(word: &str) -> bool {
    KEYWORDS.contains(&word) || commands::is_command(word)
}

/// Keywords whose result can be stored with `NAME = ...`.
fn has_result(word: &str) -> bool {
    word == "scan" || word == "plot" || commands::is_command(word)
}

/// The "planned" message for a keyword of the designed language, if it is one.
pub fn planned(word: &str) -> Option<String> {
    PLANNED_KEYWORDS
        .iter()
        .find(|(k, _)| *k == word)
        .map(|(k, section)| {
            format!(
                "`{k}` belongs to the designed language (REFERENCE.md, section \"{section}\") \
                 but this version does not run it yet"
            )
        })
}

/// Parses a cell: the statements that parsed, and a problem for every one that did not.
pub fn parse(source: &str) -> (Program, Vec<Problem>) {
    let split = split(source);
    let mut program = Program::default();
    let mut problems = Vec::new();
    for &(close, offset) in &split.unmatched {
        problems.push(Problem::new(
            ErrorKind::Syntax,
            Span::new(offset, offset + 1),
            format!("`{close}` closes nothing"),
        ));
    }
    for &(open, offset) in &split.open {
        problems.push(
            Problem::new(
                ErrorKind::Syntax,
                Span::new(offset, offset + 1),
                format!("`{open}` is never closed"),
            )
            .with_help(format!("add `{}`", matching(open))),
        );
    }
    for piece in &split.pieces {
        // A piece running into an unclosed bracket already has its error.
        let unclosed = split
            .open
            .iter()
            .any(|&(_, at)| at >= piece.start && at < piece.end);
        if unclosed {
            program.failed.push(failed_hint(source, *piece));
            continue;
        }
        if let Some(&at) = split
            .too_deep
            .iter()
            .find(|&&at| at >= piece.start && at < piece.end)
        {
            problems.push(Problem::new(
                ErrorKind::Syntax,
                Span::new(at, at + 1),
                format!("brackets nest deeper than {MAX_BRACKET_DEPTH} levels here"),
            ));
            program.failed.push(failed_hint(source, *piece));
            continue;
        }
        match parse_piece(source, *piece) {
            Ok(statement) => program.statements.push(statement),
            Err(problem) => {
                program.failed.push(failed_hint(source, *piece));
                problems.push(problem);
            }
        }
    }
    problems.sort_by_key(|p| p.span.start);
    (program, problems)
}

/// What a statement that failed to parse would have defined.
fn failed_hint(source: &str, piece: Piece) -> Failed {
    let text = &source[piece.start..piece.end];
    let first = word_at(text, 0);
    let mut keyword = first.as_ref().map(|w| w.0.clone()).unwrap_or_default();
    let mut target = None;
    if let Some((word, _, end)) = &first {
        let after = skip_spaces(text, *end);
        if text[after..].starts_with('=') && !is_statement_word(word) {
            target = Some(word.clone());
            keyword = word_at(text, after + 1).map(|w| w.0).unwrap_or_default();
        } else if word == "column" {
            target = text[*end..]
                .split('=')
                .next()
                .map(|t| t.trim().to_string())
                .filter(|t| !t.is_empty());
        }
    }
    Failed {
        start: piece.start,
        keyword,
        target,
    }
}

fn parse_piece(source: &str, piece: Piece) -> Result<Statement, Problem> {
    let text = &source[piece.start..piece.end];
    let Some((word, ws, we)) = word_at(text, 0) else {
        let at = skip_spaces(text, 0);
        let end = text[at..]
            .char_indices()
            .nth(1)
            .map(|(i, _)| at + i)
            .unwrap_or(text.len());
        return Err(Problem::new(
            ErrorKind::Syntax,
            Span::new(
                piece.start + at,
                piece.start + end.max(at + 1).min(text.len()),
            ),
            "a statement starts with a keyword such as `lattice`, `scan` or `plot`",
        ));
    };
    let word_span = Span::new(piece.start + ws, piece.start + we);
    if !is_statement_word(&word) {
        let after = skip_spaces(text, we);
        let is_assignment = text[after..].starts_with('=') && !text[after..].starts_with("==");
        if is_assignment {
            match word_at(text, after + 1) {
                Some((rhs, rs, re)) if !has_result(&rhs) => {
                    let span = Span::new(piece.start + rs, piece.start + re);
                    if let Some(message) = planned(&rhs) {
                        return Err(Problem::new(ErrorKind::NotImplemented, span, message));
                    }
                    if KEYWORDS.contains(&rhs.as_str()) {
                        return Err(Problem::new(
                            ErrorKind::Syntax,
                            span,
                            format!("`{rhs}` has no result to name; only the results of `scan`, `plot` and commands such as `evolve` can be stored with `{word} = ...`"),
                        ));
                    }
                    return Err(Problem::new(
                        ErrorKind::Syntax,
                        span,
                        format!("unknown statement `{rhs}` after `{word} =`"),
                    )
                    .with_help_opt(
                        did_you_mean(
                            &rhs,
                            ["scan", "plot"].into_iter().chain(commands::keywords()),
                        )
                        .or(Some("expected `scan`, `plot` or a command".to_string())),
                    ));
                }
                _ => {}
            }
        } else if let Some(message) = planned(&word) {
            return Err(Problem::new(ErrorKind::NotImplemented, word_span, message));
        } else {
            return Err(Problem::new(
                ErrorKind::Syntax,
                word_span,
                format!("unknown statement `{word}`"),
            )
            .with_help_opt(did_you_mean(&word, all_statement_words())));
        }
    }
    match IcefieldParser::parse(Rule::statement, text) {
        Ok(pairs) if count_rule(pairs.clone(), Rule::expr_op) > MAX_EXPRESSION_TERMS => Err(
            Problem::new(
                ErrorKind::Syntax,
                Span::new(piece.start, piece.end),
                format!(
                    "the expression has more than {MAX_EXPRESSION_TERMS} operators; define a rhai function instead"
                ),
            ),
        ),
        Ok(mut pairs) => {
            let statement = pairs
                .next()
                .and_then(|p| p.into_inner().next())
                .ok_or_else(|| {
                    Problem::new(ErrorKind::Syntax, word_span, "empty statement")
                })?;
            Ok(build_statement(statement, piece.start))
        }
        Err(error) => Err(pest_problem(text, piece.start, &error)),
    }
}

fn count_rule(pairs: pest::iterators::Pairs<Rule>, rule: Rule) -> usize {
    pairs.flatten().filter(|p| p.as_rule() == rule).count()
}

/// Turns a pest error into a problem pointing at the text found where the rule failed.
fn pest_problem(text: &str, offset: usize, error: &pest::error::Error<Rule>) -> Problem {
    let position = match error.location {
        InputLocation::Pos(p) => p,
        InputLocation::Span((s, _)) => s,
    };
    let position = position.min(text.len());
    let found_end = token_end(text, position);
    let found = if position >= text.trim_end().len() {
        "the end of the statement".to_string()
    } else {
        format!("`{}`", &text[position..found_end])
    };
    let expected = match &error.variant {
        ErrorVariant::ParsingError { positives, .. } => {
            let mut names: Vec<&str> = Vec::new();
            // `along` is possible after any quantity; naming it would only confuse.
            let shown: Vec<Rule> = if positives.len() > 1 {
                positives
                    .iter()
                    .copied()
                    .filter(|r| *r != Rule::word_along)
                    .collect()
            } else {
                positives.clone()
            };
            for rule in &shown {
                let name = describe(*rule);
                if !names.contains(&name) {
                    names.push(name);
                }
            }
            match names.len() {
                0 => "something else".to_string(),
                1 => names[0].to_string(),
                _ => {
                    let last = names.pop().unwrap_or_default();
                    format!("{} or {last}", names.join(", "))
                }
            }
        }
        ErrorVariant::CustomError { message } => message.clone(),
    };
    let span = if position >= text.len() {
        // Point just past the last character.
        let end = text.trim_end().len();
        Span::new(offset + end, offset + end + 1)
    } else {
        Span::new(offset + position, offset + found_end.max(position + 1))
    };
    Problem::new(
        ErrorKind::Syntax,
        span,
        format!("expected {expected}, found {found}"),
    )
}

/// End of the token starting at `start`: a word, a number, or one other character.
fn token_end(text: &str, start: usize) -> usize {
    let rest = &text[start..];
    let mut end = 0;
    for (i, c) in rest.char_indices() {
        let word_char = c.is_alphanumeric() || c == '_' || c == '.' || c == '\'';
        if i == 0 && !word_char {
            return start + c.len_utf8();
        }
        if !word_char {
            break;
        }
        end = i + c.len_utf8();
    }
    start + end.max(rest.chars().next().map(char::len_utf8).unwrap_or(0))
}

// --- tree building -------------------------------------------------------------------

fn span_of(pair: &Pair<Rule>, offset: usize) -> Span {
    let s = pair.as_span();
    Span::new(offset + s.start(), offset + s.end())
}

fn ident(pair: Pair<Rule>, offset: usize) -> Ident {
    Ident {
        name: pair.as_str().to_string(),
        span: span_of(&pair, offset),
    }
}

fn number(pair: Pair<Rule>, offset: usize) -> Number {
    let text = pair.as_str().to_string();
    Number {
        value: text.parse::<f64>().unwrap_or(f64::NAN),
        span: span_of(&pair, offset),
        text,
    }
}

fn quantity(pair: Pair<Rule>, offset: usize) -> Quantity {
    let span = span_of(&pair, offset);
    let mut inner = pair.into_inner();
    let number = inner.next().map(|p| number(p, offset)).unwrap_or(Number {
        value: f64::NAN,
        text: String::new(),
        span,
    });
    let unit = inner.next().map(|p| ident(p, offset));
    Quantity { number, unit, span }
}

fn value(pair: Pair<Rule>, offset: usize) -> Value {
    // `value` wraps exactly one alternative.
    let pair = if pair.as_rule() == Rule::value {
        match pair.into_inner().next() {
            Some(p) => p,
            None => {
                return Value::Text {
                    text: String::new(),
                    span: Span::default(),
                }
            }
        }
    } else {
        pair
    };
    let span = span_of(&pair, offset);
    match pair.as_rule() {
        Rule::quantity => Value::Quantity(quantity(pair, offset)),
        Rule::string => Value::Text {
            text: unescape(pair.into_inner().next().map(|p| p.as_str()).unwrap_or("")),
            span,
        },
        Rule::ident => Value::Word(ident(pair, offset)),
        Rule::dotted_ref => Value::Column(column_ref(pair, offset)),
        Rule::list => {
            let mut items = Vec::new();
            let mut unit = None;
            for p in pair.into_inner() {
                match p.as_rule() {
                    Rule::value => items.push(value(p, offset)),
                    Rule::unit => unit = Some(ident(p, offset)),
                    _ => {}
                }
            }
            Value::List { items, unit, span }
        }
        Rule::directed => {
            let mut inner = pair.into_inner();
            let magnitude = inner.next().map(|p| quantity(p, offset));
            let _along = inner.next();
            let direction = inner.next().map(|p| value(p, offset));
            match (magnitude, direction) {
                (Some(magnitude), Some(direction)) => Value::Directed {
                    magnitude,
                    direction: Box::new(direction),
                    span,
                },
                _ => Value::Text {
                    text: String::new(),
                    span,
                },
            }
        }
        _ => Value::Text {
            text: pair.as_str().to_string(),
            span,
        },
    }
}

fn unescape(text: &str) -> String {
    let mut out = String::new();
    let mut chars = text.chars();
    while let Some(c) = chars.next() {
        if c == '\\' {
            match chars.next() {
                Some('n') => out.push('\n'),
                Some('t') => out.push('\t'),
                Some(other) => out.push(other),
                None => {}
            }
        } else {
            out.push(c);
        }
    }
    out
}

fn options(pair: Pair<Rule>, offset: usize) -> Vec<Opt> {
    pair.into_inner()
        .filter(|p| p.as_rule() == Rule::option)
        .filter_map(|p| {
            let span = span_of(&p, offset);
            let mut inner = p.into_inner();
            let key = ident(inner.next()?, offset);
            let value = value(inner.next()?, offset);
            Some(Opt { key, value, span })
        })
        .collect()
}

fn column_ref(pair: Pair<Rule>, offset: usize) -> ColumnRef {
    let span = span_of(&pair, offset);
    let mut parts: Vec<Ident> = pair.into_inner().map(|p| ident(p, offset)).collect();
    let column = parts.pop().unwrap_or(Ident {
        name: String::new(),
        span,
    });
    ColumnRef {
        table: parts.pop(),
        column,
        span,
    }
}

fn expr(pair: Pair<Rule>, offset: usize) -> Expr {
    let span = span_of(&pair, offset);
    match pair.as_rule() {
        Rule::expr => {
            let mut inner = pair.into_inner();
            let mut left = match inner.next() {
                Some(p) => expr(p, offset),
                None => return Expr::Number(empty_number(span)),
            };
            while let (Some(op), Some(right)) = (inner.next(), inner.next()) {
                let right = expr(right, offset);
                let span = left.span().to(right.span());
                left = Expr::Binary {
                    left: Box::new(left),
                    operator: op.as_str().to_string(),
                    right: Box::new(right),
                    span,
                };
            }
            left
        }
        Rule::expr_term => {
            let mut negate = false;
            let mut result = Expr::Number(empty_number(span));
            for p in pair.into_inner() {
                match p.as_rule() {
                    Rule::expr_neg => negate = true,
                    _ => result = expr(p, offset),
                }
            }
            if negate {
                Expr::Negate(Box::new(result), span)
            } else {
                result
            }
        }
        Rule::expr_call => {
            let mut inner = pair.into_inner();
            let function = inner.next().map(|p| ident(p, offset)).unwrap_or(Ident {
                name: String::new(),
                span,
            });
            let arguments = inner.map(|p| expr(p, offset)).collect();
            Expr::Call {
                function,
                arguments,
                span,
            }
        }
        Rule::expr_number => Expr::Number(number(pair, offset)),
        Rule::expr_paren => match pair.into_inner().next() {
            Some(p) => expr(p, offset),
            None => Expr::Number(empty_number(span)),
        },
        Rule::expr_name | Rule::ident => {
            let p = if pair.as_rule() == Rule::expr_name {
                pair.into_inner().next()
            } else {
                Some(pair)
            };
            match p {
                Some(p) => Expr::Name(ident(p, offset)),
                None => Expr::Number(empty_number(span)),
            }
        }
        _ => Expr::Number(empty_number(span)),
    }
}

fn empty_number(span: Span) -> Number {
    Number {
        value: f64::NAN,
        text: String::new(),
        span,
    }
}

fn build_statement(pair: Pair<Rule>, offset: usize) -> Statement {
    let span = span_of(&pair, offset);
    let rule = pair.as_rule();
    if rule == Rule::assign_stmt {
        let mut inner = pair.into_inner();
        let target = inner.next().map(|p| ident(p, offset));
        let mut statement = match inner.next() {
            Some(p) => build_statement(p, offset),
            None => {
                return Statement {
                    kind: StatementKind::Seed {
                        value: empty_number(span),
                    },
                    span,
                    keyword: Ident {
                        name: String::new(),
                        span,
                    },
                }
            }
        };
        statement.span = span;
        match &mut statement.kind {
            StatementKind::Scan { target: t, .. }
            | StatementKind::Plot { target: t, .. }
            | StatementKind::Command { target: t, .. } => *t = target,
            _ => {}
        }
        return statement;
    }
    let mut inner = pair.into_inner().peekable();
    let keyword = inner.next().map(|p| ident(p, offset)).unwrap_or(Ident {
        name: String::new(),
        span,
    });
    let mut rest: Vec<Pair<Rule>> = inner.collect();
    let take_options = |rest: &mut Vec<Pair<Rule>>| -> Vec<Opt> {
        match rest.last() {
            Some(p) if p.as_rule() == Rule::options => {
                let p = rest.pop();
                p.map(|p| options(p, offset)).unwrap_or_default()
            }
            _ => Vec::new(),
        }
    };
    let blank = Ident {
        name: String::new(),
        span,
    };
    let kind = match rule {
        Rule::lattice_stmt | Rule::couplings_stmt => {
            let options = take_options(&mut rest);
            let kind = rest
                .into_iter()
                .next()
                .map(|p| ident(p, offset))
                .unwrap_or(blank);
            if rule == Rule::lattice_stmt {
                StatementKind::Lattice { kind, options }
            } else {
                StatementKind::Couplings { kind, options }
            }
        }
        Rule::field_stmt => StatementKind::Field {
            options: take_options(&mut rest),
        },
        Rule::seed_stmt => StatementKind::Seed {
            value: rest
                .into_iter()
                .next()
                .map(|p| number(p, offset))
                .unwrap_or(empty_number(span)),
        },
        Rule::measure_stmt => StatementKind::Measure {
            names: rest.into_iter().map(|p| ident(p, offset)).collect(),
        },
        Rule::scan_stmt => {
            let options = take_options(&mut rest);
            let mut it = rest.into_iter();
            let variable = it.next().map(|p| ident(p, offset)).unwrap_or(blank);
            let range = match it.next() {
                Some(p) if p.as_rule() == Rule::range_from_to => {
                    let mut parts = p
                        .into_inner()
                        .filter(|p| matches!(p.as_rule(), Rule::quantity | Rule::number));
                    let from = parts.next().map(|p| quantity(p, offset));
                    let to = parts.next().map(|p| quantity(p, offset));
                    let steps = parts.next().map(|p| number(p, offset));
                    match (from, to, steps) {
                        (Some(from), Some(to), Some(steps)) => {
                            ScanRange::FromTo { from, to, steps }
                        }
                        _ => ScanRange::At(Value::List {
                            items: vec![],
                            unit: None,
                            span,
                        }),
                    }
                }
                Some(p) => {
                    let list = p
                        .into_inner()
                        .find(|p| p.as_rule() == Rule::list)
                        .map(|p| value(p, offset))
                        .unwrap_or(Value::List {
                            items: vec![],
                            unit: None,
                            span,
                        });
                    ScanRange::At(list)
                }
                None => ScanRange::At(Value::List {
                    items: vec![],
                    unit: None,
                    span,
                }),
            };
            StatementKind::Scan {
                target: None,
                variable,
                range,
                options,
            }
        }
        Rule::table_stmt | Rule::show_stmt => {
            let options = take_options(&mut rest);
            let name = rest
                .into_iter()
                .next()
                .map(|p| ident(p, offset))
                .unwrap_or(blank);
            if rule == Rule::table_stmt {
                StatementKind::Table { name, options }
            } else {
                StatementKind::Show { name, options }
            }
        }
        Rule::plot_stmt => {
            let options = take_options(&mut rest);
            let mut refs: Vec<ColumnRef> = Vec::new();
            let mut x = None;
            let mut after_against = false;
            for p in rest {
                match p.as_rule() {
                    Rule::word_against => after_against = true,
                    Rule::column_ref if after_against => x = Some(column_ref(p, offset)),
                    Rule::column_ref => refs.push(column_ref(p, offset)),
                    _ => {}
                }
            }
            StatementKind::Plot {
                target: None,
                ys: refs,
                x: x.unwrap_or(ColumnRef {
                    table: None,
                    column: blank,
                    span,
                }),
                options,
            }
        }
        Rule::column_stmt => {
            let mut target = None;
            let mut expression = None;
            let mut expr_text = String::new();
            let mut unit = None;
            for p in rest {
                match p.as_rule() {
                    Rule::column_ref => target = Some(column_ref(p, offset)),
                    Rule::expr => {
                        expr_text = p.as_str().to_string();
                        expression = Some(expr(p, offset));
                    }
                    Rule::string => {
                        let s = span_of(&p, offset);
                        let text =
                            unescape(p.into_inner().next().map(|p| p.as_str()).unwrap_or(""));
                        unit = Some((text, s));
                    }
                    _ => {}
                }
            }
            StatementKind::Column {
                target: target.unwrap_or(ColumnRef {
                    table: None,
                    column: blank,
                    span,
                }),
                expr: expression.unwrap_or(Expr::Number(empty_number(span))),
                expr_text,
                unit,
            }
        }
        Rule::rhai_stmt => {
            let body = rest.into_iter().find(|p| p.as_rule() == Rule::rhai_body);
            match body {
                Some(p) => StatementKind::Rhai {
                    body: p.as_str().to_string(),
                    body_span: span_of(&p, offset),
                },
                None => StatementKind::Rhai {
                    body: String::new(),
                    body_span: span,
                },
            }
        }
        Rule::export_stmt => {
            let options = take_options(&mut rest);
            let mut name = blank.clone();
            let mut path = (String::new(), span);
            for p in rest {
                match p.as_rule() {
                    Rule::ident => name = ident(p, offset),
                    Rule::string => {
                        let s = span_of(&p, offset);
                        path = (
                            unescape(p.into_inner().next().map(|p| p.as_str()).unwrap_or("")),
                            s,
                        );
                    }
                    _ => {}
                }
            }
            StatementKind::Export {
                name,
                path,
                options,
            }
        }
        Rule::command_stmt => {
            let options = take_options(&mut rest);
            let args = rest
                .into_iter()
                .filter(|p| p.as_rule() == Rule::command_arg)
                .filter_map(|p| p.into_inner().next())
                .map(|p| match p.as_rule() {
                    Rule::connective => {
                        let word = p.into_inner().next();
                        Arg::Connective(match word {
                            Some(w) => ident(w, offset),
                            None => blank.clone(),
                        })
                    }
                    _ => Arg::Value(value(p, offset)),
                })
                .collect();
            StatementKind::Command {
                target: None,
                args,
                options,
            }
        }
        _ => StatementKind::Seed {
            value: empty_number(span),
        },
    };
    Statement {
        kind,
        span,
        keyword,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn texts(source: &str) -> Vec<&str> {
        split(source)
            .pieces
            .iter()
            .map(|p| source[p.start..p.end].trim())
            .collect()
    }

    #[test]
    fn statements_end_at_newlines_outside_brackets_and_blocks() {
        assert_eq!(texts("seed 1\n\n# note\nseed 2"), vec!["seed 1", "seed 2"]);
        assert_eq!(texts("seed 1; seed 2"), vec!["seed 1", "seed 2"]);
        assert_eq!(
            texts("t = scan T at [1,\n 2] K,\n  sweeps = 4\ntable t"),
            vec!["t = scan T at [1,\n 2] K,\n  sweeps = 4", "table t"]
        );
        let rhai = "rhai {\n  let s = \"}\";\n  let m = #{a: 1};\n}\nseed 3";
        assert_eq!(texts(rhai).len(), 2);
        // Inside rhai, `#` is not a comment and `;` does not end the statement.
        assert_eq!(texts("rhai { let a = 1; let b = #{x: 2}; }").len(), 1);
    }

    #[test]
    fn the_tree_keeps_spans() {
        let source = "seed 1\nthermo = scan T from 0.3 K to 8 K in 30 steps, spacing = log";
        let (program, problems) = parse(source);
        assert!(problems.is_empty(), "{problems:?}");
        let scan = &program.statements[1];
        let StatementKind::Scan {
            target,
            range,
            options,
            ..
        } = &scan.kind
        else {
            panic!("not a scan: {scan:?}")
        };
        let target = target.as_ref().unwrap();
        assert_eq!(&source[target.span.start..target.span.end], "thermo");
        let ScanRange::FromTo { from, steps, .. } = range else {
            panic!()
        };
        assert_eq!(&source[from.span.start..from.span.end], "0.3 K");
        assert_eq!(steps.text, "30");
        assert_eq!(options[0].key.name, "spacing");
        assert_eq!(
            &source[scan.keyword.span.start..scan.keyword.span.end],
            "scan"
        );
    }
}
