//! Rendering of the pieces inside a line: expressions, units, distributions and
//! covariances, with normalised spacing.
//!
//! Every function emits the same tokens as the source in the same order (parentheses
//! included, since the AST keeps them), changing only the blanks between tokens. The
//! grammar ignores blanks between tokens, so the text re-parses to the same tree.

use crate::syntax::ast::{
    BinOp, CovarianceExpr, DistArg, DistExpr, Expr, ExprKind, Unit, UnitKind,
};

/// A unit exactly as written, minus blanks and comments: `m / s` becomes `m/s`, but
/// `N·m`, `s^(-2)` and `Hz^(1/2)` keep their spelling. Removing every blank is safe
/// because unit grammar has no juxtaposition: two symbols always have an operator
/// between them.
pub fn unit(source: &str, unit: &Unit) -> String {
    let text = source
        .get(unit.span.start..unit.span.end)
        .unwrap_or_default();
    without_comments(text)
        .chars()
        .filter(|c| !c.is_whitespace())
        .collect()
}

/// `text` with every `//` comment removed (up to, not including, its line break).
/// Exact because the language has no string literals.
fn without_comments(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    let mut rest = text;
    while let Some(at) = rest.find("//") {
        out.push_str(&rest[..at]);
        rest = rest[at..].find('\n').map_or("", |n| &rest[at + n..]);
    }
    out.push_str(rest);
    out
}

/// An expression with one space around `+ - * /`, none around `^`, none after a
/// unary minus, `, ` between call arguments.
pub fn expr(source: &str, e: &Expr) -> String {
    match &e.kind {
        ExprKind::Quantity(q) => match &q.unit {
            Some(u) if u.kind == UnitKind::Percent => format!("{} %", q.text),
            Some(u) => format!("{} {}", q.text, unit(source, u)),
            None => q.text.clone(),
        },
        ExprKind::Name(name) => name.name.clone(),
        ExprKind::Neg(inner) => format!("-{}", expr(source, inner)),
        ExprKind::Binary(BinOp::Pow, base, exponent) => {
            format!("{}^{}", expr(source, base), expr(source, exponent))
        }
        ExprKind::Binary(op, lhs, rhs) => {
            format!(
                "{} {} {}",
                expr(source, lhs),
                op.symbol(),
                expr(source, rhs)
            )
        }
        ExprKind::Call(func, args) => format!("{}({})", func.name, list(source, args)),
        ExprKind::Paren(inner) => format!("({})", expr(source, inner)),
    }
}

fn list(source: &str, items: &[Expr]) -> String {
    items
        .iter()
        .map(|e| expr(source, e))
        .collect::<Vec<_>>()
        .join(", ")
}

/// `normal(0 m, 5 m)`, `uniform(0 m .. 120 m)`.
pub fn dist(source: &str, d: &DistExpr) -> String {
    let args: Vec<String> = d
        .args
        .iter()
        .map(|arg| match arg {
            DistArg::Value(e) => expr(source, e),
            DistArg::Range { lo, hi, .. } => {
                format!("{} .. {}", expr(source, lo), expr(source, hi))
            }
        })
        .collect();
    format!("{}({})", d.name.name, args.join(", "))
}

/// `covariance [ a, b ; c, d ]`.
pub fn covariance(source: &str, c: &CovarianceExpr) -> String {
    let rows: Vec<String> = c.rows.iter().map(|row| list(source, row)).collect();
    format!("covariance [ {} ]", rows.join(" ; "))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::syntax::ast::Item;

    fn const_text(source: &str) -> String {
        let (file, diagnostics) = crate::syntax::parse(source);
        let Some(Item::Const(c)) = file.and_then(|f| f.items.into_iter().next()) else {
            panic!("expected a constant: {diagnostics:?}");
        };
        expr(source, &c.value)
    }

    #[test]
    fn spacing_is_normalised_around_operators() {
        assert_eq!(const_text("const c = a+b*  c/d"), "a + b * c / d");
        assert_eq!(const_text("const c = - x ^ 2"), "-x^2");
        assert_eq!(const_text("const c = 2 ^ - 1"), "2^-1");
        assert_eq!(const_text("const c = atan2( y ,x )"), "atan2(y, x)");
        assert_eq!(const_text("const c = ( a - b )"), "(a - b)");
        assert_eq!(const_text("const c = a - - b"), "a - -b");
    }

    #[test]
    fn numbers_and_units_keep_their_spelling() {
        assert_eq!(const_text("const c = 1_000.50   km"), "1_000.50 km");
        assert_eq!(const_text("const c = 3 N·m"), "3 N·m");
        assert_eq!(
            const_text("const c = 4 deg / h / sqrt( h )"),
            "4 deg/h/sqrt(h)"
        );
        assert_eq!(const_text("const c = 1 s^( -2 )"), "1 s^(-2)");
        assert_eq!(const_text("const c = 99.9%"), "99.9 %");
        assert_eq!(const_text("const c = 2E-3 µs"), "2E-3 µs");
    }

    #[test]
    fn comments_inside_a_unit_are_dropped_from_its_text() {
        assert_eq!(const_text("const c = 2 m / // per\n s"), "2 m/s");
    }
}
