//! The simulator: Monte Carlo runs of a scenario, the filter's consistency (averaged
//! NEES and NIS against chi-square bands), error statistics, plots and tables.
//!
//! A scenario (`[[scenario]]` in `reckon.toml`, see [`Scenario`]) names a spec, a
//! method and a schedule of inputs and sensor readings. Each run draws an initial
//! truth from the spec's initial belief, propagates it with the spec's own motion and
//! noise, draws readings from the spec's sensors, and runs the filter on them through
//! the interpreter adapters ([`crate::back::interp`] for the Kalman methods,
//! [`crate::back::interp_bayes`] for the grid and particle methods) and the runtime: the
//! filter code is the one generated estimators use, not a second implementation.
//!
//! Every method is judged by the NEES of its belief's mean and covariance. The NIS
//! needs an innovation covariance, which only the Kalman methods have; for the grid and
//! particle methods the report gives each reading's averaged log evidence instead.
//!
//! The library prints nothing: [`run_scenario`] returns a [`SimReport`], and
//! [`write_outputs`] writes its SVG plots, CSV tables and text summary.

mod belief;
mod consistency;
mod plot;
mod run;
mod scenario;

use std::fmt::Write as _;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::Mutex;

use crate::back::bayes::{self, BayesPlan};
use crate::back::rust::{checks, lower_options};
use crate::check;
use crate::diag::{codes, Diagnostic, Span};
use crate::ir::{self, Lowered};
use crate::model::Model;
use crate::options::Method;

pub use consistency::{Band, Check, Verdict, BAND_PROBABILITY, CONSISTENT_FRACTION};

use consistency::average_over_runs;
pub use run::Trace;
pub use scenario::{InputValue, QuantityText, Scenario, ScheduleEntry, SensorPlan};

pub(crate) use scenario::Plan;

/// Why a scenario could not run.
#[derive(Debug, Clone, PartialEq)]
pub enum SimError {
    /// Problems in the `[[scenario]]` table; spans point into `reckon.toml`.
    Scenario(Vec<Diagnostic>),
    /// Problems in the spec, or a method the spec does not allow; spans point into
    /// `text`, the spec as read from `path`.
    Spec {
        /// The spec's path (project folder joined with the scenario's `spec`).
        path: PathBuf,
        /// The spec's text.
        text: String,
        /// The errors (and any warnings found with them).
        diagnostics: Vec<Diagnostic>,
    },
}

/// A scenario's spec, checked, lowered and accepted for the method, with the
/// scenario resolved against it.
pub(crate) struct Prepared {
    pub path: PathBuf,
    pub text: String,
    pub model: Model,
    pub lowered: Lowered,
    pub plan: Plan,
    /// The grid or particle plan and the capacity it runs in (other methods: `None`).
    pub bayes: Option<(BayesPlan, belief::Layout)>,
    pub warnings: Vec<Diagnostic>,
}

impl Prepared {
    /// The machinery of the scenario's runs over this prepared spec.
    pub(crate) fn machinery(
        &self,
        scenario: &Scenario,
    ) -> Result<run::Machinery<'_>, run::SetupError> {
        run::Machinery::new(
            &self.plan,
            &self.model,
            &self.lowered,
            &scenario.options(),
            self.bayes.as_ref().map(|(plan, layout)| (plan, *layout)),
        )
    }
}

/// Reads, checks and lowers the scenario's spec and resolves the scenario.
pub(crate) fn prepare(project_dir: &Path, scenario: &Scenario) -> Result<Prepared, SimError> {
    let path = project_dir.join(scenario.spec.get_ref());
    let spec_span = Span::new(scenario.spec.span().start, scenario.spec.span().end);
    let bytes = std::fs::read(&path).map_err(|error| {
        SimError::Scenario(vec![Diagnostic::new(
            codes::SCENARIO_SPEC_UNREADABLE,
            spec_span,
            format!("cannot read `{}`: {error}", path.display()),
        )
        .with_hint("the path is relative to the folder of reckon.toml")])
    })?;
    let checked = check::check_bytes(&bytes);
    let text = String::from_utf8_lossy(&bytes).into_owned();
    let spec_error = |diagnostics| SimError::Spec {
        path: path.clone(),
        text: text.clone(),
        diagnostics,
    };
    let Some(model) = checked.model else {
        return Err(spec_error(checked.diagnostics));
    };
    let options = scenario.options();
    let mut warnings = checked.diagnostics;
    let (lowered, bayes) = if options.method.is_kalman() {
        let lowered = ir::lower(&model, &lower_options(&options)).map_err(spec_error)?;
        warnings.extend(checks::check(&model, &lowered, &options).map_err(spec_error)?);
        (lowered, None)
    } else {
        let plan = bayes::plan(&model, &options).map_err(spec_error)?;
        let layout = belief::layout(&plan).map_err(|why| {
            SimError::Scenario(vec![Diagnostic::new(
                codes::SCENARIO_METHOD,
                scenario.span,
                format!(
                    "the simulator cannot run this {} filter: {why}",
                    options.method.name()
                ),
            )
            .with_hint(
                "use fewer cells or particles for the scenario, or a Kalman method",
            )])
        })?;
        warnings.extend(plan.warnings.iter().cloned());
        (plan.lowered.clone(), Some((plan, layout)))
    };
    let plan = scenario::resolve(scenario, &model).map_err(SimError::Scenario)?;
    Ok(Prepared {
        path,
        text,
        model,
        lowered,
        plan,
        bayes,
        warnings,
    })
}

