//! A readable text dump of a lowered model: nodes grouped per function (each node
//! printed under the first function that uses it), then sparsity pictures,
//! operation counts and the discretisation method.

use std::fmt::Write;

use super::analysis::functions;
use super::lower::{Lowered, NoiseSourceKind};
use super::node::Node;

/// The text dump behind `reckon dump --ir`.
pub fn dump(lowered: &Lowered) -> String {
    let mut out = String::new();
    // Writing to a String cannot fail.
    let _ = write_dump(lowered, &mut out);
    out
}

fn write_dump(lowered: &Lowered, out: &mut String) -> std::fmt::Result {
    let arena = &lowered.arena;
    writeln!(out, "model {}", lowered.name)?;
    for (i, name) in lowered.state_names.iter().enumerate() {
        let wrap = if lowered.state_wrap[i] { " (wrap)" } else { "" };
        writeln!(out, "  x{i} = {name}{wrap}")?;
    }
    for (i, name) in lowered.input_names.iter().enumerate() {
        writeln!(out, "  u{i} = {name}")?;
    }
    for (k, source) in lowered.noise_sources.iter().enumerate() {
        let target = match source.kind {
            NoiseSourceKind::PerStep { state } => format!("per step on x{state}"),
            NoiseSourceKind::Input { input } => format!("on input u{input}"),
        };
        writeln!(
            out,
            "  w{k} = {target}, variance {:?}",
            source.distribution.variance()
        )?;
    }
    let info = &lowered.discretisation;
    writeln!(
        out,
        "discretisation: {:?}, noise {:?}: {}",
        info.method, info.noise_method, info.reason
    )?;

    let mut printed = vec![false; arena.len()];
    for (name, roots) in functions(lowered) {
        writeln!(out, "\nfn {name} {{")?;
        for id in arena.reachable(&roots) {
            if std::mem::replace(&mut printed[id.index()], true) {
                continue;
            }
            let body = match *arena.node(id) {
                Node::Const(c) => format!("const {:?}", c.value()),
                Node::Symbol(s) => format!("sym {s}"),
                Node::Unary(op, x) => format!("{} {x}", op.name()),
                Node::Binary(op, a, b) => format!("{} {a} {b}", op.name()),
                Node::SelectLe {
                    lhs,
                    rhs,
                    then,
                    otherwise,
                } => format!("select_le {lhs} {rhs} {then} {otherwise}"),
            };
            writeln!(out, "  {id} = {body}")?;
        }
        let outputs: Vec<String> = roots.iter().map(|r| r.to_string()).collect();
        writeln!(out, "  out [{}]", outputs.join(" "))?;
        writeln!(out, "}}")?;
    }

    let analysis = &lowered.analysis;
    writeln!(out, "\nsparsity F:\n{}", analysis.f_sparsity)?;
    writeln!(out, "sparsity G:\n{}", analysis.g_sparsity)?;
    writeln!(out, "sparsity Q:\n{}", analysis.q_sparsity)?;
    for (sensor, pattern) in lowered.sensors.iter().zip(&analysis.h_sparsity) {
        writeln!(out, "sparsity {}.H:\n{pattern}", sensor.name)?;
    }
    writeln!(out, "linearity: motion {:?}", analysis.motion)?;
    for (sensor, lin) in lowered.sensors.iter().zip(&analysis.sensors) {
        writeln!(out, "linearity: {} {lin:?}", sensor.name)?;
    }
    writeln!(out, "\noperations (nodes, add/sub, mul, div, neg, calls):")?;
    for f in &analysis.ops {
        let c = f.counts;
        writeln!(
            out,
            "  {:<20} {} {} {} {} {} {}",
            f.name, c.nodes, c.add_sub, c.mul, c.div, c.neg, c.calls
        )?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::super::lower::{lower, LowerOptions};
    use super::super::test_models::{constant_velocity, damped_oscillator};
    use super::*;

    fn dumped(model: &crate::model::Model) -> String {
        match lower(model, &LowerOptions::default()) {
            Ok(l) => dump(&l),
            Err(d) => panic!("{d:?}"),
        }
    }

    #[test]
    fn constant_velocity_dump() {
        insta::assert_snapshot!(dumped(&constant_velocity(1.0)));
    }

    #[test]
    fn run_time_exponential_dump() {
        insta::assert_snapshot!(dumped(&damped_oscillator(4.0, 0.5)));
    }
}
