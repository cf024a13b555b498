//! The Rust back end: one specialised, `no_std`, allocation-free estimator module per
//! spec, using only the public API of `reckon-runtime`.
//!
//! [`generate_from_model`] runs the method checks, lowers the model to the IR and emits
//! the module: typed `State`, `Input` and per-sensor reading structs (readings in the
//! units the spec declares), a run-time `Tuning`, and an `Estimator` whose model
//! functions, Jacobians and covariance kernels are straight-line code over the
//! structurally nonzero entries. The filter algorithm itself stays in the runtime.
//!
//! Output is deterministic: everything is emitted in declaration or index order.

mod bayes;
pub(crate) mod checks;
mod kernels;
mod models;
mod module;
mod names;
mod noise;
mod straight;

use crate::back::bayes as back_bayes;
use crate::back::output;
use crate::check;
use crate::diag::{codes, Diagnostic, Span};
use crate::ir::{self, Integrator as LowerIntegrator, LowerOptions, Lowered};
use crate::model::Model;
use crate::options::{EstimatorOptions, Integrator, Method, Scalar};

/// A generated module and what the generator has to say about it.
#[derive(Debug, Clone, PartialEq)]
pub struct Generated {
    /// The module's source: header comment, then pretty-printed items.
    pub code: String,
    /// Warnings about the spec under the chosen method (never errors).
    pub warnings: Vec<Diagnostic>,
    /// Facts about the generated code.
    pub report: GenerationReport,
}

/// Facts about a generated module, for `reckon build` output and the header.
#[derive(Debug, Clone, PartialEq)]
pub struct GenerationReport {
    /// Model name.
    pub model: String,
    /// Filter method.
    pub method: Method,
    /// Scalar type.
    pub scalar: Scalar,
    /// Number of states.
    pub states: usize,
    /// Number of sensors.
    pub sensors: usize,
    /// Lines of the module, header included.
    pub lines: usize,
    /// Entries of the Jacobians `F` and every `H` (zero for the methods without any).
    pub jacobian_entries_total: usize,
    /// Of those, entries that are structurally zero and never computed.
    pub jacobian_entries_skipped_zero: usize,
    /// How continuous motion was discretised, in one sentence.
    pub discretisation: String,
    /// The size of a grid or particle belief (`800 cells`, `1000 particles`).
    pub belief: Option<String>,
}

impl GenerationReport {
    /// One line for terminals and the generated header.
    pub fn summary(&self) -> String {
        let jacobians = if self.jacobian_entries_total == 0 {
            String::new()
        } else {
            format!(
                "; {} of {} Jacobian entries structurally zero",
                self.jacobian_entries_skipped_zero, self.jacobian_entries_total
            )
        };
        let belief = self
            .belief
            .as_ref()
            .map_or(String::new(), |size| format!(", {size}"));
        format!(
            "{} estimator for `{}` in {}: {}{belief}, {}{jacobians}; motion: {}",
            method_title(self.method),
            self.model,
            self.scalar.name(),
            counted(self.states, "state"),
            counted(self.sensors, "sensor"),
            self.discretisation,
        )
    }
}

/// `1 state`, `2 states`.
fn counted(count: usize, noun: &str) -> String {
    let plural = if count == 1 { "" } else { "s" };
    format!("{count} {noun}{plural}")
}

fn method_title(method: Method) -> &'static str {
    match method {
        Method::Kf => "linear Kalman filter",
        Method::Ekf => "extended Kalman filter",
        Method::Ukf => "unscented Kalman filter",
        Method::Grid => "grid filter",
        Method::Particle => "particle filter",
    }
}

/// What the emitters share: the model, its IR and the options.
pub(crate) struct Context<'a> {
    pub model: &'a Model,
    pub lowered: &'a Lowered,
    pub options: &'a EstimatorOptions,
    pub white: &'a noise::WhiteNoise,
    pub scalar: Scalar,
}

impl Context<'_> {
    pub(crate) fn scalar_type(&self) -> proc_macro2::TokenStream {
        names::scalar_type(self.scalar)
    }
}

/// The IR options matching the build options.
pub fn lower_options(options: &EstimatorOptions) -> LowerOptions {
    LowerOptions {
        integrator: match options.integrator {
            Integrator::Auto => LowerIntegrator::Auto,
            Integrator::Euler => LowerIntegrator::Euler,
            Integrator::Rk4 => LowerIntegrator::Rk4,
        },
    }
}

