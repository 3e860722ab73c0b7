//! Maps Jupyter requests to calls on the icefield language session and turns the
//! session's outputs into IOPub messages and replies.
//!
//! Nothing here touches sockets: replies and broadcasts go through an [`Outlet`], which
//! the server implements with ZeroMQ and the unit tests implement with a recorder.

use std::panic::{catch_unwind, AssertUnwindSafe};
use std::time::{Duration, Instant};

use icefield_lang::{CellError, Completeness, Completions, Interrupt, Output, Progress, Rendering};
use serde_json::{json, Map, Value};

use crate::mime;
use crate::wire::{Message, PROTOCOL_VERSION};

/// Version of this kernel (the workspace version, shared by the language).
pub const KERNEL_VERSION: &str = env!("CARGO_PKG_VERSION");

/// Mime type of icefield source, as announced in `language_info`.
pub const SOURCE_MIMETYPE: &str = "text/x-icefield";

/// History entries report this session number: history lives in memory for the
/// lifetime of one kernel process, so there is exactly one session.
pub const HISTORY_SESSION: u64 = 1;

/// Minimum time between two `update_display_data` messages of one progress bar, so a
/// fast scan does not flood the front end (the final state is always sent).
pub const PROGRESS_INTERVAL: Duration = Duration::from_millis(250);

/// What the kernel runs cells with. `icefield_lang::Session` is the real one; the
/// tests below use a scripted stand-in so that protocol logic is checked on its own.
pub trait Language {
    fn execute(
        &mut self,
        code: &str,
        interrupt: &Interrupt,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError>;
    fn complete(&self, code: &str, cursor_chars: usize) -> Completions;
    fn inspect(&self, code: &str, cursor_chars: usize) -> Option<String>;
    fn is_complete(&self, code: &str) -> Completeness;
}

impl Language for icefield_lang::Session {
    fn execute(
        &mut self,
        code: &str,
        interrupt: &Interrupt,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        icefield_lang::Session::execute(self, code, interrupt, emit)
    }
    fn complete(&self, code: &str, cursor_chars: usize) -> Completions {
        icefield_lang::Session::complete(self, code, cursor_chars)
    }
    fn inspect(&self, code: &str, cursor_chars: usize) -> Option<String> {
        icefield_lang::Session::inspect(self, code, cursor_chars)
    }
    fn is_complete(&self, code: &str) -> Completeness {
        icefield_lang::is_complete(code)
    }
}

/// Where replies and broadcasts go.
pub trait Outlet {
    /// A reply to `request` on the socket it came from.
    fn reply(&mut self, request: &Message, msg_type: &str, content: Value);
    /// An IOPub broadcast with `parent` as parent header.
    fn publish(&mut self, parent: &Message, msg_type: &str, content: Value);
}

/// What the server loop should do after a request.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Flow {
    Continue,
    /// An execute request failed with `stop_on_error`: answer already-queued execute
    /// requests with status "aborted" instead of running them.
    AbortQueued,
    /// Reply sent; stop the kernel.
    Shutdown {
        restart: bool,
    },
}

/// The `kernel_info_reply` content (answered on shell and control).
pub fn kernel_info_content() -> Value {
    json!({
        "status": "ok",
        "protocol_version": PROTOCOL_VERSION,
        "implementation": "icefield",
        "implementation_version": KERNEL_VERSION,
        "language_info": {
            "name": icefield_lang::LANGUAGE_NAME,
            "version": KERNEL_VERSION,
            "mimetype": SOURCE_MIMETYPE,
            "file_extension": format!(".{}", icefield_lang::FILE_EXTENSION),
            // No lexer or editor mode exists for icefield yet: plain text is the safe
            // fallback in Pygments, CodeMirror and nbconvert.
            "pygments_lexer": "text",
            "codemirror_mode": "text",
            "nbconvert_exporter": "script",
        },
        "banner": format!(
            "icefield {KERNEL_VERSION}: a notebook language for spin ice on the pyrochlore lattice"
        ),
        "help_links": [],
        "debugger": false,
    })
}

fn status(out: &mut dyn Outlet, parent: &Message, state: &str) {
    out.publish(parent, "status", json!({ "execution_state": state }));
}

/// Handles one control-channel request. Control never runs code, so it only needs the
/// interrupt flag; it is served from its own thread and answers while a cell runs.
pub fn handle_control(msg: &Message, interrupt: &Interrupt, out: &mut dyn Outlet) -> Flow {
    status(out, msg, "busy");
    let flow = match msg.msg_type() {
        "interrupt_request" => {
            interrupt.request();
            out.reply(msg, "interrupt_reply", json!({ "status": "ok" }));
            Flow::Continue
        }
        "shutdown_request" => shutdown(msg, interrupt, out),
        "kernel_info_request" => {
            out.reply(msg, "kernel_info_reply", kernel_info_content());
            Flow::Continue
        }
        other => {
            eprintln!(
                "[icefield kernel] ignoring unsupported control message `{other}` ({})",
                msg.msg_id()
            );
            Flow::Continue
        }
    };
    status(out, msg, "idle");
    flow
}

