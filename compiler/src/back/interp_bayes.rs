//! The grid and particle methods' model functions, interpreted: a [`BayesPlan`]'s
//! noise-free transition, per-axis motion noise and translation as the runtime's grid
//! [`Motion`], its sampled transition as the particle filter's [`SampledMotion`], and
//! each sensor's residuals as a [`Likelihood`], all evaluated by
//! [`ir::eval`](crate::ir::eval). They compute what the generated grid and particle
//! modules compute (`back::rust::bayes`), so the simulator runs the same runtime filters
//! without compiling a spec.
//!
//! # Dimensions
//!
//! The runtime's filters take their dimensions as const parameters, which the simulator
//! learns only at run time. The state dimension `D` stays a parameter of every adapter
//! (the simulator instantiates the dimensions it supports). The input and reading
//! dimensions are 0 in the runtime calls: each adapter is bound to the actual input
//! ([`GridMotion::at`], [`ParticleMotion::at`]) or reading ([`SensorLikelihood::reading`])
//! for one step or correction, and evaluates with those values. The runtime's only use of
//! an input or reading is to refuse non-finite ones; the simulator's inputs are finite
//! scenario values and its readings finite draws, so nothing is lost.

use nalgebra::SVector;
use reckon_runtime::grid::{Likelihood, Motion, Noise, PredictError};
use reckon_runtime::particle::{Pcg32, SampledMotion};

use crate::back::bayes::{BayesPlan, GridPlan, Shape, Source, Spread};
use crate::ir::eval::{Bindings, Evaluator};

/// The runtime noise of `shape` with width `width` (standard deviation or half-width).
pub fn noise_of(shape: Shape, width: f64) -> Noise<f64> {
    match shape {
        Shape::Normal => Noise::Normal { std_dev: width },
        Shape::Triangle => Noise::Triangle { half_width: width },
        Shape::Uniform => Noise::Uniform { half_width: width },
    }
}

/// The runtime noise of `spread`.
pub fn spread_noise(spread: &Spread) -> Noise<f64> {
    noise_of(spread.shape, spread.width)
}

/// The width of `source` over a step of `dt`, times `width_scale` (1 keeps the spec's
/// noise): white noise grows with `sqrt(dt)`.
fn source_width(source: &Source, dt: f64, width_scale: f64) -> f64 {
    let per_step = if source.is_white() { dt.sqrt() } else { 1.0 };
    source.spread.width * width_scale * per_step
}

/// The distribution of `source` over a step of `dt` (see [`source_width`]).
fn source_noise(source: &Source, dt: f64, width_scale: f64) -> Noise<f64> {
    noise_of(source.spread.shape, source_width(source, dt, width_scale))
}

/// The standard deviation of a sum of independent normal noises. A width that is not
/// positive and finite is passed on as it is, so the filter refuses it (as generated
/// code does).
fn combined_std_dev(std_devs: &[f64]) -> f64 {
    let mut variance = 0.0;
    for &std_dev in std_devs {
        if !(std_dev > 0.0 && std_dev.is_finite()) {
            return std_dev;
        }
        variance += std_dev * std_dev;
    }
    variance.sqrt()
}

/// A state vector from evaluated values; a missing value is NaN, which the filters
/// refuse as a non-finite transition.
fn state_vector<const D: usize>(values: &[f64]) -> SVector<f64, D> {
    SVector::from_fn(|i, _| values.get(i).copied().unwrap_or(f64::NAN))
}

/// A grid plan's motion: noise-free transition, one kernel per axis, and the exact
/// translation when the plan has one.
#[derive(Debug, Clone)]
pub struct GridMotion<'a> {
    plan: &'a BayesPlan,
    grid: &'a GridPlan,
    transition: Evaluator,
    /// Every axis's gains, axis after axis, in term order.
    gains: Evaluator,
    translation: Option<Evaluator>,
    width_scale: f64,
}

/// A [`GridMotion`] bound to the input of one step.
#[derive(Debug, Clone, Copy)]
pub struct GridStep<'m, 'a> {
    motion: &'m GridMotion<'a>,
    input: &'m [f64],
}

