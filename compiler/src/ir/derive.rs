//! Symbolic differentiation and Jacobians, built in the same arena as the
//! functions they differentiate, so sub-expressions shared between `f`, `F`, `h`
//! and `H` are one node.
//!
//! Rules at non-smooth points (subgradient choices):
//! - `abs'(x) = sign(x)`, so `abs'(0) = 0` (the minimum-norm subgradient);
//! - `min(a, b)' = a'` when `a <= b`, else `b'`; `max(a, b)' = a'` when `b <= a`,
//!   else `b'` (ties take the first argument);
//! - `wrap_angle'(x) = 1` (the cut at pi is a jump, not a slope).
//!
//! Other rules are the calculus ones, written to reuse the function's own nodes
//! (`sqrt(x)' = x' / (2 sqrt(x))`, `hypot(a, b)' = (a a' + b b') / hypot(a, b)`,
//! `atan2(y, x)' = (x y' - y x') / (x^2 + y^2)`, `exp(x)' = exp(x) x'`).
//! `a ^ b` uses `b a^(b-1) a'` when `b` does not depend on the variable and
//! `a^b (b' ln a + b a' / a)` otherwise.

use std::collections::HashSet;

use super::node::{Binary, Node, NodeId, Symbol, Unary};
use super::{Arena, NodeMatrix};

impl Arena {
    /// The derivative of `node` with respect to `wrt`, memoised per `(node, wrt)`.
    pub fn derivative(&mut self, node: NodeId, wrt: Symbol) -> NodeId {
        // The nodes of the cone not yet differentiated. A memoised node's whole cone is
        // memoised (each call completes a cone), so the walk stops there.
        let mut pending = Vec::new();
        let mut seen = HashSet::new();
        let mut stack = vec![node];
        while let Some(id) = stack.pop() {
            if !self.derivatives.contains_key(&(id, wrt)) && seen.insert(id) {
                pending.push(id);
                stack.extend(self.node(id).operands());
            }
        }
        // Operands first, in topological (increasing handle) order, so no recursion is
        // needed.
        pending.sort_unstable();
        for id in pending {
            let d = self.derivative_of_node(id, wrt);
            self.derivatives.insert((id, wrt), d);
        }
        self.derivatives[&(node, wrt)]
    }

    fn d(&self, id: NodeId, wrt: Symbol) -> NodeId {
        self.derivatives[&(id, wrt)]
    }

    fn derivative_of_node(&mut self, id: NodeId, wrt: Symbol) -> NodeId {
        match *self.node(id) {
            Node::Const(_) => self.constant(0.0),
            Node::Symbol(s) => self.constant(if s == wrt { 1.0 } else { 0.0 }),
            Node::Unary(op, x) => {
                let dx = self.d(x, wrt);
                if self.is_zero(dx) {
                    return dx;
                }
                let factor = self.unary_slope(op, id, x);
                self.mul(factor, dx)
            }
            Node::Binary(op, a, b) => {
                let (da, db) = (self.d(a, wrt), self.d(b, wrt));
                if self.is_zero(da) && self.is_zero(db) {
                    return da;
                }
                self.binary_derivative(op, id, a, b, da, db)
            }
            Node::SelectLe {
                lhs,
                rhs,
                then,
                otherwise,
            } => {
                let (dt, d_other) = (self.d(then, wrt), self.d(otherwise, wrt));
                self.select_le(lhs, rhs, dt, d_other)
            }
        }
    }

    /// d op(x) / dx, given the node `fx = op(x)`.
    fn unary_slope(&mut self, op: Unary, fx: NodeId, x: NodeId) -> NodeId {
        let one = self.constant(1.0);
        match op {
            Unary::Neg => self.constant(-1.0),
            Unary::Sin => self.unary(Unary::Cos, x),
            Unary::Cos => {
                let s = self.unary(Unary::Sin, x);
                self.neg(s)
            }
            Unary::Tan => {
                let sq = self.mul(fx, fx);
                self.add(one, sq)
            }
            Unary::Asin | Unary::Acos => {
                let sq = self.mul(x, x);
                let diff = self.sub(one, sq);
                let root = self.unary(Unary::Sqrt, diff);
                let slope = self.div(one, root);
                if op == Unary::Asin {
                    slope
                } else {
                    self.neg(slope)
                }
            }
            Unary::Atan => {
                let sq = self.mul(x, x);
                let den = self.add(one, sq);
                self.div(one, den)
            }
            Unary::Sqrt => {
                let twice = self.scale(2.0, fx);
                self.div(one, twice)
            }
            Unary::Exp => fx,
            Unary::Ln => self.div(one, x),
            Unary::Abs => self.unary(Unary::Sign, x),
            Unary::Sign => self.constant(0.0),
            Unary::WrapAngle => one,
        }
    }

