//! Analysis of a spec for its author: local observability at operating points (the
//! rank of the observability matrix of the linearised model, with unobservable
//! directions named in state terms), linearity per function, structural sparsity,
//! and operation counts per predict and per correction (from the IR's analysis).
//!
//! Observability is the rank test of Kalman (1960) on `O = [H; H F; ...; H F^(n-1)]`,
//! with `F` and the stacked `H` of every sensor read at the point evaluated there.
//! Before the rank is taken, each state's column is scaled by its initial standard
//! deviation and each reading row by its noise standard deviation, so the numerical
//! rank does not depend on the units the spec happens to use.

use std::fmt;
use std::path::Path;

use nalgebra::{DMatrix, DVector};
use reckon_runtime::{MotionModel, ReadingModel, UpdateForm};

use crate::back::interp::{InterpretedMotion, InterpretedSensor};
use crate::back::rust::lower_options;
use crate::check;
use crate::diag::Diagnostic;
use crate::ir::{self, FunctionOps, Linearity, Lowered, OpCounts, Sparsity};
use crate::model::Model;
use crate::options::EstimatorOptions;
use crate::sim::{self, Scenario, SimError};

/// Singular values below this fraction of the largest count as zero (a relative
/// numerical-rank tolerance; common practice, no source).
pub const RANK_TOLERANCE: f64 = 1e-9;

/// Components of a direction smaller than this (relative to its largest) are not
/// named.
const NEGLIGIBLE: f64 = 1e-6;

/// Where the model is linearised.
#[derive(Debug, Clone, PartialEq)]
pub struct OperatingPoint {
    /// Shown in the report (`start`, `t = 2 s`).
    pub label: String,
    /// State, SI.
    pub state: Vec<f64>,
    /// Input, SI.
    pub input: Vec<f64>,
    /// Step of the motion model, seconds.
    pub dt: f64,
    /// Per sensor of the model: the argument sets read at this point (an empty list
    /// leaves the sensor out; a sensor without arguments is read with one empty set).
    pub sensor_args: Vec<Vec<Vec<f64>>>,
}

/// A combination of states that no reading sees, as `(state, weight)` pairs in the
/// states' declared units, the largest weight 1 in magnitude.
#[derive(Debug, Clone, PartialEq)]
pub struct Direction {
    /// Named components: state name, weight, declared unit.
    pub components: Vec<(String, f64, String)>,
}

impl fmt::Display for Direction {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self.components.as_slice() {
            [(name, _, _)] => write!(f, "`{name}` alone (no reading depends on it)"),
            components => {
                let terms: Vec<String> = components
                    .iter()
                    .map(|(name, weight, unit)| format!("{weight:+.3} {unit} of `{name}`"))
                    .collect();
                write!(
                    f,
                    "moving together by {} changes no reading",
                    terms.join(", ")
                )
            }
        }
    }
}

/// Observability at one operating point.
#[derive(Debug, Clone, PartialEq)]
pub struct Observability {
    /// The point's label.
    pub label: String,
    /// Numerical rank of the scaled observability matrix.
    pub rank: usize,
    /// Number of states.
    pub states: usize,
    /// Singular values of the scaled observability matrix, largest first.
    pub singular_values: Vec<f64>,
    /// A basis of the unobservable directions.
    pub unobservable: Vec<Direction>,
    /// Sensors read at the point.
    pub sensors: Vec<String>,
}

/// Everything `analyze` finds.
#[derive(Debug, Clone, PartialEq)]
pub struct AnalysisReport {
    /// Model name.
    pub model: String,
    /// How motion was discretised, in one sentence.
    pub discretisation: String,
    /// Per operating point.
    pub observability: Vec<Observability>,
    /// Linearity of the motion.
    pub motion: Linearity,
    /// Linearity per sensor.
    pub sensors: Vec<(String, Linearity)>,
    /// Structural patterns: `F`, `Q`, then each sensor's `H`.
    pub sparsity: Vec<(String, Sparsity)>,
    /// Operation counts of the functions a prediction evaluates.
    pub predict_ops: Vec<FunctionOps>,
    /// Operation counts of the functions each sensor's correction evaluates.
    pub correct_ops: Vec<(String, Vec<FunctionOps>)>,
}

