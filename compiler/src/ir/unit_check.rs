//! The unit check of every lowered function and Jacobian entry, by scaling.
//!
//! The IR erases units: one constant node serves every unit, and `x * (1 m/s)`
//! simplifies to `x`. So dimensions cannot be read off the DAG; instead the model
//! is lowered a second time with every SI base unit (hard axes) scaled by a
//! distinct power of four, and both versions are evaluated at the same physical
//! point. A dimensionally consistent entry of dimension `D` then scales by exactly
//! `factor(D)` (powers of four keep products, quotients and square roots exact);
//! an entry that does not, such as `F[i,j]` not being `[x_i]/[x_j]`, means the
//! IR's own derivation broke a unit rule and is reported as an internal error.

use crate::diag::{codes, Diagnostic, Span};
use crate::model::{Distribution, Expr, ExprKind, Model, ProcessNoiseKind};
use crate::units::{Base, Dimension};

use super::eval::{Bindings, Evaluator};
use super::lower::{Lowered, NoiseSourceKind};
use super::node::{NodeId, RuntimeMatrix};
use super::NodeMatrix;

/// Scale of each hard base axis (angle and cycle are SI-dimensionless: unscaled).
fn axis_scale(base: Base) -> f64 {
    match base {
        Base::Length => 4.0,
        Base::Mass => 16.0,
        Base::Time => 64.0,
        Base::Current => 0.25,
        Base::Temperature => 1.0 / 16.0,
        Base::Amount => 256.0,
        Base::Luminosity => 1.0 / 64.0,
        Base::Angle | Base::Cycle => 1.0,
    }
}

/// How a quantity of dimension `d` scales.
fn factor(d: Dimension) -> f64 {
    Base::ALL
        .iter()
        .map(|&b| axis_scale(b).powf(d.exponent(b).to_f64()))
        .product()
}

/// Scales the numbers of `e`; false if one of them left the normal `f64` range, where
/// scaling by a power of four is no longer exact.
fn scale_expr(e: &mut Expr) -> bool {
    match &mut e.kind {
        ExprKind::Number(v) => {
            let scaled = *v * factor(e.dimension);
            let exact = *v == 0.0 || scaled.is_normal();
            *v = scaled;
            exact
        }
        ExprKind::Neg(a) => scale_expr(a),
        ExprKind::Binary(_, a, b) => scale_expr(a) & scale_expr(b),
        ExprKind::Call(_, args) => args.iter_mut().fold(true, |exact, a| scale_expr(a) & exact),
        ExprKind::State(_) | ExprKind::Input(_) | ExprKind::Arg(_) | ExprKind::Dt => true,
    }
}

fn scale_distribution(d: &mut Distribution, f: f64) {
    match d {
        Distribution::Normal { mean, sigma } => {
            *mean *= f;
            *sigma *= f;
        }
        Distribution::Triangle { mean, half_width } => {
            *mean *= f;
            *half_width *= f;
        }
        Distribution::Uniform { lo, hi } => {
            *lo *= f;
            *hi *= f;
        }
    }
}

/// The same model in scaled units; `None` when a constant of the spec is so close to
/// the limits of `f64` that scaling it is not exact, so the comparison cannot be made.
pub(crate) fn scaled_model(model: &Model) -> Option<Model> {
    let mut m = model.clone();
    let mut exact = m
        .motion
        .equations
        .iter_mut()
        .fold(true, |exact, e| scale_expr(e) & exact);
    for c in m.sensors.iter_mut().flat_map(|s| s.components.iter_mut()) {
        exact &= scale_expr(&mut c.expr);
    }
    let time = factor(Dimension::base(Base::Time));
    for noise in &mut m.process_noise {
        let f = model
            .states
            .get(noise.state)
            .map_or(1.0, |s| factor(s.unit.dimension));
        match &mut noise.kind {
            ProcessNoiseKind::White { amplitude } => *amplitude *= f / time.sqrt(),
            ProcessNoiseKind::PerStep(d) => scale_distribution(d, f),
        }
    }
    for input in &mut m.inputs {
        let f = factor(input.unit.dimension);
        if let Some(d) = &mut input.noise {
            scale_distribution(d, f);
        }
    }
    exact.then_some(m)
}

/// A point to evaluate at: varied, moderate values (a check needs no randomness).
fn sample(count: usize, offset: f64) -> Vec<f64> {
    (0..count)
        .map(|i| offset + 0.37 * ((i as f64 + 1.0) * 1.618).sin())
        .collect()
}

/// Compares base and scaled evaluations of one function list.
struct Comparison<'a> {
    base: &'a Lowered,
    scaled: &'a Lowered,
    point: Bindings<f64>,
    scaled_point: Bindings<f64>,
    span: Span,
    out: Vec<Diagnostic>,
}

