//! One Monte Carlo run: the truth propagated from the spec's motion with noise drawn
//! from the spec's own noise, readings drawn from the spec's sensors, and the filter
//! run on those readings through the interpreter adapters and the runtime (the same
//! filter code generated estimators use). The run loop drives any filter through
//! [`Estimate`]; the Kalman methods' is here, the grid and particle filters' in
//! [`super::belief`].
//!
//! The truth is the same for every method: the noisy transition with every discrete
//! noise source drawn from its own distribution (triangle and uniform too), plus the
//! exactly discretised white noise, and readings with each component drawn from its
//! own noise distribution (a full reading covariance as a correlated normal). A grid or
//! particle filter approximates white noise by an Euler-Maruyama step; the truth does
//! not, so that approximation is part of what a scenario measures.
//!
//! Truth and filter advance over the same sub-steps: every motion step and every
//! reading time is an event, and a reading at `t` is processed after predicting to
//! `t`, so sensors need not be aligned with the motion step.

use nalgebra::{DMatrix, DVector, Dyn};
use rand::{RngExt, SeedableRng};
use rand_distr::StandardNormal;
use rand_pcg::Pcg64;
use reckon_runtime::{
    CorrectError, KalmanFilter, MotionModel, UnscentedParams, UnscentedWeights, UpdateForm,
};

use crate::back::bayes::{BayesPlan, Shape};
use crate::back::interp::{InterpretedMotion, InterpretedSensor};
use crate::ir::eval::{wrap_angle, Evaluator};
use crate::ir::Lowered;
use crate::model::{Distribution, Model, SensorNoise};
use crate::options::{self, Method};

use super::belief::{self, BayesParts, Layout};
use super::scenario::Plan;

/// The filter's motion model: the spec's, with its process-noise covariance scaled
/// (1 keeps the spec's noise; other factors make deliberately mistuned filters).
struct FilterMotion<'a> {
    spec: InterpretedMotion<'a>,
    noise_scale: f64,
}

impl MotionModel<f64, Dyn, Dyn> for FilterMotion<'_> {
    fn input_dim(&self) -> Dyn {
        MotionModel::<f64, Dyn, Dyn>::input_dim(&self.spec)
    }

    fn transition(&self, x: &DVector<f64>, u: &DVector<f64>, dt: f64, x_next: &mut DVector<f64>) {
        self.spec.transition(x, u, dt, x_next);
    }

    fn transition_jacobian(
        &self,
        x: &DVector<f64>,
        u: &DVector<f64>,
        dt: f64,
        jacobian: &mut DMatrix<f64>,
    ) {
        self.spec.transition_jacobian(x, u, dt, jacobian);
    }

    fn process_noise(&self, x: &DVector<f64>, u: &DVector<f64>, dt: f64, noise: &mut DMatrix<f64>) {
        self.spec.process_noise(x, u, dt, noise);
        *noise *= self.noise_scale;
    }
}

/// Which runtime steps the filter takes.
#[derive(Debug, Clone, Copy)]
enum Steps {
    /// Linear or extended Kalman filter.
    Linearised,
    /// Unscented filter with its weights.
    Unscented(UnscentedWeights<f64>),
}

/// What happens at an instant of the scenario.
#[derive(Debug, Clone, Copy, PartialEq)]
enum EventKind {
    /// Reading `index` of sensor schedule `schedule`.
    Reading { schedule: usize, index: usize },
    /// Motion step `step` ends: the state error is recorded (after that instant's
    /// readings).
    Record { step: usize },
}

#[derive(Debug, Clone, Copy)]
struct Event {
    time: f64,
    kind: EventKind,
}

/// How a scheduled sensor's reading noise is drawn.
#[derive(Debug, Clone)]
enum ReadingNoise {
    /// Each component from its own distribution (about its mean, which the spec's
    /// reading function does not include).
    PerComponent(Vec<Distribution>),
    /// A correlated normal: `factor * n` with `n` standard normal.
    Correlated(DMatrix<f64>),
}