/// A state as the report shows it.
#[derive(Debug, Clone, PartialEq)]
pub struct StateInfo {
    /// Name.
    pub name: String,
    /// Declared unit, in which the report shows values.
    pub unit: String,
    /// `value_si = value_declared * to_si`.
    pub to_si: f64,
}

/// One sensor's consistency over the runs.
#[derive(Debug, Clone, PartialEq)]
pub struct SensorReport {
    /// Sensor name.
    pub name: String,
    /// Reading times, seconds.
    pub times: Vec<f64>,
    /// Averaged NIS against its band (degrees of freedom: the reading's components);
    /// `None` for the grid and particle methods, which have no innovation covariance.
    pub nis: Option<Check>,
    /// Grid and particle methods: the log evidence of each reading under the belief
    /// before it, averaged over runs (empty for the Kalman methods). Readings the
    /// runtime rejected make their average NaN.
    pub ln_evidence: Vec<f64>,
    /// Readings refused by the sensor's gate, over all runs.
    pub gated: usize,
}

/// Everything a scenario's Monte Carlo runs found.
#[derive(Debug, Clone, PartialEq)]
pub struct SimReport {
    /// Scenario name.
    pub scenario: String,
    /// Model name.
    pub model: String,
    /// Spec path and text (for rendering `warnings`).
    pub spec_path: PathBuf,
    /// The spec's text.
    pub spec_text: String,
    /// Non-fatal diagnostics of the spec and the method checks.
    pub warnings: Vec<Diagnostic>,
    /// Filter method.
    pub method: Method,
    /// Number of runs, seed, filter process-noise factor.
    pub runs: usize,
    /// Seed of the random numbers.
    pub seed: u64,
    /// Factor on the filter's process noise.
    pub process_noise_scale: f64,
    /// Motion step, seconds.
    pub step: f64,
    /// States, in order.
    pub states: Vec<StateInfo>,
    /// Times of the motion steps, seconds.
    pub times: Vec<f64>,
    /// Averaged NEES per step against its band.
    pub nees: Check,
    /// Per scheduled sensor.
    pub sensors: Vec<SensorReport>,
    /// RMS error over runs, per step and state, SI.
    pub rms_per_step: Vec<Vec<f64>>,
    /// RMS error over runs and steps, per state, SI.
    pub rms: Vec<f64>,
    /// Truth, estimate and standard deviation of the first run.
    pub sample: Trace,
    /// Predictions and corrections the runtime rejected (other than by a gate).
    pub rejected: usize,
}

/// Runs every Monte Carlo run of `scenario` (its spec path relative to
/// `project_dir`), in parallel over the machine's cores. `progress(done, total)` is
/// called after each run, from the worker threads. The report does not depend on the
/// number of threads: run `r` always uses the same random stream.
pub fn run_scenario(
    project_dir: &Path,
    scenario: &Scenario,
    progress: &(dyn Fn(usize, usize) + Sync),
) -> Result<SimReport, SimError> {
    let prepared = prepare(project_dir, scenario)?;
    let machinery = prepared
        .machinery(scenario)
        .map_err(|error| setup_error(error, &prepared, scenario))?;
    let runs = prepared.plan.runs;
    let records = monte_carlo(&machinery, runs, progress).map_err(|error| {
        SimError::Scenario(vec![Diagnostic::new(
            codes::SCENARIO_METHOD,
            scenario.span,
            format!("the simulator could not start a worker thread: {error}"),
        )
        .with_hint("a grid or particle filter's stack grows with its capacity: use fewer cells or particles")])
    })?;
    Ok(aggregate(scenario, &prepared, records))
}

