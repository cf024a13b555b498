//! Robustness: the demo specs and the invalid-spec corpus, mutated by a seeded
//! generator (token swaps, deletions, duplications, unit swaps, extreme numbers,
//! deep nesting, truncation), must keep the pipeline invariants of
//! [`crate::invariants`]; and every saved crash input in `tests/crashes/` must too.
//!
//! The default run is sized for CI; `RECKON_LONG_TESTS=1` runs the long version.

use std::collections::HashSet;
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::{Path, PathBuf};
use std::time::Instant;

use crate::invariants::run_pipeline;

/// Mutated inputs per run: CI, and with `RECKON_LONG_TESTS=1`.
const CASES: usize = 20_000;
const LONG_CASES: usize = 100_000;

/// A small seeded generator (SplitMix64): reproducible runs without a dependency.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^ (z >> 31)
    }

    /// Uniform in `0..bound`; `bound` must be positive.
    fn below(&mut self, bound: usize) -> usize {
        (self.next() % bound as u64) as usize
    }

    fn pick<'a>(&mut self, items: &[&'a str]) -> &'a str {
        items[self.below(items.len())]
    }
}

/// Units a unit token may be swapped for, including ones of other dimensions.
const UNITS: &[&str] = &[
    "m", "s", "kg", "rad", "deg", "m/s", "m/s^2", "ft", "mbar", "rpm", "Hz", "sqrt(Hz)", "K", "Pa",
    "kn", "mm", "deg/s", "1", "m^-1", "s^2",
];
/// Number texts at and beyond the edges of `f64`, and ones the grammar may refuse.
const NUMBERS: &[&str] = &[
    "1e308",
    "1e-308",
    "1e309",
    "-1e308",
    "0",
    "-0",
    "0.0",
    "1e-320",
    "NaN",
    "nan",
    "inf",
    "-inf",
    "18446744073709551616",
    "0.00000000000000000000001",
    "1e",
    "1.",
    ".5",
    "1e+",
    "99999999999999999999999999999999999999",
    "5e-324",
];
/// Tokens of the language's structure, inserted where they do not belong.
const STRUCTURE: &[&str] = &[
    "state",
    "input",
    "motion",
    "continuous",
    "discrete",
    "process",
    "sensor",
    "initial",
    "model",
    "const",
    "{",
    "}",
    "(",
    ")",
    "~",
    "=",
    ":",
    ",",
    "'",
    "^",
    "%",
    "wrap",
    "dt",
    "normal(",
    "white(",
    "gate",
    "noise",
    "*",
    "/",
    "-",
    "+",
    "\n",
    "///",
    "//",
    "\u{e9}",
];

/// Splits text into tokens: identifier/number runs, whitespace runs, single others.
fn tokens(text: &str) -> Vec<&str> {
    let mut out = Vec::new();
    let mut start = 0;
    let mut chars = text.char_indices().peekable();
    while let Some((i, c)) = chars.next() {
        let class = |c: char| {
            if c.is_alphanumeric() || c == '_' || c == '.' {
                0
            } else if c.is_whitespace() {
                1
            } else {
                2
            }
        };
        let here = class(c);
        let next = chars.peek().map(|&(_, n)| class(n));
        if here == 2 || next != Some(here) {
            let end = i + c.len_utf8();
            out.push(&text[start..end]);
            start = end;
        }
    }
    out
}

fn is_number(token: &str) -> bool {
    token.starts_with(|c: char| c.is_ascii_digit())
}

fn is_unit(token: &str) -> bool {
    UNITS.contains(&token)
}

/// `depth` nested parentheses around `inner`.
fn nested(open: &str, close: &str, inner: &str, depth: usize) -> String {
    format!("{}{inner}{}", open.repeat(depth), close.repeat(depth))
}