impl<'a> GridMotion<'a> {
    /// The grid motion of `plan` (`None` for a particle plan), every source's width
    /// multiplied by `width_scale`.
    pub fn new(plan: &'a BayesPlan, width_scale: f64) -> Option<GridMotion<'a>> {
        let grid = plan.grid.as_ref()?;
        let arena = &plan.lowered.arena;
        let gains: Vec<_> = grid
            .noise
            .iter()
            .flat_map(|axis| axis.terms.iter().map(|&(_, gain)| gain))
            .collect();
        Some(GridMotion {
            plan,
            grid,
            transition: Evaluator::new(arena, &plan.lowered.transition),
            gains: Evaluator::new(arena, &gains),
            translation: grid
                .translation
                .as_ref()
                .map(|shift| Evaluator::new(arena, shift)),
            width_scale,
        })
    }

    /// The motion over a step under `input` (SI).
    pub fn at<'m>(&'m self, input: &'m [f64]) -> GridStep<'m, 'a> {
        GridStep {
            motion: self,
            input,
        }
    }

    fn bindings(&self, states: Vec<f64>, input: &[f64], dt: f64) -> Bindings<f64> {
        Bindings::new(states, input.to_vec(), dt)
    }

    /// The kernel of each axis over a step of `dt` under `input`.
    fn kernels(&self, input: &[f64], dt: f64) -> Vec<Noise<f64>> {
        let gains = self.gains.eval(&self.bindings(Vec::new(), input, dt));
        let mut gains = gains.into_iter();
        self.grid
            .noise
            .iter()
            .map(|axis| {
                let widths: Vec<f64> = axis
                    .terms
                    .iter()
                    .map(|&(source, _)| {
                        let gain = gains.next().unwrap_or(f64::NAN);
                        let source = &self.plan.sources[source];
                        gain.abs() * source_width(source, dt, self.width_scale)
                    })
                    .collect();
                let width = match widths.as_slice() {
                    [single] => *single,
                    several => combined_std_dev(several),
                };
                noise_of(axis.shape, width)
            })
            .collect()
    }
}

impl<const D: usize> Motion<f64, D, 0> for GridStep<'_, '_> {
    fn transition(&self, x: &SVector<f64, D>, _u: &SVector<f64, 0>, dt: f64) -> SVector<f64, D> {
        let bindings = self
            .motion
            .bindings(x.iter().copied().collect(), self.input, dt);
        state_vector(&self.motion.transition.eval(&bindings))
    }

    fn noise(&self, _u: &SVector<f64, 0>, dt: f64) -> [Noise<f64>; D] {
        let kernels = self.motion.kernels(self.input, dt);
        // A missing kernel is refused by the filter as a non-finite width.
        core::array::from_fn(|axis| {
            kernels
                .get(axis)
                .copied()
                .unwrap_or(Noise::Normal { std_dev: f64::NAN })
        })
    }

    fn translation(&self, _u: &SVector<f64, 0>, dt: f64) -> Option<SVector<f64, D>> {
        let shift = self.motion.translation.as_ref()?;
        let bindings = self.motion.bindings(Vec::new(), self.input, dt);
        Some(state_vector(&shift.eval(&bindings)))
    }
}

/// A plan's sampled transition: every noise source drawn and pushed through the motion
/// where it enters.
#[derive(Debug, Clone)]
pub struct ParticleMotion<'a> {
    plan: &'a BayesPlan,
    sampled: Evaluator,
    width_scale: f64,
}

/// A [`ParticleMotion`] bound to the input of one step.
#[derive(Debug, Clone, Copy)]
pub struct ParticleStep<'m, 'a> {
    motion: &'m ParticleMotion<'a>,
    input: &'m [f64],
}

impl<'a> ParticleMotion<'a> {
    /// The sampled motion of `plan`, every source's width multiplied by `width_scale`.
    pub fn new(plan: &'a BayesPlan, width_scale: f64) -> ParticleMotion<'a> {
        ParticleMotion {
            plan,
            sampled: Evaluator::new(&plan.lowered.arena, &plan.sampled_transition),
            width_scale,
        }
    }

    /// The motion over a step under `input` (SI).
    pub fn at<'m>(&'m self, input: &'m [f64]) -> ParticleStep<'m, 'a> {
        ParticleStep {
            motion: self,
            input,
        }
    }

