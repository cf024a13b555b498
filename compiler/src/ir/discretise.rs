//! Discretisation of continuous motion: the mean over one step `dt` and the process
//! noise accumulated from white-noise densities.
//!
//! Choices, most exact first:
//! - linear time-invariant rates `x' = A x + B u + c` whose `A` is nilpotent
//!   (kinematic chains): `exp(A dt)`, its integral and the noise integral
//!   `Q = int_0^dt exp(A s) M exp(A s)^T ds` (`M = L Qc L^T`, the quantity Van Loan's
//!   block-matrix exponential computes) are finite series, built symbolically in `dt`;
//! - linear time-invariant rates with a non-nilpotent `A`: the same quantities as
//!   run-time matrices ([`RuntimeMatrix`]) computed by a matrix exponential from the
//!   [`LinearSystem`] data;
//! - otherwise an explicit integrator (classical Runge-Kutta 4 by default, Euler on
//!   request), inputs held over the step, and the noise in the trapezoidal
//!   first-order form `Q = (F M F^T + M) dt / 2`, which matches the exact integral
//!   up to and including the `dt^2` term (`M dt + (A M + M A^T) dt^2 / 2`).
//!
//! Nilpotency is decided structurally: `A` is nilpotent when the graph "rate of
//! `x_i` reads `x_j`" has no cycle; its longest path bounds the series.

use std::collections::HashMap;

use nalgebra::{DMatrix, Dyn};
use reckon_runtime::expm::{expm, van_loan, ExpmError};
use reckon_runtime::Real;

use crate::model::{Model, ProcessNoiseKind};

use super::lower::Integrator;
use super::node::{NodeId, RuntimeMatrix, Symbol};
use super::{internal_error, Arena, InternalResult, NodeMatrix};

/// How the mean was carried over a step.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Method {
    /// Discrete motion: the spec's map as written.
    Discrete,
    /// `x + dt f(x, u)`.
    Euler,
    /// Classical fourth-order Runge-Kutta, inputs held over the step.
    Rk4,
    /// Linear time-invariant, nilpotent `A`: exact finite series in `dt`.
    ExactSeries,
    /// Linear time-invariant: exact, with `Phi`, `Gamma`, `Qd` computed at run time.
    MatrixExponential,
}

/// How white-noise densities became a per-step covariance.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum NoiseMethod {
    /// No white noise in the model.
    None,
    /// The exact noise integral as a finite series in `dt` (nilpotent `A`).
    ClosedFormIntegral,
    /// The exact noise integral by Van Loan's block exponential at run time.
    RuntimeVanLoan,
    /// `(F M F^T + M) dt / 2`.
    FirstOrder,
}

/// Linear time-invariant continuous motion `x' = A x + B u + c + L w`, `w` white
/// with density `Qc`; matrices row-major, in SI.
///
/// When [`Method::MatrixExponential`] is used, a back end computes, for each step,
/// with the runtime's `expm` and `van_loan`: `Phi = expm(A dt)`; `Gamma` = the
/// top-right block of `expm([[A, I], [0, 0]] dt)`; and `Qd` from Van Loan's block
/// `[[-A, M], [0, A^T]] dt`. [`LinearSystem::runtime_matrices`] does exactly that.
#[derive(Debug, Clone, PartialEq)]
pub struct LinearSystem {
    /// Number of states.
    pub states: usize,
    /// Number of inputs.
    pub inputs: usize,
    /// `A`, `states x states`.
    pub a: Vec<f64>,
    /// `B`, `states x inputs`.
    pub b: Vec<f64>,
    /// Constant rate `c`.
    pub c: Vec<f64>,
    /// `M = L Qc L^T`, `states x states` (diagonal: white noise enters each rate
    /// on its own).
    pub noise_density: Vec<f64>,
    /// True when `A` is nilpotent (the series are finite).
    pub nilpotent: bool,
}

/// Run-time matrices as symbol values: `(columns, row-major entries)` per matrix.
pub type RuntimeValues<T> = HashMap<RuntimeMatrix, (usize, Vec<T>)>;

