//! Expressions: names resolved, every node typed with its dimension, numbers turned
//! into SI, and constant sub-expressions folded to a single number.
//!
//! Values are in SI from the leaves up (a literal `1 ft` becomes `0.3048`), so no
//! conversion is ever needed when two operands of one dimension but different
//! units meet: `atan2(y_m, x_ft)` is already `atan2(y, x)` in metres.

use super::names::{did_you_mean, suggest};
use super::{Checker, Global, Reported};
use crate::diag::{codes, Diagnostic, Span};
use crate::model::{BinOp, Expr, ExprKind, Func};
use crate::syntax::ast;
use crate::units::{Base, Dimension, Rational, Scale, Unit};

/// Where an expression appears, which decides the names it may use.
#[derive(Clone, Copy)]
pub(super) enum Place<'a> {
    /// A fixed value: constants, range bounds, distribution parameters, gates.
    Constant,
    /// A continuous motion equation (rates).
    ContinuousMotion,
    /// A discrete motion equation (`dt` available).
    DiscreteMotion,
    /// A sensor component, with that sensor's arguments.
    Sensor(&'a [SensorArgInfo]),
}

/// A sensor argument as expressions see it.
pub(super) struct SensorArgInfo {
    pub name: String,
    /// `None` when its unit was refused (already reported).
    pub dimension: Option<Dimension>,
}

pub(super) fn seconds() -> Dimension {
    Dimension::base(Base::Time)
}

fn radians() -> Dimension {
    Dimension::base(Base::Angle)
}

fn number(value: f64, dimension: Dimension, span: Span) -> Expr {
    Expr {
        kind: ExprKind::Number(value),
        dimension,
        span,
    }
}

/// A literal in units of `unit`, converted to SI with a single rounding where the
/// factor allows it: a power of ten shifts the decimal exponent of the text (so
/// `99.9 %` is the double nearest 0.999 and `1.5 mm` the one nearest 0.0015), and a
/// factor 1/n for a whole n divides by n. Other factors multiply.
fn in_si(quantity: &ast::Quantity, unit: &Unit) -> f64 {
    let factor = unit.to_si();
    let power = factor.log10().round();
    if power.abs() < 400.0 && Scale::power_of_ten(power as i64) == Some(unit.scale) {
        let text = quantity.text.replace('_', "");
        let (mantissa, exponent) = match text.find(['e', 'E']) {
            Some(at) => (&text[..at], text[at + 1..].parse::<i64>().ok()),
            None => (text.as_str(), Some(0)),
        };
        if let Some(exponent) = exponent {
            if let Ok(value) = format!("{mantissa}e{}", exponent + power as i64).parse::<f64>() {
                return value;
            }
        }
    }
    let inverse = unit.scale.recip().map(|s| s.to_f64());
    match inverse {
        Some(n) if n > 1.0 && n.fract() == 0.0 && n < 9.0e15 => quantity.value / n,
        _ => quantity.value * factor,
    }
}

/// The value of a folded constant expression.
pub(super) fn constant_value(expr: &Expr) -> Option<f64> {
    match expr.kind {
        ExprKind::Number(v) => Some(v),
        _ => None,
    }
}

fn apply(func: Func, args: &[f64]) -> f64 {
    let a = args.first().copied().unwrap_or(f64::NAN);
    let b = args.get(1).copied().unwrap_or(f64::NAN);
    match func {
        Func::Sin => a.sin(),
        Func::Cos => a.cos(),
        Func::Tan => a.tan(),
        Func::Asin => a.asin(),
        Func::Acos => a.acos(),
        Func::Atan => a.atan(),
        Func::Atan2 => a.atan2(b),
        Func::Sqrt => a.sqrt(),
        Func::Hypot => a.hypot(b),
        Func::Exp => a.exp(),
        Func::Ln => a.ln(),
        Func::Abs => a.abs(),
        Func::Min => a.min(b),
        Func::Max => a.max(b),
    }
}