    fn binary_derivative(
        &mut self,
        op: Binary,
        f: NodeId,
        a: NodeId,
        b: NodeId,
        da: NodeId,
        db: NodeId,
    ) -> NodeId {
        match op {
            Binary::Add => self.add(da, db),
            Binary::Sub => self.sub(da, db),
            Binary::Mul => {
                let l = self.mul(da, b);
                let r = self.mul(a, db);
                self.add(l, r)
            }
            Binary::Div => {
                // (a' b - a b') / b^2, written as a'/b - (a/b) b'/b to reuse a/b = f.
                let l = self.div(da, b);
                let fdb = self.mul(f, db);
                let r = self.div(fdb, b);
                self.sub(l, r)
            }
            Binary::Pow if self.is_zero(db) => {
                let one = self.constant(1.0);
                let b_minus_one = self.sub(b, one);
                let lower = self.binary(Binary::Pow, a, b_minus_one);
                let slope = self.mul(b, lower);
                self.mul(slope, da)
            }
            Binary::Pow => {
                let ln_a = self.unary(Unary::Ln, a);
                let l = self.mul(db, ln_a);
                let ratio = self.div(da, a);
                let r = self.mul(b, ratio);
                let inner = self.add(l, r);
                self.mul(f, inner)
            }
            Binary::Atan2 => {
                // a = y, b = x: (x y' - y x') / (x^2 + y^2)
                let xdy = self.mul(b, da);
                let ydx = self.mul(a, db);
                let num = self.sub(xdy, ydx);
                let xx = self.mul(b, b);
                let yy = self.mul(a, a);
                let den = self.add(xx, yy);
                self.div(num, den)
            }
            Binary::Hypot => {
                let ada = self.mul(a, da);
                let bdb = self.mul(b, db);
                let num = self.add(ada, bdb);
                self.div(num, f)
            }
            Binary::Min => self.select_le(a, b, da, db),
            Binary::Max => self.select_le(b, a, da, db),
        }
    }

    /// The Jacobian `d outputs[i] / d wrt[j]`.
    pub fn jacobian(&mut self, outputs: &[NodeId], wrt: &[Symbol]) -> NodeMatrix {
        let mut entries = Vec::with_capacity(outputs.len() * wrt.len());
        for &out in outputs {
            for &s in wrt {
                entries.push(self.derivative(out, s));
            }
        }
        NodeMatrix::new(outputs.len(), wrt.len(), entries)
    }
}

#[cfg(test)]
mod tests {
    use super::super::eval::{Bindings, Evaluator};
    use super::super::test_trees::{build, tree};
    use super::*;
    use proptest::prelude::*;

    /// True when a central difference at `x` with step `h` could straddle a kink
    /// (abs, min, max, hypot at the origin, powers of a zero base), where one-sided
    /// slopes differ.
    fn near_kink(arena: &mut Arena, root: NodeId, x: [f64; 2], h: f64) -> bool {
        let kink_args: Vec<(NodeId, Option<NodeId>)> = arena
            .reachable(&[root])
            .into_iter()
            .filter_map(|id| match *arena.node(id) {
                Node::Unary(Unary::Abs, a) => Some((a, None)),
                Node::Binary(Binary::Hypot, ..) => Some((id, None)),
                Node::Binary(Binary::Min | Binary::Max, a, b) => Some((a, Some(b))),
                // x^p with a base at zero is not differentiable for p < 1, and a
                // negative base gives NaN on one side of the stencil.
                Node::Binary(Binary::Pow, a, _) => Some((a, None)),
                _ => None,
            })
            .collect();
        if kink_args.is_empty() {
            return false;
        }
        let kinks: Vec<NodeId> = kink_args
            .into_iter()
            .map(|(a, b)| match b {
                Some(b) => arena.sub(a, b),
                None => a,
            })
            .collect();
        let e = Evaluator::new(arena, &kinks);
        let at = |p: [f64; 2]| e.eval(&Bindings::new(p.to_vec(), vec![], 0.0));
        let centre = at(x);
        let stencil = [
            [x[0] + h, x[1]],
            [x[0] - h, x[1]],
            [x[0], x[1] + h],
            [x[0], x[1] - h],
        ];
        centre.iter().any(|v| v.abs() < 1e-3)
            || stencil.iter().any(|&p| {
                at(p)
                    .iter()
                    .zip(&centre)
                    .any(|(a, c)| a.signum() != c.signum())
            })
    }