impl LinearSystem {
    /// `Phi`, `Gamma` and `Qd` for a step `dt`, computed with the runtime's matrix
    /// exponential exactly as generated code does, ready for
    /// [`Bindings::runtime`](super::eval::Bindings).
    pub fn runtime_matrices<T: Real>(&self, dt: T) -> Result<RuntimeValues<T>, ExpmError> {
        let n = self.states;
        let matrix = |values: &[f64]| {
            DMatrix::from_iterator(n, n, values.iter().map(|&v| nalgebra::convert::<f64, T>(v)))
                .transpose()
        };
        let a = matrix(&self.a);
        let discretised = van_loan(&a, &matrix(&self.noise_density), dt, Dyn(2 * n))?;
        // Gamma: the top-right block of exp([[A, I], [0, 0]] dt).
        let mut block = DMatrix::<T>::zeros(2 * n, 2 * n);
        for i in 0..n {
            for j in 0..n {
                block[(i, j)] = a[(i, j)] * dt;
            }
            block[(i, n + i)] = dt;
        }
        let exponential = expm(&block)?;
        let row_major = |m: &DMatrix<T>| m.transpose().as_slice().to_vec();
        let gamma = DMatrix::from_fn(n, n, |i, j| exponential[(i, n + j)]);
        Ok(HashMap::from([
            (
                RuntimeMatrix::Transition,
                (n, row_major(&discretised.transition)),
            ),
            (RuntimeMatrix::InputGain, (n, row_major(&gamma))),
            (
                RuntimeMatrix::ProcessNoise,
                (n, row_major(&discretised.noise)),
            ),
        ]))
    }
}

/// What discretisation was done, and why.
#[derive(Debug, Clone, PartialEq)]
pub struct DiscretisationInfo {
    /// The mean's method.
    pub method: Method,
    /// The white-noise method.
    pub noise_method: NoiseMethod,
    /// One human-readable sentence, e.g. "linear time-invariant, nilpotent: exact".
    pub reason: String,
    /// The linear system, when the motion is linear time-invariant.
    pub linear_system: Option<LinearSystem>,
}

/// The discrete transition (before noise and wrapping) and the white-noise `Q`.
pub(crate) struct Discretised {
    pub transition: Vec<NodeId>,
    pub q_white: NodeMatrix,
    pub info: DiscretisationInfo,
}

/// White-noise density (`amplitude^2`) per state; zero where there is none.
pub(crate) fn white_densities(model: &Model) -> Vec<f64> {
    let mut density = vec![0.0; model.states.len()];
    for noise in &model.process_noise {
        if let (ProcessNoiseKind::White { amplitude }, Some(d)) =
            (&noise.kind, density.get_mut(noise.state))
        {
            *d += amplitude * amplitude;
        }
    }
    density
}

/// Discrete motion: the map as written; no white noise is allowed there.
pub(crate) fn discrete(
    arena: &mut Arena,
    model: &Model,
    next: Vec<NodeId>,
) -> InternalResult<Discretised> {
    if let Some(white) = model
        .process_noise
        .iter()
        .find(|n| matches!(n.kind, ProcessNoiseKind::White { .. }))
    {
        return Err(internal_error(
            white.span,
            "white noise reached the IR in a discrete motion model",
        ));
    }
    let n = next.len();
    Ok(Discretised {
        transition: next,
        q_white: zero_matrix(arena, n),
        info: DiscretisationInfo {
            method: Method::Discrete,
            noise_method: NoiseMethod::None,
            reason: "discrete motion: the spec's map, used as written".into(),
            linear_system: None,
        },
    })
}

fn zero_matrix(arena: &mut Arena, n: usize) -> NodeMatrix {
    let zero = arena.constant(0.0);
    NodeMatrix::new(n, n, vec![zero; n * n])
}

fn symbols(kind: fn(u32) -> Symbol, count: usize) -> Vec<Symbol> {
    (0..count as u32).map(kind).collect()
}

