//! Formatter tests: golden layouts of messy inputs, and the three guarantees
//! (idempotent, meaning preserved, every comment kept in order) over every spec in
//! the repository that parses.

use std::path::{Path, PathBuf};

use proptest::prelude::*;

use super::format_source;
use crate::syntax::ast::CommentKind;

fn formatted(text: &str) -> String {
    format_source(text).unwrap_or_else(|d| panic!("does not parse: {d:?}"))
}

// ------------------------------------------------------------------ golden layouts

/// Everything crammed on few lines, odd spacing, a trailing comment inside a
/// one-line block.
const CRAMMED: &str = "/// A cart on a rail.
model   rail_cart
const  mass=2.5 kg // measured
state{x:m  v : m/s   }   // both in SI
input { push : N~normal( 0.1 N ) }
motion continuous{ x'=v v' =push/mass}
process{v~white(0.02 m/s^2/sqrt( Hz ))}
sensor encoder { pos:m=x   noise~normal(1 mm) gate 99.5% }
initial{x~normal(0 m,0.1 m) v ~ normal(0 m/s , 0.5 m/s)}
";

/// Comments everywhere: before items, between statements, after code, inside a
/// statement split over lines, inside empty blocks, at the end of the file.
const COMMENTED: &str = "// Header comment for the file.

// A second paragraph.
/// The buoy.
model drifting_buoy
// Before the state block.
state {   // after the brace
  /// Eastward offset.
  east : m   // local frame

  north:m
  // between statements
  set_speed : m/s
  set_direction : rad wrap // wraps
} // after the closing brace
motion continuous {
  east' = set_speed * cos(set_direction) // current
  north' = set_speed * // split over
      sin(set_direction) // two lines
}
process {
  // nothing yet
}
input {}
sensor gnss {
  e : m = east
  n : m = north
  // shared noise follows
  noise ~ normal(3 m)
}


// Trailing comment at the end.
";

/// Long and short names, units with and without suffixes, a sensor with arguments
/// and a full covariance, a grid range and a discrete motion.
const ALIGNMENT: &str = "model shuttle
state {
  position : m in 0 m..120 m by 0.25 m
  heading : deg wrap
  v : m/s
}
motion discrete { position = position+v*dt   heading = heading v = v }
sensor beacon(bx:m,bn : m) {
  range:m=hypot(position-bx, bn)
  bearing :deg wrap= atan2(bn , bx-position) - heading
  noise~covariance[0.0625 m^2,0 m·deg;0 m·deg,4 deg^2]
}
sensor compass {
  heading_reading : deg wrap = heading
  heading_reading ~ normal(2 deg)   // per component
  gate 99 %
}
initial { position ~ uniform(0 m .. 120 m) heading~triangle(0 deg,10 deg) v~normal(1 m/s) }
";

#[test]
fn crammed_spec_is_laid_out() {
    insta::assert_snapshot!("crammed", formatted(CRAMMED));
}

#[test]
fn comments_stay_in_place() {
    insta::assert_snapshot!("commented", formatted(COMMENTED));
}

#[test]
fn columns_align_within_blocks() {
    insta::assert_snapshot!("alignment", formatted(ALIGNMENT));
}

#[test]
fn a_file_that_does_not_parse_is_refused_with_its_diagnostics() {
    let errors = format_source("state { x m }").expect_err("a syntax error");
    assert_eq!(errors[0].code.id, "E0101");
}

#[test]
fn empty_and_comment_only_files() {
    assert_eq!(formatted(""), "");
    assert_eq!(formatted("\n\n   \n"), "");
    assert_eq!(
        formatted("  // only a note   \n\n\n// and another\n"),
        "// only a note\n\n// and another\n"
    );
}

#[test]
fn line_breaks_and_tabs_are_normalised() {
    assert_eq!(
        formatted("model a\r\nstate {\r\n\tx\t:\tm // note\t\r\n}\r\n"),
        "model a\n\nstate {\n  x : m  // note\n}\n"
    );
}

#[test]
fn consecutive_constants_may_stay_grouped() {
    assert_eq!(
        formatted("model a\nconst b = 1 m\n/// doc\nconst c = 2 m\n\n\nconst d = 3 m\nstate { x : m }"),
        "model a\n\nconst b = 1 m\n/// doc\nconst c = 2 m\n\nconst d = 3 m\n\nstate {\n  x : m\n}\n"
    );
}

#[test]
fn warnings_do_not_stop_formatting() {
    // A doc comment above a block header documents nothing (a warning); it is kept.
    assert_eq!(
        formatted("/// the states\nstate { x : m }"),
        "/// the states\nstate {\n  x : m\n}\n"
    );
}

// ------------------------------------------------------------------ guarantees

/// The three guarantees for one input that parses.
fn assert_guarantees(name: &str, text: &str) {
    let once = formatted(text);
    let twice = formatted(&once);
    assert_eq!(once, twice, "{name}: formatting is not idempotent");
    assert_same_meaning(name, text, &once);
    assert_comments_kept(name, text, &once);
}