/// The filter a scenario runs.
enum Filter<'a> {
    /// A Kalman method, stepped by `steps`.
    Kalman(Steps),
    /// The grid or particle method (boxed: its interpreted model is large).
    Bayes(Box<BayesParts<'a>>),
}

/// Everything a run of one scenario needs, built once and shared by the workers.
pub(crate) struct Machinery<'a> {
    pub(super) plan: &'a Plan,
    lowered: &'a Lowered,
    motion: FilterMotion<'a>,
    sensors: Vec<InterpretedSensor<'a>>,
    /// `transition_noisy` followed by the row-major white-noise covariance.
    truth_step: Evaluator,
    has_white_noise: bool,
    /// Reading noise of each scheduled sensor.
    reading_noise: Vec<ReadingNoise>,
    /// Chi-square threshold of each scheduled sensor's gate.
    gates: Vec<Option<f64>>,
    filter: Filter<'a>,
    initial: Vec<Distribution>,
    events: Vec<Event>,
}

/// What a filter's correction found.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) enum Correction {
    /// A Kalman correction with its normalised innovation squared.
    Innovation { nis: f64 },
    /// A Kalman correction refused by the sensor's gate.
    Gated { nis: f64 },
    /// A grid or particle correction with its log evidence.
    Evidence { ln_evidence: f64 },
    /// Rejected by the runtime for another reason.
    Rejected,
}

/// A filter as the run loop drives it. Inputs, readings and arguments are SI; the
/// schedule indexes the scenario's sensors.
pub(crate) trait Estimate {
    /// Predicts over `dt`; false when the runtime rejected the step.
    fn predict(&mut self, u: &DVector<f64>, dt: f64) -> bool;
    /// Corrects with reading `z` of scheduled sensor `schedule`.
    fn correct(&mut self, schedule: usize, z: &DVector<f64>, args: &[f64]) -> Correction;
    /// The belief's mean.
    fn mean(&self) -> DVector<f64>;
    /// The belief's covariance.
    fn covariance(&self) -> DMatrix<f64>;
}

/// A Kalman filter with the scenario's motion, sensors, gates and steps.
struct KalmanRun<'m, 'a> {
    filter: KalmanFilter<f64, Dyn>,
    machinery: &'m Machinery<'a>,
    steps: &'m Steps,
}

impl Estimate for KalmanRun<'_, '_> {
    fn predict(&mut self, u: &DVector<f64>, dt: f64) -> bool {
        let motion = &self.machinery.motion;
        match self.steps {
            Steps::Linearised => self.filter.predict(motion, u, dt),
            Steps::Unscented(weights) => self.filter.predict_unscented(motion, u, dt, weights),
        }
        .is_ok()
    }

    fn correct(&mut self, schedule: usize, z: &DVector<f64>, args: &[f64]) -> Correction {
        let sensor = &self.machinery.sensors[schedule];
        let gate = self.machinery.gates[schedule];
        let outcome = match self.steps {
            Steps::Linearised => self.filter.correct(sensor, z, args, gate),
            Steps::Unscented(weights) => self
                .filter
                .correct_unscented(sensor, z, args, gate, weights),
        };
        match outcome {
            Ok(innovation) => Correction::Innovation {
                nis: innovation.nis,
            },
            Err(CorrectError::Gated { nis }) => Correction::Gated { nis },
            Err(_) => Correction::Rejected,
        }
    }

    fn mean(&self) -> DVector<f64> {
        self.filter.state().clone()
    }

    fn covariance(&self) -> DMatrix<f64> {
        self.filter.covariance().clone()
    }
}

