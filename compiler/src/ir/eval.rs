//! The interpreter: numeric evaluation of IR nodes in `f32` or `f64`.
//!
//! # Evaluation-order contract
//! Back ends (generated code, the simulator) must compute exactly what this module
//! computes, so a spec behaves the same everywhere:
//! - the nodes reachable from the requested roots are evaluated once each, in
//!   increasing [`NodeId`] order (a topological order of the DAG);
//! - constants were folded at compile time in `f64`; an `f32` evaluation rounds each
//!   constant once to `f32`;
//! - each node applies one operation of [`apply_unary`] / [`apply_binary`] / the
//!   `SelectLe` rule to its operands' values, in the precision `T`, with the
//!   library functions named in [`Float`] (`powf` for every power, `hypot`, `atan2`);
//! - angles are wrapped with [`wrap_angle`], the one wrapping formula.

use std::collections::HashMap;
use std::fmt::Debug;
use std::ops::{Add, Div, Mul, Neg, Sub};

use super::node::{Binary, Node, NodeId, Symbol, Unary};
use super::{Arena, RuntimeValues};

/// The floating-point operations the IR needs; implemented for `f32` and `f64`.
pub trait Float:
    Copy
    + Debug
    + PartialOrd
    + Add<Output = Self>
    + Sub<Output = Self>
    + Mul<Output = Self>
    + Div<Output = Self>
    + Neg<Output = Self>
{
    /// Zero.
    const ZERO: Self;
    /// One.
    const ONE: Self;
    /// Not a number (the value of an unbound symbol).
    const NAN: Self;
    /// Nearest value to an f64.
    fn from_f64(x: f64) -> Self;
    /// Widening to f64.
    fn to_f64(self) -> f64;
    /// sine
    fn sin(self) -> Self;
    /// cosine
    fn cos(self) -> Self;
    /// tangent
    fn tan(self) -> Self;
    /// arcsine
    fn asin(self) -> Self;
    /// arccosine
    fn acos(self) -> Self;
    /// arctangent
    fn atan(self) -> Self;
    /// `atan2(self, x)`
    fn atan2(self, x: Self) -> Self;
    /// square root
    fn sqrt(self) -> Self;
    /// `hypot(self, b)`
    fn hypot(self, b: Self) -> Self;
    /// e^self
    fn exp(self) -> Self;
    /// natural logarithm
    fn ln(self) -> Self;
    /// absolute value
    fn abs(self) -> Self;
    /// `self ^ e`
    fn powf(self, e: Self) -> Self;
    /// minimum (the non-NaN operand when one is NaN)
    fn min(self, b: Self) -> Self;
    /// maximum (the non-NaN operand when one is NaN)
    fn max(self, b: Self) -> Self;
    /// The angle wrapped to `(-pi, pi]` by the runtime's wrapping function.
    fn wrap_angle(self) -> Self;
}

macro_rules! impl_float {
    ($t:ident) => {
        impl Float for $t {
            const ZERO: $t = 0.0;
            const ONE: $t = 1.0;
            const NAN: $t = $t::NAN;
            fn from_f64(x: f64) -> $t {
                x as $t
            }
            fn to_f64(self) -> f64 {
                self as f64
            }
            fn sin(self) -> $t {
                $t::sin(self)
            }
            fn cos(self) -> $t {
                $t::cos(self)
            }
            fn tan(self) -> $t {
                $t::tan(self)
            }
            fn asin(self) -> $t {
                $t::asin(self)
            }
            fn acos(self) -> $t {
                $t::acos(self)
            }
            fn atan(self) -> $t {
                $t::atan(self)
            }
            fn atan2(self, x: $t) -> $t {
                $t::atan2(self, x)
            }
            fn sqrt(self) -> $t {
                $t::sqrt(self)
            }
            fn hypot(self, b: $t) -> $t {
                $t::hypot(self, b)
            }
            fn exp(self) -> $t {
                $t::exp(self)
            }
            fn ln(self) -> $t {
                $t::ln(self)
            }
            fn abs(self) -> $t {
                $t::abs(self)
            }
            fn powf(self, e: $t) -> $t {
                $t::powf(self, e)
            }
            fn min(self, b: $t) -> $t {
                $t::min(self, b)
            }
            fn max(self, b: $t) -> $t {
                $t::max(self, b)
            }
            fn wrap_angle(self) -> $t {
                reckon_runtime::angle::wrap_angle(self)
            }
        }
    };
}

impl_float!(f32);
impl_float!(f64);

/// Wraps an angle to `(-pi, pi]` with `reckon_runtime::angle::wrap_angle`.
///
/// Every back end wraps with that one function (residuals of `wrap` components,
/// next values of `wrap` states), so a generated filter and the simulator agree bit
/// for bit on which side of the cut an angle lands.
pub fn wrap_angle<T: Float>(x: T) -> T {
    x.wrap_angle()
}

