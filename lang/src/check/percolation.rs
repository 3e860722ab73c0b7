//! Checking of the percolation toolkit commands (`percolation MODE ...`).
//!
//! Reads the phrase and options of a command statement, resolves names and units, and
//! returns a typed spec for `run/percolation.rs`. The phrase is a mode word, then
//! `on LATTICE` and `at P` (or `at T` for `open_hops`), optionally `from A to B` for the
//! probability window of a threshold sweep:
//!
//! * `percolation bond on diamond, L = [8, 16, 32], sweeps = 200` (and `site`)
//! * `percolation clusters on diamond at p = 0.388, L = 32`
//! * `percolation growth on diamond at p = 0.388, L = 64`
//! * `percolation walkers on diamond at p = 0.388, steps = 10000, walkers = 200`
//! * `percolation open_hops at 0.3 K`

use super::phrase::{AfterUnknown, Phrase, PhraseRules, PhraseVoice};
use super::{list_words, Checked, Checker, CommandSpec, NameView, View};
use crate::ast::{Arg, Ident, Opt, Statement, Value};
use crate::diagnostic::{ErrorKind, Problem};
use crate::units::Dimension;
use icefield_stdlib::percolation::{LatticeKind, PercolationKind};

/// The modes of `percolation`.
pub const PERCOLATION_MODES: &[&str] =
    &["bond", "site", "clusters", "growth", "walkers", "open_hops"];
/// The lattices of the percolation toolkit.
pub const PERCOLATION_LATTICES: &[&str] = &["diamond", "simple_cubic", "square"];
/// Occupation kinds for the modes that take one (`occupy = site`).
pub const OCCUPATIONS: &[&str] = &["bond", "site"];
/// The name of the result when the statement does not name it.
pub const DEFAULT_PERCOLATION_NAME: &str = "last_percolation";

pub const THRESHOLD_OPTIONS: &[&str] = &["L", "sweeps", "points", "bootstrap"];
pub const CLUSTERS_OPTIONS: &[&str] = &["p", "L", "occupy", "realisations", "sweeps"];
pub const GROWTH_OPTIONS: &[&str] = &[
    "p",
    "L",
    "occupy",
    "realisations",
    "seeds",
    "max_distance",
    "band",
];
pub const WALKERS_OPTIONS: &[&str] = &["p", "L", "occupy", "steps", "walkers", "sample_every"];
pub const OPEN_HOPS_OPTIONS: &[&str] = &[
    "states",
    "equilibrate",
    "sample_every",
    "loops",
    "open_within",
];

/// The largest L per lattice the checker accepts (stdlib refuses above 2^26 sites).
fn max_size(lattice: LatticeKind) -> u64 {
    match lattice {
        LatticeKind::Square => 8192,
        LatticeKind::SimpleCubic => 400,
        LatticeKind::Diamond => 200,
    }
}

/// `percolation bond|site on LATTICE, L = [..]`: Newman–Ziff sweeps at several sizes and
/// the crossing estimate of p_c.
#[derive(Clone, Debug, PartialEq)]
pub struct ThresholdSpec {
    pub target: String,
    pub lattice: LatticeKind,
    pub kind: PercolationKind,
    pub sizes: Vec<usize>,
    pub sweeps: usize,
    /// Rows of the table: p on a uniform grid over `window`.
    pub points: usize,
    pub window: (f64, f64),
    pub bootstrap: usize,
}

/// One random occupation: lattice, size, kind and p.
#[derive(Clone, Debug, PartialEq)]
pub struct Occupation {
    pub lattice: LatticeKind,
    pub kind: PercolationKind,
    pub size: usize,
    pub p: f64,
}

/// `percolation clusters on LATTICE at p = P, L = N`.
#[derive(Clone, Debug, PartialEq)]
pub struct ClustersSpec {
    pub target: String,
    pub occupation: Occupation,
    pub realisations: usize,
    /// Newman–Ziff sweeps for the largest-cluster fraction and ξ at p.
    pub sweeps: usize,
}

/// `percolation growth on LATTICE at p = P, L = N`.
#[derive(Clone, Debug, PartialEq)]
pub struct GrowthSpec {
    pub target: String,
    pub occupation: Occupation,
    pub realisations: usize,
    pub seeds: usize,
    pub max_distance: usize,
    /// The ℓ band of the power-law fit.
    pub band: (f64, f64),
}