fn shutdown(msg: &Message, interrupt: &Interrupt, out: &mut dyn Outlet) -> Flow {
    let restart = msg
        .content
        .get("restart")
        .and_then(Value::as_bool)
        .unwrap_or(false);
    // A running cell must stop so the shell thread can finish.
    interrupt.request();
    out.reply(
        msg,
        "shutdown_reply",
        json!({ "status": "ok", "restart": restart }),
    );
    Flow::Shutdown { restart }
}

struct HistoryEntry {
    line: u64,
    input: String,
    /// text/plain of the cell's execute_result, if it had one.
    output: Option<String>,
}

/// The shell side of the kernel: the language session, execution count and history.
pub struct Kernel<L: Language> {
    language: L,
    interrupt: Interrupt,
    execution_count: u64,
    history: Vec<HistoryEntry>,
}

impl<L: Language> Kernel<L> {
    pub fn new(language: L, interrupt: Interrupt) -> Kernel<L> {
        Kernel {
            language,
            interrupt,
            execution_count: 0,
            history: Vec::new(),
        }
    }

    #[cfg(test)]
    fn execution_count(&self) -> u64 {
        self.execution_count
    }

    /// Handles one shell request, with status busy/idle around it.
    pub fn handle_shell(&mut self, msg: &Message, out: &mut dyn Outlet) -> Flow {
        status(out, msg, "busy");
        let flow = match msg.msg_type() {
            "execute_request" => self.execute(msg, out),
            "kernel_info_request" => {
                out.reply(msg, "kernel_info_reply", kernel_info_content());
                Flow::Continue
            }
            "is_complete_request" => {
                self.is_complete(msg, out);
                Flow::Continue
            }
            "complete_request" => {
                self.complete(msg, out);
                Flow::Continue
            }
            "inspect_request" => {
                self.inspect(msg, out);
                Flow::Continue
            }
            "history_request" => {
                let history = self.history(&msg.content);
                out.reply(
                    msg,
                    "history_reply",
                    json!({ "status": "ok", "history": history }),
                );
                Flow::Continue
            }
            "comm_info_request" => {
                out.reply(
                    msg,
                    "comm_info_reply",
                    json!({ "status": "ok", "comms": {} }),
                );
                Flow::Continue
            }
            "comm_open" => {
                // No comm targets exist. The spec asks an unknown target to be closed at
                // once so the front end does not keep a dangling comm.
                if let Some(comm_id) = msg.content.get("comm_id").and_then(Value::as_str) {
                    out.publish(msg, "comm_close", json!({ "comm_id": comm_id, "data": {} }));
                }
                Flow::Continue
            }
            "comm_msg" | "comm_close" => Flow::Continue,
            "shutdown_request" => shutdown(msg, &self.interrupt, out),
            other => {
                eprintln!(
                    "[icefield kernel] ignoring unsupported shell message `{other}` ({})",
                    msg.msg_id()
                );
                Flow::Continue
            }
        };
        status(out, msg, "idle");
        flow
    }

    /// Answers a queued execute request without running it (after an earlier error with
    /// `stop_on_error`).
    pub fn abort(&mut self, msg: &Message, out: &mut dyn Outlet) {
        status(out, msg, "busy");
        out.reply(
            msg,
            "execute_reply",
            json!({ "status": "aborted", "execution_count": self.execution_count }),
        );
        status(out, msg, "idle");
    }

