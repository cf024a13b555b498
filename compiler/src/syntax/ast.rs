//! The syntax tree of a spec, as written: names unresolved, units as symbols,
//! numbers as typed. Every node carries its byte span; comments are kept in a side
//! list on [`File`] so a formatter can reproduce them, and `///` doc comments are
//! also attached to the item they document.

use crate::diag::Span;

/// A whole spec file.
#[derive(Debug, Clone, PartialEq)]
pub struct File {
    /// Items in source order.
    pub items: Vec<Item>,
    /// Every comment (`//` and `///`) in source order.
    pub comments: Vec<Comment>,
    /// The whole text.
    pub span: Span,
}

/// A comment token.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Comment {
    /// Plain `//` or documenting `///`.
    pub kind: CommentKind,
    /// Text after the slashes, without the line break.
    pub text: String,
    /// From the first slash to the end of the line (line break excluded).
    pub span: Span,
}

/// The two kinds of comment.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CommentKind {
    /// `// ...`
    Line,
    /// `/// ...`, documenting the next item.
    Doc,
}

/// Consecutive `///` lines documenting one item.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Doc {
    /// The lines joined with `\n`, one leading space of each line removed.
    pub text: String,
    /// From the first `///` to the end of the last line.
    pub span: Span,
}

/// A name as written.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Ident {
    /// The name.
    pub name: String,
    /// Where.
    pub span: Span,
}

/// A top-level item.
#[derive(Debug, Clone, PartialEq)]
pub enum Item {
    /// `model name`
    Model(ModelDecl),
    /// `const name = expr`
    Const(ConstDecl),
    /// `state { ... }`
    State(StateBlock),
    /// `input { ... }`
    Input(InputBlock),
    /// `motion continuous|discrete { ... }`
    Motion(MotionBlock),
    /// `process { ... }`
    Process(NoiseBlock),
    /// `sensor name(args) { ... }`
    Sensor(SensorBlock),
    /// `initial { ... }`
    Initial(NoiseBlock),
}

impl Item {
    /// The span of the whole item.
    pub fn span(&self) -> Span {
        match self {
            Item::Model(m) => m.span,
            Item::Const(c) => c.span,
            Item::State(b) => b.span,
            Item::Input(b) => b.span,
            Item::Motion(b) => b.span,
            Item::Process(b) | Item::Initial(b) => b.span,
            Item::Sensor(b) => b.span,
        }
    }
}

/// `model name`.
#[derive(Debug, Clone, PartialEq)]
pub struct ModelDecl {
    /// Doc comment.
    pub doc: Option<Doc>,
    /// The model's name.
    pub name: Ident,
    /// Whole declaration.
    pub span: Span,
}

/// `const name = expr`.
#[derive(Debug, Clone, PartialEq)]
pub struct ConstDecl {
    /// Doc comment.
    pub doc: Option<Doc>,
    /// Name.
    pub name: Ident,
    /// Value.
    pub value: Expr,
    /// Whole declaration.
    pub span: Span,
}

/// `state { ... }`.
#[derive(Debug, Clone, PartialEq)]
pub struct StateBlock {
    /// Variables in order.
    pub vars: Vec<StateVarDecl>,
    /// The `state` keyword.
    pub keyword: Span,
    /// Whole block.
    pub span: Span,
}

/// `name : unit [wrap] [in lo .. hi [by cell]]`.
#[derive(Debug, Clone, PartialEq)]
pub struct StateVarDecl {
    /// Doc comment.
    pub doc: Option<Doc>,
    /// Name.
    pub name: Ident,
    /// Declared unit.
    pub unit: Unit,
    /// The `wrap` keyword, when present.
    pub wrap: Option<Span>,
    /// Bounded range, when present.
    pub range: Option<GridRangeDecl>,
    /// Whole declaration.
    pub span: Span,
}

/// `in lo .. hi [by cell]`.
#[derive(Debug, Clone, PartialEq)]
pub struct GridRangeDecl {
    /// Lower bound.
    pub lo: Expr,
    /// Upper bound.
    pub hi: Expr,
    /// Cell size.
    pub cell: Option<Expr>,
    /// From `in` to the end.
    pub span: Span,
}

/// `input { ... }`.
#[derive(Debug, Clone, PartialEq)]
pub struct InputBlock {
    /// Variables in order.
    pub vars: Vec<InputVarDecl>,
    /// The `input` keyword.
    pub keyword: Span,
    /// Whole block.
    pub span: Span,
}