fn column_scales(model: &Model) -> Vec<f64> {
    model
        .initial
        .iter()
        .map(|d| {
            d.map_or(1.0, |d| d.variance().sqrt())
                .max(f64::MIN_POSITIVE)
        })
        .collect()
}

fn observability(model: &Model, lowered: &Lowered, point: &OperatingPoint) -> Observability {
    let n = lowered.state_count;
    let x = DVector::from_column_slice(&point.state);
    let u = DVector::from_column_slice(&point.input);
    let motion = InterpretedMotion::new(lowered);
    let mut f = DMatrix::zeros(n, n);
    motion.transition_jacobian(&x, &u, point.dt, &mut f);
    let mut rows: Vec<DVector<f64>> = Vec::new();
    let mut sensors = Vec::new();
    for (index, arg_sets) in point.sensor_args.iter().enumerate() {
        let Some(sensor) = InterpretedSensor::new(lowered, index, UpdateForm::Joseph) else {
            continue;
        };
        if !arg_sets.is_empty() {
            sensors.push(lowered.sensors[index].name.clone());
        }
        let noise = &lowered.sensors[index].noise_cov;
        let m = lowered.sensors[index].h.len();
        for args in arg_sets {
            let mut h = DMatrix::zeros(m, n);
            sensor.reading_jacobian(&x, args.as_slice(), &mut h);
            for k in 0..m {
                let sigma = noise[k * m + k].sqrt();
                rows.push(h.row(k).transpose() / if sigma > 0.0 { sigma } else { 1.0 });
            }
        }
    }
    let scales = DVector::from_vec(column_scales(model));
    // O = [H; H F; ...; H F^(n-1)], built row block by row block.
    let mut blocks: Vec<DVector<f64>> = Vec::with_capacity(rows.len() * n);
    let mut power = DMatrix::identity(n, n);
    for _ in 0..n {
        blocks.extend(
            rows.iter()
                .map(|r| (&power.transpose() * r).component_mul(&scales)),
        );
        power = &f * power;
    }
    let height = blocks.len().max(n);
    let o = DMatrix::from_fn(height, n, |i, j| blocks.get(i).map_or(0.0, |r| r[j]));
    let svd = o.svd(false, true);
    let largest = svd.singular_values.max();
    let threshold = RANK_TOLERANCE * largest;
    let mut singular: Vec<f64> = svd.singular_values.iter().copied().collect();
    let rank = if largest > 0.0 {
        singular.iter().filter(|&&s| s > threshold).count()
    } else {
        0
    };
    let unobservable = match &svd.v_t {
        Some(v_t) => svd
            .singular_values
            .iter()
            .enumerate()
            .filter(|&(_, &s)| largest <= 0.0 || s <= threshold)
            .map(|(i, _)| direction(model, &v_t.row(i).transpose().component_mul(&scales)))
            .collect(),
        None => Vec::new(),
    };
    singular.sort_by(|a, b| b.total_cmp(a));
    Observability {
        label: point.label.clone(),
        rank,
        states: n,
        singular_values: singular,
        unobservable,
        sensors,
    }
}

/// A null-space vector (SI) as named components in declared units.
fn direction(model: &Model, vector: &DVector<f64>) -> Direction {
    let declared: Vec<f64> = vector
        .iter()
        .zip(&model.states)
        .map(|(v, s)| v / s.unit.to_si)
        .collect();
    let largest = declared.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let sign = declared
        .iter()
        .find(|v| v.abs() > NEGLIGIBLE * largest)
        .map_or(1.0, |v| v.signum());
    Direction {
        components: declared
            .iter()
            .zip(&model.states)
            .filter(|(v, _)| v.abs() > NEGLIGIBLE * largest)
            .map(|(v, s)| (s.name.clone(), sign * v / largest, s.unit.text.clone()))
            .collect(),
    }
}

fn ops_named(lowered: &Lowered, names: &[String]) -> Vec<FunctionOps> {
    names
        .iter()
        .filter_map(|name| lowered.analysis.ops.iter().find(|f| &f.name == name))
        .cloned()
        .collect()
}