    fn execute(&mut self, msg: &Message, out: &mut dyn Outlet) -> Flow {
        let content = &msg.content;
        let Some(code) = content.get("code").and_then(Value::as_str) else {
            let error = CellError {
                kind: "BadRequest".into(),
                message: "execute_request without a string `code` field".into(),
                diagnostics: Vec::new(),
            };
            out.reply(
                msg,
                "execute_reply",
                error_reply(&error, self.execution_count),
            );
            return Flow::Continue;
        };
        let silent = bool_field(content, "silent", false);
        let store_history = !silent && bool_field(content, "store_history", true);
        let stop_on_error = bool_field(content, "stop_on_error", true);

        if store_history {
            self.execution_count += 1;
        }
        let count = self.execution_count;
        if !silent {
            out.publish(
                msg,
                "execute_input",
                json!({ "code": code, "execution_count": count }),
            );
        }

        self.interrupt.clear();
        let mut cell = CellOutputs::new(msg, silent);
        let result = {
            let language = &mut self.language;
            let interrupt = &self.interrupt;
            let mut emit = |output: Output| cell.emit(output, out);
            catch_unwind(AssertUnwindSafe(|| {
                language.execute(code, interrupt, &mut emit)
            }))
            .unwrap_or_else(|panic| Err(internal_error(panic)))
        };
        // A cell that stopped at an interrupt but returned normally is still reported as
        // interrupted, so the user sees that its results may be partial.
        let result = match result {
            Ok(()) if self.interrupt.is_requested() => Err(interrupted_error()),
            other => other,
        };

        let (reply, flow, output_text) = match &result {
            Ok(()) => {
                let shown = cell.finish_ok(count, out);
                (ok_reply(count, content), Flow::Continue, shown)
            }
            Err(error) => {
                cell.finish_err(out);
                if !silent {
                    out.publish(msg, "error", error_content(error));
                }
                let flow = if stop_on_error && !silent {
                    Flow::AbortQueued
                } else {
                    Flow::Continue
                };
                (error_reply(error, count), flow, None)
            }
        };
        if store_history {
            self.history.push(HistoryEntry {
                line: count,
                input: code.to_owned(),
                output: output_text,
            });
        }
        out.reply(msg, "execute_reply", reply);
        flow
    }

    fn is_complete(&self, msg: &Message, out: &mut dyn Outlet) {
        let code = str_field(&msg.content, "code");
        let content = match self.language.is_complete(code) {
            Completeness::Complete => json!({ "status": "complete" }),
            Completeness::Incomplete { indent } => {
                json!({ "status": "incomplete", "indent": indent })
            }
            Completeness::Invalid => json!({ "status": "invalid" }),
        };
        out.reply(msg, "is_complete_reply", content);
    }

    fn complete(&self, msg: &Message, out: &mut dyn Outlet) {
        let code = str_field(&msg.content, "code");
        let cursor = cursor_field(&msg.content, code);
        let completions = self.language.complete(code, cursor);
        // Positions are Unicode code points (protocol 5.2+); keep them inside the code.
        let length = code.chars().count();
        let end = completions.end.min(length);
        let start = completions.start.min(end);
        out.reply(
            msg,
            "complete_reply",
            json!({
                "status": "ok",
                "matches": completions.matches,
                "cursor_start": start,
                "cursor_end": end,
                "metadata": {},
            }),
        );
    }

    fn inspect(&self, msg: &Message, out: &mut dyn Outlet) {
        let code = str_field(&msg.content, "code");
        let cursor = cursor_field(&msg.content, code);
        let content = match self.language.inspect(code, cursor) {
            Some(text) => json!({
                "status": "ok", "found": true,
                "data": { mime::TEXT_PLAIN: text }, "metadata": {},
            }),
            None => json!({ "status": "ok", "found": false, "data": {}, "metadata": {} }),
        };
        out.reply(msg, "inspect_reply", content);
    }

    /// `history_request`: tail, range and search over this process's cells.
    fn history(&self, content: &Value) -> Vec<Value> {
        let with_output = bool_field(content, "output", false);
        let n = content.get("n").and_then(Value::as_u64).map(|n| n as usize);
        let entries: Vec<&HistoryEntry> = match content
            .get("hist_access_type")
            .and_then(Value::as_str)
            .unwrap_or("tail")
        {
            "range" => {
                let session = content.get("session").and_then(Value::as_i64).unwrap_or(0);
                // 0 means "the current session" (IPython convention, common practice).
                if session != 0 && session != HISTORY_SESSION as i64 {
                    Vec::new()
                } else {
                    let start = content.get("start").and_then(Value::as_u64).unwrap_or(0);
                    let stop = content
                        .get("stop")
                        .and_then(Value::as_u64)
                        .unwrap_or(u64::MAX);
                    self.history
                        .iter()
                        .filter(|e| e.line >= start && e.line < stop)
                        .collect()
                }
            }
            "search" => {
                let pattern = str_field(content, "pattern");
                let unique = bool_field(content, "unique", false);
                let mut found: Vec<&HistoryEntry> = self
                    .history
                    .iter()
                    .filter(|e| glob_match(pattern, &e.input))
                    .collect();
                if unique {
                    // Keep the latest occurrence of each input.
                    let mut seen = std::collections::HashSet::new();
                    let mut kept: Vec<&HistoryEntry> = found
                        .iter()
                        .rev()
                        .filter(|e| seen.insert(e.input.as_str()))
                        .copied()
                        .collect();
                    kept.reverse();
                    found = kept;
                }
                last_n(found, n)
            }
            _ => last_n(self.history.iter().collect(), n),
        };
        entries
            .into_iter()
            .map(|e| {
                if with_output {
                    json!([HISTORY_SESSION, e.line, [e.input, e.output]])
                } else {
                    json!([HISTORY_SESSION, e.line, e.input])
                }
            })
            .collect()
    }
}