/// `name : unit [~ dist]`.
#[derive(Debug, Clone, PartialEq)]
pub struct InputVarDecl {
    /// Doc comment.
    pub doc: Option<Doc>,
    /// Name.
    pub name: Ident,
    /// Declared unit.
    pub unit: Unit,
    /// Measurement noise on the input.
    pub noise: Option<DistExpr>,
    /// Whole declaration.
    pub span: Span,
}

/// Continuous (rates) or discrete (next state).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum MotionKind {
    /// `motion continuous`
    Continuous,
    /// `motion discrete`
    Discrete,
}

/// `motion kind { ... }`.
#[derive(Debug, Clone, PartialEq)]
pub struct MotionBlock {
    /// Continuous or discrete.
    pub kind: MotionKind,
    /// Span of the kind word.
    pub kind_span: Span,
    /// Equations in order.
    pub equations: Vec<MotionEq>,
    /// `motion kind` header.
    pub header: Span,
    /// Whole block.
    pub span: Span,
}

/// `x' = expr` or `x = expr`.
#[derive(Debug, Clone, PartialEq)]
pub struct MotionEq {
    /// The state on the left.
    pub target: Ident,
    /// The `'` marking a rate, when present.
    pub prime: Option<Span>,
    /// Right-hand side.
    pub value: Expr,
    /// Whole equation.
    pub span: Span,
}

/// `process { ... }` or `initial { ... }`: a list of `name ~ dist`.
#[derive(Debug, Clone, PartialEq)]
pub struct NoiseBlock {
    /// Statements in order.
    pub stmts: Vec<NoiseStmt>,
    /// The block keyword.
    pub keyword: Span,
    /// Whole block.
    pub span: Span,
}

/// `name ~ dist`.
#[derive(Debug, Clone, PartialEq)]
pub struct NoiseStmt {
    /// What the distribution is about.
    pub target: Ident,
    /// The distribution.
    pub dist: DistExpr,
    /// Whole statement.
    pub span: Span,
}

/// `sensor name(args) { ... }`.
#[derive(Debug, Clone, PartialEq)]
pub struct SensorBlock {
    /// Doc comment.
    pub doc: Option<Doc>,
    /// Name.
    pub name: Ident,
    /// Per-reading arguments.
    pub params: Vec<Param>,
    /// Statements in order.
    pub items: Vec<SensorItem>,
    /// Whole block.
    pub span: Span,
}

/// `name : unit` in a sensor's argument list.
#[derive(Debug, Clone, PartialEq)]
pub struct Param {
    /// Name.
    pub name: Ident,
    /// Unit.
    pub unit: Unit,
    /// Whole parameter.
    pub span: Span,
}

/// A statement inside a sensor block.
#[derive(Debug, Clone, PartialEq)]
pub enum SensorItem {
    /// `name : unit [wrap] = expr`
    Component(ComponentDecl),
    /// `name ~ dist`: noise of one component.
    ComponentNoise(NoiseStmt),
    /// `noise ~ dist` or `noise ~ covariance [...]`.
    SharedNoise(SharedNoise),
    /// `gate expr`
    Gate(GateStmt),
}

/// A reading component.
#[derive(Debug, Clone, PartialEq)]
pub struct ComponentDecl {
    /// Doc comment.
    pub doc: Option<Doc>,
    /// Name.
    pub name: Ident,
    /// Unit the reading arrives in.
    pub unit: Unit,
    /// The `wrap` keyword, when present.
    pub wrap: Option<Span>,
    /// Predicted reading.
    pub value: Expr,
    /// Whole declaration.
    pub span: Span,
}

/// `noise ~ ...` for every component.
#[derive(Debug, Clone, PartialEq)]
pub struct SharedNoise {
    /// One distribution for each component, or a full covariance.
    pub kind: SharedNoiseKind,
    /// Whole statement.
    pub span: Span,
}

/// The two forms of shared sensor noise.
#[derive(Debug, Clone, PartialEq)]
pub enum SharedNoiseKind {
    /// Same distribution on every component.
    Each(DistExpr),
    /// Full covariance matrix.
    Covariance(CovarianceExpr),
}

/// `covariance [ a, b ; c, d ]`.
#[derive(Debug, Clone, PartialEq)]
pub struct CovarianceExpr {
    /// Rows of entries.
    pub rows: Vec<Vec<Expr>>,
    /// From `covariance` to `]`.
    pub span: Span,
}

