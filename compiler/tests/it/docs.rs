//! The language reference (`docs/language.md`) lists every diagnostic code the front
//! end owns, with the catalogue's title, so the page cannot drift from the code.

use std::path::Path;

use reckon::diag::codes;

#[test]
fn language_reference_lists_every_front_end_code() {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("../docs/language.md");
    let page = std::fs::read_to_string(&path)
        .unwrap_or_else(|e| panic!("cannot read {}: {e}", path.display()));
    let missing: Vec<String> = codes::ALL
        .iter()
        .filter(|c| *c != &codes::INTERNAL && !c.id.starts_with("E06") && !c.id.starts_with("E07"))
        .filter(|c| !page.contains(&format!("| {} | {} |", c.id, c.title)))
        .map(|c| format!("| {} | {} |", c.id, c.title))
        .collect();
    assert!(
        missing.is_empty(),
        "rows missing from docs/language.md:\n{}",
        missing.join("\n")
    );
}
