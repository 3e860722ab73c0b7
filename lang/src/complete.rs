//! Completion, inspection targets and the completeness test a console uses to decide
//! whether Enter runs the cell. All positions count Unicode code points.

use crate::check::analysis;
use crate::check::dynamics::{
    DYNAMICS_ACCEPTANCE_RULES, DYNAMICS_OPTIONS, DYNAMICS_RULES, EVOLVE_OPTIONS, EXECUTION_CHOICES,
    QUENCH_OPTIONS, RATE_KINDS, STEP_OPTIONS, TRANSVERSE_SOURCES,
};
use crate::check::monopoles;
use crate::check::percolation;
use crate::check::{
    ACCEPTANCE_RULES, COUPLING_KINDS, DIPOLAR_OPTIONS, EXCHANGE_OPTIONS, FIELD_OPTIONS,
    LATTICE_KINDS, LATTICE_OPTIONS, NEAREST_OPTIONS, PLOT_OPTIONS, SCAN_OPTIONS, START_STATES,
    TABLE_OPTIONS,
};
use crate::measures::MEASURES;
use crate::script::BUILTIN_FUNCTIONS;
use crate::syntax::{split, KEYWORDS};
use crate::units::UNITS;
use crate::workspace::{Workspace, RESERVED_SHOW_NAMES};

/// Whether a cell is ready to run (public contract type).
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Completeness {
    Complete,
    /// A bracket, a rhai block or a continued line (trailing comma) is still open.
    Incomplete {
        indent: String,
    },
    /// It can never become valid by adding text (a stray closing bracket).
    Invalid,
}

/// Completion matches and the code-point range they replace (public contract type).
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Completions {
    pub matches: Vec<String>,
    pub start: usize,
    pub end: usize,
}

pub fn is_complete(code: &str) -> Completeness {
    let s = split(code);
    if !s.unmatched.is_empty() {
        return Completeness::Invalid;
    }
    if !s.open.is_empty() || s.open_string || s.trailing_comma {
        return Completeness::Incomplete {
            indent: "    ".to_string(),
        };
    }
    Completeness::Complete
}

pub fn is_word_char(c: char) -> bool {
    c.is_alphanumeric() || c == '_' || c == '\''
}

/// The word touching `cursor` (in chars): (start, end) in chars.
pub fn word_around(chars: &[char], cursor: usize) -> Option<(usize, usize)> {
    let cursor = cursor.min(chars.len());
    let mut start = cursor;
    while start > 0 && is_word_char(chars[start - 1]) {
        start -= 1;
    }
    let mut end = cursor;
    while end < chars.len() && is_word_char(chars[end]) {
        end += 1;
    }
    (start < end).then_some((start, end))
}

/// The dotted `table.column` around a word, if any: (table, column).
pub fn dotted(chars: &[char], start: usize, end: usize) -> Option<(String, String)> {
    let word: String = chars[start..end].iter().collect();
    if start > 0 && chars[start - 1] == '.' {
        let mut table_start = start - 1;
        while table_start > 0 && is_word_char(chars[table_start - 1]) {
            table_start -= 1;
        }
        let table: String = chars[table_start..start - 1].iter().collect();
        if !table.is_empty() {
            return Some((table, word));
        }
    }
    None
}

fn push_all<'a>(out: &mut Vec<String>, words: impl IntoIterator<Item = &'a str>) {
    for w in words {
        if !out.iter().any(|o| o == w) {
            out.push(w.to_string());
        }
    }
}

fn values_for(option: &str) -> &'static [&'static str] {
    match option {
        "spacing" | "xscale" | "yscale" => &["linear", "log"],
        "start" => START_STATES,
        "style" => &["line", "points", "both"],
        "errors" | "tempering" => &["on", "off"],
        "convention" => &["vector", "ising"],
        "acceptance" => ACCEPTANCE_RULES,
        "window" => analysis::WINDOWS,
        "detrend" => analysis::DETRENDS,
        "normalisation" => analysis::NORMALISATIONS,
        "rates" => RATE_KINDS,
        "execution" => EXECUTION_CHOICES,
        "transverse" => TRANSVERSE_SOURCES,
        "slow" => &["frozen"],
        "mode" => crate::check::monopoles::REACH_MODES,
        "format" => &["csv", "json", "whitespace"],
        "occupy" => percolation::OCCUPATIONS,
        _ => &[],
    }
}

/// Values of an option of a given statement, where they differ from `values_for`.
fn values_in(keyword: &str, option: &str) -> &'static [&'static str] {
    match (keyword, option) {
        ("dynamics", "acceptance") => DYNAMICS_ACCEPTANCE_RULES,
        _ => values_for(option),
    }
}

