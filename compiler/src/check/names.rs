//! Name helpers shared by every check: reserved words and "did you mean" suggestions.

use crate::model::Func;

/// Names the language gives a meaning to; declarations may not reuse them.
pub(super) fn is_reserved(name: &str) -> bool {
    name == "pi" || name == "dt" || Func::from_name(name).is_some()
}

/// Edit distance (insertions, deletions, substitutions, adjacent swaps).
fn distance(a: &str, b: &str) -> usize {
    let a: Vec<char> = a.chars().collect();
    let b: Vec<char> = b.chars().collect();
    let mut rows = vec![vec![0usize; b.len() + 1]; a.len() + 1];
    for (i, row) in rows.iter_mut().enumerate() {
        row[0] = i;
    }
    for (j, cell) in rows[0].iter_mut().enumerate() {
        *cell = j;
    }
    for i in 1..=a.len() {
        for j in 1..=b.len() {
            let cost = usize::from(a[i - 1] != b[j - 1]);
            let mut best = (rows[i - 1][j] + 1)
                .min(rows[i][j - 1] + 1)
                .min(rows[i - 1][j - 1] + cost);
            if i > 1 && j > 1 && a[i - 1] == b[j - 2] && a[i - 2] == b[j - 1] {
                best = best.min(rows[i - 2][j - 2] + 1);
            }
            rows[i][j] = best;
        }
    }
    rows[a.len()][b.len()]
}

/// Up to three candidates close to `name`, closest first.
pub(super) fn suggest<'a>(
    name: &str,
    candidates: impl IntoIterator<Item = &'a str>,
) -> Vec<String> {
    let limit = (name.chars().count() / 3).max(1);
    let mut scored: Vec<(usize, &str)> = candidates
        .into_iter()
        .filter(|c| *c != name)
        .map(|c| (distance(&name.to_lowercase(), &c.to_lowercase()), c))
        .filter(|(d, _)| *d <= limit)
        .collect();
    scored.sort();
    scored.dedup();
    scored
        .into_iter()
        .take(3)
        .map(|(_, c)| c.to_string())
        .collect()
}

/// "did you mean `a` or `b`?", or `None` without candidates.
pub(super) fn did_you_mean(suggestions: &[String]) -> Option<String> {
    if suggestions.is_empty() {
        return None;
    }
    let quoted: Vec<String> = suggestions.iter().map(|s| format!("`{s}`")).collect();
    Some(format!("did you mean {}?", quoted.join(" or ")))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn suggestions_prefer_the_closest_spelling() {
        let names = ["speed", "heading", "east", "spin"];
        assert_eq!(suggest("sped", names), ["speed"]);
        assert_eq!(suggest("haeding", names), ["heading"]);
        assert!(suggest("altitude", names).is_empty());
    }

    #[test]
    fn builtins_are_reserved() {
        assert!(is_reserved("dt"));
        assert!(is_reserved("atan2"));
        assert!(!is_reserved("speed"));
    }
}