/// One run's figures.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct RunRecord {
    /// NEES at each motion step.
    pub nees: Vec<f64>,
    /// State error (truth minus estimate, angles wrapped) at each step, per state.
    pub errors: Vec<Vec<f64>>,
    /// NIS of each reading, per sensor schedule (Kalman methods).
    pub nis: Vec<Vec<f64>>,
    /// Log evidence of each reading, per sensor schedule (grid and particle methods;
    /// NaN where the runtime rejected the reading).
    pub evidence: Vec<Vec<f64>>,
    /// Readings refused by the gate, per sensor schedule.
    pub gated: Vec<usize>,
    /// Predictions and corrections the runtime rejected for another reason.
    pub rejected: usize,
    /// Truth, estimate and standard deviation per step (kept for one run only).
    pub trace: Option<Trace>,
}

/// Truth, estimate and standard deviation per step and state, in SI.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Trace {
    /// True state per step.
    pub truth: Vec<Vec<f64>>,
    /// Estimate per step.
    pub estimate: Vec<Vec<f64>>,
    /// Standard deviation per step (square roots of the covariance diagonal).
    pub sigma: Vec<Vec<f64>>,
}

/// Why a scenario's filter cannot be set up.
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum SetupError {
    /// State `index` has no initial belief.
    NoInitialBelief(usize),
    /// The unscented parameters give no weights for this state dimension.
    UnscentedParameters,
}

/// A different, reproducible random stream per run.
pub(super) fn run_seed(seed: u64, run: usize) -> u64 {
    // Golden-ratio increment: consecutive runs land far apart in seed space
    // (common practice, no source).
    seed ^ (run as u64 + 1).wrapping_mul(0x9E37_79B9_7F4A_7C15)
}

fn standard_normal(rng: &mut Pcg64) -> f64 {
    rng.sample(StandardNormal)
}

/// A sample of `distribution`, mean included.
fn sample(distribution: &Distribution, rng: &mut Pcg64) -> f64 {
    match *distribution {
        Distribution::Normal { mean, sigma } => mean + sigma * standard_normal(rng),
        // The sum of two independent uniforms on [0, 1), minus 1, is the symmetric
        // triangle on (-1, 1) (common practice, no source).
        Distribution::Triangle { mean, half_width } => {
            mean + half_width * (rng.random::<f64>() + rng.random::<f64>() - 1.0)
        }
        Distribution::Uniform { lo, hi } => lo + (hi - lo) * rng.random::<f64>(),
    }
}

/// A factor `L` with `L L^T = covariance` for a symmetric positive semi-definite
/// matrix (white-noise covariances are often singular, so no Cholesky).
fn psd_factor(covariance: DMatrix<f64>) -> DMatrix<f64> {
    let eigen = covariance.symmetric_eigen();
    let roots = eigen.eigenvalues.map(|v| v.max(0.0).sqrt());
    eigen.eigenvectors * DMatrix::from_diagonal(&roots)
}

fn correlated_normal(factor: &DMatrix<f64>, rng: &mut Pcg64) -> DVector<f64> {
    let z = DVector::from_fn(factor.ncols(), |_, _| standard_normal(rng));
    factor * z
}

fn wrap_flagged(values: &mut DVector<f64>, flags: &[bool]) {
    for (value, &wrap) in values.iter_mut().zip(flags) {
        if wrap {
            *value = wrap_angle(*value);
        }
    }
}

fn build_events(plan: &Plan) -> Vec<Event> {
    let mut events: Vec<Event> = plan
        .step_times()
        .into_iter()
        .enumerate()
        .map(|(step, time)| Event {
            time,
            kind: EventKind::Record { step },
        })
        .collect();
    for (schedule, sensor) in plan.sensors.iter().enumerate() {
        events.extend(sensor.times.iter().enumerate().map(|(index, &time)| Event {
            time,
            kind: EventKind::Reading { schedule, index },
        }));
    }
    // Readings before the record of the same instant; near-equal times (round-off of
    // rates against steps) count as one instant when the run advances.
    events.sort_by(|a, b| {
        a.time.total_cmp(&b.time).then_with(|| {
            let rank = |k: &EventKind| matches!(k, EventKind::Record { .. }) as u8;
            rank(&a.kind).cmp(&rank(&b.kind))
        })
    });
    events
}

