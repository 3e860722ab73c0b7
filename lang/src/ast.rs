//! The syntax tree of one cell. Every node keeps its byte span in the cell so the checker
//! and the runner can point at the offending text.

use serde::{Deserialize, Serialize};

/// Byte offsets `[start, end)` into the cell source.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct Span {
    pub start: usize,
    pub end: usize,
}

impl Span {
    pub fn new(start: usize, end: usize) -> Self {
        Span { start, end }
    }
    /// The smallest span covering both.
    pub fn to(self, other: Span) -> Span {
        Span::new(self.start.min(other.start), self.end.max(other.end))
    }
}

/// A name as written, with its span.
#[derive(Clone, Debug, PartialEq)]
pub struct Ident {
    pub name: String,
    pub span: Span,
}

/// A number literal, kept as text too so seeds keep all 64 bits.
#[derive(Clone, Debug, PartialEq)]
pub struct Number {
    pub value: f64,
    pub text: String,
    pub span: Span,
}

/// A number with an optional unit symbol: `1.8 K`, `4000`.
#[derive(Clone, Debug, PartialEq)]
pub struct Quantity {
    pub number: Number,
    pub unit: Option<Ident>,
    pub span: Span,
}

/// The value of an option `key = value`.
#[derive(Clone, Debug, PartialEq)]
pub enum Value {
    Quantity(Quantity),
    /// `[0.5, 1, 2] K` — the trailing unit applies to items written without one.
    List {
        items: Vec<Value>,
        unit: Option<Ident>,
        span: Span,
    },
    /// `0.5 T along [1, 1, 1]`.
    Directed {
        magnitude: Quantity,
        direction: Box<Value>,
        span: Span,
    },
    Text {
        text: String,
        span: Span,
    },
    Word(Ident),
    /// `lab.tau`: a column of a table.
    Column(ColumnRef),
}

impl Value {
    pub fn span(&self) -> Span {
        match self {
            Value::Quantity(q) => q.span,
            Value::List { span, .. } | Value::Directed { span, .. } | Value::Text { span, .. } => {
                *span
            }
            Value::Word(ident) => ident.span,
            Value::Column(c) => c.span,
        }
    }
}

/// `key = value`.
#[derive(Clone, Debug, PartialEq)]
pub struct Opt {
    pub key: Ident,
    pub value: Value,
    pub span: Span,
}

/// `thermo.specific_heat` or a bare `T`.
#[derive(Clone, Debug, PartialEq)]
pub struct ColumnRef {
    pub table: Option<Ident>,
    pub column: Ident,
    pub span: Span,
}

/// How the temperatures of a scan are given.
#[derive(Clone, Debug, PartialEq)]
pub enum ScanRange {
    /// `from A to B in N steps`.
    FromTo {
        from: Quantity,
        to: Quantity,
        steps: Number,
    },
    /// `at [a, b, c] K`.
    At(Value),
}

/// An arithmetic expression of a derived column, handed to rhai row by row.
#[derive(Clone, Debug, PartialEq)]
pub enum Expr {
    Number(Number),
    Name(Ident),
    Call {
        function: Ident,
        arguments: Vec<Expr>,
        span: Span,
    },
    Negate(Box<Expr>, Span),
    Binary {
        left: Box<Expr>,
        operator: String,
        right: Box<Expr>,
        span: Span,
    },
}

impl Expr {
    pub fn span(&self) -> Span {
        match self {
            Expr::Number(n) => n.span,
            Expr::Name(i) => i.span,
            Expr::Call { span, .. } | Expr::Negate(_, span) | Expr::Binary { span, .. } => *span,
        }
    }
    /// Every bare name (not a function) used in the expression.
    pub fn names(&self, out: &mut Vec<Ident>) {
        match self {
            Expr::Number(_) => {}
            Expr::Name(ident) => out.push(ident.clone()),
            Expr::Call { arguments, .. } => arguments.iter().for_each(|a| a.names(out)),
            Expr::Negate(inner, _) => inner.names(out),
            Expr::Binary { left, right, .. } => {
                left.names(out);
                right.names(out);
            }
        }
    }
    /// Every function called in the expression.
    pub fn calls(&self, out: &mut Vec<(Ident, usize)>) {
        match self {
            Expr::Number(_) | Expr::Name(_) => {}
            Expr::Call {
                function,
                arguments,
                ..
            } => {
                out.push((function.clone(), arguments.len()));
                arguments.iter().for_each(|a| a.calls(out));
            }
            Expr::Negate(inner, _) => inner.calls(out),
            Expr::Binary { left, right, .. } => {
                left.calls(out);
                right.calls(out);
            }
        }
    }
}

