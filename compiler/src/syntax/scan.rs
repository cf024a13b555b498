//! Cheap passes over the raw text that run before (and beside) the grammar:
//! collecting comments, splitting the file into top-level items for error
//! recovery, and refusing nesting deep enough to exhaust the parser's stack.
//!
//! The language has no string literals, so `//` always starts a comment and every
//! item keyword outside a comment starts an item; that is what makes these scans
//! exact rather than heuristic.

use super::ast::{Comment, CommentKind, Doc};
use crate::diag::Span;

/// Deepest nesting of brackets (plus chained powers) the parser accepts.
pub const MAX_NESTING: usize = 256;

/// Words that open a top-level item.
pub const ITEM_KEYWORDS: [&str; 8] = [
    "model", "const", "state", "input", "motion", "process", "sensor", "initial",
];

/// Every comment in `text`, in order.
pub fn comments(text: &str) -> Vec<Comment> {
    let bytes = text.as_bytes();
    let mut out = Vec::new();
    let mut i = 0;
    while i + 1 < bytes.len() {
        if bytes[i] == b'/' && bytes[i + 1] == b'/' {
            let end = text[i..].find('\n').map_or(text.len(), |n| i + n);
            let line = text[i..end].trim_end_matches('\r');
            let is_doc = line.starts_with("///") && !line.starts_with("////");
            let (kind, body) = if is_doc {
                (CommentKind::Doc, &line[3..])
            } else {
                (CommentKind::Line, &line[2..])
            };
            out.push(Comment {
                kind,
                text: body.to_string(),
                span: Span::new(i, i + line.len()),
            });
            i = end;
        } else {
            i += 1;
        }
    }
    out
}

/// Groups consecutive `///` comments (only whitespace between them) into docs, each
/// paired with the byte offset of the first non-blank character after it: the start
/// of the item it documents.
pub fn doc_blocks(text: &str, comments: &[Comment]) -> Vec<(usize, Doc)> {
    let mut out: Vec<(usize, Doc)> = Vec::new();
    let mut current: Option<(Vec<&str>, Span)> = None;
    for comment in comments {
        if comment.kind != CommentKind::Doc {
            if let Some((lines, span)) = current.take() {
                out.push(finish_doc(text, lines, span));
            }
            continue;
        }
        current = match current.take() {
            Some((mut lines, span)) if text[span.end..comment.span.start].trim().is_empty() => {
                lines.push(&comment.text);
                Some((lines, span.to(comment.span)))
            }
            Some((lines, span)) => {
                out.push(finish_doc(text, lines, span));
                Some((vec![&comment.text], comment.span))
            }
            None => Some((vec![&comment.text], comment.span)),
        };
    }
    if let Some((lines, span)) = current {
        out.push(finish_doc(text, lines, span));
    }
    out
}

fn finish_doc(text: &str, lines: Vec<&str>, span: Span) -> (usize, Doc) {
    let body: Vec<&str> = lines
        .iter()
        .map(|l| l.strip_prefix(' ').unwrap_or(l))
        .collect();
    let rest = &text[span.end..];
    let target = span.end + (rest.len() - rest.trim_start().len());
    (
        target,
        Doc {
            text: body.join("\n"),
            span,
        },
    )
}

/// Byte offsets where top-level items start: every item keyword outside comments,
/// plus offset 0 when the file does not begin with one. Splitting here lets a syntax
/// error in one item leave the others parseable.
pub fn item_starts(text: &str) -> Vec<usize> {
    let bytes = text.as_bytes();
    let mut starts = Vec::new();
    let mut i = 0;
    while i < bytes.len() {
        let b = bytes[i];
        if b == b'/' && bytes.get(i + 1) == Some(&b'/') {
            i = text[i..].find('\n').map_or(bytes.len(), |n| i + n);
        } else if b.is_ascii_alphanumeric() || b == b'_' {
            let end = bytes[i..]
                .iter()
                .position(|c| !(c.is_ascii_alphanumeric() || *c == b'_'))
                .map_or(bytes.len(), |n| i + n);
            if ITEM_KEYWORDS.contains(&&text[i..end]) {
                starts.push(i);
            }
            i = end;
        } else {
            i += 1;
        }
    }
    let first_code = first_code_offset(text);
    if starts.first() != Some(&first_code) && first_code < text.len() {
        starts.insert(0, first_code);
    }
    starts
}