fn setup_error(error: run::SetupError, prepared: &Prepared, scenario: &Scenario) -> SimError {
    match error {
        run::SetupError::NoInitialBelief(state) => {
            let var = &prepared.model.states[state];
            SimError::Spec {
                path: prepared.path.clone(),
                text: prepared.text.clone(),
                diagnostics: vec![Diagnostic::new(
                    codes::SCENARIO_NO_INITIAL_BELIEF,
                    var.span,
                    format!(
                        "state `{}` has no initial belief to start the filter from",
                        var.name
                    ),
                )
                .with_hint(format!(
                    "add `{} ~ normal(<mean> {unit}, <sigma> {unit})` to the `initial` block",
                    var.name,
                    unit = var.unit.text
                ))],
            }
        }
        run::SetupError::UnscentedParameters => SimError::Scenario(vec![Diagnostic::new(
            codes::UNSCENTED_PARAMETERS_INVALID,
            scenario.span,
            "the unscented parameters give no sigma-point weights for this state dimension",
        )]),
    }
}

/// Runs `runs` runs on worker threads, each with the stack the filter needs (a grid's
/// or particle filter's arrays live on the stack). Fails only when no worker starts.
fn monte_carlo(
    machinery: &run::Machinery<'_>,
    runs: usize,
    progress: &(dyn Fn(usize, usize) + Sync),
) -> std::io::Result<Vec<run::RunRecord>> {
    let workers = std::thread::available_parallelism()
        .map_or(1, usize::from)
        .clamp(1, runs.max(1));
    let next = AtomicUsize::new(0);
    let done = AtomicUsize::new(0);
    let slots: Mutex<Vec<Option<run::RunRecord>>> = Mutex::new(vec![None; runs]);
    let started = std::thread::scope(|scope| {
        let (mut count, mut failure) = (0, None);
        for _ in 0..workers {
            let builder = match machinery.stack_bytes() {
                Some(bytes) => std::thread::Builder::new().stack_size(bytes),
                None => std::thread::Builder::new(),
            };
            let worker = builder.spawn_scoped(scope, || loop {
                let run = next.fetch_add(1, Ordering::Relaxed);
                if run >= runs {
                    break;
                }
                let record = machinery.run(run, run == 0);
                if let Ok(mut slots) = slots.lock() {
                    slots[run] = Some(record);
                }
                progress(done.fetch_add(1, Ordering::Relaxed) + 1, runs);
            });
            match worker {
                Ok(_) => count += 1,
                Err(error) => failure = Some(error),
            }
        }
        // The workers that did start take over every run.
        match failure {
            Some(error) if count == 0 => Err(error),
            _ => Ok(()),
        }
    });
    started?;
    Ok(slots
        .into_inner()
        .unwrap_or_default()
        .into_iter()
        .flatten()
        .collect())
}

fn rms(values: impl Iterator<Item = f64>) -> f64 {
    let (sum, count) = values.fold((0.0, 0usize), |(s, c), v| (s + v * v, c + 1));
    if count == 0 {
        f64::NAN
    } else {
        (sum / count as f64).sqrt()
    }
}

