//! Analysis of a lowered model: linearity (with the span of the first nonlinear
//! term, for "method refused" diagnostics), structural sparsity and operation
//! counts.

use crate::diag::Span;
use crate::model::{BinOp, Expr, ExprKind, Model};

use super::lower::Lowered;
use super::node::{Binary, Node, NodeId, Unary};
use super::{Arena, Sparsity};

/// Whether a list of expressions is affine in the states and inputs (sensor
/// arguments, `dt` and numbers count as known coefficients).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Linearity {
    /// Affine in states and inputs.
    #[default]
    Linear,
    /// Not affine: the first offending term, in source order.
    Nonlinear {
        /// Which expression of the list (state index for motion, component index
        /// for a sensor).
        equation: usize,
        /// The innermost sub-expression that is not affine.
        span: Span,
    },
}

/// Operation counts of one function (each shared node counted once).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct OpCounts {
    /// Distinct nodes evaluated, constants and symbols included.
    pub nodes: usize,
    /// Additions and subtractions.
    pub add_sub: usize,
    /// Multiplications.
    pub mul: usize,
    /// Divisions.
    pub div: usize,
    /// Negations.
    pub neg: usize,
    /// Library functions (trig, sqrt, pow, hypot, min, max, wrap...) and selects.
    pub calls: usize,
}

/// Operation counts of a named function.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct FunctionOps {
    /// `transition`, `F`, `G`, `Q`, `gnss.h`, `gnss.H`, `gnss.residual`, or `all`
    /// (every function together, shared nodes once).
    pub name: String,
    /// Counts.
    pub counts: OpCounts,
}

/// Facts about a lowered model.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Analysis {
    /// Linearity of the motion equations (rates or next values as written).
    pub motion: Linearity,
    /// Linearity of each sensor's components.
    pub sensors: Vec<Linearity>,
    /// Pattern of `F`.
    pub f_sparsity: Sparsity,
    /// Pattern of `G`.
    pub g_sparsity: Sparsity,
    /// Pattern of `Q`.
    pub q_sparsity: Sparsity,
    /// Pattern of each sensor's `H`.
    pub h_sparsity: Vec<Sparsity>,
    /// Operation counts per function.
    pub ops: Vec<FunctionOps>,
}

#[derive(Debug, Clone, Copy, PartialEq)]
enum Degree {
    Constant,
    Affine,
    Nonlinear(Span),
}

fn degree(e: &Expr) -> Degree {
    use Degree::*;
    let first_nonlinear = |ds: &[Degree]| ds.iter().copied().find(|d| matches!(d, Nonlinear(_)));
    let any_affine = |ds: &[Degree]| ds.contains(&Affine);
    match &e.kind {
        ExprKind::Number(_) | ExprKind::Arg(_) | ExprKind::Dt => Constant,
        ExprKind::State(_) | ExprKind::Input(_) => Affine,
        ExprKind::Neg(a) => degree(a),
        ExprKind::Binary(op, a, b) => {
            let ds = [degree(a), degree(b)];
            if let Some(d) = first_nonlinear(&ds) {
                return d;
            }
            let affine_ok = match op {
                BinOp::Add | BinOp::Sub => true,
                BinOp::Mul => ds[0] == Constant || ds[1] == Constant,
                BinOp::Div => ds[1] == Constant,
                BinOp::Pow => {
                    ds[1] == Constant && (ds[0] == Constant || b.kind == ExprKind::Number(1.0))
                }
            };
            match (affine_ok, any_affine(&ds)) {
                (true, true) => Affine,
                (true, false) => Constant,
                (false, _) => Nonlinear(e.span),
            }
        }
        ExprKind::Call(_, args) => {
            let ds: Vec<Degree> = args.iter().map(degree).collect();
            if let Some(d) = first_nonlinear(&ds) {
                d
            } else if any_affine(&ds) {
                Nonlinear(e.span)
            } else {
                Constant
            }
        }
    }
}

/// Linearity of a list of expressions, reporting the first nonlinear term.
pub(crate) fn linearity(exprs: &[Expr]) -> Linearity {
    exprs
        .iter()
        .enumerate()
        .find_map(|(equation, e)| match degree(e) {
            Degree::Nonlinear(span) => Some(Linearity::Nonlinear { equation, span }),
            _ => None,
        })
        .unwrap_or(Linearity::Linear)
}

/// Counts the operations of the nodes reachable from `roots`.
pub(crate) fn op_counts(arena: &Arena, roots: &[NodeId]) -> OpCounts {
    let mut counts = OpCounts::default();
    for id in arena.reachable(roots) {
        counts.nodes += 1;
        match arena.node(id) {
            Node::Const(_) | Node::Symbol(_) => {}
            Node::Unary(Unary::Neg, _) => counts.neg += 1,
            Node::Unary(..) | Node::SelectLe { .. } => counts.calls += 1,
            Node::Binary(Binary::Add | Binary::Sub, ..) => counts.add_sub += 1,
            Node::Binary(Binary::Mul, ..) => counts.mul += 1,
            Node::Binary(Binary::Div, ..) => counts.div += 1,
            Node::Binary(..) => counts.calls += 1,
        }
    }
    counts
}

/// Every named function of a lowered model with its roots, in dump order.
pub(crate) fn functions(lowered: &Lowered) -> Vec<(String, Vec<NodeId>)> {
    let mut list = vec![
        ("transition".to_string(), lowered.transition.clone()),
        ("F".to_string(), lowered.f_jac.entries().to_vec()),
        ("G".to_string(), lowered.g_jac.entries().to_vec()),
        ("Q".to_string(), lowered.q.entries().to_vec()),
    ];
    for s in &lowered.sensors {
        list.push((format!("{}.h", s.name), s.h.clone()));
        list.push((format!("{}.H", s.name), s.h_jac.entries().to_vec()));
        list.push((format!("{}.residual", s.name), s.residual.clone()));
    }
    list
}

pub(crate) fn analyse(lowered: &Lowered, model: &Model, motion: Linearity) -> Analysis {
    let arena = &lowered.arena;
    let functions = functions(lowered);
    let mut ops: Vec<FunctionOps> = functions
        .iter()
        .map(|(name, roots)| FunctionOps {
            name: name.clone(),
            counts: op_counts(arena, roots),
        })
        .collect();
    let every_root: Vec<NodeId> = functions.into_iter().flat_map(|(_, roots)| roots).collect();
    ops.push(FunctionOps {
        name: "all".into(),
        counts: op_counts(arena, &every_root),
    });
    Analysis {
        motion,
        sensors: model
            .sensors
            .iter()
            .map(|s| {
                linearity(
                    &s.components
                        .iter()
                        .map(|c| c.expr.clone())
                        .collect::<Vec<_>>(),
                )
            })
            .collect(),
        f_sparsity: lowered.f_jac.sparsity(arena),
        g_sparsity: lowered.g_jac.sparsity(arena),
        q_sparsity: lowered.q.sparsity(arena),
        h_sparsity: lowered
            .sensors
            .iter()
            .map(|s| s.h_jac.sparsity(arena))
            .collect(),
        ops,
    }
}
