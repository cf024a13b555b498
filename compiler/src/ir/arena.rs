//! The node arena: interning (hash-consing), constant folding and value-preserving
//! algebraic simplification, substitution and reachability.
//!
//! # Simplification contract
//! Every node is built through the constructors below, which fold and simplify as
//! they go. A rule is applied only when the simplified node has the same value as
//! the written one for every finite operand value:
//! - operations whose operands are all constants are folded in f64 with the same
//!   functions the interpreter uses ([`apply_unary`], [`apply_binary`]);
//! - `x + 0`, `0 + x`, `x - 0` -> `x`; `0 - x` -> `-x`; `x - x` -> `0`;
//!   `x * 1`, `x / 1`, `x ^ 1` -> `x`; `x * -1`, `x / -1` -> `-x`;
//!   `x ^ 0`, `1 ^ x` -> `1` (as IEEE `pow` defines them even for NaN);
//!   `-(-x)` -> `x`; `a - (-b)` -> `a + b`; `a + (-b)`, `(-b) + a` -> `a - b`;
//!   `(-a) * b`, `a * (-b)` -> `-(a * b)` and the same for `/` (IEEE rounding is
//!   symmetric in sign, so these are exact); `abs(-x)`, `abs(abs x)` -> `abs x`;
//!   `min(x, x)`, `max(x, x)` -> `x`.
//! - `x * 0`, `0 * x`, `0 / x` -> `0`. This is the one rule that assumes finite
//!   operands (`inf * 0` and `0 / 0` are NaN): derivatives are full of zero factors,
//!   and a Jacobian entry that is structurally zero must be exactly zero, not NaN
//!   wherever some unrelated factor overflows.
//! - zeros produced by these rules may lose their sign (`-0.0 + 0.0` is `+0.0`,
//!   `x * 0` is `+0.0` for negative `x`). Values stay equal as numbers; the one
//!   visible effect is `atan2(±0, negative)`, which gives `pi` or `-pi`, the two
//!   representations of one angle (both wrap to `pi`).
//!
//! Operands of `+` and `*` are put in handle order before interning, so `a + b` and
//! `b + a` are one node (IEEE `+` and `*` commute exactly). Nothing is reassociated:
//! `(a + b) + c` and `a + (b + c)` stay different, because their values differ.

use std::collections::{HashMap, HashSet};

use super::eval::{apply_binary, apply_unary};
use super::node::{Binary, Constant, Node, NodeId, Symbol, Unary};

/// The DAG of every expression of a lowered model.
#[derive(Debug, Clone, Default)]
pub struct Arena {
    nodes: Vec<Node>,
    index: HashMap<Node, NodeId>,
    pub(crate) derivatives: HashMap<(NodeId, Symbol), NodeId>,
}

impl Arena {
    /// An empty arena.
    pub fn new() -> Arena {
        Arena::default()
    }

    /// Number of nodes.
    pub fn len(&self) -> usize {
        self.nodes.len()
    }

    /// True when no node was created.
    pub fn is_empty(&self) -> bool {
        self.nodes.is_empty()
    }

    /// The node behind a handle.
    pub fn node(&self, id: NodeId) -> &Node {
        &self.nodes[id.index()]
    }

    /// Every node, indexed by handle.
    pub fn nodes(&self) -> &[Node] {
        &self.nodes
    }

    /// The value of a constant node.
    pub fn constant_value(&self, id: NodeId) -> Option<f64> {
        match self.node(id) {
            Node::Const(c) => Some(c.value()),
            _ => None,
        }
    }

    /// True for a constant zero (of either sign): an identically zero expression.
    pub fn is_zero(&self, id: NodeId) -> bool {
        self.constant_value(id) == Some(0.0)
    }

    fn is_constant(&self, id: NodeId, value: f64) -> bool {
        self.constant_value(id) == Some(value)
    }

    fn negated(&self, id: NodeId) -> Option<NodeId> {
        match *self.node(id) {
            Node::Unary(Unary::Neg, x) => Some(x),
            _ => None,
        }
    }