/// The distribution a plan's initial `(mean, spread)` describes.
fn initial_distribution(mean: f64, shape: Shape, width: f64) -> Distribution {
    match shape {
        Shape::Normal => Distribution::Normal { mean, sigma: width },
        Shape::Triangle => Distribution::Triangle {
            mean,
            half_width: width,
        },
        Shape::Uniform => Distribution::Uniform {
            lo: mean - width,
            hi: mean + width,
        },
    }
}

impl<'a> Machinery<'a> {
    /// Prepares the runs of `plan` on `model` (lowered as `lowered`) with `options`;
    /// for the grid and particle methods `bayes` is the method's plan (whose `lowered`
    /// is `lowered`) and `layout` the runtime capacity it runs in.
    pub(crate) fn new(
        plan: &'a Plan,
        model: &Model,
        lowered: &'a Lowered,
        options: &options::EstimatorOptions,
        bayes: Option<(&'a BayesPlan, Layout)>,
    ) -> Result<Machinery<'a>, SetupError> {
        let initial = match bayes {
            // A state without an initial belief but with a range starts uniform over
            // it, as the generated estimator does.
            Some((bayes, _)) => bayes
                .initial
                .iter()
                .enumerate()
                .map(|(i, start)| {
                    start
                        .map(|(mean, spread)| {
                            initial_distribution(mean, spread.shape, spread.width)
                        })
                        .ok_or(SetupError::NoInitialBelief(i))
                })
                .collect::<Result<Vec<_>, _>>()?,
            None => model
                .initial
                .iter()
                .enumerate()
                .map(|(i, d)| d.ok_or(SetupError::NoInitialBelief(i)))
                .collect::<Result<Vec<_>, _>>()?,
        };
        let filter = match (bayes, options.method) {
            (Some((bayes, layout)), _) => {
                Filter::Bayes(Box::new(BayesParts::new(bayes, layout, plan)))
            }
            (None, Method::Ukf) => {
                let params = UnscentedParams {
                    alpha: options.unscented.alpha,
                    beta: options.unscented.beta,
                    kappa: options.unscented.kappa,
                };
                UnscentedWeights::new(&params, lowered.state_count)
                    .map(|weights| Filter::Kalman(Steps::Unscented(weights)))
                    .map_err(|_| SetupError::UnscentedParameters)?
            }
            (None, _) => Filter::Kalman(Steps::Linearised),
        };
        let update = match options.update {
            options::UpdateForm::Joseph => UpdateForm::Joseph,
            options::UpdateForm::Sequential => UpdateForm::SequentialScalar,
        };
        let sensors = plan
            .sensors
            .iter()
            .filter_map(|s| InterpretedSensor::new(lowered, s.sensor, update))
            .collect();
        let mut roots = lowered.transition_noisy.clone();
        roots.extend_from_slice(lowered.q_white.entries());
        let has_white_noise = lowered
            .q_white
            .entries()
            .iter()
            .any(|&e| !lowered.arena.is_zero(e));
        let reading_noise = plan
            .sensors
            .iter()
            .map(|s| match &model.sensors[s.sensor].noise {
                SensorNoise::PerComponent(list) => ReadingNoise::PerComponent(list.clone()),
                SensorNoise::Covariance(_) => {
                    let noise = &lowered.sensors[s.sensor].noise_cov;
                    let m = lowered.sensors[s.sensor].h.len();
                    ReadingNoise::Correlated(psd_factor(DMatrix::from_row_slice(m, m, noise)))
                }
            })
            .collect();
        let gates = plan
            .sensors
            .iter()
            .map(|s| {
                let sensor = &model.sensors[s.sensor];
                sensor.gate.and_then(|gate| {
                    crate::stats::chi2_quantile(gate.probability, sensor.components.len() as u32)
                })
            })
            .collect();
        Ok(Machinery {
            plan,
            lowered,
            motion: FilterMotion {
                spec: InterpretedMotion::new(lowered),
                noise_scale: plan.noise_scale,
            },
            sensors,
            truth_step: Evaluator::new(&lowered.arena, &roots),
            has_white_noise,
            reading_noise,
            gates,
            filter,
            initial,
            events: build_events(plan),
        })
    }

