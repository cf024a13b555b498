//! Distributions and noise: argument forms, dimensions, positivity, the white-noise
//! density rule, and full reading covariances. Everything comes out in canonical
//! SI form (a white density as sqrt(PSD) in `[state] s^-1/2`).

use super::expr::seconds;
use super::{Checker, Reported};
use crate::diag::{codes, Diagnostic, Span};
use crate::model::{DeclaredUnit, Distribution};
use crate::syntax::ast::{CovarianceExpr, DistArg, DistExpr};
use crate::units::{Base, Dimension, Rational};

/// The forms accepted, for messages.
const FORMS: &str = "normal(sigma), normal(mean, sigma), triangle(half_width), triangle(mean, half_width), uniform(half_width), uniform(lo .. hi), white(amplitude)";

/// Sampling rate used to make the conversion hints concrete (common practice for
/// inertial sensors; the hint says it is an example).
const EXAMPLE_RATE_HZ: f64 = 100.0;

/// What a noise statement turned into.
pub(super) enum Noise {
    /// Continuous white noise: sqrt(PSD) in SI.
    White(f64),
    /// A distribution in SI.
    Dist(Distribution),
}

/// What the distribution describes, for messages and for the white-noise rule.
pub(super) struct Subject<'a> {
    /// E.g. "state `speed`".
    pub what: &'a str,
    /// Declared unit of the described quantity (its dimension, and its unit for hints).
    pub unit: &'a DeclaredUnit,
    /// Whether `white(...)` is allowed, and if not, why not.
    pub white: WhiteRule,
}

/// Where `white` noise may appear.
#[derive(Clone, Copy, PartialEq, Eq)]
pub(super) enum WhiteRule {
    /// Process noise of continuous motion.
    Allowed,
    /// Process noise of discrete motion.
    DiscreteMotion,
    /// Inputs, readings, initial beliefs.
    NotProcess,
}

/// A dimension as messages show it. `sqrt(Hz)` in a datasheet density carries half
/// a cycle that means nothing to the reader; fractional cycle exponents are left out.
fn shown(dimension: Dimension) -> String {
    let cycles = dimension.exponent(Base::Cycle);
    let without = Dimension::base(Base::Cycle)
        .pow(cycles)
        .and_then(|c| dimension.div(&c));
    match without {
        Some(plain) if !cycles.is_integer() => plain.to_string(),
        _ => dimension.to_string(),
    }
}

/// The unit text of a rate of something in `unit`: `m/s` gives `m/s^2`.
fn per_second(unit: &str) -> String {
    match unit.strip_suffix("/s") {
        Some(base) => format!("{base}/s^2"),
        None => format!("{unit}/s"),
    }
}

/// A value with four significant digits, written so it can be pasted into a spec.
fn fmt_value(v: f64) -> String {
    if v == 0.0 || !v.is_finite() {
        return format!("{v}");
    }
    let magnitude = v.abs().log10().floor() as i32;
    if (-4..6).contains(&magnitude) {
        let decimals = (3 - magnitude).max(0) as usize;
        let text = format!("{v:.decimals$}");
        if text.contains('.') {
            text.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            text
        }
    } else {
        format!("{v:.3e}")
    }
}

impl Subject<'_> {
    fn dimension(&self) -> Dimension {
        self.unit.dimension
    }

    /// `value_si` (of the state's rate) in the declared unit per second.
    fn per_second_in_declared(&self, value_si: f64) -> f64 {
        value_si / self.unit.to_si
    }

    /// How a sigma of the rate, sampled at [`EXAMPLE_RATE_HZ`], reads as a density and
    /// as per-step noise. A white sequence of standard deviation s at f Hz has a
    /// two-sided PSD of s^2 / f, and over one step 1/f it moves the state by s / f
    /// (common practice, no source).
    fn rate_conversions(&self, rate_si: f64) -> String {
        let unit = &self.unit.text;
        let rate_unit = per_second(unit);
        let sigma = self.per_second_in_declared(rate_si);
        format!(
            "if {} {rate_unit} is the sigma of the rate sampled at {EXAMPLE_RATE_HZ} Hz, it is the density `white({} {rate_unit}/sqrt(Hz))`, or per-step noise `normal({} {unit})` at that rate",
            fmt_value(sigma),
            fmt_value(sigma / EXAMPLE_RATE_HZ.sqrt()),
            fmt_value(sigma / EXAMPLE_RATE_HZ)
        )
    }
}

