//! Checking of the monopole commands: tracking (mean-square displacement, distinct sites),
//! reachable sites, and the picture of one reachable cluster.
//!
//! ```text
//! walk  = monopoles for 10 ms at 0.3 K, sample_every = 10 µs
//! reach = reachable within 20 hops at 0.3 K, samples = 50, mode = both
//! pic   = cluster within 12 hops at 0.3 K, mode = path
//! ```
//!
//! Reads the phrase and options of a command statement, resolves names and units, and
//! returns a typed spec for `run/monopoles.rs`. All three follow the declared dynamics rule
//! (`model.dynamics`): tracking runs its kinetics, the reachable-site searches take their
//! open (fast) gate classes from its attempt times.

use super::phrase::{given_twice_problem, AfterUnknown, PhraseRules, PhraseVoice};
use super::{list_words, Checked, Checker, ColumnView, CommandSpec, NameView, View};
use crate::ast::{Arg, Ident, Opt, Quantity, Statement, Value};
use crate::diagnostic::{did_you_mean, ErrorKind, Problem};
use crate::units::Dimension;
use crate::workspace::RESERVED_SHOW_NAMES;

/// Options of `monopoles`.
pub const MONOPOLES_OPTIONS: &[&str] = &[
    "sample_every",
    "equilibrate",
    "loops",
    "start",
    "separation",
];
/// Options of `reachable`.
pub const REACHABLE_OPTIONS: &[&str] = &[
    "samples",
    "mode",
    "open_ratio",
    "equilibrate",
    "loops",
    "start",
    "separation",
    "decorrelate",
];
/// Options of `cluster`.
pub const CLUSTER_OPTIONS: &[&str] = &[
    "mode",
    "open_ratio",
    "equilibrate",
    "loops",
    "start",
    "separation",
    "width",
    "height",
];
/// Start states of `monopoles`.
pub const TRACK_STARTS: &[&str] = &["random", "ice", "pair"];
/// Backgrounds of `reachable` and `cluster` (the monopole is always the end of a pair).
pub const REACH_STARTS: &[&str] = &["random", "ice"];
/// Search modes of `reachable` (`cluster` takes one of the first two).
pub const REACH_MODES: &[&str] = &["path", "static", "both"];

/// The most sample intervals of one tracking run: every monopole position is kept, and
/// the mean-square displacement averages over all pairs of grid times.
pub const MAX_TRACK_INTERVALS: f64 = 10_000.0;
/// The most hops a reachable-site search may go.
pub const MAX_HOPS: u64 = 1000;
/// The most samples (clusters) of one `reachable`.
pub const MAX_REACH_SAMPLES: u64 = 100_000;
/// Default number of sample intervals when `sample_every` is not given.
pub const DEFAULT_TRACK_INTERVALS: f64 = 100.0;
/// Default string length between the two monopoles of a placed pair (hops).
pub const DEFAULT_SEPARATION_HOPS: u64 = 6;
/// Default factor: a gate class is open if its attempt time is at most this many times
/// the fastest one.
pub const DEFAULT_OPEN_RATIO: f64 = 10.0;

/// The configuration a monopole command starts from.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Background {
    /// Independent random pseudospins.
    Random,
    /// The two-in–two-out state of stdlib (`Start::IceState`).
    Ice,
}

/// How the starting state is prepared: a background, equilibrated at the run temperature
/// by single-flip Metropolis sweeps (with loop moves if asked), then optionally one
/// monopole pair placed at the ends of a string of flipped spins.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Preparation {
    pub background: Background,
    pub equilibration_sweeps: u64,
    /// Ice-manifold loop moves after every equilibration sweep.
    pub loops_per_sweep: u64,
    /// `Some(k)`: place a ± pair `k` hops apart (a self-avoiding string of flipped spins
    /// through neutral tetrahedra) after equilibrating.
    pub pair_separation_hops: Option<u32>,
}

/// `monopoles for DURATION at T`: kinetics with monopole tracking.
#[derive(Clone, Debug, PartialEq)]
pub struct TrackSpec {
    pub target: String,
    pub duration_seconds: f64,
    pub temperature_kelvin: f64,
    pub sample_interval_seconds: f64,
    pub preparation: Preparation,
}

/// Which reachable-site counts a `reachable` computes.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ReachModes {
    Path,
    Static,
    Both,
}

impl ReachModes {
    pub fn path(self) -> bool {
        matches!(self, ReachModes::Path | ReachModes::Both)
    }
    pub fn r#static(self) -> bool {
        matches!(self, ReachModes::Static | ReachModes::Both)
    }
}

