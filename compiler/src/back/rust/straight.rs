//! Straight-line code for a set of IR roots: every node reachable from the roots is
//! computed once, in increasing handle order; a node used more than once is bound to
//! a `let tK = ...;`, a node used once is written inline where it is used, and leaves
//! (constants, symbols) are always inline.
//!
//! Inlining a single-use node does not change any value: nodes are pure, and each
//! keeps its own operation and operand grouping, so the result is the interpreter's
//! (`ir::eval`) operation for operation, with one exception: a square `x^2` is
//! written `x * x`, the exactly rounded square, instead of a call to `powf` (which
//! costs tens of instructions); the interpreter's `powf` may differ from it in the last
//! bit where the math library's `pow` is not correctly rounded.

use std::collections::{BTreeSet, HashMap};

use proc_macro2::{Ident, Span, TokenStream};
use quote::quote;

use super::names::{number, Code, Prec};
use crate::ir::{Arena, Binary, Node, NodeId, Symbol, Unary};
use crate::options::Scalar;

/// The statements and root expressions of one straight-line block.
pub(crate) struct Block {
    /// `let` statements, in evaluation order.
    pub lets: Vec<TokenStream>,
    /// One expression per requested root, in request order.
    pub roots: Vec<Code>,
    /// Symbols read by the block (so callers bind exactly those).
    pub symbols: BTreeSet<Symbol>,
    /// Which math traits the block calls.
    pub traits: MathTraits,
}

/// The nalgebra math traits a block calls (imported only when used, so the module
/// stays free of unused imports).
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub(crate) struct MathTraits {
    /// `ComplexField` (sin, sqrt, powf, hypot, ...).
    pub complex: bool,
    /// `RealField` (atan2, min, max).
    pub real: bool,
}

impl MathTraits {
    pub(crate) fn union(self, other: MathTraits) -> MathTraits {
        MathTraits {
            complex: self.complex || other.complex,
            real: self.real || other.real,
        }
    }
}