fn last_n<T>(mut items: Vec<T>, n: Option<usize>) -> Vec<T> {
    if let Some(n) = n {
        if items.len() > n {
            items.drain(..items.len() - n);
        }
    }
    items
}

/// Glob match with `*` (any run) and `?` (any one character), as history search uses.
fn glob_match(pattern: &str, text: &str) -> bool {
    let p: Vec<char> = pattern.chars().collect();
    let t: Vec<char> = text.chars().collect();
    let (mut pi, mut ti) = (0usize, 0usize);
    let mut star: Option<(usize, usize)> = None;
    while ti < t.len() {
        match p.get(pi) {
            Some('*') => {
                star = Some((pi, ti));
                pi += 1;
            }
            Some(&c) if c == '?' || c == t[ti] => {
                pi += 1;
                ti += 1;
            }
            _ => match star {
                Some((sp, st)) => {
                    pi = sp + 1;
                    ti = st + 1;
                    star = Some((sp, st + 1));
                }
                None => return false,
            },
        }
    }
    p[pi.min(p.len())..].iter().all(|&c| c == '*')
}

/// Per-cell output state: the held-back last display (sent as execute_result when the
/// cell succeeds) and the progress bars.
struct CellOutputs<'m> {
    request: &'m Message,
    silent: bool,
    held: Option<Rendering>,
    progress: Vec<ProgressDisplay>,
}

struct ProgressDisplay {
    display_id: String,
    last_sent: Instant,
    latest: Progress,
    unsent: bool,
}