    /// The stack a worker thread needs for one run: `None` for the default, or the
    /// bytes the grid or particle filter's fixed-size arrays take.
    pub(crate) fn stack_bytes(&self) -> Option<usize> {
        match &self.filter {
            Filter::Kalman(_) => None,
            Filter::Bayes(parts) => Some(parts.layout().stack_bytes()),
        }
    }

    /// The true state after a step of `dt` from `x` under input `u`.
    fn truth_step(
        &self,
        x: &DVector<f64>,
        u: &DVector<f64>,
        dt: f64,
        rng: &mut Pcg64,
    ) -> DVector<f64> {
        let n = self.lowered.state_count;
        let mut bindings = self.motion.spec.bindings(x, u, dt);
        bindings.noise = self
            .lowered
            .noise_sources
            .iter()
            .map(|source| sample(&source.distribution, rng) - source.distribution.mean())
            .collect();
        let values = self.truth_step.eval(&bindings);
        let mut next = DVector::from_column_slice(&values[..n]);
        if self.has_white_noise {
            let q = DMatrix::from_row_slice(n, n, &values[n..]);
            next += correlated_normal(&psd_factor(q), rng);
            wrap_flagged(&mut next, &self.lowered.state_wrap);
        }
        next
    }

    /// The filter's starting belief: the spec's initial means and variances.
    fn initial_belief(&self) -> (DVector<f64>, DMatrix<f64>) {
        let mean = DVector::from_iterator(
            self.initial.len(),
            self.initial.iter().map(Distribution::mean),
        );
        let variance = DVector::from_iterator(
            self.initial.len(),
            self.initial.iter().map(Distribution::variance),
        );
        (mean, DMatrix::from_diagonal(&variance))
    }

    /// Runs the scenario once with the random stream of run `run`.
    pub(crate) fn run(&self, run: usize, keep_trace: bool) -> RunRecord {
        let mut rng = Pcg64::seed_from_u64(run_seed(self.plan.seed, run));
        let n = self.lowered.state_count;
        let mut truth = DVector::from_iterator(
            n,
            self.initial
                .iter()
                .zip(&self.plan.truth)
                .map(|(d, fixed)| match fixed {
                    Some(value) => *value,
                    None => sample(d, &mut rng),
                }),
        );
        wrap_flagged(&mut truth, &self.lowered.state_wrap);
        let mut record = RunRecord {
            nees: Vec::with_capacity(self.plan.steps),
            errors: Vec::with_capacity(self.plan.steps),
            nis: self
                .plan
                .sensors
                .iter()
                .map(|s| Vec::with_capacity(s.times.len()))
                .collect(),
            evidence: vec![Vec::new(); self.plan.sensors.len()],
            gated: vec![0; self.plan.sensors.len()],
            rejected: 0,
            trace: keep_trace.then(Trace::default),
        };
        match &self.filter {
            Filter::Kalman(steps) => {
                let (mean, covariance) = self.initial_belief();
                let Ok(mut filter) = KalmanFilter::new(mean, covariance) else {
                    // Initial variances are positive (the checker refuses others), so
                    // this is unreachable for a checked model; record a failed run,
                    // do not panic.
                    record.rejected += 1;
                    return record;
                };
                let angles = DVector::from_column_slice(&self.lowered.state_wrap);
                if filter.set_angle_states(angles).is_err() {
                    record.rejected += 1;
                }
                let mut estimate = KalmanRun {
                    filter,
                    machinery: self,
                    steps,
                };
                self.run_loop(&mut estimate, truth, &mut rng, &mut record);
            }
            Filter::Bayes(parts) => {
                let state = belief::RunState {
                    seed: run_seed(self.plan.seed, run),
                    truth,
                    rng: &mut rng,
                    record: &mut record,
                };
                if !belief::run(self, parts, state) {
                    // The initial belief was refused (it puts no mass on the grid): a
                    // failed run, with every figure NaN.
                    record.rejected += 1;
                    record.nees = vec![f64::NAN; self.plan.steps];
                    record.errors = vec![vec![f64::NAN; n]; self.plan.steps];
                }
            }
        }
        record
    }

