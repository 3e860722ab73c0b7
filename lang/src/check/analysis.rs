//! Checking of the time-series analysis and fits: spectra, autocorrelation, susceptibility, `fit` commands.
//!
//! Reads the phrase and options of a command statement, resolves names and units, and
//! returns a typed spec for `run/analysis.rs`.
//!
//! Phrases (REFERENCE.md §9 and "Time series and spectra"):
//!
//! ```text
//! [NAME =] spectrum TABLE.Y [against X] [, segment = N, overlap = F, window = W, detrend = D]
//! [NAME =] autocorrelation TABLE.Y [against X] [, max_lag = TIME, normalisation = biased|unbiased]
//! [NAME =] susceptibility TABLE.Y at TEMPERATURE [against X] [from F1 to F2] [, points = N, max_lag = TIME]
//! [NAME =] fit TABLE.Y [against X] with MODEL [over X from A to B] [, errors = on|off]
//! ```
//!
//! What needs the numbers (a uniform grid, a band inside the data, enough points) is
//! checked when the command runs, with the same spans.

use super::phrase::{no_value_problem, AfterUnknown, Phrase, PhraseRules, PhraseVoice};
use super::{Checked, Checker, CommandSpec, NameView, View};
use crate::ast::{Arg, ColumnRef, Ident, Opt, Quantity, Span, Statement, Value};
use crate::diagnostic::{did_you_mean, ErrorKind, Problem};
use crate::units::{self, Dimension};
use icefield_stdlib::spectra::{Detrend, Normalisation, Window};

pub const SPECTRUM_OPTIONS: &[&str] = &["segment", "overlap", "window", "detrend"];
pub const AUTOCORRELATION_OPTIONS: &[&str] = &["max_lag", "normalisation"];
pub const SUSCEPTIBILITY_OPTIONS: &[&str] = &["points", "max_lag"];
pub const FIT_OPTIONS: &[&str] = &["errors"];
/// The fit models of `fit ... with MODEL`.
pub const FIT_MODELS: &[&str] = &[
    "power_law",
    "exp",
    "stretched_exp",
    "noise_form",
    "arrhenius",
];
pub const WINDOWS: &[&str] = &["hann", "hamming", "rectangular"];
pub const DETRENDS: &[&str] = &["constant", "linear", "none"];
pub const NORMALISATIONS: &[&str] = &["biased", "unbiased"];
/// The longest Welch segment accepted (2^26 samples, a 1 GiB FFT buffer).
pub const MAX_SEGMENT: u64 = 1 << 26;
/// Frequencies of a susceptibility by default, and at most.
pub const DEFAULT_SUSCEPTIBILITY_POINTS: u64 = 60;
pub const MAX_SUSCEPTIBILITY_POINTS: u64 = 100_000;
/// Suffixes of the extra values a command stores beside its table.
pub const FIGURE_SUFFIX: &str = "_figure";
pub const TAU_SUFFIX: &str = "_tau";

/// The unit of the axis a column is measured in.
#[derive(Clone, Debug, PartialEq)]
pub enum AxisUnit {
    /// A unit the language knows: values convert to its base unit by `to_base`.
    Known {
        dimension: Dimension,
        symbol: String,
    },
    /// A pure number.
    Pure,
    /// A free-text unit (a derived column's "1/K"): used as it is, not converted.
    Text(String),
}

impl AxisUnit {
    pub fn of(unit: &str) -> AxisUnit {
        if unit.is_empty() {
            return AxisUnit::Pure;
        }
        match units::lookup(unit) {
            Some(def) => AxisUnit::Known {
                dimension: def.dimension,
                symbol: unit.to_string(),
            },
            None => AxisUnit::Text(unit.to_string()),
        }
    }
    /// A value of the column in the base unit of its dimension (as is for the others).
    pub fn to_base(&self, value: f64) -> f64 {
        match self {
            AxisUnit::Known { symbol, .. } => units::to_base(value, symbol)
                .map(|b| b.value)
                .unwrap_or(value),
            _ => value,
        }
    }
    /// The unit of values after `to_base`.
    pub fn base_unit(&self) -> String {
        match self {
            AxisUnit::Known { dimension, .. } => dimension.base_unit().to_string(),
            AxisUnit::Pure => String::new(),
            AxisUnit::Text(text) => text.clone(),
        }
    }
    fn dimension(&self) -> Option<Dimension> {
        match self {
            AxisUnit::Known { dimension, .. } => Some(*dimension),
            AxisUnit::Pure => Some(Dimension::Dimensionless),
            AxisUnit::Text(_) => None,
        }
    }
}

