//! The invalid-spec corpus: every `tests/ui/*.reckon` is checked and its rendered
//! diagnostics compared with the golden `*.stderr` beside it. Run with
//! `RECKON_BLESS=1` to rewrite the golden files after an intended change.
//!
//! The corpus also has to cover the catalogue: every code the front end owns must
//! be produced by at least one file.

use std::collections::BTreeSet;
use std::path::{Path, PathBuf};

use reckon::check::check_bytes;
use reckon::diag::{codes, render};

fn corpus() -> Vec<PathBuf> {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("../tests/ui");
    let mut files: Vec<PathBuf> = std::fs::read_dir(&dir)
        .unwrap_or_else(|e| panic!("cannot read {}: {e}", dir.display()))
        .filter_map(|entry| entry.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|e| e == "reckon"))
        .collect();
    files.sort();
    files
}

fn file_name(path: &Path) -> String {
    path.file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default()
}

#[test]
fn corpus_output_matches_golden_files() {
    let bless = std::env::var_os("RECKON_BLESS").is_some_and(|v| v == "1");
    let mut failures = Vec::new();
    for path in corpus() {
        let bytes =
            std::fs::read(&path).unwrap_or_else(|e| panic!("cannot read {}: {e}", path.display()));
        let output = check_bytes(&bytes);
        let name = file_name(&path);
        if output.diagnostics.is_empty() {
            failures.push(format!("{name}: produced no diagnostic"));
            continue;
        }
        let rendered = render::human(&name, &String::from_utf8_lossy(&bytes), &output.diagnostics);
        let golden = path.with_extension("stderr");
        if bless {
            std::fs::write(&golden, &rendered)
                .unwrap_or_else(|e| panic!("cannot write {}: {e}", golden.display()));
            continue;
        }
        match std::fs::read_to_string(&golden) {
            Ok(expected) if expected == rendered => {}
            Ok(expected) => failures.push(format!(
                "{name}: output differs\n--- expected\n{expected}\n--- actual\n{rendered}"
            )),
            Err(_) => failures.push(format!(
                "{name}: no golden file (run with RECKON_BLESS=1)\n{rendered}"
            )),
        }
    }
    assert!(
        failures.is_empty(),
        "{} corpus failure(s):\n\n{}",
        failures.len(),
        failures.join("\n\n")
    );
}

#[test]
fn corpus_is_large_and_named_after_its_first_code() {
    let files = corpus();
    assert!(files.len() >= 60, "only {} corpus files", files.len());
    for path in files {
        let name = file_name(&path);
        let Some(code) = name.split('_').next().and_then(codes::find) else {
            continue;
        };
        let output = check_bytes(&std::fs::read(&path).unwrap_or_default());
        assert!(
            output.diagnostics.iter().any(|d| d.code == code),
            "{name} is named after {} but does not produce it",
            code.id
        );
    }
}

#[test]
fn every_front_end_code_is_produced_by_the_corpus() {
    let mut produced = BTreeSet::new();
    for path in corpus() {
        let output = check_bytes(&std::fs::read(&path).unwrap_or_default());
        produced.extend(output.diagnostics.iter().map(|d| d.code.id));
    }
    // E0001 is an internal error; E06xx and E07xx belong to later stages.
    let missing: Vec<&str> = codes::ALL
        .iter()
        .map(|c| c.id)
        .filter(|id| *id != codes::INTERNAL.id && !id.starts_with("E06") && !id.starts_with("E07"))
        // Back-end warnings; the Rust back end's tests produce each of them.
        .filter(|id| !id.starts_with("W085"))
        .filter(|id| !produced.contains(id))
        .collect();
    assert!(missing.is_empty(), "codes with no corpus case: {missing:?}");
}
