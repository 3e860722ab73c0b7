//! `icefield run FILE.ifld`: runs a script headless through the same language session
//! the kernel uses.
//!
//! Plain mode prints each value's plain rendering; figures are written as SVG files
//! (next to the script, or into `--out DIR`) and their paths printed. `--json` prints
//! one JSON object (the value's record) per line instead, for other programs.

use std::io::{IsTerminal, Write};
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

use icefield_lang::{CellError, Interrupt, Output, Progress};

use crate::dispatch::Language;
use crate::mime;

/// Exit status of a script that was interrupted (128 + SIGINT, common practice).
pub const EXIT_INTERRUPTED: i32 = 130;
/// Exit status of a script that failed to check or run.
pub const EXIT_ERROR: i32 = 1;

#[derive(Debug, Clone)]
pub struct RunOptions {
    pub script: PathBuf,
    pub json: bool,
    /// Where figures go; `None` means beside the script (plain mode) or nowhere (JSON
    /// mode, where stdout stays pure JSON lines).
    pub out_dir: Option<PathBuf>,
}

/// Reads and runs the script; returns the process exit status.
pub fn run_script<L: Language>(
    language: &mut L,
    options: &RunOptions,
    interrupt: &Interrupt,
    stdout: &mut dyn Write,
    stderr: &mut dyn Write,
) -> i32 {
    let source = match std::fs::read_to_string(&options.script) {
        Ok(source) => source,
        Err(e) => {
            let _ = writeln!(
                stderr,
                "icefield: cannot read {}: {e}",
                options.script.display()
            );
            return EXIT_ERROR;
        }
    };
    let figure_dir = match (&options.out_dir, options.json) {
        (Some(dir), _) => Some(dir.clone()),
        (None, false) => Some(
            options
                .script
                .parent()
                .map(Path::to_path_buf)
                .filter(|p| !p.as_os_str().is_empty())
                .unwrap_or_else(|| PathBuf::from(".")),
        ),
        (None, true) => None,
    };
    if let Some(dir) = &figure_dir {
        if let Err(e) = std::fs::create_dir_all(dir) {
            let _ = writeln!(stderr, "icefield: cannot create {}: {e}", dir.display());
            return EXIT_ERROR;
        }
    }
    let stem = options
        .script
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "script".into());

    let mut printer = Printer {
        json: options.json,
        figure_dir,
        stem,
        figures: 0,
        stdout,
        stderr,
        progress: ProgressLine::new(),
        failed_write: None,
    };
    let result = language.execute(&source, interrupt, &mut |output| printer.print(output));
    printer.progress.finish(printer.stderr);
    let _ = printer.stdout.flush();
    if let Some(e) = printer.failed_write.take() {
        let _ = writeln!(printer.stderr, "icefield: {e}");
        return EXIT_ERROR;
    }
    match result {
        Ok(()) if interrupt.is_requested() => {
            let _ = writeln!(
                printer.stderr,
                "icefield: interrupted; results printed above are kept"
            );
            EXIT_INTERRUPTED
        }
        Ok(()) => 0,
        Err(error) => {
            report_error(&options.script, &error, printer.stderr);
            if error.kind == "Interrupted" {
                EXIT_INTERRUPTED
            } else {
                EXIT_ERROR
            }
        }
    }
}

/// Diagnostics as the language renders them (source line and caret), after a summary.
pub fn report_error(script: &Path, error: &CellError, stderr: &mut dyn Write) {
    let _ = writeln!(
        stderr,
        "{}: {}: {}",
        script.display(),
        error.kind,
        error.message
    );
    // The whole script is one cell, so the cell's line and column are the file's.
    let pointer = format!("--> {}:", script.display());
    for diagnostic in &error.diagnostics {
        let rendered = diagnostic.rendered.replacen("--> cell:", &pointer, 1);
        let _ = writeln!(stderr, "{}", rendered.trim_end());
        if let Some(help) = &diagnostic.help {
            if !diagnostic.rendered.contains(help.as_str()) {
                let _ = writeln!(stderr, "help: {help}");
            }
        }
    }
}

struct Printer<'w> {
    json: bool,
    figure_dir: Option<PathBuf>,
    stem: String,
    figures: usize,
    stdout: &'w mut dyn Write,
    stderr: &'w mut dyn Write,
    progress: ProgressLine,
    failed_write: Option<String>,
}