/// A column read against another column of the same table.
#[derive(Clone, Debug, PartialEq)]
pub struct SeriesRef {
    pub table: String,
    pub column: String,
    /// Unit of the column as shown in headers.
    pub unit: String,
    pub x_column: String,
    pub x_unit: AxisUnit,
    /// `TABLE.Y` as written.
    pub span: Span,
    /// Where the x column was named (`against X`, `over X`), else `span`.
    pub x_span: Span,
}

impl SeriesRef {
    pub fn label(&self) -> String {
        format!("{}.{}", self.table, self.column)
    }
    pub fn x_label(&self) -> String {
        format!("{}.{}", self.table, self.x_column)
    }
}

#[derive(Clone, Debug, PartialEq)]
pub struct SpectrumSpec {
    pub target: String,
    pub series: SeriesRef,
    /// Samples per segment; `None`: the default for the series length.
    pub segment: Option<(usize, Span)>,
    /// Overlap as a fraction of the segment, in [0, 1).
    pub overlap_fraction: f64,
    pub window: Window,
    pub detrend: Detrend,
}

#[derive(Clone, Debug, PartialEq)]
pub struct AutocorrelationSpec {
    pub target: String,
    pub series: SeriesRef,
    /// Largest lag in seconds; `None`: 20 integrated relaxation times.
    pub max_lag_seconds: Option<(f64, Span)>,
    pub normalisation: Normalisation,
}

#[derive(Clone, Debug, PartialEq)]
pub struct SusceptibilitySpec {
    pub target: String,
    pub series: SeriesRef,
    pub temperature_kelvin: f64,
    /// Lowest and highest frequency (Hz) with their spans; `None`: from the record.
    pub band_hertz: Option<Band>,
    pub points: usize,
    pub max_lag_seconds: Option<(f64, Span)>,
}

/// `from A to B`, in the base unit of the axis.
#[derive(Clone, Debug, PartialEq)]
pub struct Band {
    pub low: f64,
    pub high: f64,
    pub low_span: Span,
    pub high_span: Span,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum FitModel {
    /// `y = A x^−b`.
    PowerLaw,
    /// `y = A e^{−t/τ}`.
    Exponential,
    /// `y = A e^{−(t/τ)^β}`.
    StretchedExponential,
    /// `S = A τ / (1 + (ωτ)^b)`, ω = 2πf.
    NoiseForm,
    /// `τ = τ∞ e^{Δ/T}`.
    Arrhenius,
}

impl FitModel {
    pub fn name(self) -> &'static str {
        match self {
            FitModel::PowerLaw => "power_law",
            FitModel::Exponential => "exp",
            FitModel::StretchedExponential => "stretched_exp",
            FitModel::NoiseForm => "noise_form",
            FitModel::Arrhenius => "arrhenius",
        }
    }
    fn from_name(name: &str) -> Option<FitModel> {
        [
            FitModel::PowerLaw,
            FitModel::Exponential,
            FitModel::StretchedExponential,
            FitModel::NoiseForm,
            FitModel::Arrhenius,
        ]
        .into_iter()
        .find(|m| m.name() == name)
    }
    /// The dimension the x axis must have (`None`: any, as long as x > 0).
    pub fn x_dimension(self) -> Option<Dimension> {
        match self {
            FitModel::PowerLaw => None,
            FitModel::Exponential | FitModel::StretchedExponential => Some(Dimension::Time),
            FitModel::NoiseForm => Some(Dimension::Frequency),
            FitModel::Arrhenius => Some(Dimension::Energy),
        }
    }
    /// The fitted parameters as stored: (name, description).
    pub fn parameters(self) -> &'static [&'static str] {
        match self {
            FitModel::PowerLaw => &["A", "b"],
            FitModel::Exponential => &["A", "tau"],
            FitModel::StretchedExponential => &["A", "tau", "beta"],
            FitModel::NoiseForm => &["A", "tau", "b"],
            FitModel::Arrhenius => &["tau_infinity", "barrier"],
        }
    }
    /// The formula, in the names of the data.
    pub fn formula(self, y: &str, x: &str) -> String {
        match self {
            FitModel::PowerLaw => format!("{y} = A {x}^−b"),
            FitModel::Exponential => format!("{y} = A exp(−{x}/tau)"),
            FitModel::StretchedExponential => format!("{y} = A exp(−({x}/tau)^beta)"),
            FitModel::NoiseForm => format!("{y} = A tau / (1 + (2π {x} tau)^b)"),
            FitModel::Arrhenius => format!("{y} = tau_infinity exp(barrier/{x})"),
        }
    }
    /// Whether the fit takes logarithms of x (points at x ≤ 0 cannot enter).
    pub fn needs_positive_x(self) -> bool {
        matches!(
            self,
            FitModel::PowerLaw | FitModel::NoiseForm | FitModel::Arrhenius
        )
    }
}