/// `reachable within N hops at T`: reachable diamond sites N(n) averaged over samples.
#[derive(Clone, Debug, PartialEq)]
pub struct ReachSpec {
    pub target: String,
    pub max_hops: u32,
    pub temperature_kelvin: f64,
    pub samples: u64,
    pub modes: ReachModes,
    pub open_ratio: f64,
    pub preparation: Preparation,
    /// Sweeps (with the preparation's loop moves) between two samples.
    pub decorrelation_sweeps: u64,
}

/// `cluster within N hops at T`: the picture of one reachable cluster.
#[derive(Clone, Debug, PartialEq)]
pub struct ClusterSpec {
    pub target: String,
    pub max_hops: u32,
    pub temperature_kelvin: f64,
    /// Path-dependent (`true`) or static snapshot.
    pub path_dependent: bool,
    pub open_ratio: f64,
    pub preparation: Preparation,
    pub width_px: u32,
    pub height_px: u32,
}

/// A resolved monopoles command.
#[derive(Clone, Debug, PartialEq)]
pub enum MonopolesSpec {
    Track(TrackSpec),
    Reachable(ReachSpec),
    Cluster(ClusterSpec),
}

/// Columns of a `monopoles` table: (name, unit).
pub const TRACK_COLUMNS: &[(&str, &str)] = &[
    ("t", "s"),
    ("msd", "bond²"),
    ("distinct_sites", ""),
    ("monopoles", ""),
    ("hops", ""),
];
/// Columns of the gate-class table `NAME_gates` of a `monopoles` run.
pub const GATE_COLUMNS: &[(&str, &str)] = &[
    ("gate_class", ""),
    ("h_perp", "g"),
    ("attempt_time", "s"),
    ("hops", ""),
    ("share", ""),
];
/// The suffix of the gate-class table of a `monopoles` run.
pub const GATE_TABLE_SUFFIX: &str = "_gates";

/// The columns of a `reachable` table for `modes`.
pub fn reach_columns(modes: ReachModes) -> Vec<(&'static str, &'static str)> {
    let mut columns = vec![("n", "")];
    if modes.path() {
        columns.push(("sites_path", ""));
    }
    if modes.r#static() {
        columns.push(("sites_static", ""));
    }
    columns
}

fn table_view(columns: &[(&str, &str)]) -> NameView {
    NameView::Table(
        columns
            .iter()
            .map(|(name, unit)| ColumnView {
                name: name.to_string(),
                unit: unit.to_string(),
                derived: false,
            })
            .collect(),
    )
}

/// How the monopole commands word the problems of their phrase.
struct MonopolesVoice<'v> {
    keyword: &'v Ident,
    wanted: &'v [&'v str],
    usage: &'v str,
}

impl MonopolesVoice<'_> {
    fn write(&self) -> String {
        format!("write `{}`", self.usage)
    }
}

impl PhraseVoice for MonopolesVoice<'_> {
    fn stray_value(&self, value: &Arg) -> Problem {
        Problem::new(
            ErrorKind::Syntax,
            value.span(),
            format!("`{}` does not expect a value here", self.keyword.name),
        )
        .with_help(self.write())
    }
    fn unknown_word(&self, word: &Ident) -> Problem {
        let reads: Vec<String> = self.wanted.iter().map(|w| format!("`{w} ...`")).collect();
        let reads: Vec<&str> = reads.iter().map(String::as_str).collect();
        Problem::new(
            ErrorKind::Syntax,
            word.span,
            format!(
                "`{}` reads {}, not `{}`",
                self.keyword.name,
                list_words(&reads),
                word.name
            ),
        )
        .with_help(self.write())
    }
    fn given_twice(&self, word: &Ident, has_value: bool) -> Option<Problem> {
        // Without a value it is reported as such, not as a repeat.
        has_value.then(|| given_twice_problem(word))
    }
    fn no_value(&self, word: &Ident, _known: bool) -> Option<Problem> {
        Some(
            Problem::new(
                ErrorKind::Syntax,
                word.span,
                format!("`{}` needs a value after it", word.name),
            )
            .with_help(self.write()),
        )
    }
    fn missing(&self, word: &str) -> Option<Problem> {
        Some(
            Problem::new(
                ErrorKind::Syntax,
                self.keyword.span,
                format!("`{}` needs `{word} ...`", self.keyword.name),
            )
            .with_help(self.write()),
        )
    }
}

