//! The checked model: what a spec means, with every name resolved and every number
//! in SI.
//!
//! Lowering (`check`) produces a `Model` only when the spec has no errors; every
//! later stage (symbolic IR, code generation, simulation) starts here and may rely on
//! these invariants:
//! - indices are valid: `ExprKind::State(i)` indexes `Model::states`, and so on;
//! - every value is in coherent SI units (metre, second, radian, ...): numbers
//!   written in other units were multiplied by their exact factor during lowering,
//!   and each declared unit's factor is kept in [`DeclaredUnit`] for I/O at the edges;
//! - every expression is dimensionally consistent and carries its [`Dimension`];
//! - `Motion::equations` has exactly one entry per state (unnamed states were filled
//!   in: zero rate for continuous motion, `x = x` for discrete motion);
//! - spans point into the spec text the model was lowered from.

use crate::diag::Span;
use crate::units::Dimension;

/// A checked spec.
#[derive(Debug, Clone, PartialEq)]
pub struct Model {
    /// The name after `model`.
    pub name: String,
    /// Doc comment of the model (`///` lines before `model`).
    pub doc: Option<String>,
    /// State vector, in declaration order.
    pub states: Vec<StateVar>,
    /// Control inputs, in declaration order.
    pub inputs: Vec<InputVar>,
    /// Named constants, for documentation (their uses are already inlined).
    pub constants: Vec<Constant>,
    /// How the state moves.
    pub motion: Motion,
    /// Process noise terms, at most one per state.
    pub process_noise: Vec<ProcessNoise>,
    /// Sensors, in declaration order.
    pub sensors: Vec<Sensor>,
    /// Initial belief per state (`None` when the spec leaves it to run time).
    pub initial: Vec<Option<Distribution>>,
}

/// A unit as written in the spec, with its exact factor to coherent SI.
#[derive(Debug, Clone, PartialEq)]
pub struct DeclaredUnit {
    /// Source text, normalised (e.g. `deg/s`).
    pub text: String,
    /// Dimension (SI plus soft angle/cycle axes).
    pub dimension: Dimension,
    /// `value_si = value_declared * to_si` (closest f64 to the exact factor).
    pub to_si: f64,
    /// Where the unit was written.
    pub span: Span,
}

/// A state variable.
#[derive(Debug, Clone, PartialEq)]
pub struct StateVar {
    /// Name.
    pub name: String,
    /// Doc comment, if any.
    pub doc: Option<String>,
    /// Declared unit; the state itself is held in SI.
    pub unit: DeclaredUnit,
    /// Angle that wraps to (-pi, pi]: residuals and means are taken on the circle.
    pub wrap: bool,
    /// Bounded range for grid methods, in SI.
    pub range: Option<GridRange>,
    /// Span of the declaration's name.
    pub span: Span,
}

/// A bounded range `lo .. hi` with an optional cell size, in SI.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GridRange {
    /// Lower bound.
    pub lo: f64,
    /// Upper bound (`hi > lo`).
    pub hi: f64,
    /// Cell size, when the spec gives one (`by ...`); otherwise the project file does.
    pub cell: Option<f64>,
}

/// A control input (known at run time, possibly noisy).
#[derive(Debug, Clone, PartialEq)]
pub struct InputVar {
    /// Name.
    pub name: String,
    /// Doc comment.
    pub doc: Option<String>,
    /// Declared unit.
    pub unit: DeclaredUnit,
    /// Noise on the measured input, propagated through the motion model.
    pub noise: Option<Distribution>,
    /// Span of the name.
    pub span: Span,
}

/// A named constant after evaluation.
#[derive(Debug, Clone, PartialEq)]
pub struct Constant {
    /// Name.
    pub name: String,
    /// Doc comment.
    pub doc: Option<String>,
    /// Value in SI.
    pub value: f64,
    /// Dimension.
    pub dimension: Dimension,
    /// Span of the name.
    pub span: Span,
}

/// Whether motion gives rates or the next state.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum MotionKind {
    /// `x' = f(x, u)`: rates, integrated over each step `dt`.
    Continuous,
    /// `x = f(x, u, dt)`: the next state directly.
    Discrete,
}

