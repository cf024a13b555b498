//! Turns pest's parse errors into diagnostics that speak the language of the spec:
//! what was expected is named in words ("a unit such as `m` or `m/s`"), never by
//! grammar rule.

use pest::error::{ErrorVariant, InputLocation};

use super::parser::Rule;
use super::scan::ITEM_KEYWORDS;
use crate::diag::{codes, Diagnostic, Span};

const ITEM_WORDS: &str =
    "a new item (`model`, `const`, `state`, `input`, `motion`, `process`, `sensor` or `initial`)";

/// Words reserved by the grammar; using one as a name gets its own hint.
const RESERVED: [&str; 13] = [
    "model",
    "const",
    "state",
    "input",
    "motion",
    "process",
    "sensor",
    "initial",
    "noise",
    "gate",
    "wrap",
    "covariance",
    "by",
];

/// Punctuation worth naming when the grammar expected it.
const PUNCTUATION: [(&str, &str); 11] = [
    ("{", "`{`"),
    ("}", "`}`"),
    ("(", "`(`"),
    (")", "`)`"),
    ("[", "`[`"),
    ("]", "`]`"),
    (":", "`:`"),
    ("=", "`=`"),
    ("~", "`~`"),
    (",", "`,`"),
    ("..", "`..`"),
];

fn describe(rule: Rule) -> Option<&'static str> {
    use Rule::*;
    Some(match rule {
        ident | name => "a name",
        number | quantity | integer => "a number",
        expr | paren | call | neg | cov_row => "an expression",
        unit | unit_power | unit_symbol | unit_one | unit_sqrt | unit_paren => {
            "a unit such as `m` or `m/s`"
        }
        unit_exponent | neg_sign => "an exponent such as `2`, `-1` or `(1/2)`",
        add | sub | mul | div | pow => "an operator such as `+` or `*`",
        EOI | model_decl | const_decl | state_block | input_block | motion_block
        | process_block | sensor_block | initial_block | chunk => ITEM_WORDS,
        kw_model => "`model`",
        kw_const => "`const`",
        kw_state => "`state`",
        kw_input => "`input`",
        kw_motion => "`motion`",
        kw_process => "`process`",
        kw_sensor => "`sensor`",
        kw_initial => "`initial`",
        continuous | discrete => "`continuous` or `discrete`",
        state_var => "a state such as `x : m`",
        input_var => "an input such as `accel : m/s^2`",
        motion_eq => "an equation such as `x' = v` or `x = x + v * dt`",
        prime => "`'`",
        noise_stmt => "a statement such as `x ~ normal(1 m)`",
        dist => "a distribution such as `normal(1 m)`",
        range => "a range `lo .. hi`",
        covariance | kw_covariance => "`covariance [ ... ]`",
        grid_range | kw_in => "a range `in lo .. hi`",
        kw_by => "`by`",
        kw_wrap => "`wrap`",
        component => "a reading component such as `r : m = x`",
        shared_noise | kw_noise => "`noise ~ ...`",
        gate_stmt | kw_gate => "`gate 99 %`",
        param => "an argument such as `bx : m`",
        sensor_params => "`(`",
        _ => return None,
    })
}

/// What sits at `at`: a word, a number, a character, or the end.
fn found_at(text: &str, at: usize) -> (String, usize) {
    let rest = &text[at..];
    let Some(first) = rest.chars().next() else {
        return ("the end of the file".to_string(), 0);
    };
    if first.is_ascii_alphanumeric() || first == '_' {
        let len = rest
            .find(|c: char| !(c.is_ascii_alphanumeric() || c == '_' || c == '.'))
            .unwrap_or(rest.len());
        (format!("`{}`", &rest[..len]), len)
    } else if !is_language_char(first) {
        (format!("U+{:04X}", first as u32), first.len_utf8())
    } else {
        (format!("`{first}`"), first.len_utf8())
    }
}