    fn intern(&mut self, node: Node) -> NodeId {
        if let Some(&id) = self.index.get(&node) {
            return id;
        }
        let id = NodeId(self.nodes.len() as u32);
        self.nodes.push(node);
        self.index.insert(node, id);
        id
    }

    /// A constant.
    pub fn constant(&mut self, value: f64) -> NodeId {
        self.intern(Node::Const(Constant::new(value)))
    }

    /// A symbol.
    pub fn symbol(&mut self, symbol: Symbol) -> NodeId {
        self.intern(Node::Symbol(symbol))
    }

    /// `a + b`
    pub fn add(&mut self, a: NodeId, b: NodeId) -> NodeId {
        self.binary(Binary::Add, a, b)
    }

    /// `a - b`
    pub fn sub(&mut self, a: NodeId, b: NodeId) -> NodeId {
        self.binary(Binary::Sub, a, b)
    }

    /// `a * b`
    pub fn mul(&mut self, a: NodeId, b: NodeId) -> NodeId {
        self.binary(Binary::Mul, a, b)
    }

    /// `a / b`
    pub fn div(&mut self, a: NodeId, b: NodeId) -> NodeId {
        self.binary(Binary::Div, a, b)
    }

    /// `-a`
    pub fn neg(&mut self, a: NodeId) -> NodeId {
        self.unary(Unary::Neg, a)
    }

    /// `a * c` for a constant `c`.
    pub fn scale(&mut self, c: f64, a: NodeId) -> NodeId {
        let c = self.constant(c);
        self.mul(c, a)
    }

    /// Sum of several nodes, added left to right (`0` when empty).
    pub fn sum(&mut self, terms: impl IntoIterator<Item = NodeId>) -> NodeId {
        let mut terms = terms.into_iter();
        match terms.next() {
            None => self.constant(0.0),
            Some(first) => terms.fold(first, |acc, t| self.add(acc, t)),
        }
    }

    /// `if lhs <= rhs { then } else { otherwise }`.
    pub fn select_le(
        &mut self,
        lhs: NodeId,
        rhs: NodeId,
        then: NodeId,
        otherwise: NodeId,
    ) -> NodeId {
        if then == otherwise {
            return then;
        }
        if let (Some(l), Some(r)) = (self.constant_value(lhs), self.constant_value(rhs)) {
            return if l <= r { then } else { otherwise };
        }
        self.intern(Node::SelectLe {
            lhs,
            rhs,
            then,
            otherwise,
        })
    }

    /// `op(x)`, simplified.
    pub fn unary(&mut self, op: Unary, x: NodeId) -> NodeId {
        if let Some(v) = self.constant_value(x) {
            return self.constant(apply_unary(op, v));
        }
        match (op, *self.node(x)) {
            (Unary::Neg, Node::Unary(Unary::Neg, inner)) => return inner,
            (Unary::Abs, Node::Unary(Unary::Neg | Unary::Abs, inner)) => {
                return self.unary(Unary::Abs, inner)
            }
            _ => {}
        }
        self.intern(Node::Unary(op, x))
    }

    /// `op(a, b)`, simplified.
    pub fn binary(&mut self, op: Binary, a: NodeId, b: NodeId) -> NodeId {
        if let (Some(x), Some(y)) = (self.constant_value(a), self.constant_value(b)) {
            return self.constant(apply_binary(op, x, y));
        }
        if let Some(simpler) = self.simplify_binary(op, a, b) {
            return simpler;
        }
        let (a, b) = if op.commutes() && b < a {
            (b, a)
        } else {
            (a, b)
        };
        self.intern(Node::Binary(op, a, b))
    }