impl Printer<'_> {
    fn print(&mut self, output: Output) {
        if self.failed_write.is_some() {
            return;
        }
        if let Err(e) = self.try_print(output) {
            self.failed_write = Some(e);
        }
    }

    fn try_print(&mut self, output: Output) -> Result<(), String> {
        let write_err = |e: std::io::Error| format!("cannot write output: {e}");
        match output {
            Output::Progress(progress) => {
                self.progress.show(&progress, self.stderr);
                Ok(())
            }
            Output::Stream { text } => {
                self.progress.finish(self.stderr);
                if !self.json {
                    self.stdout.write_all(text.as_bytes()).map_err(write_err)?;
                } else {
                    // Keep stdout pure JSON lines; text goes to stderr.
                    self.stderr.write_all(text.as_bytes()).map_err(write_err)?;
                }
                Ok(())
            }
            Output::Display(rendering) => {
                self.progress.finish(self.stderr);
                let figure = match (&rendering.svg, &self.figure_dir) {
                    (Some(svg), Some(dir)) => {
                        self.figures += 1;
                        let path = dir.join(format!("{}-figure-{}.svg", self.stem, self.figures));
                        std::fs::write(&path, svg)
                            .map_err(|e| format!("cannot write figure {}: {e}", path.display()))?;
                        Some(path)
                    }
                    _ => None,
                };
                if self.json {
                    let line =
                        serde_json::to_string(&rendering.record).map_err(|e| e.to_string())?;
                    writeln!(self.stdout, "{line}").map_err(write_err)?;
                    if let Some(path) = figure {
                        writeln!(self.stderr, "figure written to {}", path.display())
                            .map_err(write_err)?;
                    }
                } else {
                    writeln!(self.stdout, "{}", rendering.plain.trim_end()).map_err(write_err)?;
                    if let Some(path) = figure {
                        writeln!(self.stdout, "figure written to {}", path.display())
                            .map_err(write_err)?;
                    }
                }
                self.stdout.flush().map_err(write_err)
            }
        }
    }
}

/// Progress on stderr: one rewritten line on a terminal, occasional lines otherwise.
struct ProgressLine {
    terminal: bool,
    last: Option<(Instant, Progress)>,
    open: bool,
}

impl ProgressLine {
    fn new() -> ProgressLine {
        ProgressLine {
            terminal: std::io::stderr().is_terminal(),
            last: None,
            open: false,
        }
    }

    fn show(&mut self, progress: &Progress, stderr: &mut dyn Write) {
        let interval = if self.terminal {
            Duration::from_millis(100)
        } else {
            Duration::from_secs(2)
        };
        let now = Instant::now();
        let finished = progress.done >= progress.total;
        let due = match &self.last {
            None => true,
            Some((at, last)) => {
                mime::progress_identity(&last.label) != mime::progress_identity(&progress.label)
                    || now.duration_since(*at) >= interval
            }
        };
        if due || finished {
            let text = mime::progress_text(progress);
            if self.terminal {
                let _ = write!(stderr, "\r{text}");
                self.open = !finished;
                if finished {
                    let _ = writeln!(stderr);
                }
            } else {
                let _ = writeln!(stderr, "{text}");
            }
            let _ = stderr.flush();
            self.last = Some((now, progress.clone()));
        }
    }