/// The whole pipeline for one spec: check, lower, method checks, emit. `spec_path`
/// is recorded in the header as given; diagnostics point into `spec_text`.
pub fn generate(
    spec_path: &str,
    spec_text: &str,
    options: &EstimatorOptions,
) -> Result<Generated, Vec<Diagnostic>> {
    let checked = check::check_source(spec_text);
    let Some(model) = checked.model else {
        return Err(checked.diagnostics);
    };
    let mut generated = generate_from_model(spec_path, spec_text, &model, options)?;
    // The checker's warnings (an unobserved state...) come first, in source order.
    let mut warnings = checked.diagnostics;
    warnings.append(&mut generated.warnings);
    generated.warnings = warnings;
    Ok(generated)
}

/// Generates the estimator module for a checked model. `spec_path` and `spec_text`
/// go into the header (path as given, text hashed).
pub fn generate_from_model(
    spec_path: &str,
    spec_text: &str,
    model: &Model,
    options: &EstimatorOptions,
) -> Result<Generated, Vec<Diagnostic>> {
    if !options.method.is_kalman() {
        return generate_bayes(spec_path, spec_text, model, options);
    }
    let lower_options = lower_options(options);
    let mut lowered = ir::lower(model, &lower_options)?;
    let warnings = checks::check(model, &lowered, options)?;
    let white = noise::plan_white(model, &mut lowered, &lower_options)?;
    let ctx = Context {
        model,
        lowered: &lowered,
        options,
        white: &white,
        scalar: options.scalar,
    };
    let items = module::emit(&ctx);
    let report = report(model, &lowered, options);
    finish(spec_path, spec_text, items, report, warnings)
}

/// The grid and particle methods: plan, then emit.
fn generate_bayes(
    spec_path: &str,
    spec_text: &str,
    model: &Model,
    options: &EstimatorOptions,
) -> Result<Generated, Vec<Diagnostic>> {
    let plan = back_bayes::plan(model, options)?;
    let ctx = Context {
        model,
        lowered: &plan.lowered,
        options,
        white: &noise::WhiteNoise::None,
        scalar: options.scalar,
    };
    let items = bayes::emit(&ctx, &plan);
    let mut report = report(model, &plan.lowered, options);
    report.belief = Some(match &plan.grid {
        Some(grid) => {
            let counts: Vec<String> = grid.axes.iter().map(|a| a.count.to_string()).collect();
            if counts.len() == 1 {
                format!("{} cells", grid.cells())
            } else {
                format!("{} cells ({})", grid.cells(), counts.join(" x "))
            }
        }
        None => format!("{} particles", plan.particles),
    });
    finish(spec_path, spec_text, items, report, plan.warnings.clone())
}

/// Parses and pretty-prints the emitted items and puts the header on top.
fn finish(
    spec_path: &str,
    spec_text: &str,
    items: proc_macro2::TokenStream,
    mut report: GenerationReport,
    warnings: Vec<Diagnostic>,
) -> Result<Generated, Vec<Diagnostic>> {
    let file = syn::parse2::<syn::File>(items).map_err(|error| {
        vec![Diagnostic::new(
            codes::INTERNAL,
            Span::default(),
            format!("the generated module does not parse: {error}"),
        )]
    })?;
    let body = prettyplease::unparse(&file);
    // The header names the line count of the whole file, so count it with a
    // placeholder summary of the same line structure first.
    let header_lines = output::header(spec_path, spec_text, "").lines().count();
    report.lines = header_lines + body.lines().count();
    let code = output::header(spec_path, spec_text, &report.summary()) + &body;
    Ok(Generated {
        code,
        warnings,
        report,
    })
}

fn report(model: &Model, lowered: &Lowered, options: &EstimatorOptions) -> GenerationReport {
    let (total, zero) = if options.method != Method::Ekf && options.method != Method::Kf {
        (0, 0)
    } else {
        std::iter::once(&lowered.f_jac)
            .chain(lowered.sensors.iter().map(|s| &s.h_jac))
            .fold((0, 0), |(total, zero), matrix| {
                let skipped = matrix
                    .entries()
                    .iter()
                    .filter(|&&e| lowered.arena.is_zero(e))
                    .count();
                (total + matrix.entries().len(), zero + skipped)
            })
    };
    GenerationReport {
        model: model.name.clone(),
        method: options.method,
        scalar: options.scalar,
        states: model.states.len(),
        sensors: model.sensors.len(),
        lines: 0,
        jacobian_entries_total: total,
        jacobian_entries_skipped_zero: zero,
        discretisation: lowered.discretisation.reason.clone(),
        belief: None,
    }
}

#[cfg(test)]
mod tests;
