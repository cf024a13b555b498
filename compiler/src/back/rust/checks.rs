//! What a method demands of a model, checked before any code is emitted: `kf` needs
//! linear motion and sensors, every Kalman method needs Gaussian noise, `ukf` needs
//! valid sigma-point weights, and methods without a generator are refused.

use crate::diag::{codes, Diagnostic, Span};
use crate::ir::{Linearity, Lowered};
use crate::model::{Distribution, Model, SensorNoise};
use crate::options::{EstimatorOptions, Method, UpdateForm};

/// The hint every non-Gaussian refusal carries.
const GAUSSIAN_HINT: &str = "use normal(...) with the same variance: a triangle of half-width a has sigma a/sqrt(6); a uniform of half-width a has sigma a/sqrt(3)";

/// Errors that refuse a Kalman method, or the warnings to report with the generated
/// code.
pub(crate) fn check(
    model: &Model,
    lowered: &Lowered,
    options: &EstimatorOptions,
) -> Result<Vec<Diagnostic>, Vec<Diagnostic>> {
    let mut errors = gaussian_noise(model);
    if options.method == Method::Kf {
        errors.extend(linearity(model, lowered));
    }
    if options.method == Method::Ukf {
        errors.extend(unscented_parameters(model, options));
    }
    errors.extend(gate_thresholds(model));
    if !errors.is_empty() {
        return Err(errors);
    }
    let mut warnings = initial_beliefs(model);
    if options.update == UpdateForm::Sequential {
        warnings.extend(
            model
                .sensors
                .iter()
                .filter(|sensor| matches!(sensor.noise, SensorNoise::Covariance(_)))
                .map(|sensor| {
                    Diagnostic::new(
                        codes::SEQUENTIAL_NEEDS_DIAGONAL_NOISE,
                        sensor.span,
                        format!(
                            "sensor `{}` has correlated reading noise; it is corrected with the Joseph form",
                            sensor.name
                        ),
                    )
                }),
        );
    }
    Ok(warnings)
}

fn refuse_distribution(span: Span, what: String, distribution: &Distribution) -> Diagnostic {
    let kind = match distribution {
        Distribution::Triangle { .. } => "triangle",
        Distribution::Uniform { .. } => "uniform",
        Distribution::Normal { .. } => "normal",
    };
    Diagnostic::new(
        codes::KALMAN_NEEDS_GAUSSIAN_NOISE,
        span,
        format!("{what} is a {kind} distribution; Kalman methods need Gaussian noise"),
    )
    .with_label_message("not Gaussian")
    .with_hint(GAUSSIAN_HINT)
}

fn gaussian_noise(model: &Model) -> Vec<Diagnostic> {
    let mut errors = Vec::new();
    for noise in &model.process_noise {
        if let crate::model::ProcessNoiseKind::PerStep(distribution) = &noise.kind {
            if !distribution.is_gaussian() {
                let state = model.states.get(noise.state).map_or("?", |s| &s.name);
                errors.push(refuse_distribution(
                    noise.span,
                    format!("the process noise on `{state}`"),
                    distribution,
                ));
            }
        }
    }
    for input in &model.inputs {
        if let Some(distribution) = input.noise.filter(|d| !d.is_gaussian()) {
            errors.push(refuse_distribution(
                input.span,
                format!("the noise on input `{}`", input.name),
                &distribution,
            ));
        }
    }
    for sensor in &model.sensors {
        if let SensorNoise::PerComponent(list) = &sensor.noise {
            for (component, distribution) in sensor.components.iter().zip(list) {
                if !distribution.is_gaussian() {
                    errors.push(refuse_distribution(
                        component.span,
                        format!("the reading noise of `{}.{}`", sensor.name, component.name),
                        distribution,
                    ));
                }
            }
        }
    }
    errors
}

fn linearity(model: &Model, lowered: &Lowered) -> Vec<Diagnostic> {
    let refuse = |span: Span, what: String| {
        Diagnostic::new(
            codes::KF_NEEDS_LINEAR_MODEL,
            span,
            format!("method `kf` needs a linear model, but {what} is not linear in the states and inputs"),
        )
        .with_label_message("this term is not linear")
        .with_hint("choose method `ekf` or `ukf` for a nonlinear model")
    };
    let mut errors = Vec::new();
    if let Linearity::Nonlinear { equation, span } = lowered.analysis.motion {
        let state = model.states.get(equation).map_or("?", |s| &s.name);
        errors.push(refuse(span, format!("the motion equation of `{state}`")));
    }
    for (sensor, linearity) in model.sensors.iter().zip(&lowered.analysis.sensors) {
        if let Linearity::Nonlinear { equation, span } = *linearity {
            let component = sensor.components.get(equation).map_or("?", |c| &c.name);
            errors.push(refuse(
                span,
                format!("reading `{}.{component}`", sensor.name),
            ));
        }
    }
    errors
}

fn unscented_parameters(model: &Model, options: &EstimatorOptions) -> Vec<Diagnostic> {
    let params = options.unscented;
    let valid = reckon_runtime::UnscentedWeights::new(
        &reckon_runtime::UnscentedParams {
            alpha: params.alpha,
            beta: params.beta,
            kappa: params.kappa,
        },
        model.states.len(),
    )
    .is_ok();
    if valid {
        return Vec::new();
    }
    vec![Diagnostic::new(
        codes::UNSCENTED_PARAMETERS_INVALID,
        Span::default(),
        format!(
            "alpha = {}, beta = {}, kappa = {} give no valid sigma-point weights for {} states",
            params.alpha,
            params.beta,
            params.kappa,
            model.states.len()
        ),
    )
    .with_hint("use alpha in (0, 1] and kappa >= 0")]
}

/// The checker keeps gate probabilities in (0, 1), where every quantile exists; a
/// gate without one would silently reject every reading, so it is refused.
fn gate_thresholds(model: &Model) -> Vec<Diagnostic> {
    model
        .sensors
        .iter()
        .filter_map(|sensor| {
            let gate = sensor.gate?;
            let dof = sensor.components.len() as u32;
            crate::stats::chi2_quantile(gate.probability, dof)
                .is_none()
                .then(|| {
                    Diagnostic::new(
                        codes::INTERNAL,
                        gate.span,
                        format!(
                            "no chi-square quantile for probability {} with {dof} degrees of freedom",
                            gate.probability
                        ),
                    )
                })
        })
        .collect()
}

fn initial_beliefs(model: &Model) -> Vec<Diagnostic> {
    model
        .states
        .iter()
        .zip(&model.initial)
        .filter_map(|(state, initial)| {
            let distribution = initial.as_ref()?;
            (!distribution.is_gaussian()).then(|| {
                Diagnostic::new(
                    codes::INITIAL_NOT_GAUSSIAN,
                    state.span,
                    format!(
                        "the initial belief of `{}` is not Gaussian; the filter starts from the Gaussian with its mean and variance",
                        state.name
                    ),
                )
            })
        })
        .collect()
}