/// `percolation walkers on LATTICE at p = P, steps = S, walkers = W`.
#[derive(Clone, Debug, PartialEq)]
pub struct WalkersSpec {
    pub target: String,
    pub occupation: Occupation,
    pub steps: u64,
    pub walkers: usize,
    pub sample_every: u64,
}

/// `percolation open_hops at T`: the open-hop graph of equilibrated states of the model.
#[derive(Clone, Debug, PartialEq)]
pub struct OpenHopsSpec {
    pub target: String,
    pub temperatures_kelvin: Vec<f64>,
    pub states: usize,
    pub equilibration_sweeps: u64,
    pub sample_every_sweeps: u64,
    pub loops_per_sweep: u64,
    /// Classes whose attempt time is within this factor of the fastest are open.
    pub open_within: f64,
}

/// A resolved percolation command.
#[derive(Clone, Debug, PartialEq)]
pub enum PercolationSpec {
    Threshold(ThresholdSpec),
    Clusters(ClustersSpec),
    Growth(GrowthSpec),
    Walkers(WalkersSpec),
    OpenHops(OpenHopsSpec),
}

impl PercolationSpec {
    /// The tables the command stores, with their columns (names and units), known before
    /// it runs (threshold tables have one column per size).
    fn tables(&self) -> Vec<(String, Vec<(String, String)>)> {
        let c = |names: &[(&str, &str)]| -> Vec<(String, String)> {
            names
                .iter()
                .map(|(n, u)| (n.to_string(), u.to_string()))
                .collect()
        };
        match self {
            PercolationSpec::Threshold(spec) => {
                let mut columns = vec![("p".to_string(), String::new())];
                for l in &spec.sizes {
                    columns.push((format!("wrapping_L{l}"), String::new()));
                }
                for l in &spec.sizes {
                    columns.push((format!("largest_L{l}"), String::new()));
                }
                vec![
                    (spec.target.clone(), columns),
                    (
                        format!("{}_pc", spec.target),
                        c(&[
                            ("p_c", ""),
                            ("p_c_reference", ""),
                            ("bootstrap_samples", ""),
                        ]),
                    ),
                ]
            }
            PercolationSpec::Clusters(spec) => vec![
                (spec.target.clone(), c(&[("s", ""), ("n_s", "")])),
                (
                    format!("{}_stats", spec.target),
                    c(&[
                        ("p", ""),
                        ("largest_cluster_fraction", ""),
                        ("mean_cluster_size", ""),
                        (
                            "correlation_length",
                            displacement_unit(spec.occupation.lattice),
                        ),
                        ("p_c_reference", ""),
                    ]),
                ),
            ],
            PercolationSpec::Growth(spec) => vec![
                (
                    spec.target.clone(),
                    c(&[("l", ""), ("N", ""), ("surviving_seeds", "")]),
                ),
                (
                    format!("{}_fit", spec.target),
                    c(&[("d_l", ""), ("amplitude", "")]),
                ),
            ],
            PercolationSpec::Walkers(spec) => {
                let u2 = squared_unit(spec.occupation.lattice);
                let psd = format!("{u2}·step");
                vec![
                    (
                        spec.target.clone(),
                        vec![
                            ("t".to_string(), "step".to_string()),
                            ("msd_cluster".to_string(), u2.clone()),
                            ("msd_full".to_string(), u2),
                        ],
                    ),
                    (
                        format!("{}_psd", spec.target),
                        vec![
                            ("f".to_string(), "1/step".to_string()),
                            ("psd_cluster".to_string(), psd.clone()),
                            ("psd_full".to_string(), psd),
                        ],
                    ),
                ]
            }
            PercolationSpec::OpenHops(spec) => vec![(
                spec.target.clone(),
                c(&[
                    ("T", "K"),
                    ("state", ""),
                    ("open_fraction", ""),
                    ("distance_from_p_c", ""),
                    ("monopole_exit_fraction", ""),
                    ("fresh_pair_exit_fraction", ""),
                    ("largest_cluster_fraction", ""),
                    ("monopole_density", ""),
                ]),
            )],
        }
    }
}

