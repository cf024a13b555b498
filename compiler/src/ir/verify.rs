//! Numerical self-check of the symbolic Jacobians: each of `F`, `G` and every
//! sensor's `H` against central finite differences of the function it
//! differentiates, evaluated with the interpreter.

use super::eval::{wrap_angle, Bindings, Evaluator, Float};
use super::node::{NodeId, Symbol};
use super::{Arena, Lowered, NodeMatrix};

/// One Jacobian entry that disagrees with its finite difference.
#[derive(Debug, Clone, PartialEq)]
pub struct Mismatch {
    /// `F`, `G`, or `<sensor>.H`.
    pub matrix: String,
    /// Row.
    pub row: usize,
    /// Column.
    pub col: usize,
    /// The symbolic entry's value.
    pub symbolic: f64,
    /// The central difference.
    pub numeric: f64,
}

/// Which symbol a Jacobian column differentiates by, and how to perturb it.
fn perturbed(point: &Bindings<f64>, wrt: Symbol, delta: f64) -> Bindings<f64> {
    let mut p = point.clone();
    let slot = match wrt {
        Symbol::State(i) => p.states.get_mut(i as usize),
        Symbol::Noise(k) => {
            let k = k as usize;
            if p.noise.len() <= k {
                p.noise.resize(k + 1, 0.0);
            }
            p.noise.get_mut(k)
        }
        _ => None,
    };
    if let Some(v) = slot {
        *v += delta;
    }
    p
}

fn value_of(point: &Bindings<f64>, wrt: Symbol) -> f64 {
    let list = match wrt {
        Symbol::State(i) => point.states.get(i as usize),
        Symbol::Noise(k) => point.noise.get(k as usize),
        _ => None,
    };
    list.copied().unwrap_or(0.0)
}

/// Compares `jacobian` (entries `d outputs[i] / d wrt[j]`) with central differences
/// of `outputs` at `point`. `wrapped[i]` marks outputs whose differences are taken
/// on the circle. An entry passes when
/// `|symbolic - numeric| <= tolerance * max(1, |symbolic|, |numeric|)`.
#[allow(clippy::too_many_arguments)]
fn compare(
    arena: &Arena,
    name: &str,
    outputs: &[NodeId],
    wrapped: &[bool],
    jacobian: &NodeMatrix,
    wrt: &[Symbol],
    point: &Bindings<f64>,
    tolerance: f64,
    out: &mut Vec<Mismatch>,
) {
    let f = Evaluator::new(arena, outputs);
    let symbolic = Evaluator::new(arena, jacobian.entries()).eval(point);
    for (col, &s) in wrt.iter().enumerate() {
        let step = 1e-5 * value_of(point, s).abs().max(1.0);
        let plus = f.eval(&perturbed(point, s, step));
        let minus = f.eval(&perturbed(point, s, -step));
        for row in 0..outputs.len() {
            let mut diff = plus[row] - minus[row];
            if wrapped.get(row).copied().unwrap_or(false) {
                diff = wrap_angle(diff);
            }
            let numeric = diff / (2.0 * step);
            let exact = symbolic[row * wrt.len() + col];
            let scale = exact.abs().max(numeric.abs()).max(f64::ONE);
            if (exact - numeric).abs() > tolerance * scale || exact.is_nan() != numeric.is_nan() {
                out.push(Mismatch {
                    matrix: name.to_string(),
                    row,
                    col,
                    symbolic: exact,
                    numeric,
                });
            }
        }
    }
}

/// Checks `F`, `G` and every `H` at `point` (states, inputs, `dt`, run-time
/// matrices; noise samples default to zero). `sensor_args[s]` are the arguments of
/// sensor `s` (missing ones evaluate to NaN and are reported).
pub fn finite_difference_check(
    lowered: &Lowered,
    point: &Bindings<f64>,
    sensor_args: &[Vec<f64>],
    tolerance: f64,
) -> Vec<Mismatch> {
    let arena = &lowered.arena;
    let mut out = Vec::new();
    let states: Vec<Symbol> = (0..lowered.state_count as u32).map(Symbol::State).collect();
    let noise: Vec<Symbol> = (0..lowered.noise_sources.len() as u32)
        .map(Symbol::Noise)
        .collect();
    let wrap = &lowered.state_wrap;
    compare(
        arena,
        "F",
        &lowered.transition,
        wrap,
        &lowered.f_jac,
        &states,
        point,
        tolerance,
        &mut out,
    );
    let mut at_zero_noise = point.clone();
    at_zero_noise.noise = vec![0.0; noise.len()];
    compare(
        arena,
        "G",
        &lowered.transition_noisy,
        wrap,
        &lowered.g_jac,
        &noise,
        &at_zero_noise,
        tolerance,
        &mut out,
    );
    for (s, sensor) in lowered.sensors.iter().enumerate() {
        let mut p = point.clone();
        p.args = sensor_args.get(s).cloned().unwrap_or_default();
        let name = format!("{}.H", sensor.name);
        compare(
            arena,
            &name,
            &sensor.h,
            &sensor.wrap,
            &sensor.h_jac,
            &states,
            &p,
            tolerance,
            &mut out,
        );
    }
    out
}