    /// Advances truth and `estimate` over the scenario's events.
    pub(super) fn run_loop(
        &self,
        estimate: &mut impl Estimate,
        mut truth: DVector<f64>,
        rng: &mut Pcg64,
        record: &mut RunRecord,
    ) {
        let mut time = 0.0;
        for event in &self.events {
            let dt = event.time - time;
            if dt > 1e-9 * self.plan.step {
                let u = DVector::from_vec(self.plan.inputs_at(time));
                truth = self.truth_step(&truth, &u, dt, rng);
                record.rejected += usize::from(!estimate.predict(&u, dt));
                time = event.time;
            }
            match event.kind {
                EventKind::Reading { schedule, index } => {
                    self.read(estimate, &truth, schedule, index, rng, record);
                }
                EventKind::Record { .. } => self.record_step(estimate, &truth, record),
            }
        }
    }

    /// A draw of scheduled sensor `schedule`'s reading noise.
    fn reading_noise(&self, schedule: usize, rng: &mut Pcg64) -> DVector<f64> {
        match &self.reading_noise[schedule] {
            ReadingNoise::PerComponent(list) => {
                DVector::from_iterator(list.len(), list.iter().map(|d| sample(d, rng) - d.mean()))
            }
            ReadingNoise::Correlated(factor) => correlated_normal(factor, rng),
        }
    }

    fn read(
        &self,
        estimate: &mut impl Estimate,
        truth: &DVector<f64>,
        schedule: usize,
        index: usize,
        rng: &mut Pcg64,
        record: &mut RunRecord,
    ) {
        let plan = &self.plan.sensors[schedule];
        let sensor = &self.sensors[schedule];
        let args = &plan.args[index % plan.args.len().max(1)];
        let lowered_sensor = &self.lowered.sensors[plan.sensor];
        let mut z = DVector::zeros(lowered_sensor.h.len());
        reckon_runtime::ReadingModel::predict_reading(sensor, truth, args.as_slice(), &mut z);
        z += self.reading_noise(schedule, rng);
        wrap_flagged(&mut z, &lowered_sensor.wrap);
        match estimate.correct(schedule, &z, args.as_slice()) {
            Correction::Innovation { nis } => record.nis[schedule].push(nis),
            Correction::Gated { nis } => {
                record.gated[schedule] += 1;
                record.nis[schedule].push(nis);
            }
            Correction::Evidence { ln_evidence } => record.evidence[schedule].push(ln_evidence),
            Correction::Rejected => {
                record.rejected += 1;
                match self.filter {
                    Filter::Kalman(_) => record.nis[schedule].push(f64::NAN),
                    Filter::Bayes(_) => record.evidence[schedule].push(f64::NAN),
                }
            }
        }
    }

