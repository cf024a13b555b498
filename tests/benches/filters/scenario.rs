//! Reading scenarios the filters run: a truth trajectory propagated with the spec's
//! own transition, and readings from the spec's reading functions with deterministic
//! pseudo-random noise of the spec's standard deviations, in the units each sensor
//! declares. Built before any measurement, so running one costs only the filter.

use super::Filter;

/// A reading of one sensor, in its declared units, with the sensor's arguments.
#[derive(Clone, Debug)]
pub struct Reading {
    /// Sensor number, in spec order.
    pub sensor: usize,
    /// The reading, declared units.
    pub values: Vec<f64>,
    /// The sensor's arguments, SI.
    pub args: Vec<f64>,
}

/// One step: a prediction, then a reading of every sensor.
#[derive(Clone, Debug)]
pub struct Step {
    /// Step length, seconds.
    pub dt: f64,
    /// Input over the step, declared units.
    pub input: Vec<f64>,
    /// One reading per sensor, in sensor order.
    pub readings: Vec<Reading>,
}

/// Predicts and applies every reading of `step`; returns how many readings the filter
/// accepted (the prediction counts as one when accepted).
pub fn run_cycle<F: Filter>(filter: &mut F, step: &Step) -> usize {
    let mut accepted = usize::from(filter.predict(step.dt, &step.input));
    for reading in &step.readings {
        accepted += usize::from(filter.correct(reading.sensor, &reading.values, &reading.args));
    }
    accepted
}

/// A filter after running the first `warm_up` steps of `steps`, so measurements start
/// from a converged, realistic covariance rather than the initial one.
pub fn warmed<F: Filter>(mut filter: F, steps: &[Step], warm_up: usize) -> F {
    for step in &steps[..warm_up] {
        run_cycle(&mut filter, step);
    }
    filter
}

/// Deterministic noise: a 64-bit xorshift generator, with approximately normal deviates
/// from the sum of twelve uniforms (common practice, no source). Statistical quality is
/// irrelevant here; reproducibility is the point.
pub struct Jitter(u64);

impl Jitter {
    /// A generator from a non-zero seed.
    pub fn new(seed: u64) -> Jitter {
        Jitter(seed.max(1))
    }

    fn uniform(&mut self) -> f64 {
        self.0 ^= self.0 << 13;
        self.0 ^= self.0 >> 7;
        self.0 ^= self.0 << 17;
        (self.0 >> 11) as f64 / (1u64 << 53) as f64
    }

    /// A deviate of mean zero and standard deviation `sigma`.
    pub fn normal(&mut self, sigma: f64) -> f64 {
        let sum: f64 = (0..12).map(|_| self.uniform()).sum();
        (sum - 6.0) * sigma
    }
}
