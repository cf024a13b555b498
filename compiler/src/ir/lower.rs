//! Lowering a checked model into the IR: expressions to nodes, discretisation,
//! noise mapping, Jacobians, sensors, then analysis and the unit check.

use std::collections::HashMap;

use crate::diag::Diagnostic;
use crate::model::{
    BinOp, Distribution, Expr, ExprKind, Func, Model, MotionKind, ProcessNoiseKind, SensorNoise,
};

use super::analysis::{self, Analysis, Linearity};
use super::discretise::{self, DiscretisationInfo};
use super::node::{Binary, NodeId, Symbol, Unary};
use super::unit_check;
use super::{internal_error, Arena, InternalResult, NodeMatrix};

/// How continuous motion is integrated when it is not (or may not be) done exactly.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Integrator {
    /// Exact for linear time-invariant motion, Runge-Kutta 4 otherwise.
    #[default]
    Auto,
    /// Explicit Euler, always.
    Euler,
    /// Classical Runge-Kutta 4, always.
    Rk4,
}

/// Options of [`lower`].
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct LowerOptions {
    /// Integrator for continuous motion.
    pub integrator: Integrator,
}

/// What a discrete noise sample perturbs.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum NoiseSourceKind {
    /// Added once per step to a state.
    PerStep {
        /// Index of the state.
        state: usize,
    },
    /// Added to a measured input before it drives the motion.
    Input {
        /// Index of the input.
        input: usize,
    },
}

/// One discrete noise sample `w_k` ([`Symbol::Noise`]`(k)`), zero-mean.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct NoiseSource {
    /// Where it enters.
    pub kind: NoiseSourceKind,
    /// Its distribution as the spec gives it (means are ignored: noise is centred).
    pub distribution: Distribution,
}

/// One sensor's functions.
#[derive(Debug, Clone, PartialEq)]
pub struct LoweredSensor {
    /// Sensor name.
    pub name: String,
    /// Predicted reading per component (symbols: states, [`Symbol::Arg`]).
    pub h: Vec<NodeId>,
    /// `H = dh/dx`, `components x states`.
    pub h_jac: NodeMatrix,
    /// Which components are wrapped angles.
    pub wrap: Vec<bool>,
    /// Residual per component: `z_k - h_k` ([`Symbol::Reading`]`(k)` is the reading),
    /// wrapped to `(-pi, pi]` for `wrap` components.
    pub residual: Vec<NodeId>,
    /// Reading covariance `R`, row-major `components x components`, SI squared.
    pub noise_cov: Vec<f64>,
}

/// A model lowered to the IR. Every function is a list of [`NodeId`]s in `arena`.
#[derive(Debug, Clone)]
pub struct Lowered {
    /// Model name.
    pub name: String,
    /// All nodes.
    pub arena: Arena,
    /// Number of states.
    pub state_count: usize,
    /// State names, in order.
    pub state_names: Vec<String>,
    /// Input names, in order.
    pub input_names: Vec<String>,
    /// Number of inputs.
    pub input_count: usize,
    /// Which states are wrapped angles.
    pub state_wrap: Vec<bool>,
    /// Continuous rates `x' = f_c(x, u)`, for continuous motion.
    pub rates: Option<Vec<NodeId>>,
    /// Mean transition `x_next` per state (noise at zero; `wrap` states wrapped).
    pub transition: Vec<NodeId>,
    /// Transition with the discrete noise samples [`Symbol::Noise`] in it, for
    /// methods that propagate samples (white noise is not in it: it is in `q_white`).
    pub transition_noisy: Vec<NodeId>,
    /// `F = d transition / d x`, `states x states`.
    pub f_jac: NodeMatrix,
    /// Discrete noise samples, in [`Symbol::Noise`] order: per-step process noise
    /// (in the order of the `process` block), then noisy inputs (declaration order).
    pub noise_sources: Vec<NoiseSource>,
    /// `G = d transition_noisy / d w` at `w = 0`, `states x noise_sources`.
    pub g_jac: NodeMatrix,
    /// Per-step covariance from white-noise densities, `states x states`.
    pub q_white: NodeMatrix,
    /// Total process covariance `q_white + G diag(var w) G^T`, symmetric.
    pub q: NodeMatrix,
    /// Sensors, in declaration order.
    pub sensors: Vec<LoweredSensor>,
    /// How motion was discretised.
    pub discretisation: DiscretisationInfo,
    /// Linearity, sparsity, operation counts.
    pub analysis: Analysis,
}