/// Unit of positions on a percolation lattice: a/4 on the diamond lattice (bond vectors
/// (±1,±1,±1)), the lattice spacing a on the square and simple cubic lattices.
pub fn displacement_unit(lattice: LatticeKind) -> &'static str {
    match lattice {
        LatticeKind::Diamond => "a/4",
        LatticeKind::Square | LatticeKind::SimpleCubic => "a",
    }
}

/// The square of [`displacement_unit`].
pub fn squared_unit(lattice: LatticeKind) -> String {
    match lattice {
        LatticeKind::Diamond => "(a/4)²".to_string(),
        LatticeKind::Square | LatticeKind::SimpleCubic => "a²".to_string(),
    }
}

/// How `percolation` words the problems of its phrase.
struct PercolationVoice;

impl PhraseVoice for PercolationVoice {
    fn stray_value(&self, value: &Arg) -> Problem {
        Problem::new(
            ErrorKind::Value,
            value.span(),
            "unexpected value in the `percolation` phrase",
        )
        .with_help("the phrase reads `on LATTICE at P`, then options")
    }
    fn unknown_word(&self, word: &Ident) -> Problem {
        Problem::new(
            ErrorKind::Value,
            word.span,
            format!(
                "`{}` has no meaning in a `percolation` phrase; use `on`, `at`, `from` or `to`",
                word.name
            ),
        )
    }
}