#[derive(Clone, Debug, PartialEq)]
pub struct FitSpec {
    pub target: String,
    pub series: SeriesRef,
    pub model: FitModel,
    /// `over X from A to B` (base unit of the x axis).
    pub band: Option<Band>,
    /// Use the y column's error bars as σ (absolute errors) when it has them.
    pub use_errors: bool,
}

/// A resolved analysis command (boxed: the specs are large beside other families').
#[derive(Clone, Debug, PartialEq)]
pub enum AnalysisSpec {
    Spectrum(Box<SpectrumSpec>),
    Autocorrelation(Box<AutocorrelationSpec>),
    Susceptibility(Box<SusceptibilitySpec>),
    Fit(Box<FitSpec>),
}

impl AnalysisSpec {
    /// The column the command reads.
    pub fn series(&self) -> &SeriesRef {
        match self {
            AnalysisSpec::Spectrum(s) => &s.series,
            AnalysisSpec::Autocorrelation(s) => &s.series,
            AnalysisSpec::Susceptibility(s) => &s.series,
            AnalysisSpec::Fit(s) => &s.series,
        }
    }
    /// The name the result is stored under.
    pub fn target(&self) -> &str {
        match self {
            AnalysisSpec::Spectrum(s) => &s.target,
            AnalysisSpec::Autocorrelation(s) => &s.target,
            AnalysisSpec::Susceptibility(s) => &s.target,
            AnalysisSpec::Fit(s) => &s.target,
        }
    }
    fn set_target(&mut self, target: &str) {
        let slot = match self {
            AnalysisSpec::Spectrum(s) => &mut s.target,
            AnalysisSpec::Autocorrelation(s) => &mut s.target,
            AnalysisSpec::Susceptibility(s) => &mut s.target,
            AnalysisSpec::Fit(s) => &mut s.target,
        };
        *slot = target.to_string();
    }
}

/// A command's phrase: the column it reads and its connecting words with their values.
struct ColumnPhrase<'a> {
    subject: &'a ColumnRef,
    words: Phrase<'a>,
}

impl<'a> ColumnPhrase<'a> {
    fn get(&self, word: &str) -> Option<(&'a Ident, &'a Value)> {
        self.words.get(word)
    }
}

/// How the analysis commands word the problems of their phrase.
struct AnalysisVoice<'k> {
    keyword: &'k str,
}

impl AnalysisVoice<'_> {
    fn reads(&self) -> String {
        format!("it reads `{}`", usage(self.keyword))
    }
}

impl PhraseVoice for AnalysisVoice<'_> {
    fn stray_value(&self, value: &Arg) -> Problem {
        Problem::new(
            ErrorKind::Value,
            value.span(),
            "unexpected value here: a connecting word should come first",
        )
        .with_help(self.reads())
    }
    fn unknown_word(&self, word: &Ident) -> Problem {
        Problem::new(
            ErrorKind::Value,
            word.span,
            format!("`{}` does not take `{}`", self.keyword, word.name),
        )
        .with_help(self.reads())
    }
    fn no_value(&self, word: &Ident, known: bool) -> Option<Problem> {
        known.then(|| no_value_problem(word).with_help(self.reads()))
    }
}

/// How each command's phrase reads, for messages.
fn usage(keyword: &str) -> &'static str {
    match keyword {
        "spectrum" => "spectrum TABLE.COLUMN [against t]",
        "autocorrelation" => "autocorrelation TABLE.COLUMN [against t]",
        "susceptibility" => {
            "susceptibility TABLE.COLUMN at TEMPERATURE [against t] [from F1 to F2]"
        }
        _ => "fit TABLE.COLUMN [against X] with MODEL [over X from A to B]",
    }
}

/// The unit of a squared quantity per hertz: "μ²/Hz", "1/Hz", "(J/(mol K))²/Hz".
pub fn squared_unit_per(unit: &str, per: &str) -> String {
    if unit.is_empty() {
        format!("1/{per}")
    } else if unit.chars().all(|c| c.is_alphanumeric() || c == '_') {
        format!("{unit}²/{per}")
    } else {
        format!("({unit})²/{per}")
    }
}