/// One item of a command's phrase: `evolve for 10 ms at 0.4 K` is the connective `for`,
/// the value `10 ms`, the connective `at`, the value `0.4 K`.
#[derive(Clone, Debug, PartialEq)]
pub enum Arg {
    /// A connecting word: `for`, `at`, `with`, `over`, `from`, `to`, `against`, `along`,
    /// `in`, `steps`, `through`, `on`, `of`, `by`, `within`.
    Connective(Ident),
    Value(Value),
}

impl Arg {
    pub fn span(&self) -> Span {
        match self {
            Arg::Connective(word) => word.span,
            Arg::Value(value) => value.span(),
        }
    }
    /// The connecting word, if this is one.
    pub fn connective(&self) -> Option<&str> {
        match self {
            Arg::Connective(word) => Some(word.name.as_str()),
            Arg::Value(_) => None,
        }
    }
}

/// One statement of a cell.
#[derive(Clone, Debug, PartialEq)]
pub enum StatementKind {
    /// `lattice pyrochlore L = 4`
    Lattice { kind: Ident, options: Vec<Opt> },
    /// `couplings nearest J_eff = 1.8 K`
    Couplings { kind: Ident, options: Vec<Opt> },
    /// `field B = 0.5 T along [1, 1, 1], moment = 10 µB`
    Field { options: Vec<Opt> },
    /// `seed 20261201`
    Seed { value: Number },
    /// `measure energy, specific_heat`
    Measure { names: Vec<Ident> },
    /// `thermo = scan T from 0.3 K to 8 K in 30 steps, sweeps = 4000`
    Scan {
        target: Option<Ident>,
        variable: Ident,
        range: ScanRange,
        options: Vec<Opt>,
    },
    /// `table thermo`
    Table { name: Ident, options: Vec<Opt> },
    /// `show thermo`
    Show { name: Ident, options: Vec<Opt> },
    /// `plot thermo.specific_heat against T, xscale = log`
    Plot {
        target: Option<Ident>,
        ys: Vec<ColumnRef>,
        x: ColumnRef,
        options: Vec<Opt>,
    },
    /// `rhai { ... }`: the body text and where it starts in the cell.
    Rhai { body: String, body_span: Span },
    /// `column thermo.c_molar = molar(specific_heat) unit "J/(mol K)"`
    Column {
        target: ColumnRef,
        expr: Expr,
        /// The expression exactly as written, evaluated by rhai.
        expr_text: String,
        unit: Option<(String, Span)>,
    },
    /// `export thermo to "thermo.csv"` [, format = csv|json]
    Export {
        name: Ident,
        path: (String, Span),
        options: Vec<Opt>,
    },
    /// `[NAME =] KEYWORD PHRASE... [, options]`: the command statements (`evolve`, `fit`,
    /// `import`, ...); `Statement::keyword` is the command word. See `commands`.
    Command {
        target: Option<Ident>,
        args: Vec<Arg>,
        options: Vec<Opt>,
    },
}

#[derive(Clone, Debug, PartialEq)]
pub struct Statement {
    pub kind: StatementKind,
    /// The whole statement.
    pub span: Span,
    /// The statement keyword (`scan`, `plot`, ...).
    pub keyword: Ident,
}

/// A statement that did not parse: what the checker needs to avoid follow-up errors
/// (a failed `thermo = scan ...` still defines `thermo` as far as later lines care).
#[derive(Clone, Debug, PartialEq)]
pub struct Failed {
    pub start: usize,
    /// The statement keyword, if one was recognised.
    pub keyword: String,
    /// `NAME` of `NAME = ...`, or `TABLE.COLUMN` of a `column` statement.
    pub target: Option<String>,
}

/// A parsed cell: the statements that parsed (the parser reports the others).
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Program {
    pub statements: Vec<Statement>,
    pub failed: Vec<Failed>,
}