/// Lowers a checked model. Errors are internal (a broken model invariant or an
/// inconsistent Jacobian unit), never problems of the spec.
pub fn lower(model: &Model, options: &LowerOptions) -> Result<Lowered, Vec<Diagnostic>> {
    let lowered = build(model, options)?;
    let Some(scaled_model) = unit_check::scaled_model(model) else {
        // The checker verified the spec's units; this check only guards the IR's own
        // derivations, and cannot run on constants at the edge of the f64 range.
        return Ok(lowered);
    };
    let scaled = build(&scaled_model, options)?;
    let unit_errors = unit_check::check(&lowered, &scaled, model);
    if unit_errors.is_empty() {
        Ok(lowered)
    } else {
        Err(unit_errors)
    }
}

fn build(model: &Model, options: &LowerOptions) -> Result<Lowered, Vec<Diagnostic>> {
    let mut arena = Arena::new();
    let n = model.states.len();
    let scope = Scope {
        model,
        args: 0,
        dt_allowed: model.motion.kind == MotionKind::Discrete,
    };
    let equations = model
        .motion
        .equations
        .iter()
        .map(|e| scope.lower(&mut arena, e))
        .collect::<Result<Vec<_>, _>>()
        .map_err(|d| vec![*d])?;
    if equations.len() != n {
        return Err(vec![*internal_error(
            model.motion.span,
            "motion has not one equation per state",
        )]);
    }
    let motion_linearity = analysis::linearity(&model.motion.equations);
    let (discretised, rates) = match model.motion.kind {
        MotionKind::Discrete => (discretise::discrete(&mut arena, model, equations), None),
        MotionKind::Continuous => {
            let linear = motion_linearity == Linearity::Linear;
            let d =
                discretise::continuous(&mut arena, model, &equations, linear, options.integrator);
            (d, Some(equations))
        }
    };
    let discretised = discretised.map_err(|d| vec![*d])?;

    let noise_sources = noise_sources(model);
    let state_symbols: Vec<Symbol> = (0..n as u32).map(Symbol::State).collect();
    let noise_symbols: Vec<Symbol> = (0..noise_sources.len() as u32).map(Symbol::Noise).collect();
    let state_wrap: Vec<bool> = model.states.iter().map(|s| s.wrap).collect();

    // The noisy transition: inputs perturbed, per-step noise added, then wrapping.
    let input_noise: HashMap<u32, NodeId> = noise_sources
        .iter()
        .enumerate()
        .filter_map(|(k, s)| match s.kind {
            NoiseSourceKind::Input { input } => Some((input as u32, k)),
            NoiseSourceKind::PerStep { .. } => None,
        })
        .map(|(input, k)| {
            let u = arena.symbol(Symbol::Input(input));
            let w = arena.symbol(Symbol::Noise(k as u32));
            (input, arena.add(u, w))
        })
        .collect();
    let mut memo = HashMap::new();
    let mut transition_noisy: Vec<NodeId> = discretised
        .transition
        .iter()
        .map(|&t| {
            arena.substitute(
                t,
                &|s| match s {
                    Symbol::Input(i) => input_noise.get(&i).copied(),
                    _ => None,
                },
                &mut memo,
            )
        })
        .collect();
    for (k, source) in noise_sources.iter().enumerate() {
        if let NoiseSourceKind::PerStep { state } = source.kind {
            let w = arena.symbol(Symbol::Noise(k as u32));
            transition_noisy[state] = arena.add(transition_noisy[state], w);
        }
    }
    let wrap_all = |arena: &mut Arena, values: &[NodeId]| -> Vec<NodeId> {
        values
            .iter()
            .zip(&state_wrap)
            .map(|(&v, &wrap)| {
                if wrap {
                    arena.unary(Unary::WrapAngle, v)
                } else {
                    v
                }
            })
            .collect()
    };
    let transition = wrap_all(&mut arena, &discretised.transition);
    let transition_noisy = wrap_all(&mut arena, &transition_noisy);

    let f_jac = arena.jacobian(&transition, &state_symbols);
    let g_at_noise = arena.jacobian(&transition_noisy, &noise_symbols);
    let zero = arena.constant(0.0);
    let mut memo = HashMap::new();
    let g_entries = g_at_noise
        .entries()
        .iter()
        .map(|&e| {
            arena.substitute(
                e,
                &|s| matches!(s, Symbol::Noise(_)).then_some(zero),
                &mut memo,
            )
        })
        .collect();
    let g_jac = NodeMatrix::new(n, noise_sources.len(), g_entries);
    let q = total_process_noise(&mut arena, &discretised.q_white, &g_jac, &noise_sources);

    let sensors = model
        .sensors
        .iter()
        .map(|sensor| {
            let scope = Scope {
                model,
                args: sensor.args.len(),
                dt_allowed: false,
            };
            let h = sensor
                .components
                .iter()
                .map(|c| scope.lower(&mut arena, &c.expr))
                .collect::<Result<Vec<_>, _>>()?;
            let h_jac = arena.jacobian(&h, &state_symbols);
            let wrap: Vec<bool> = sensor.components.iter().map(|c| c.wrap).collect();
            let residual = h
                .iter()
                .zip(&wrap)
                .enumerate()
                .map(|(k, (&hk, &wrapped))| {
                    let z = arena.symbol(Symbol::Reading(k as u32));
                    let diff = arena.sub(z, hk);
                    if wrapped {
                        arena.unary(Unary::WrapAngle, diff)
                    } else {
                        diff
                    }
                })
                .collect();
            Ok(LoweredSensor {
                name: sensor.name.clone(),
                h,
                h_jac,
                wrap,
                residual,
                noise_cov: reading_covariance(&sensor.noise, sensor.components.len()),
            })
        })
        .collect::<InternalResult<Vec<_>>>()
        .map_err(|d| vec![*d])?;

    let mut lowered = Lowered {
        name: model.name.clone(),
        arena,
        state_count: n,
        state_names: model.states.iter().map(|s| s.name.clone()).collect(),
        input_names: model.inputs.iter().map(|u| u.name.clone()).collect(),
        input_count: model.inputs.len(),
        state_wrap,
        rates,
        transition,
        transition_noisy,
        f_jac,
        noise_sources,
        g_jac,
        q_white: discretised.q_white,
        q,
        sensors,
        discretisation: discretised.info,
        analysis: Analysis::default(),
    };
    lowered.analysis = analysis::analyse(&lowered, model, motion_linearity);
    Ok(lowered)
}

