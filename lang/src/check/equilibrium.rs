//! Checking of the equilibrium runs beyond `scan`: `anneal` (a scan whose chain carries
//! its state from one temperature to the next).
//!
//! `anneal` reads its phrase exactly like `scan` (`T from A to B in N steps` or
//! `T at [...]`) and takes the same options except `tempering`; the phrase is rebuilt as a
//! scan range and checked by the scan checker, so both statements report the same errors.

use super::phrase::{is_word, phrase_span};
use super::{list_words, Checked, Checker, ColumnView, CommandSpec, NameView, ScanSpec, View};
use crate::ast::{Arg, Ident, Number, Opt, ScanRange, Span, Statement, Value};
use crate::diagnostic::{did_you_mean, ErrorKind, Problem};
use crate::units::Dimension;
use crate::workspace::LatticeKind;
use icefield_stdlib::scan::Ladder;

/// A resolved equilibrium command.
#[derive(Clone, Debug, PartialEq)]
pub enum EquilibriumSpec {
    /// `anneal T from A to B in N steps`: one chain through the temperatures in the order
    /// written (the coupling-table engine; equilibration and measurement at each).
    Anneal(ScanSpec),
    /// `structure_factor on plane [h, h, l] at T` or `... along [0, 0, l] through [0, 0, 2]
    /// at T`: neutron S(Q) of configurations sampled at T.
    StructureFactor(Box<StructureFactorSpec>),
}

/// The default result name of an unnamed `anneal`.
pub const DEFAULT_ANNEAL_NAME: &str = "last_anneal";

const ANNEAL_EXAMPLE: &str =
    "write e.g. `cool = anneal T from 5 K to 0.2 K in 40 steps, sweeps = 2000`";

impl Checker<'_> {
    pub(super) fn check_equilibrium(
        &mut self,
        statement: &Statement,
        target: Option<&Ident>,
        args: &[Arg],
        options: &[Opt],
        view: &mut View,
    ) -> Option<Checked> {
        match statement.keyword.name.as_str() {
            "anneal" => self.anneal(statement, target, args, options, view),
            "structure_factor" => self.structure_factor(statement, target, args, options, view),
            other => {
                self.push(Problem::new(
                    ErrorKind::NotImplemented,
                    statement.keyword.span,
                    format!("`{other}` is not runnable yet"),
                ));
                None
            }
        }
    }

    fn anneal(
        &mut self,
        statement: &Statement,
        target: Option<&Ident>,
        args: &[Arg],
        options: &[Opt],
        view: &mut View,
    ) -> Option<Checked> {
        if let Some(option) = options.iter().find(|o| o.key.name == "tempering") {
            self.push(Problem::new(
                ErrorKind::Value,
                option.key.span,
                "an anneal is one chain carried through the temperatures; replica exchange is \
                 `scan ..., tempering = on`",
            ));
            return None;
        }
        let (variable, range) = self.anneal_phrase(statement, args)?;
        let default_target = Ident {
            name: DEFAULT_ANNEAL_NAME.to_string(),
            span: statement.keyword.span,
        };
        let target = target.unwrap_or(&default_target);
        let checked = self.scan(statement, Some(target), &variable, &range, options, view)?;
        let Checked::Scan(mut spec) = checked else {
            return None;
        };
        spec.ladder = Ladder::Anneal;
        // The scan checker told the view about the table under the same name.
        if view.get(&spec.target).is_none() {
            view.set(&spec.target, NameView::Opaque);
        }
        Some(Checked::Command(CommandSpec::Equilibrium(
            EquilibriumSpec::Anneal(spec),
        )))
    }

    /// `T from A to B in N steps` or `T at [...]`, as a scan range.
    fn anneal_phrase(&mut self, statement: &Statement, args: &[Arg]) -> Option<(Ident, ScanRange)> {
        let quantity = |arg: Option<&Arg>| match arg {
            Some(Arg::Value(Value::Quantity(q))) => Some(q.clone()),
            _ => None,
        };
        let variable = match args.first() {
            Some(Arg::Value(Value::Word(ident))) => ident.clone(),
            Some(other) => {
                self.push(
                    Problem::new(
                        ErrorKind::Syntax,
                        other.span(),
                        "`anneal` is followed by the temperature `T` and its range",
                    )
                    .with_help(ANNEAL_EXAMPLE),
                );
                return None;
            }
            None => {
                self.push(
                    Problem::new(
                        ErrorKind::Syntax,
                        statement.keyword.span,
                        "`anneal` needs a temperature range",
                    )
                    .with_help(ANNEAL_EXAMPLE),
                );
                return None;
            }
        };
        let rest = &args[1..];
        if is_word(rest.first(), "at") {
            return match (rest.get(1), rest.len()) {
                (Some(Arg::Value(list @ Value::List { .. })), 2) => {
                    Some((variable, ScanRange::At(list.clone())))
                }
                _ => {
                    self.push(
                        Problem::new(
                            ErrorKind::Syntax,
                            rest.get(1).map(Arg::span).unwrap_or(rest[0].span()),
                            "`at` is followed by a list of temperatures such as `[5, 2, 1] K`",
                        )
                        .with_help(ANNEAL_EXAMPLE),
                    );
                    None
                }
            };
        }
        let shaped = rest.len() == 7
            && is_word(rest.first(), "from")
            && is_word(rest.get(2), "to")
            && is_word(rest.get(4), "in")
            && is_word(rest.get(6), "steps");
        let (from, to, steps) = (
            quantity(rest.get(1)),
            quantity(rest.get(3)),
            quantity(rest.get(5)),
        );
        match (shaped, from, to, steps) {
            (true, Some(from), Some(to), Some(steps)) => {
                if let Some(unit) = &steps.unit {
                    self.push(Problem::new(
                        ErrorKind::Value,
                        unit.span,
                        "the number of steps is a pure number",
                    ));
                    return None;
                }
                let steps = Number {
                    span: steps.span,
                    ..steps.number
                };
                Some((variable, ScanRange::FromTo { from, to, steps }))
            }
            _ => {
                let span = phrase_span(rest, variable.span);
                self.push(
                    Problem::new(
                        ErrorKind::Syntax,
                        span,
                        "an anneal's range reads `from A to B in N steps` or `at [T1, T2, ...] K`",
                    )
                    .with_help(ANNEAL_EXAMPLE),
                );
                None
            }
        }
    }
}