/// Analyses `lowered` (of `model`) at `points`.
pub fn analyze(model: &Model, lowered: &Lowered, points: &[OperatingPoint]) -> AnalysisReport {
    let analysis = &lowered.analysis;
    let mut sparsity = vec![
        ("F".to_string(), analysis.f_sparsity.clone()),
        ("Q".to_string(), analysis.q_sparsity.clone()),
    ];
    sparsity.extend(
        lowered
            .sensors
            .iter()
            .zip(&analysis.h_sparsity)
            .map(|(s, p)| (format!("{}.H", s.name), p.clone())),
    );
    AnalysisReport {
        model: model.name.clone(),
        discretisation: lowered.discretisation.reason.clone(),
        observability: points
            .iter()
            .map(|p| observability(model, lowered, p))
            .collect(),
        motion: analysis.motion,
        sensors: lowered
            .sensors
            .iter()
            .map(|s| s.name.clone())
            .zip(analysis.sensors.iter().copied())
            .collect(),
        sparsity,
        predict_ops: ops_named(lowered, &["transition".into(), "F".into(), "Q".into()]),
        correct_ops: lowered
            .sensors
            .iter()
            .map(|s| {
                let names = ["h", "H", "residual"].map(|f| format!("{}.{f}", s.name));
                (s.name.clone(), ops_named(lowered, &names))
            })
            .collect(),
    }
}

/// Analyses a spec at its initial mean with zero inputs and a step of `dt` seconds;
/// sensors that take arguments are left out (their arguments come from a scenario).
pub fn analyze_spec(
    text: &str,
    options: &EstimatorOptions,
    dt: f64,
) -> Result<AnalysisReport, Vec<Diagnostic>> {
    let checked = check::check_source(text);
    let Some(model) = checked.model else {
        return Err(checked.diagnostics);
    };
    let lowered = ir::lower(&model, &lower_options(options))?;
    let point = OperatingPoint {
        label: "the initial mean".into(),
        state: model
            .initial
            .iter()
            .map(|d| d.map_or(0.0, |d| d.mean()))
            .collect(),
        input: vec![0.0; model.inputs.len()],
        dt,
        sensor_args: model
            .sensors
            .iter()
            .map(|s| {
                if s.args.is_empty() {
                    vec![Vec::new()]
                } else {
                    Vec::new()
                }
            })
            .collect(),
    };
    Ok(analyze(&model, &lowered, &[point]))
}

/// Analyses a scenario's spec along the noise-free motion of its scenario (from the
/// initial mean, fixed truth values taken over): at the start, half way and at the
/// end, with the inputs then in force and every argument set of the sensors the
/// scenario reads.
pub fn analyze_scenario(
    project_dir: &Path,
    scenario: &Scenario,
) -> Result<AnalysisReport, SimError> {
    let prepared = sim::prepare(project_dir, scenario)?;
    let (model, lowered, plan) = (&prepared.model, &prepared.lowered, &prepared.plan);
    let motion = InterpretedMotion::new(lowered);
    let mut sensor_args = vec![Vec::new(); model.sensors.len()];
    for schedule in &plan.sensors {
        sensor_args[schedule.sensor] = schedule.args.clone();
    }
    let mut x = DVector::from_iterator(
        model.states.len(),
        model
            .initial
            .iter()
            .zip(&plan.truth)
            .map(|(d, fixed)| fixed.unwrap_or_else(|| d.map_or(0.0, |d| d.mean()))),
    );
    let marks = [0, plan.steps / 2, plan.steps];
    let mut points = Vec::with_capacity(marks.len());
    let mut next = x.clone();
    for step in 0..=plan.steps {
        let time = step as f64 * plan.step;
        let input = plan.inputs_at(time);
        if marks.contains(&step) && points.len() < marks.len() {
            points.push(OperatingPoint {
                // Rounded to the nanosecond so step multiples print as written (5 s, not
                // 5.000000000000001 s).
                label: format!("t = {} s", (time * 1e9).round() / 1e9),
                state: x.iter().copied().collect(),
                input: input.clone(),
                dt: plan.step,
                sensor_args: sensor_args.clone(),
            });
        }
        motion.transition(&x, &DVector::from_vec(input), plan.step, &mut next);
        std::mem::swap(&mut x, &mut next);
    }
    Ok(analyze(model, lowered, &points))
}