/// Discrete noise samples: per-step process noise, then noisy inputs.
fn noise_sources(model: &Model) -> Vec<NoiseSource> {
    let per_step = model.process_noise.iter().filter_map(|p| match p.kind {
        ProcessNoiseKind::PerStep(distribution) => Some(NoiseSource {
            kind: NoiseSourceKind::PerStep { state: p.state },
            distribution,
        }),
        ProcessNoiseKind::White { .. } => None,
    });
    let inputs = model.inputs.iter().enumerate().filter_map(|(input, var)| {
        var.noise.map(|distribution| NoiseSource {
            kind: NoiseSourceKind::Input { input },
            distribution,
        })
    });
    per_step.chain(inputs).collect()
}

/// `q_white + G diag(var) G^T`, built from the upper triangle.
fn total_process_noise(
    arena: &mut Arena,
    q_white: &NodeMatrix,
    g: &NodeMatrix,
    sources: &[NoiseSource],
) -> NodeMatrix {
    let n = q_white.rows();
    let mut entries = q_white.entries().to_vec();
    for i in 0..n {
        for j in i..n {
            let mut terms = vec![q_white.get(i, j)];
            for (k, source) in sources.iter().enumerate() {
                let weighted = arena.scale(source.distribution.variance(), g.get(i, k));
                terms.push(arena.mul(weighted, g.get(j, k)));
            }
            let e = arena.sum(terms);
            entries[i * n + j] = e;
            entries[j * n + i] = e;
        }
    }
    NodeMatrix::new(n, n, entries)
}

/// The reading covariance `R`, row-major.
fn reading_covariance(noise: &SensorNoise, components: usize) -> Vec<f64> {
    match noise {
        SensorNoise::PerComponent(list) => {
            let mut r = vec![0.0; components * components];
            for (k, d) in list.iter().enumerate().take(components) {
                r[k * components + k] = d.variance();
            }
            r
        }
        SensorNoise::Covariance(rows) => rows.iter().flat_map(|row| row.iter().copied()).collect(),
    }
}

/// Where an expression is lowered: which symbols it may name.
struct Scope<'m> {
    model: &'m Model,
    args: usize,
    dt_allowed: bool,
}

