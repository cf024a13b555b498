//! Unit expressions as written (`deg/h/sqrt(h)`) to exact units, one catalogue lookup
//! per symbol and checked arithmetic for the operators.

use super::names::did_you_mean;
use super::{Checker, Reported};
use crate::diag::{codes, Diagnostic};
use crate::model::DeclaredUnit;
use crate::syntax::ast::{Unit as UnitAst, UnitKind};
use crate::units::{self, Rational, Scale, Unit};

impl Checker {
    /// The exact unit of a unit expression.
    pub(super) fn unit(&mut self, unit: &UnitAst) -> Result<Unit, Reported> {
        let overflow = |checker: &mut Checker| {
            checker.report(
                Diagnostic::new(
                    codes::DIMENSION_OVERFLOW,
                    unit.span,
                    "this unit's exponents are too large to represent",
                )
                .with_hint("unit exponents are small numbers such as 2, -1 or 1/2"),
            )
        };
        match &unit.kind {
            UnitKind::Symbol(symbol) => units::lookup(symbol).map_err(|unknown| {
                let d = Diagnostic::new(codes::UNKNOWN_UNIT, unit.span, format!("unknown unit `{symbol}`"));
                let d = if self.is_declared(symbol) {
                    d.with_label_message("a name, read here as part of a unit").with_hint(format!(
                        "the unit after a number takes in `/`, `^` and `·`: write `(2 m) / {symbol}` or `2 m * (1 / {symbol})`"
                    ))
                } else {
                    match did_you_mean(&unknown.suggestions) {
                        Some(hint) => d.with_hint(hint),
                        None => d.with_hint("units are SI symbols with prefixes (`km`, `ms`), accepted units (`h`, `deg`) and trade units (`ft`, `kn`, `mbar`)"),
                    }
                };
                self.report(d)
            }),
            UnitKind::One => Ok(Unit::ONE),
            UnitKind::Percent => match Scale::from_ratio(1, 100) {
                Some(scale) => Ok(Unit::new(units::Dimension::NONE, scale)),
                None => Err(overflow(self)),
            },
            UnitKind::Mul(a, b) | UnitKind::Div(a, b) => {
                let (a_unit, b_unit) = (self.unit(a), self.unit(b));
                let (a_unit, b_unit) = (a_unit?, b_unit?);
                let product = if matches!(unit.kind, UnitKind::Mul(..)) {
                    a_unit.mul(&b_unit)
                } else {
                    a_unit.div(&b_unit)
                };
                product.ok_or_else(|| overflow(self))
            }
            UnitKind::Pow(base, num, den) => {
                let base = self.unit(base)?;
                let Some(exponent) = Rational::new(*num, *den) else {
                    return Err(self.report(Diagnostic::new(
                        codes::BAD_EXPONENT,
                        unit.span,
                        format!("`{num}/{den}` is not a valid exponent"),
                    )));
                };
                base.pow(exponent).ok_or_else(|| overflow(self))
            }
            UnitKind::Sqrt(inner) => self.unit(inner)?.sqrt().ok_or_else(|| overflow(self)),
            UnitKind::Paren(inner) => self.unit(inner),
        }
    }

    /// A declared unit (type position), with its text and factor kept for I/O.
    pub(super) fn declared_unit(&mut self, unit: &UnitAst) -> Result<DeclaredUnit, Reported> {
        let exact = self.unit(unit)?;
        Ok(DeclaredUnit {
            text: unit.text(),
            dimension: exact.dimension,
            to_si: exact.to_si(),
            span: unit.span,
        })
    }
}