fn counts(c: &OpCounts) -> String {
    format!(
        "{} nodes: {} add/sub, {} mul, {} div, {} neg, {} calls",
        c.nodes, c.add_sub, c.mul, c.div, c.neg, c.calls
    )
}

fn linearity(l: &Linearity) -> &'static str {
    match l {
        Linearity::Linear => "linear",
        Linearity::Nonlinear { .. } => "nonlinear",
    }
}

impl fmt::Display for AnalysisReport {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        writeln!(f, "model `{}`; motion: {}", self.model, self.discretisation)?;
        writeln!(
            f,
            "observability (rank of [H; H F; ...; H F^(n-1)], states scaled by their initial sigma):"
        )?;
        for o in &self.observability {
            let verdict = if o.rank == o.states {
                "observable"
            } else {
                "NOT observable"
            };
            writeln!(
                f,
                "  at {}: rank {} of {} - {verdict} (sensors: {})",
                o.label,
                o.rank,
                o.states,
                if o.sensors.is_empty() {
                    "none".to_string()
                } else {
                    o.sensors.join(", ")
                }
            )?;
            for d in &o.unobservable {
                writeln!(f, "    unobservable: {d}")?;
            }
        }
        write!(f, "linearity: motion {}", linearity(&self.motion))?;
        for (name, l) in &self.sensors {
            write!(f, "; {name} {}", linearity(l))?;
        }
        writeln!(f)?;
        writeln!(f, "sparsity (x: may be nonzero, .: structural zero):")?;
        for (name, pattern) in &self.sparsity {
            writeln!(
                f,
                "  {name} ({} of {} entries):",
                pattern.count(),
                pattern.rows * pattern.cols
            )?;
            for line in pattern.to_string().lines() {
                writeln!(f, "    {line}")?;
            }
        }
        writeln!(
            f,
            "operations per predict (each function's shared nodes once):"
        )?;
        for ops in &self.predict_ops {
            writeln!(f, "  {}: {}", ops.name, counts(&ops.counts))?;
        }
        writeln!(f, "operations per correction:")?;
        for (sensor, list) in &self.correct_ops {
            writeln!(f, "  {sensor}:")?;
            for ops in list {
                writeln!(f, "    {}: {}", ops.name, counts(&ops.counts))?;
            }
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Position and speed with `F = [[1, dt], [0, 1]]`; `reading` is the sensor.
    fn shuttle(reading: &str) -> String {
        format!(
            "model shuttle
             state {{ position : m  speed : m/s }}
             motion discrete {{ position = position + speed * dt  speed = speed }}
             process {{ speed ~ normal(0.01 m/s) }}
             {reading}
             initial {{ position ~ normal(0 m, 1 m)  speed ~ normal(0 m/s, 1 m/s) }}"
        )
    }

    /// Kalman's (1960) rank test: with `F = [[1, dt], [0, 1]]`, reading the speed
    /// (`H = [0, 1]`) gives rank 1 and leaves the position unobservable; reading the
    /// position (`H = [1, 0]`) gives rank 2.
    #[test]
    fn speed_alone_leaves_position_unobservable() {
        let speed_only = shuttle("sensor odometer { rate : m/s = speed  noise ~ normal(0.1 m/s) }");
        let report =
            analyze_spec(&speed_only, &EstimatorOptions::default(), 0.5).expect("analysed");
        let o = &report.observability[0];
        assert_eq!((o.rank, o.states), (1, 2));
        assert_eq!(o.unobservable.len(), 1);
        assert_eq!(
            o.unobservable[0].components,
            [("position".to_string(), 1.0, "m".to_string())]
        );
        assert!(
            report
                .to_string()
                .contains("unobservable: `position` alone"),
            "{report}"
        );

        let with_position = shuttle(
            "sensor odometer { rate : m/s = speed  noise ~ normal(0.1 m/s) }
             sensor marker { at : m = position  noise ~ normal(0.5 m) }",
        );
        let report =
            analyze_spec(&with_position, &EstimatorOptions::default(), 0.5).expect("analysed");
        assert_eq!(report.observability[0].rank, 2);
        assert!(report.observability[0].unobservable.is_empty());

        let position_only = shuttle("sensor marker { at : m = position  noise ~ normal(0.5 m) }");
        let report =
            analyze_spec(&position_only, &EstimatorOptions::default(), 0.5).expect("analysed");
        assert_eq!(report.observability[0].rank, 2, "{report}");
    }

    /// Two positions read only through their difference: the common shift is the
    /// unobservable direction, named with both states and equal weights.
    #[test]
    fn a_difference_reading_names_the_common_shift() {
        let spec = "model pair
            state { a : m  b : m }
            motion discrete { a = a  b = b }
            sensor gap { d : m = a - b  noise ~ normal(0.1 m) }
            initial { a ~ normal(0 m, 1 m)  b ~ normal(0 m, 1 m) }";
        let report = analyze_spec(spec, &EstimatorOptions::default(), 1.0).expect("analysed");
        let o = &report.observability[0];
        assert_eq!(o.rank, 1);
        let components = &o.unobservable[0].components;
        assert_eq!(components.len(), 2);
        assert!(
            (components[0].1 - 1.0).abs() < 1e-9 && (components[1].1 - 1.0).abs() < 1e-9,
            "{components:?}"
        );
    }

    #[test]
    fn report_lists_linearity_sparsity_and_operation_counts() {
        let text = std::fs::read_to_string(concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/../specs/pallet_robot.reckon"
        ))
        .expect("demo spec");
        let report = analyze_spec(&text, &EstimatorOptions::default(), 0.01).expect("analysed");
        assert!(matches!(report.motion, Linearity::Nonlinear { .. }));
        let names: Vec<&str> = report.predict_ops.iter().map(|o| o.name.as_str()).collect();
        assert_eq!(names, ["transition", "F", "Q"]);
        assert_eq!(report.correct_ops.len(), 3);
        let shown = report.to_string();
        assert!(shown.contains("floor_tag nonlinear"), "{shown}");
        assert!(shown.contains("wheels.H"), "{shown}");
        // The floor tag takes arguments, so only wheels and gyro are read here; the
        // position is then unobservable.
        let o = &report.observability[0];
        assert_eq!(o.sensors, ["wheels", "gyro"]);
        assert!(o.rank < o.states);
    }