impl Scope<'_> {
    fn lower(&self, arena: &mut Arena, expr: &Expr) -> InternalResult<NodeId> {
        let broken =
            |what: &str| internal_error(expr.span, format!("checked model is broken: {what}"));
        let indexed =
            |arena: &mut Arena, i: usize, count: usize, make: fn(u32) -> Symbol, what: &str| {
                if i < count {
                    Ok(arena.symbol(make(i as u32)))
                } else {
                    Err(broken(what))
                }
            };
        match &expr.kind {
            ExprKind::Number(v) => Ok(arena.constant(*v)),
            ExprKind::State(i) => indexed(
                arena,
                *i,
                self.model.states.len(),
                Symbol::State,
                "state index",
            ),
            ExprKind::Input(i) => indexed(
                arena,
                *i,
                self.model.inputs.len(),
                Symbol::Input,
                "input index",
            ),
            ExprKind::Arg(i) => indexed(arena, *i, self.args, Symbol::Arg, "sensor argument index"),
            ExprKind::Dt if self.dt_allowed => Ok(arena.symbol(Symbol::Dt)),
            ExprKind::Dt => Err(broken("dt outside discrete motion")),
            ExprKind::Neg(a) => {
                let a = self.lower(arena, a)?;
                Ok(arena.neg(a))
            }
            ExprKind::Binary(op, a, b) => {
                let a = self.lower(arena, a)?;
                let b = self.lower(arena, b)?;
                let op = match op {
                    BinOp::Add => Binary::Add,
                    BinOp::Sub => Binary::Sub,
                    BinOp::Mul => Binary::Mul,
                    BinOp::Div => Binary::Div,
                    BinOp::Pow => Binary::Pow,
                };
                Ok(arena.binary(op, a, b))
            }
            ExprKind::Call(func, args) => {
                let args = args
                    .iter()
                    .map(|a| self.lower(arena, a))
                    .collect::<Result<Vec<_>, _>>()?;
                apply_func(arena, *func, &args).ok_or_else(|| broken("function arity"))
            }
        }
    }
}

/// `func(args)`, or `None` when the argument count is not the function's arity.
fn apply_func(arena: &mut Arena, func: Func, args: &[NodeId]) -> Option<NodeId> {
    let unary = |op| (Some(op), None);
    let binary = |op| (None, Some(op));
    let (u, b) = match func {
        Func::Sin => unary(Unary::Sin),
        Func::Cos => unary(Unary::Cos),
        Func::Tan => unary(Unary::Tan),
        Func::Asin => unary(Unary::Asin),
        Func::Acos => unary(Unary::Acos),
        Func::Atan => unary(Unary::Atan),
        Func::Sqrt => unary(Unary::Sqrt),
        Func::Exp => unary(Unary::Exp),
        Func::Ln => unary(Unary::Ln),
        Func::Abs => unary(Unary::Abs),
        Func::Atan2 => binary(Binary::Atan2),
        Func::Hypot => binary(Binary::Hypot),
        Func::Min => binary(Binary::Min),
        Func::Max => binary(Binary::Max),
    };
    match (u, b, args) {
        (Some(op), _, [x]) => Some(arena.unary(op, *x)),
        (_, Some(op), [a, b]) => Some(arena.binary(op, *a, *b)),
        _ => None,
    }
}

#[cfg(test)]
mod tests {
    use super::super::dump;
    use super::super::eval::{Bindings, Evaluator};
    use super::super::test_models::*;
    use super::super::verify::finite_difference_check;
    use super::super::RuntimeMatrix;
    use super::*;
    use crate::model::Sensor;
    use proptest::prelude::*;

    fn lowered(model: &Model) -> Lowered {
        match lower(model, &LowerOptions::default()) {
            Ok(l) => l,
            Err(d) => panic!("test model failed to lower: {d:?}"),
        }
    }

    fn expect_internal_error(model: &Model) -> Vec<Diagnostic> {
        match lower(model, &LowerOptions::default()) {
            Ok(_) => panic!("a broken model lowered"),
            Err(diags) => {
                assert!(diags.iter().all(|d| d.code.id == "E0001" && d.is_error()));
                diags
            }
        }
    }

