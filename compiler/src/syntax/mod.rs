//! Syntax: spec text to the AST ([`ast`]), with every parse error as a diagnostic.
//!
//! The grammar (`grammar.pest`) runs once per top-level item so that one broken
//! item does not hide errors in the others. Comments are collected by a separate
//! scan and kept on the file; `///` docs are attached to the item that follows them.
//! Nesting is bounded ([`MAX_NESTING`]) before the recursive parser runs, and the
//! parse runs on a thread with a generous stack, so no input can overflow it.

pub mod ast;
mod errors;
mod parser;
mod scan;

pub use scan::MAX_NESTING;

use crate::diag::{codes, Diagnostic, Span};
use ast::File;

/// Stack for the parser and checker threads: deep enough for [`MAX_NESTING`]
/// levels of every recursive pass with a wide margin.
const STACK_BYTES: usize = 256 << 20;

/// Parses a spec. The file is `Some` exactly when there is no error (warnings,
/// such as a doc comment that documents nothing, may accompany it).
pub fn parse(text: &str) -> (Option<File>, Vec<Diagnostic>) {
    on_big_stack(|| parse_here(text))
}

/// [`parse`] on the calling thread; for callers already on a big stack.
pub(crate) fn parse_here(text: &str) -> (Option<File>, Vec<Diagnostic>) {
    // Detail collection lets errors name expected punctuation (`{`, `:`...).
    pest::set_error_detail(true);
    let mut diagnostics = Vec::new();
    if let Some(span) = scan::too_deep(text) {
        diagnostics.push(
            Diagnostic::new(
                codes::TOO_DEEP,
                span,
                format!("brackets or powers nest more than {MAX_NESTING} levels deep here"),
            )
            .with_hint("split the expression with named constants"),
        );
        return (None, diagnostics);
    }
    let comments = scan::comments(text);
    let mut docs = parser::DocTable::new(scan::doc_blocks(text, &comments));
    let starts = scan::item_starts(text);
    let mut items = Vec::new();
    for (i, &start) in starts.iter().enumerate() {
        let end = starts.get(i + 1).copied().unwrap_or(text.len());
        match parser::parse_item(text, start, end, &mut docs) {
            Ok(item) => items.push(item),
            Err(diagnostic) => diagnostics.push(*diagnostic),
        }
    }
    for doc in docs.unclaimed() {
        diagnostics.push(
            Diagnostic::new(codes::DANGLING_DOC, doc.span, "this doc comment documents nothing")
                .with_label_message("no model, constant, variable, sensor or reading component follows")
                .with_hint("use `//` for a plain comment, or move the `///` lines directly above what they describe"),
        );
    }
    let file = File {
        items,
        comments,
        span: Span::new(0, text.len()),
    };
    let ok = !diagnostics.iter().any(Diagnostic::is_error);
    (ok.then_some(file), diagnostics)
}

/// Runs `job` on a scoped thread with a large stack (on the calling thread if no
/// thread can be spawned).
pub(crate) fn on_big_stack<T: Send>(job: impl Fn() -> T + Sync) -> T {
    std::thread::scope(|scope| {
        let spawned = std::thread::Builder::new()
            .name("reckon-front".to_string())
            .stack_size(STACK_BYTES)
            .spawn_scoped(scope, &job);
        match spawned {
            Ok(handle) => handle
                .join()
                .unwrap_or_else(|panic| std::panic::resume_unwind(panic)),
            Err(_) => job(),
        }
    })
}

#[cfg(test)]
mod tests {
    use super::ast::*;
    use super::*;

    fn parse_ok(text: &str) -> File {
        let (file, diagnostics) = parse(text);
        assert!(diagnostics.iter().all(|d| !d.is_error()), "{diagnostics:?}");
        file.expect("a file when there is no error")
    }

    fn const_value(text: &str) -> Expr {
        match parse_ok(text).items.into_iter().next() {
            Some(Item::Const(c)) => c.value,
            other => panic!("expected a constant, got {other:?}"),
        }
    }

    /// Renders an expression fully parenthesised, to make precedence visible.
    fn shape(e: &Expr) -> String {
        match &e.kind {
            ExprKind::Quantity(q) => match &q.unit {
                Some(u) => format!("[{} {}]", q.text, u.text()),
                None => q.text.clone(),
            },
            ExprKind::Name(n) => n.name.clone(),
            ExprKind::Neg(a) => format!("(-{})", shape(a)),
            ExprKind::Binary(op, a, b) => format!("({} {} {})", shape(a), op.symbol(), shape(b)),
            ExprKind::Call(f, args) => {
                let args: Vec<String> = args.iter().map(shape).collect();
                format!("{}({})", f.name, args.join(", "))
            }
            ExprKind::Paren(a) => shape(a),
        }
    }