    proptest! {
        #![proptest_config(ProptestConfig { cases: 400, ..ProptestConfig::default() })]
        #[test]
        fn derivative_matches_central_difference(t in tree(), x0 in -1.5f64..1.5, x1 in -1.5f64..1.5) {
            let mut arena = Arena::new();
            let root = build(&mut arena, &t);
            let d0 = arena.derivative(root, Symbol::State(0));
            let d1 = arena.derivative(root, Symbol::State(1));
            let f = Evaluator::new(&arena, &[root]);
            let df = Evaluator::new(&arena, &[d0, d1]);
            let at = |p: [f64; 2]| f.eval(&Bindings::new(p.to_vec(), vec![], 0.0))[0];
            let exact = df.eval(&Bindings::new(vec![x0, x1], vec![], 0.0));
            let h = 1e-6;
            prop_assume!(!near_kink(&mut arena, root, [x0, x1], 4.0 * h));
            prop_assume!(at([x0, x1]).is_finite() && at([x0, x1]).abs() < 1e6);
            for (k, &e) in exact.iter().enumerate() {
                let central = |step: f64| {
                    let mut plus = [x0, x1];
                    let mut minus = [x0, x1];
                    plus[k] += step;
                    minus[k] -= step;
                    (at(plus) - at(minus)) / (2.0 * step)
                };
                let (coarse, fine) = (central(h), central(h / 2.0));
                prop_assume!(coarse.is_finite() && fine.is_finite() && e.is_finite() && e.abs() < 1e5);
                let scale = e.abs().max(fine.abs()).max(1.0);
                // Random trees can oscillate so fast that no difference quotient at
                // this step has converged; those points say nothing either way.
                prop_assume!((coarse - fine).abs() <= 1e-4 * scale);
                // Richardson extrapolation: the h^2 error terms cancel.
                let fd = (4.0 * fine - coarse) / 3.0;
                // Round-off of the difference quotients: values of size |f| carry an
                // error of about eps |f| each, divided by the step (h, h/2) and
                // amplified by the extrapolation's weights (common practice, no source).
                let round_off = 8.0 * f64::EPSILON * at([x0, x1]).abs() / h;
                prop_assert!((e - fd).abs() <= 1e-5 * scale + round_off, "d/dx{} exact {} fd {}", k, e, fd);
            }
        }
    }

    #[test]
    fn derivatives_share_nodes_with_the_function() {
        let mut arena = Arena::new();
        let x = arena.symbol(Symbol::State(0));
        let e = arena.unary(Unary::Exp, x);
        let d = arena.derivative(e, Symbol::State(0));
        assert_eq!(d, e);
        let r = arena.unary(Unary::Sqrt, x);
        let before = arena.len();
        let dr = arena.derivative(r, Symbol::State(0));
        // 1 / (2 sqrt x): constants 2 and 1, one product, one quotient.
        assert!(arena.len() - before <= 4);
        assert!(arena.reachable(&[dr]).contains(&r));
    }

    #[test]
    fn abs_and_min_take_documented_subgradients() {
        let mut arena = Arena::new();
        let x = arena.symbol(Symbol::State(0));
        let y = arena.symbol(Symbol::State(1));
        let a = arena.unary(Unary::Abs, x);
        let m = arena.binary(Binary::Min, x, y);
        let mx = arena.binary(Binary::Max, x, y);
        let da = arena.derivative(a, Symbol::State(0));
        let dm = arena.derivative(m, Symbol::State(0));
        let dmx = arena.derivative(mx, Symbol::State(0));
        let e = Evaluator::new(&arena, &[da, dm, dmx]);
        let tie = e.eval(&Bindings::new(vec![0.0f64, 0.0], vec![], 0.0));
        assert_eq!(tie, vec![0.0, 1.0, 1.0]);
        let apart = e.eval(&Bindings::new(vec![2.0f64, 1.0], vec![], 0.0));
        assert_eq!(apart, vec![1.0, 0.0, 1.0]);
    }
}