/// Both texts give the same syntax tree and the same checked model (or the same
/// diagnostics, for specs the checker rejects), positions aside.
fn assert_same_meaning(name: &str, before: &str, after: &str) {
    let tree = |text: &str| {
        let (file, _) = crate::syntax::parse(text);
        let file = file.unwrap_or_else(|| panic!("{name}: does not parse"));
        without_spans(&format!("{:#?}", file.items))
    };
    assert_eq!(tree(before), tree(after), "{name}: the syntax tree changed");
    let checked = |text: &str| {
        let output = crate::check::check_source(text);
        let codes: Vec<&str> = output.diagnostics.iter().map(|d| d.code.id).collect();
        (without_spans(&format!("{:#?}", output.model)), codes)
    };
    assert_eq!(
        checked(before),
        checked(after),
        "{name}: the checked model changed"
    );
}

/// Debug text with every `Span { start: .., end: .. }` replaced by `Span`, so two
/// trees compare equal when they differ only in positions.
fn without_spans(debug: &str) -> String {
    let mut out = String::with_capacity(debug.len());
    let mut rest = debug;
    while let Some(at) = rest.find("Span {") {
        out.push_str(&rest[..at]);
        out.push_str("Span");
        rest = rest[at..].find('}').map_or("", |end| &rest[at + end + 1..]);
    }
    out.push_str(rest);
    out
}

/// Every comment of the input appears in the output, in the same order.
fn assert_comments_kept(name: &str, before: &str, after: &str) {
    let (file, _) = crate::syntax::parse(before);
    let Some(file) = file else { return };
    let mut from = 0;
    for comment in &file.comments {
        let slashes = if comment.kind == CommentKind::Doc {
            "///"
        } else {
            "//"
        };
        let text = format!("{slashes}{}", comment.text.trim_end());
        match after[from..].find(&text) {
            Some(at) => from += at + text.len(),
            None => panic!("{name}: comment `{text}` missing or out of order in:\n{after}"),
        }
    }
}

#[test]
fn golden_inputs_keep_the_guarantees() {
    for (name, text) in [
        ("crammed", CRAMMED),
        ("commented", COMMENTED),
        ("alignment", ALIGNMENT),
    ] {
        assert_guarantees(name, text);
    }
}

/// Every `.reckon` file under the repository's `specs/` and `tests/` (the invalid-spec
/// corpus and the end-to-end test specs).
fn corpus() -> Vec<PathBuf> {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("..");
    let mut found = Vec::new();
    let mut folders = vec![root.join("specs"), root.join("tests")];
    while let Some(folder) = folders.pop() {
        let Ok(entries) = std::fs::read_dir(&folder) else {
            continue;
        };
        for entry in entries.flatten() {
            let path = entry.path();
            if path.is_dir() {
                folders.push(path);
            } else if path.extension().is_some_and(|e| e == "reckon") {
                found.push(path);
            }
        }
    }
    found.sort();
    found
}

#[test]
fn every_spec_in_the_repository_keeps_the_guarantees() {
    let mut checked = 0;
    for path in corpus() {
        let text = std::fs::read_to_string(&path).unwrap_or_default();
        if format_source(&text).is_ok() {
            assert_guarantees(&path.display().to_string(), &text);
            checked += 1;
        }
    }
    assert!(checked > 0, "no spec in specs/ or tests/ parsed");
}

// ------------------------------------------------------------------ blanks do not matter

/// The inputs of the golden tests plus every parseable repository spec.
fn parseable_texts() -> Vec<String> {
    let mut texts: Vec<String> = [CRAMMED, COMMENTED, ALIGNMENT].map(String::from).to_vec();
    texts.extend(
        corpus()
            .iter()
            .filter_map(|p| std::fs::read_to_string(p).ok())
            .filter(|t| format_source(t).is_ok()),
    );
    texts
}

/// Rewrites the blanks of `text` without moving any comment to or from the end of a
/// line and without adding or removing blank lines: every run of spaces between two
/// tokens of a line becomes one of `choices` (spaces, a tab, a line break); indentation
/// becomes one space. The layout must not depend on any of that.
fn reblank(text: &str, choices: &[usize]) -> String {
    const BLANKS: [&str; 4] = [" ", "   ", "\t", "\n"];
    let mut out = String::with_capacity(text.len() * 2);
    let mut choice = choices.iter().cycle();
    let mut rest = text;
    while !rest.is_empty() {
        if let Some(comment) = rest.strip_prefix("//") {
            let end = comment.find('\n').map_or(comment.len(), |n| n);
            out.push_str("//");
            out.push_str(&comment[..end]);
            rest = &comment[end..];
        } else if rest.starts_with([' ', '\t']) {
            let run = rest.len() - rest.trim_start_matches([' ', '\t']).len();
            let after = &rest[run..];
            let line_start = out.is_empty() || out.ends_with('\n');
            if after.starts_with("//") || after.starts_with('\n') || after.is_empty() {
                out.push_str(&rest[..run]);
            } else if line_start {
                out.push(' ');
            } else {
                out.push_str(BLANKS[choice.next().copied().unwrap_or(0) % BLANKS.len()]);
            }
            rest = after;
        } else {
            let next = rest.chars().next().map_or(1, char::len_utf8);
            out.push_str(&rest[..next]);
            rest = &rest[next..];
        }
    }
    out
}

proptest! {
    #[test]
    fn layout_ignores_blanks_within_lines(pick in any::<prop::sample::Index>(), choices in prop::collection::vec(0usize..4, 1..40)) {
        let texts = parseable_texts();
        let text = pick.get(&texts);
        let shuffled = reblank(text, &choices);
        prop_assert_eq!(format_source(&shuffled).ok(), format_source(text).ok(), "re-blanked:\n{}", shuffled);
    }
}