    fn record_step(&self, estimate: &impl Estimate, truth: &DVector<f64>, record: &mut RunRecord) {
        let mean = estimate.mean();
        let covariance = estimate.covariance();
        let mut error = truth - &mean;
        wrap_flagged(&mut error, &self.lowered.state_wrap);
        let nees = covariance
            .clone()
            .cholesky()
            .map_or(f64::NAN, |factor| error.dot(&factor.solve(&error)));
        record.nees.push(nees);
        record.errors.push(error.iter().copied().collect());
        if let Some(trace) = &mut record.trace {
            trace.truth.push(truth.iter().copied().collect());
            trace.estimate.push(mean.iter().copied().collect());
            trace.sigma.push(
                covariance
                    .diagonal()
                    .iter()
                    .map(|v| v.max(0.0).sqrt())
                    .collect(),
            );
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A reading noise `uniform(5 cm)` is drawn uniform: never beyond its half-width,
    /// with variance (0.1 m)^2 / 12 (common practice, no source). A normal of that
    /// variance would leave the half-width about 8% of the time.
    #[test]
    fn reading_noise_is_drawn_with_each_components_shape() {
        let dir = std::env::temp_dir().join(format!("reckon-sim-shape-{}", std::process::id()));
        std::fs::create_dir_all(&dir).expect("temp dir");
        let spec = crate::back::bayes::test_specs::MIXED_NOISE;
        std::fs::write(dir.join("cart.reckon"), spec).expect("spec written");
        let project = crate::project::parse_project(
            r#"
            [[scenario]]
            name = "cart"
            spec = "cart.reckon"
            method = "particle"
            duration = "1 s"
            step = "100 ms"
            inputs = { v = "0.2 m/s" }
            [[scenario.sensor]]
            name = "wall"
            rate = "10 Hz"
            "#,
        )
        .expect("project");
        let scenario = &project.scenarios[0];
        let prepared = super::super::prepare(&dir, scenario);
        std::fs::remove_dir_all(&dir).expect("cleanup");
        let prepared = prepared.unwrap_or_else(|e| panic!("{e:?}"));
        let machinery = prepared
            .machinery(scenario)
            .unwrap_or_else(|e| panic!("{e:?}"));
        let mut rng = Pcg64::seed_from_u64(4);
        let count = 40_000;
        let draws: Vec<f64> = (0..count)
            .map(|_| machinery.reading_noise(0, &mut rng)[0])
            .collect();
        assert!(draws.iter().all(|d| d.abs() <= 0.05));
        let variance = draws.iter().map(|d| d * d).sum::<f64>() / count as f64;
        assert!((variance / (0.01 / 12.0) - 1.0).abs() < 0.03, "{variance}");
    }

    #[test]
    fn runs_get_different_seeds() {
        let seeds: std::collections::BTreeSet<u64> = (0..1000).map(|r| run_seed(7, r)).collect();
        assert_eq!(seeds.len(), 1000);
        assert_ne!(run_seed(1, 0), run_seed(2, 0));
    }

    /// A factor of a singular covariance still reproduces it.
    #[test]
    fn factor_of_a_singular_covariance() {
        let q = DMatrix::from_row_slice(2, 2, &[4.0, 2.0, 2.0, 1.0]);
        let l = psd_factor(q.clone());
        assert!((&l * l.transpose() - q).norm() < 1e-12);
    }

    /// Sample moments of the three distributions: variances sigma^2, a^2/6 and
    /// (hi-lo)^2/12 (common practice, no source); 200 000 samples give about 1%.
    #[test]
    fn samples_have_the_distribution_moments() {
        let mut rng = Pcg64::seed_from_u64(3);
        let cases = [
            Distribution::Normal {
                mean: 1.0,
                sigma: 2.0,
            },
            Distribution::Triangle {
                mean: -1.0,
                half_width: 3.0,
            },
            Distribution::Uniform { lo: 2.0, hi: 5.0 },
        ];
        for d in cases {
            let count = 200_000;
            let xs: Vec<f64> = (0..count).map(|_| sample(&d, &mut rng)).collect();
            let mean = xs.iter().sum::<f64>() / count as f64;
            let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / count as f64;
            assert!(
                (mean - d.mean()).abs() < 0.02 * d.variance().sqrt().max(1.0),
                "{d:?}: {mean}"
            );
            assert!((var / d.variance() - 1.0).abs() < 0.02, "{d:?}: {var}");
        }
    }
}
