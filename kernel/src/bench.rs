//! `icefield bench [NAME...] --json`: runs the benchmark workloads that live in
//! `icefield_stdlib::bench` and prints their records, one JSON object per line.
//!
//! The suite is passed in as two functions (its names and its runner), so the command
//! logic is tested here without running real workloads.

use std::io::Write;

use icefield_lang::Interrupt;
use serde::Serialize;
use serde_json::Value;

/// A benchmark suite: the names it knows and a runner (`None` for an unknown name).
pub struct Suite<'a, R> {
    pub names: &'a [&'a str],
    pub run: &'a dyn Fn(&str, &Interrupt) -> Option<Vec<R>>,
}

/// Runs the requested benchmarks (all of them when none is named). Unknown names are
/// refused before anything runs.
pub fn run_benches<R: Serialize>(
    suite: &Suite<'_, R>,
    requested: &[String],
    json: bool,
    interrupt: &Interrupt,
    out: &mut dyn Write,
) -> Result<(), String> {
    let unknown: Vec<&str> = requested
        .iter()
        .map(String::as_str)
        .filter(|name| !suite.names.contains(name))
        .collect();
    if !unknown.is_empty() {
        return Err(format!(
            "unknown benchmark{} {}; available: {}",
            if unknown.len() > 1 { "s" } else { "" },
            unknown
                .iter()
                .map(|n| format!("`{n}`"))
                .collect::<Vec<_>>()
                .join(", "),
            if suite.names.is_empty() {
                "none".to_owned()
            } else {
                suite.names.join(", ")
            }
        ));
    }
    let selected: Vec<&str> = if requested.is_empty() {
        suite.names.to_vec()
    } else {
        requested.iter().map(String::as_str).collect()
    };
    let write_err = |e: std::io::Error| format!("cannot write results: {e}");
    for name in selected {
        if interrupt.is_requested() {
            return Err("interrupted".into());
        }
        let records = (suite.run)(name, interrupt)
            .ok_or_else(|| format!("benchmark `{name}` is listed but did not run"))?;
        for record in records {
            let value = serde_json::to_value(&record).map_err(|e| e.to_string())?;
            if json {
                writeln!(out, "{value}").map_err(write_err)?;
            } else {
                writeln!(out, "{}", human_line(&value)).map_err(write_err)?;
            }
        }
        out.flush().map_err(write_err)?;
    }
    Ok(())
}

/// The suite in `icefield_stdlib::bench`.
pub fn run_stdlib(
    requested: &[String],
    json: bool,
    interrupt: &Interrupt,
    out: &mut dyn Write,
) -> Result<(), String> {
    let suite = Suite {
        names: icefield_stdlib::bench::names(),
        run: &icefield_stdlib::bench::run,
    };
    run_benches(&suite, requested, json, interrupt, out)
}

/// The names in `icefield_stdlib::bench`, one per line.
pub fn list_stdlib(out: &mut dyn Write) -> Result<(), String> {
    for name in icefield_stdlib::bench::names() {
        writeln!(out, "{name}").map_err(|e| format!("cannot write: {e}"))?;
    }
    Ok(())
}

/// `bench: value unit` for people; the JSON form is for tools.
fn human_line(record: &Value) -> String {
    let field = |name: &str| {
        record.get(name).map(|v| {
            v.as_str()
                .map(str::to_owned)
                .unwrap_or_else(|| v.to_string())
        })
    };
    format!(
        "{}: {} {}",
        field("bench").unwrap_or_else(|| "?".into()),
        field("value").unwrap_or_else(|| "?".into()),
        field("unit").unwrap_or_default()
    )
    .trim_end()
    .to_owned()
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;
    use std::cell::RefCell;

    fn with_suite<T>(body: impl FnOnce(&Suite<'_, Value>, &RefCell<Vec<String>>) -> T) -> T {
        let ran = RefCell::new(Vec::new());
        let run = |name: &str, _: &Interrupt| {
            ran.borrow_mut().push(name.to_owned());
            match name {
                "flips" => Some(vec![
                    json!({"bench": "flips", "value": 1.5e8, "unit": "flips/s", "L": 8}),
                ]),
                "scan" => Some(vec![json!({"bench": "scan", "value": 2.0, "unit": "s"})]),
                _ => None,
            }
        };
        let suite = Suite {
            names: &["flips", "scan"],
            run: &run,
        };
        body(&suite, &ran)
    }

    #[test]
    fn all_when_none_named_as_json_lines() {
        with_suite(|suite, ran| {
            let mut out = Vec::new();
            run_benches(suite, &[], true, &Interrupt::new(), &mut out).unwrap();
            let text = String::from_utf8(out).unwrap();
            let lines: Vec<Value> = text
                .lines()
                .map(|l| serde_json::from_str(l).unwrap())
                .collect();
            assert_eq!(lines.len(), 2);
            assert_eq!(lines[0]["L"], 8);
            assert_eq!(*ran.borrow(), ["flips", "scan"]);
        });
    }

    #[test]
    fn named_and_human_readable() {
        with_suite(|suite, _| {
            let mut out = Vec::new();
            run_benches(suite, &["scan".into()], false, &Interrupt::new(), &mut out).unwrap();
            assert_eq!(String::from_utf8(out).unwrap(), "scan: 2.0 s\n");
        });
    }

    #[test]
    fn unknown_names_are_refused_before_running() {
        with_suite(|suite, ran| {
            let mut out = Vec::new();
            let err = run_benches(
                suite,
                &["scan".into(), "warp".into()],
                true,
                &Interrupt::new(),
                &mut out,
            )
            .unwrap_err();
            assert!(err.contains("unknown benchmark `warp`"), "{err}");
            assert!(err.contains("available: flips, scan"), "{err}");
            assert!(ran.borrow().is_empty());
        });
    }
}