/// Strips parentheses and signs: what a writer sees as "the number" in `sin(-(30))`.
fn bare_literal(expr: &ast::Expr) -> Option<&ast::Quantity> {
    match &expr.kind {
        ast::ExprKind::Paren(inner) | ast::ExprKind::Neg(inner) => bare_literal(inner),
        ast::ExprKind::Quantity(q) if q.unit.is_none() => Some(q),
        _ => None,
    }
}

impl Checker {
    /// Lowers a fixed value and returns it in SI with its dimension.
    pub(super) fn constant(&mut self, expr: &ast::Expr) -> Result<(f64, Dimension), Reported> {
        let lowered = self.expr(expr, Place::Constant)?;
        match constant_value(&lowered) {
            Some(v) => Ok((v, lowered.dimension)),
            None => Err(self.report(Diagnostic::new(
                codes::INTERNAL,
                expr.span,
                "a constant did not fold to a number",
            ))),
        }
    }

    /// Lowers an expression at `place`.
    pub(super) fn expr(&mut self, expr: &ast::Expr, place: Place<'_>) -> Result<Expr, Reported> {
        let span = expr.span;
        match &expr.kind {
            ast::ExprKind::Quantity(q) => {
                let (value, dimension) = match &q.unit {
                    None => (q.value, Dimension::NONE),
                    Some(unit) => {
                        let unit = self.unit(unit)?;
                        (in_si(q, &unit), unit.dimension)
                    }
                };
                self.finite(number(value, dimension, span))
            }
            ast::ExprKind::Name(ident) => self.name(ident, place),
            ast::ExprKind::Paren(inner) => self.expr(inner, place),
            ast::ExprKind::Neg(inner) => {
                let inner = self.expr(inner, place)?;
                let dimension = inner.dimension;
                self.fold(Expr {
                    kind: ExprKind::Neg(Box::new(inner)),
                    dimension,
                    span,
                })
            }
            ast::ExprKind::Binary(op, lhs, rhs) => {
                // Lower both sides before giving up, so both get their errors reported.
                let (lhs, rhs) = (self.expr(lhs, place), self.expr(rhs, place));
                self.binary(*op, lhs?, rhs?, span)
            }
            ast::ExprKind::Call(name, args) => self.call(name, args, place, span),
        }
    }