/// Emits the block computing `roots`. A root listed several times counts as several
/// uses, so a caller that refers to a root in several places lists it once per place
/// and gets a binding instead of repeated work. `symbol` spells each symbol.
pub(crate) fn block(
    arena: &Arena,
    roots: &[NodeId],
    scalar: Scalar,
    symbol: &dyn Fn(Symbol) -> TokenStream,
) -> Block {
    let order = arena.reachable(roots);
    let mut uses: HashMap<NodeId, usize> = HashMap::new();
    for &id in &order {
        for operand in arena.node(id).operands() {
            *uses.entry(operand).or_default() += 1;
        }
        if let Some(base) = squared_base(arena, id) {
            // `x * x` reads its base twice: bind it rather than compute it twice.
            *uses.entry(base).or_default() += 1;
        }
    }
    for &root in roots {
        *uses.entry(root).or_default() += 1;
    }
    let mut emitter = Emitter {
        arena,
        scalar,
        symbol,
        bound: HashMap::new(),
        symbols: BTreeSet::new(),
        traits: MathTraits::default(),
    };
    let mut lets = Vec::new();
    for &id in &order {
        let node = arena.node(id);
        let leaf = matches!(node, Node::Const(_) | Node::Symbol(_));
        let conditional = matches!(node, Node::SelectLe { .. } | Node::Unary(Unary::Sign, _));
        let shared = uses.get(&id).copied().unwrap_or(0) > 1;
        if !leaf && (shared || conditional) {
            let value = emitter.render(id);
            let name = Ident::new(&format!("t{}", id.index()), Span::call_site());
            let tokens = value.tokens;
            lets.push(quote!(let #name = #tokens;));
            emitter.bound.insert(id, name);
        }
    }
    let roots = roots.iter().map(|&root| emitter.operand(root)).collect();
    Block {
        lets,
        roots,
        symbols: emitter.symbols,
        traits: emitter.traits,
    }
}

/// The base `x` when node `id` is `x^2` with a constant exponent of exactly two.
fn squared_base(arena: &Arena, id: NodeId) -> Option<NodeId> {
    match *arena.node(id) {
        Node::Binary(Binary::Pow, base, exponent)
            if arena.constant_value(exponent) == Some(2.0) =>
        {
            Some(base)
        }
        _ => None,
    }
}

struct Emitter<'a> {
    arena: &'a Arena,
    scalar: Scalar,
    symbol: &'a dyn Fn(Symbol) -> TokenStream,
    bound: HashMap<NodeId, Ident>,
    symbols: BTreeSet<Symbol>,
    traits: MathTraits,
}

impl Emitter<'_> {
    /// The expression for `id` where it is used: its binding, or the node inline.
    fn operand(&mut self, id: NodeId) -> Code {
        match self.bound.get(&id) {
            Some(name) => Code::atom(quote!(#name)),
            None => self.render(id),
        }
    }

    fn complex(&mut self, name: &str, args: &[Code]) -> Code {
        self.traits.complex = true;
        call(quote!(ComplexField), name, args)
    }

    fn real(&mut self, name: &str, args: &[Code]) -> Code {
        self.traits.real = true;
        call(quote!(RealField), name, args)
    }

    /// The node's own operation applied to its operands.
    fn render(&mut self, id: NodeId) -> Code {
        match *self.arena.node(id) {
            Node::Const(c) => number(c.value(), self.scalar),
            Node::Symbol(s) => {
                self.symbols.insert(s);
                Code::atom((self.symbol)(s))
            }
            Node::Unary(op, x) => {
                let x = self.operand(x);
                self.unary(op, x)
            }
            Node::Binary(op, a, b) => {
                let minus_one = |id| self.arena.constant_value(id) == Some(-1.0);
                if squared_base(self.arena, id).is_some() {
                    let base = self.operand(a);
                    return base.binary(quote!(*), &base, Prec::Product);
                }
                if op == Binary::Mul && (minus_one(a) || minus_one(b)) {
                    // `-1 * x` is exactly `-x`, and reads as such.
                    let other = if minus_one(a) { b } else { a };
                    return self.operand(other).neg();
                }
                let a = self.operand(a);
                let b = self.operand(b);
                self.binary(op, a, b)
            }
            Node::SelectLe {
                lhs,
                rhs,
                then,
                otherwise,
            } => {
                let lhs = self.operand(lhs).at(Prec::Sum);
                let rhs = self.operand(rhs).at(Prec::Sum);
                let then = self.operand(then).tokens;
                let otherwise = self.operand(otherwise).tokens;
                Code::atom(quote!(if #lhs <= #rhs { #then } else { #otherwise }))
            }
        }
    }

    fn unary(&mut self, op: Unary, x: Code) -> Code {
        let name = match op {
            Unary::Neg => return x.neg(),
            Unary::Sign => {
                let zero = number(0.0, self.scalar).tokens;
                let one = number(1.0, self.scalar).tokens;
                let minus_one = number(-1.0, self.scalar).tokens;
                let value = x.at(Prec::Sum);
                return Code::atom(quote!(
                    if #value > #zero { #one } else if #value < #zero { #minus_one } else { #value }
                ));
            }
            Unary::WrapAngle => {
                let value = x.tokens;
                return Code::atom(quote!(reckon_runtime::angle::wrap_angle(#value)));
            }
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
        };
        self.complex(name, &[x])
    }

    fn binary(&mut self, op: Binary, a: Code, b: Code) -> Code {
        match op {
            Binary::Add => a.binary(quote!(+), &b, Prec::Sum),
            Binary::Sub => a.binary(quote!(-), &b, Prec::Sum),
            Binary::Mul => a.binary(quote!(*), &b, Prec::Product),
            Binary::Div => a.binary(quote!(/), &b, Prec::Product),
            Binary::Pow => self.complex("powf", &[a, b]),
            Binary::Hypot => self.complex("hypot", &[a, b]),
            Binary::Atan2 => self.real("atan2", &[a, b]),
            Binary::Min => self.real("min", &[a, b]),
            Binary::Max => self.real("max", &[a, b]),
        }
    }
}

/// `Trait::name(args)`: called through the trait so the same code runs with and
/// without `std` (nalgebra's traits fall back to `libm` in `no_std` builds).
fn call(trait_path: TokenStream, name: &str, args: &[Code]) -> Code {
    let name = Ident::new(name, Span::call_site());
    let args = args.iter().map(|a| &a.tokens);
    Code::atom(quote!(#trait_path::#name(#(#args),*)))
}