    /// Ends a half-written terminal line before other output.
    fn finish(&mut self, stderr: &mut dyn Write) {
        if self.open {
            let _ = writeln!(stderr);
            self.open = false;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use icefield_lang::{Completeness, Completions, Diagnostic, Rendering};
    use serde_json::json;

    /// Shows one table and one figure, or fails on a line containing "oops".
    struct Demo;

    impl Language for Demo {
        fn execute(
            &mut self,
            code: &str,
            _i: &Interrupt,
            emit: &mut dyn FnMut(Output),
        ) -> Result<(), CellError> {
            if let Some(line) = code.lines().position(|l| l.contains("oops")) {
                return Err(CellError {
                    kind: "SyntaxError".into(),
                    message: "unexpected `oops`".into(),
                    diagnostics: vec![Diagnostic {
                        message: "unexpected `oops`".into(),
                        line: line + 1,
                        column: 1,
                        help: Some("remove it".into()),
                        rendered: format!("{} | oops\n  | ^^^^", line + 1),
                    }],
                });
            }
            emit(Output::Stream {
                text: "starting\n".into(),
            });
            emit(Output::Progress(Progress {
                label: "scan".into(),
                done: 1,
                total: 1,
            }));
            emit(Output::Display(Rendering {
                plain: "T [K]  E [K]\n1.0  -1.0".into(),
                html: Some("<table/>".into()),
                svg: None,
                record: json!({"name": "scan", "kind": "table", "values": [[1.0, -1.0]]}),
            }));
            emit(Output::Display(Rendering {
                plain: "figure: E(T)".into(),
                html: None,
                svg: Some("<svg xmlns=\"http://www.w3.org/2000/svg\"/>".into()),
                record: json!({"name": "plot", "kind": "figure"}),
            }));
            Ok(())
        }
        fn complete(&self, _c: &str, cursor: usize) -> Completions {
            Completions {
                matches: vec![],
                start: cursor,
                end: cursor,
            }
        }
        fn inspect(&self, _c: &str, _p: usize) -> Option<String> {
            None
        }
        fn is_complete(&self, _c: &str) -> Completeness {
            Completeness::Complete
        }
    }

    fn scratch(name: &str) -> PathBuf {
        let dir =
            std::env::temp_dir().join(format!("icefield-run-test-{}-{name}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        std::fs::create_dir_all(&dir).unwrap();
        dir
    }

    fn run(
        dir: &Path,
        source: &str,
        json: bool,
        out_dir: Option<PathBuf>,
    ) -> (i32, String, String) {
        let script = dir.join("demo.ifld");
        std::fs::write(&script, source).unwrap();
        let options = RunOptions {
            script,
            json,
            out_dir,
        };
        let (mut out, mut err) = (Vec::new(), Vec::new());
        let code = run_script(&mut Demo, &options, &Interrupt::new(), &mut out, &mut err);
        (
            code,
            String::from_utf8(out).unwrap(),
            String::from_utf8(err).unwrap(),
        )
    }

    #[test]
    fn plain_mode_prints_and_writes_figures_beside_the_script() {
        let dir = scratch("plain");
        let (code, out, _err) = run(&dir, "anything", false, None);
        assert_eq!(code, 0);
        let figure = dir.join("demo-figure-1.svg");
        assert!(
            out.starts_with("starting\nT [K]  E [K]\n1.0  -1.0\nfigure: E(T)\n"),
            "{out}"
        );
        assert!(out.contains(&format!("figure written to {}", figure.display())));
        assert!(std::fs::read_to_string(&figure)
            .unwrap()
            .starts_with("<svg"));
        std::fs::remove_dir_all(&dir).unwrap();
    }

    #[test]
    fn json_mode_prints_one_record_per_line() {
        let dir = scratch("json");
        let (code, out, err) = run(&dir, "anything", true, None);
        assert_eq!(code, 0);
        let lines: Vec<serde_json::Value> = out
            .lines()
            .map(|l| serde_json::from_str(l).unwrap())
            .collect();
        assert_eq!(lines.len(), 2);
        assert_eq!(lines[0]["kind"], "table");
        assert_eq!(lines[1]["name"], "plot");
        assert!(err.contains("starting"));
        assert!(
            !dir.join("demo-figure-1.svg").exists(),
            "no files without --out in JSON mode"
        );
        let out_dir = dir.join("figs");
        let (code, _, _) = run(&dir, "anything", true, Some(out_dir.clone()));
        assert_eq!(code, 0);
        assert!(out_dir.join("demo-figure-1.svg").exists());
        std::fs::remove_dir_all(&dir).unwrap();
    }

    #[test]
    fn errors_go_to_stderr_with_location_and_fail() {
        let dir = scratch("error");
        let (code, out, err) = run(&dir, "fine\noops", false, None);
        assert_eq!(code, EXIT_ERROR);
        assert!(out.is_empty());
        assert!(err.contains("SyntaxError: unexpected `oops`"), "{err}");
        assert!(err.contains("2 | oops"), "{err}");
        assert!(err.contains("help: remove it"), "{err}");
        std::fs::remove_dir_all(&dir).unwrap();
    }

    #[test]
    fn a_missing_script_is_a_clear_error() {
        let options = RunOptions {
            script: PathBuf::from("/nonexistent/x.ifld"),
            json: false,
            out_dir: None,
        };
        let (mut out, mut err) = (Vec::new(), Vec::new());
        let code = run_script(&mut Demo, &options, &Interrupt::new(), &mut out, &mut err);
        assert_eq!(code, EXIT_ERROR);
        assert!(String::from_utf8(err)
            .unwrap()
            .contains("cannot read /nonexistent/x.ifld"));
    }
}