    fn name(&mut self, ident: &ast::Ident, place: Place<'_>) -> Result<Expr, Reported> {
        let span = ident.span;
        let name = ident.name.as_str();
        if let Place::Sensor(args) = place {
            if let Some(i) = args.iter().position(|a| a.name == name) {
                return match args[i].dimension {
                    Some(dimension) => Ok(Expr {
                        kind: ExprKind::Arg(i),
                        dimension,
                        span,
                    }),
                    None => Err(Reported),
                };
            }
        }
        let not_constant = |checker: &mut Checker, what: &str| {
            checker.report(
                Diagnostic::new(codes::NOT_CONSTANT, span, format!("`{name}` is {what}, but a constant value is needed here"))
                    .with_label_message("not a constant")
                    .with_hint("constants, range bounds, noise figures and gates may use numbers, earlier constants and `pi`"),
            )
        };
        match (name, self.globals.get(name).copied()) {
            ("pi", _) => Ok(number(std::f64::consts::PI, Dimension::NONE, span)),
            ("dt", _) => match place {
                Place::DiscreteMotion => Ok(Expr {
                    kind: ExprKind::Dt,
                    dimension: seconds(),
                    span,
                }),
                _ => Err(self.report(
                    Diagnostic::new(codes::DT_OUTSIDE_DISCRETE, span, "`dt` exists only in discrete motion")
                        .with_hint(match place {
                            Place::ContinuousMotion => "continuous motion gives rates; the integrator supplies the step: write `x' = v`, not `x' = v * dt`",
                            _ => "`dt` is the step length of `motion discrete`; it has no value elsewhere",
                        }),
                )),
            },
            (_, Some(Global::Const(i))) => {
                if i >= self.constants_ready {
                    let declared = self.constants[i].span;
                    return Err(self.report(
                        Diagnostic::new(codes::UNKNOWN_NAME, span, format!("constant `{name}` is used before its declaration"))
                            .with_secondary(declared, "declared here")
                            .with_hint("a constant may use only constants declared above it; move this declaration down"),
                    ));
                }
                match self.constants[i].value {
                    Some((value, dimension)) => Ok(number(value, dimension, span)),
                    // Its own error was reported where it was declared.
                    None => Err(Reported),
                }
            }
            (_, Some(Global::State(i))) => match place {
                Place::Constant => Err(not_constant(self, "a state")),
                _ => match self.states[i].dimension() {
                    Some(dimension) => Ok(Expr {
                        kind: ExprKind::State(i),
                        dimension,
                        span,
                    }),
                    // Its unit was refused where it was declared.
                    None => Err(Reported),
                },
            },
            (_, Some(Global::Input(i))) => match place {
                Place::Constant => Err(not_constant(self, "an input")),
                Place::Sensor(_) => Err(self.report(
                    Diagnostic::new(codes::INPUT_IN_SENSOR, span, format!("input `{name}` cannot be used in a sensor reading"))
                        .with_label_message("an input")
                        .with_hint("a reading depends on the state, constants and the sensor's arguments; declare a value known when the reading arrives as an argument: `sensor name(value: unit)`"),
                )),
                _ => match self.inputs[i].dimension() {
                    Some(dimension) => Ok(Expr {
                        kind: ExprKind::Input(i),
                        dimension,
                        span,
                    }),
                    None => Err(Reported),
                },
            },
            (_, None) => {
                let mut visible: Vec<&str> = self.globals.keys().map(String::as_str).collect();
                visible.push("pi");
                if matches!(place, Place::DiscreteMotion) {
                    visible.push("dt");
                }
                if let Place::Sensor(args) = place {
                    visible.extend(args.iter().map(|a| a.name.as_str()));
                }
                let mut d = Diagnostic::new(codes::UNKNOWN_NAME, span, format!("unknown name `{name}`"))
                    .with_label_message("not declared");
                if crate::units::lookup(name).is_ok() {
                    d = d.with_label_message("a unit, not a name").with_hint(format!(
                        "the unit after a number does not extend over `*`: write `·` or parentheses, e.g. `2 m·{name}` or `2 (m*{name})`"
                    ));
                } else if let Some(hint) = did_you_mean(&suggest(name, visible)) {
                    d = d.with_hint(hint);
                } else if Func::from_name(name).is_some() {
                    d = d.with_hint(format!("`{name}` is a function: call it, e.g. `{name}(x)`"));
                }
                Err(self.report(d))
            }
        }
    }

    /// Checks that two operands may be combined by `what` (same SI dimension, no
    /// cycles against radians) and returns the dimension of the combination.
    pub(super) fn same_dimension(
        &mut self,
        lhs: &Expr,
        rhs: &Expr,
        what: &str,
        span: Span,
    ) -> Result<Dimension, Reported> {
        if !lhs.dimension.compatible(&rhs.dimension) {
            return Err(self.report(
                Diagnostic::new(
                    codes::MISMATCHED_DIMENSIONS,
                    span,
                    format!("{what} needs operands of one dimension"),
                )
                .with_secondary(lhs.span, format!("this is {}", lhs.dimension))
                .with_secondary(rhs.span, format!("this is {}", rhs.dimension)),
            ));
        }
        if lhs.dimension.angle_cycle_conflict(&rhs.dimension) {
            return Err(self.report(self.cycle_conflict(span, lhs.dimension, rhs.dimension)));
        }
        // Keep whichever side says more (an angle axis beats a bare number).
        Ok(if lhs.dimension == lhs.dimension.hard() {
            rhs.dimension
        } else {
            lhs.dimension
        })
    }

    pub(super) fn cycle_conflict(&self, span: Span, a: Dimension, b: Dimension) -> Diagnostic {
        Diagnostic::new(
            codes::ANGLE_CYCLE_CONFLICT,
            span,
            format!("a value in cycles meets a value in radians ({a} against {b})"),
        )
        .with_note(
            "one cycle is 2 pi rad: Hz and rad/s differ by a factor of 2 pi that SI does not show",
        )
        .with_hint("convert explicitly, e.g. `2 * pi * f` for an angular rate from a frequency f")
    }

