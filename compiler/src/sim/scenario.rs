//! Scenarios: what a simulation runs, as written in a `[[scenario]]` table of
//! `reckon.toml`, and its resolution against a checked model (names to indices,
//! quantities to SI, rates to reading times).
//!
//! Quantities are strings with units (`"10 ms"`, `"50 Hz"`), read by the spec
//! language's own constant-expression checker, so a scenario accepts exactly the
//! units a spec does. Diagnostics point into the project file's text.

use std::collections::BTreeMap;
use std::path::PathBuf;

use serde::Deserialize;
use toml::Spanned;

use crate::check;
use crate::diag::{codes, Diagnostic, Span};
use crate::model::Model;
use crate::options::{EstimatorOptions, Integrator, Method, Scalar, UnscentedParams, UpdateForm};
use crate::units::Dimension;

/// A quantity as written: a string with a unit, or a plain number (dimensionless).
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(untagged)]
pub enum QuantityText {
    /// `"10 ms"`, `"0.2 m/s^2"`.
    Text(String),
    /// `3` or `0.5`: a pure number.
    Number(f64),
}

impl QuantityText {
    fn source(&self) -> String {
        match self {
            QuantityText::Text(text) => text.clone(),
            QuantityText::Number(number) => format!("{number:?}"),
        }
    }
}

/// One piece of a piecewise-constant input: `value` from time `from` on.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ScheduleEntry {
    /// Start time (`"12 s"`).
    pub from: QuantityText,
    /// Value from then on.
    pub value: QuantityText,
}

/// An input's value over the scenario.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(untagged)]
pub enum InputValue {
    /// The same value throughout.
    Constant(QuantityText),
    /// Piecewise constant; zero before the first entry.
    Schedule(Vec<ScheduleEntry>),
}

/// A sensor read during the scenario.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SensorPlan {
    /// Sensor name in the spec.
    pub name: Spanned<String>,
    /// Reading rate (`"20 Hz"`); the first reading comes one period after the start.
    pub rate: Spanned<QuantityText>,
    /// Per-reading arguments, cycled through reading by reading: one table per
    /// reading, keyed by the sensor's argument names.
    #[serde(default)]
    pub args: Option<Spanned<Vec<BTreeMap<String, QuantityText>>>>,
}

/// One `[[scenario]]` table, as written.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Scenario {
    /// Name, used to select the scenario and to name its output folder.
    pub name: String,
    /// Spec path, relative to the project file.
    pub spec: Spanned<PathBuf>,
    /// Filter method (`kf`, `ekf`, `ukf`, `grid`, `particle`).
    #[serde(default)]
    pub method: Method,
    /// Covariance update form.
    #[serde(default)]
    pub update: UpdateForm,
    /// Integrator for continuous motion.
    #[serde(default)]
    pub integrator: Integrator,
    /// Unscented scaling.
    #[serde(default)]
    pub unscented: UnscentedParams,
    /// Grid: cells per axis for states whose range gives no cell size.
    #[serde(default)]
    pub cells: Option<u32>,
    /// Particle: the number of particles.
    #[serde(default)]
    pub particles: Option<u32>,
    /// Particle: resample below this fraction of the particle count.
    #[serde(default)]
    pub resample_below: Option<f64>,
    /// Simulated time (`"20 s"`).
    pub duration: Spanned<QuantityText>,
    /// Motion step (`"10 ms"`): the filter predicts at least this often.
    pub step: Spanned<QuantityText>,
    /// Number of Monte Carlo runs.
    #[serde(default = "Scenario::default_runs")]
    pub runs: usize,
    /// Seed of the random numbers: the same seed gives the same report.
    #[serde(default)]
    pub seed: u64,
    /// Factor on the filter's process-noise covariance (the truth keeps the spec's
    /// noise): below 1 makes an overconfident filter, above 1 a cautious one.
    #[serde(default = "Scenario::default_noise_scale")]
    pub process_noise_scale: f64,
    /// Input values by input name.
    #[serde(default)]
    pub inputs: BTreeMap<String, Spanned<InputValue>>,
    /// Sensors read, with their rates (`[[scenario.sensor]]`).
    #[serde(default, rename = "sensor")]
    pub sensors: Vec<SensorPlan>,
    /// Fixed initial truth by state name; other states are drawn from the spec's
    /// initial belief.
    #[serde(default)]
    pub truth: BTreeMap<String, Spanned<QuantityText>>,
    /// Span of the table in the project file.
    #[serde(skip)]
    pub span: Span,
}