    /// Along a scenario: the survey launch reads ranges and bearings to two
    /// transponders plus compass, log and gyro, so every state is observable at the
    /// start, half way and at the end; reading only the compass leaves the position
    /// (both coordinates) and the speed unseen.
    #[test]
    fn scenarios_give_operating_points_along_the_motion() {
        let toml = r#"
            [[scenario]]
            name = "launch"
            spec = "specs/survey_launch.reckon"
            method = "ukf"
            duration = "10 s"
            step = "100 ms"
            inputs = { accel = "0.1 m/s^2" }

            [[scenario.sensor]]
            name = "transponder"
            rate = "1 Hz"
            args = [{ beacon_east = "200 m", beacon_north = "0 m" }, { beacon_east = "0 m", beacon_north = "200 m" }]

            [[scenario.sensor]]
            name = "compass"
            rate = "5 Hz"
            "#;
        let project = crate::project::parse_project(toml).expect("valid");
        let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("..");
        let report = analyze_scenario(&root, &project.scenarios[0]).expect("analysed");
        let labels: Vec<&str> = report
            .observability
            .iter()
            .map(|o| o.label.as_str())
            .collect();
        assert_eq!(labels, ["t = 0 s", "t = 5 s", "t = 10 s"]);
        assert!(report.observability.iter().all(|o| o.rank == 5), "{report}");

        let mut compass_only = project.scenarios[0].clone();
        compass_only.sensors.remove(0);
        let report = analyze_scenario(&root, &compass_only).expect("analysed");
        let start = &report.observability[0];
        assert!(start.rank < 5, "{report}");
        let unseen: Vec<&str> = start
            .unobservable
            .iter()
            .flat_map(|d| d.components.iter().map(|(name, _, _)| name.as_str()))
            .collect();
        assert!(
            unseen.contains(&"east") && unseen.contains(&"north"),
            "{report}"
        );
        assert!(!unseen.contains(&"heading"), "{report}");
    }
}