impl<'m> CellOutputs<'m> {
    fn new(request: &'m Message, silent: bool) -> CellOutputs<'m> {
        CellOutputs {
            request,
            silent,
            held: None,
            progress: Vec::new(),
        }
    }

    fn emit(&mut self, output: Output, out: &mut dyn Outlet) {
        if self.silent {
            return;
        }
        match output {
            Output::Stream { text } => {
                self.flush_held(out);
                if !text.is_empty() {
                    out.publish(
                        self.request,
                        "stream",
                        json!({ "name": "stdout", "text": text }),
                    );
                }
            }
            Output::Display(rendering) => {
                // The previous display is now known not to be the cell's last.
                self.flush_held(out);
                self.held = Some(rendering);
            }
            Output::Progress(progress) => {
                self.flush_held(out);
                self.progress_update(progress, out);
            }
        }
    }

    fn flush_held(&mut self, out: &mut dyn Outlet) {
        if let Some(rendering) = self.held.take() {
            out.publish(
                self.request,
                "display_data",
                json!({ "data": mime::rendering_bundle(&rendering), "metadata": {}, "transient": {} }),
            );
        }
    }

    /// A progress bar is one display per label: created with `display_data` carrying a
    /// `transient.display_id`, then advanced in place with `update_display_data`.
    fn progress_update(&mut self, progress: Progress, out: &mut dyn Outlet) {
        let now = Instant::now();
        match self.progress.iter_mut().find(|p| {
            mime::progress_identity(&p.latest.label) == mime::progress_identity(&progress.label)
        }) {
            None => {
                let display_id = format!("icefield-progress-{}", uuid::Uuid::new_v4());
                out.publish(
                    self.request,
                    "display_data",
                    json!({
                        "data": mime::progress_bundle(&progress),
                        "metadata": {},
                        "transient": { "display_id": display_id },
                    }),
                );
                self.progress.push(ProgressDisplay {
                    display_id,
                    last_sent: now,
                    latest: progress,
                    unsent: false,
                });
            }
            Some(bar) => {
                let finished = progress.done >= progress.total;
                bar.latest = progress;
                if finished || now.duration_since(bar.last_sent) >= PROGRESS_INTERVAL {
                    send_progress_update(self.request, bar, out);
                    bar.last_sent = now;
                    bar.unsent = false;
                } else {
                    bar.unsent = true;
                }
            }
        }
    }

    /// Sends progress states that the throttle held back, so each bar ends showing
    /// where its run stopped.
    fn flush_progress(&mut self, out: &mut dyn Outlet) {
        for bar in self.progress.iter_mut().filter(|b| b.unsent) {
            send_progress_update(self.request, bar, out);
            bar.unsent = false;
        }
    }

    /// Successful end: the last display becomes the cell's execute_result. Returns its
    /// plain text for the history.
    fn finish_ok(mut self, count: u64, out: &mut dyn Outlet) -> Option<String> {
        self.flush_progress(out);
        let rendering = self.held.take()?;
        out.publish(
            self.request,
            "execute_result",
            json!({
                "execution_count": count,
                "data": mime::rendering_bundle(&rendering),
                "metadata": {},
            }),
        );
        Some(rendering.plain)
    }

    fn finish_err(mut self, out: &mut dyn Outlet) {
        self.flush_progress(out);
        self.flush_held(out);
    }
}

fn send_progress_update(request: &Message, bar: &ProgressDisplay, out: &mut dyn Outlet) {
    out.publish(
        request,
        "update_display_data",
        json!({
            "data": mime::progress_bundle(&bar.latest),
            "metadata": {},
            "transient": { "display_id": bar.display_id },
        }),
    );
}

fn ok_reply(count: u64, request: &Value) -> Value {
    // icefield has no side-effect-free expression evaluation outside a cell, so each
    // requested user expression is answered with an error entry (the spec's shape).
    let mut expressions = Map::new();
    if let Some(Value::Object(requested)) = request.get("user_expressions") {
        for name in requested.keys() {
            expressions.insert(
                name.clone(),
                json!({
                    "status": "error",
                    "ename": "UnsupportedError",
                    "evalue": "icefield does not evaluate user_expressions",
                    "traceback": [],
                }),
            );
        }
    }
    json!({
        "status": "ok",
        "execution_count": count,
        "user_expressions": expressions,
        "payload": [],
    })
}

/// The IOPub `error` content of a failed cell.
pub fn error_content(error: &CellError) -> Value {
    let mut traceback = error.traceback_lines();
    if traceback.is_empty() {
        traceback.push(format!("{}: {}", error.kind, error.message));
    }
    json!({ "ename": error.kind, "evalue": error.message, "traceback": traceback })
}

/// The execute_reply of a failed cell: the error fields plus every diagnostic's line and
/// column (1-based, code points), so front ends and tests can point at the source.
fn error_reply(error: &CellError, count: u64) -> Value {
    let mut content = error_content(error);
    if let Value::Object(map) = &mut content {
        map.insert("status".into(), json!("error"));
        map.insert("execution_count".into(), json!(count));
        let diagnostics: Vec<Value> = error
            .diagnostics
            .iter()
            .map(|d| json!({ "message": d.message, "line": d.line, "column": d.column, "help": d.help }))
            .collect();
        map.insert("diagnostics".into(), Value::Array(diagnostics));
    }
    content
}

fn interrupted_error() -> CellError {
    CellError {
        kind: "Interrupted".into(),
        message: "the cell was interrupted; values committed before the interrupt are kept".into(),
        diagnostics: Vec::new(),
    }
}

fn internal_error(panic: Box<dyn std::any::Any + Send>) -> CellError {
    let detail = panic
        .downcast_ref::<&str>()
        .map(|s| s.to_string())
        .or_else(|| panic.downcast_ref::<String>().cloned())
        .unwrap_or_else(|| "unknown cause".into());
    CellError {
        kind: "InternalError".into(),
        message: format!(
            "the icefield language failed internally ({detail}); the kernel keeps running"
        ),
        diagnostics: Vec::new(),
    }
}

fn bool_field(content: &Value, name: &str, default: bool) -> bool {
    content
        .get(name)
        .and_then(Value::as_bool)
        .unwrap_or(default)
}

fn str_field<'a>(content: &'a Value, name: &str) -> &'a str {
    content.get(name).and_then(Value::as_str).unwrap_or("")
}

/// `cursor_pos` in code points; missing or out of range means the end of the code.
fn cursor_field(content: &Value, code: &str) -> usize {
    let length = code.chars().count();
    content
        .get("cursor_pos")
        .and_then(Value::as_u64)
        .map(|c| (c as usize).min(length))
        .unwrap_or(length)
}

#[cfg(test)]
mod tests {
    use super::*;
    use icefield_lang::Diagnostic;
    use std::cell::RefCell;
    use std::rc::Rc;

    /// A stand-in language whose cells are tiny commands, so the protocol logic is
    /// tested independently of the real grammar.
    #[derive(Default)]
    struct Scripted {
        ran: Rc<RefCell<Vec<String>>>,
    }