    /// The distribution of every source over a step of `dt`, in source order.
    fn sources(&self, dt: f64) -> Vec<Noise<f64>> {
        self.plan
            .sources
            .iter()
            .map(|source| source_noise(source, dt, self.width_scale))
            .collect()
    }
}

impl<const D: usize> SampledMotion<f64, D, 0> for ParticleStep<'_, '_> {
    fn check_noise(&self, _u: &SVector<f64, 0>, dt: f64) -> Result<(), PredictError> {
        for (component, noise) in self.motion.sources(dt).iter().enumerate() {
            noise
                .validate()
                .map_err(|reason| PredictError::InvalidNoise { component, reason })?;
        }
        Ok(())
    }

    fn sample_transition(
        &self,
        x: &SVector<f64, D>,
        _u: &SVector<f64, 0>,
        dt: f64,
        rng: &mut Pcg32,
    ) -> SVector<f64, D> {
        let mut bindings = Bindings::new(x.iter().copied().collect(), self.input.to_vec(), dt);
        // One draw per source, in source order, as generated code draws them.
        bindings.noise = self
            .motion
            .sources(dt)
            .iter()
            .map(|noise| rng.sample(noise))
            .collect();
        state_vector(&self.motion.sampled.eval(&bindings))
    }
}

/// One sensor of a plan: the log likelihood of a reading, the sum of each component's
/// noise log density at its residual, and impossible (`-inf`) outside the plan's
/// [`support`](BayesPlan::support).
#[derive(Debug, Clone)]
pub struct SensorLikelihood<'a> {
    plan: &'a BayesPlan,
    index: usize,
    residual: Evaluator,
}

/// A [`SensorLikelihood`] bound to one reading and its arguments.
#[derive(Debug, Clone, Copy)]
pub struct ReadingLikelihood<'m, 'a> {
    sensor: &'m SensorLikelihood<'a>,
    reading: &'m [f64],
    args: &'m [f64],
}

impl<'a> SensorLikelihood<'a> {
    /// Sensor `index` of `plan`.
    pub fn new(plan: &'a BayesPlan, index: usize) -> Option<SensorLikelihood<'a>> {
        let sensor = plan.lowered.sensors.get(index)?;
        Some(SensorLikelihood {
            plan,
            index,
            residual: Evaluator::new(&plan.lowered.arena, &sensor.residual),
        })
    }

    /// The likelihood of `reading` (SI) taken with arguments `args` (SI).
    pub fn reading<'m>(&'m self, reading: &'m [f64], args: &'m [f64]) -> ReadingLikelihood<'m, 'a> {
        ReadingLikelihood {
            sensor: self,
            reading,
            args,
        }
    }
}

impl<const D: usize> Likelihood<f64, D, 0> for ReadingLikelihood<'_, '_> {
    fn ln_likelihood(&self, x: &SVector<f64, D>, _z: &SVector<f64, 0>) -> f64 {
        let plan = self.sensor.plan;
        let outside = x
            .iter()
            .zip(&plan.support)
            .any(|(&value, range)| range.is_some_and(|(lo, hi)| !(lo <= value && value <= hi)));
        if outside {
            return f64::NEG_INFINITY;
        }
        let mut bindings = Bindings::new(x.iter().copied().collect(), Vec::new(), f64::NAN);
        bindings.args = self.args.to_vec();
        bindings.readings = self.reading.to_vec();
        let residuals = self.sensor.residual.eval(&bindings);
        let spreads = &plan.reading_noise[self.sensor.index];
        if residuals.len() != spreads.len() {
            // A plan always has one spread per component; a mismatch is refused by the
            // filter as an invalid likelihood rather than silently truncated.
            return f64::NAN;
        }
        residuals
            .iter()
            .zip(spreads)
            .map(|(&residual, spread)| spread_noise(spread).ln_pdf(residual))
            .sum()
    }
}

#[cfg(test)]
mod tests;
