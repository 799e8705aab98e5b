//! The syntax tree: plain data with a byte span on every node.
//!
//! The tree is what was written, not what it means: names are not resolved, units are
//! not evaluated, and a `dW` is only a differential token until the semantic layer finds
//! the noise `W`. Number literals carry their value with `%` and `bp` already applied.

use sdeck_diagnostics::Span;

/// A name as written, with its span.
#[derive(Clone, Debug, PartialEq)]
pub struct Ident {
    pub name: String,
    pub span: Span,
}

/// A number literal (`12`, `0.5`, `1e-3`, `3.5%`, `25bp`, `inf`), its sign included.
#[derive(Clone, Debug, PartialEq)]
pub struct Number {
    /// The value, with `%` (÷100) and `bp` (÷10 000) applied.
    pub value: f64,
    /// The text as written, for the formatter and for messages.
    pub text: String,
    pub span: Span,
}

/// A rational exponent `num/den` of a unit, in lowest terms with `den > 0`.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Exponent {
    pub num: i64,
    pub den: i64,
}

/// A unit expression as written inside `[...]` (or bare after a horizon or expectation).
#[derive(Clone, Debug, PartialEq)]
pub enum UnitExpr {
    /// `1`: dimensionless.
    One { span: Span },
    /// A unit name: `year`, `day`, `EUR`.
    Name(Ident),
    Mul {
        lhs: Box<UnitExpr>,
        rhs: Box<UnitExpr>,
        span: Span,
    },
    Div {
        lhs: Box<UnitExpr>,
        rhs: Box<UnitExpr>,
        span: Span,
    },
    /// `base^2`, `base^(-1/2)`.
    Pow {
        base: Box<UnitExpr>,
        exponent: Exponent,
        span: Span,
    },
    /// `sqrt(inner)`.
    Sqrt { inner: Box<UnitExpr>, span: Span },
}

impl UnitExpr {
    pub fn span(&self) -> Span {
        match self {
            UnitExpr::One { span }
            | UnitExpr::Mul { span, .. }
            | UnitExpr::Div { span, .. }
            | UnitExpr::Pow { span, .. }
            | UnitExpr::Sqrt { span, .. } => span.clone(),
            UnitExpr::Name(ident) => ident.span.clone(),
        }
    }
}

/// A number with an optional unit: `6 month`, `0.02 [1/sqrt(year)]`, `80bp`.
#[derive(Clone, Debug, PartialEq)]
pub struct Quantity {
    pub number: Number,
    pub unit: Option<UnitExpr>,
    pub span: Span,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum BinaryOp {
    Add,
    Sub,
    Mul,
    Div,
    Pow,
}

impl BinaryOp {
    pub fn symbol(self) -> &'static str {
        match self {
            BinaryOp::Add => "+",
            BinaryOp::Sub => "-",
            BinaryOp::Mul => "*",
            BinaryOp::Div => "/",
            BinaryOp::Pow => "^",
        }
    }
}

/// An expression of numbers, names, `t`, `pi`, operators and function calls.
#[derive(Clone, Debug, PartialEq)]
pub enum Expr {
    Number(Number),
    /// A number with a bracketed unit inside an expression: `6 [month]`, `0.4% [1/year]`.
    Quantity(Quantity),
    /// Any name, including the reserved `t` and `pi`.
    Name(Ident),
    /// Unary minus.
    Neg {
        operand: Box<Expr>,
        span: Span,
    },
    Binary {
        op: BinaryOp,
        lhs: Box<Expr>,
        rhs: Box<Expr>,
        span: Span,
    },
    /// A function call: `exp(x)`, `max(a, b)`. The function name is not checked here.
    Call {
        function: Ident,
        args: Vec<Expr>,
        span: Span,
    },
    /// A parenthesised expression, kept so that spans and formatting follow the text.
    Paren {
        inner: Box<Expr>,
        span: Span,
    },
}