    impl Language for Scripted {
        fn execute(
            &mut self,
            code: &str,
            interrupt: &Interrupt,
            emit: &mut dyn FnMut(Output),
        ) -> Result<(), CellError> {
            self.ran.borrow_mut().push(code.to_owned());
            for command in code.lines() {
                match command.split_once(' ').unwrap_or((command, "")) {
                    ("say", text) => emit(Output::Stream {
                        text: format!("{text}\n"),
                    }),
                    ("show", name) => emit(Output::Display(Rendering {
                        plain: name.to_owned(),
                        html: None,
                        svg: Some("<svg/>".into()),
                        record: json!({ "name": name }),
                    })),
                    ("progress", steps) => {
                        let total: u64 = steps.parse().unwrap_or(1);
                        for done in 0..=total {
                            emit(Output::Progress(Progress {
                                label: "scan".into(),
                                done,
                                total,
                            }));
                        }
                    }
                    ("wait_for_interrupt", _) => {
                        interrupt.request(); // simulate the control thread
                        return Ok(());
                    }
                    ("fail", _) => {
                        return Err(CellError {
                            kind: "NameError".into(),
                            message: "unknown name `x`".into(),
                            diagnostics: vec![Diagnostic {
                                message: "unknown name `x`".into(),
                                line: 2,
                                column: 5,
                                help: None,
                                rendered: "2 | fail x\n  |     ^".into(),
                            }],
                        })
                    }
                    ("panic", _) => panic!("scripted panic"),
                    _ => {}
                }
            }
            Ok(())
        }
        fn complete(&self, code: &str, cursor_chars: usize) -> Completions {
            // Complete the word before the cursor from a fixed vocabulary.
            let before: Vec<char> = code.chars().take(cursor_chars).collect();
            let start = before
                .iter()
                .rposition(|c| !c.is_alphanumeric())
                .map_or(0, |i| i + 1);
            let word: String = before[start..].iter().collect();
            let matches = ["temperature", "tetrahedron"]
                .iter()
                .filter(|w| w.starts_with(&word))
                .map(|w| w.to_string())
                .collect();
            Completions {
                matches,
                start,
                end: cursor_chars + 100,
            }
        }
        fn inspect(&self, code: &str, _cursor_chars: usize) -> Option<String> {
            code.contains("scan")
                .then(|| "scan: a temperature scan".to_owned())
        }
        fn is_complete(&self, code: &str) -> Completeness {
            if code.ends_with('{') {
                Completeness::Incomplete {
                    indent: "    ".into(),
                }
            } else if code.contains('}') && !code.contains('{') {
                Completeness::Invalid
            } else {
                Completeness::Complete
            }
        }
    }

    #[derive(Default)]
    struct Recorder {
        replies: Vec<(String, Value)>,
        published: Vec<(String, Value)>,
    }

    impl Outlet for Recorder {
        fn reply(&mut self, _request: &Message, msg_type: &str, content: Value) {
            self.replies.push((msg_type.to_owned(), content));
        }
        fn publish(&mut self, _parent: &Message, msg_type: &str, content: Value) {
            self.published.push((msg_type.to_owned(), content));
        }
    }

    impl Recorder {
        fn types(&self) -> Vec<&str> {
            self.published.iter().map(|(t, _)| t.as_str()).collect()
        }
    }

    fn request(msg_type: &str, content: Value) -> Message {
        let header = json!({ "msg_id": "m1", "msg_type": msg_type, "session": "s",
                             "username": "u", "date": "", "version": "5.3" });
        Message {
            identities: vec![],
            header: header.as_object().cloned().unwrap_or_default(),
            parent_header: Map::new(),
            metadata: Map::new(),
            content,
            buffers: vec![],
        }
    }

    fn kernel() -> Kernel<Scripted> {
        Kernel::new(Scripted::default(), Interrupt::new())
    }

    #[test]
    fn execute_broadcasts_in_order_and_counts() {
        let mut k = kernel();
        let mut out = Recorder::default();
        let flow = k.handle_shell(
            &request("execute_request", json!({"code": "say hi\nshow E"})),
            &mut out,
        );
        assert_eq!(flow, Flow::Continue);
        assert_eq!(
            out.types(),
            [
                "status",
                "execute_input",
                "stream",
                "execute_result",
                "status"
            ]
        );
        assert_eq!(out.published[0].1["execution_state"], "busy");
        assert_eq!(out.published[1].1["execution_count"], 1);
        assert_eq!(
            out.published[2].1,
            json!({"name": "stdout", "text": "hi\n"})
        );
        assert_eq!(out.published[3].1["data"]["image/svg+xml"], "<svg/>");
        assert_eq!(out.published[3].1["execution_count"], 1);
        assert_eq!(out.published[4].1["execution_state"], "idle");
        assert_eq!(out.replies[0].0, "execute_reply");
        assert_eq!(out.replies[0].1["status"], "ok");
        assert_eq!(out.replies[0].1["execution_count"], 1);
        assert_eq!(k.execution_count(), 1);
    }

    #[test]
    fn earlier_displays_are_display_data_and_last_is_result() {
        let mut k = kernel();
        let mut out = Recorder::default();
        k.handle_shell(
            &request("execute_request", json!({"code": "show A\nshow B"})),
            &mut out,
        );
        assert_eq!(
            out.types(),
            [
                "status",
                "execute_input",
                "display_data",
                "execute_result",
                "status"
            ]
        );
        assert_eq!(out.published[2].1["data"]["text/plain"], "A");
        assert_eq!(out.published[3].1["data"]["text/plain"], "B");
    }