impl Checker<'_> {
    pub(super) fn check_percolation(
        &mut self,
        statement: &Statement,
        target: Option<&Ident>,
        args: &[Arg],
        options: &[Opt],
        view: &mut View,
    ) -> Option<Checked> {
        let before = self.problems.len();
        let target = self.percolation_target(target);
        let Some(Arg::Value(mode_value)) = args.first() else {
            self.push(
                Problem::new(
                    ErrorKind::Value,
                    statement.keyword.span,
                    format!(
                        "`percolation` needs a mode: {}",
                        list_words(PERCOLATION_MODES)
                    ),
                )
                .with_help("e.g. `pc = percolation bond on diamond, L = [8, 16, 32]`"),
            );
            return None;
        };
        let mode = self.word(mode_value, "the percolation mode", PERCOLATION_MODES)?;
        let phrase = self.percolation_phrase(&args[1..])?;
        let spec = match mode.as_str() {
            "bond" | "site" => {
                let kind = if mode == "bond" {
                    PercolationKind::Bond
                } else {
                    PercolationKind::Site
                };
                self.threshold_spec(statement, target?, kind, &phrase, options)
            }
            "clusters" | "growth" | "walkers" => {
                self.occupation_spec(statement, &mode, target?, &phrase, options)
            }
            _ => self.open_hops_spec(statement, target?, &phrase, options, view),
        };
        let spec = spec?;
        if self.problems.len() > before {
            return None;
        }
        for (name, columns) in spec.tables() {
            view.set(
                &name,
                NameView::Table(
                    columns
                        .into_iter()
                        .map(|(name, unit)| super::ColumnView {
                            name,
                            unit,
                            derived: false,
                        })
                        .collect(),
                ),
            );
        }
        Some(Checked::Command(CommandSpec::Percolation(spec)))
    }

    fn percolation_target(&mut self, target: Option<&Ident>) -> Option<String> {
        match target {
            None => Some(DEFAULT_PERCOLATION_NAME.to_string()),
            some => self.target_name(some),
        }
    }

    /// Reads the phrase after the mode word, reporting words out of place.
    fn percolation_phrase<'a>(&mut self, args: &'a [Arg]) -> Option<Phrase<'a>> {
        let rules = PhraseRules {
            words: &["on", "at", "from", "to"],
            // `at p = 0.5`: the value is the option.
            bare: &["at"],
            required: false,
            repeatable: true,
            after_unknown: AfterUnknown::Nothing,
        };
        self.read_phrase(args, &rules, &PercolationVoice)
    }

    fn percolation_lattice(
        &mut self,
        statement: &Statement,
        phrase: &Phrase,
    ) -> Option<LatticeKind> {
        let Some(value) = phrase.value("on") else {
            self.push(
                Problem::new(
                    ErrorKind::Value,
                    statement.keyword.span,
                    "say which lattice: `on diamond`, `on simple_cubic` or `on square`",
                )
                .with_help("e.g. `percolation bond on diamond, L = [8, 16, 32]`"),
            );
            return None;
        };
        let word = self.word(value, "the percolation lattice", PERCOLATION_LATTICES)?;
        Some(match word.as_str() {
            "diamond" => LatticeKind::Diamond,
            "simple_cubic" => LatticeKind::SimpleCubic,
            _ => LatticeKind::Square,
        })
    }

    /// A probability in [0, 1].
    fn probability(&mut self, value: &Value, what: &str) -> Option<f64> {
        let Value::Quantity(q) = value else {
            self.push(Problem::new(
                ErrorKind::Value,
                value.span(),
                format!("{what} is a number between 0 and 1"),
            ));
            return None;
        };
        let p = self.convert(q, None, Dimension::Dimensionless, what, false)?;
        if !(0.0..=1.0).contains(&p) {
            self.push(Problem::new(
                ErrorKind::Value,
                q.span,
                format!("{what} must lie in [0, 1], not {}", q.number.text),
            ));
            return None;
        }
        Some(p)
    }

    fn size_option(&mut self, value: &Value, lattice: LatticeKind) -> Option<usize> {
        self.count(value, "`L` (cells per side)", 2, max_size(lattice))
            .map(|l| l as usize)
    }

    fn threshold_spec(
        &mut self,
        statement: &Statement,
        target: String,
        kind: PercolationKind,
        phrase: &Phrase,
        options: &[Opt],
    ) -> Option<PercolationSpec> {
        let lattice = self.percolation_lattice(statement, phrase);
        let statement_name = match kind {
            PercolationKind::Bond => "percolation bond",
            PercolationKind::Site => "percolation site",
        };
        let options = self.options(options, THRESHOLD_OPTIONS, statement_name);
        if let Some(at) = phrase.value("at") {
            self.push(Problem::new(
                ErrorKind::Value,
                at.span(),
                "a threshold sweep covers a window of p; give it with `from A to B`, not `at`",
            ));
        }
        let lattice = lattice?;
        let get = |key: &str| options.iter().find(|o| o.key.name == key).map(|o| &o.value);
        let sizes = match get("L") {
            Some(Value::List { items, span, .. }) => {
                let mut sizes = Vec::new();
                for item in items {
                    sizes.push(self.size_option(item, lattice)?);
                }
                sizes.sort_unstable();
                sizes.dedup();
                if sizes.len() < 2 {
                    self.push(Problem::new(
                        ErrorKind::Value,
                        *span,
                        "the crossing estimate needs two or more different sizes",
                    ));
                    return None;
                }
                sizes
            }
            Some(other) => {
                self.push(
                    Problem::new(
                        ErrorKind::Value,
                        other.span(),
                        "`L` is a list of two or more sizes for a threshold sweep",
                    )
                    .with_help("e.g. `L = [8, 16, 32]`"),
                );
                return None;
            }
            None => match lattice {
                LatticeKind::Square => vec![16, 32, 64],
                LatticeKind::SimpleCubic => vec![8, 12, 16],
                LatticeKind::Diamond => vec![6, 8, 12],
            },
        };
        let sweeps = match get("sweeps") {
            Some(v) => self.count(v, "`sweeps`", 2, 1_000_000)? as usize,
            None => 200,
        };
        let points = match get("points") {
            Some(v) => self.count(v, "`points`", 2, 10_000)? as usize,
            None => 61,
        };
        let bootstrap = match get("bootstrap") {
            Some(v) => self.count(v, "`bootstrap`", 0, 100_000)? as usize,
            None => 100,
        };
        let reference = icefield_stdlib::percolation::threshold(lattice, kind);
        let lo = match phrase.value("from") {
            Some(v) => self.probability(v, "the start of the p window")?,
            None => (reference - 0.12).max(0.0),
        };
        let hi = match phrase.value("to") {
            Some(v) => self.probability(v, "the end of the p window")?,
            None => (reference + 0.12).min(1.0),
        };
        if lo >= hi {
            self.push(Problem::new(
                ErrorKind::Value,
                phrase
                    .value("to")
                    .or(phrase.value("from"))
                    .map(|v| v.span())
                    .unwrap_or(statement.span),
                format!("the p window must run upwards (from {lo} to {hi})"),
            ));
            return None;
        }
        Some(PercolationSpec::Threshold(ThresholdSpec {
            target,
            lattice,
            kind,
            sizes,
            sweeps,
            points,
            window: (lo, hi),
            bootstrap,
        }))
    }

    fn occupation_spec(
        &mut self,
        statement: &Statement,
        mode: &str,
        target: String,
        phrase: &Phrase,
        options: &[Opt],
    ) -> Option<PercolationSpec> {
        let lattice = self.percolation_lattice(statement, phrase);
        let allowed = match mode {
            "clusters" => CLUSTERS_OPTIONS,
            "growth" => GROWTH_OPTIONS,
            _ => WALKERS_OPTIONS,
        };
        let name = format!("percolation {mode}");
        let options = self.options(options, allowed, &name);
        let lattice = lattice?;
        let get = |key: &str| options.iter().find(|o| o.key.name == key).map(|o| &o.value);
        let p = match (phrase.value("at"), get("p")) {
            (Some(at), None) => self.probability(at, "p")?,
            (None, Some(v)) => self.probability(v, "`p`")?,
            (Some(at), Some(_)) => {
                self.push(Problem::new(
                    ErrorKind::Value,
                    at.span(),
                    "p is given twice (after `at` and as `p = ...`)",
                ));
                return None;
            }
            (None, None) => {
                self.push(
                    Problem::new(
                        ErrorKind::Value,
                        phrase
                            .bare("at")
                            .map(|w| w.span)
                            .unwrap_or(statement.keyword.span),
                        format!("`{name}` needs the occupation probability"),
                    )
                    .with_help(format!("e.g. `{name} on diamond at p = 0.388`")),
                );
                return None;
            }
        };
        let size = match get("L") {
            Some(v) => self.size_option(v, lattice)?,
            None => match lattice {
                LatticeKind::Square => 128,
                LatticeKind::SimpleCubic => 32,
                LatticeKind::Diamond => 16,
            },
        };
        let kind = match get("occupy") {
            Some(v) => match self.word(v, "`occupy`", OCCUPATIONS)?.as_str() {
                "site" => PercolationKind::Site,
                _ => PercolationKind::Bond,
            },
            None => PercolationKind::Bond,
        };
        let occupation = Occupation {
            lattice,
            kind,
            size,
            p,
        };
        let count = |checker: &mut Self, key: &str, min: u64, max: u64, default: u64| match get(key)
        {
            Some(v) => checker.count(v, &format!("`{key}`"), min, max),
            None => Some(default),
        };
        Some(match mode {
            "clusters" => PercolationSpec::Clusters(ClustersSpec {
                target,
                occupation,
                realisations: count(self, "realisations", 1, 100_000, 20)? as usize,
                sweeps: count(self, "sweeps", 2, 100_000, 20)? as usize,
            }),
            "growth" => {
                let max_distance = count(self, "max_distance", 4, 100_000, 40)? as usize;
                let band = match get("band") {
                    Some(v) => self.percolation_band(v, max_distance)?,
                    None => (4.0, max_distance as f64),
                };
                PercolationSpec::Growth(GrowthSpec {
                    target,
                    occupation,
                    realisations: count(self, "realisations", 1, 100_000, 50)? as usize,
                    seeds: count(self, "seeds", 1, 100_000, 20)? as usize,
                    max_distance,
                    band,
                })
            }
            _ => {
                let steps = count(self, "steps", 1, 1_000_000_000, 10_000)?;
                let sample_every = count(self, "sample_every", 1, steps, (steps / 1000).max(1))?;
                if steps / sample_every < 8 {
                    self.push(Problem::new(
                        ErrorKind::Value,
                        get("sample_every").map(|v| v.span()).unwrap_or(statement.span),
                        "the walks need at least 8 samples for a spectrum (steps / sample_every ≥ 8)",
                    ));
                    return None;
                }
                PercolationSpec::Walkers(WalkersSpec {
                    target,
                    occupation,
                    steps,
                    walkers: count(self, "walkers", 1, 1_000_000, 200)? as usize,
                    sample_every,
                })
            }
        })
    }

    /// `band = [lo, hi]` in chemical distance, inside 1..=max_distance.
    fn percolation_band(&mut self, value: &Value, max_distance: usize) -> Option<(f64, f64)> {
        let ends = match value {
            Value::List { items, .. } if items.len() == 2 => {
                let a = self.count(&items[0], "the start of the band", 1, max_distance as u64)?;
                let b = self.count(&items[1], "the end of the band", 1, max_distance as u64)?;
                Some((a as f64, b as f64))
            }
            _ => None,
        };
        match ends {
            Some((a, b)) if b - a >= 3.0 => Some((a, b)),
            _ => {
                self.push(
                    Problem::new(
                        ErrorKind::Value,
                        value.span(),
                        format!(
                            "`band` is a chemical-distance range [from, to] within 1..{max_distance} spanning at least 4 distances"
                        ),
                    )
                    .with_help("e.g. `band = [4, 40]`"),
                );
                None
            }
        }
    }

    fn open_hops_spec(
        &mut self,
        statement: &Statement,
        target: String,
        phrase: &Phrase,
        options: &[Opt],
        view: &View,
    ) -> Option<PercolationSpec> {
        let options = self.options(options, OPEN_HOPS_OPTIONS, "percolation open_hops");
        if let Some(on) = phrase.value("on") {
            self.push(Problem::new(
                ErrorKind::Value,
                on.span(),
                "`open_hops` runs on the declared pyrochlore model (its diamond lattice of tetrahedra); drop `on ...`",
            ));
        }
        if !view.lattice || !view.couplings {
            self.push(
                Problem::new(
                    ErrorKind::Value,
                    statement.keyword.span,
                    "`percolation open_hops` samples states of the declared model, but no lattice and couplings are declared",
                )
                .with_help("declare them first, e.g. `lattice pyrochlore L = 4` and `couplings nearest J_eff = 1.8 K`, then a dynamics rule"),
            );
        }
        let temperatures = match phrase.value("at") {
            Some(Value::Quantity(q)) => vec![self.temperature(q, None, "the temperature")?],
            Some(list @ Value::List { .. }) => self.temperature_list(list)?,
            Some(other) => {
                self.push(Problem::new(
                    ErrorKind::Value,
                    other.span(),
                    "a temperature such as `0.3 K`",
                ));
                return None;
            }
            None => {
                self.push(
                    Problem::new(
                        ErrorKind::Value,
                        statement.keyword.span,
                        "`percolation open_hops` needs a temperature",
                    )
                    .with_help("e.g. `open = percolation open_hops at 0.3 K`"),
                );
                return None;
            }
        };
        let get = |key: &str| options.iter().find(|o| o.key.name == key).map(|o| &o.value);
        let count = |checker: &mut Self, key: &str, min: u64, max: u64, default: u64| match get(key)
        {
            Some(v) => checker.count(v, &format!("`{key}`"), min, max),
            None => Some(default),
        };
        let open_within = match get("open_within") {
            Some(Value::Quantity(q)) => {
                let f = self.convert(q, None, Dimension::Dimensionless, "`open_within`", false)?;
                if f < 1.0 {
                    self.push(Problem::new(
                        ErrorKind::Value,
                        q.span,
                        "`open_within` is a factor ≥ 1 (classes at most this much slower than the fastest are open)",
                    ));
                    return None;
                }
                f
            }
            Some(other) => {
                self.push(Problem::new(
                    ErrorKind::Value,
                    other.span(),
                    "`open_within` is a number ≥ 1",
                ));
                return None;
            }
            None => 10.0,
        };
        Some(PercolationSpec::OpenHops(OpenHopsSpec {
            target,
            temperatures_kelvin: temperatures,
            states: count(self, "states", 1, 100_000, 10)? as usize,
            equilibration_sweeps: count(self, "equilibrate", 0, 100_000_000, 1000)?,
            sample_every_sweeps: count(self, "sample_every", 1, 1_000_000, 20)?,
            loops_per_sweep: count(self, "loops", 0, 1_000_000, 1)?,
            open_within,
        }))
    }
}