impl Checker<'_> {
    pub(super) fn check_monopoles(
        &mut self,
        statement: &Statement,
        target: Option<&Ident>,
        args: &[Arg],
        options: &[Opt],
        view: &mut View,
    ) -> Option<Checked> {
        let keyword = statement.keyword.name.as_str();
        let before = self.problems.len();
        let target = self.command_target(target, keyword);
        let spec = match keyword {
            "monopoles" => self.track(statement, target, args, options, view),
            "reachable" => self.reachable(statement, target, args, options, view),
            _ => self.cluster(statement, target, args, options, view),
        };
        self.require_physical_time_model(statement, view, "follows the rule's attempt times");
        if self.problems.len() > before {
            return None;
        }
        spec.map(|spec| Checked::Command(CommandSpec::Monopoles(spec)))
    }

    /// `NAME` or the default `last_KEYWORD`.
    fn command_target(&mut self, target: Option<&Ident>, keyword: &str) -> Option<String> {
        match target {
            Some(ident) if RESERVED_SHOW_NAMES.contains(&ident.name.as_str()) => {
                self.push(Problem::new(
                    ErrorKind::Value,
                    ident.span,
                    format!(
                        "`{}` is reserved for `show {}`; choose another name",
                        ident.name, ident.name
                    ),
                ));
                None
            }
            Some(ident) => Some(ident.name.clone()),
            None => Some(format!("last_{keyword}")),
        }
    }

    /// Reads a phrase of `CONNECTIVE VALUE` pairs; every word in `wanted` must appear once.
    /// Returns the values in the order of `wanted`.
    fn phrase<'a>(
        &mut self,
        statement: &Statement,
        args: &'a [Arg],
        wanted: &[&str],
        usage: &str,
    ) -> Option<Vec<&'a Value>> {
        let rules = PhraseRules {
            words: wanted,
            bare: &[],
            required: true,
            repeatable: false,
            after_unknown: AfterUnknown::NextItem,
        };
        let voice = MonopolesVoice {
            keyword: &statement.keyword,
            wanted,
            usage,
        };
        let phrase = self.read_phrase(args, &rules, &voice)?;
        wanted.iter().map(|word| phrase.value(word)).collect()
    }

    /// A positive quantity of `dimension` given as a phrase value.
    fn positive_value(
        &mut self,
        value: &Value,
        dimension: Dimension,
        what: &str,
        temperature: bool,
    ) -> Option<f64> {
        let Value::Quantity(quantity) = value else {
            self.push(Problem::new(
                ErrorKind::Value,
                value.span(),
                format!("{what} is a number with a unit"),
            ));
            return None;
        };
        let converted = self.convert(quantity, None, dimension, what, temperature)?;
        if converted <= 0.0 {
            self.push(Problem::new(
                ErrorKind::Value,
                quantity.span,
                format!("{what} must be positive"),
            ));
            return None;
        }
        Some(converted)
    }

    /// `N hops` (the unit word `hops` may be left out).
    fn hops(&mut self, value: &Value, what: &str, min: u64, max: u64) -> Option<u32> {
        if let Value::Quantity(Quantity {
            number,
            unit: Some(unit),
            span,
        }) = value
        {
            if unit.name != "hops" && unit.name != "hop" {
                self.push(
                    Problem::new(
                        ErrorKind::Unit,
                        unit.span,
                        format!("{what} is a number of hops, not `{}`", unit.name),
                    )
                    .with_help(format!("write e.g. `{} hops`", number.text)),
                );
                return None;
            }
            let bare = Value::Quantity(Quantity {
                number: number.clone(),
                unit: None,
                span: *span,
            });
            return self.count(&bare, what, min, max).map(|n| n as u32);
        }
        self.count(value, what, min, max).map(|n| n as u32)
    }

    fn option_count(
        &mut self,
        option: Option<&Opt>,
        what: &str,
        min: u64,
        max: u64,
        default: u64,
    ) -> Option<u64> {
        match option {
            Some(o) => self.count(&o.value, what, min, max),
            None => Some(default),
        }
    }

    /// The preparation options shared by the three commands.
    fn preparation(
        &mut self,
        find: &dyn Fn(&str) -> Option<Opt>,
        starts: &[&str],
        default_background: Background,
        default_sweeps: u64,
        default_loops: u64,
        always_pair: bool,
    ) -> Option<Preparation> {
        let start = match find("start") {
            Some(o) => self.word(&o.value, "`start`", starts),
            None => Some(
                match default_background {
                    Background::Random => "random",
                    Background::Ice => "ice",
                }
                .to_string(),
            ),
        };
        let sweeps = self.option_count(
            find("equilibrate").as_ref(),
            "`equilibrate` (sweeps)",
            0,
            u64::MAX,
            default_sweeps,
        );
        let loops = self.option_count(
            find("loops").as_ref(),
            "`loops` (loop moves per sweep)",
            0,
            super::MAX_LOOPS_PER_SWEEP,
            default_loops,
        );
        let separation = match find("separation") {
            Some(o) => self.hops(&o.value, "`separation`", 2, MAX_HOPS),
            None => Some(DEFAULT_SEPARATION_HOPS as u32),
        };
        let start = start?;
        let pair = always_pair || start == "pair";
        if let (Some(o), false) = (find("separation"), pair) {
            self.push(
                Problem::new(
                    ErrorKind::Value,
                    o.key.span,
                    "`separation` is the length of the string between a placed monopole pair; it goes with `start = pair`",
                )
                .with_help("write e.g. `start = pair, separation = 6`"),
            );
            return None;
        }
        Some(Preparation {
            background: if start == "random" {
                Background::Random
            } else {
                Background::Ice
            },
            equilibration_sweeps: sweeps?,
            loops_per_sweep: loops?,
            pair_separation_hops: if pair { Some(separation?) } else { None },
        })
    }

    fn open_ratio(&mut self, option: Option<&Opt>) -> Option<f64> {
        let Some(option) = option else {
            return Some(DEFAULT_OPEN_RATIO);
        };
        let Value::Quantity(q) = &option.value else {
            self.push(Problem::new(
                ErrorKind::Value,
                option.value.span(),
                "`open_ratio` is a number ≥ 1 (a class is open if its attempt time is at most this many times the fastest)",
            ));
            return None;
        };
        let ratio = self.convert(q, None, Dimension::Dimensionless, "`open_ratio`", false)?;
        if ratio < 1.0 {
            self.push(Problem::new(
                ErrorKind::Value,
                q.span,
                "`open_ratio` must be at least 1 (the fastest class is always open)",
            ));
            return None;
        }
        Some(ratio)
    }

    fn track(
        &mut self,
        statement: &Statement,
        target: Option<String>,
        args: &[Arg],
        options: &[Opt],
        view: &mut View,
    ) -> Option<MonopolesSpec> {
        let usage = "monopoles for 10 ms at 0.3 K, sample_every = 10 µs";
        let phrase = self.phrase(statement, args, &["for", "at"], usage);
        let options = self.options(options, MONOPOLES_OPTIONS, "monopoles");
        let owned: Vec<Opt> = options.iter().map(|o| (*o).clone()).collect();
        let find = |key: &str| owned.iter().find(|o| o.key.name == key).cloned();
        let (duration, temperature) = match &phrase {
            Some(values) => (
                self.positive_value(
                    values[0],
                    Dimension::Time,
                    "the duration after `for`",
                    false,
                ),
                self.positive_value(
                    values[1],
                    Dimension::Energy,
                    "the temperature after `at`",
                    true,
                ),
            ),
            None => (None, None),
        };
        let interval = match find("sample_every") {
            Some(o) => self.positive_value(&o.value, Dimension::Time, "`sample_every`", false),
            None => duration.map(|d| d / DEFAULT_TRACK_INTERVALS),
        };
        if let (Some(d), Some(dt)) = (duration, interval) {
            let intervals = d / dt;
            let span = find("sample_every")
                .map(|o| o.value.span())
                .unwrap_or(statement.keyword.span);
            if intervals < 1.0 - 1e-9 {
                self.push(Problem::new(
                    ErrorKind::Value,
                    span,
                    "`sample_every` is longer than the run; the time grid needs at least two samples",
                ));
            } else if intervals > MAX_TRACK_INTERVALS {
                self.push(
                    Problem::new(
                        ErrorKind::Value,
                        span,
                        format!(
                            "the run holds {} sample intervals; monopole tracking keeps every position and averages the \
                             mean-square displacement over all pairs of grid times, so at most {} are allowed",
                            intervals.floor(),
                            MAX_TRACK_INTERVALS
                        ),
                    )
                    .with_help("use a longer `sample_every` or a shorter run"),
                );
            }
        }
        let preparation = self.preparation(&find, TRACK_STARTS, Background::Random, 500, 0, false);
        let target = target?;
        view.set(&target, table_view(TRACK_COLUMNS));
        view.set(
            &format!("{target}{GATE_TABLE_SUFFIX}"),
            table_view(GATE_COLUMNS),
        );
        Some(MonopolesSpec::Track(TrackSpec {
            target,
            duration_seconds: duration?,
            temperature_kelvin: temperature?,
            sample_interval_seconds: interval?,
            preparation: preparation?,
        }))
    }

    fn mode(&mut self, option: Option<&Opt>, choices: &[&str], default: &str) -> Option<String> {
        match option {
            Some(o) => match &o.value {
                Value::Word(ident) if !choices.contains(&ident.name.as_str()) => {
                    self.push(
                        Problem::new(
                            ErrorKind::Name,
                            ident.span,
                            format!(
                                "unknown mode `{}`: `mode` is one of {}",
                                ident.name,
                                list_words(choices)
                            ),
                        )
                        .with_help(
                            did_you_mean(&ident.name, choices.iter().copied()).unwrap_or_else(
                                || {
                                    "path: each hop flips its spin and changes the next gates; \
                                     static: the gates of the snapshot"
                                        .to_string()
                                },
                            ),
                        ),
                    );
                    None
                }
                value => self.word(value, "`mode`", choices),
            },
            None => Some(default.to_string()),
        }
    }

    fn reachable(
        &mut self,
        statement: &Statement,
        target: Option<String>,
        args: &[Arg],
        options: &[Opt],
        view: &mut View,
    ) -> Option<MonopolesSpec> {
        let usage = "reachable within 20 hops at 0.3 K, samples = 50, mode = both";
        let phrase = self.phrase(statement, args, &["within", "at"], usage);
        let options = self.options(options, REACHABLE_OPTIONS, "reachable");
        let owned: Vec<Opt> = options.iter().map(|o| (*o).clone()).collect();
        let find = |key: &str| owned.iter().find(|o| o.key.name == key).cloned();
        let (hops, temperature) = match &phrase {
            Some(values) => (
                self.hops(values[0], "the number of hops after `within`", 0, MAX_HOPS),
                self.positive_value(
                    values[1],
                    Dimension::Energy,
                    "the temperature after `at`",
                    true,
                ),
            ),
            None => (None, None),
        };
        let samples = self.option_count(
            find("samples").as_ref(),
            "`samples`",
            1,
            MAX_REACH_SAMPLES,
            50,
        );
        let modes = self
            .mode(find("mode").as_ref(), REACH_MODES, "both")
            .map(|m| match m.as_str() {
                "path" => ReachModes::Path,
                "static" => ReachModes::Static,
                _ => ReachModes::Both,
            });
        let open_ratio = self.open_ratio(find("open_ratio").as_ref());
        let decorrelate = self.option_count(
            find("decorrelate").as_ref(),
            "`decorrelate` (sweeps between samples)",
            0,
            u64::MAX,
            10,
        );
        let preparation = self.preparation(&find, REACH_STARTS, Background::Ice, 100, 4, true);
        let (target, modes) = (target?, modes?);
        view.set(&target, table_view(&reach_columns(modes)));
        Some(MonopolesSpec::Reachable(ReachSpec {
            target,
            max_hops: hops?,
            temperature_kelvin: temperature?,
            samples: samples?,
            modes,
            open_ratio: open_ratio?,
            preparation: preparation?,
            decorrelation_sweeps: decorrelate?,
        }))
    }

    fn cluster(
        &mut self,
        statement: &Statement,
        target: Option<String>,
        args: &[Arg],
        options: &[Opt],
        view: &mut View,
    ) -> Option<MonopolesSpec> {
        let usage = "cluster within 12 hops at 0.3 K, mode = path";
        let phrase = self.phrase(statement, args, &["within", "at"], usage);
        let options = self.options(options, CLUSTER_OPTIONS, "cluster");
        let owned: Vec<Opt> = options.iter().map(|o| (*o).clone()).collect();
        let find = |key: &str| owned.iter().find(|o| o.key.name == key).cloned();
        let (hops, temperature) = match &phrase {
            Some(values) => (
                self.hops(values[0], "the number of hops after `within`", 0, MAX_HOPS),
                self.positive_value(
                    values[1],
                    Dimension::Energy,
                    "the temperature after `at`",
                    true,
                ),
            ),
            None => (None, None),
        };
        let mode = self.mode(find("mode").as_ref(), &REACH_MODES[..2], "path");
        let open_ratio = self.open_ratio(find("open_ratio").as_ref());
        let width = self.option_count(find("width").as_ref(), "`width` (pixels)", 160, 4000, 640);
        let height =
            self.option_count(find("height").as_ref(), "`height` (pixels)", 160, 4000, 480);
        let preparation = self.preparation(&find, REACH_STARTS, Background::Ice, 100, 4, true);
        let target = target?;
        view.set(&target, NameView::Figure);
        Some(MonopolesSpec::Cluster(ClusterSpec {
            target,
            max_hops: hops?,
            temperature_kelvin: temperature?,
            path_dependent: mode? == "path",
            open_ratio: open_ratio?,
            preparation: preparation?,
            width_px: width? as u32,
            height_px: height? as u32,
        }))
    }
}