    #[test]
    fn silent_broadcasts_nothing_and_keeps_count() {
        let mut k = kernel();
        let mut out = Recorder::default();
        k.handle_shell(
            &request("execute_request", json!({"code": "say hi", "silent": true})),
            &mut out,
        );
        assert_eq!(out.types(), ["status", "status"]);
        assert_eq!(k.execution_count(), 0);
        k.handle_shell(
            &request(
                "execute_request",
                json!({"code": "say a", "store_history": false}),
            ),
            &mut out,
        );
        assert_eq!(k.execution_count(), 0);
    }

    #[test]
    fn error_reply_has_location_and_requests_abort() {
        let mut k = kernel();
        let mut out = Recorder::default();
        let flow = k.handle_shell(
            &request("execute_request", json!({"code": "show A\nfail"})),
            &mut out,
        );
        assert_eq!(flow, Flow::AbortQueued);
        assert_eq!(
            out.types(),
            ["status", "execute_input", "display_data", "error", "status"]
        );
        let error = &out.published[3].1;
        assert_eq!(error["ename"], "NameError");
        assert_eq!(error["traceback"], json!(["2 | fail x", "  |     ^"]));
        let reply = &out.replies[0].1;
        assert_eq!(reply["status"], "error");
        assert_eq!(reply["diagnostics"][0]["line"], 2);
        assert_eq!(reply["diagnostics"][0]["column"], 5);

        let mut out = Recorder::default();
        let flow = k.handle_shell(
            &request(
                "execute_request",
                json!({"code": "fail", "stop_on_error": false}),
            ),
            &mut out,
        );
        assert_eq!(flow, Flow::Continue);
    }

    #[test]
    fn abort_replies_without_running() {
        let mut k = kernel();
        let ran = k.language.ran.clone();
        let mut out = Recorder::default();
        k.abort(
            &request("execute_request", json!({"code": "say never"})),
            &mut out,
        );
        assert_eq!(out.replies[0].1["status"], "aborted");
        assert_eq!(out.types(), ["status", "status"]);
        assert!(ran.borrow().is_empty());
    }

    #[test]
    fn interrupt_during_cell_is_an_error_and_flag_clears_next_time() {
        let mut k = kernel();
        let mut out = Recorder::default();
        k.handle_shell(
            &request("execute_request", json!({"code": "wait_for_interrupt"})),
            &mut out,
        );
        assert_eq!(out.replies[0].1["ename"], "Interrupted");
        let mut out = Recorder::default();
        k.handle_shell(
            &request("execute_request", json!({"code": "say again"})),
            &mut out,
        );
        assert_eq!(
            out.replies[0].1["status"], "ok",
            "flag cleared before the next cell"
        );
    }

    #[test]
    fn a_panicking_language_does_not_kill_the_kernel() {
        let mut k = kernel();
        let mut out = Recorder::default();
        k.handle_shell(
            &request("execute_request", json!({"code": "panic"})),
            &mut out,
        );
        assert_eq!(out.replies[0].1["ename"], "InternalError");
        let mut out = Recorder::default();
        k.handle_shell(
            &request("execute_request", json!({"code": "say ok"})),
            &mut out,
        );
        assert_eq!(out.replies[0].1["status"], "ok");
    }

    #[test]
    fn progress_is_one_updating_display_ending_at_the_final_state() {
        let mut k = kernel();
        let mut out = Recorder::default();
        k.handle_shell(
            &request("execute_request", json!({"code": "progress 1000"})),
            &mut out,
        );
        let types = out.types();
        assert_eq!(types.iter().filter(|t| **t == "display_data").count(), 1);
        let updates: Vec<&Value> = out
            .published
            .iter()
            .filter(|(t, _)| t == "update_display_data")
            .map(|(_, c)| c)
            .collect();
        // 1001 progress events are throttled down to a few updates, the final one complete.
        assert!(
            !updates.is_empty() && updates.len() < 20,
            "{} updates",
            updates.len()
        );
        let last = updates.last().unwrap();
        assert!(last["data"]["text/plain"]
            .as_str()
            .unwrap()
            .ends_with("1000/1000 (100%)"));
        let id = &out.published[2].1["transient"]["display_id"];
        assert!(id.as_str().unwrap().starts_with("icefield-progress-"));
        assert_eq!(&last["transient"]["display_id"], id);
    }

    #[test]
    fn malformed_execute_gets_an_error_reply() {
        let mut k = kernel();
        let mut out = Recorder::default();
        k.handle_shell(&request("execute_request", json!({"code": 5})), &mut out);
        assert_eq!(out.replies[0].1["status"], "error");
        assert_eq!(out.replies[0].1["ename"], "BadRequest");
    }