fn join_alternatives(words: &[&str]) -> String {
    match words {
        [] => "something else".to_string(),
        [one] => one.to_string(),
        [init @ .., last] => format!("{} or {}", init.join(", "), last),
    }
}

/// A diagnostic for a pest error in the item starting at `offset` of `text`.
pub(super) fn syntax_error(
    error: &pest::error::Error<Rule>,
    text: &str,
    offset: usize,
) -> Diagnostic {
    let reported = match error.location {
        InputLocation::Pos(p) => p,
        InputLocation::Span((s, _)) => s,
    };
    let positives = match &error.variant {
        ErrorVariant::ParsingError { positives, .. } => positives.clone(),
        ErrorVariant::CustomError { message } => {
            // pest's own guards ("call limit reached", "stack limit reached").
            let at = (offset + reported).min(text.len());
            return Diagnostic::new(
                codes::TOO_DEEP,
                Span::new(at, at),
                format!("the parser gave up here: {message}"),
            )
            .with_hint("simplify the nesting around this point");
        }
    };

    // The detailed attempts reach the farthest point any rule got to, which is
    // where the writer's mistake usually is; fall back to pest's summary.
    let mut words: Vec<&str> = Vec::new();
    let mut push = |w: &'static str| {
        if !words.contains(&w) {
            words.push(w);
        }
    };
    let relative = match error.parse_attempts() {
        Some(attempts) if attempts.max_position >= reported => {
            for stack in attempts.call_stacks() {
                if let Some(w) = stack
                    .deepest
                    .get_rule()
                    .copied()
                    .or(stack.parent)
                    .and_then(describe)
                {
                    push(w);
                }
            }
            for token in attempts.expected_tokens() {
                let token = token.to_string();
                if let Some((_, quoted)) = PUNCTUATION.iter().find(|(p, _)| *p == token) {
                    push(quoted);
                }
            }
            attempts.max_position
        }
        _ => {
            positives
                .into_iter()
                .filter_map(describe)
                .for_each(&mut push);
            reported
        }
    };
    let mut at = (offset + relative).min(text.len());
    // A reserved word where a name belongs fails inside the word's own rule; point
    // at the whole word rather than at the blank after it.
    // Name characters are ASCII, one byte each.
    let word_start = at
        - text[..at]
            .chars()
            .rev()
            .take_while(|c| c.is_ascii_alphanumeric() || *c == '_')
            .count();
    if words.contains(&"a name") && RESERVED.contains(&&text[word_start..at]) {
        at = word_start;
    }
    let (found, found_len) = found_at(text, at);
    let span = Span::new(at, at + found_len);

    if let Some(c) = text[at..].chars().next() {
        if !is_language_char(c) {
            return Diagnostic::new(codes::INVALID_CHARACTER, span, format!("unexpected character {found}"))
                .with_label_message("this character is not part of the spec language")
                .with_hint("specs are plain text: names, numbers, units and the symbols + - * / ^ ( ) { } [ ] : = ~ , ; ' % ..");
        }
    }

    words.truncate(6);
    let expected = join_alternatives(&words);
    let mut diagnostic = Diagnostic::new(
        codes::SYNTAX,
        span,
        format!("expected {expected}, found {found}"),
    )
    .with_label_message(format!("expected {expected}"));
    let word = found.trim_matches('`');
    if ITEM_KEYWORDS.contains(&word) && words.contains(&"`}`") {
        diagnostic =
            diagnostic.with_hint(format!("a `}}` may be missing: `{word}` starts a new item"));
    } else if RESERVED.contains(&word) && words.contains(&"a name") {
        diagnostic =
            diagnostic.with_hint(format!("`{word}` is a reserved word; choose another name"));
    }
    diagnostic
}

/// Characters that may appear in a spec outside comments.
fn is_language_char(c: char) -> bool {
    (c.is_ascii() && (!c.is_ascii_control() || c.is_ascii_whitespace()))
        || "µμ°Ω·\u{FEFF}".contains(c)
}