/// The value of a one-operand node.
pub fn apply_unary<T: Float>(op: Unary, x: T) -> T {
    match op {
        Unary::Neg => -x,
        Unary::Sin => x.sin(),
        Unary::Cos => x.cos(),
        Unary::Tan => x.tan(),
        Unary::Asin => x.asin(),
        Unary::Acos => x.acos(),
        Unary::Atan => x.atan(),
        Unary::Sqrt => x.sqrt(),
        Unary::Exp => x.exp(),
        Unary::Ln => x.ln(),
        Unary::Abs => x.abs(),
        Unary::Sign => {
            if x > T::ZERO {
                T::ONE
            } else if x < T::ZERO {
                -T::ONE
            } else {
                x
            }
        }
        Unary::WrapAngle => wrap_angle(x),
    }
}

/// The value of a two-operand node.
pub fn apply_binary<T: Float>(op: Binary, a: T, b: T) -> T {
    match op {
        Binary::Add => a + b,
        Binary::Sub => a - b,
        Binary::Mul => a * b,
        Binary::Div => a / b,
        Binary::Pow => a.powf(b),
        Binary::Atan2 => a.atan2(b),
        Binary::Hypot => a.hypot(b),
        Binary::Min => a.min(b),
        Binary::Max => a.max(b),
    }
}

/// The value of a `SelectLe` node.
pub fn apply_select<T: Float>(lhs: T, rhs: T, then: T, otherwise: T) -> T {
    if lhs <= rhs {
        then
    } else {
        otherwise
    }
}

/// Where symbol values come from during evaluation.
pub trait SymbolValues<T> {
    /// The value of `symbol`; unbound symbols should give NaN so mistakes show.
    fn value(&self, symbol: Symbol) -> T;
}

/// Symbol values held in plain vectors; missing entries evaluate to NaN.
#[derive(Debug, Clone)]
pub struct Bindings<T> {
    /// States (SI).
    pub states: Vec<T>,
    /// Inputs (SI).
    pub inputs: Vec<T>,
    /// Discrete noise samples (zero for the mean).
    pub noise: Vec<T>,
    /// Arguments of the sensor being evaluated.
    pub args: Vec<T>,
    /// Reading components (for residuals).
    pub readings: Vec<T>,
    /// Step length in seconds.
    pub dt: T,
    /// Run-time matrices, when the model needs them (see
    /// [`LinearSystem::runtime_matrices`](super::LinearSystem::runtime_matrices)).
    pub runtime: RuntimeValues<T>,
}

impl<T: Float> Bindings<T> {
    /// Bindings of states, inputs and step length; everything else empty.
    pub fn new(states: Vec<T>, inputs: Vec<T>, dt: T) -> Bindings<T> {
        Bindings {
            states,
            inputs,
            noise: Vec::new(),
            args: Vec::new(),
            readings: Vec::new(),
            dt,
            runtime: RuntimeValues::new(),
        }
    }
}

fn lookup<T: Float>(values: &[T], index: u32) -> T {
    values.get(index as usize).copied().unwrap_or(T::NAN)
}

impl<T: Float> SymbolValues<T> for Bindings<T> {
    fn value(&self, symbol: Symbol) -> T {
        match symbol {
            Symbol::State(i) => lookup(&self.states, i),
            Symbol::Input(i) => lookup(&self.inputs, i),
            Symbol::Noise(i) => {
                // Absent noise samples mean "the mean": zero.
                self.noise.get(i as usize).copied().unwrap_or(T::ZERO)
            }
            Symbol::Arg(i) => lookup(&self.args, i),
            Symbol::Reading(i) => lookup(&self.readings, i),
            Symbol::Dt => self.dt,
            Symbol::Runtime(matrix, row, col) => match self.runtime.get(&matrix) {
                Some((cols, values)) => lookup(values, (row as usize * cols + col as usize) as u32),
                None => T::NAN,
            },
        }
    }
}

/// One step of an evaluation tape: a node with operands renumbered to tape slots.
#[derive(Debug, Clone, Copy)]
enum Step {
    Const(f64),
    Symbol(Symbol),
    Unary(Unary, usize),
    Binary(Binary, usize, usize),
    Select(usize, usize, usize, usize),
}

/// A compiled list of nodes: evaluates the values of `roots` for any symbol values.
#[derive(Debug, Clone)]
pub struct Evaluator {
    steps: Vec<Step>,
    roots: Vec<usize>,
}