    #[test]
    fn complete_clamps_positions_and_counts_code_points() {
        let k = kernel();
        let mut out = Recorder::default();
        // "é" is two bytes but one code point: the word starts at code point 2.
        k.complete(
            &request("complete_request", json!({"code": "é te", "cursor_pos": 4})),
            &mut out,
        );
        let reply = &out.replies[0].1;
        assert_eq!(reply["cursor_start"], 2);
        assert_eq!(reply["cursor_end"], 4);
        assert_eq!(reply["matches"], json!(["temperature", "tetrahedron"]));
        let mut out = Recorder::default();
        k.complete(
            &request("complete_request", json!({"code": "te", "cursor_pos": 99})),
            &mut out,
        );
        assert_eq!(out.replies[0].1["cursor_end"], 2);
    }

    #[test]
    fn inspect_is_complete_comm_and_unknown() {
        let mut k = kernel();
        let mut out = Recorder::default();
        k.handle_shell(
            &request("inspect_request", json!({"code": "scan", "cursor_pos": 2})),
            &mut out,
        );
        assert_eq!(out.replies[0].1["found"], true);
        k.handle_shell(&request("inspect_request", json!({})), &mut out);
        assert_eq!(out.replies[1].1["found"], false);
        k.handle_shell(
            &request("is_complete_request", json!({"code": "rhai {"})),
            &mut out,
        );
        assert_eq!(
            out.replies[2].1,
            json!({"status": "incomplete", "indent": "    "})
        );
        k.handle_shell(
            &request("is_complete_request", json!({"code": "}"})),
            &mut out,
        );
        assert_eq!(out.replies[3].1["status"], "invalid");
        k.handle_shell(&request("comm_info_request", json!({})), &mut out);
        assert_eq!(out.replies[4].1, json!({"status": "ok", "comms": {}}));
        let before = out.replies.len();
        k.handle_shell(
            &request("comm_open", json!({"comm_id": "c1", "target_name": "t"})),
            &mut out,
        );
        k.handle_shell(&request("comm_msg", json!({"comm_id": "c1"})), &mut out);
        k.handle_shell(&request("no_such_request", json!({})), &mut out);
        assert_eq!(
            out.replies.len(),
            before,
            "no replies to comm or unknown messages"
        );
        assert!(out
            .published
            .iter()
            .any(|(t, c)| t == "comm_close" && c["comm_id"] == "c1"));
    }

    #[test]
    fn history_tail_range_search() {
        let mut k = kernel();
        let mut out = Recorder::default();
        for code in ["say a", "show X", "say a", "say b"] {
            k.handle_shell(
                &request("execute_request", json!({ "code": code })),
                &mut out,
            );
        }
        let tail =
            k.history(&json!({"hist_access_type": "tail", "n": 2, "output": false, "raw": true}));
        assert_eq!(tail, vec![json!([1, 3, "say a"]), json!([1, 4, "say b"])]);
        let range = k.history(
            &json!({"hist_access_type": "range", "session": 1, "start": 2, "stop": 3,
                                      "output": true, "raw": true}),
        );
        assert_eq!(range, vec![json!([1, 2, ["show X", "X"]])]);
        let search = k.history(
            &json!({"hist_access_type": "search", "pattern": "say *", "unique": true,
                                       "output": false, "raw": true}),
        );
        assert_eq!(search, vec![json!([1, 3, "say a"]), json!([1, 4, "say b"])]);
        assert!(glob_match("a?c*", "abcdef"));
        assert!(!glob_match("a?c", "abcd"));
        assert!(glob_match("*", ""));
    }

    #[test]
    fn control_interrupt_and_shutdown() {
        let interrupt = Interrupt::new();
        let mut out = Recorder::default();
        let flow = handle_control(
            &request("interrupt_request", json!({})),
            &interrupt,
            &mut out,
        );
        assert_eq!(flow, Flow::Continue);
        assert!(interrupt.is_requested());
        assert_eq!(out.replies[0].0, "interrupt_reply");
        let flow = handle_control(
            &request("shutdown_request", json!({"restart": true})),
            &interrupt,
            &mut out,
        );
        assert_eq!(flow, Flow::Shutdown { restart: true });
        assert_eq!(out.replies[1].1, json!({"status": "ok", "restart": true}));
        assert_eq!(out.types(), ["status", "status", "status", "status"]);
    }

    #[test]
    fn kernel_info_names_the_language() {
        let info = kernel_info_content();
        assert_eq!(info["language_info"]["name"], "icefield");
        assert_eq!(info["language_info"]["file_extension"], ".ifld");
        assert_eq!(info["protocol_version"], "5.3");
    }
}