    fn binary(
        &mut self,
        op: ast::BinOp,
        lhs: Expr,
        rhs: Expr,
        span: Span,
    ) -> Result<Expr, Reported> {
        let overflow = |checker: &mut Checker| {
            checker.report(Diagnostic::new(
                codes::DIMENSION_OVERFLOW,
                span,
                "the dimension of this product is too large to represent",
            ))
        };
        let (op, dimension) = match op {
            ast::BinOp::Add => (BinOp::Add, self.same_dimension(&lhs, &rhs, "`+`", span)?),
            ast::BinOp::Sub => (BinOp::Sub, self.same_dimension(&lhs, &rhs, "`-`", span)?),
            ast::BinOp::Mul => (
                BinOp::Mul,
                lhs.dimension
                    .mul(&rhs.dimension)
                    .ok_or_else(|| overflow(self))?,
            ),
            ast::BinOp::Div => (
                BinOp::Div,
                lhs.dimension
                    .div(&rhs.dimension)
                    .ok_or_else(|| overflow(self))?,
            ),
            ast::BinOp::Pow => (BinOp::Pow, self.power_dimension(&lhs, &rhs, span)?),
        };
        self.fold(Expr {
            kind: ExprKind::Binary(op, Box::new(lhs), Box::new(rhs)),
            dimension,
            span,
        })
    }

    fn power_dimension(
        &mut self,
        base: &Expr,
        exponent: &Expr,
        span: Span,
    ) -> Result<Dimension, Reported> {
        if !exponent.dimension.is_dimensionless() {
            return Err(self.report(
                Diagnostic::new(
                    codes::BAD_EXPONENT,
                    exponent.span,
                    format!(
                        "an exponent must be a plain number, but this is {}",
                        exponent.dimension
                    ),
                )
                .with_hint("raise to a constant such as `2` or `0.5`"),
            ));
        }
        if base.dimension == Dimension::NONE {
            return Ok(Dimension::NONE);
        }
        let exact = constant_value(exponent).and_then(Rational::from_f64_exact);
        let Some(exact) = exact else {
            let what = if constant_value(exponent).is_some() {
                "this exponent is not a simple fraction"
            } else {
                "this exponent is not a constant"
            };
            return Err(self.report(
                Diagnostic::new(codes::BAD_EXPONENT, exponent.span, format!("{what}, so this power of a value in {} has no fixed dimension", base.dimension))
                    .with_secondary(base.span, format!("this is {}", base.dimension))
                    .with_hint("a base with a unit needs a constant rational exponent such as `2`, `-1` or `0.5`"),
            ));
        };
        base.dimension.pow(exact).ok_or_else(|| {
            self.report(Diagnostic::new(
                codes::DIMENSION_OVERFLOW,
                span,
                "the dimension of this power is too large to represent",
            ))
        })
    }