impl Checker {
    /// Lowers `dist` describing `subject`.
    pub(super) fn noise(
        &mut self,
        dist: &DistExpr,
        subject: &Subject<'_>,
    ) -> Result<Noise, Reported> {
        let name = dist.name.name.as_str();
        let known = ["normal", "triangle", "uniform", "white"];
        if !known.contains(&name) {
            let mut d = Diagnostic::new(
                codes::UNKNOWN_DISTRIBUTION,
                dist.name.span,
                format!("unknown distribution `{name}`"),
            )
            .with_note(format!("the forms are {FORMS}"));
            if let Some(hint) = super::names::did_you_mean(&super::names::suggest(name, known)) {
                d = d.with_hint(hint);
            }
            return Err(self.report(d));
        }
        if name == "white" {
            return self.white(dist, subject).map(Noise::White);
        }
        // Lower every argument first so each one's errors are reported.
        let mut values: Vec<Result<ArgValue, Reported>> = Vec::new();
        for arg in &dist.args {
            values.push(self.dist_arg(arg, subject));
        }
        let values: Vec<ArgValue> = values.into_iter().collect::<Result<_, _>>()?;
        let wrong_form = |checker: &mut Checker| {
            checker.report(
                Diagnostic::new(
                    codes::DISTRIBUTION_ARGUMENTS,
                    dist.span,
                    format!("`{name}` does not take these arguments"),
                )
                .with_note(format!("the forms are {FORMS}")),
            )
        };
        use ArgValue::{Range, Value};
        let distribution = match (name, values.as_slice()) {
            ("normal", [Value(sigma, s)]) => Distribution::Normal {
                mean: 0.0,
                sigma: self.positive(*sigma, *s, "a sigma")?,
            },
            ("normal", [Value(mean, _), Value(sigma, s)]) => Distribution::Normal {
                mean: *mean,
                sigma: self.positive(*sigma, *s, "a sigma")?,
            },
            ("triangle", [Value(half, s)]) => Distribution::Triangle {
                mean: 0.0,
                half_width: self.positive(*half, *s, "a half-width")?,
            },
            ("triangle", [Value(mean, _), Value(half, s)]) => Distribution::Triangle {
                mean: *mean,
                half_width: self.positive(*half, *s, "a half-width")?,
            },
            ("uniform", [Value(half, s)]) => {
                let half = self.positive(*half, *s, "a half-width")?;
                Distribution::Uniform {
                    lo: -half,
                    hi: half,
                }
            }
            ("uniform", [Range(lo, hi, s)]) => {
                if lo >= hi {
                    return Err(self.report(
                        Diagnostic::new(
                            codes::NONPOSITIVE_SPREAD,
                            *s,
                            "the lower bound of this range is not below the upper bound",
                        )
                        .with_hint("write `uniform(lo .. hi)` with lo < hi"),
                    ));
                }
                Distribution::Uniform { lo: *lo, hi: *hi }
            }
            _ => return Err(wrong_form(self)),
        };
        Ok(Noise::Dist(distribution))
    }

    fn positive(&mut self, value: f64, span: Span, what: &str) -> Result<f64, Reported> {
        if value > 0.0 {
            Ok(value)
        } else {
            Err(self.report(
                Diagnostic::new(
                    codes::NONPOSITIVE_SPREAD,
                    span,
                    format!("{what} must be greater than zero"),
                )
                .with_label_message(format!("this is {}", fmt_value(value)))
                .with_hint(
                    "give the real uncertainty; a quantity known exactly needs no noise statement",
                ),
            ))
        }
    }

    /// One argument in SI, checked against the subject's dimension.
    fn dist_arg(&mut self, arg: &DistArg, subject: &Subject<'_>) -> Result<ArgValue, Reported> {
        match arg {
            DistArg::Value(expr) => {
                let (value, dimension) = self.constant(expr)?;
                self.fits(value, dimension, expr.span, subject)?;
                Ok(ArgValue::Value(value, expr.span))
            }
            DistArg::Range { lo, hi, span } => {
                let (lo, hi) = (
                    self.dist_arg(&DistArg::Value(lo.clone()), subject),
                    self.dist_arg(&DistArg::Value(hi.clone()), subject),
                );
                match (lo?, hi?) {
                    (ArgValue::Value(lo, _), ArgValue::Value(hi, _)) => {
                        Ok(ArgValue::Range(lo, hi, *span))
                    }
                    _ => Err(Reported),
                }
            }
        }
    }

