//! Checking of the physical-time kinetics: the dynamics rule, `evolve`, `quench`, `step` commands.
//!
//! Reads the phrase and options of a command statement, resolves names and units, and
//! returns a typed spec for `run/dynamics.rs`.
//!
//! The model of time is the one of physics-reference §5 (Jaubert & Holdsworth, Nat. Phys.
//! 5, 258 (2009)): every spin attempts a flip as a Poisson process with attempt time τ,
//! which may depend on the spin's transverse-field class, and an attempt is accepted with
//! the chosen acceptance function of ΔE.

use icefield_stdlib::dynamics::{AcceptanceRule, MAX_SAMPLES};
use icefield_stdlib::gating::{AttemptTimes, SlowGate, DEFAULT_SLOW_RATIO, GATE_CLASS_COUNT};

use super::phrase::{no_value_problem, AfterUnknown, Phrase, PhraseRules, PhraseVoice};
use super::{
    list_words, Checked, Checker, ColumnView, CommandSpec, NameView, StartState, View,
    DEFAULT_EQUILIBRATION_SWEEPS, START_STATES,
};
use crate::ast::{Arg, Ident, Opt, Quantity, Span, Statement, Value};
use crate::diagnostic::{did_you_mean, ErrorKind, Problem};
use crate::script::BUILTIN_FUNCTIONS;
use crate::units::{self, Dimension};
use crate::workspace::{format_seconds, DynamicsDecl, ExecutionChoice, Model, TransverseSource};

/// Single-spin dynamics rules (the word after `dynamics`).
pub const DYNAMICS_RULES: &[&str] = &["single_flip"];
/// Options of a `dynamics` statement.
pub const DYNAMICS_OPTIONS: &[&str] = &[
    "acceptance",
    "attempt_time",
    "rates",
    "fast",
    "slow",
    "ratio",
    "law",
    "execution",
    "transverse",
];
/// Acceptance functions of physical-time dynamics.
pub const DYNAMICS_ACCEPTANCE_RULES: &[&str] = &["metropolis", "glauber"];
/// How attempt times are given.
pub const RATE_KINDS: &[&str] = &["uniform", "gated", "law"];
pub const EXECUTION_CHOICES: &[&str] = &["auto", "attempts", "rejection_free"];
pub const TRANSVERSE_SOURCES: &[&str] = &["neighbours", "dipolar"];
/// Options of `evolve`.
pub const EVOLVE_OPTIONS: &[&str] = &["sample_every", "equilibrate", "start", "axis"];
/// Options of `quench`.
pub const QUENCH_OPTIONS: &[&str] = &[
    "sample_every",
    "equilibrate",
    "start",
    "axis",
    "prepare",
    "moment",
];
/// Options of `step`.
pub const STEP_OPTIONS: &[&str] = &["sample_every", "equilibrate", "start", "axis", "prepare"];
/// Grid intervals of a run whose `sample_every` is not given (1001 samples).
pub const DEFAULT_SAMPLE_INTERVALS: f64 = 1000.0;
/// The columns of every time series (CONTRACT: t [s], M [μ], Mx, My, Mz [μ], densities []).
pub const TIME_SERIES_COLUMNS: &[(&str, &str)] = &[
    ("t", "s"),
    ("M", "μ"),
    ("Mx", "μ"),
    ("My", "μ"),
    ("Mz", "μ"),
    ("monopole_density", ""),
    ("double_charge_density", ""),
    ("energy", "K"),
];

/// A resolved dynamics command.
#[derive(Clone, Debug, PartialEq)]
pub enum DynamicsSpec {
    /// `dynamics single_flip, ...`: the rule later runs use.
    Rule(Box<RuleSpec>),
    /// `evolve`, `quench`, `step`: a physical-time run.
    Protocol(Box<ProtocolSpec>),
}

/// A checked `dynamics` statement.
#[derive(Clone, Debug, PartialEq)]
pub struct RuleSpec {
    pub acceptance: AcceptanceRule,
    pub rates: RatesSpec,
    pub execution: ExecutionChoice,
    pub transverse: TransverseSource,
}

/// How the attempt times were given.
#[derive(Clone, Debug, PartialEq)]
pub enum RatesSpec {
    /// Every spin attempts every τ0.
    Uniform { attempt_time_seconds: f64 },
    /// The bimodal preset, already a table (fast for open gates, slow or frozen for h⊥ = 0).
    Gated {
        attempt_times: AttemptTimes,
        description: String,
    },
    /// A rhai function of |h⊥|/|g| returning the attempt time in seconds, evaluated once
    /// per gate class when the statement runs.
    Law { function: String, span: Span },
}