impl Expr {
    pub fn span(&self) -> Span {
        match self {
            Expr::Number(n) => n.span.clone(),
            Expr::Quantity(q) => q.span.clone(),
            Expr::Name(i) => i.span.clone(),
            Expr::Neg { span, .. }
            | Expr::Binary { span, .. }
            | Expr::Call { span, .. }
            | Expr::Paren { span, .. } => span.clone(),
        }
    }
}

/// One end of a bound. An infinite end on its own side (`-inf` below, `inf` above) is
/// stored as `None` in [`Bound`]; one on the wrong side (`>= inf`) as an infinite value.
#[derive(Clone, Debug, PartialEq)]
pub struct BoundEnd {
    pub value: Number,
    pub inclusive: bool,
}

/// `> x`, `>= x`, `< x`, `<= x`, or an interval `in [a, b)`, in the declaration's unit.
#[derive(Clone, Debug, PartialEq)]
pub struct Bound {
    pub lower: Option<BoundEnd>,
    pub upper: Option<BoundEnd>,
    pub span: Span,
}

/// `param NAME = VALUE BOUND?` and `factor NAME = VALUE BOUND?`.
#[derive(Clone, Debug, PartialEq)]
pub struct Declaration {
    pub name: Ident,
    pub value: DeclaredValue,
    /// Boxed, as the rarer parts of a statement are: a file can hold 200,000 declarations.
    pub bound: Option<Box<Bound>>,
}

/// The value of a declaration as written.
#[derive(Clone, Debug, PartialEq)]
pub enum DeclaredValue {
    /// A number with an optional unit: `2.4%`, `1.2 [1/year]`.
    Literal {
        number: Number,
        unit: Option<Box<UnitExpr>>,
    },
    /// A constant expression of earlier parameters: `theta`, `theta + 150bp [1/year]`.
    Expr(Box<Expr>),
}

impl Declaration {
    /// The number, when the value is written as one.
    pub fn literal(&self) -> Option<&Number> {
        match &self.value {
            DeclaredValue::Literal { number, .. } => Some(number),
            DeclaredValue::Expr(_) => None,
        }
    }

    /// The unit written after the number, if any.
    pub fn unit(&self) -> Option<&UnitExpr> {
        match &self.value {
            DeclaredValue::Literal { unit, .. } => unit.as_deref(),
            DeclaredValue::Expr(_) => None,
        }
    }

    /// The expression, when the value is written as one.
    pub fn expression(&self) -> Option<&Expr> {
        match &self.value {
            DeclaredValue::Literal { .. } => None,
            DeclaredValue::Expr(e) => Some(e),
        }
    }

    /// The span of the value (the number, or the whole expression), without its unit.
    pub fn value_span(&self) -> Span {
        match &self.value {
            DeclaredValue::Literal { number, .. } => number.span.clone(),
            DeclaredValue::Expr(e) => e.span(),
        }
    }
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Sign {
    Plus,
    Minus,
}

/// The differential that ends a term.
#[derive(Clone, Debug, PartialEq)]
pub enum Differential {
    /// `dt`, with the span of the token.
    Time(Span),
    /// `dW`: the noise name `W` (its span covers `W` only) and the span of the whole token.
    Shock { shock: Ident, token: Span },
}

/// One term of an equation: `± coefficient differential`.
#[derive(Clone, Debug, PartialEq)]
pub struct Term {
    pub sign: Sign,
    /// `None` when the term is a bare differential (`dX = dW`).
    pub coefficient: Option<Expr>,
    pub differential: Differential,
    pub span: Span,
}

/// `dX = TERM (± TERM)*`.
#[derive(Clone, Debug, PartialEq)]
pub struct Equation {
    /// The state `X` (span covers `X` only).
    pub state: Ident,
    /// The span of the `dX` token.
    pub lhs: Span,
    pub terms: Vec<Term>,
}

/// The derived figure an expectation pins.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Figure {
    Mean,
    Variance,
    Sd,
    Halflife,
    StationaryMean,
    StationaryVariance,
    StationarySd,
    /// `prob(X < Q, TIME)` or `prob(X > Q, TIME)`.
    Prob,
    /// `quantile(X, P, TIME)`.
    Quantile,
    /// `price(TIME)`: the zero-coupon bond price of the `discount` rate.
    Price,
    /// `yield(TIME)`: the continuously compounded zero yield, per year.
    Yield,
    /// `forward(TIME)`: the instantaneous forward rate, per year.
    Forward,
}