impl Checker<'_> {
    pub(super) fn check_analysis(
        &mut self,
        statement: &Statement,
        target: Option<&Ident>,
        args: &[Arg],
        options: &[Opt],
        view: &mut View,
    ) -> Option<Checked> {
        let keyword = statement.keyword.name.as_str();
        let before = self.problems.len();
        let target = match target {
            Some(t) => self.target_name(Some(t)),
            None => Some(format!("last_{keyword}")),
        };
        let allowed: &[&str] = match keyword {
            "spectrum" | "autocorrelation" => &["against"],
            "susceptibility" => &["at", "against", "from", "to"],
            _ => &["against", "with", "over", "from", "to"],
        };
        let phrase = self.analysis_phrase(statement, args, allowed);
        let allowed_options = match keyword {
            "spectrum" => SPECTRUM_OPTIONS,
            "autocorrelation" => AUTOCORRELATION_OPTIONS,
            "susceptibility" => SUSCEPTIBILITY_OPTIONS,
            _ => FIT_OPTIONS,
        };
        let options = self.options(options, allowed_options, keyword);
        let phrase = phrase?;
        let spec = match keyword {
            "spectrum" => self
                .spectrum(&phrase, &options, view)
                .map(|s| AnalysisSpec::Spectrum(Box::new(s))),
            "autocorrelation" => self
                .autocorrelation(&phrase, &options, view)
                .map(|s| AnalysisSpec::Autocorrelation(Box::new(s))),
            "susceptibility" => self
                .susceptibility(statement, &phrase, &options, view)
                .map(|s| AnalysisSpec::Susceptibility(Box::new(s))),
            _ => self
                .fit(statement, &phrase, &options, view)
                .map(|s| AnalysisSpec::Fit(Box::new(s))),
        };
        if self.problems.len() > before {
            return None;
        }
        let (target, mut spec) = (target?, spec?);
        spec.set_target(&target);
        declare_results(&spec, &target, view);
        Some(Checked::Command(CommandSpec::Analysis(spec)))
    }

    /// Reads the phrase: its column, then `(word, value)` pairs.
    fn analysis_phrase<'a>(
        &mut self,
        statement: &Statement,
        args: &'a [Arg],
        allowed: &[&str],
    ) -> Option<ColumnPhrase<'a>> {
        let keyword = statement.keyword.name.as_str();
        let subject = match args.first() {
            Some(Arg::Value(Value::Column(c))) => c,
            Some(Arg::Value(Value::Word(w))) => {
                self.push(
                    Problem::new(
                        ErrorKind::Name,
                        w.span,
                        format!("say which table `{}` comes from", w.name),
                    )
                    .with_help(format!("write `{keyword} TABLE.{}`", w.name)),
                );
                return None;
            }
            Some(other) => {
                self.push(
                    Problem::new(
                        ErrorKind::Value,
                        other.span(),
                        format!("`{keyword}` reads a column first: `TABLE.COLUMN`"),
                    )
                    .with_help(format!("it reads `{}`", usage(keyword))),
                );
                return None;
            }
            None => {
                self.push(
                    Problem::new(
                        ErrorKind::Value,
                        statement.keyword.span,
                        format!("`{keyword}` needs the column it analyses"),
                    )
                    .with_help(format!("it reads `{}`", usage(keyword))),
                );
                return None;
            }
        };
        let rules = PhraseRules {
            words: allowed,
            bare: &[],
            required: false,
            repeatable: false,
            after_unknown: AfterUnknown::ItsValue,
        };
        let words = self.read_phrase(&args[1..], &rules, &AnalysisVoice { keyword })?;
        Some(ColumnPhrase { subject, words })
    }

    /// Resolves `TABLE.Y` and its x column (`against X`, `over X`, or `default_x`).
    fn series(
        &mut self,
        phrase: &ColumnPhrase<'_>,
        default_x: &dyn Fn(&[super::ColumnView], &str) -> Option<String>,
        keyword: &str,
        view: &View,
    ) -> Option<SeriesRef> {
        let subject = phrase.subject;
        let table = subject.table.as_ref()?;
        if !self.table_exists(table, view) {
            return None;
        }
        let unit = self.column_of(&table.name, &subject.column, view)?;
        let columns = view.columns(&table.name)?.clone();
        let mut named: Vec<(&Ident, Span)> = Vec::new();
        for word in ["against", "over"] {
            if let Some((w, value)) = phrase.get(word) {
                match value {
                    Value::Word(ident) => named.push((ident, w.span.to(ident.span))),
                    Value::Column(c) => match &c.table {
                        Some(t) if t.name != table.name => {
                            self.push(Problem::new(
                                ErrorKind::Value,
                                c.span,
                                format!(
                                    "x comes from `{}` but the column is from `{}`; write just `{word} {}`",
                                    t.name, table.name, c.column.name
                                ),
                            ));
                            return None;
                        }
                        _ => named.push((&c.column, w.span.to(c.span))),
                    },
                    other => {
                        self.push(Problem::new(
                            ErrorKind::Value,
                            other.span(),
                            format!("`{word}` names a column of `{}`", table.name),
                        ));
                        return None;
                    }
                }
            }
        }
        if let [(first, _), (second, _)] = named.as_slice() {
            if first.name != second.name {
                self.push(Problem::new(
                    ErrorKind::Value,
                    second.span,
                    format!(
                        "the fit is against `{}` but the band is over `{}`: they must be the same column",
                        first.name, second.name
                    ),
                ));
                return None;
            }
        }
        let (x_column, x_unit, x_span) = match named.first() {
            Some((ident, span)) => {
                let x_unit = self.column_of(&table.name, ident, view)?;
                (ident.name.clone(), x_unit, *span)
            }
            None => match default_x(&columns, &subject.column.name) {
                Some(name) => {
                    let unit = columns
                        .iter()
                        .find(|c| c.name == name)
                        .map(|c| c.unit.clone())
                        .unwrap_or_default();
                    (name, unit, subject.span)
                }
                None => {
                    let names: Vec<&str> = columns.iter().map(|c| c.name.as_str()).collect();
                    self.push(
                        Problem::new(
                            ErrorKind::Name,
                            subject.span,
                            format!(
                                "say which column of `{}` is the axis: `{keyword} {}.{} against X`",
                                table.name, table.name, subject.column.name
                            ),
                        )
                        .with_help(format!("columns: {}", names.join(", "))),
                    );
                    return None;
                }
            },
        };
        if x_column == subject.column.name {
            self.push(Problem::new(
                ErrorKind::Value,
                x_span,
                format!("`{x_column}` cannot be read against itself"),
            ));
            return None;
        }
        Some(SeriesRef {
            table: table.name.clone(),
            column: subject.column.name.clone(),
            unit,
            x_column,
            x_unit: AxisUnit::of(&x_unit),
            span: subject.span,
            x_span,
        })
    }

    /// A UnitError unless the x axis has `wanted` dimension.
    fn require_axis(&mut self, series: &SeriesRef, wanted: Dimension, what: &str) -> bool {
        if series.x_unit.dimension() == Some(wanted) {
            return true;
        }
        let unit = match &series.x_unit {
            AxisUnit::Known { symbol, .. } | AxisUnit::Text(symbol) => format!("`{symbol}`"),
            AxisUnit::Pure => "a pure number".to_string(),
        };
        self.push(
            Problem::new(
                ErrorKind::Unit,
                series.x_span,
                format!(
                    "{what} needs {} axis, but `{}` is in {unit}",
                    wanted.noun(),
                    series.x_label()
                ),
            )
            .with_help(format!(
                "read it against a column in {}",
                wanted.suggested_units()
            )),
        );
        false
    }

    /// A positive time option (seconds).
    fn time_option(&mut self, option: Option<&&Opt>, what: &str) -> Option<Option<(f64, Span)>> {
        match option {
            Some(o) => self
                .positive(o, Dimension::Time, what)
                .map(|v| Some((v, o.value.span()))),
            None => Some(None),
        }
    }

    fn spectrum(
        &mut self,
        phrase: &ColumnPhrase<'_>,
        options: &[&Opt],
        view: &View,
    ) -> Option<SpectrumSpec> {
        let series = self.series(phrase, &time_column, "spectrum", view);
        let find = |key: &str| options.iter().find(|o| o.key.name == key).copied();
        let segment = match find("segment") {
            Some(o) => self
                .count(&o.value, "`segment` (samples per segment)", 2, MAX_SEGMENT)
                .map(|n| Some((n as usize, o.value.span()))),
            None => Some(None),
        };
        let overlap = match find("overlap") {
            Some(o) => self.fraction(&o.value, "`overlap` (a fraction of the segment)"),
            None => Some(0.5),
        };
        let window = match find("window") {
            Some(o) => self
                .word(&o.value, "`window`", WINDOWS)
                .and_then(|w| Window::from_name(&w)),
            None => Some(Window::Hann),
        };
        let detrend = match find("detrend") {
            Some(o) => self
                .word(&o.value, "`detrend`", DETRENDS)
                .and_then(|w| Detrend::from_name(&w)),
            None => Some(Detrend::Constant),
        };
        let series = series?;
        if !self.require_axis(&series, Dimension::Time, "a spectrum") {
            return None;
        }
        Some(SpectrumSpec {
            target: String::new(),
            series,
            segment: segment?,
            overlap_fraction: overlap?,
            window: window?,
            detrend: detrend?,
        })
    }

    /// A pure number in [0, 1).
    fn fraction(&mut self, value: &Value, what: &str) -> Option<f64> {
        let Value::Quantity(q) = value else {
            self.push(Problem::new(
                ErrorKind::Value,
                value.span(),
                format!("{what} is a number from 0 to below 1, e.g. 0.5"),
            ));
            return None;
        };
        let v = self.convert(q, None, Dimension::Dimensionless, what, false)?;
        if !(0.0..1.0).contains(&v) {
            self.push(Problem::new(
                ErrorKind::Value,
                q.span,
                format!(
                    "{what} must be at least 0 and below 1, not {}",
                    q.number.text
                ),
            ));
            return None;
        }
        Some(v)
    }

    fn autocorrelation(
        &mut self,
        phrase: &ColumnPhrase<'_>,
        options: &[&Opt],
        view: &View,
    ) -> Option<AutocorrelationSpec> {
        let series = self.series(phrase, &time_column, "autocorrelation", view);
        let find = |key: &str| options.iter().find(|o| o.key.name == key);
        let max_lag = self.time_option(find("max_lag"), "`max_lag`");
        let normalisation = match find("normalisation") {
            Some(o) => self
                .word(&o.value, "`normalisation`", NORMALISATIONS)
                .map(|w| {
                    if w == "unbiased" {
                        Normalisation::Unbiased
                    } else {
                        Normalisation::Biased
                    }
                }),
            None => Some(Normalisation::Biased),
        };
        let series = series?;
        if !self.require_axis(&series, Dimension::Time, "an autocorrelation") {
            return None;
        }
        Some(AutocorrelationSpec {
            target: String::new(),
            series,
            max_lag_seconds: max_lag?,
            normalisation: normalisation?,
        })
    }

    /// `from A to B` of `dimension`, converted to its base unit; `None` inside if absent.
    fn band(
        &mut self,
        statement: &Statement,
        phrase: &ColumnPhrase<'_>,
        axis: &AxisUnit,
        what: &str,
    ) -> Option<Option<Band>> {
        let (from, to) = (phrase.get("from"), phrase.get("to"));
        let (from, to) = match (from, to) {
            (None, None) => return Some(None),
            (Some(f), Some(t)) => (f, t),
            (Some((word, _)), None) | (None, Some((word, _))) => {
                self.push(
                    Problem::new(
                        ErrorKind::Value,
                        word.span,
                        format!("{what} needs both ends: `from A to B`"),
                    )
                    .with_help(format!("it reads `{}`", usage(&statement.keyword.name))),
                );
                return None;
            }
        };
        let low = self.band_edge(from.1, axis, "the lower edge");
        let high = self.band_edge(to.1, axis, "the upper edge");
        let (low, high) = (low?, high?);
        if high <= low {
            self.push(Problem::new(
                ErrorKind::Value,
                to.1.span(),
                "the upper edge must be above the lower edge",
            ));
            return None;
        }
        Some(Some(Band {
            low,
            high,
            low_span: from.1.span(),
            high_span: to.1.span(),
        }))
    }

    /// One edge of a band, in the base unit of the axis.
    fn band_edge(&mut self, value: &Value, axis: &AxisUnit, what: &str) -> Option<f64> {
        let Value::Quantity(q) = value else {
            self.push(Problem::new(
                ErrorKind::Value,
                value.span(),
                format!("{what} of the band is a number with a unit, e.g. `10 Hz`"),
            ));
            return None;
        };
        match axis {
            AxisUnit::Known { dimension, .. } => {
                self.convert(q, None, *dimension, &format!("{what} of the band"), false)
            }
            AxisUnit::Pure => self.convert(q, None, Dimension::Dimensionless, what, false),
            AxisUnit::Text(text) => self.free_unit_edge(q, text, what),
        }
    }

    /// A band edge on an axis with a free-text unit: written as a bare number in that unit.
    fn free_unit_edge(&mut self, q: &Quantity, unit: &str, what: &str) -> Option<f64> {
        if let Some(u) = &q.unit {
            self.push(Problem::new(
                ErrorKind::Unit,
                u.span,
                format!(
                    "the axis is in `{unit}`, which the language cannot convert: write {what} as a bare number in `{unit}`"
                ),
            ));
            return None;
        }
        Some(q.number.value)
    }

    fn susceptibility(
        &mut self,
        statement: &Statement,
        phrase: &ColumnPhrase<'_>,
        options: &[&Opt],
        view: &View,
    ) -> Option<SusceptibilitySpec> {
        let series = self.series(phrase, &time_column, "susceptibility", view);
        let temperature = match phrase.get("at") {
            Some((_, Value::Quantity(q))) => self.temperature(q, None, "the temperature"),
            Some((_, other)) => {
                self.push(Problem::new(
                    ErrorKind::Value,
                    other.span(),
                    "`at` gives the temperature of the series, e.g. `at 0.4 K`",
                ));
                None
            }
            None => {
                self.push(
                    Problem::new(
                        ErrorKind::Value,
                        phrase.subject.span,
                        "the fluctuation–dissipation theorem needs the temperature of the series: `at T`",
                    )
                    .with_help(format!(
                        "write `susceptibility {} at 0.4 K`",
                        phrase.subject.column.name
                    )),
                );
                None
            }
        };
        let frequency = AxisUnit::Known {
            dimension: Dimension::Frequency,
            symbol: "Hz".to_string(),
        };
        let band = self.band(statement, phrase, &frequency, "the frequency range");
        if let Some(Some(b)) = &band {
            if b.low <= 0.0 {
                self.push(Problem::new(
                    ErrorKind::Value,
                    b.low_span,
                    "the frequencies of a susceptibility are positive (they are spaced in log f)",
                ));
            }
        }
        let find = |key: &str| options.iter().find(|o| o.key.name == key);
        let points = match find("points") {
            Some(o) => self.count(
                &o.value,
                "`points` (frequencies)",
                3,
                MAX_SUSCEPTIBILITY_POINTS,
            ),
            None => Some(DEFAULT_SUSCEPTIBILITY_POINTS),
        };
        let max_lag = self.time_option(find("max_lag"), "`max_lag`");
        let series = series?;
        if !self.require_axis(&series, Dimension::Time, "a susceptibility") {
            return None;
        }
        Some(SusceptibilitySpec {
            target: String::new(),
            series,
            temperature_kelvin: temperature?,
            band_hertz: band?,
            points: points? as usize,
            max_lag_seconds: max_lag?,
        })
    }

    fn fit(
        &mut self,
        statement: &Statement,
        phrase: &ColumnPhrase<'_>,
        options: &[&Opt],
        view: &View,
    ) -> Option<FitSpec> {
        let model = match phrase.get("with") {
            Some((_, Value::Word(ident))) => match FitModel::from_name(&ident.name) {
                Some(m) => Some(m),
                None => {
                    self.push(
                        Problem::new(
                            ErrorKind::Name,
                            ident.span,
                            format!("unknown fit model `{}`", ident.name),
                        )
                        .with_help(
                            did_you_mean(&ident.name, FIT_MODELS.iter().copied()).unwrap_or_else(
                                || format!("models: {}", super::list_words(FIT_MODELS)),
                            ),
                        ),
                    );
                    None
                }
            },
            Some((_, other)) => {
                self.push(Problem::new(
                    ErrorKind::Value,
                    other.span(),
                    format!("`with` names the model: {}", super::list_words(FIT_MODELS)),
                ));
                None
            }
            None => {
                self.push(
                    Problem::new(
                        ErrorKind::Value,
                        phrase.subject.span,
                        "say which model to fit: `with MODEL`",
                    )
                    .with_help(format!("models: {}", super::list_words(FIT_MODELS))),
                );
                None
            }
        };
        if let (Some((over, _)), None) = (phrase.get("over"), phrase.get("from")) {
            self.push(
                Problem::new(
                    ErrorKind::Value,
                    over.span,
                    "`over X` is followed by the band: `over X from A to B`",
                )
                .with_help("write e.g. `over f from 10 Hz to 1 kHz`"),
            );
        }
        let default_x = |columns: &[super::ColumnView], y: &str| -> Option<String> {
            // Arrhenius fits read against `T`; otherwise the table's first column
            // (`f` of a spectrum, `lag` of an autocorrelation, `T` of a scan).
            let preferred = match model {
                Some(FitModel::Arrhenius) => Some("T"),
                _ => None,
            };
            preferred
                .and_then(|p| columns.iter().find(|c| c.name == p))
                .or_else(|| columns.first())
                .filter(|c| c.name != y)
                .map(|c| c.name.clone())
        };
        let series = self.series(phrase, &default_x, "fit", view);
        let find = |key: &str| options.iter().find(|o| o.key.name == key);
        let use_errors = match find("errors") {
            Some(o) => self
                .word(&o.value, "`errors`", &["on", "off"])
                .map(|w| w == "on"),
            None => Some(true),
        };
        let (series, model) = (series?, model?);
        if let Some(dimension) = model.x_dimension() {
            let what = format!("a `{}` fit", model.name());
            if !self.require_axis(&series, dimension, &what) {
                return None;
            }
        }
        let band = self.band(statement, phrase, &series.x_unit, "the band")?;
        if let Some(b) = &band {
            if model.needs_positive_x() && b.low <= 0.0 {
                self.push(Problem::new(
                    ErrorKind::Value,
                    b.low_span,
                    format!(
                        "a `{}` fit takes logarithms of `{}`: the band must start above 0",
                        model.name(),
                        series.x_column
                    ),
                ));
                return None;
            }
        }
        if phrase.get("from").is_some() && phrase.get("over").is_none() {
            self.push(
                Problem::new(
                    ErrorKind::Value,
                    phrase
                        .get("from")
                        .map(|(w, _)| w.span)
                        .unwrap_or(series.span),
                    "a band is written `over X from A to B`",
                )
                .with_help(format!("write `over {} from ...`", series.x_column)),
            );
            return None;
        }
        Some(FitSpec {
            target: String::new(),
            series,
            model,
            band,
            use_errors: use_errors?,
        })
    }
}