    fn simplify_binary(&mut self, op: Binary, a: NodeId, b: NodeId) -> Option<NodeId> {
        let zero = |arena: &Arena, n| arena.is_zero(n);
        Some(match op {
            Binary::Add if zero(self, a) => b,
            Binary::Add if zero(self, b) => a,
            Binary::Add => match (self.negated(a), self.negated(b)) {
                (_, Some(nb)) => self.sub(a, nb),
                (Some(na), None) => self.sub(b, na),
                (None, None) => return None,
            },
            Binary::Sub if zero(self, b) => a,
            Binary::Sub if zero(self, a) => self.neg(b),
            Binary::Sub if a == b => self.constant(0.0),
            Binary::Sub => {
                let nb = self.negated(b)?;
                self.add(a, nb)
            }
            Binary::Mul | Binary::Div if zero(self, a) => self.constant(0.0),
            Binary::Mul if zero(self, b) => self.constant(0.0),
            Binary::Mul if self.is_constant(a, 1.0) => b,
            Binary::Mul | Binary::Div if self.is_constant(b, 1.0) => a,
            Binary::Mul if self.is_constant(a, -1.0) => self.neg(b),
            Binary::Mul | Binary::Div if self.is_constant(b, -1.0) => self.neg(a),
            Binary::Mul | Binary::Div => match (self.negated(a), self.negated(b)) {
                (Some(na), Some(nb)) => self.binary(op, na, nb),
                (Some(na), None) => {
                    let inner = self.binary(op, na, b);
                    self.neg(inner)
                }
                (None, Some(nb)) => {
                    let inner = self.binary(op, a, nb);
                    self.neg(inner)
                }
                (None, None) => return None,
            },
            Binary::Pow if self.is_constant(b, 1.0) => a,
            Binary::Pow if self.is_constant(b, 0.0) || self.is_constant(a, 1.0) => {
                self.constant(1.0)
            }
            Binary::Min | Binary::Max if a == b => a,
            _ => return None,
        })
    }

    /// The handles reachable from `roots` (roots included), in increasing order:
    /// the evaluation order of the interpreter and of generated code.
    pub fn reachable(&self, roots: &[NodeId]) -> Vec<NodeId> {
        // Costs the size of the roots' cone, not of the arena: a Jacobian asks for the
        // cone of one small entry thousands of times while the arena keeps growing.
        let mut seen = HashSet::new();
        let mut found = Vec::new();
        let mut stack: Vec<NodeId> = roots.to_vec();
        while let Some(id) = stack.pop() {
            if seen.insert(id) {
                found.push(id);
                stack.extend(self.node(id).operands());
            }
        }
        found.sort_unstable();
        found
    }

    /// `root` with symbols replaced by nodes (`replace` returns `None` to keep a
    /// symbol), rebuilt through the simplifying constructors. `memo` carries rebuilt
    /// nodes between calls with the same replacement, so several roots share work.
    pub fn substitute(
        &mut self,
        root: NodeId,
        replace: &impl Fn(Symbol) -> Option<NodeId>,
        memo: &mut HashMap<NodeId, NodeId>,
    ) -> NodeId {
        for id in self.reachable(&[root]) {
            if memo.contains_key(&id) {
                continue;
            }
            let new = match *self.node(id) {
                Node::Const(_) => id,
                Node::Symbol(s) => replace(s).unwrap_or(id),
                Node::Unary(op, x) => {
                    let x = memo[&x];
                    self.unary(op, x)
                }
                Node::Binary(op, a, b) => {
                    let (a, b) = (memo[&a], memo[&b]);
                    self.binary(op, a, b)
                }
                Node::SelectLe {
                    lhs,
                    rhs,
                    then,
                    otherwise,
                } => {
                    let (l, r, t, o) = (memo[&lhs], memo[&rhs], memo[&then], memo[&otherwise]);
                    self.select_le(l, r, t, o)
                }
            };
            memo.insert(id, new);
        }
        memo[&root]
    }
}

#[cfg(test)]
mod tests {
    use super::super::eval::{Bindings, Evaluator};
    use super::super::test_trees::{build, eval_direct, tree};
    use super::*;
    use proptest::prelude::*;

    proptest! {
        #![proptest_config(ProptestConfig { cases: 1000, ..ProptestConfig::default() })]
        #[test]
        fn simplification_never_changes_a_finite_value(t in tree(), x0 in -2.0f64..2.0, x1 in -2.0f64..2.0) {
            let direct = eval_direct(&t, [x0, x1]);
            prop_assume!(direct.is_some());
            let mut arena = Arena::new();
            let root = build(&mut arena, &t);
            let simplified = Evaluator::new(&arena, &[root]).eval(&Bindings::new(vec![x0, x1], vec![], 0.0))[0];
            // Equal as numbers (a zero may change sign), bit for bit otherwise.
            prop_assert!(direct == Some(simplified), "{:?} vs {}", direct, simplified);
        }
    }

