//! Diagnostics: the one type every stage reports problems with.
//!
//! A stage never prints: it returns `Diagnostic`s, each with a stable code from
//! [`codes`], a one-line message, labelled byte spans, notes and an optional hint.
//! Rendering (terminal text via codespan-reporting, JSON lines for editors and CI)
//! lives in [`render`], so every stage's problems look the same to the user.

pub mod codes;
pub mod render;

pub use codes::Code;

/// A half-open byte range `start..end` in one source file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default, serde::Serialize)]
pub struct Span {
    /// First byte.
    pub start: usize,
    /// One past the last byte.
    pub end: usize,
}

impl Span {
    /// The range `start..end`.
    pub fn new(start: usize, end: usize) -> Span {
        Span { start, end }
    }

    /// The smallest span covering both.
    pub fn to(self, other: Span) -> Span {
        Span::new(self.start.min(other.start), self.end.max(other.end))
    }
}

/// How bad a diagnostic is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Severity {
    /// Informational; never fails a build.
    Note,
    /// Likely a mistake; the spec is still usable.
    Warning,
    /// The spec cannot be used.
    Error,
}

/// A span with a short message shown beside it.
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize)]
pub struct Label {
    /// Where.
    pub span: Span,
    /// What to say there (may be empty).
    pub message: String,
    /// The primary label is the one the diagnostic is about; others give context.
    pub primary: bool,
}

/// One problem found in a spec.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Diagnostic {
    /// Stable code, e.g. `E0301`.
    pub code: Code,
    /// Severity; defaults to the code's own.
    pub severity: Severity,
    /// One line saying what is wrong.
    pub message: String,
    /// Spans with messages; the first primary label positions the diagnostic.
    pub labels: Vec<Label>,
    /// Extra facts ("expected m s^-1, found m").
    pub notes: Vec<String>,
    /// What to do about it.
    pub hint: Option<String>,
}

impl Diagnostic {
    /// A diagnostic of `code` at its default severity, with a primary label at `span`.
    pub fn new(code: Code, span: Span, message: impl Into<String>) -> Diagnostic {
        Diagnostic {
            code,
            severity: code.severity,
            message: message.into(),
            labels: vec![Label {
                span,
                message: String::new(),
                primary: true,
            }],
            notes: Vec::new(),
            hint: None,
        }
    }

    /// Sets the message shown under the primary span.
    pub fn with_label_message(mut self, message: impl Into<String>) -> Diagnostic {
        if let Some(label) = self.labels.iter_mut().find(|l| l.primary) {
            label.message = message.into();
        }
        self
    }

    /// Adds a secondary label.
    pub fn with_secondary(mut self, span: Span, message: impl Into<String>) -> Diagnostic {
        self.labels.push(Label {
            span,
            message: message.into(),
            primary: false,
        });
        self
    }

    /// Adds a note.
    pub fn with_note(mut self, note: impl Into<String>) -> Diagnostic {
        self.notes.push(note.into());
        self
    }

    /// Sets the hint.
    pub fn with_hint(mut self, hint: impl Into<String>) -> Diagnostic {
        self.hint = Some(hint.into());
        self
    }

    /// The primary span (or an empty span at 0 when there is no label).
    pub fn primary_span(&self) -> Span {
        self.labels
            .iter()
            .find(|l| l.primary)
            .or(self.labels.first())
            .map(|l| l.span)
            .unwrap_or_default()
    }

    /// True for error severity.
    pub fn is_error(&self) -> bool {
        self.severity == Severity::Error
    }
}
