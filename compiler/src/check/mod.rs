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