/// Where in reciprocal space a structure factor is computed (r.l.u. of the cubic cell).
#[derive(Clone, Debug, PartialEq)]
pub enum QGeometry {
    /// `on plane [h, h, l]`: Q = origin + x·u + y·v with x, y in [−range, range].
    Plane {
        origin: [f64; 3],
        u: [f64; 3],
        v: [f64; 3],
        /// The letters of the two axes (`h`, `l`), the names of the table's columns.
        axes: [String; 2],
    },
    /// `along [0, 0, l] through [0, 0, 2]`: Q = through + (x − x0)·direction with x in
    /// [x0 − range, x0 + range], x0 the coordinate of the through point.
    Line {
        through: [f64; 3],
        direction: [f64; 3],
        axis: String,
    },
}

/// A resolved `structure_factor` command.
#[derive(Clone, Debug, PartialEq)]
pub struct StructureFactorSpec {
    pub target: String,
    pub geometry: QGeometry,
    pub temperature_kelvin: f64,
    /// Half-width of the Q range along each axis (r.l.u.).
    pub range_rlu: f64,
    pub points: usize,
    /// Neutron polarisation axis (cubic coordinates); enables the sf and nsf channels.
    pub polarisation: Option<[f64; 3]>,
    /// Dipole form factor: the ion and the cubic lattice constant (Å).
    pub form_factor: Option<(icefield_stdlib::structure_factor::MagneticIon, f64)>,
    /// Configurations averaged.
    pub samples: u64,
    /// Sweeps between configurations.
    pub sweeps_between: u64,
    pub equilibration_sweeps: u64,
    pub loops_per_sweep: u64,
    pub start: super::StartState,
}

/// Options of `structure_factor`.
pub const STRUCTURE_FACTOR_OPTIONS: &[&str] = &[
    "range",
    "points",
    "polarisation",
    "form_factor",
    "a",
    "samples",
    "sweeps_between",
    "equilibrate",
    "loops",
    "start",
];
/// The default name of an unnamed `structure_factor`.
pub const DEFAULT_STRUCTURE_FACTOR_NAME: &str = "last_structure_factor";
const SQ_EXAMPLE: &str = "write e.g. `sq = structure_factor on plane [h, h, l] at 0.3 K, range = 4, points = 81, polarisation = [1, -1, 0]` or `cut = structure_factor along [0, 0, l] through [0, 0, 2] at 0.3 K`";
/// The most Q points per axis.
pub const MAX_Q_POINTS_PER_AXIS: u64 = 1001;