    proptest! {
        #![proptest_config(ProptestConfig { cases: 128, ..ProptestConfig::default() })]

        #[test]
        fn rover_jacobians_match_finite_differences(
            east in -50.0f64..50.0, north in -50.0f64..50.0, heading in -3.1f64..3.1,
            speed in 0.0f64..12.0, yaw in -0.5f64..0.5, accel in -2.0f64..2.0,
            dt in 0.01f64..0.5, bx in -80.0f64..80.0, by in -80.0f64..80.0,
        ) {
            prop_assume!((east - bx).hypot(north - by) > 1.0);
            for integrator in [Integrator::Auto, Integrator::Euler] {
                let l = lower(&rover_with_beacon(), &LowerOptions { integrator });
                let l = l.map_err(|d| TestCaseError::fail(format!("{d:?}")))?;
                let point = Bindings::new(vec![east, north, heading, speed], vec![yaw, accel], dt);
                let bad = finite_difference_check(&l, &point, &[vec![bx, by], vec![]], 1e-6);
                prop_assert!(bad.is_empty(), "{:?}", bad);
            }
        }

        #[test]
        fn every_function_jacobians_match_finite_differences(
            a in -2.0f64..2.0, p in -3.0f64..3.0, th in -3.0f64..3.0, gain in -1.0f64..1.0,
            dt in 0.01f64..1.0, reference in -3.0f64..3.0,
        ) {
            // Stay clear of the kinks of abs(p), min(p, ref) and max(p, a).
            prop_assume!(p.abs() > 1e-3 && (p - reference).abs() > 1e-3 && (p - a).abs() > 1e-3);
            let l = lowered(&every_function_discrete());
            let point = Bindings::new(vec![a, p, th], vec![gain], dt);
            let bad = finite_difference_check(&l, &point, &[vec![reference]], 1e-6);
            prop_assert!(bad.is_empty(), "{:?}", bad);
        }

        #[test]
        fn linear_models_jacobians_match_finite_differences(
            x in proptest::collection::vec(-10.0f64..10.0, 3), u in proptest::collection::vec(-1.0f64..1.0, 2),
            dt in 0.01f64..2.0, runtime in proptest::collection::vec(-2.0f64..2.0, 12),
        ) {
            let mut point = Bindings::new(x.clone(), u.clone(), dt);
            // Run-time matrix entries are free symbols here: any values will do.
            point.runtime.insert(RuntimeMatrix::Transition, (2, runtime[0..4].to_vec()));
            point.runtime.insert(RuntimeMatrix::InputGain, (2, runtime[4..8].to_vec()));
            point.runtime.insert(RuntimeMatrix::ProcessNoise, (2, runtime[8..12].to_vec()));
            for model in [constant_velocity(0.5), damped_oscillator(4.0, 0.5), jerk_chain()] {
                for integrator in [Integrator::Auto, Integrator::Rk4] {
                    let l = lower(&model, &LowerOptions { integrator });
                    let l = l.map_err(|d| TestCaseError::fail(format!("{d:?}")))?;
                    let mut at = point.clone();
                    at.states.truncate(l.state_count);
                    at.inputs.truncate(l.input_count);
                    let bad = finite_difference_check(&l, &at, &[], 1e-6);
                    prop_assert!(bad.is_empty(), "{}: {:?}", model.name, bad);
                }
            }
        }
    }

    #[test]
    fn building_twice_gives_identical_ir() {
        for make in [
            rover_with_beacon,
            every_function_discrete,
            jerk_chain,
            || fleet(3),
        ] {
            let (first, second) = (lowered(&make()), lowered(&make()));
            assert_eq!(dump(&first), dump(&second));
            assert_eq!(first.arena.nodes(), second.arena.nodes());
        }
    }

    #[test]
    fn a_48_state_model_stays_compact() {
        let model = fleet(12);
        assert_eq!(model.states.len(), 48);
        let source = source_size(&model);
        for integrator in [Integrator::Euler, Integrator::Rk4] {
            let l = match lower(&model, &LowerOptions { integrator }) {
                Ok(l) => l,
                Err(d) => panic!("{d:?}"),
            };
            let nodes = l.arena.len();
            // Measured: 495 nodes (Euler) and 1320 (RK4) for 180 source nodes. Without
            // sharing, the 48 x 48 F and Q alone would have 2304 entries each.
            let bound = match integrator {
                Integrator::Euler => 4,
                _ => 10,
            };
            assert!(
                nodes <= bound * source,
                "{integrator:?}: {nodes} nodes for {source} source nodes"
            );
            // Per body: east and north read east|north, heading, speed; heading reads
            // itself and speed; speed only itself. Bodies do not interact.
            assert_eq!(l.analysis.f_sparsity.count(), 12 * (3 + 3 + 2 + 1));
        }
    }