/// Applies one random mutation to the token list.
fn mutate(rng: &mut Rng, toks: &mut Vec<String>) {
    if toks.is_empty() {
        toks.push(rng.pick(STRUCTURE).to_string());
        return;
    }
    let at = rng.below(toks.len());
    match rng.below(9) {
        0 => {
            let other = rng.below(toks.len());
            toks.swap(at, other);
        }
        1 => {
            toks.remove(at);
        }
        2 => {
            let copy = toks[at].clone();
            toks.insert(at, copy);
        }
        3 => {
            // Prefer a unit token; fall back to any.
            let units: Vec<usize> = (0..toks.len()).filter(|&i| is_unit(&toks[i])).collect();
            let target = if units.is_empty() {
                at
            } else {
                units[rng.below(units.len())]
            };
            toks[target] = rng.pick(UNITS).to_string();
        }
        4 => {
            let numbers: Vec<usize> = (0..toks.len()).filter(|&i| is_number(&toks[i])).collect();
            let target = if numbers.is_empty() {
                at
            } else {
                numbers[rng.below(numbers.len())]
            };
            toks[target] = rng.pick(NUMBERS).to_string();
        }
        5 => {
            let depth = 1 + rng.below(400);
            let snippet = match rng.below(3) {
                0 => nested("(", ")", "1", depth),
                1 => nested("sqrt(", ")", "dt", depth),
                _ => nested("-", "", "1", depth),
            };
            toks.insert(at, snippet);
        }
        6 => toks.insert(at, rng.pick(STRUCTURE).to_string()),
        7 => toks.truncate(at),
        _ => {
            // Duplicate a whole run of tokens, e.g. a line or a block.
            let end = (at + 1 + rng.below(40)).min(toks.len());
            let run: Vec<String> = toks[at..end].to_vec();
            toks.splice(at..at, run);
        }
    }
}

fn repo_files(dir: &str, keep: impl Fn(&Path) -> bool) -> Vec<PathBuf> {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("..").join(dir);
    let mut files: Vec<PathBuf> = std::fs::read_dir(&dir)
        .unwrap_or_else(|e| panic!("cannot read {}: {e}", dir.display()))
        .filter_map(|entry| entry.ok().map(|e| e.path()))
        .filter(|p| keep(p))
        .collect();
    files.sort();
    files
}

fn is_spec(path: &Path) -> bool {
    path.extension().is_some_and(|e| e == "reckon")
}

/// The seeds: the demo specs and the corpus, as text (lossily, for the one corpus
/// file that is deliberately not UTF-8).
fn seeds() -> Vec<String> {
    let mut files = repo_files("specs", is_spec);
    files.extend(repo_files("tests/ui", is_spec));
    files
        .iter()
        .map(|path| {
            let bytes = std::fs::read(path)
                .unwrap_or_else(|e| panic!("cannot read {}: {e}", path.display()));
            String::from_utf8_lossy(&bytes).into_owned()
        })
        .collect()
}

/// Runs the pipeline on `text`, returning the panic message if it panicked.
fn survives(text: &str) -> Result<(), String> {
    catch_unwind(AssertUnwindSafe(|| run_pipeline(text))).map_err(|payload| {
        payload
            .downcast_ref::<String>()
            .cloned()
            .or_else(|| payload.downcast_ref::<&str>().map(|s| s.to_string()))
            .unwrap_or_else(|| "non-string panic".to_string())
    })
}

#[test]
fn mutated_specs_keep_the_pipeline_invariants() {
    let long = std::env::var_os("RECKON_LONG_TESTS").is_some_and(|v| v == "1");
    let cases = if long { LONG_CASES } else { CASES };
    let seeds = seeds();
    let mut rng = Rng(0x005e_ed0f_2ec0);
    // Many mutants differ only in comments or spacing; the whole pipeline runs once
    // per distinct text.
    let mut seen = HashSet::new();
    let mut failures = Vec::new();
    let started = Instant::now();
    for case in 0..cases {
        let seed = &seeds[rng.below(seeds.len())];
        let mut toks: Vec<String> = tokens(seed).into_iter().map(String::from).collect();
        for _ in 0..1 + rng.below(3) {
            mutate(&mut rng, &mut toks);
        }
        let text = toks.concat();
        if !seen.insert(text.clone()) {
            continue;
        }
        if let Err(message) = survives(&text) {
            failures.push(format!(
                "case {case}: {message}\n--- input ---\n{text}\n---"
            ));
            if failures.len() >= 3 {
                break;
            }
        }
    }
    println!(
        "{cases} mutated cases ({} distinct) in {:.1} s",
        seen.len(),
        started.elapsed().as_secs_f64()
    );
    assert!(failures.is_empty(), "{}", failures.join("\n\n"));
}

#[test]
fn the_tokeniser_round_trips() {
    for seed in seeds() {
        assert_eq!(tokens(&seed).concat(), seed);
    }
}

#[test]
fn saved_crash_inputs_no_longer_crash() {
    let files = repo_files("tests/crashes", |p| {
        p.file_name().is_some_and(|n| n != "README.md")
    });
    for path in files {
        let bytes =
            std::fs::read(&path).unwrap_or_else(|e| panic!("cannot read {}: {e}", path.display()));
        let text = String::from_utf8_lossy(&bytes);
        if let Err(message) = survives(&text) {
            panic!("{} still crashes: {message}", path.display());
        }
    }
}