/// Offset of the first byte that is neither blank nor inside a comment.
fn first_code_offset(text: &str) -> usize {
    let mut i = 0;
    loop {
        let rest = &text[i..];
        let trimmed = rest.trim_start();
        i += rest.len() - trimmed.len();
        if trimmed.starts_with("//") {
            i = text[i..].find('\n').map_or(text.len(), |n| i + n);
        } else {
            return i;
        }
    }
}

/// The span of the first bracket (or chained operator) that nests deeper than
/// [`MAX_NESTING`], if any. Chained `^` and `-` count as nesting because
/// right-associative powers and prefix minus recurse once per operator in the
/// parser; the count restarts at every separator that ends an expression.
pub fn too_deep(text: &str) -> Option<Span> {
    let bytes = text.as_bytes();
    let mut depth: usize = 0;
    let mut chained: usize = 0;
    let mut i = 0;
    while i < bytes.len() {
        match bytes[i] {
            b'/' if bytes.get(i + 1) == Some(&b'/') => {
                i = text[i..].find('\n').map_or(bytes.len(), |n| i + n);
                continue;
            }
            b'(' | b'[' | b'{' => {
                depth += 1;
                chained = 0;
            }
            b')' | b']' | b'}' => {
                depth = depth.saturating_sub(1);
                chained = 0;
            }
            b'^' | b'-' => chained += 1,
            b',' | b';' | b'=' | b'~' => chained = 0,
            _ => {}
        }
        if depth + chained > MAX_NESTING {
            return Some(Span::new(i, i + 1));
        }
        i += 1;
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn comments_are_collected_with_kind_and_span() {
        let text = "/// doc\nmodel m // tail\n//// not doc\n";
        let found = comments(text);
        assert_eq!(found.len(), 3);
        assert_eq!(found[0].kind, CommentKind::Doc);
        assert_eq!(found[0].text, " doc");
        assert_eq!(found[0].span, Span::new(0, 7));
        assert_eq!(found[1].kind, CommentKind::Line);
        assert_eq!(&text[found[1].span.start..found[1].span.end], "// tail");
        assert_eq!(found[2].kind, CommentKind::Line);
    }

    #[test]
    fn doc_lines_group_and_point_at_the_next_item() {
        let text = "/// one\n/// two\n\nmodel m\n/// lone\n// plain\nconst c = 1";
        let blocks = doc_blocks(text, &comments(text));
        assert_eq!(blocks.len(), 2);
        assert_eq!(blocks[0].1.text, "one\ntwo");
        assert_eq!(&text[blocks[0].0..blocks[0].0 + 5], "model");
        assert_eq!(blocks[1].1.text, "lone");
    }

    #[test]
    fn items_split_at_keywords_outside_comments() {
        let text = "junk model m // state\nconst my_state = 1 state { }";
        let starts = item_starts(text);
        let words: Vec<&str> = starts.iter().map(|&s| &text[s..s + 4]).collect();
        assert_eq!(words, ["junk", "mode", "cons", "stat"]);
    }

    #[test]
    fn nesting_limit_counts_brackets_and_chained_powers() {
        let deep = format!("const c = {}1{}", "(".repeat(300), ")".repeat(300));
        assert_eq!(
            too_deep(&deep),
            Some(Span::new(10 + MAX_NESTING, 11 + MAX_NESTING))
        );
        let shallow = format!("const c = {}1{}", "(".repeat(100), ")".repeat(100));
        assert_eq!(too_deep(&shallow), None);
        let powers = format!("const c = 2{}", "^2".repeat(300));
        assert!(too_deep(&powers).is_some());
        let minus = format!("const c = {}2", "-".repeat(300));
        assert!(too_deep(&minus).is_some());
        let sum = format!("const c = 2{}", "+2".repeat(3000));
        assert_eq!(too_deep(&sum), None);
    }
}