impl Figure {
    pub const ALL: [Figure; 12] = [
        Figure::Mean,
        Figure::Variance,
        Figure::Sd,
        Figure::Halflife,
        Figure::StationaryMean,
        Figure::StationaryVariance,
        Figure::StationarySd,
        Figure::Prob,
        Figure::Quantile,
        Figure::Price,
        Figure::Yield,
        Figure::Forward,
    ];

    pub fn keyword(self) -> &'static str {
        match self {
            Figure::Mean => "mean",
            Figure::Variance => "variance",
            Figure::Sd => "sd",
            Figure::Halflife => "halflife",
            Figure::StationaryMean => "stationary_mean",
            Figure::StationaryVariance => "stationary_variance",
            Figure::StationarySd => "stationary_sd",
            Figure::Prob => "prob",
            Figure::Quantile => "quantile",
            Figure::Price => "price",
            Figure::Yield => "yield",
            Figure::Forward => "forward",
        }
    }

    pub fn from_keyword(text: &str) -> Option<Figure> {
        Figure::ALL.into_iter().find(|f| f.keyword() == text)
    }

    /// Whether the figure depends on a time (`mean(x, 1 year)`).
    pub fn takes_time(self) -> bool {
        !matches!(
            self,
            Figure::Halflife
                | Figure::StationaryMean
                | Figure::StationaryVariance
                | Figure::StationarySd
        )
    }

    /// Whether the figure belongs to the curve of the `discount` rate rather than to a
    /// factor (`price`, `yield`, `forward`).
    pub fn on_curve(self) -> bool {
        matches!(self, Figure::Price | Figure::Yield | Figure::Forward)
    }

    /// The arguments as the reader writes them, for help texts.
    pub fn form(self) -> &'static str {
        match self {
            Figure::Mean => "mean(FACTOR[, TIME])",
            Figure::Variance => "variance(FACTOR[, TIME])",
            Figure::Sd => "sd(FACTOR[, TIME])",
            Figure::Halflife => "halflife(FACTOR)",
            Figure::StationaryMean => "stationary_mean(FACTOR)",
            Figure::StationaryVariance => "stationary_variance(FACTOR)",
            Figure::StationarySd => "stationary_sd(FACTOR)",
            Figure::Prob => "prob(FACTOR < LEVEL[, TIME]) or prob(FACTOR > LEVEL[, TIME])",
            Figure::Quantile => "quantile(FACTOR, PROBABILITY[, TIME])",
            Figure::Price => "price(MATURITY)",
            Figure::Yield => "yield(MATURITY)",
            Figure::Forward => "forward(MATURITY)",
        }
    }

    /// One line on what the figure is, for hover and completion.
    pub fn meaning(self) -> &'static str {
        match self {
            Figure::Mean => "the mean of a factor at a time (the horizon by default)",
            Figure::Variance => "the variance of a factor at a time",
            Figure::Sd => "the standard deviation of a factor at a time",
            Figure::Halflife => "the time for the expected distance to the level to halve",
            Figure::StationaryMean => "the mean of the stationary law",
            Figure::StationaryVariance => "the variance of the stationary law",
            Figure::StationarySd => "the standard deviation of the stationary law",
            Figure::Prob => "the probability that a factor is below (or above) a level at a time",
            Figure::Quantile => {
                "the level a factor stays below with the given probability at a time"
            }
            Figure::Price => "the zero-coupon bond price P(0, T) of the `discount` rate",
            Figure::Yield => "the continuously compounded zero yield to T, per year",
            Figure::Forward => "the instantaneous forward rate at T, per year",
        }
    }
}

