//! `reckon.toml`: the project file saying which specs to build, how, and where to.
//!
//! Specs describe physics; the project file describes builds. Parsing is pure (text
//! in, `Project` or diagnostics out); resolving relative paths against the file's
//! folder is left to the caller that knows where the file lives.

use std::path::PathBuf;

use serde::Deserialize;

use crate::diag::{codes, Diagnostic, Span};
use crate::options::{EstimatorOptions, Integrator, Method, Scalar, UnscentedParams, UpdateForm};
use crate::sim::Scenario;

/// The parsed project file.
#[derive(Debug, Clone, PartialEq)]
pub struct Project {
    /// Estimators to build, in file order.
    pub estimators: Vec<EstimatorEntry>,
    /// Simulation scenarios (`[[scenario]]` tables), in file order.
    pub scenarios: Vec<Scenario>,
}

/// One `[[estimator]]` table.
#[derive(Debug, Clone, PartialEq)]
pub struct EstimatorEntry {
    /// Spec path, relative to the project file.
    pub spec: PathBuf,
    /// Output path of the generated module, relative to the project file.
    pub output: PathBuf,
    /// Build options.
    pub options: EstimatorOptions,
    /// Span of the table in the project file, for diagnostics about this entry.
    pub span: Span,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawProject {
    #[serde(default)]
    estimator: Vec<toml::Spanned<RawEstimator>>,
    #[serde(default)]
    scenario: Vec<toml::Spanned<Scenario>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawEstimator {
    spec: PathBuf,
    output: PathBuf,
    #[serde(default)]
    method: Method,
    #[serde(default)]
    scalar: Scalar,
    #[serde(default)]
    update: UpdateForm,
    #[serde(default)]
    integrator: Integrator,
    #[serde(default)]
    unscented: UnscentedParams,
    #[serde(default)]
    cells: Option<u32>,
    #[serde(default)]
    particles: Option<u32>,
    #[serde(default)]
    resample_below: Option<f64>,
}

/// Parses the text of a `reckon.toml`.
pub fn parse_project(text: &str) -> Result<Project, Diagnostic> {
    let raw: RawProject = toml::from_str(text).map_err(|error| {
        let span = error
            .span()
            .map(|r| Span::new(r.start, r.end))
            .unwrap_or_default();
        Diagnostic::new(
            codes::PROJECT_FILE_INVALID,
            span,
            error.message().to_string(),
        )
        .with_hint("see docs/project-file.md for the keys of `reckon.toml`")
    })?;
    let estimators = raw
        .estimator
        .into_iter()
        .map(|spanned| {
            let span = Span::new(spanned.span().start, spanned.span().end);
            let raw = spanned.into_inner();
            EstimatorEntry {
                spec: raw.spec,
                output: raw.output,
                options: EstimatorOptions {
                    method: raw.method,
                    scalar: raw.scalar,
                    update: raw.update,
                    integrator: raw.integrator,
                    unscented: raw.unscented,
                    grid_cells: raw.cells,
                    particles: raw.particles,
                    resample_below: raw.resample_below,
                },
                span,
            }
        })
        .collect();
    let scenarios = raw
        .scenario
        .into_iter()
        .map(|spanned| {
            let span = Span::new(spanned.span().start, spanned.span().end);
            Scenario {
                span,
                ..spanned.into_inner()
            }
        })
        .collect();
    Ok(Project {
        estimators,
        scenarios,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reads_estimators_with_defaults() {
        let project = parse_project(
            r#"
            [[estimator]]
            spec = "specs/a.reckon"
            output = "src/a.rs"

            [[estimator]]
            spec = "specs/b.reckon"
            output = "src/b.rs"
            method = "ukf"
            scalar = "f32"
            update = "sequential"
            integrator = "rk4"
            unscented = { alpha = 0.5 }
            "#,
        )
        .expect("valid project");
        assert_eq!(project.estimators.len(), 2);
        assert_eq!(project.estimators[0].options, EstimatorOptions::default());
        let b = &project.estimators[1].options;
        assert_eq!(
            (b.method, b.scalar, b.update, b.integrator),
            (
                Method::Ukf,
                Scalar::F32,
                UpdateForm::Sequential,
                Integrator::Rk4
            )
        );
        assert_eq!((b.unscented.alpha, b.unscented.beta), (0.5, 2.0));
    }

    #[test]
    fn unknown_values_point_at_the_token() {
        let text = "[[estimator]]\nspec = \"a.reckon\"\noutput = \"a.rs\"\nmethod = \"kalman\"\n";
        let error = parse_project(text).expect_err("unknown method");
        assert_eq!(error.code, codes::PROJECT_FILE_INVALID);
        let span = error.primary_span();
        assert_eq!(&text[span.start..span.end], "\"kalman\"");
        assert!(error.message.contains("ekf"), "{}", error.message);
    }

    #[test]
    fn reads_scenarios_next_to_estimators() {
        let text = r#"
            [[estimator]]
            spec = "specs/a.reckon"
            output = "src/a.rs"

            [[scenario]]
            name = "cruise"
            spec = "specs/a.reckon"
            method = "ukf"
            duration = "20 s"
            step = "10 ms"
            runs = 50
            seed = 7
            process_noise_scale = 0.1
            inputs = { accel = [{ from = "0 s", value = "0.2 m/s^2" }, { from = "5 s", value = 0 }], steer = "2 deg" }
            truth = { east = "3 m" }

            [[scenario.sensor]]
            name = "beacon"
            rate = "2 Hz"
            args = [{ bx = "10 m", by = "0 m" }, { bx = "0 m", by = "10 m" }]
            "#;
        let project = parse_project(text).expect("valid project");
        assert_eq!(project.estimators.len(), 1);
        let [scenario] = project.scenarios.as_slice() else {
            panic!("one scenario expected");
        };
        assert_eq!(
            (scenario.name.as_str(), scenario.runs, scenario.seed),
            ("cruise", 50, 7)
        );
        assert_eq!(scenario.options().method, Method::Ukf);
        assert_eq!(scenario.process_noise_scale, 0.1);
        assert_eq!(scenario.sensors[0].name.get_ref(), "beacon");
        assert!(matches!(
            scenario.inputs["accel"].get_ref(),
            crate::sim::InputValue::Schedule(pieces) if pieces.len() == 2
        ));
        let table = &text[scenario.span.start..scenario.span.end];
        assert_eq!(
            table, "[[scenario]]",
            "diagnostics about the table point at its header"
        );
        let step = &text[scenario.step.span()];
        assert_eq!(step, "\"10 ms\"");
    }

    #[test]
    fn unknown_keys_are_refused() {
        let error = parse_project("[[estimator]]\nspec = \"a\"\noutput = \"b\"\nspeed = 3\n")
            .expect_err("unknown key");
        assert!(error.message.contains("speed"), "{}", error.message);
    }
}