    /// Checks a distribution parameter's dimension against the subject's.
    fn fits(
        &mut self,
        value: f64,
        dimension: Dimension,
        span: Span,
        subject: &Subject<'_>,
    ) -> Result<(), Reported> {
        if !dimension.compatible(&subject.dimension()) {
            let mut d = Diagnostic::new(
                codes::NOISE_DIMENSION,
                span,
                format!(
                    "this is {}, but noise on {} must be {}",
                    shown(dimension),
                    subject.what,
                    subject.dimension()
                ),
            )
            .with_label_message(shown(dimension));
            let rate = subject.dimension().div(&seconds());
            let density = white_dimension(subject.dimension());
            let process = subject.white != WhiteRule::NotProcess;
            if process && rate.is_some_and(|r| dimension.compatible(&r)) {
                d = d.with_hint(format!(
                    "this figure is per second, so it describes the rate: {}",
                    subject.rate_conversions(value)
                ));
            } else if process && density.is_some_and(|w| dimension.compatible(&w)) {
                let q = subject.per_second_in_declared(value);
                let unit = &subject.unit.text;
                d = d.with_hint(match subject.white {
                                        WhiteRule::Allowed => format!(
                        "this looks like a white-noise density: write `white({} {}/sqrt(Hz))`",
                        fmt_value(q),
                        per_second(unit)
                    ),
                    _ => format!(
                        "this looks like a white-noise density; a density q over a step dt is a per-step sigma of q * sqrt(dt): at {EXAMPLE_RATE_HZ} Hz, `normal({} {unit})`",
                        fmt_value(q / EXAMPLE_RATE_HZ.sqrt())
                    ),
                });
            }
            return Err(self.report(d));
        }
        if dimension.angle_cycle_conflict(&subject.dimension()) {
            return Err(self.report(self.cycle_conflict(span, dimension, subject.dimension())));
        }
        Ok(())
    }

    fn white(&mut self, dist: &DistExpr, subject: &Subject<'_>) -> Result<f64, Reported> {
        match subject.white {
            WhiteRule::Allowed => {}
            WhiteRule::DiscreteMotion => {
                return Err(self.report(
                    Diagnostic::new(codes::WHITE_NOT_ALLOWED, dist.name.span, "`white` noise needs continuous motion")
                        .with_hint("discrete motion takes per-step noise in the state's unit: a density q over a step dt is `normal(q * sqrt(dt))`"),
                ));
            }
            WhiteRule::NotProcess => {
                return Err(self.report(
                    Diagnostic::new(codes::WHITE_NOT_ALLOWED, dist.name.span, format!("`white` noise is not allowed on {}", subject.what))
                        .with_hint("only process noise of continuous motion is white; use `normal(sigma)` here"),
                ));
            }
        }
        let [DistArg::Value(expr)] = dist.args.as_slice() else {
            return Err(self.report(
                Diagnostic::new(codes::DISTRIBUTION_ARGUMENTS, dist.span, "`white` takes one argument: the amplitude (square root of the power spectral density)")
                    .with_note(format!("the forms are {FORMS}")),
            ));
        };
        let (amplitude, dimension) = self.constant(expr)?;
        let Some(expected) = white_dimension(subject.dimension()) else {
            return Err(self.report(Diagnostic::new(
                codes::DIMENSION_OVERFLOW,
                expr.span,
                "the dimension of this density is too large to represent",
            )));
        };
        if !dimension.compatible(&expected) {
            let mut d = Diagnostic::new(
                codes::WHITE_DIMENSION,
                expr.span,
                format!("a white-noise density on {} must be {expected}, but this is {}", subject.what, shown(dimension)),
            )
            .with_label_message(shown(dimension))
            .with_note(format!("the density is the square root of the PSD of the rate: [state]/s/sqrt(Hz) = {expected}"));
            let rate = subject.dimension().div(&seconds());
            if rate.is_some_and(|r| dimension.compatible(&r)) {
                d = d.with_hint(subject.rate_conversions(amplitude));
            } else if dimension.compatible(&subject.dimension()) {
                d = d.with_hint(format!(
                    "a figure in the state's own unit is per-step noise: write `normal({} {})`",
                    fmt_value(amplitude / subject.unit.to_si),
                    subject.unit.text
                ));
            }
            return Err(self.report(d));
        }
        if dimension.angle_cycle_conflict(&expected) {
            return Err(self.report(self.cycle_conflict(expr.span, dimension, expected)));
        }
        self.positive(amplitude, expr.span, "a white-noise amplitude")
    }