impl Scenario {
    fn default_runs() -> usize {
        100
    }

    fn default_noise_scale() -> f64 {
        1.0
    }

    /// The estimator options the scenario's filter runs with (always in `f64`).
    pub fn options(&self) -> EstimatorOptions {
        EstimatorOptions {
            method: self.method,
            scalar: Scalar::F64,
            update: self.update,
            integrator: self.integrator,
            unscented: self.unscented,
            grid_cells: self.cells,
            particles: self.particles,
            resample_below: self.resample_below,
        }
    }
}

/// A scenario resolved against a model: everything in SI and by index.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Plan {
    /// Motion step in seconds.
    pub step: f64,
    /// Number of motion steps.
    pub steps: usize,
    /// Runs and seed.
    pub runs: usize,
    pub seed: u64,
    pub noise_scale: f64,
    /// Per model input: `(from, value)` pieces sorted by time.
    pub inputs: Vec<Vec<(f64, f64)>>,
    /// Sensors read.
    pub sensors: Vec<SensorSchedule>,
    /// Fixed initial truth per state, if given.
    pub truth: Vec<Option<f64>>,
}

/// A sensor's readings: every `period` seconds, with arguments cycled.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct SensorSchedule {
    /// Index into the model's sensors.
    pub sensor: usize,
    /// Reading times.
    pub times: Vec<f64>,
    /// Argument sets in SI, cycled; one empty set for a sensor without arguments.
    pub args: Vec<Vec<f64>>,
}

impl Plan {
    /// Input vector in force at time `t`.
    pub fn inputs_at(&self, t: f64) -> Vec<f64> {
        self.inputs
            .iter()
            .map(|pieces| {
                pieces
                    .iter()
                    .take_while(|(from, _)| *from <= t)
                    .last()
                    .map_or(0.0, |&(_, value)| value)
            })
            .collect()
    }

    /// Times of the motion steps after the start.
    pub fn step_times(&self) -> Vec<f64> {
        (1..=self.steps).map(|k| k as f64 * self.step).collect()
    }
}

/// Where a quantity was written.
#[derive(Debug, Clone, Copy)]
enum At {
    /// Exactly this TOML value.
    Value(Span),
    /// Somewhere inside this TOML value.
    Within(Span),
}

impl At {
    fn span(self) -> Span {
        match self {
            At::Value(span) | At::Within(span) => span,
        }
    }
}

fn span_of<T>(spanned: &Spanned<T>) -> Span {
    Span::new(spanned.span().start, spanned.span().end)
}

/// Collects resolution errors while going through a scenario.
struct Resolver<'m> {
    model: &'m Model,
    errors: Vec<Diagnostic>,
}

impl Resolver<'_> {
    /// A quantity of `dimension`. `at` is the span of the TOML value itself, or of
    /// an enclosing value when the TOML parser gives no span for it (entries of
    /// schedules and argument tables).
    fn quantity(
        &mut self,
        text: &QuantityText,
        at: At,
        dimension: &Dimension,
        unit_hint: &str,
        what: &str,
    ) -> Option<f64> {
        let source = text.source();
        let span = at.span();
        // Inside a TOML string the text starts after the opening quote.
        let place = |inner: Span| match (at, text) {
            (At::Value(span), QuantityText::Text(_)) => {
                Span::new(inner.start + span.start + 1, inner.end + span.start + 1)
            }
            (At::Value(span), QuantityText::Number(_)) => {
                Span::new(inner.start + span.start, inner.end + span.start)
            }
            (At::Within(span), _) => span,
        };
        match check::quantity(&source) {
            Ok((value, found)) if found.compatible(dimension) => Some(value),
            Ok((_, found)) => {
                self.errors.push(
                    Diagnostic::new(
                        codes::SCENARIO_QUANTITY,
                        span,
                        format!("{what} must be {dimension}, but `{source}` is {found}"),
                    )
                    .with_label_message(format!("{found}"))
                    .with_hint(format!("write it with a unit such as \"{unit_hint}\"")),
                );
                None
            }
            Err(errors) => {
                for mut error in errors {
                    for label in &mut error.labels {
                        label.span = place(label.span);
                    }
                    error.notes.push(format!("while reading {what}"));
                    self.errors.push(error);
                }
                None
            }
        }
    }

    fn unknown(&mut self, span: Span, kind: &str, name: &str, known: Vec<String>) {
        let list = if known.is_empty() {
            "there are none".to_string()
        } else {
            format!("known: {}", known.join(", "))
        };
        self.errors.push(
            Diagnostic::new(
                codes::SCENARIO_UNKNOWN_NAME,
                span,
                format!("the spec has no {kind} `{name}`"),
            )
            .with_hint(list),
        );
    }

    fn time(&mut self, text: &Spanned<QuantityText>, what: &str) -> Option<f64> {
        let value = self.quantity(
            text.get_ref(),
            At::Value(span_of(text)),
            &Dimension::base(crate::units::Base::Time),
            "10 ms",
            what,
        )?;
        if value > 0.0 && value.is_finite() {
            Some(value)
        } else {
            self.errors.push(Diagnostic::new(
                codes::SCENARIO_QUANTITY,
                span_of(text),
                format!("{what} must be positive"),
            ));
            None
        }
    }
}