    fn xy(arena: &mut Arena) -> (NodeId, NodeId) {
        (
            arena.symbol(Symbol::State(0)),
            arena.symbol(Symbol::State(1)),
        )
    }

    #[test]
    fn equal_expressions_share_one_node() {
        let mut arena = Arena::new();
        let (x, y) = xy(&mut arena);
        let a = arena.add(x, y);
        let b = arena.add(y, x);
        assert_eq!(a, b);
        let s1 = arena.unary(Unary::Sin, a);
        let s2 = arena.unary(Unary::Sin, b);
        assert_eq!(s1, s2);
        assert_eq!(arena.len(), 4);
    }

    #[test]
    fn folds_constants_including_trig() {
        let mut arena = Arena::new();
        let half_pi = arena.constant(std::f64::consts::FRAC_PI_2);
        let s = arena.unary(Unary::Sin, half_pi);
        assert_eq!(arena.constant_value(s), Some(1.0));
        let two = arena.constant(2.0);
        let three = arena.constant(3.0);
        let p = arena.binary(Binary::Pow, two, three);
        assert_eq!(arena.constant_value(p), Some(8.0));
    }

    #[test]
    fn identities_simplify_without_reassociating() {
        let mut arena = Arena::new();
        let (x, y) = xy(&mut arena);
        let zero = arena.constant(0.0);
        let one = arena.constant(1.0);
        let minus_one = arena.constant(-1.0);
        assert_eq!(arena.mul(x, zero), zero);
        assert_eq!(arena.add(zero, x), x);
        assert_eq!(arena.mul(one, x), x);
        let nx = arena.neg(x);
        assert_eq!(arena.neg(nx), x);
        assert_eq!(arena.mul(minus_one, x), nx);
        assert_eq!(arena.sub(x, x), zero);
        let ny = arena.neg(y);
        let x_plus_y = arena.add(x, y);
        assert_eq!(arena.sub(x, ny), x_plus_y);
        let x_minus_y = arena.sub(x, y);
        assert_eq!(arena.add(x, ny), x_minus_y);
        assert_eq!(arena.binary(Binary::Pow, x, one), x);
        // x^2 stays a power: `powf(x, 2)` and `x * x` may differ in the last bit.
        let two = arena.constant(2.0);
        let square = arena.binary(Binary::Pow, x, two);
        assert_eq!(*arena.node(square), Node::Binary(Binary::Pow, x, two));
        // (x + y) + 1 and x + (y + 1) stay distinct.
        let left = arena.add(x_plus_y, one);
        let y1 = arena.add(y, one);
        let right = arena.add(x, y1);
        assert_ne!(left, right);
    }

    #[test]
    fn negation_moves_out_of_products() {
        let mut arena = Arena::new();
        let (x, y) = xy(&mut arena);
        let nx = arena.neg(x);
        let ny = arena.neg(y);
        let xy_prod = arena.mul(x, y);
        assert_eq!(arena.mul(nx, ny), xy_prod);
        let neg_prod = arena.neg(xy_prod);
        assert_eq!(arena.mul(nx, y), neg_prod);
    }

    #[test]
    fn substitution_rebuilds_and_simplifies() {
        let mut arena = Arena::new();
        let (x, y) = xy(&mut arena);
        let prod = arena.mul(x, y);
        let s = arena.unary(Unary::Cos, prod);
        let zero = arena.constant(0.0);
        let out = arena.substitute(
            s,
            &|sym| (sym == Symbol::State(1)).then_some(zero),
            &mut HashMap::new(),
        );
        assert_eq!(arena.constant_value(out), Some(1.0));
    }

    #[test]
    fn reachable_is_in_topological_order() {
        let mut arena = Arena::new();
        let (x, y) = xy(&mut arena);
        let a = arena.mul(x, y);
        let b = arena.unary(Unary::Exp, a);
        let order = arena.reachable(&[b]);
        assert_eq!(order, vec![x, y, a, b]);
    }
}
