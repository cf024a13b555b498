//! Random expression trees for property tests of the arena and of derivatives:
//! a recipe over states 0 and 1 with operand domains kept valid, and a direct
//! evaluator that applies each operation without any simplification.

use proptest::prelude::*;

use super::eval::{apply_binary, apply_unary};
use super::node::{Binary, NodeId, Symbol, Unary};
use super::Arena;

/// A random expression over states 0 and 1, as a recipe applied to an arena.
#[derive(Debug, Clone)]
pub(crate) enum Tree {
    Var(u32),
    Num(f64),
    Un(Unary, Box<Tree>),
    Bin(Binary, Box<Tree>, Box<Tree>),
}

const SMOOTH_UNARY: [Unary; 9] = [
    Unary::Neg,
    Unary::Sin,
    Unary::Cos,
    Unary::Atan,
    Unary::Exp,
    Unary::Abs,
    Unary::Sqrt,
    Unary::Ln,
    Unary::Tan,
];
const BINARY: [Binary; 8] = [
    Binary::Add,
    Binary::Sub,
    Binary::Mul,
    Binary::Div,
    Binary::Atan2,
    Binary::Hypot,
    Binary::Min,
    Binary::Max,
];

pub(crate) fn tree() -> impl Strategy<Value = Tree> {
    // The special constants trigger the simplification rules.
    let leaf = prop_oneof![
        (0u32..2).prop_map(Tree::Var),
        (-3.0f64..3.0).prop_map(Tree::Num),
        prop::sample::select(vec![0.0, 1.0, -1.0, 2.0, -0.0]).prop_map(Tree::Num),
    ];
    leaf.prop_recursive(5, 40, 2, |inner| {
        prop_oneof![
            (0..SMOOTH_UNARY.len(), inner.clone()).prop_map(|(k, t)| {
                // Keep domains valid: sqrt/ln of a positive value, asin of a
                // value in (-1, 1), tan away from its poles.
                let op = SMOOTH_UNARY[k];
                match op {
                    Unary::Sqrt | Unary::Ln => Tree::Un(
                        op,
                        Box::new(Tree::Bin(
                            Binary::Add,
                            Box::new(Tree::Un(Unary::Exp, Box::new(t))),
                            Box::new(Tree::Num(0.5)),
                        )),
                    ),
                    Unary::Tan => Tree::Un(op, Box::new(Tree::Un(Unary::Atan, Box::new(t)))),
                    _ => Tree::Un(op, Box::new(t)),
                }
            }),
            (0..BINARY.len(), inner.clone(), inner.clone()).prop_map(|(k, a, b)| {
                let op = BINARY[k];
                match op {
                    // Denominators kept away from zero.
                    Binary::Div => Tree::Bin(
                        op,
                        Box::new(a),
                        Box::new(Tree::Bin(
                            Binary::Add,
                            Box::new(Tree::Un(Unary::Exp, Box::new(b))),
                            Box::new(Tree::Num(0.25)),
                        )),
                    ),
                    _ => Tree::Bin(op, Box::new(a), Box::new(b)),
                }
            }),
            (
                inner.clone(),
                prop_oneof![
                    -2.5f64..2.5,
                    prop::sample::select(vec![0.0, 1.0, 2.0, -1.0])
                ]
            )
                .prop_map(|(t, e)| Tree::Bin(
                    Binary::Pow,
                    Box::new(Tree::Bin(
                        Binary::Add,
                        Box::new(Tree::Un(Unary::Exp, Box::new(t))),
                        Box::new(Tree::Num(0.5))
                    )),
                    Box::new(Tree::Num(e))
                )),
            (inner.clone(), inner).prop_map(|(a, b)| Tree::Bin(
                Binary::Pow,
                Box::new(Tree::Bin(
                    Binary::Add,
                    Box::new(Tree::Un(Unary::Exp, Box::new(a))),
                    Box::new(Tree::Num(0.5))
                )),
                Box::new(Tree::Un(Unary::Sin, Box::new(b)))
            )),
        ]
    })
}

pub(crate) fn build(arena: &mut Arena, t: &Tree) -> NodeId {
    match t {
        Tree::Var(i) => arena.symbol(Symbol::State(*i)),
        Tree::Num(v) => arena.constant(*v),
        Tree::Un(op, x) => {
            let x = build(arena, x);
            arena.unary(*op, x)
        }
        Tree::Bin(op, a, b) => {
            let (a, b) = (build(arena, a), build(arena, b));
            arena.binary(*op, a, b)
        }
    }
}

/// Evaluates a tree operation by operation, with no folding or simplification.
/// Returns `None` where the arena's documented exceptions apply: some intermediate
/// value is not finite (`x * 0 = 0` assumes finite `x`), or `atan2` meets a zero,
/// whose sign (which simplification may change) picks `pi` or `-pi`.
pub(crate) fn eval_direct(t: &Tree, x: [f64; 2]) -> Option<f64> {
    let value = match t {
        Tree::Var(i) => x[*i as usize],
        Tree::Num(v) => *v,
        Tree::Un(op, a) => apply_unary(*op, eval_direct(a, x)?),
        Tree::Bin(op, a, b) => {
            let (a, b) = (eval_direct(a, x)?, eval_direct(b, x)?);
            if *op == Binary::Atan2 && (a == 0.0 || b == 0.0) {
                return None;
            }
            apply_binary(*op, a, b)
        }
    };
    value.is_finite().then_some(value)
}