    /// A full reading covariance in SI, checked for shape, dimensions, symmetry and
    /// positive definiteness.
    pub(super) fn covariance(
        &mut self,
        cov: &CovarianceExpr,
        components: &[(String, Dimension)],
    ) -> Result<Vec<Vec<f64>>, Reported> {
        let n = components.len();
        if cov.rows.len() != n || cov.rows.iter().any(|r| r.len() != n) {
            let shape: Vec<String> = cov.rows.iter().map(|r| r.len().to_string()).collect();
            return Err(self.report(
                Diagnostic::new(
                    codes::COVARIANCE_SHAPE,
                    cov.span,
                    format!(
                        "this sensor has {n} component{}, so its covariance must be {n} by {n}",
                        if n == 1 { "" } else { "s" }
                    ),
                )
                .with_label_message(format!(
                    "{} row{} with {} entries",
                    cov.rows.len(),
                    if cov.rows.len() == 1 { "" } else { "s" },
                    shape.join(", ")
                ))
                .with_hint("write one row per component, in declaration order, separated by `;`"),
            ));
        }
        let mut matrix = vec![vec![0.0; n]; n];
        let mut failed = false;
        for (i, row) in cov.rows.iter().enumerate() {
            for (j, entry) in row.iter().enumerate() {
                let Ok((value, dimension)) = self.constant(entry) else {
                    failed = true;
                    continue;
                };
                let Some(expected) = components[i].1.mul(&components[j].1) else {
                    failed = true;
                    continue;
                };
                if !dimension.compatible(&expected) {
                    self.report(
                        Diagnostic::new(
                            codes::COVARIANCE_DIMENSION,
                            entry.span,
                            format!("entry ({}, {}) pairs `{}` with `{}`, so it must be {expected}, but this is {dimension}", i + 1, j + 1, components[i].0, components[j].0),
                        )
                        .with_label_message(format!("{dimension}")),
                    );
                    failed = true;
                }
                matrix[i][j] = value;
            }
        }
        if failed {
            return Err(Reported);
        }
        for (i, row) in matrix.iter().enumerate() {
            for (j, &a) in row.iter().enumerate().take(i) {
                let b = matrix[j][i];
                if (a - b).abs() > 1e-9 * a.abs().max(b.abs()) {
                    return Err(self.report(
                        Diagnostic::new(
                            codes::COVARIANCE_ASYMMETRIC,
                            cov.rows[i][j].span,
                            format!(
                                "entry ({}, {}) differs from entry ({}, {})",
                                i + 1,
                                j + 1,
                                j + 1,
                                i + 1
                            ),
                        )
                        .with_secondary(cov.rows[j][i].span, "its mirror")
                        .with_hint("a covariance is symmetric: make the two entries equal"),
                    ));
                }
            }
        }
        if let Some(k) = cholesky_failure(&matrix) {
            return Err(self.report(
                Diagnostic::new(codes::COVARIANCE_NOT_SPD, cov.span, "this covariance is not positive definite")
                    .with_note(format!("the factorisation fails at component {} (`{}`)", k + 1, components[k].0))
                    .with_hint("variances must be positive and each correlation c_ij / sqrt(c_ii c_jj) strictly between -1 and 1"),
            ));
        }
        Ok(matrix)
    }
}

/// An evaluated distribution argument.
enum ArgValue {
    Value(f64, Span),
    Range(f64, f64, Span),
}

/// The dimension of a white-noise amplitude on a state of `state`: `state s^-1/2`.
pub(super) fn white_dimension(state: Dimension) -> Option<Dimension> {
    state.div(&seconds().pow(Rational::HALF)?)
}

/// The first pivot at which a Cholesky factorisation fails, if any.
fn cholesky_failure(matrix: &[Vec<f64>]) -> Option<usize> {
    let n = matrix.len();
    let mut l = vec![vec![0.0; n]; n];
    for j in 0..n {
        let diag = matrix[j][j] - (0..j).map(|k| l[j][k] * l[j][k]).sum::<f64>();
        if diag.is_nan() || diag <= 1e-12 * matrix[j][j].abs() || diag <= 0.0 {
            return Some(j);
        }
        l[j][j] = diag.sqrt();
        for i in j + 1..n {
            l[i][j] = (matrix[i][j] - (0..j).map(|k| l[i][k] * l[j][k]).sum::<f64>()) / l[j][j];
        }
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hint_values_keep_four_significant_digits() {
        assert_eq!(fmt_value(0.03), "0.03");
        assert_eq!(fmt_value(0.123456), "0.1235");
        assert_eq!(fmt_value(1234.5678), "1235");
        assert_eq!(fmt_value(3.2320912e-7), "3.232e-7");
        assert_eq!(fmt_value(0.0), "0");
    }

    #[test]
    fn cholesky_accepts_spd_and_refuses_the_rest() {
        assert_eq!(cholesky_failure(&[vec![4.0, 1.0], vec![1.0, 3.0]]), None);
        assert_eq!(cholesky_failure(&[vec![1.0, 2.0], vec![2.0, 1.0]]), Some(1));
        assert_eq!(cholesky_failure(&[vec![0.0]]), Some(0));
        assert_eq!(cholesky_failure(&[vec![-1.0]]), Some(0));
    }

    #[test]
    fn white_density_on_a_speed_is_m_s_to_the_minus_three_halves() {
        let speed = crate::units::lookup("m")
            .ok()
            .zip(crate::units::lookup("s").ok())
            .and_then(|(m, s)| m.div(&s))
            .map(|u| u.dimension);
        let density = speed.and_then(white_dimension).map(|d| d.to_string());
        assert_eq!(density.as_deref(), Some("m s^-3/2"));
    }
}