impl Evaluator {
    /// Prepares the evaluation of `roots` (the nodes reachable from them, in
    /// increasing handle order).
    pub fn new(arena: &Arena, roots: &[NodeId]) -> Evaluator {
        let order = arena.reachable(roots);
        let mut slot = HashMap::with_capacity(order.len());
        let mut steps = Vec::with_capacity(order.len());
        for (position, &id) in order.iter().enumerate() {
            slot.insert(id, position);
            let at = |n: NodeId| slot[&n];
            steps.push(match *arena.node(id) {
                Node::Const(c) => Step::Const(c.value()),
                Node::Symbol(s) => Step::Symbol(s),
                Node::Unary(op, x) => Step::Unary(op, at(x)),
                Node::Binary(op, a, b) => Step::Binary(op, at(a), at(b)),
                Node::SelectLe {
                    lhs,
                    rhs,
                    then,
                    otherwise,
                } => Step::Select(at(lhs), at(rhs), at(then), at(otherwise)),
            });
        }
        let roots = roots.iter().map(|r| slot[r]).collect();
        Evaluator { steps, roots }
    }

    /// Number of nodes evaluated per call.
    pub fn len(&self) -> usize {
        self.steps.len()
    }

    /// True when there is nothing to evaluate.
    pub fn is_empty(&self) -> bool {
        self.steps.is_empty()
    }

    /// The values of the roots, in the order they were given.
    pub fn eval<T: Float>(&self, symbols: &impl SymbolValues<T>) -> Vec<T> {
        let mut out = vec![T::NAN; self.roots.len()];
        self.eval_into(symbols, &mut Vec::with_capacity(self.steps.len()), &mut out);
        out
    }

    /// Like [`eval`](Self::eval) without allocating: node values go to `scratch`
    /// (cleared first; its capacity is reused between calls) and the roots' values
    /// to `out`, which holds one slot per root (extra slots are left alone).
    pub fn eval_into<T: Float>(
        &self,
        symbols: &impl SymbolValues<T>,
        scratch: &mut Vec<T>,
        out: &mut [T],
    ) {
        scratch.clear();
        for step in &self.steps {
            let value = match *step {
                Step::Const(c) => T::from_f64(c),
                Step::Symbol(s) => symbols.value(s),
                Step::Unary(op, x) => apply_unary(op, scratch[x]),
                Step::Binary(op, a, b) => apply_binary(op, scratch[a], scratch[b]),
                Step::Select(l, r, t, o) => {
                    apply_select(scratch[l], scratch[r], scratch[t], scratch[o])
                }
            };
            scratch.push(value);
        }
        for (slot, &root) in out.iter_mut().zip(&self.roots) {
            *slot = scratch[root];
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn wraps_into_half_open_interval() {
        let pi = std::f64::consts::PI;
        assert_eq!(wrap_angle(pi), pi);
        assert_eq!(wrap_angle(-pi), pi);
        assert_eq!(wrap_angle(3.0 * pi), pi);
        assert!((wrap_angle(2.0 * pi + 0.25) - 0.25).abs() < 1e-12);
        assert!((wrap_angle(-0.25f32) + 0.25).abs() < 1e-6);
        assert_eq!(wrap_angle(0.0), 0.0);
    }

    #[test]
    fn sign_of_zero_is_zero() {
        assert_eq!(apply_unary(Unary::Sign, 0.0f64), 0.0);
        assert_eq!(apply_unary(Unary::Sign, -3.0f64), -1.0);
        assert_eq!(apply_unary(Unary::Sign, 2.0f32), 1.0);
        assert!(apply_unary(Unary::Sign, f64::NAN).is_nan());
    }

    #[test]
    fn evaluates_shared_nodes_in_both_precisions() {
        let mut arena = Arena::new();
        let x = arena.symbol(Symbol::State(0));
        let u = arena.symbol(Symbol::Input(0));
        let s = arena.unary(Unary::Sin, x);
        let prod = arena.mul(s, u);
        let sum = arena.add(prod, s);
        let eval = Evaluator::new(&arena, &[sum, prod]);
        assert_eq!(eval.len(), 5);
        let b64 = Bindings::new(vec![0.5f64], vec![2.0], 0.1);
        let out = eval.eval(&b64);
        assert_eq!(
            out,
            vec![0.5f64.sin() * 2.0 + 0.5f64.sin(), 0.5f64.sin() * 2.0]
        );
        let b32 = Bindings::new(vec![0.5f32], vec![2.0], 0.1);
        let out32 = eval.eval(&b32);
        assert_eq!(out32[1], 0.5f32.sin() * 2.0);
    }

    #[test]
    fn unbound_symbols_are_nan() {
        let mut arena = Arena::new();
        let a = arena.symbol(Symbol::Arg(3));
        let eval = Evaluator::new(&arena, &[a]);
        let out = eval.eval(&Bindings::new(vec![], vec![], 1.0f64));
        assert!(out[0].is_nan());
    }
}