    fn call(
        &mut self,
        name: &ast::Ident,
        args: &[ast::Expr],
        place: Place<'_>,
        span: Span,
    ) -> Result<Expr, Reported> {
        let Some(func) = Func::from_name(&name.name) else {
            let known = Func::ALL.map(Func::name);
            let mut d = Diagnostic::new(
                codes::UNKNOWN_FUNCTION,
                name.span,
                format!("unknown function `{}`", name.name),
            )
            .with_note(format!("the functions are {}", known.join(" ")));
            if let Some(hint) = did_you_mean(&suggest(&name.name, known)) {
                d = d.with_hint(hint);
            }
            return Err(self.report(d));
        };
        if args.len() != func.arity() {
            return Err(self.report(Diagnostic::new(
                codes::WRONG_ARITY,
                span,
                format!(
                    "`{}` takes {} argument{}, but {} {} given",
                    func.name(),
                    func.arity(),
                    if func.arity() == 1 { "" } else { "s" },
                    args.len(),
                    if args.len() == 1 { "was" } else { "were" }
                ),
            )));
        }
        let lowered: Vec<Result<Expr, Reported>> =
            args.iter().map(|a| self.expr(a, place)).collect();
        let lowered: Vec<Expr> = lowered.into_iter().collect::<Result<_, _>>()?;
        let dimension = match func {
            Func::Sin | Func::Cos | Func::Tan => {
                let arg = &lowered[0];
                if !arg.dimension.is_dimensionless() {
                    return Err(self.report(
                        Diagnostic::new(
                            codes::TRIG_ARGUMENT,
                            arg.span,
                            format!(
                                "`{}` needs an angle, but this is {}",
                                func.name(),
                                arg.dimension
                            ),
                        )
                        .with_label_message(format!("{}", arg.dimension))
                        .with_hint("pass an angle (rad, deg) or a plain number"),
                    ));
                }
                if let Some(q) = bare_literal(&args[0]) {
                    if q.value != 0.0 {
                        self.report(
                            Diagnostic::new(
                                codes::BARE_ANGLE,
                                q.number_span,
                                format!("the number `{}` is used as an angle in radians", q.text),
                            )
                            .with_label_message("no unit")
                            .with_hint(format!(
                                "write the unit: `{} deg` or `{} rad`",
                                q.text, q.text
                            )),
                        );
                    }
                }
                Dimension::NONE
            }
            Func::Asin | Func::Acos | Func::Atan | Func::Exp | Func::Ln => {
                let arg = &lowered[0];
                if !arg.dimension.is_dimensionless() {
                    return Err(self.report(
                        Diagnostic::new(
                            codes::NEEDS_DIMENSIONLESS,
                            arg.span,
                            format!(
                                "`{}` needs a plain number, but this is {}",
                                func.name(),
                                arg.dimension
                            ),
                        )
                        .with_label_message(format!("{}", arg.dimension))
                        .with_hint("divide by a reference value of the same unit to make a ratio"),
                    ));
                }
                if matches!(func, Func::Exp | Func::Ln) {
                    Dimension::NONE
                } else {
                    radians()
                }
            }
            Func::Atan2 => {
                self.same_dimension(&lowered[0], &lowered[1], "`atan2`", span)?;
                radians()
            }
            Func::Hypot | Func::Min | Func::Max => {
                let what = format!("`{}`", func.name());
                self.same_dimension(&lowered[0], &lowered[1], &what, span)?
            }
            Func::Sqrt => lowered[0].dimension.pow(Rational::HALF).ok_or_else(|| {
                self.report(Diagnostic::new(
                    codes::DIMENSION_OVERFLOW,
                    span,
                    "the dimension of this root is too large to represent",
                ))
            })?,
            Func::Abs => lowered[0].dimension,
        };
        self.fold(Expr {
            kind: ExprKind::Call(func, lowered),
            dimension,
            span,
        })
    }

    /// Replaces a node whose operands are all numbers by its value.
    fn fold(&mut self, expr: Expr) -> Result<Expr, Reported> {
        let value = match &expr.kind {
            ExprKind::Neg(a) => constant_value(a).map(|a| -a),
            ExprKind::Binary(op, a, b) => match (constant_value(a), constant_value(b)) {
                (Some(a), Some(b)) => Some(match op {
                    BinOp::Add => a + b,
                    BinOp::Sub => a - b,
                    BinOp::Mul => a * b,
                    BinOp::Div => a / b,
                    BinOp::Pow => a.powf(b),
                }),
                _ => None,
            },
            ExprKind::Call(func, args) => {
                let values: Option<Vec<f64>> = args.iter().map(constant_value).collect();
                values.map(|v| apply(*func, &v))
            }
            _ => None,
        };
        match value {
            Some(v) => self.finite(number(v, expr.dimension, expr.span)),
            None => Ok(expr),
        }
    }

    fn finite(&mut self, expr: Expr) -> Result<Expr, Reported> {
        match constant_value(&expr) {
            Some(v) if !v.is_finite() => Err(self.report(
                Diagnostic::new(codes::NOT_FINITE, expr.span, "this evaluates to a value that is not a finite number")
                    .with_label_message(if v.is_nan() { "not a number" } else { "infinite" })
                    .with_hint("check for a division by zero, a logarithm of zero or a root of a negative number"),
            )),
            _ => Ok(expr),
        }
    }
}