/// The attempt-time table of a rate law before it is evaluated (at run time). Every
/// entry is NaN, which stdlib refuses, so it can never be simulated by mistake.
pub fn unevaluated_law() -> AttemptTimes {
    AttemptTimes {
        attempt_time_seconds: [f64::NAN; GATE_CLASS_COUNT],
    }
}

impl RuleSpec {
    /// The model's dynamics declaration (a rate law's table is filled in when it runs).
    pub fn declaration(&self) -> DynamicsDecl {
        let (attempt_times, rates_description, rate_law) = match &self.rates {
            RatesSpec::Uniform {
                attempt_time_seconds,
            } => (
                AttemptTimes {
                    attempt_time_seconds: [*attempt_time_seconds; GATE_CLASS_COUNT],
                },
                format!("uniform τ0 = {}", format_seconds(*attempt_time_seconds)),
                None,
            ),
            RatesSpec::Gated {
                attempt_times,
                description,
            } => (attempt_times.clone(), description.clone(), None),
            RatesSpec::Law { function, .. } => (
                unevaluated_law(),
                format!("rate law `{function}` of |h⊥|"),
                Some(function.clone()),
            ),
        };
        DynamicsDecl {
            acceptance: self.acceptance,
            attempt_times,
            rates_description,
            execution: self.execution,
            transverse: self.transverse,
            rate_law,
        }
    }
}

/// A checked `evolve`, `quench` or `step`.
#[derive(Clone, Debug, PartialEq)]
pub struct ProtocolSpec {
    /// Where the table goes (`last_evolve` etc. when unnamed).
    pub target: String,
    /// `evolve`, `quench` or `step`.
    pub keyword: String,
    /// The run in words, for output and provenance.
    pub description: String,
    pub protocol: ProtocolKind,
    /// Temperature of the recording (K).
    pub temperature_kelvin: f64,
    /// Length of the recording (s).
    pub duration_seconds: f64,
    /// Spacing of the time grid (s).
    pub sample_interval_seconds: f64,
    /// Samples of the grid (both ends included).
    pub samples: u64,
    /// Equilibrium Metropolis sweeps (zero field) at the starting temperature first.
    pub equilibration_sweeps: u64,
    pub start: StartState,
    /// Projection axis of `M` (default: the field direction, else [0, 0, 1]).
    pub axis: Option<[f64; 3]>,
}

/// What happens before t = 0.
#[derive(Clone, Debug, PartialEq)]
pub enum ProtocolKind {
    /// Record at the run temperature with the declared field (if any) on.
    Evolve,
    /// Hold the field for `preparation_seconds`, switch it off at t = 0.
    Quench {
        field_tesla: f64,
        direction: [f64; 3],
        /// `None`: the moment of the declared field.
        moment_bohr_magnetons: Option<f64>,
        preparation_seconds: f64,
    },
    /// Evolve at the initial temperature, step to the run temperature at t = 0.
    Step {
        initial_temperature_kelvin: f64,
        preparation_seconds: f64,
    },
}

impl DynamicsSpec {
    /// The model change a `dynamics` statement makes (see `CommandSpec::declare`).
    pub fn declare(&self, model: &mut Model) {
        if let DynamicsSpec::Rule(rule) = self {
            model.dynamics = Some(rule.declaration());
        }
    }
}

/// Samples of a grid `0, Δt, 2Δt, ... ≤ duration` (as stdlib counts them, with the same
/// tolerance for a duration that is a whole number of intervals up to rounding).
pub fn sample_count(duration_seconds: f64, interval_seconds: f64) -> f64 {
    (duration_seconds / interval_seconds * (1.0 + 1e-12)).floor() + 1.0
}

/// A quantity as written: "0.5 T".
fn quantity_text(q: &Quantity) -> String {
    match &q.unit {
        Some(unit) => format!("{} {}", q.number.text, unit.name),
        None => q.number.text.clone(),
    }
}

/// How the physical-time protocols word the problems of their phrase.
struct DynamicsVoice<'v> {
    keyword: &'v str,
    keyword_span: Span,
    connectives: &'v [&'v str],
    example: &'v str,
}