    #[test]
    fn rover_structure_noise_and_linearity() {
        let model = rover_with_beacon();
        let l = lowered(&model);
        let kinds: Vec<NoiseSourceKind> = l.noise_sources.iter().map(|s| s.kind).collect();
        assert_eq!(
            kinds,
            vec![
                NoiseSourceKind::PerStep { state: 2 },
                NoiseSourceKind::Input { input: 0 },
                NoiseSourceKind::Input { input: 1 },
            ]
        );
        assert_eq!(
            l.analysis.f_sparsity.to_string(),
            "[x . x x]\n[. x x x]\n[. . x .]\n[. . . x]\n"
        );
        assert_eq!(
            l.analysis.g_sparsity.to_string(),
            "[. x x]\n[. x x]\n[x x .]\n[. . x]\n"
        );
        assert_eq!(
            l.analysis.h_sparsity[1].to_string(),
            "[x . . .]\n[. x . .]\n"
        );
        // The first nonlinear term of `east' = speed * cos(heading)` is the cosine.
        let ExprKind::Binary(_, _, cosine) = &model.motion.equations[0].kind else {
            panic!("rover east rate is a product");
        };
        assert_eq!(
            l.analysis.motion,
            Linearity::Nonlinear {
                equation: 0,
                span: cosine.span
            }
        );
        assert_eq!(l.analysis.sensors[1], Linearity::Linear);
        let all = l.analysis.ops.last().map(|f| f.counts.nodes).unwrap_or(0);
        let separate: usize = l
            .analysis
            .ops
            .iter()
            .rev()
            .skip(1)
            .map(|f| f.counts.nodes)
            .sum();
        assert!(all < separate, "functions share nodes: {all} < {separate}");
    }

    #[test]
    fn bearing_residual_is_wrapped_and_float_widths_agree() {
        let l = lowered(&rover_with_beacon());
        let beacon = &l.sensors[0];
        assert_eq!(beacon.wrap, vec![false, true]);
        assert_eq!(beacon.noise_cov, vec![0.0625, 0.0, 0.0, 0.0012]);
        let residual = Evaluator::new(&l.arena, &beacon.residual);
        let h = Evaluator::new(&l.arena, &beacon.h);
        let mut at = Bindings::new(vec![0.0, 0.0, 0.0, 1.0], vec![], 0.1);
        // Beacon straight behind (bearing pi), reading just past the cut.
        at.args = vec![-10.0, 1e-3];
        let predicted = h.eval(&at);
        assert!(predicted[1] > 3.0, "{predicted:?}");
        at.readings = vec![10.0, -std::f64::consts::PI + 0.01];
        let r = residual.eval(&at);
        assert!(
            (r[1] - (0.01 + (std::f64::consts::PI - predicted[1]))).abs() < 1e-9,
            "{r:?} {predicted:?}"
        );
        assert!(r[1].abs() < 0.02);
        let at32 = Bindings {
            states: at.states.iter().map(|&v| v as f32).collect(),
            inputs: vec![],
            noise: vec![],
            args: at.args.iter().map(|&v| v as f32).collect(),
            readings: at.readings.iter().map(|&v| v as f32).collect(),
            dt: 0.1f32,
            runtime: Default::default(),
        };
        let r32 = residual.eval(&at32);
        assert!((f64::from(r32[1]) - r[1]).abs() < 1e-5);
    }

    #[test]
    fn broken_units_give_an_internal_error() {
        let mut model = rover_with_beacon();
        // A component declared in metres whose expression is the heading (rad).
        let heading = model.motion.equations[2].clone();
        model.sensors[1].components[0].expr = Expr {
            kind: ExprKind::State(2),
            dimension: heading.dimension,
            span: heading.span,
        };
        let diags = expect_internal_error(&model);
        assert!(
            diags.iter().any(|d| d.message.contains("gnss.h[0,0]")),
            "{diags:?}"
        );
    }

    #[test]
    fn broken_indices_and_white_noise_in_discrete_motion_give_internal_errors() {
        let mut model = constant_velocity(1.0);
        model.motion.equations[0].kind = ExprKind::State(9);
        expect_internal_error(&model);
        let mut model = every_function_discrete();
        model.process_noise.push(crate::model::ProcessNoise {
            state: 0,
            kind: ProcessNoiseKind::White { amplitude: 1.0 },
            span: crate::diag::Span::new(3, 4),
        });
        expect_internal_error(&model);
        let mut model = constant_velocity(1.0);
        model.sensors.push(Sensor {
            name: "bad".into(),
            ..model.sensors[0].clone()
        });
        model.sensors[1].components[0].expr.kind = ExprKind::Call(Func::Atan2, vec![]);
        expect_internal_error(&model);
    }
}
