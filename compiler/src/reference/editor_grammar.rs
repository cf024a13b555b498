//! The editor grammar (`editors/textmate/reckon.tmLanguage.json`) keeps up with the
//! language: every keyword of the pest grammar, every built-in function and every
//! distribution is highlighted, under a scope of the right kind.

use std::collections::BTreeSet;

use super::drift::repository_root;
use crate::model::Func;

fn read(relative: &str) -> String {
    std::fs::read_to_string(repository_root().join(relative))
        .unwrap_or_else(|e| panic!("cannot read {relative}: {e}"))
}

/// Every `match` regex of the grammar with the scope names around it.
fn patterns(node: &serde_json::Value, scopes: &mut Vec<String>, out: &mut Vec<(String, String)>) {
    match node {
        serde_json::Value::Object(map) => {
            let mut names: Vec<String> = map
                .get("name")
                .and_then(|n| n.as_str())
                .map(String::from)
                .into_iter()
                .collect();
            if let Some(captures) = map.get("captures").and_then(|c| c.as_object()) {
                names.extend(
                    captures
                        .values()
                        .filter_map(|c| c.get("name")?.as_str().map(String::from)),
                );
            }
            if let Some(regex) = map.get("match").and_then(|m| m.as_str()) {
                let mut all = scopes.clone();
                all.extend(names.iter().cloned());
                out.push((regex.to_string(), all.join(" ")));
            }
            scopes.extend(names.iter().cloned());
            for value in map.values() {
                patterns(value, scopes, out);
            }
            scopes.truncate(scopes.len() - names.len());
        }
        serde_json::Value::Array(items) => items.iter().for_each(|i| patterns(i, scopes, out)),
        _ => {}
    }
}

/// The words a regex can match literally: runs of letters and digits, with the
/// escape letters of `\b`, `\s`, `\d` removed.
fn literal_words(regex: &str) -> BTreeSet<String> {
    let without_escapes: String = {
        let mut out = String::new();
        let mut chars = regex.chars();
        while let Some(c) = chars.next() {
            if c == '\\' {
                chars.next();
                out.push(' ');
            } else {
                out.push(c);
            }
        }
        out
    };
    without_escapes
        .split(|c: char| !(c.is_ascii_alphanumeric() || c == '_'))
        .filter(|w| !w.is_empty())
        .map(String::from)
        .collect()
}

/// Asserts `word` is matched by a pattern whose scope contains `scope`.
fn assert_highlighted(all: &[(String, String)], word: &str, scope: &str) {
    let found = all
        .iter()
        .any(|(regex, scopes)| scopes.contains(scope) && literal_words(regex).contains(word));
    assert!(found, "`{word}` is not highlighted with a `{scope}` scope");
}

fn grammar_patterns() -> Vec<(String, String)> {
    let json: serde_json::Value =
        serde_json::from_str(&read("editors/textmate/reckon.tmLanguage.json"))
            .expect("the editor grammar is valid JSON");
    assert_eq!(json["scopeName"], "source.reckon");
    assert_eq!(json["fileTypes"][0], "reckon");
    let mut out = Vec::new();
    patterns(&json, &mut Vec::new(), &mut out);
    out
}

/// The keywords of the pest grammar: the quoted words of its `keyword` rule and of
/// every rule written as `"word" ~ !ident_char`.
fn pest_keywords() -> BTreeSet<String> {
    let grammar = read("compiler/src/syntax/grammar.pest");
    let mut words = BTreeSet::new();
    for (at, _) in grammar.match_indices("~ !ident_char") {
        let rule_start = grammar[..at].rfind('=').unwrap_or(0);
        let body = &grammar[rule_start..at];
        for quoted in body.split('"').skip(1).step_by(2) {
            if quoted.chars().all(|c| c.is_ascii_alphabetic()) && !quoted.is_empty() {
                words.insert(quoted.to_string());
            }
        }
    }
    words
}

#[test]
fn every_pest_keyword_is_highlighted() {
    let all = grammar_patterns();
    let keywords = pest_keywords();
    for expected in ["model", "sensor", "covariance", "continuous", "by"] {
        assert!(
            keywords.contains(expected),
            "keyword extraction missed `{expected}`: {keywords:?}"
        );
    }
    for keyword in &keywords {
        let scoped = all.iter().any(|(regex, scopes)| {
            (scopes.contains("keyword") || scopes.contains("storage"))
                && literal_words(regex).contains(keyword.as_str())
        });
        assert!(
            scoped,
            "keyword `{keyword}` is not highlighted as a keyword"
        );
    }
}

#[test]
fn every_builtin_function_is_highlighted() {
    let all = grammar_patterns();
    for func in Func::ALL {
        assert_highlighted(&all, func.name(), "support.function");
    }
}

#[test]
fn every_distribution_is_highlighted() {
    let all = grammar_patterns();
    // The distribution names the spec language defines (docs/language.md): the three
    // shapes of `model::Distribution` and continuous white noise.
    for name in ["normal", "triangle", "uniform", "white"] {
        assert_highlighted(&all, name, "support.type.distribution");
    }
}

#[test]
fn comments_numbers_and_units_have_scopes() {
    let all = grammar_patterns();
    let scopes: String = all
        .iter()
        .map(|(_, s)| s.as_str())
        .collect::<Vec<_>>()
        .join(" ");
    for scope in [
        "comment.line.documentation",
        "comment.line.double-slash",
        "constant.numeric",
        "entity.name.type.unit",
        "constant.language",
    ] {
        assert!(scopes.contains(scope), "no pattern has the scope `{scope}`");
    }
}