impl PhraseVoice for DynamicsVoice<'_> {
    fn stray_value(&self, value: &Arg) -> Problem {
        Problem::new(
            ErrorKind::Value,
            value.span(),
            "a value here needs a connecting word before it",
        )
        .with_help(format!("write e.g. `{}`", self.example))
    }
    fn unknown_word(&self, word: &Ident) -> Problem {
        Problem::new(
            ErrorKind::Value,
            word.span,
            format!(
                "`{}` takes {}, not `{}`",
                self.keyword,
                list_words(self.connectives),
                word.name
            ),
        )
        .with_help(format!("write e.g. `{}`", self.example))
    }
    fn no_value(&self, word: &Ident, _known: bool) -> Option<Problem> {
        Some(no_value_problem(word))
    }
    fn missing(&self, word: &str) -> Option<Problem> {
        let keyword = self.keyword;
        let meaning = match word {
            "for" => "how long to record, `for 10 ms`",
            "at" => "the temperature, `at 0.4 K`",
            "from" if keyword == "quench" => "the field before t = 0, `from 0.5 T along [0, 0, 1]`",
            "to" if keyword == "quench" => "the field after t = 0, `to 0 T`",
            "from" => "the temperature before t = 0, `from 2 K`",
            _ => "the temperature after t = 0, `to 0.5 K`",
        };
        Some(
            Problem::new(
                ErrorKind::Value,
                self.keyword_span,
                format!("`{keyword}` needs `{word}`: {meaning}"),
            )
            .with_help(format!("write e.g. `{}`", self.example)),
        )
    }
}