/// The side of the level in `prob(X < Q, T)`.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Side {
    Below,
    Above,
}

impl Side {
    pub fn symbol(self) -> &'static str {
        match self {
            Side::Below => "<",
            Side::Above => ">",
        }
    }
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Comparison {
    Less,
    LessEqual,
    Greater,
    GreaterEqual,
}

impl Comparison {
    pub fn symbol(self) -> &'static str {
        match self {
            Comparison::Less => "<",
            Comparison::LessEqual => "<=",
            Comparison::Greater => ">",
            Comparison::GreaterEqual => ">=",
        }
    }
}

/// What an expectation requires of its figure.
#[derive(Clone, Debug, PartialEq)]
pub enum Condition {
    Compare {
        op: Comparison,
        value: Quantity,
    },
    Within {
        lower: Quantity,
        lower_inclusive: bool,
        upper: Quantity,
        upper_inclusive: bool,
    },
}

/// `expect FIGURE(ARGS) CONDITION`.
#[derive(Clone, Debug, PartialEq)]
pub struct Expectation {
    pub figure: Figure,
    pub figure_span: Span,
    /// The factor; `None` for the figures of the curve (`price`, `yield`, `forward`).
    pub state: Option<Ident>,
    /// `prob`: which side of the level.
    pub side: Option<Side>,
    /// `prob`: the level Q (in the factor's units); `quantile`: the probability P.
    pub level: Option<Quantity>,
    /// The time of the figure (the maturity of a curve figure).
    pub at: Option<Quantity>,
    pub condition: Condition,
}

#[derive(Clone, Debug, PartialEq)]
pub enum StatementKind {
    Model {
        name: Ident,
    },
    Clock {
        unit: Ident,
    },
    Horizon {
        value: Box<Quantity>,
    },
    Unit {
        name: Ident,
    },
    Param(Declaration),
    Factor(Declaration),
    Shock {
        names: Vec<Ident>,
    },
    /// `corr A, B = EXPR`: a number or a constant expression of parameters.
    Corr {
        first: Ident,
        second: Ident,
        value: Box<Expr>,
    },
    Let {
        name: Ident,
        value: Box<Expr>,
    },
    Equation(Equation),
    Expect(Box<Expectation>),
    /// `measure risk-neutral` or `measure real-world`.
    Measure {
        name: Ident,
    },
    /// `discount EXPR`: the short rate.
    Discount {
        rate: Box<Expr>,
    },
}

/// A statement, its span (without trailing comments) and its description comment.
#[derive(Clone, Debug, PartialEq)]
pub struct Statement {
    pub kind: StatementKind,
    pub span: Span,
    /// The text of a comment on the same line after the statement, without `#`.
    pub description: Option<String>,
}

/// A `#` comment: its span covers the `#` up to the end of the line.
#[derive(Clone, Debug, PartialEq)]
pub struct Comment {
    pub span: Span,
    /// The text after `#`, untrimmed.
    pub text: String,
    /// Whether code stands before it on its line.
    pub trailing: bool,
}

/// A parsed file: every statement that parsed, every comment, and the syntax errors.
#[derive(Clone, Debug, Default)]
pub struct SourceFile {
    pub statements: Vec<Statement>,
    pub comments: Vec<Comment>,
    pub diagnostics: Vec<sdeck_diagnostics::Diagnostic>,
    /// Text that did not parse: whole statements, and terms left out of an equation.
    /// Later layers use it to avoid follow-on reports (a name used only there is not
    /// "unused"; a state whose equation is there is not "missing" one).
    pub unparsed: Vec<sdeck_diagnostics::Span>,
}