    fn errors(text: &str) -> Vec<(String, String)> {
        parse(text)
            .1
            .into_iter()
            .filter(Diagnostic::is_error)
            .map(|d| (d.code.id.to_string(), d.message))
            .collect()
    }

    #[test]
    fn unary_minus_binds_looser_than_power() {
        assert_eq!(shape(&const_value("const c = -x^2")), "(-(x ^ 2))");
        assert_eq!(shape(&const_value("const c = -x * y")), "((-x) * y)");
        assert_eq!(shape(&const_value("const c = 2^-1")), "(2 ^ (-1))");
        assert_eq!(shape(&const_value("const c = a^b^c")), "(a ^ (b ^ c))");
        assert_eq!(shape(&const_value("const c = a - b - c")), "((a - b) - c)");
        assert_eq!(
            shape(&const_value("const c = a + b * c / d")),
            "(a + ((b * c) / d))"
        );
    }

    #[test]
    fn quantity_units_are_greedy_except_over_star() {
        assert_eq!(shape(&const_value("const c = 0.5 m * x")), "([0.5 m] * x)");
        assert_eq!(shape(&const_value("const c = 2 m/s^2")), "[2 m/s^2]");
        assert_eq!(shape(&const_value("const c = 3 N·m")), "[3 N*m]");
        assert_eq!(shape(&const_value("const c = 3 (N*m)")), "[3 (N*m)]");
        assert_eq!(
            shape(&const_value("const c = 4 deg/h/sqrt(h)")),
            "[4 deg/h/sqrt(h)]"
        );
        assert_eq!(shape(&const_value("const c = 1 Hz^(1/2)")), "[1 Hz^(1/2)]");
        assert_eq!(shape(&const_value("const c = 99.9 %")), "[99.9 %]");
        assert_eq!(shape(&const_value("const c = 1_000 m")), "[1_000 m]");
    }

    #[test]
    fn a_number_ending_a_statement_does_not_swallow_the_next_name() {
        let file = parse_ok("motion continuous { x' = 2 y' = 3 m/s }");
        let Some(Item::Motion(m)) = file.items.first() else {
            panic!("expected motion");
        };
        assert_eq!(m.equations.len(), 2);
        assert_eq!(shape(&m.equations[0].value), "2");
        let file = parse_ok("sensor s { a : m = 2 b : m = 3 m noise ~ normal(1 m) }");
        let Some(Item::Sensor(s)) = file.items.first() else {
            panic!("expected sensor");
        };
        assert_eq!(s.items.len(), 3);
    }

    #[test]
    fn comments_survive_and_docs_attach() {
        let file = parse_ok(
            "/// The cart.\nmodel cart // tail\nstate {\n  /// Along the rail.\n  x : m\n}\n",
        );
        assert_eq!(file.comments.len(), 3);
        let Some(Item::Model(model)) = file.items.first() else {
            panic!("expected model");
        };
        assert_eq!(
            model.doc.as_ref().map(|d| d.text.as_str()),
            Some("The cart.")
        );
        let Some(Item::State(state)) = file.items.get(1) else {
            panic!("expected state");
        };
        assert_eq!(
            state.vars[0].doc.as_ref().map(|d| d.text.as_str()),
            Some("Along the rail.")
        );
    }

    #[test]
    fn spans_exclude_trailing_blanks_and_comments() {
        let text = "const c = 2 m   // note\n";
        let value = const_value(text);
        assert_eq!(&text[value.span.start..value.span.end], "2 m");
    }

    #[test]
    fn every_broken_item_is_reported() {
        let found = errors("state { x m }\nconst c = \ninput { u : m/s }\nsensor s { r : = x }");
        let codes: Vec<&str> = found.iter().map(|(c, _)| c.as_str()).collect();
        assert_eq!(codes, ["E0101", "E0101", "E0101"]);
        assert!(found[0].1.contains("found `m`"), "{found:?}");
        assert!(found[2].1.contains("a unit such as `m`"), "{found:?}");
    }

    #[test]
    fn hostile_inputs_give_diagnostics() {
        assert_eq!(errors("const c = 1e400")[0].0, "E0104");
        assert_eq!(errors("state { x : m^99999999999999999999 }")[0].0, "E0104");
        assert_eq!(errors("const c = 2 \u{7}")[0].0, "E0105");
        let deep = format!("const c = {}1{}", "(".repeat(10_000), ")".repeat(10_000));
        assert_eq!(errors(&deep)[0].0, "E0103");
        let long = format!("const c = 1{}", " + 1".repeat(1_000));
        assert_eq!(errors(&long)[0].0, "E0103");
        let garbage: String = (0u8..=255).cycle().take(5_000).map(char::from).collect();
        assert!(!errors(&garbage).is_empty());
        assert!(parse("").1.is_empty());
    }
}