/// The default time axis: `t` if the table has it.
fn time_column(columns: &[super::ColumnView], _y: &str) -> Option<String> {
    columns
        .iter()
        .find(|c| c.name == "t")
        .map(|c| c.name.clone())
}

/// Tells the view what the command will store.
fn declare_results(spec: &AnalysisSpec, target: &str, view: &mut View) {
    let series = spec.series();
    let column = |name: &str, unit: &str| super::ColumnView {
        name: name.to_string(),
        unit: unit.to_string(),
        derived: false,
    };
    let time = series.x_unit.base_unit();
    let columns = match spec {
        AnalysisSpec::Spectrum(_) => vec![
            column("f", "Hz"),
            column("psd", &squared_unit_per(&series.unit, "Hz")),
        ],
        AnalysisSpec::Autocorrelation(_) => {
            view.set(
                &format!("{target}{TAU_SUFFIX}"),
                NameView::Table(vec![
                    column("tau_int", &time),
                    column("tau_int_error", &time),
                    column("window", &time),
                ]),
            );
            vec![column("lag", &time), column("C", "")]
        }
        AnalysisSpec::Susceptibility(_) => {
            let chi = squared_unit_per(&series.unit, "K");
            view.set(
                &format!("{target}{TAU_SUFFIX}"),
                NameView::Table(vec![
                    column("tau", "s"),
                    column("f_peak", "Hz"),
                    column("chi0", &chi),
                ]),
            );
            vec![
                column("f", "Hz"),
                column("chi_real", &chi),
                column("chi_imag", &chi),
            ]
        }
        AnalysisSpec::Fit(fit) => {
            let units = parameter_units(fit.model, &series.unit, &series.x_unit.base_unit());
            let mut columns = Vec::new();
            for (name, unit) in fit.model.parameters().iter().zip(&units) {
                columns.push(column(name, unit));
                columns.push(column(&format!("{name}_error"), unit));
            }
            columns.push(column("chi2_dof", ""));
            columns.push(column("dof", ""));
            columns
        }
    };
    view.set(target, NameView::Table(columns));
    view.set(&format!("{target}{FIGURE_SUFFIX}"), NameView::Figure);
}

/// The units of a fit's parameters, in the order of `FitModel::parameters`.
pub fn parameter_units(model: FitModel, y_unit: &str, x_unit: &str) -> Vec<String> {
    let y = y_unit.to_string();
    let x = x_unit.to_string();
    match model {
        FitModel::PowerLaw => {
            let a = match (y.is_empty(), x.is_empty()) {
                (_, true) => y.clone(),
                (true, false) => format!("{x}^b"),
                (false, false) => format!("{y}·{x}^b"),
            };
            vec![a, String::new()]
        }
        FitModel::Exponential => vec![y, x],
        FitModel::StretchedExponential => vec![y, x, String::new()],
        // S = A τ/(…) with τ in seconds: A is S per second.
        FitModel::NoiseForm => vec![
            if y.is_empty() {
                "1/s".to_string()
            } else {
                format!("{y}/s")
            },
            "s".to_string(),
            String::new(),
        ],
        FitModel::Arrhenius => vec![y, "K".to_string()],
    }
}