/// Continuous motion with rates `rates` (symbols: states, inputs).
pub(crate) fn continuous(
    arena: &mut Arena,
    model: &Model,
    rates: &[NodeId],
    linear: bool,
    integrator: Integrator,
) -> InternalResult<Discretised> {
    let density = white_densities(model);
    let has_white = density.iter().any(|&d| d != 0.0);
    let system = if linear {
        Some(linear_system(arena, model, rates, &density)?)
    } else {
        None
    };
    let noise_note = |method: NoiseMethod| match method {
        NoiseMethod::None => "",
        NoiseMethod::ClosedFormIntegral => "; white noise: exact integral, finite series",
        NoiseMethod::RuntimeVanLoan => {
            "; white noise: exact integral, Van Loan block exponential at run time"
        }
        NoiseMethod::FirstOrder => "; white noise: first-order (F M F^T + M) dt / 2",
    };
    let with_white = |method: NoiseMethod| if has_white { method } else { NoiseMethod::None };
    let (transition, q_white, method, noise_method, reason) = match (integrator, &system) {
        (Integrator::Auto, Some(sys)) if sys.nilpotent => {
            let (transition, q) = exact_series(arena, sys);
            let reason = "linear time-invariant, nilpotent: exact";
            (
                transition,
                q,
                Method::ExactSeries,
                with_white(NoiseMethod::ClosedFormIntegral),
                reason,
            )
        }
        (Integrator::Auto, Some(sys)) => {
            let (transition, q) = runtime_exponential(arena, rates, sys, has_white);
            let reason =
                "linear time-invariant, not nilpotent: exact, matrix exponential at run time";
            (
                transition,
                q,
                Method::MatrixExponential,
                with_white(NoiseMethod::RuntimeVanLoan),
                reason,
            )
        }
        (requested, _) => {
            let (method, reason) = match requested {
                Integrator::Euler => (Method::Euler, "Euler chosen in the options"),
                Integrator::Rk4 => (Method::Rk4, "Runge-Kutta 4 chosen in the options"),
                Integrator::Auto => (Method::Rk4, "nonlinear motion: classical Runge-Kutta 4"),
            };
            let transition = integrate(arena, rates, method);
            let q = if has_white {
                let f = arena.jacobian(&transition, &symbols(Symbol::State, rates.len()));
                first_order_noise(arena, &f, &density)
            } else {
                zero_matrix(arena, rates.len())
            };
            (
                transition,
                q,
                method,
                with_white(NoiseMethod::FirstOrder),
                reason,
            )
        }
    };
    Ok(Discretised {
        transition,
        q_white,
        info: DiscretisationInfo {
            method,
            noise_method,
            reason: format!("{reason}{}", noise_note(noise_method)),
            linear_system: system,
        },
    })
}

/// Reads `A`, `B`, `c` off the symbolic Jacobians of affine rates.
fn linear_system(
    arena: &mut Arena,
    model: &Model,
    rates: &[NodeId],
    density: &[f64],
) -> InternalResult<LinearSystem> {
    let n = rates.len();
    let m = model.inputs.len();
    let not_constant = || {
        internal_error(
            model.motion.span,
            "motion judged linear has a non-constant Jacobian entry",
        )
    };
    let fx = arena.jacobian(rates, &symbols(Symbol::State, n));
    let fu = arena.jacobian(rates, &symbols(Symbol::Input, m));
    let values = |arena: &Arena, mat: &NodeMatrix| -> Option<Vec<f64>> {
        mat.entries()
            .iter()
            .map(|&e| arena.constant_value(e))
            .collect()
    };
    let a = values(arena, &fx).ok_or_else(not_constant)?;
    let b = values(arena, &fu).ok_or_else(not_constant)?;
    let zero = arena.constant(0.0);
    let mut memo = HashMap::new();
    let c = rates
        .iter()
        .map(|&r| {
            let at_origin = arena.substitute(
                r,
                &|s| matches!(s, Symbol::State(_) | Symbol::Input(_)).then_some(zero),
                &mut memo,
            );
            arena.constant_value(at_origin)
        })
        .collect::<Option<Vec<f64>>>()
        .ok_or_else(not_constant)?;
    let mut noise_density = vec![0.0; n * n];
    for (i, &d) in density.iter().enumerate() {
        noise_density[i * n + i] = d;
    }
    let nilpotent = nilpotency_index(&a, n).is_some();
    Ok(LinearSystem {
        states: n,
        inputs: m,
        a,
        b,
        c,
        noise_density,
        nilpotent,
    })
}

