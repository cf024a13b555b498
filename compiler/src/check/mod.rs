//! Checking: the AST to the checked [`Model`], with every problem reported.
//!
//! Lowering resolves names, fixes indices, types every expression with its
//! dimension, converts every number to SI with its exact unit factor, folds
//! constants, and brings noise to canonical SI form. It keeps going after an error
//! (a failed declaration is remembered as failed, so its uses stay quiet), so one
//! run reports every independent problem. A model comes out only when no error did.

mod expr;
mod lower;
mod names;
mod noise;
mod unit;

use std::collections::HashMap;

use crate::diag::{codes, Diagnostic, Span};
use crate::model::Model;
use crate::syntax::{self, ast};
use crate::units::Dimension;

/// The result of checking one spec.
#[derive(Debug, Clone)]
pub struct CheckOutput {
    /// The checked model; present exactly when no diagnostic is an error.
    pub model: Option<Model>,
    /// Every problem found, ordered by position.
    pub diagnostics: Vec<Diagnostic>,
}

impl CheckOutput {
    /// True when some diagnostic is an error.
    pub fn has_errors(&self) -> bool {
        self.diagnostics.iter().any(Diagnostic::is_error)
    }
}

/// Parses and checks spec text.
pub fn check_source(text: &str) -> CheckOutput {
    syntax::on_big_stack(|| {
        let (file, mut diagnostics) = syntax::parse_here(text);
        let model = file.and_then(|file| {
            let (model, mut found) = Checker::default().run(&file);
            diagnostics.append(&mut found);
            model
        });
        finish(model, diagnostics)
    })
}

/// Checks spec bytes as read from a file: invalid UTF-8 is reported with its offset.
pub fn check_bytes(bytes: &[u8]) -> CheckOutput {
    match std::str::from_utf8(bytes) {
        Ok(text) => check_source(text),
        Err(error) => {
            let at = error.valid_up_to();
            let byte = bytes.get(at).copied().unwrap_or_default();
            let diagnostic = Diagnostic::new(
                codes::NOT_UTF8,
                Span::new(at, at + error.error_len().unwrap_or(1)),
                format!("byte 0x{byte:02X} at offset {at} is not valid UTF-8"),
            )
            .with_hint("save the spec as UTF-8 text");
            finish(None, vec![diagnostic])
        }
    }
}

/// Checks an already parsed file.
pub fn check_file(file: &ast::File) -> CheckOutput {
    syntax::on_big_stack(|| {
        let (model, diagnostics) = Checker::default().run(file);
        finish(model, diagnostics)
    })
}

/// Evaluates a quantity written outside a spec (`"10 ms"`, `"50 Hz"`, `"2 m / 3"`):
/// the spec language's constant expressions with units, so project files read numbers
/// exactly as specs do. Returns the value in SI and its dimension; diagnostic spans
/// point into `text`.
pub fn quantity(text: &str) -> Result<(f64, Dimension), Vec<Diagnostic>> {
    const PREFIX: &str = "const quantity = ";
    let source = format!("{PREFIX}{text}");
    let (value, mut diagnostics) = syntax::on_big_stack(|| {
        let (file, mut diagnostics) = syntax::parse_here(&source);
        let value = file.and_then(|file| match file.items.as_slice() {
            [ast::Item::Const(decl)] => {
                let mut checker = Checker::default();
                let value = checker.constant(&decl.value).ok();
                diagnostics.append(&mut checker.diagnostics);
                value
            }
            _ => None,
        });
        (value, diagnostics)
    });
    let shift = |span: Span| {
        Span::new(
            span.start.saturating_sub(PREFIX.len()).min(text.len()),
            span.end.saturating_sub(PREFIX.len()).min(text.len()),
        )
    };
    for diagnostic in &mut diagnostics {
        for label in &mut diagnostic.labels {
            label.span = shift(label.span);
        }
    }
    match value {
        Some(value) if !diagnostics.iter().any(Diagnostic::is_error) => Ok(value),
        _ if diagnostics.iter().any(Diagnostic::is_error) => Err(diagnostics),
        _ => Err(vec![Diagnostic::new(
            codes::NOT_CONSTANT,
            Span::new(0, text.len()),
            format!("`{text}` is not a single quantity"),
        )
        .with_hint(
            "write a number with its unit, such as \"10 ms\" or \"0.2 m/s^2\"",
        )]),
    }
}

fn finish(model: Option<Model>, mut diagnostics: Vec<Diagnostic>) -> CheckOutput {
    diagnostics.sort_by_key(|d| d.primary_span().start);
    let failed = diagnostics.iter().any(Diagnostic::is_error);
    CheckOutput {
        model: if failed { None } else { model },
        diagnostics,
    }
}

/// Marks a failure whose diagnostic has already been pushed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct Reported;

/// What a global name refers to.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Global {
    State(usize),
    Input(usize),
    Const(usize),
}

/// A state or input as expressions see it.
struct VarInfo {
    /// `None` when its unit was refused (already reported).
    dimension: Option<Dimension>,
}

/// A constant as expressions see it.
struct ConstInfo {
    /// Value in SI and dimension; `None` when it failed (already reported).
    value: Option<(f64, Dimension)>,
    /// Span of its name.
    span: Span,
}

/// Lowering state for one file.
#[derive(Default)]
struct Checker {
    diagnostics: Vec<Diagnostic>,
    globals: HashMap<String, Global>,
    states: Vec<VarInfo>,
    inputs: Vec<VarInfo>,
    constants: Vec<ConstInfo>,
    /// Constants with a smaller index may be used; the rest are declared later.
    constants_ready: usize,
}

impl Checker {
    /// Records a diagnostic (of any severity).
    fn report(&mut self, diagnostic: Diagnostic) -> Reported {
        self.diagnostics.push(diagnostic);
        Reported
    }

    /// True when `name` is declared or built in (used to explain unit mistakes).
    fn is_declared(&self, name: &str) -> bool {
        self.globals.contains_key(name) || names::is_reserved(name)
    }
}

#[cfg(test)]
mod quantity_tests {
    use super::*;
    use crate::units::{Base, Dimension};

    /// Unit factors: NIST SP 811 (2008), Appendix B.8 (ft = 0.3048 m, exact; kn =
    /// 1852/3600 m/s).
    #[test]
    fn quantities_read_with_units_in_si() {
        let (value, dimension) = quantity("10 ms").expect("valid");
        assert!((value - 0.01).abs() < 1e-15);
        assert_eq!(dimension, Dimension::base(Base::Time));
        let (value, _) = quantity("3 ft").expect("valid");
        assert!((value - 0.9144).abs() < 1e-15);
        let (value, _) = quantity("36 kn").expect("valid");
        assert!((value - 18.52).abs() < 1e-12);
        let (value, dimension) = quantity("0.5").expect("valid");
        assert_eq!((value, dimension.is_dimensionless()), (0.5, true));
    }

    #[test]
    fn bad_quantities_point_into_the_text() {
        let text = "3 furlongs";
        let errors = quantity(text).expect_err("unknown unit");
        let span = errors[0].primary_span();
        assert_eq!(&text[span.start..span.end], "furlongs");
        let errors = quantity("1 m state { x : m }").expect_err("not one quantity");
        assert!(errors.iter().any(Diagnostic::is_error));
    }
}