pub fn complete(
    workspace: &Workspace,
    functions: &[String],
    code: &str,
    cursor: usize,
) -> Completions {
    let chars: Vec<char> = code.chars().collect();
    let cursor = cursor.min(chars.len());
    let mut start = cursor;
    while start > 0 && is_word_char(chars[start - 1]) {
        start -= 1;
    }
    let prefix: String = chars[start..cursor].iter().collect();
    let mut candidates: Vec<String> = Vec::new();
    let names = workspace.names();
    let table_names: Vec<String> = workspace
        .values
        .iter()
        .filter(|(_, v)| matches!(v, crate::workspace::Value::Table(_)))
        .map(|(n, _)| n.clone())
        .collect();

    if start > 0 && chars[start - 1] == '.' {
        let mut table_start = start - 1;
        while table_start > 0 && is_word_char(chars[table_start - 1]) {
            table_start -= 1;
        }
        let table: String = chars[table_start..start - 1].iter().collect();
        if let Some(t) = workspace.table(&table) {
            push_all(&mut candidates, t.columns.iter().map(|c| c.name.as_str()));
        }
    } else {
        let line_start = chars[..start]
            .iter()
            .rposition(|c| *c == '\n')
            .map(|i| i + 1)
            .unwrap_or(0);
        let before: String = chars[line_start..start].iter().collect();
        let before = before.split('#').next().unwrap_or("").to_string();
        let trimmed = before.trim_end();
        let words: Vec<&str> = before
            .split(|c: char| !is_word_char(c))
            .filter(|w| !w.is_empty())
            .collect();
        let statement_words: Vec<&str> = if words.len() >= 2
            && before
                .split_once(words[0])
                .map(|(_, rest)| rest.trim_start().starts_with('='))
                .unwrap_or(false)
        {
            words[1..].to_vec()
        } else {
            words.clone()
        };
        let keyword = statement_words.first().copied().unwrap_or("");
        let last_char = trimmed.chars().last();
        let after_number = last_char.is_some_and(|c| c.is_ascii_digit() || c == '.')
            && trimmed
                .rsplit(|c: char| c.is_whitespace() || c == '=' || c == ',' || c == '[')
                .next()
                .is_some_and(|t| t.parse::<f64>().is_ok());
        let option_before_equals = if last_char == Some('=') {
            words.last().copied()
        } else {
            None
        };
        if trimmed.is_empty() {
            push_all(&mut candidates, KEYWORDS.iter().copied());
            push_all(&mut candidates, crate::commands::keywords());
            push_all(&mut candidates, names.iter().map(String::as_str));
        } else if after_number {
            push_all(&mut candidates, UNITS.iter().map(|u| u.symbol));
        } else if let Some(option) =
            option_before_equals.filter(|o| !values_in(keyword, o).is_empty())
        {
            push_all(&mut candidates, values_in(keyword, option).iter().copied());
        } else {
            match keyword {
                "measure" => push_all(&mut candidates, MEASURES.iter().map(|m| m.name)),
                "lattice" if statement_words.len() == 1 => {
                    push_all(&mut candidates, LATTICE_KINDS.iter().copied())
                }
                "lattice" => push_all(&mut candidates, LATTICE_OPTIONS.iter().copied()),
                "couplings" if statement_words.len() == 1 => {
                    push_all(&mut candidates, COUPLING_KINDS.iter().copied())
                }
                "couplings" => match statement_words.get(1).copied() {
                    Some("exchange") => push_all(&mut candidates, EXCHANGE_OPTIONS.iter().copied()),
                    Some("dipolar") => push_all(&mut candidates, DIPOLAR_OPTIONS.iter().copied()),
                    _ => push_all(&mut candidates, NEAREST_OPTIONS.iter().copied()),
                },
                "field" => push_all(&mut candidates, FIELD_OPTIONS.iter().copied()),
                "dynamics" if statement_words.len() == 1 => {
                    push_all(&mut candidates, DYNAMICS_RULES.iter().copied())
                }
                "dynamics" => push_all(&mut candidates, DYNAMICS_OPTIONS.iter().copied()),
                "evolve" => {
                    push_all(&mut candidates, EVOLVE_OPTIONS.iter().copied());
                    push_all(&mut candidates, ["for", "at"]);
                }
                "quench" if statement_words.len() == 1 => push_all(&mut candidates, ["B"]),
                "quench" => {
                    push_all(&mut candidates, QUENCH_OPTIONS.iter().copied());
                    push_all(&mut candidates, ["from", "along", "to", "at", "for"]);
                }
                "step" if statement_words.len() == 1 => push_all(&mut candidates, ["T"]),
                "step" => {
                    push_all(&mut candidates, STEP_OPTIONS.iter().copied());
                    push_all(&mut candidates, ["from", "to", "for"]);
                }
                "scan" | "anneal" if statement_words.len() == 1 => push_all(&mut candidates, ["T"]),
                "scan" | "anneal" => {
                    push_all(&mut candidates, SCAN_OPTIONS.iter().copied());
                    push_all(&mut candidates, ["from", "to", "in", "steps", "at"]);
                }
                "plot" if statement_words.contains(&"against") => {
                    push_all(&mut candidates, PLOT_OPTIONS.iter().copied());
                    for t in statement_words.iter() {
                        if let Some(table) = workspace.table(t) {
                            push_all(
                                &mut candidates,
                                table.columns.iter().map(|c| c.name.as_str()),
                            );
                        }
                    }
                }
                "plot" => {
                    push_all(&mut candidates, table_names.iter().map(String::as_str));
                    push_all(&mut candidates, ["against"]);
                }
                "table" | "export" if statement_words.len() == 1 => {
                    push_all(&mut candidates, table_names.iter().map(String::as_str))
                }
                "table" => push_all(&mut candidates, TABLE_OPTIONS.iter().copied()),
                "monopoles" => {
                    push_all(
                        &mut candidates,
                        monopoles::MONOPOLES_OPTIONS.iter().copied(),
                    );
                    push_all(&mut candidates, ["for", "at"]);
                }
                "reachable" => {
                    push_all(
                        &mut candidates,
                        monopoles::REACHABLE_OPTIONS.iter().copied(),
                    );
                    push_all(&mut candidates, ["within", "at", "hops"]);
                }
                "cluster" => {
                    push_all(&mut candidates, monopoles::CLUSTER_OPTIONS.iter().copied());
                    push_all(&mut candidates, ["within", "at", "hops"]);
                }
                "export" => push_all(
                    &mut candidates,
                    crate::check::EXPORT_OPTIONS.iter().copied(),
                ),
                "import" => push_all(&mut candidates, ["format"]),
                "calibrate" if statement_words.contains(&"against") => push_all(
                    &mut candidates,
                    crate::check::data::CALIBRATE_OPTIONS.iter().copied(),
                ),
                "calibrate" => {
                    push_all(&mut candidates, table_names.iter().map(String::as_str));
                    push_all(&mut candidates, ["to", "against"]);
                }
                "show" => {
                    push_all(&mut candidates, names.iter().map(String::as_str));
                    push_all(&mut candidates, RESERVED_SHOW_NAMES.iter().copied());
                }
                "column" if before.contains('=') => {
                    if let Some(table) = statement_words.get(1).and_then(|t| workspace.table(t)) {
                        push_all(
                            &mut candidates,
                            table.columns.iter().map(|c| c.name.as_str()),
                        );
                    }
                    push_all(&mut candidates, functions.iter().map(String::as_str));
                    push_all(&mut candidates, BUILTIN_FUNCTIONS.iter().copied());
                    push_all(&mut candidates, ["unit"]);
                }
                "column" => push_all(&mut candidates, table_names.iter().map(String::as_str)),
                "fit" if words.last() == Some(&"with") => {
                    push_all(&mut candidates, analysis::FIT_MODELS.iter().copied())
                }
                "spectrum" | "autocorrelation" | "susceptibility" | "fit"
                    if statement_words.len() == 1 =>
                {
                    push_all(&mut candidates, table_names.iter().map(String::as_str))
                }
                "spectrum" | "autocorrelation" | "susceptibility" | "fit" => {
                    let (words, options): (&[&str], &[&str]) = match keyword {
                        "spectrum" => (&["against"], analysis::SPECTRUM_OPTIONS),
                        "autocorrelation" => (&["against"], analysis::AUTOCORRELATION_OPTIONS),
                        "susceptibility" => (
                            &["at", "against", "from", "to"],
                            analysis::SUSCEPTIBILITY_OPTIONS,
                        ),
                        _ => (
                            &["against", "with", "over", "from", "to"],
                            analysis::FIT_OPTIONS,
                        ),
                    };
                    push_all(&mut candidates, words.iter().copied());
                    push_all(&mut candidates, options.iter().copied());
                }
                "percolation" if statement_words.len() == 1 => push_all(
                    &mut candidates,
                    percolation::PERCOLATION_MODES.iter().copied(),
                ),
                "percolation" => {
                    let options = match statement_words.get(1).copied() {
                        Some("bond") | Some("site") => percolation::THRESHOLD_OPTIONS,
                        Some("clusters") => percolation::CLUSTERS_OPTIONS,
                        Some("growth") => percolation::GROWTH_OPTIONS,
                        Some("walkers") => percolation::WALKERS_OPTIONS,
                        _ => percolation::OPEN_HOPS_OPTIONS,
                    };
                    push_all(&mut candidates, options.iter().copied());
                    push_all(
                        &mut candidates,
                        percolation::PERCOLATION_LATTICES.iter().copied(),
                    );
                    push_all(&mut candidates, ["on", "at", "from", "to"]);
                }
                _ => {
                    push_all(&mut candidates, KEYWORDS.iter().copied());
                    push_all(&mut candidates, crate::commands::keywords());
                    push_all(&mut candidates, names.iter().map(String::as_str));
                    push_all(&mut candidates, MEASURES.iter().map(|m| m.name));
                    push_all(&mut candidates, functions.iter().map(String::as_str));
                }
            }
        }
    }
    let mut matches: Vec<String> = candidates
        .iter()
        .filter(|c| c.starts_with(&prefix))
        .cloned()
        .collect();
    if matches.is_empty() {
        let lower = prefix.to_lowercase();
        matches = candidates
            .into_iter()
            .filter(|c| c.to_lowercase().starts_with(&lower))
            .collect();
    }
    Completions {
        matches,
        start,
        end: cursor,
    }
}