/// Resolves a scenario against the model of its spec.
pub(crate) fn resolve(scenario: &Scenario, model: &Model) -> Result<Plan, Vec<Diagnostic>> {
    let mut r = Resolver {
        model,
        errors: Vec::new(),
    };
    let duration = r.time(&scenario.duration, "the duration");
    let step = r.time(&scenario.step, "the motion step");
    if scenario.runs == 0 {
        r.errors.push(
            Diagnostic::new(codes::SCENARIO_QUANTITY, scenario.span, "`runs` is zero")
                .with_hint("a Monte Carlo check needs runs; 100 is usual"),
        );
    }
    if !(scenario.process_noise_scale > 0.0 && scenario.process_noise_scale.is_finite()) {
        r.errors.push(Diagnostic::new(
            codes::SCENARIO_QUANTITY,
            scenario.span,
            "`process_noise_scale` must be a positive number",
        ));
    }
    let inputs = resolve_inputs(&mut r, scenario);
    let truth = resolve_truth(&mut r, scenario);
    let sensors = match duration {
        Some(duration) => resolve_sensors(&mut r, scenario, duration),
        None => Vec::new(),
    };
    let steps = match (duration, step) {
        (Some(duration), Some(step)) if step <= duration => {
            // Tolerate a duration that is a multiple of the step up to round-off.
            Some((duration / step + 1e-9).floor() as usize)
        }
        (Some(_), Some(_)) => {
            r.errors.push(Diagnostic::new(
                codes::SCENARIO_QUANTITY,
                span_of(&scenario.step),
                "the motion step is longer than the duration",
            ));
            None
        }
        _ => None,
    };
    match (r.errors.is_empty(), steps, step) {
        (true, Some(steps), Some(step)) => Ok(Plan {
            step,
            steps,
            runs: scenario.runs,
            seed: scenario.seed,
            noise_scale: scenario.process_noise_scale,
            inputs,
            sensors,
            truth,
        }),
        _ => Err(r.errors),
    }
}

fn resolve_inputs(r: &mut Resolver<'_>, scenario: &Scenario) -> Vec<Vec<(f64, f64)>> {
    let model = r.model;
    for (name, value) in &scenario.inputs {
        if !model.inputs.iter().any(|u| &u.name == name) {
            let known = model.inputs.iter().map(|u| u.name.clone()).collect();
            r.unknown(span_of(value), "input", name, known);
        }
    }
    let time = Dimension::base(crate::units::Base::Time);
    let mut resolved = Vec::with_capacity(model.inputs.len());
    for input in &model.inputs {
        let Some(written) = scenario.inputs.get(&input.name) else {
            r.errors.push(
                Diagnostic::new(
                    codes::SCENARIO_MISSING_VALUE,
                    scenario.span,
                    format!("the scenario gives no value for input `{}`", input.name),
                )
                .with_hint(format!(
                    "add `{} = \"0 {}\"` (or a schedule) under `[scenario.inputs]`",
                    input.name, input.unit.text
                )),
            );
            resolved.push(Vec::new());
            continue;
        };
        let span = span_of(written);
        let what = format!("input `{}`", input.name);
        let pieces = match written.get_ref() {
            InputValue::Constant(text) => r
                .quantity(
                    text,
                    At::Value(span),
                    &input.unit.dimension,
                    &input.unit.text,
                    &what,
                )
                .map(|v| vec![(0.0, v)])
                .unwrap_or_default(),
            InputValue::Schedule(entries) => {
                let mut pieces: Vec<(f64, f64)> = entries
                    .iter()
                    .filter_map(|entry| {
                        let from = r.quantity(
                            &entry.from,
                            At::Within(span),
                            &time,
                            "12 s",
                            "a schedule time",
                        );
                        let value = r.quantity(
                            &entry.value,
                            At::Within(span),
                            &input.unit.dimension,
                            &input.unit.text,
                            &what,
                        );
                        from.zip(value)
                    })
                    .collect();
                pieces.sort_by(|a, b| a.0.total_cmp(&b.0));
                pieces
            }
        };
        resolved.push(pieces);
    }
    resolved
}