/// Length of the longest path in the graph of `A`'s nonzero entries, or `None`
/// when it has a cycle (then `A` is not structurally nilpotent). `A^k = 0` for
/// every `k` above the returned value.
pub(crate) fn nilpotency_index(a: &[f64], n: usize) -> Option<usize> {
    // Longest path ending at each node, by repeated relaxation; a path longer than
    // n - 1 edges means a cycle.
    let mut longest = vec![0usize; n];
    for _ in 0..n {
        let mut changed = false;
        for i in 0..n {
            for j in 0..n {
                if a[i * n + j] != 0.0 && longest[j] + 1 > longest[i] {
                    longest[i] = longest[j] + 1;
                    changed = true;
                }
            }
        }
        if !changed {
            return Some(longest.into_iter().max().unwrap_or(0));
        }
    }
    None
}

fn mat_mul(x: &[f64], y: &[f64], n: usize) -> Vec<f64> {
    let mut out = vec![0.0; n * n];
    for i in 0..n {
        for k in 0..n {
            let xik = x[i * n + k];
            if xik != 0.0 {
                for j in 0..n {
                    out[i * n + j] += xik * y[k * n + j];
                }
            }
        }
    }
    out
}

fn transpose(x: &[f64], n: usize) -> Vec<f64> {
    (0..n * n).map(|idx| x[(idx % n) * n + idx / n]).collect()
}

fn factorial(k: usize) -> f64 {
    (1..=k).map(|i| i as f64).product()
}

/// `sum_p coeffs[p] dt^p`, in increasing powers; `dt^p` is the product
/// `((dt * dt) * dt) ...`, shared between all polynomials.
fn polynomial_in_dt(arena: &mut Arena, coeffs: &[f64]) -> NodeId {
    let dt = arena.symbol(Symbol::Dt);
    let mut power = arena.constant(1.0);
    let mut terms = Vec::new();
    for (p, &c) in coeffs.iter().enumerate() {
        if p > 0 {
            power = arena.mul(power, dt);
        }
        if c != 0.0 {
            terms.push(arena.scale(c, power));
        }
    }
    arena.sum(terms)
}

/// Mean and noise of a nilpotent linear system as polynomials in `dt`.
fn exact_series(arena: &mut Arena, sys: &LinearSystem) -> (Vec<NodeId>, NodeMatrix) {
    let n = sys.states;
    let m = sys.inputs;
    let index = nilpotency_index(&sys.a, n).unwrap_or(n);
    // powers[k] = A^k, k = 0..=index.
    let mut powers = vec![(0..n * n)
        .map(|i| if i % (n + 1) == 0 { 1.0 } else { 0.0 })
        .collect::<Vec<f64>>()];
    for k in 1..=index {
        powers.push(mat_mul(&powers[k - 1], &sys.a, n));
    }
    // Phi = sum A^k dt^k / k!; Gamma = sum A^k dt^(k+1) / (k+1)!.
    let phi_coeffs = |i: usize, j: usize| -> Vec<f64> {
        (0..=index)
            .map(|k| powers[k][i * n + j] / factorial(k))
            .collect()
    };
    let gamma_times = |i: usize, v: &dyn Fn(usize) -> f64| -> Vec<f64> {
        let mut coeffs = vec![0.0];
        for (k, power) in powers.iter().enumerate() {
            let value: f64 = (0..n).map(|l| power[i * n + l] * v(l)).sum();
            coeffs.push(value / factorial(k + 1));
        }
        coeffs
    };
    let mut transition = Vec::with_capacity(n);
    for i in 0..n {
        let mut terms = Vec::new();
        for j in 0..n {
            let phi = polynomial_in_dt(arena, &phi_coeffs(i, j));
            let x = arena.symbol(Symbol::State(j as u32));
            terms.push(arena.mul(phi, x));
        }
        for input in 0..m {
            let gain = polynomial_in_dt(arena, &gamma_times(i, &|l| sys.b[l * m + input]));
            let u = arena.symbol(Symbol::Input(input as u32));
            terms.push(arena.mul(gain, u));
        }
        let offset = gamma_times(i, &|l| sys.c[l]);
        terms.push(polynomial_in_dt(arena, &offset));
        transition.push(arena.sum(terms));
    }
    // Q = sum_{j,k} A^j M (A^T)^k dt^(j+k+1) / (j! k! (j+k+1)).
    let mut q_coeffs = vec![vec![0.0; 2 * index + 2]; n * n];
    for j in 0..=index {
        let left = mat_mul(&powers[j], &sys.noise_density, n);
        for (k, power) in powers.iter().enumerate() {
            let term = mat_mul(&left, &transpose(power, n), n);
            let p = j + k + 1;
            let weight = factorial(j) * factorial(k) * p as f64;
            for (entry, coeffs) in term.iter().zip(q_coeffs.iter_mut()) {
                coeffs[p] += entry / weight;
            }
        }
    }
    let q = symmetric(arena, n, |arena, i, j| {
        polynomial_in_dt(arena, &q_coeffs[i * n + j])
    });
    (transition, q)
}

