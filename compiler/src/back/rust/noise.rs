//! Process noise the firmware can retune: `Q` rebuilt from the run-time `Tuning`
//! values instead of the spec's numbers baked into the IR.
//!
//! The per-step covariance is linear in each white-noise density `d_s` and each
//! discrete noise variance `v_w`: `Q = sum_s d_s Q_s + sum_w v_w g_w g_w^T`, where
//! `Q_s` is the discretised covariance of a unit-density white noise on state `s` alone
//! and `g_w` is column `w` of the noise gain `G`. Each `Q_s` comes from lowering the
//! model again with only that noise, so every discretisation the IR knows (finite
//! series, first-order form) is reused, not reimplemented. With Van Loan's run-time
//! exponential the densities enter the exponential itself instead.

use std::collections::HashMap;

use crate::diag::Diagnostic;
use crate::ir::{self, Arena, LowerOptions, Lowered, Node, NodeId, NodeMatrix, NoiseMethod};
use crate::model::{Model, ProcessNoise, ProcessNoiseKind};

/// A white noise whose density is a tuning value.
pub(crate) struct WhiteSource {
    /// The state whose rate it drives.
    pub state: usize,
    /// `Q_s` for unit density, in the main arena.
    pub unit_covariance: NodeMatrix,
}

/// How `Q` is assembled at run time.
pub(crate) enum WhiteNoise {
    /// No white noise in the model.
    None,
    /// `sum_s d_s Q_s`.
    PerSource(Vec<WhiteSource>),
    /// The run-time Van Loan matrix `Qd` (the IR's `q_white`), computed from the
    /// densities in `Tuning`.
    RuntimeVanLoan,
}

/// Indices of states with white process noise, in `process` block order.
pub(crate) fn white_states(model: &Model) -> Vec<usize> {
    model
        .process_noise
        .iter()
        .filter(|p| matches!(p.kind, ProcessNoiseKind::White { .. }))
        .map(|p| p.state)
        .collect()
}

/// Plans the white-noise part of `Q`, adding each `Q_s` to `lowered`'s arena.
pub(crate) fn plan_white(
    model: &Model,
    lowered: &mut Lowered,
    options: &LowerOptions,
) -> Result<WhiteNoise, Vec<Diagnostic>> {
    match lowered.discretisation.noise_method {
        NoiseMethod::None => return Ok(WhiteNoise::None),
        NoiseMethod::RuntimeVanLoan => return Ok(WhiteNoise::RuntimeVanLoan),
        NoiseMethod::ClosedFormIntegral | NoiseMethod::FirstOrder => {}
    }
    let mut sources = Vec::new();
    for state in white_states(model) {
        let mut alone = model.clone();
        alone.process_noise = model
            .process_noise
            .iter()
            .filter(|p| p.state == state)
            .map(|p| ProcessNoise {
                kind: ProcessNoiseKind::White { amplitude: 1.0 },
                ..p.clone()
            })
            .collect();
        for input in &mut alone.inputs {
            input.noise = None;
        }
        let unit = ir::lower(&alone, options)?;
        let entries = import(&mut lowered.arena, &unit.arena, unit.q_white.entries());
        let n = unit.q_white.rows();
        sources.push(WhiteSource {
            state,
            unit_covariance: NodeMatrix::new(n, n, entries),
        });
    }
    Ok(WhiteNoise::PerSource(sources))
}

/// Copies the nodes computing `roots` from `from` into `into` (re-interned, so equal
/// sub-expressions are shared with what `into` already holds).
fn import(into: &mut Arena, from: &Arena, roots: &[NodeId]) -> Vec<NodeId> {
    let mut map: HashMap<NodeId, NodeId> = HashMap::new();
    for id in from.reachable(roots) {
        let copied = match *from.node(id) {
            Node::Const(c) => into.constant(c.value()),
            Node::Symbol(s) => into.symbol(s),
            Node::Unary(op, x) => into.unary(op, map[&x]),
            Node::Binary(op, a, b) => into.binary(op, map[&a], map[&b]),
            Node::SelectLe {
                lhs,
                rhs,
                then,
                otherwise,
            } => into.select_le(map[&lhs], map[&rhs], map[&then], map[&otherwise]),
        };
        map.insert(id, copied);
    }
    roots.iter().map(|r| map[r]).collect()
}