impl Checker<'_> {
    fn structure_factor(
        &mut self,
        statement: &Statement,
        target: Option<&Ident>,
        args: &[Arg],
        options: &[Opt],
        view: &mut View,
    ) -> Option<Checked> {
        let before = self.problems.len();
        let target = match target {
            Some(t) => self.target_name(Some(t)),
            None => Some(DEFAULT_STRUCTURE_FACTOR_NAME.to_string()),
        };
        let options = self.options(options, STRUCTURE_FACTOR_OPTIONS, "structure_factor");
        let find = |key: &str| options.iter().find(|o| o.key.name == key).copied();
        // The phrase: `on plane LIST at T` or `along LIST through LIST at T`.
        let (geometry, at) = if is_word(args.first(), "on")
            && matches!(args.get(1), Some(Arg::Value(Value::Word(w))) if w.name == "plane")
        {
            let plane = match args.get(2) {
                Some(Arg::Value(list @ Value::List { .. })) => self.q_plane(list),
                other => {
                    self.phrase_problem(
                        statement,
                        other,
                        "`on plane` is followed by the plane's axes, such as `[h, h, l]`",
                    );
                    None
                }
            };
            (plane, 3)
        } else if is_word(args.first(), "along") {
            let direction = match args.get(1) {
                Some(Arg::Value(list @ Value::List { .. })) => self.q_direction(list),
                other => {
                    self.phrase_problem(
                        statement,
                        other,
                        "`along` is followed by the line's direction, such as `[0, 0, l]`",
                    );
                    None
                }
            };
            let through = if is_word(args.get(2), "through") {
                match args.get(3) {
                    Some(Arg::Value(list @ Value::List { .. })) => self
                        .vector(list, Dimension::Dimensionless, "the point `through`")
                        .map(|v| [v[0], v[1], v[2]]),
                    other => {
                        self.phrase_problem(statement, other, "`through` is followed by a point of reciprocal space, such as `[0, 0, 2]`");
                        None
                    }
                }
            } else {
                self.phrase_problem(
                    statement,
                    args.get(2),
                    "a line cut names a point it goes `through`, such as `through [0, 0, 2]`",
                );
                None
            };
            let line = match (direction, through) {
                (Some((direction, axis)), Some(through)) => Some(QGeometry::Line {
                    through,
                    direction,
                    axis,
                }),
                _ => None,
            };
            (line, 4)
        } else {
            self.phrase_problem(statement, args.first(), "`structure_factor` reads `on plane [h, h, l] at T` or `along [0, 0, l] through [0, 0, 2] at T`");
            return None;
        };
        let temperature = if is_word(args.get(at), "at") {
            match args.get(at + 1) {
                Some(Arg::Value(Value::Quantity(q))) if args.len() == at + 2 => {
                    self.temperature(q, None, "the temperature")
                }
                other => {
                    self.phrase_problem(
                        statement,
                        other,
                        "`at` is followed by one temperature, such as `0.3 K`",
                    );
                    None
                }
            }
        } else {
            self.phrase_problem(
                statement,
                args.get(at),
                "the structure factor needs its temperature: `at 0.3 K`",
            );
            None
        };
        let range = match find("range") {
            Some(o) => self.positive(o, Dimension::Dimensionless, "`range` (r.l.u.)"),
            None => Some(4.0),
        };
        let points = match find("points") {
            Some(o) => self.count(&o.value, "`points` (per axis)", 2, MAX_Q_POINTS_PER_AXIS),
            None => Some(81),
        };
        let polarisation = match find("polarisation") {
            Some(o) => match self.vector(&o.value, Dimension::Dimensionless, "`polarisation`") {
                Some(p) if p.iter().all(|x| *x == 0.0) => {
                    self.push(Problem::new(
                        ErrorKind::Value,
                        o.value.span(),
                        "the polarisation [0, 0, 0] has no direction",
                    ));
                    None
                }
                Some(p) => Some(Some([p[0], p[1], p[2]])),
                None => None,
            },
            None => Some(None),
        };
        let lattice_constant =
            find("a").map(|o| self.positive(o, Dimension::Length, "`a` (cubic lattice constant)"));
        let form_factor = match find("form_factor") {
            Some(o) => {
                let name = match &o.value {
                    Value::Text { text, .. } => Some(text.clone()),
                    Value::Word(w) => Some(w.name.clone()),
                    other => {
                        self.push(Problem::new(
                            ErrorKind::Value,
                            other.span(),
                            "`form_factor` names an ion, such as \"Ho3+\"",
                        ));
                        None
                    }
                };
                let ion = name.and_then(|n| self.ion(&n, o.value.span()));
                match (ion, lattice_constant) {
                    (Some(ion), Some(Some(a))) => Some(Some((ion, a))),
                    (Some(_), None) => {
                        self.push(
                            Problem::new(ErrorKind::Value, o.key.span, "the form factor needs the cubic lattice constant `a` to turn r.l.u. into Å⁻¹")
                                .with_help("add e.g. `a = 10.1 Å`"),
                        );
                        None
                    }
                    _ => None,
                }
            }
            None => {
                if let Some(o) = find("a") {
                    self.push(Problem::new(
                        ErrorKind::Value,
                        o.key.span,
                        "`a` is used only with `form_factor`",
                    ));
                }
                Some(None)
            }
        };
        let samples = match find("samples") {
            Some(o) => self.count(&o.value, "`samples` (configurations averaged)", 1, 100_000),
            None => Some(20),
        };
        let between = match find("sweeps_between") {
            Some(o) => self.count(&o.value, "`sweeps_between`", 1, u64::MAX),
            None => Some(50),
        };
        let equilibrate = match find("equilibrate") {
            Some(o) => self.count(&o.value, "`equilibrate`", 0, u64::MAX),
            None => Some(super::DEFAULT_EQUILIBRATION_SWEEPS),
        };
        let loops = match find("loops") {
            Some(o) => self.count(
                &o.value,
                "`loops` (loop moves per sweep)",
                0,
                super::MAX_LOOPS_PER_SWEEP,
            ),
            None => Some(0),
        };
        let start = match find("start") {
            Some(o) => self
                .word(&o.value, "`start`", super::START_STATES)
                .map(|w| match w.as_str() {
                    "ice" => super::StartState::Ice,
                    "all_in_all_out" => super::StartState::AllInAllOut,
                    _ => super::StartState::Random,
                }),
            None => Some(super::StartState::Random),
        };
        if !view.lattice || !view.couplings {
            self.push(
                Problem::new(
                    ErrorKind::Name,
                    statement.keyword.span,
                    "the structure factor needs a model: declare a lattice and couplings first",
                )
                .with_help("e.g. `lattice pyrochlore L = 4` and `couplings nearest J_eff = 1.8 K`"),
            );
        } else if view
            .lattice_decl
            .as_ref()
            .is_some_and(|l| l.kind == LatticeKind::SquareIce)
        {
            self.push(Problem::new(ErrorKind::Value, statement.keyword.span, "the neutron structure factor is computed on the pyrochlore lattice, not on square ice"));
        } else if let Some(l) = &view.lattice_decl {
            self.coupling_table_fits(statement, l.cells_per_side, 1);
        }
        if self.problems.len() > before {
            return None;
        }
        let (geometry, points) = (geometry?, points? as usize);
        let target = target?;
        let channels: Vec<&str> = if polarisation.flatten().is_some() {
            vec!["total", "sf", "nsf"]
        } else {
            vec!["total"]
        };
        let mut columns: Vec<ColumnView> = match &geometry {
            QGeometry::Plane { axes, .. } => axes
                .iter()
                .map(|a| ColumnView {
                    name: a.clone(),
                    unit: "r.l.u.".into(),
                    derived: false,
                })
                .collect(),
            QGeometry::Line { axis, .. } => vec![ColumnView {
                name: axis.clone(),
                unit: "r.l.u.".into(),
                derived: false,
            }],
        };
        columns.extend(channels.iter().map(|c| ColumnView {
            name: c.to_string(),
            unit: STRUCTURE_FACTOR_UNIT.into(),
            derived: false,
        }));
        view.set(&target, NameView::Table(columns));
        Some(Checked::Command(CommandSpec::Equilibrium(
            EquilibriumSpec::StructureFactor(Box::new(StructureFactorSpec {
                target,
                geometry,
                temperature_kelvin: temperature?,
                range_rlu: range?,
                points,
                polarisation: polarisation?,
                form_factor: form_factor?,
                samples: samples?,
                sweeps_between: between?,
                equilibration_sweeps: equilibrate?,
                loops_per_sweep: loops?,
                start: start?,
            })),
        )))
    }

    fn phrase_problem(&mut self, statement: &Statement, at: Option<&Arg>, message: &str) {
        self.push(
            Problem::new(
                ErrorKind::Syntax,
                at.map(Arg::span).unwrap_or(statement.keyword.span),
                message,
            )
            .with_help(SQ_EXAMPLE),
        );
    }

    /// The ion of a form factor, with a did-you-mean over the tabulated ions.
    fn ion(
        &mut self,
        name: &str,
        span: Span,
    ) -> Option<icefield_stdlib::structure_factor::MagneticIon> {
        use icefield_stdlib::structure_factor::{MagneticIon, J0_COEFFICIENTS};
        // `Ho3` (a bare word) stands for "Ho3+".
        let spelled = if name.ends_with('+') {
            name.to_string()
        } else {
            format!("{name}+")
        };
        match MagneticIon::from_name(&spelled) {
            Ok(ion) => Some(ion),
            Err(_) => {
                let known: Vec<&str> = J0_COEFFICIENTS.iter().map(|(_, n, _)| *n).collect();
                self.push(
                    Problem::new(
                        ErrorKind::Name,
                        span,
                        format!(
                            "no magnetic form factor for the ion `{name}`; tabulated: {}",
                            list_words(&known)
                        ),
                    )
                    .with_help_opt(did_you_mean(&spelled, known.iter().copied())),
                );
                None
            }
        }
    }

    /// The axes letters of a list such as `[h, h, l]`: for each letter of h, k, l, the
    /// unit-coefficient vector of the positions it occupies; numbers are offsets.
    fn q_axes(&mut self, list: &Value) -> Option<(Vec<AxisLetter>, [f64; 3])> {
        let Value::List { items, span, .. } = list else {
            return None;
        };
        if items.len() != 3 {
            self.push(Problem::new(
                ErrorKind::Value,
                *span,
                format!(
                    "a reciprocal-space vector has three components, not {}",
                    items.len()
                ),
            ));
            return None;
        }
        let mut letters: Vec<AxisLetter> = Vec::new();
        let mut origin = [0.0; 3];
        for (k, item) in items.iter().enumerate() {
            match item {
                Value::Word(w) if ["h", "k", "l"].contains(&w.name.as_str()) => {
                    match letters.iter_mut().find(|(n, _)| *n == w.name) {
                        Some((_, v)) => v[k] = 1.0,
                        None => {
                            let mut v = [0.0; 3];
                            v[k] = 1.0;
                            letters.push((w.name.clone(), v));
                        }
                    }
                }
                Value::Word(w) => {
                    self.push(Problem::new(
                        ErrorKind::Name,
                        w.span,
                        format!(
                            "a Q component is a number or one of the letters h, k, l, not `{}`",
                            w.name
                        ),
                    ));
                    return None;
                }
                Value::Quantity(q) => {
                    origin[k] = self.convert(
                        q,
                        None,
                        Dimension::Dimensionless,
                        "a Q component (r.l.u.)",
                        false,
                    )?
                }
                other => {
                    self.push(Problem::new(
                        ErrorKind::Value,
                        other.span(),
                        "a Q component is a number or one of the letters h, k, l",
                    ));
                    return None;
                }
            }
        }
        Some((letters, origin))
    }

    fn q_plane(&mut self, list: &Value) -> Option<QGeometry> {
        let (letters, origin) = self.q_axes(list)?;
        if letters.len() != 2 {
            self.push(
                Problem::new(
                    ErrorKind::Value,
                    list.span(),
                    match letters.len() {
                        0 => "these are fixed numbers, a single point, not a plane: name two axes with the letters h, k, l".to_string(),
                        1 => format!("only the letter `{}` varies, so this is a line (its directions are collinear), not a plane: name two of h, k, l", letters[0].0),
                        _ => "three letters span all of reciprocal space, not a plane: name two of h, k, l".to_string(),
                    },
                )
                .with_help("e.g. `[h, h, l]` (the (h, h, l) plane) or `[h, k, 0]`"),
            );
            return None;
        }
        Some(QGeometry::Plane {
            origin,
            u: letters[0].1,
            v: letters[1].1,
            axes: [letters[0].0.clone(), letters[1].0.clone()],
        })
    }

    fn q_direction(&mut self, list: &Value) -> Option<([f64; 3], String)> {
        let (letters, origin) = self.q_axes(list)?;
        if letters.len() != 1 || origin.iter().any(|x| *x != 0.0) {
            self.push(
                Problem::new(ErrorKind::Value, list.span(), "a line's direction has one letter of h, k, l and zeros elsewhere, such as `[0, 0, l]` or `[h, h, 0]`")
                    .with_help("the fixed part of Q goes in `through [...]`"),
            );
            return None;
        }
        let (axis, direction) = letters.into_iter().next()?;
        Some((direction, axis))
    }
}

/// A letter of a Q vector (`h`) with the coefficient vector of the positions it occupies.
type AxisLetter = (String, [f64; 3]);

/// The unit of S(Q) columns: μ² per spin.
pub const STRUCTURE_FACTOR_UNIT: &str = "μ²";