/// A symmetric matrix built from its upper triangle.
fn symmetric(
    arena: &mut Arena,
    n: usize,
    mut entry: impl FnMut(&mut Arena, usize, usize) -> NodeId,
) -> NodeMatrix {
    let zero = arena.constant(0.0);
    let mut entries = vec![zero; n * n];
    for i in 0..n {
        for j in i..n {
            let e = entry(arena, i, j);
            entries[i * n + j] = e;
            entries[j * n + i] = e;
        }
    }
    NodeMatrix::new(n, n, entries)
}

/// Mean and noise through run-time matrices `Phi`, `Gamma`, `Qd`.
fn runtime_exponential(
    arena: &mut Arena,
    rates: &[NodeId],
    sys: &LinearSystem,
    has_white: bool,
) -> (Vec<NodeId>, NodeMatrix) {
    let n = sys.states;
    let zero = arena.constant(0.0);
    // Rates at x = 0: B u + c, held over the step.
    let mut memo = HashMap::new();
    let drive: Vec<NodeId> = rates
        .iter()
        .map(|&r| {
            arena.substitute(
                r,
                &|s| matches!(s, Symbol::State(_)).then_some(zero),
                &mut memo,
            )
        })
        .collect();
    let runtime = |arena: &mut Arena, m: RuntimeMatrix, i: usize, j: usize| {
        arena.symbol(Symbol::Runtime(m, i as u32, j as u32))
    };
    let mut transition = Vec::with_capacity(n);
    for i in 0..n {
        let mut terms = Vec::new();
        for j in 0..n {
            let phi = runtime(arena, RuntimeMatrix::Transition, i, j);
            let x = arena.symbol(Symbol::State(j as u32));
            terms.push(arena.mul(phi, x));
        }
        for (k, &d) in drive.iter().enumerate() {
            if !arena.is_zero(d) {
                let gamma = runtime(arena, RuntimeMatrix::InputGain, i, k);
                terms.push(arena.mul(gamma, d));
            }
        }
        transition.push(arena.sum(terms));
    }
    let q = if has_white {
        symmetric(arena, n, |arena, i, j| {
            runtime(arena, RuntimeMatrix::ProcessNoise, i, j)
        })
    } else {
        zero_matrix(arena, n)
    };
    (transition, q)
}

