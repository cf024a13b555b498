//! The interpreter adapter: a lowered model's functions as the runtime's
//! `MotionModel` and `ReadingModel` on dynamically sized matrices, evaluated by
//! [`ir::eval`](crate::ir::eval).
//!
//! This is the reference path generated code is tested against, and the simulator's
//! way of running a spec without compiling it: the same runtime algorithms, with the
//! model functions interpreted instead of generated. The process noise is the IR's `Q`
//! (the spec's values); run-time matrices of linear time-invariant motion come from
//! [`LinearSystem::runtime_matrices`](crate::ir::LinearSystem::runtime_matrices), which
//! computes them the way generated code does.

use std::collections::BTreeSet;

use nalgebra::{DMatrix, DVector, Dyn};
use reckon_runtime::{MotionModel, ReadingModel, Real, UpdateForm};

use crate::ir::eval::{Bindings, Evaluator, Float};
use crate::ir::{Lowered, Node, NodeId, RuntimeMatrix, Symbol};

/// Scalars both the interpreter and the runtime work in (`f32`, `f64`).
pub trait Scalar: Real + Float {}

impl<T: Real + Float> Scalar for T {}

/// The motion model of a lowered spec, interpreted.
#[derive(Debug, Clone)]
pub struct InterpretedMotion<'a> {
    lowered: &'a Lowered,
    transition: Evaluator,
    jacobian: Evaluator,
    noise: Evaluator,
    runtime: BTreeSet<RuntimeMatrix>,
}

/// Which run-time matrices the nodes reachable from `roots` read.
fn runtime_matrices(lowered: &Lowered, roots: &[NodeId]) -> BTreeSet<RuntimeMatrix> {
    lowered
        .arena
        .reachable(roots)
        .into_iter()
        .filter_map(|id| match lowered.arena.node(id) {
            Node::Symbol(Symbol::Runtime(matrix, _, _)) => Some(*matrix),
            _ => None,
        })
        .collect()
}

impl<'a> InterpretedMotion<'a> {
    /// The motion model of `lowered`.
    pub fn new(lowered: &'a Lowered) -> InterpretedMotion<'a> {
        let arena = &lowered.arena;
        let mut all: Vec<NodeId> = lowered.transition.clone();
        all.extend_from_slice(lowered.f_jac.entries());
        all.extend_from_slice(lowered.q.entries());
        InterpretedMotion {
            lowered,
            transition: Evaluator::new(arena, &lowered.transition),
            jacobian: Evaluator::new(arena, lowered.f_jac.entries()),
            noise: Evaluator::new(arena, lowered.q.entries()),
            runtime: runtime_matrices(lowered, &all),
        }
    }

    /// Symbol values for `(x, u, dt)`, with the run-time matrices the model reads
    /// (left unbound, so NaN, when the exponential fails: the filter then rejects
    /// the step as non-finite).
    pub fn bindings<T: Scalar>(&self, x: &DVector<T>, u: &DVector<T>, dt: T) -> Bindings<T> {
        let mut bindings =
            Bindings::new(x.iter().copied().collect(), u.iter().copied().collect(), dt);
        if self.runtime.is_empty() {
            return bindings;
        }
        if let Some(Ok(values)) = self
            .lowered
            .discretisation
            .linear_system
            .as_ref()
            .map(|system| system.runtime_matrices(dt))
        {
            bindings.runtime = values;
        }
        bindings
    }
}

fn write_matrix<T: Scalar>(values: &[T], target: &mut DMatrix<T>) {
    let cols = target.ncols();
    for (k, &value) in values.iter().enumerate() {
        target[(k / cols, k % cols)] = value;
    }
}

impl<T: Scalar> MotionModel<T, Dyn, Dyn> for InterpretedMotion<'_> {
    fn input_dim(&self) -> Dyn {
        Dyn(self.lowered.input_count)
    }

    fn transition(&self, x: &DVector<T>, u: &DVector<T>, dt: T, x_next: &mut DVector<T>) {
        let values = self.transition.eval(&self.bindings(x, u, dt));
        x_next.copy_from_slice(&values);
    }

    fn transition_jacobian(
        &self,
        x: &DVector<T>,
        u: &DVector<T>,
        dt: T,
        jacobian: &mut DMatrix<T>,
    ) {
        write_matrix(&self.jacobian.eval(&self.bindings(x, u, dt)), jacobian);
    }

    fn process_noise(&self, x: &DVector<T>, u: &DVector<T>, dt: T, noise: &mut DMatrix<T>) {
        write_matrix(&self.noise.eval(&self.bindings(x, u, dt)), noise);
    }
}

/// One sensor of a lowered spec, interpreted. Its arguments are a slice in SI.
#[derive(Debug, Clone)]
pub struct InterpretedSensor<'a> {
    lowered: &'a Lowered,
    index: usize,
    reading: Evaluator,
    jacobian: Evaluator,
    update: UpdateForm,
}

impl<'a> InterpretedSensor<'a> {
    /// Sensor `index` of `lowered`, corrected with `update` (sequential updates apply
    /// only to diagonal reading noise; the runtime falls back to Joseph otherwise).
    pub fn new(
        lowered: &'a Lowered,
        index: usize,
        update: UpdateForm,
    ) -> Option<InterpretedSensor<'a>> {
        let sensor = lowered.sensors.get(index)?;
        Some(InterpretedSensor {
            lowered,
            index,
            reading: Evaluator::new(&lowered.arena, &sensor.h),
            jacobian: Evaluator::new(&lowered.arena, sensor.h_jac.entries()),
            update,
        })
    }

    fn bindings<T: Scalar>(&self, x: &DVector<T>, args: &[T]) -> Bindings<T> {
        let mut bindings = Bindings::new(x.iter().copied().collect(), Vec::new(), T::NAN);
        bindings.args = args.to_vec();
        bindings
    }

    fn components(&self) -> usize {
        self.lowered.sensors[self.index].h.len()
    }
}

impl<T: Scalar> ReadingModel<T, Dyn, Dyn> for InterpretedSensor<'_> {
    type Args = [T];

    fn reading_dim(&self) -> Dyn {
        Dyn(self.components())
    }

    fn predict_reading(&self, x: &DVector<T>, args: &[T], z_hat: &mut DVector<T>) {
        z_hat.copy_from_slice(&self.reading.eval(&self.bindings(x, args)));
    }

    fn reading_jacobian(&self, x: &DVector<T>, args: &[T], jacobian: &mut DMatrix<T>) {
        write_matrix(&self.jacobian.eval(&self.bindings(x, args)), jacobian);
    }

    fn reading_noise(&self, _x: &DVector<T>, _args: &[T], noise: &mut DMatrix<T>) {
        let values: Vec<T> = self.lowered.sensors[self.index]
            .noise_cov
            .iter()
            .map(|&v| <T as Float>::from_f64(v))
            .collect();
        write_matrix(&values, noise);
    }

    fn is_angle(&self, component: usize) -> bool {
        self.lowered.sensors[self.index]
            .wrap
            .get(component)
            .copied()
            .unwrap_or(false)
    }

    fn update_form(&self) -> UpdateForm {
        self.update
    }
}

/// Every interpreted sensor of `lowered`, in declaration order.
pub fn sensors(lowered: &Lowered, update: UpdateForm) -> Vec<InterpretedSensor<'_>> {
    (0..lowered.sensors.len())
        .filter_map(|index| InterpretedSensor::new(lowered, index, update))
        .collect()
}