/// The motion model.
#[derive(Debug, Clone, PartialEq)]
pub struct Motion {
    /// Continuous or discrete.
    pub kind: MotionKind,
    /// One expression per state (rate for continuous, next value for discrete).
    pub equations: Vec<Expr>,
    /// Whether each state's equation was written by the user (false: filled in).
    pub written: Vec<bool>,
    /// Span of the `motion` block header.
    pub span: Span,
}

/// Process noise on one state.
#[derive(Debug, Clone, PartialEq)]
pub struct ProcessNoise {
    /// Index into `Model::states`.
    pub state: usize,
    /// What the number means.
    pub kind: ProcessNoiseKind,
    /// Span of the noise statement.
    pub span: Span,
}

/// The meaning of a process-noise figure, in canonical SI form.
#[derive(Debug, Clone, PartialEq)]
pub enum ProcessNoiseKind {
    /// Continuous white noise on the state's rate. `amplitude` is the square root of
    /// the two-sided power spectral density, in `[state] s^-1/2` (e.g. m/s/sqrt(Hz) on
    /// a position is m s^-1/2); the continuous covariance entry is `amplitude^2`.
    White {
        /// sqrt(PSD) in SI.
        amplitude: f64,
    },
    /// Noise added once per step, in the state's own unit.
    PerStep(Distribution),
}

/// A probability distribution over one scalar, in SI.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Distribution {
    /// Gaussian.
    Normal {
        /// Mean.
        mean: f64,
        /// Standard deviation (> 0).
        sigma: f64,
    },
    /// Symmetric triangle on `mean - half_width .. mean + half_width`.
    Triangle {
        /// Centre.
        mean: f64,
        /// Half-width (> 0); the variance is `half_width^2 / 6`.
        half_width: f64,
    },
    /// Uniform on `lo .. hi`.
    Uniform {
        /// Lower bound.
        lo: f64,
        /// Upper bound (> lo).
        hi: f64,
    },
}

impl Distribution {
    /// Mean.
    pub fn mean(&self) -> f64 {
        match *self {
            Distribution::Normal { mean, .. } | Distribution::Triangle { mean, .. } => mean,
            Distribution::Uniform { lo, hi } => 0.5 * (lo + hi),
        }
    }

    /// Variance.
    pub fn variance(&self) -> f64 {
        match *self {
            Distribution::Normal { sigma, .. } => sigma * sigma,
            // Symmetric triangular distribution of half-width a: a^2 / 6
            // (common practice, no source).
            Distribution::Triangle { half_width, .. } => half_width * half_width / 6.0,
            Distribution::Uniform { lo, hi } => (hi - lo) * (hi - lo) / 12.0,
        }
    }

    /// True for the Gaussian, the only kind Kalman methods accept.
    pub fn is_gaussian(&self) -> bool {
        matches!(self, Distribution::Normal { .. })
    }
}

/// A sensor: a function of the state giving one or more reading components.
#[derive(Debug, Clone, PartialEq)]
pub struct Sensor {
    /// Name.
    pub name: String,
    /// Doc comment.
    pub doc: Option<String>,
    /// Per-reading arguments (known when the reading arrives, e.g. a beacon position).
    pub args: Vec<SensorArg>,
    /// Reading components, in declaration order.
    pub components: Vec<ReadingComponent>,
    /// Reading noise.
    pub noise: SensorNoise,
    /// Chi-square gate probability in (0, 1), if the sensor is gated.
    pub gate: Option<Gate>,
    /// Span of the sensor's name.
    pub span: Span,
}

/// A per-reading argument.
#[derive(Debug, Clone, PartialEq)]
pub struct SensorArg {
    /// Name.
    pub name: String,
    /// Declared unit (the generated method takes the value in this unit).
    pub unit: DeclaredUnit,
    /// Span of the name.
    pub span: Span,
}

/// One component of a sensor's reading.
#[derive(Debug, Clone, PartialEq)]
pub struct ReadingComponent {
    /// Name.
    pub name: String,
    /// Doc comment.
    pub doc: Option<String>,
    /// The unit readings arrive in.
    pub unit: DeclaredUnit,
    /// Angle residual wrapped to (-pi, pi].
    pub wrap: bool,
    /// Predicted reading, in SI.
    pub expr: Expr,
    /// Span of the name.
    pub span: Span,
}