/// Explicit integration of `rates` over one step, inputs held.
fn integrate(arena: &mut Arena, rates: &[NodeId], method: Method) -> Vec<NodeId> {
    let n = rates.len();
    let dt = arena.symbol(Symbol::Dt);
    let states: Vec<NodeId> = (0..n)
        .map(|i| arena.symbol(Symbol::State(i as u32)))
        .collect();
    // x + h * k, per state.
    let advance = |arena: &mut Arena, h: NodeId, k: &[NodeId]| -> Vec<NodeId> {
        (0..n)
            .map(|i| {
                let step = arena.mul(h, k[i]);
                arena.add(states[i], step)
            })
            .collect()
    };
    // The rates evaluated at the state `at`.
    let rates_at = |arena: &mut Arena, at: &[NodeId]| -> Vec<NodeId> {
        let mut memo = HashMap::new();
        rates
            .iter()
            .map(|&r| {
                arena.substitute(
                    r,
                    &|s| match s {
                        Symbol::State(i) => at.get(i as usize).copied(),
                        _ => None,
                    },
                    &mut memo,
                )
            })
            .collect()
    };
    match method {
        Method::Euler => advance(arena, dt, rates),
        _ => {
            let half_dt = arena.scale(0.5, dt);
            let k1 = rates.to_vec();
            let x2 = advance(arena, half_dt, &k1);
            let k2 = rates_at(arena, &x2);
            let x3 = advance(arena, half_dt, &k2);
            let k3 = rates_at(arena, &x3);
            let x4 = advance(arena, dt, &k3);
            let k4 = rates_at(arena, &x4);
            let six = arena.constant(6.0);
            let sixth_dt = arena.div(dt, six);
            let blend: Vec<NodeId> = (0..n)
                .map(|i| {
                    let two_k2 = arena.scale(2.0, k2[i]);
                    let two_k3 = arena.scale(2.0, k3[i]);
                    let s = arena.add(k1[i], two_k2);
                    let s = arena.add(s, two_k3);
                    arena.add(s, k4[i])
                })
                .collect();
            advance(arena, sixth_dt, &blend)
        }
    }
}

/// `(F M F^T + M) dt / 2` for a diagonal density `M`.
fn first_order_noise(arena: &mut Arena, f: &NodeMatrix, density: &[f64]) -> NodeMatrix {
    let n = density.len();
    let dt = arena.symbol(Symbol::Dt);
    let half_dt = arena.scale(0.5, dt);
    symmetric(arena, n, |arena, i, j| {
        let mut terms = Vec::new();
        for (k, &m) in density.iter().enumerate() {
            if m != 0.0 {
                let weighted = arena.scale(m, f.get(i, k));
                terms.push(arena.mul(weighted, f.get(j, k)));
            }
        }
        if i == j && density[i] != 0.0 {
            terms.push(arena.constant(density[i]));
        }
        let s = arena.sum(terms);
        arena.mul(half_dt, s)
    })
}

#[cfg(test)]
mod tests {
    use super::super::eval::{Bindings, Evaluator};
    use super::super::lower::{lower, LowerOptions, Lowered};
    use super::super::test_models::*;
    use super::*;

    fn lowered(model: &Model, integrator: Integrator) -> Lowered {
        match lower(model, &LowerOptions { integrator }) {
            Ok(l) => l,
            Err(d) => panic!("test model failed to lower: {d:?}"),
        }
    }

    fn eval_matrix(l: &Lowered, m: &NodeMatrix, at: &Bindings<f64>) -> Vec<f64> {
        Evaluator::new(&l.arena, m.entries()).eval(at)
    }

    fn close(a: f64, b: f64, tol: f64) -> bool {
        (a - b).abs() <= tol * a.abs().max(b.abs()).max(1.0)
    }

