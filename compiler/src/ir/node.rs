//! Node kinds of the expression DAG: handles, symbols, operators.
//!
//! Nodes are plain `Copy` data so the arena can intern them by value: two nodes are
//! the same node exactly when their kinds, operands and (for constants) bit patterns
//! agree.

use std::fmt;

/// Handle of a node in an [`Arena`](super::Arena). Handles are dense, start at zero
/// and grow in creation order; a node's operands always have smaller handles, so
/// increasing handle order is a topological order of the DAG.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct NodeId(pub(crate) u32);

impl NodeId {
    /// Position in the arena.
    pub fn index(self) -> usize {
        self.0 as usize
    }
}

impl fmt::Display for NodeId {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "%{}", self.0)
    }
}

/// A matrix whose entries a back end computes at run time from
/// [`LinearSystem`](super::LinearSystem) data, for linear time-invariant motion whose
/// matrix exponential has no finite series.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum RuntimeMatrix {
    /// `Phi = exp(A dt)`.
    Transition,
    /// `Gamma = integral_0^dt exp(A s) ds`, the gain of inputs held over the step.
    InputGain,
    /// `Qd = integral_0^dt exp(A s) M exp(A s)^T ds` with `M = L Qc L^T`.
    ProcessNoise,
}

impl RuntimeMatrix {
    /// Short name used in dumps.
    pub fn name(self) -> &'static str {
        match self {
            RuntimeMatrix::Transition => "Phi",
            RuntimeMatrix::InputGain => "Gamma",
            RuntimeMatrix::ProcessNoise => "Qd",
        }
    }
}

/// A value supplied at evaluation time.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Symbol {
    /// State `i` (SI).
    State(u32),
    /// Control input `i` (SI).
    Input(u32),
    /// Discrete noise sample `k`, indexing [`Lowered::noise_sources`](super::Lowered).
    Noise(u32),
    /// Argument `i` of the sensor whose functions are being evaluated.
    Arg(u32),
    /// Component `k` of the reading being processed (only in residuals).
    Reading(u32),
    /// Step length in seconds.
    Dt,
    /// Entry `(row, col)` of a matrix computed at run time.
    Runtime(RuntimeMatrix, u32, u32),
}

impl fmt::Display for Symbol {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Symbol::State(i) => write!(f, "x{i}"),
            Symbol::Input(i) => write!(f, "u{i}"),
            Symbol::Noise(i) => write!(f, "w{i}"),
            Symbol::Arg(i) => write!(f, "arg{i}"),
            Symbol::Reading(i) => write!(f, "z{i}"),
            Symbol::Dt => f.write_str("dt"),
            Symbol::Runtime(m, r, c) => write!(f, "{}[{r},{c}]", m.name()),
        }
    }
}

/// One-operand operations.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Unary {
    /// `-x`
    Neg,
    /// sine
    Sin,
    /// cosine
    Cos,
    /// tangent
    Tan,
    /// arcsine
    Asin,
    /// arccosine
    Acos,
    /// arctangent
    Atan,
    /// square root
    Sqrt,
    /// e^x
    Exp,
    /// natural logarithm
    Ln,
    /// absolute value
    Abs,
    /// `1` for positive, `-1` for negative, the operand itself for zeros and NaN
    /// (so `sign(0) = 0`): the derivative of `abs`.
    Sign,
    /// The angle wrapped to `(-pi, pi]`; see [`wrap_angle`](super::eval::wrap_angle).
    WrapAngle,
}

impl Unary {
    /// Name used in dumps and by back ends.
    pub fn name(self) -> &'static str {
        match self {
            Unary::Neg => "neg",
            Unary::Sin => "sin",
            Unary::Cos => "cos",
            Unary::Tan => "tan",
            Unary::Asin => "asin",
            Unary::Acos => "acos",
            Unary::Atan => "atan",
            Unary::Sqrt => "sqrt",
            Unary::Exp => "exp",
            Unary::Ln => "ln",
            Unary::Abs => "abs",
            Unary::Sign => "sign",
            Unary::WrapAngle => "wrap_angle",
        }
    }
}

/// Two-operand operations.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Binary {
    /// `a + b`
    Add,
    /// `a - b`
    Sub,
    /// `a * b`
    Mul,
    /// `a / b`
    Div,
    /// `a ^ b`, evaluated with `powf`.
    Pow,
    /// `atan2(a, b)` with `a` the ordinate.
    Atan2,
    /// `hypot(a, b)`
    Hypot,
    /// `min(a, b)`
    Min,
    /// `max(a, b)`
    Max,
}

impl Binary {
    /// Name used in dumps and by back ends.
    pub fn name(self) -> &'static str {
        match self {
            Binary::Add => "add",
            Binary::Sub => "sub",
            Binary::Mul => "mul",
            Binary::Div => "div",
            Binary::Pow => "pow",
            Binary::Atan2 => "atan2",
            Binary::Hypot => "hypot",
            Binary::Min => "min",
            Binary::Max => "max",
        }
    }

    /// True when `op(a, b) == op(b, a)` bit for bit, so operands may be ordered
    /// canonically before interning.
    pub(crate) fn commutes(self) -> bool {
        matches!(self, Binary::Add | Binary::Mul)
    }
}

/// An f64 constant, compared and hashed by its bit pattern (so `0.0` and `-0.0` are
/// different nodes and a NaN equals itself).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub struct Constant(u64);

impl Constant {
    /// The constant `value`.
    pub fn new(value: f64) -> Constant {
        Constant(value.to_bits())
    }

    /// Its value.
    pub fn value(self) -> f64 {
        f64::from_bits(self.0)
    }
}

/// One node of the DAG.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Node {
    /// A number.
    Const(Constant),
    /// A value supplied at evaluation time.
    Symbol(Symbol),
    /// `op(x)`.
    Unary(Unary, NodeId),
    /// `op(a, b)`.
    Binary(Binary, NodeId, NodeId),
    /// `if lhs <= rhs { then } else { otherwise }`: the derivative of `min`/`max`.
    /// Both branches are evaluated (the DAG evaluates every reachable node once).
    SelectLe {
        /// Left side of the comparison.
        lhs: NodeId,
        /// Right side of the comparison.
        rhs: NodeId,
        /// Value when `lhs <= rhs`.
        then: NodeId,
        /// Value otherwise (including when either side is NaN).
        otherwise: NodeId,
    },
}

impl Node {
    /// The operands, in evaluation order.
    pub fn operands(&self) -> impl Iterator<Item = NodeId> {
        let (list, len): ([NodeId; 4], usize) = match *self {
            Node::Const(_) | Node::Symbol(_) => ([NodeId(0); 4], 0),
            Node::Unary(_, x) => ([x, x, x, x], 1),
            Node::Binary(_, a, b) => ([a, b, b, b], 2),
            Node::SelectLe {
                lhs,
                rhs,
                then,
                otherwise,
            } => ([lhs, rhs, then, otherwise], 4),
        };
        list.into_iter().take(len)
    }
}
