//! Rendering diagnostics for people (terminal text via codespan-reporting) and for
//! tools (JSON lines: one object per diagnostic).
//!
//! Both take the file's display name and text, since a [`Diagnostic`] holds only
//! byte spans. Spans are clamped to the text and to character boundaries first, so
//! a diagnostic about damaged input still renders.

use codespan_reporting::diagnostic::{
    Diagnostic as Report, Label as ReportLabel, LabelStyle, Severity as ReportSeverity,
};
use codespan_reporting::files::SimpleFile;
use codespan_reporting::term::{self, Config};

use super::{Diagnostic, Severity, Span};

/// A span moved inside `text` and onto character boundaries.
fn clamp(text: &str, span: Span) -> Span {
    let mut start = span.start.min(text.len());
    while !text.is_char_boundary(start) {
        start -= 1;
    }
    let mut end = span.end.clamp(start, text.len());
    while !text.is_char_boundary(end) {
        end += 1;
    }
    Span::new(start, end)
}

/// One-based line and column (in characters) of byte `at`.
pub fn line_column(text: &str, at: usize) -> (usize, usize) {
    let at = clamp(text, Span::new(at, at)).start;
    let before = &text[..at];
    let line = before.matches('\n').count() + 1;
    let line_start = before.rfind('\n').map_or(0, |n| n + 1);
    (line, before[line_start..].chars().count() + 1)
}

fn report(text: &str, diagnostic: &Diagnostic) -> Report<()> {
    let severity = match diagnostic.severity {
        Severity::Error => ReportSeverity::Error,
        Severity::Warning => ReportSeverity::Warning,
        Severity::Note => ReportSeverity::Note,
    };
    let labels = diagnostic
        .labels
        .iter()
        .map(|label| {
            let span = clamp(text, label.span);
            let style = if label.primary {
                LabelStyle::Primary
            } else {
                LabelStyle::Secondary
            };
            ReportLabel::new(style, (), span.start..span.end).with_message(&label.message)
        })
        .collect();
    let mut notes: Vec<String> = diagnostic
        .notes
        .iter()
        .map(|n| format!("note: {n}"))
        .collect();
    if let Some(hint) = &diagnostic.hint {
        notes.push(format!("help: {hint}"));
    }
    Report::new(severity)
        .with_code(diagnostic.code.id)
        .with_message(&diagnostic.message)
        .with_labels(labels)
        .with_notes(notes)
}

/// Terminal text for `diagnostics` about the file `name` holding `text`.
pub fn human(name: &str, text: &str, diagnostics: &[Diagnostic]) -> String {
    let file = SimpleFile::new(name, text);
    let config = Config::default();
    let mut out = String::new();
    for diagnostic in diagnostics {
        match term::emit_into_string(&config, &file, &report(text, diagnostic)) {
            Ok(rendered) => out.push_str(&rendered),
            // The renderer refuses only positions outside the file, which clamping
            // rules out; keep a plain line rather than lose the diagnostic.
            Err(_) => {
                let (line, column) = line_column(text, diagnostic.primary_span().start);
                out.push_str(&format!(
                    "{}[{}]: {}\n --> {name}:{line}:{column}\n\n",
                    severity_word(diagnostic.severity),
                    diagnostic.code.id,
                    diagnostic.message
                ));
            }
        }
    }
    out
}

fn severity_word(severity: Severity) -> &'static str {
    match severity {
        Severity::Error => "error",
        Severity::Warning => "warning",
        Severity::Note => "note",
    }
}

/// One JSON object per diagnostic, each on its own line.
pub fn json_lines(name: &str, text: &str, diagnostics: &[Diagnostic]) -> String {
    let mut out = String::new();
    for diagnostic in diagnostics {
        let span = clamp(text, diagnostic.primary_span());
        let (line, column) = line_column(text, span.start);
        let labels: Vec<serde_json::Value> = diagnostic
            .labels
            .iter()
            .map(|l| {
                let s = clamp(text, l.span);
                serde_json::json!({ "range": [s.start, s.end], "message": l.message, "primary": l.primary })
            })
            .collect();
        let object = serde_json::json!({
            "code": diagnostic.code.id,
            "severity": diagnostic.severity,
            "message": diagnostic.message,
            "file": name,
            "line": line,
            "column": column,
            "range": [span.start, span.end],
            "hint": diagnostic.hint,
            "notes": diagnostic.notes,
            "labels": labels,
        });
        out.push_str(&object.to_string());
        out.push('\n');
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::diag::codes;

    fn sample() -> Diagnostic {
        Diagnostic::new(codes::SYNTAX, Span::new(8, 9), "expected `:`, found `m`")
            .with_label_message("expected `:`")
            .with_note("a state is `name : unit`")
            .with_hint("write `x : m`")
    }

    #[test]
    fn human_output_has_code_location_label_note_and_help() {
        let text = "state { x m }\n";
        let rendered = human("cart.reckon", text, &[sample()]);
        assert!(
            rendered.starts_with("error[E0101]: expected `:`, found `m`"),
            "{rendered}"
        );
        assert!(rendered.contains("cart.reckon:1:9"), "{rendered}");
        assert!(
            rendered.contains("= note: a state is `name : unit`"),
            "{rendered}"
        );
        assert!(rendered.contains("= help: write `x : m`"), "{rendered}");
    }

    #[test]
    fn json_lines_carry_position_and_range() {
        let text = "state {\n  x m }\n";
        let mut d = sample();
        d.labels[0].span = Span::new(12, 13);
        let line = json_lines("cart.reckon", text, &[d]);
        let value: serde_json::Value = serde_json::from_str(line.trim_end()).expect("valid JSON");
        assert_eq!(value["code"], "E0101");
        assert_eq!(value["severity"], "error");
        assert_eq!(value["line"], 2);
        assert_eq!(value["column"], 5);
        assert_eq!(value["range"], serde_json::json!([12, 13]));
        assert_eq!(value["hint"], "write `x : m`");
    }

    #[test]
    fn spans_past_the_end_or_inside_a_character_still_render() {
        let text = "µs";
        let mut d = sample();
        d.labels[0].span = Span::new(1, 99);
        let rendered = human("x.reckon", text, &[d.clone()]);
        assert!(rendered.contains("E0101"));
        assert_eq!(line_column(text, 1), (1, 1));
        assert!(json_lines("x.reckon", text, &[d]).contains("[0,3]"));
    }
}