/// `gate expr`.
#[derive(Debug, Clone, PartialEq)]
pub struct GateStmt {
    /// Probability (usually `99 %`).
    pub value: Expr,
    /// Whole statement.
    pub span: Span,
}

/// `name(args)` in a distribution position.
#[derive(Debug, Clone, PartialEq)]
pub struct DistExpr {
    /// Distribution name (`normal`, `triangle`, `uniform`, `white`).
    pub name: Ident,
    /// Arguments.
    pub args: Vec<DistArg>,
    /// Whole call.
    pub span: Span,
}

/// An argument of a distribution.
#[derive(Debug, Clone, PartialEq)]
pub enum DistArg {
    /// A value.
    Value(Expr),
    /// `lo .. hi`.
    Range {
        /// Lower bound.
        lo: Expr,
        /// Upper bound.
        hi: Expr,
        /// Whole range.
        span: Span,
    },
}

impl DistArg {
    /// Span of the argument.
    pub fn span(&self) -> Span {
        match self {
            DistArg::Value(e) => e.span,
            DistArg::Range { span, .. } => *span,
        }
    }
}

/// An expression.
#[derive(Debug, Clone, PartialEq)]
pub struct Expr {
    /// Form.
    pub kind: ExprKind,
    /// Where.
    pub span: Span,
}

/// Expression forms.
#[derive(Debug, Clone, PartialEq)]
pub enum ExprKind {
    /// A number with an optional unit: `2`, `0.5 m/s`, `99 %`.
    Quantity(Quantity),
    /// A name: state, input, constant, argument, `dt`, `pi`.
    Name(Ident),
    /// `-a`.
    Neg(Box<Expr>),
    /// `a op b`.
    Binary(BinOp, Box<Expr>, Box<Expr>),
    /// `f(a, ...)`.
    Call(Ident, Vec<Expr>),
    /// `(a)`, kept so a formatter can reproduce the text.
    Paren(Box<Expr>),
}

/// Binary operators.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum BinOp {
    /// `+`
    Add,
    /// `-`
    Sub,
    /// `*`
    Mul,
    /// `/`
    Div,
    /// `^`
    Pow,
}

impl BinOp {
    /// The operator as written.
    pub fn symbol(self) -> &'static str {
        match self {
            BinOp::Add => "+",
            BinOp::Sub => "-",
            BinOp::Mul => "*",
            BinOp::Div => "/",
            BinOp::Pow => "^",
        }
    }
}

/// A number literal and its unit.
#[derive(Debug, Clone, PartialEq)]
pub struct Quantity {
    /// The number's value (finite).
    pub value: f64,
    /// The number as written.
    pub text: String,
    /// Span of the number alone.
    pub number_span: Span,
    /// Unit, when written.
    pub unit: Option<Unit>,
}

/// A unit expression.
#[derive(Debug, Clone, PartialEq)]
pub struct Unit {
    /// Form.
    pub kind: UnitKind,
    /// Where.
    pub span: Span,
}

/// Unit expression forms.
#[derive(Debug, Clone, PartialEq)]
pub enum UnitKind {
    /// A symbol, possibly prefixed: `m`, `km`, `deg`, `µs`.
    Symbol(String),
    /// `1`: the unit of a pure number.
    One,
    /// `%`: one hundredth.
    Percent,
    /// `a * b` or `a · b`.
    Mul(Box<Unit>, Box<Unit>),
    /// `a / b`.
    Div(Box<Unit>, Box<Unit>),
    /// `a ^ (num/den)`.
    Pow(Box<Unit>, i64, i64),
    /// `sqrt(a)`.
    Sqrt(Box<Unit>),
    /// `(a)`.
    Paren(Box<Unit>),
}

impl Unit {
    /// Normalised text: `·` written as `*`, no spaces, redundant parentheses kept.
    pub fn text(&self) -> String {
        match &self.kind {
            UnitKind::Symbol(s) => s.clone(),
            UnitKind::One => "1".to_string(),
            UnitKind::Percent => "%".to_string(),
            UnitKind::Mul(a, b) => format!("{}*{}", a.text(), b.text()),
            UnitKind::Div(a, b) => format!("{}/{}", a.text(), b.text()),
            UnitKind::Pow(a, n, 1) => format!("{}^{}", a.text(), n),
            UnitKind::Pow(a, n, d) => format!("{}^({}/{})", a.text(), n, d),
            UnitKind::Sqrt(a) => format!("sqrt({})", a.text()),
            UnitKind::Paren(a) => format!("({})", a.text()),
        }
    }
}