    fn reference() -> serde_json::Value {
        let text = include_str!(concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/../tests/reference/expm_reference.json"
        ));
        serde_json::from_str(text).unwrap_or(serde_json::Value::Null)
    }

    fn numbers(v: &serde_json::Value) -> Vec<f64> {
        match v {
            serde_json::Value::Array(items) => items.iter().flat_map(numbers).collect(),
            other => other.as_f64().into_iter().collect(),
        }
    }

    #[test]
    fn white_acceleration_noise_matches_textbook() {
        // Bar-Shalom, Li & Kirubarajan 2001, sec. 6.2.2: Q = q [[dt^3/3, dt^2/2],
        // [dt^2/2, dt]]; dt = 2, q = 1 gives [[8/3, 2], [2, 2]].
        let l = lowered(&constant_velocity(1.0), Integrator::Auto);
        assert_eq!(l.discretisation.method, Method::ExactSeries);
        assert_eq!(
            l.discretisation.noise_method,
            NoiseMethod::ClosedFormIntegral
        );
        assert!(l
            .discretisation
            .reason
            .contains("linear time-invariant, nilpotent: exact"));
        let q = eval_matrix(&l, &l.q, &Bindings::new(vec![0.0, 0.0], vec![], 2.0));
        let want = [8.0 / 3.0, 2.0, 2.0, 2.0];
        for (got, want) in q.iter().zip(want) {
            assert!(close(*got, want, 1e-15), "{q:?}");
        }
        let (q_density, dt) = (0.3, 0.7);
        let l = lowered(&constant_velocity(q_density), Integrator::Auto);
        let q = eval_matrix(&l, &l.q, &Bindings::new(vec![0.0, 0.0], vec![], dt));
        let want = [dt * dt * dt / 3.0, dt * dt / 2.0, dt * dt / 2.0, dt].map(|v| v * q_density);
        for (got, want) in q.iter().zip(want) {
            assert!(close(*got, want, 1e-14), "{q:?}");
        }
        let f = eval_matrix(&l, &l.f_jac, &Bindings::new(vec![0.0, 0.0], vec![], dt));
        assert_eq!(f, vec![1.0, dt, 0.0, 1.0]);
    }

    #[test]
    fn nilpotent_series_matches_scipy_expm() {
        // Reference: tests/reference/expm_reference.py (scipy.linalg.expm, Van Loan).
        let r = &reference()["chain"];
        assert!(r.is_object(), "reference file missing the chain system");
        let l = lowered(&jerk_chain(), Integrator::Auto);
        assert_eq!(l.discretisation.method, Method::ExactSeries);
        let dt = r["dt"].as_f64().unwrap_or(f64::NAN);
        let at = Bindings::new(numbers(&r["x"]), numbers(&r["u"]), dt);
        let origin = Bindings::new(vec![0.0; 3], vec![0.0; 2], dt);
        let inputs: Vec<Symbol> = (0..2).map(Symbol::Input).collect();
        let mut arena = l.arena.clone();
        let gamma_b = arena.jacobian(&l.transition, &inputs);
        let checks: [(&str, Vec<f64>); 5] = [
            ("phi", Evaluator::new(&arena, l.f_jac.entries()).eval(&at)),
            (
                "gamma_b",
                Evaluator::new(&arena, gamma_b.entries()).eval(&at),
            ),
            (
                "gamma_c",
                Evaluator::new(&arena, &l.transition).eval(&origin),
            ),
            ("q", Evaluator::new(&arena, l.q.entries()).eval(&at)),
            ("x_next", Evaluator::new(&arena, &l.transition).eval(&at)),
        ];
        for (name, got) in checks {
            let want = numbers(&r[name]);
            assert_eq!(got.len(), want.len(), "{name}");
            for (g, w) in got.iter().zip(&want) {
                assert!(close(*g, *w, 1e-13), "{name}: got {got:?}, scipy {want:?}");
            }
        }
    }

    #[test]
    fn runtime_exponential_path_matches_scipy_expm() {
        // Reference: tests/reference/expm_reference.py (scipy.linalg.expm, Van Loan).
        let r = &reference()["oscillator"];
        assert!(r.is_object(), "reference file missing the oscillator");
        let l = lowered(&damped_oscillator(4.0, 0.5), Integrator::Auto);
        assert_eq!(l.discretisation.method, Method::MatrixExponential);
        assert_eq!(l.discretisation.noise_method, NoiseMethod::RuntimeVanLoan);
        let Some(sys) = &l.discretisation.linear_system else {
            panic!("linear system data missing");
        };
        assert_eq!(sys.a, vec![0.0, 1.0, -4.0, -0.5]);
        assert!(!sys.nilpotent);
        let dt = r["dt"].as_f64().unwrap_or(f64::NAN);
        let mut at = Bindings::new(numbers(&r["x"]), numbers(&r["u"]), dt);
        at.runtime = match sys.runtime_matrices(dt) {
            Ok(values) => values,
            Err(e) => panic!("matrix exponential failed: {e:?}"),
        };
        let q_white = eval_matrix(&l, &l.q_white, &at);
        let x_next = Evaluator::new(&l.arena, &l.transition).eval(&at);
        let f = eval_matrix(&l, &l.f_jac, &at);
        for (name, got) in [("q", q_white), ("x_next", x_next), ("phi", f)] {
            let want = numbers(&r[name]);
            for (g, w) in got.iter().zip(&want) {
                assert!(close(*g, *w, 1e-12), "{name}: got {got:?}, scipy {want:?}");
            }
        }
    }

    /// Integrates `x' = -x^2` from `x0 = 1` to `t = 1` in `steps` steps.
    fn decay_error(integrator: Integrator, steps: usize) -> f64 {
        let l = lowered(&quadratic_decay(), integrator);
        let step = Evaluator::new(&l.arena, &l.transition);
        let dt = 1.0 / steps as f64;
        let mut x = 1.0;
        for _ in 0..steps {
            x = step.eval(&Bindings::new(vec![x], vec![], dt))[0];
        }
        // Closed form: x(t) = x0 / (1 + x0 t) = 1/2 at t = 1.
        (x - 0.5).abs()
    }

    #[test]
    fn runge_kutta_converges_at_fourth_order_to_the_closed_form() {
        let coarse = decay_error(Integrator::Auto, 10);
        let fine = decay_error(Integrator::Auto, 20);
        assert!(coarse < 1e-5, "{coarse}");
        // Halving the step divides a fourth-order global error by about 16.
        let ratio = coarse / fine;
        assert!((13.0..19.0).contains(&ratio), "{ratio}");
        let euler_ratio = decay_error(Integrator::Euler, 100) / decay_error(Integrator::Euler, 200);
        assert!((1.8..2.2).contains(&euler_ratio), "{euler_ratio}");
    }

    #[test]
    fn runge_kutta_follows_a_circular_arc() {
        // Constant speed v and yaw rate w: east = v/w (sin(h0 + w t) - sin h0),
        // north = -v/w (cos(h0 + w t) - cos h0).
        let l = lowered(&rover_with_beacon(), Integrator::Auto);
        assert_eq!(l.discretisation.method, Method::Rk4);
        let step = Evaluator::new(&l.arena, &l.transition);
        let (v, w, h0, dt): (f64, f64, f64, f64) = (5.0, 0.3, 0.4, 0.1);
        let mut x = vec![0.0, 0.0, h0, v];
        for _ in 0..100 {
            x = step.eval(&Bindings::new(x, vec![w, 0.0], dt));
        }
        let t: f64 = 10.0;
        let east = v / w * ((h0 + w * t).sin() - h0.sin());
        let north = -v / w * ((h0 + w * t).cos() - h0.cos());
        assert!(
            (x[0] - east).abs() < 1e-6 && (x[1] - north).abs() < 1e-6,
            "{x:?} vs {east} {north}"
        );
        assert!((x[2] - crate::ir::eval::wrap_angle(h0 + w * t)).abs() < 1e-12);
    }

    #[test]
    fn euler_and_first_order_noise_on_constant_velocity() {
        // (F M F^T + M) dt / 2 with F = [[1, dt], [0, 1]], M = diag(0, q) is
        // q [[dt^3/2, dt^2/2], [dt^2/2, dt]] (derived by hand).
        let (q, dt) = (0.3, 0.7);
        let l = lowered(&constant_velocity(q), Integrator::Euler);
        assert_eq!(l.discretisation.method, Method::Euler);
        assert_eq!(l.discretisation.noise_method, NoiseMethod::FirstOrder);
        let got = eval_matrix(&l, &l.q, &Bindings::new(vec![0.0, 0.0], vec![], dt));
        let want = [dt * dt * dt / 2.0, dt * dt / 2.0, dt * dt / 2.0, dt].map(|v| v * q);
        for (g, w) in got.iter().zip(want) {
            assert!(close(*g, w, 1e-14), "{got:?}");
        }
        let next = Evaluator::new(&l.arena, &l.transition).eval(&Bindings::new(
            vec![1.0, 2.0],
            vec![],
            dt,
        ));
        assert_eq!(next, vec![1.0 + dt * 2.0, 2.0]);
    }

    #[test]
    fn nilpotency_is_read_from_the_dependency_graph() {
        assert_eq!(
            nilpotency_index(&[0.0, 1.0, 0.0, 0.0, 0.0, 1.0, 0.0, 0.0, 0.0], 3),
            Some(2)
        );
        assert_eq!(nilpotency_index(&[0.0; 4], 2), Some(0));
        assert_eq!(nilpotency_index(&[0.0, 1.0, -4.0, 0.0], 2), None);
        assert_eq!(nilpotency_index(&[-1.0], 1), None);
    }
}