fn aggregate(scenario: &Scenario, prepared: &Prepared, records: Vec<run::RunRecord>) -> SimReport {
    let model = &prepared.model;
    let plan = &prepared.plan;
    let n = model.states.len();
    let nees_runs: Vec<&[f64]> = records.iter().map(|r| r.nees.as_slice()).collect();
    let empty_check = |dof| Check {
        dof,
        mean: Vec::new(),
        band: Band {
            lower: f64::NAN,
            upper: f64::NAN,
        },
        inside: 0.0,
        above: 0,
        below: 0,
        verdict: Verdict::Optimistic,
    };
    let nees = Check::of_runs(&nees_runs, n).unwrap_or_else(|| empty_check(n));
    let sensors =
        plan.sensors
            .iter()
            .enumerate()
            .map(|(k, schedule)| {
                let dof = model.sensors[schedule.sensor].components.len();
                let nis_runs: Vec<&[f64]> = records.iter().map(|r| r.nis[k].as_slice()).collect();
                let evidence_runs: Vec<&[f64]> =
                    records.iter().map(|r| r.evidence[k].as_slice()).collect();
                SensorReport {
                    name: model.sensors[schedule.sensor].name.clone(),
                    times: schedule.times.clone(),
                    nis: prepared.bayes.is_none().then(|| {
                        Check::of_runs(&nis_runs, dof).unwrap_or_else(|| empty_check(dof))
                    }),
                    ln_evidence: if prepared.bayes.is_some() {
                        average_over_runs(&evidence_runs)
                    } else {
                        Vec::new()
                    },
                    gated: records.iter().map(|r| r.gated[k]).sum(),
                }
            })
            .collect();
    let rms_per_step = (0..plan.steps)
        .map(|step| {
            (0..n)
                .map(|state| {
                    rms(records
                        .iter()
                        .filter_map(|r| r.errors.get(step).map(|e| e[state])))
                })
                .collect()
        })
        .collect();
    let rms_total = (0..n)
        .map(|state| {
            rms(records
                .iter()
                .flat_map(|r| r.errors.iter().map(move |e| e[state])))
        })
        .collect();
    SimReport {
        scenario: scenario.name.clone(),
        model: model.name.clone(),
        spec_path: prepared.path.clone(),
        spec_text: prepared.text.clone(),
        warnings: prepared.warnings.clone(),
        method: scenario.method,
        runs: records.len(),
        seed: plan.seed,
        process_noise_scale: plan.noise_scale,
        step: plan.step,
        states: model
            .states
            .iter()
            .map(|s| StateInfo {
                name: s.name.clone(),
                unit: s.unit.text.clone(),
                to_si: s.unit.to_si,
            })
            .collect(),
        times: plan.step_times(),
        nees,
        sensors,
        rms_per_step,
        rms: rms_total,
        sample: records
            .first()
            .and_then(|r| r.trace.clone())
            .unwrap_or_default(),
        rejected: records.iter().map(|r| r.rejected).sum(),
    }
}

/// The average of the finite values (0 when there are none).
fn finite_average(values: &[f64]) -> f64 {
    let finite: Vec<f64> = values.iter().copied().filter(|v| v.is_finite()).collect();
    finite.iter().sum::<f64>() / finite.len().max(1) as f64
}

fn check_line(out: &mut String, what: &str, check: &Check) {
    let average = finite_average(&check.mean);
    let _ = writeln!(
        out,
        "{what} ({} dof): {:.1}% inside [{:.4}, {:.4}] ({} above, {} below), average {:.3} -> {}",
        check.dof,
        100.0 * check.inside,
        check.band.lower,
        check.band.upper,
        check.above,
        check.below,
        average,
        check.verdict
    );
}

impl SimReport {
    /// The NEES and errors late in the scenario, beside the whole run's: a filter that
    /// starts from a many-peaked belief is judged fairly only once the peaks have
    /// resolved, and the early phase stays in the whole-run line.
    fn late_nees_lines(&self, out: &mut String) {
        let steps = self.times.len();
        let (Some(&end), Some(last_rms)) = (self.times.last(), self.rms_per_step.last()) else {
            return;
        };
        let half = steps / 2;
        let _ = writeln!(
            out,
            "NEES over the second half (t >= {} s): {:.1}% inside, average {:.3}",
            self.times[half],
            100.0 * self.nees.inside_from(half),
            finite_average(self.nees.mean.get(half..).unwrap_or_default())
        );
        let errors: Vec<String> = self
            .states
            .iter()
            .zip(last_rms)
            .map(|(s, rms)| format!("{} {:.4} {}", s.name, rms / s.to_si, s.unit))
            .collect();
        let _ = writeln!(
            out,
            "at the end (t = {end} s): averaged NEES {:.3}, RMS error {}",
            self.nees.mean.last().copied().unwrap_or(f64::NAN),
            errors.join(", ")
        );
    }