impl Checker<'_> {
    pub(super) fn check_dynamics(
        &mut self,
        statement: &Statement,
        target: Option<&Ident>,
        args: &[Arg],
        options: &[Opt],
        view: &mut View,
    ) -> Option<Checked> {
        let spec = if statement.keyword.name == "dynamics" {
            self.dynamics_rule(statement, target, args, options, view)
                .map(|rule| DynamicsSpec::Rule(Box::new(rule)))
        } else {
            self.protocol(statement, target, args, options, view)
                .map(|protocol| DynamicsSpec::Protocol(Box::new(protocol)))
        };
        spec.map(|spec| Checked::Command(CommandSpec::Dynamics(spec)))
    }

    /// `dynamics single_flip, acceptance = ..., attempt_time = ... | rates = ...`.
    fn dynamics_rule(
        &mut self,
        statement: &Statement,
        target: Option<&Ident>,
        args: &[Arg],
        options: &[Opt],
        view: &mut View,
    ) -> Option<RuleSpec> {
        // Even a failed declaration counts, so later lines get no follow-up errors.
        view.dynamics = true;
        let before = self.problems.len();
        let example = "dynamics single_flip, acceptance = metropolis, attempt_time = 1 µs";
        if let Some(name) = target {
            self.push(Problem::new(
                ErrorKind::Value,
                name.span,
                "a dynamics rule is part of the model, not a result; write it without `NAME =`",
            ));
        }
        match args.first() {
            None => self.push(
                Problem::new(
                    ErrorKind::Value,
                    statement.keyword.span,
                    "`dynamics` needs the rule: `single_flip`",
                )
                .with_help(format!("write e.g. `{example}`")),
            ),
            Some(Arg::Value(Value::Word(rule))) if DYNAMICS_RULES.contains(&rule.name.as_str()) => {
            }
            Some(Arg::Value(Value::Word(rule))) => self.push(
                Problem::new(
                    ErrorKind::Name,
                    rule.span,
                    format!("unknown dynamics rule `{}`", rule.name),
                )
                .with_help(
                    did_you_mean(&rule.name, DYNAMICS_RULES.iter().copied())
                        .unwrap_or_else(|| format!("available: {}", list_words(DYNAMICS_RULES))),
                ),
            ),
            Some(other) => self.push(
                Problem::new(
                    ErrorKind::Value,
                    other.span(),
                    "`dynamics` is followed by the rule `single_flip`, then options",
                )
                .with_help(format!("write e.g. `{example}`")),
            ),
        }
        for extra in args.iter().skip(1) {
            self.push(
                Problem::new(
                    ErrorKind::Value,
                    extra.span(),
                    "a dynamics rule is one word; its settings are options (`name = value`)",
                )
                .with_help(format!("write e.g. `{example}`")),
            );
        }
        let options = self.options(options, DYNAMICS_OPTIONS, "dynamics");
        let find = |key: &str| options.iter().find(|o| o.key.name == key).copied();
        let acceptance = match find("acceptance") {
            Some(o) => self.dynamics_acceptance(&o.value),
            None => Some(AcceptanceRule::Metropolis),
        };
        let execution = match find("execution") {
            Some(o) => self
                .word(&o.value, "`execution`", EXECUTION_CHOICES)
                .map(|w| match w.as_str() {
                    "attempts" => ExecutionChoice::AttemptBased,
                    "rejection_free" => ExecutionChoice::RejectionFree,
                    _ => ExecutionChoice::Auto,
                }),
            None => Some(ExecutionChoice::Auto),
        };
        let transverse = match find("transverse") {
            Some(o) => match self.word(&o.value, "`transverse`", TRANSVERSE_SOURCES) {
                Some(w) if w == "dipolar" => Some(TransverseSource::Dipolar),
                Some(_) => Some(TransverseSource::Neighbours),
                None => None,
            },
            None => Some(TransverseSource::Neighbours),
        };
        let rates = self.rates(statement, &options, view);
        if self.problems.len() > before {
            return None;
        }
        Some(RuleSpec {
            acceptance: acceptance?,
            rates: rates?,
            execution: execution?,
            transverse: transverse?,
        })
    }

    fn dynamics_acceptance(&mut self, value: &Value) -> Option<AcceptanceRule> {
        if let Value::Word(word) = value {
            if word.name == "heat_bath" {
                self.push(
                    Problem::new(
                        ErrorKind::Name,
                        word.span,
                        "physical-time dynamics calls the heat-bath rule 1/(1 + e^{ΔE/T}) `glauber`",
                    )
                    .with_help("write `acceptance = glauber`"),
                );
                return None;
            }
        }
        self.word(value, "`acceptance`", DYNAMICS_ACCEPTANCE_RULES)
            .map(|w| {
                if w == "glauber" {
                    AcceptanceRule::Glauber
                } else {
                    AcceptanceRule::Metropolis
                }
            })
    }

    /// `rates = uniform` (with `attempt_time`), `gated` (with `fast` and `slow` or
    /// `ratio`) or `law` (with `law = FUNCTION`).
    fn rates(&mut self, statement: &Statement, options: &[&Opt], view: &View) -> Option<RatesSpec> {
        let find = |key: &str| options.iter().find(|o| o.key.name == key).copied();
        let kind = match find("rates") {
            Some(o) => self.word(&o.value, "`rates`", RATE_KINDS)?,
            None if find("law").is_some() => "law".to_string(),
            None if find("fast").is_some() => "gated".to_string(),
            None => "uniform".to_string(),
        };
        let takes: &[&str] = match kind.as_str() {
            "gated" => &["fast", "slow", "ratio"],
            "law" => &["law"],
            _ => &["attempt_time"],
        };
        let mut misplaced = false;
        for key in ["attempt_time", "fast", "slow", "ratio", "law"] {
            if let Some(o) = find(key).filter(|_| !takes.contains(&key)) {
                misplaced = true;
                self.push(Problem::new(
                    ErrorKind::Value,
                    o.key.span,
                    format!(
                        "`{key}` does not go with `rates = {kind}`, which takes {}",
                        list_words(takes)
                    ),
                ));
            }
        }
        if misplaced {
            return None;
        }
        match kind.as_str() {
            "gated" => {
                let Some(fast) = find("fast") else {
                    self.push(
                        Problem::new(
                            ErrorKind::Value,
                            statement.keyword.span,
                            "`rates = gated` needs `fast`, the attempt time of spins with h⊥ ≠ 0",
                        )
                        .with_help("write e.g. `rates = gated, fast = 1 µs, slow = 10 ms`"),
                    );
                    return None;
                };
                let fast_seconds = self.positive(fast, Dimension::Time, "`fast`")?;
                let slow = match (find("slow"), find("ratio")) {
                    (Some(_), Some(ratio)) => {
                        self.push(Problem::new(
                            ErrorKind::Value,
                            ratio.key.span,
                            "give either `slow` or `ratio`, not both",
                        ));
                        return None;
                    }
                    (Some(slow), None) => match &slow.value {
                        Value::Word(w) if w.name == "frozen" => SlowGate::Frozen,
                        _ => {
                            let slow_seconds = self.positive(slow, Dimension::Time, "`slow`")?;
                            if slow_seconds < fast_seconds {
                                self.push(Problem::new(
                                    ErrorKind::Value,
                                    slow.value.span(),
                                    "`slow` (spins with h⊥ = 0) is shorter than `fast`; the gated \
                                     class is the slow one (for any other table use a rate law)",
                                ));
                                return None;
                            }
                            SlowGate::Ratio(slow_seconds / fast_seconds)
                        }
                    },
                    (None, Some(ratio)) => {
                        let Value::Quantity(q) = &ratio.value else {
                            self.push(Problem::new(
                                ErrorKind::Value,
                                ratio.value.span(),
                                "`ratio` is a number ≥ 1 (τ_slow/τ_fast)",
                            ));
                            return None;
                        };
                        let r =
                            self.convert(q, None, Dimension::Dimensionless, "`ratio`", false)?;
                        if r < 1.0 {
                            self.push(Problem::new(
                                ErrorKind::Value,
                                q.span,
                                "`ratio` = τ_slow/τ_fast must be at least 1",
                            ));
                            return None;
                        }
                        SlowGate::Ratio(r)
                    }
                    (None, None) => SlowGate::Ratio(DEFAULT_SLOW_RATIO),
                };
                let attempt_times = match AttemptTimes::bimodal(fast_seconds, slow) {
                    Ok(t) => t,
                    Err(error) => {
                        self.push(Problem::new(
                            ErrorKind::Value,
                            fast.value.span(),
                            error.to_string(),
                        ));
                        return None;
                    }
                };
                let description = match slow {
                    SlowGate::Frozen => format!(
                        "gated: fast = {} for h⊥ ≠ 0, frozen for h⊥ = 0",
                        format_seconds(fast_seconds)
                    ),
                    SlowGate::Ratio(r) => format!(
                        "gated: fast = {} for h⊥ ≠ 0, slow = {} for h⊥ = 0 (ratio {})",
                        format_seconds(fast_seconds),
                        format_seconds(attempt_times.attempt_time_seconds[0]),
                        units::format_number(r)
                    ),
                };
                Some(RatesSpec::Gated {
                    attempt_times,
                    description,
                })
            }
            "law" => {
                let Some(law) = find("law") else {
                    self.push(
                        Problem::new(
                            ErrorKind::Value,
                            statement.keyword.span,
                            "`rates = law` needs `law = FUNCTION`, a rhai function of |h⊥|/|g| \
                             returning the attempt time in seconds",
                        )
                        .with_help("define `rhai { fn tau_of_h(h) { 1e-6 * (1.0 + h) } }`, then write `rates = law, law = tau_of_h`"),
                    );
                    return None;
                };
                let Value::Word(function) = &law.value else {
                    self.push(Problem::new(
                        ErrorKind::Value,
                        law.value.span(),
                        "`law` names a rhai function of one argument, e.g. `law = tau_of_h`",
                    ));
                    return None;
                };
                self.rate_law_exists(function, view)?;
                Some(RatesSpec::Law {
                    function: function.name.clone(),
                    span: function.span,
                })
            }
            _ => {
                let Some(tau) = find("attempt_time") else {
                    self.push(
                        Problem::new(
                            ErrorKind::Value,
                            statement.keyword.span,
                            "`dynamics` needs the attempt time τ0, `attempt_time = ...` with a \
                             time unit (one sweep of N attempts is τ0)",
                        )
                        .with_help(
                            "write e.g. `dynamics single_flip, acceptance = metropolis, attempt_time = 1 µs`",
                        ),
                    );
                    return None;
                };
                let seconds = self.positive(tau, Dimension::Time, "`attempt_time`")?;
                Some(RatesSpec::Uniform {
                    attempt_time_seconds: seconds,
                })
            }
        }
    }

    /// The rate law must be a rhai function of one argument defined by now.
    fn rate_law_exists(&mut self, function: &Ident, view: &View) -> Option<()> {
        let name = function.name.as_str();
        let arities: Vec<usize> = view
            .functions
            .iter()
            .filter(|(n, _)| n == name)
            .map(|(_, a)| *a)
            .collect();
        if arities.contains(&1) || view.lenient_script {
            return Some(());
        }
        if !arities.is_empty() {
            let list: Vec<String> = arities.iter().map(usize::to_string).collect();
            self.push(Problem::new(
                ErrorKind::Script,
                function.span,
                format!(
                    "the rate law `{name}` takes {} argument(s); it must take one, |h⊥|/|g|",
                    list.join(" or ")
                ),
            ));
            return None;
        }
        let help = did_you_mean(
            name,
            view.functions
                .iter()
                .filter(|(_, a)| *a == 1)
                .map(|(n, _)| n.as_str()),
        )
        .unwrap_or_else(|| {
            if BUILTIN_FUNCTIONS.contains(&name) {
                format!(
                    "`{name}` is a built-in; wrap it in a rhai function that returns seconds, \
                     e.g. `rhai {{ fn tau_of_h(h) {{ 1e-6 * {name}(h) }} }}`"
                )
            } else {
                format!("define it first: `rhai {{ fn {name}(h) {{ 1e-6 * (1.0 + h) }} }}`")
            }
        });
        self.push(
            Problem::new(
                ErrorKind::Name,
                function.span,
                format!("unknown rate-law function `{name}`"),
            )
            .with_help(help),
        );
        None
    }

    /// `evolve for D at T`, `quench B from B0 along [..] to 0 T at T for D`,
    /// `step T from T0 to T1 for D`, with options.
    fn protocol(
        &mut self,
        statement: &Statement,
        target: Option<&Ident>,
        args: &[Arg],
        options: &[Opt],
        view: &mut View,
    ) -> Option<ProtocolSpec> {
        let before = self.problems.len();
        let keyword = statement.keyword.name.as_str();
        let target = match target {
            Some(_) => self.target_name(target),
            None => Some(format!("last_{keyword}")),
        };
        let (subject, connectives, allowed_options, example): (_, &[&str], _, _) = match keyword {
            "quench" => (
                Some("B"),
                &["from", "to", "at", "for"],
                QUENCH_OPTIONS,
                "kick = quench B from 0.5 T along [0, 0, 1] to 0 T at 0.3 K for 1 ms, sample_every = 1 µs, prepare = 100 µs",
            ),
            "step" => (
                Some("T"),
                &["from", "to", "for"],
                STEP_OPTIONS,
                "drop = step T from 2 K to 0.5 K for 10 ms, sample_every = 10 µs",
            ),
            _ => (
                None,
                &["for", "at"],
                EVOLVE_OPTIONS,
                "noise = evolve for 10 ms at 0.4 K, sample_every = 1 µs",
            ),
        };
        let parts = self.dynamics_phrase(statement, args, subject, connectives, example);
        let options = self.options(options, allowed_options, keyword);
        let find = |key: &str| options.iter().find(|o| o.key.name == key).copied();
        let part = |word: &str| parts.as_ref().and_then(|p| p.value(word));
        let duration = part("for").and_then(|v| self.duration(v, "the duration after `for`"));
        let mut phrase_text = String::new();
        let (protocol, temperature) = match keyword {
            "quench" => {
                let field = part("from").and_then(|v| self.quench_field(v));
                let to_ok = part("to").and_then(|v| self.quench_target(v));
                let temperature = part("at").and_then(|v| self.phrase_temperature(v, "`at`"));
                let preparation = match find("prepare") {
                    Some(o) => self.non_negative_time(o, "`prepare`"),
                    // As long as the recording: enough to magnetise the state for any
                    // recording long enough to watch it decay.
                    None => duration,
                };
                let moment = match find("moment") {
                    Some(o) => self.positive(o, Dimension::Moment, "`moment`").map(Some),
                    None if view.field_direction => Some(None),
                    None => {
                        self.push(
                            Problem::new(
                                ErrorKind::Value,
                                statement.keyword.span,
                                "`quench` needs the moment per spin, `moment = ...` in µB (or a \
                                 `field` declared earlier, whose moment it uses)",
                            )
                            .with_help(format!("write e.g. `{example}, moment = 10 µB`")),
                        );
                        None
                    }
                };
                let protocol = match (field, to_ok, preparation, moment) {
                    (Some((b, n)), Some(()), Some(prep), Some(moment)) => {
                        phrase_text = format!(
                            "quench B from {} along [{}] to 0 T at {} for {}, prepared for {}",
                            units::with_unit(b, "T"),
                            n.map(units::format_number).join(", "),
                            temperature
                                .map(|t| units::with_unit(t, "K"))
                                .unwrap_or_default(),
                            duration.map(format_seconds).unwrap_or_default(),
                            format_seconds(prep)
                        );
                        Some(ProtocolKind::Quench {
                            field_tesla: b,
                            direction: n,
                            moment_bohr_magnetons: moment,
                            preparation_seconds: prep,
                        })
                    }
                    _ => None,
                };
                (protocol, temperature)
            }
            "step" => {
                let from = part("from").and_then(|v| self.phrase_temperature(v, "`from`"));
                let to = part("to").and_then(|v| self.phrase_temperature(v, "`to`"));
                let preparation = match find("prepare") {
                    Some(o) => self.non_negative_time(o, "`prepare`"),
                    None => Some(0.0),
                };
                let protocol = match (from, preparation) {
                    (Some(t0), Some(prep)) => {
                        phrase_text = format!(
                            "step T from {} to {} for {}",
                            units::with_unit(t0, "K"),
                            to.map(|t| units::with_unit(t, "K")).unwrap_or_default(),
                            duration.map(format_seconds).unwrap_or_default(),
                        );
                        if prep > 0.0 {
                            phrase_text
                                .push_str(&format!(", prepared for {}", format_seconds(prep)));
                        }
                        Some(ProtocolKind::Step {
                            initial_temperature_kelvin: t0,
                            preparation_seconds: prep,
                        })
                    }
                    _ => None,
                };
                (protocol, to)
            }
            _ => {
                let temperature = part("at").and_then(|v| self.phrase_temperature(v, "`at`"));
                phrase_text = format!(
                    "evolve for {} at {}",
                    duration.map(format_seconds).unwrap_or_default(),
                    temperature
                        .map(|t| units::with_unit(t, "K"))
                        .unwrap_or_default()
                );
                (Some(ProtocolKind::Evolve), temperature)
            }
        };
        let interval = match find("sample_every") {
            Some(o) => self.positive(o, Dimension::Time, "`sample_every`"),
            None => duration.map(|d| d / DEFAULT_SAMPLE_INTERVALS),
        };
        let mut samples = None;
        if let (Some(d), Some(dt)) = (duration, interval) {
            let span = find("sample_every")
                .map(|o| o.value.span())
                .unwrap_or(statement.keyword.span);
            let count = sample_count(d, dt);
            if dt > d * (1.0 + 1e-12) {
                self.push(Problem::new(
                    ErrorKind::Value,
                    span,
                    format!(
                        "`sample_every` = {} is longer than the run ({}); the series would hold one sample",
                        format_seconds(dt),
                        format_seconds(d)
                    ),
                ));
            } else if count > MAX_SAMPLES as f64 {
                self.push(
                    Problem::new(
                        ErrorKind::Value,
                        span,
                        format!(
                            "{} sampled every {} gives {} samples; a run records at most {MAX_SAMPLES}",
                            format_seconds(d),
                            format_seconds(dt),
                            units::format_number(count)
                        ),
                    )
                    .with_help(format!(
                        "sample less often (`sample_every` ≥ {}) or run shorter",
                        format_seconds(d / (MAX_SAMPLES - 1) as f64)
                    )),
                );
            } else {
                samples = Some(count as u64);
            }
        }
        let equilibrate = match find("equilibrate") {
            Some(o) => self.sweeps(&o.value, "`equilibrate`"),
            None => Some(DEFAULT_EQUILIBRATION_SWEEPS),
        };
        let start = match find("start") {
            Some(o) => self
                .word(&o.value, "`start`", START_STATES)
                .map(|w| match w.as_str() {
                    "ice" => StartState::Ice,
                    "all_in_all_out" => StartState::AllInAllOut,
                    _ => StartState::Random,
                }),
            None => Some(StartState::Random),
        };
        let axis = match find("axis") {
            Some(o) => self.axis(&o.value).map(Some),
            None => Some(None),
        };
        self.require_physical_time_model(statement, view, "runs in physical time and needs one");
        if self.problems.len() > before {
            return None;
        }
        let (target, duration, interval) = (target?, duration?, interval?);
        let mut description = phrase_text;
        description.push_str(&format!(", sampled every {}", format_seconds(interval)));
        let columns = TIME_SERIES_COLUMNS
            .iter()
            .map(|(name, unit)| ColumnView {
                name: name.to_string(),
                unit: unit.to_string(),
                derived: false,
            })
            .collect();
        view.set(&target, NameView::Table(columns));
        Some(ProtocolSpec {
            target,
            keyword: keyword.to_string(),
            description,
            protocol: protocol?,
            temperature_kelvin: temperature?,
            duration_seconds: duration,
            sample_interval_seconds: interval,
            samples: samples?,
            equilibration_sweeps: equilibrate?,
            start: start?,
            axis: axis?,
        })
    }

    /// Reads `[SUBJECT] WORD VALUE WORD VALUE ...`; every connecting word of `connectives`
    /// must appear once.
    fn dynamics_phrase<'a>(
        &mut self,
        statement: &Statement,
        args: &'a [Arg],
        subject: Option<&str>,
        connectives: &[&str],
        example: &str,
    ) -> Option<Phrase<'a>> {
        let keyword = statement.keyword.name.as_str();
        let before = self.problems.len();
        let mut rest = args;
        if let Some(subject) = subject {
            match args.first() {
                Some(Arg::Value(Value::Word(w))) if w.name == subject => rest = &args[1..],
                Some(Arg::Value(Value::Word(w))) => {
                    let what = if subject == "B" {
                        "the field `B`"
                    } else {
                        "the temperature `T`"
                    };
                    let message = if keyword == "quench" && w.name == "T" {
                        "`quench` switches off the field `B`; a temperature change is `step T from ... to ...`".to_string()
                    } else if keyword == "step" && w.name == "B" {
                        "`step` changes the temperature `T`; a field switched off is `quench B from ...`".to_string()
                    } else {
                        format!("`{keyword}` changes {what}, not `{}`", w.name)
                    };
                    self.push(
                        Problem::new(ErrorKind::Name, w.span, message)
                            .with_help(format!("write e.g. `{example}`")),
                    );
                    rest = &args[1..];
                }
                _ => {
                    self.push(
                        Problem::new(
                            ErrorKind::Value,
                            args.first()
                                .map(Arg::span)
                                .unwrap_or(statement.keyword.span),
                            format!("`{keyword}` is followed by what it changes, `{subject}`"),
                        )
                        .with_help(format!("write e.g. `{example}`")),
                    );
                    return None;
                }
            }
        }
        let rules = PhraseRules {
            words: connectives,
            bare: &[],
            // A wrong subject already says what the phrase should read.
            required: self.problems.len() == before,
            repeatable: false,
            after_unknown: AfterUnknown::ItsValue,
        };
        let voice = DynamicsVoice {
            keyword,
            keyword_span: statement.keyword.span,
            connectives,
            example,
        };
        let phrase = self.read_phrase(rest, &rules, &voice);
        phrase.filter(|_| self.problems.len() == before)
    }

    fn duration(&mut self, value: &Value, what: &str) -> Option<f64> {
        let Value::Quantity(q) = value else {
            self.push(Problem::new(
                ErrorKind::Value,
                value.span(),
                format!("{what} is a time such as `10 ms`"),
            ));
            return None;
        };
        let seconds = self.convert(q, None, Dimension::Time, what, false)?;
        if seconds <= 0.0 {
            self.push(Problem::new(
                ErrorKind::Value,
                q.span,
                format!("{what} must be positive"),
            ));
            return None;
        }
        Some(seconds)
    }

    fn non_negative_time(&mut self, option: &Opt, what: &str) -> Option<f64> {
        let Value::Quantity(q) = &option.value else {
            self.push(Problem::new(
                ErrorKind::Value,
                option.value.span(),
                format!("{what} is a time such as `100 µs`"),
            ));
            return None;
        };
        let seconds = self.convert(q, None, Dimension::Time, what, false)?;
        if seconds < 0.0 {
            self.push(Problem::new(
                ErrorKind::Value,
                q.span,
                format!("{what} cannot be negative"),
            ));
            return None;
        }
        Some(seconds)
    }

    fn phrase_temperature(&mut self, value: &Value, what: &str) -> Option<f64> {
        match value {
            Value::Quantity(q) => {
                self.temperature(q, None, &format!("the temperature after {what}"))
            }
            other => {
                self.push(Problem::new(
                    ErrorKind::Value,
                    other.span(),
                    format!("the value after {what} is a temperature such as `0.4 K`"),
                ));
                None
            }
        }
    }

    /// `0.5 T along [0, 0, 1]` (or `[0, 0, 0.5] T`): |B| in tesla and its direction.
    fn quench_field(&mut self, value: &Value) -> Option<(f64, [f64; 3])> {
        if let Value::Quantity(q) = value {
            self.push(
                Problem::new(
                    ErrorKind::Value,
                    q.span,
                    "the field before the quench needs a direction",
                )
                .with_help(format!("write `from {} along [0, 0, 1]`", quantity_text(q))),
            );
            return None;
        }
        let (vector, direction) = self.field_vector(value)?;
        let magnitude =
            (vector[0] * vector[0] + vector[1] * vector[1] + vector[2] * vector[2]).sqrt();
        match direction {
            Some(n) if magnitude > 0.0 => Some((magnitude, n)),
            _ => {
                self.push(Problem::new(
                    ErrorKind::Value,
                    value.span(),
                    "the field switched off by the quench must be non-zero",
                ));
                None
            }
        }
    }

    /// The field after t = 0: only `0 T` (stdlib's quench switches the field off).
    fn quench_target(&mut self, value: &Value) -> Option<()> {
        let magnitude = match value {
            Value::Quantity(q) => self.convert(
                q,
                None,
                Dimension::MagneticField,
                "the field after `to`",
                false,
            )?,
            other => {
                let (vector, _) = self.field_vector(other)?;
                (vector[0] * vector[0] + vector[1] * vector[1] + vector[2] * vector[2]).sqrt()
            }
        };
        if magnitude != 0.0 {
            self.push(
                Problem::new(
                    ErrorKind::NotImplemented,
                    value.span(),
                    "this version's quench switches the field off at t = 0; a quench to a \
                     non-zero field is not implemented",
                )
                .with_help("write `to 0 T`"),
            );
            return None;
        }
        Some(())
    }

    /// A number of sweeps: `1000` or `1000 sweeps`.
    fn sweeps(&mut self, value: &Value, what: &str) -> Option<u64> {
        if let Value::Quantity(q) = value {
            if q.unit
                .as_ref()
                .is_some_and(|u| u.name == "sweeps" || u.name == "sweep")
            {
                let bare = Value::Quantity(Quantity {
                    number: q.number.clone(),
                    unit: None,
                    span: q.span,
                });
                return self.count(&bare, what, 0, u64::MAX);
            }
        }
        self.count(value, what, 0, u64::MAX)
    }

    fn axis(&mut self, value: &Value) -> Option<[f64; 3]> {
        let v = self.vector(value, Dimension::Dimensionless, "`axis`")?;
        if v.iter().all(|c| *c == 0.0) {
            self.push(Problem::new(
                ErrorKind::Value,
                value.span(),
                "the axis [0, 0, 0] has no orientation",
            ));
            return None;
        }
        Some([v[0], v[1], v[2]])
    }
}