impl Comparison<'_> {
    fn check(
        &mut self,
        name: &str,
        base: &NodeMatrix,
        scaled: &NodeMatrix,
        expected: impl Fn(usize, usize) -> f64,
    ) {
        let b = Evaluator::new(&self.base.arena, base.entries()).eval(&self.point);
        let s = Evaluator::new(&self.scaled.arena, scaled.entries()).eval(&self.scaled_point);
        for row in 0..base.rows() {
            for col in 0..base.cols() {
                let k = row * base.cols() + col;
                let want = b[k] * expected(row, col);
                let got = s[k];
                let fine = !want.is_finite()
                    || !got.is_finite()
                    || (got - want).abs() <= 1e-6 * got.abs().max(want.abs()).max(1e-290);
                if !fine {
                    self.out.push(
                        Diagnostic::new(
                            codes::INTERNAL,
                            self.span,
                            format!("{name}[{row},{col}] does not have the dimension its position implies"),
                        )
                        .with_note(format!("scaling the units scaled it by {}, expected {}", got / b[k], expected(row, col))),
                    );
                }
            }
        }
    }
}

fn column(v: &[NodeId]) -> NodeMatrix {
    NodeMatrix::new(v.len(), 1, v.to_vec())
}

/// Checks that every function and Jacobian entry of `base` has the dimension its
/// position implies (`F[i,j]`: `[x_i]/[x_j]`, `H[k,j]`: `[z_k]/[x_j]`, ...), given
/// `scaled`, the same model lowered from [`scaled_model`].
pub(crate) fn check(base: &Lowered, scaled: &Lowered, model: &Model) -> Vec<Diagnostic> {
    let fx: Vec<f64> = model
        .states
        .iter()
        .map(|s| factor(s.unit.dimension))
        .collect();
    let fu: Vec<f64> = model
        .inputs
        .iter()
        .map(|u| factor(u.unit.dimension))
        .collect();
    let fw: Vec<f64> = base
        .noise_sources
        .iter()
        .map(|s| match s.kind {
            NoiseSourceKind::PerStep { state } => fx[state],
            NoiseSourceKind::Input { input } => fu[input],
        })
        .collect();
    let ft = factor(Dimension::base(Base::Time));
    let n = fx.len();
    let scale = |values: &[f64], factors: &[f64]| {
        values
            .iter()
            .zip(factors)
            .map(|(v, f)| v * f)
            .collect::<Vec<_>>()
    };

    let states = sample(n, 0.6);
    let inputs = sample(fu.len(), -0.2);
    let mut point = Bindings::new(states.clone(), inputs.clone(), 0.125);
    let mut scaled_point = Bindings::new(scale(&states, &fx), scale(&inputs, &fu), 0.125 * ft);
    let transition = |i: usize, j: usize| fx[i] / fx[j];
    let input_gain = |i: usize, j: usize| fx[i] / fx[j] * ft;
    let process_noise = |i: usize, j: usize| fx[i] * fx[j];
    type EntryScale<'f> = &'f dyn Fn(usize, usize) -> f64;
    let runtime: [(RuntimeMatrix, EntryScale); 3] = [
        (RuntimeMatrix::Transition, &transition),
        (RuntimeMatrix::InputGain, &input_gain),
        (RuntimeMatrix::ProcessNoise, &process_noise),
    ];
    for (matrix, entry) in runtime {
        let values: Vec<f64> = sample(n * n, 0.1);
        let scaled_values = (0..n * n)
            .map(|k| values[k] * entry(k / n, k % n))
            .collect();
        point.runtime.insert(matrix, (n, values));
        scaled_point.runtime.insert(matrix, (n, scaled_values));
    }
    let mut cmp = Comparison {
        base,
        scaled,
        point,
        scaled_point,
        span: model.motion.span,
        out: Vec::new(),
    };
    cmp.check(
        "transition",
        &column(&base.transition),
        &column(&scaled.transition),
        |i, _| fx[i],
    );
    cmp.check("F", &base.f_jac, &scaled.f_jac, |i, j| fx[i] / fx[j]);
    cmp.check("G", &base.g_jac, &scaled.g_jac, |i, k| fx[i] / fw[k]);
    cmp.check("Q", &base.q, &scaled.q, |i, j| fx[i] * fx[j]);
    for (s, sensor) in model.sensors.iter().enumerate() {
        let (Some(b), Some(sc)) = (base.sensors.get(s), scaled.sensors.get(s)) else {
            continue;
        };
        let fz: Vec<f64> = sensor
            .components
            .iter()
            .map(|c| factor(c.unit.dimension))
            .collect();
        let fa: Vec<f64> = sensor
            .args
            .iter()
            .map(|a| factor(a.unit.dimension))
            .collect();
        let args = sample(fa.len(), 1.3);
        let readings = sample(fz.len(), 0.9);
        cmp.point.args = args.clone();
        cmp.point.readings = readings.clone();
        cmp.scaled_point.args = scale(&args, &fa);
        cmp.scaled_point.readings = scale(&readings, &fz);
        cmp.span = sensor.span;
        let name = &sensor.name;
        cmp.check(
            &format!("{name}.h"),
            &column(&b.h),
            &column(&sc.h),
            |k, _| fz[k],
        );
        cmp.check(&format!("{name}.H"), &b.h_jac, &sc.h_jac, |k, j| {
            fz[k] / fx[j]
        });
        cmp.check(
            &format!("{name}.residual"),
            &column(&b.residual),
            &column(&sc.residual),
            |k, _| fz[k],
        );
    }
    cmp.out
}