    /// A few lines for a terminal: setup, NEES and NIS verdicts, RMS errors.
    pub fn summary_text(&self) -> String {
        let mut out = String::new();
        let duration = self.times.last().copied().unwrap_or(0.0);
        let _ = writeln!(
            out,
            "scenario `{}`: model `{}`, method {}, {} runs of {} s ({} steps of {} s), seed {}{}",
            self.scenario,
            self.model,
            self.method.name(),
            self.runs,
            duration,
            self.times.len(),
            self.step,
            self.seed,
            if self.process_noise_scale == 1.0 {
                String::new()
            } else {
                format!(", filter process noise x{}", self.process_noise_scale)
            }
        );
        let _ = writeln!(
            out,
            "{:.0}% acceptance bands of the averages (chi-square, {} runs)",
            100.0 * BAND_PROBABILITY,
            self.runs
        );
        check_line(&mut out, "NEES", &self.nees);
        self.late_nees_lines(&mut out);
        for sensor in &self.sensors {
            match &sensor.nis {
                Some(nis) => check_line(&mut out, &format!("NIS `{}`", sensor.name), nis),
                None => {
                    let _ = writeln!(
                        out,
                        "`{}`: no NIS (the {} method has no innovation covariance); log evidence per reading, averaged: {:.3}",
                        sensor.name,
                        self.method.name(),
                        finite_average(&sensor.ln_evidence)
                    );
                }
            }
            if sensor.gated > 0 {
                let _ = writeln!(out, "  {} readings refused by the gate", sensor.gated);
            }
        }
        let errors: Vec<String> = self
            .states
            .iter()
            .zip(&self.rms)
            .map(|(s, rms)| format!("{} {:.4} {}", s.name, rms / s.to_si, s.unit))
            .collect();
        let _ = writeln!(out, "RMS error: {}", errors.join(", "));
        if self.rejected > 0 {
            let _ = writeln!(
                out,
                "{} predictions or corrections rejected by the runtime",
                self.rejected
            );
        }
        out
    }

    /// Per-step table: time, averaged NEES with its band, RMS error per state (in the
    /// declared units).
    pub fn steps_csv(&self) -> String {
        let mut out = String::from("time_s,nees_mean,nees_lower,nees_upper");
        for s in &self.states {
            let _ = write!(out, ",rms_{}_{}", s.name, csv_unit(&s.unit));
        }
        out.push('\n');
        for (k, t) in self.times.iter().enumerate() {
            let _ = write!(
                out,
                "{t},{},{},{}",
                self.nees.mean.get(k).copied().unwrap_or(f64::NAN),
                self.nees.band.lower,
                self.nees.band.upper
            );
            for (s, rms) in self.states.iter().zip(&self.rms_per_step[k]) {
                let _ = write!(out, ",{}", rms / s.to_si);
            }
            out.push('\n');
        }
        out
    }

    /// Per-reading table: sensor, time, averaged NIS with its band (Kalman methods).
    /// For the grid and particle methods: sensor, time, averaged log evidence.
    pub fn readings_csv(&self) -> String {
        if self.method.is_kalman() {
            let mut out = String::from("sensor,time_s,nis_mean,nis_lower,nis_upper\n");
            for (sensor, nis) in self
                .sensors
                .iter()
                .filter_map(|s| s.nis.as_ref().map(|nis| (s, nis)))
            {
                for (t, mean) in sensor.times.iter().zip(&nis.mean) {
                    let _ = writeln!(
                        out,
                        "{},{t},{mean},{},{}",
                        sensor.name, nis.band.lower, nis.band.upper
                    );
                }
            }
            out
        } else {
            let mut out = String::from("sensor,time_s,ln_evidence_mean\n");
            for sensor in &self.sensors {
                for (t, evidence) in sensor.times.iter().zip(&sensor.ln_evidence) {
                    let _ = writeln!(out, "{},{t},{evidence}", sensor.name);
                }
            }
            out
        }
    }
}

/// A unit made safe for a CSV column name (`m/s^2` -> `m_per_s^2`).
fn csv_unit(unit: &str) -> String {
    unit.replace('/', "_per_")
        .replace([' ', '*', '·', ','], "_")
}

/// Writes the report into `out_dir` (created if needed): `states.svg` (truth,
/// estimate and 3-sigma band of the first run, one panel per state), `nees.svg`,
/// `nis.svg` (when a Kalman filter's sensors were read), `steps.csv`, `readings.csv` and
/// `summary.txt`. Returns the paths written.
pub fn write_outputs(report: &SimReport, out_dir: &Path) -> std::io::Result<Vec<PathBuf>> {
    std::fs::create_dir_all(out_dir)?;
    let mut files = vec![
        (
            "states.svg",
            plot::states_svg(report).map_err(std::io::Error::other)?,
        ),
        (
            "nees.svg",
            plot::nees_svg(report).map_err(std::io::Error::other)?,
        ),
    ];
    if report.sensors.iter().any(|s| s.nis.is_some()) {
        files.push((
            "nis.svg",
            plot::nis_svg(report).map_err(std::io::Error::other)?,
        ));
    }
    files.push(("steps.csv", report.steps_csv()));
    files.push(("readings.csv", report.readings_csv()));
    files.push(("summary.txt", report.summary_text()));
    let mut written = Vec::with_capacity(files.len());
    for (name, contents) in files {
        let path = out_dir.join(name);
        std::fs::write(&path, contents)?;
        written.push(path);
    }
    Ok(written)
}

#[cfg(test)]
mod tests;