/// Reading noise, in SI.
#[derive(Debug, Clone, PartialEq)]
pub enum SensorNoise {
    /// Independent noise per component (one entry per component).
    PerComponent(Vec<Distribution>),
    /// Full Gaussian covariance (row-major, symmetric positive definite), SI units squared.
    Covariance(Vec<Vec<f64>>),
}

/// An innovation gate.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Gate {
    /// Probability that a consistent reading passes, in (0, 1).
    pub probability: f64,
    /// Span of the gate statement.
    pub span: Span,
}

/// A typed expression whose value is in SI.
#[derive(Debug, Clone, PartialEq)]
pub struct Expr {
    /// What it computes.
    pub kind: ExprKind,
    /// Its dimension.
    pub dimension: Dimension,
    /// Where it was written.
    pub span: Span,
}

/// Expression forms. Unit conversions and constants are already folded into
/// `Number`s; `Pow` exponents are dimensionless constants.
#[derive(Debug, Clone, PartialEq)]
pub enum ExprKind {
    /// A number in SI.
    Number(f64),
    /// The value of a state.
    State(usize),
    /// The value of an input.
    Input(usize),
    /// A sensor argument (only inside that sensor's components).
    Arg(usize),
    /// The step length in seconds (only in discrete motion).
    Dt,
    /// `-a`.
    Neg(Box<Expr>),
    /// `a op b`.
    Binary(BinOp, Box<Expr>, Box<Expr>),
    /// A built-in function applied to arguments.
    Call(Func, Vec<Expr>),
}

/// Binary operators.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum BinOp {
    /// `+`
    Add,
    /// `-`
    Sub,
    /// `*`
    Mul,
    /// `/`
    Div,
    /// `^` (exponent dimensionless; a non-integer exponent needs a non-negative base)
    Pow,
}

/// Built-in functions.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Func {
    /// sine (argument an angle or number)
    Sin,
    /// cosine
    Cos,
    /// tangent
    Tan,
    /// arcsine (dimensionless argument, result in rad)
    Asin,
    /// arccosine
    Acos,
    /// arctangent
    Atan,
    /// `atan2(y, x)`: y and x of one dimension; result in rad
    Atan2,
    /// square root (halves exponents)
    Sqrt,
    /// `hypot(a, b)`: a and b of one dimension
    Hypot,
    /// e^x (dimensionless argument)
    Exp,
    /// natural logarithm (dimensionless argument)
    Ln,
    /// absolute value
    Abs,
    /// minimum of two values of one dimension
    Min,
    /// maximum of two values of one dimension
    Max,
}

impl Func {
    /// Every function, for docs and editor grammars.
    pub const ALL: [Func; 14] = [
        Func::Sin,
        Func::Cos,
        Func::Tan,
        Func::Asin,
        Func::Acos,
        Func::Atan,
        Func::Atan2,
        Func::Sqrt,
        Func::Hypot,
        Func::Exp,
        Func::Ln,
        Func::Abs,
        Func::Min,
        Func::Max,
    ];

    /// The name used in specs.
    pub fn name(self) -> &'static str {
        match self {
            Func::Sin => "sin",
            Func::Cos => "cos",
            Func::Tan => "tan",
            Func::Asin => "asin",
            Func::Acos => "acos",
            Func::Atan => "atan",
            Func::Atan2 => "atan2",
            Func::Sqrt => "sqrt",
            Func::Hypot => "hypot",
            Func::Exp => "exp",
            Func::Ln => "ln",
            Func::Abs => "abs",
            Func::Min => "min",
            Func::Max => "max",
        }
    }

    /// Number of arguments.
    pub fn arity(self) -> usize {
        match self {
            Func::Atan2 | Func::Hypot | Func::Min | Func::Max => 2,
            _ => 1,
        }
    }

    /// The function with this spec name.
    pub fn from_name(name: &str) -> Option<Func> {
        Func::ALL.into_iter().find(|f| f.name() == name)
    }
}