fn resolve_truth(r: &mut Resolver<'_>, scenario: &Scenario) -> Vec<Option<f64>> {
    let model = r.model;
    for (name, value) in &scenario.truth {
        if !model.states.iter().any(|s| &s.name == name) {
            let known = model.states.iter().map(|s| s.name.clone()).collect();
            r.unknown(span_of(value), "state", name, known);
        }
    }
    let mut truth = Vec::with_capacity(model.states.len());
    for state in &model.states {
        let value = scenario.truth.get(&state.name).and_then(|written| {
            r.quantity(
                written.get_ref(),
                At::Value(span_of(written)),
                &state.unit.dimension,
                &state.unit.text,
                &format!("the initial truth of `{}`", state.name),
            )
        });
        truth.push(value);
    }
    truth
}

fn resolve_sensors(
    r: &mut Resolver<'_>,
    scenario: &Scenario,
    duration: f64,
) -> Vec<SensorSchedule> {
    let model = r.model;
    let hertz = Dimension::base(crate::units::Base::Time).recip();
    let mut schedules = Vec::new();
    for plan in &scenario.sensors {
        let name = plan.name.get_ref();
        let Some(index) = model.sensors.iter().position(|s| &s.name == name) else {
            let known = model.sensors.iter().map(|s| s.name.clone()).collect();
            r.unknown(span_of(&plan.name), "sensor", name, known);
            continue;
        };
        let sensor = &model.sensors[index];
        let rate = r.quantity(
            plan.rate.get_ref(),
            At::Value(span_of(&plan.rate)),
            &hertz,
            "20 Hz",
            &format!("the rate of `{name}`"),
        );
        let args_span = plan.args.as_ref().map_or(span_of(&plan.name), span_of);
        let tables = plan
            .args
            .as_ref()
            .map_or(&[][..], |args| args.get_ref().as_slice());
        let mut arg_sets = Vec::new();
        for table in tables {
            for key in table.keys() {
                if !sensor.args.iter().any(|a| &a.name == key) {
                    let known = sensor.args.iter().map(|a| a.name.clone()).collect();
                    r.unknown(
                        args_span,
                        &format!("argument of `{name}` named"),
                        key,
                        known,
                    );
                }
            }
            let set: Vec<Option<f64>> = sensor
                .args
                .iter()
                .map(|arg| match table.get(&arg.name) {
                    Some(text) => r.quantity(
                        text,
                        At::Within(args_span),
                        &arg.unit.dimension,
                        &arg.unit.text,
                        &format!("argument `{}` of `{name}`", arg.name),
                    ),
                    None => {
                        r.errors.push(Diagnostic::new(
                            codes::SCENARIO_MISSING_VALUE,
                            args_span,
                            format!("an argument set of `{name}` has no `{}`", arg.name),
                        ));
                        None
                    }
                })
                .collect();
            if let Some(set) = set.into_iter().collect::<Option<Vec<f64>>>() {
                arg_sets.push(set);
            }
        }
        if sensor.args.is_empty() {
            arg_sets = vec![Vec::new()];
        } else if tables.is_empty() {
            let names: Vec<String> = sensor
                .args
                .iter()
                .map(|a| format!("{} = \"... {}\"", a.name, a.unit.text))
                .collect();
            r.errors.push(
                Diagnostic::new(
                    codes::SCENARIO_MISSING_VALUE,
                    span_of(&plan.name),
                    format!("sensor `{name}` takes arguments, but the scenario gives none"),
                )
                .with_hint(format!("add `args = [{{ {} }}]`", names.join(", "))),
            );
        }
        let Some(rate) = rate.filter(|&rate| rate > 0.0 && rate.is_finite()) else {
            if rate.is_some() {
                r.errors.push(Diagnostic::new(
                    codes::SCENARIO_QUANTITY,
                    span_of(&plan.rate),
                    "a reading rate must be positive",
                ));
            }
            continue;
        };
        let period = 1.0 / rate;
        let count = (duration / period + 1e-9).floor() as usize;
        schedules.push(SensorSchedule {
            sensor: index,
            times: (1..=count).map(|j| j as f64 * period).collect(),
            args: arg_sets,
        });
    }
    schedules
}
