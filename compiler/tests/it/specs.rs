//! The demo specs in `specs/` are the project's showcase: each must check with no
//! error and no warning, and together they must exercise both kinds of motion.

use std::path::{Path, PathBuf};

use reckon::check::check_source;
use reckon::model::MotionKind;

fn demo_specs() -> Vec<PathBuf> {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("../specs");
    let mut files: Vec<PathBuf> = std::fs::read_dir(&dir)
        .unwrap_or_else(|e| panic!("cannot read {}: {e}", dir.display()))
        .filter_map(|entry| entry.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|e| e == "reckon"))
        .collect();
    files.sort();
    files
}

#[test]
fn every_demo_spec_checks_clean() {
    let specs = demo_specs();
    assert!(specs.len() >= 5, "only {} demo specs", specs.len());
    let mut kinds = Vec::new();
    for path in specs {
        let text = std::fs::read_to_string(&path)
            .unwrap_or_else(|e| panic!("cannot read {}: {e}", path.display()));
        let output = check_source(&text);
        let rendered =
            reckon::diag::render::human(&path.display().to_string(), &text, &output.diagnostics);
        assert!(output.diagnostics.is_empty(), "{rendered}");
        let model = output
            .model
            .unwrap_or_else(|| panic!("{}: no model", path.display()));
        assert!(
            model.doc.is_some(),
            "{}: the model needs a doc comment",
            path.display()
        );
        kinds.push(model.motion.kind);
    }
    assert!(kinds.contains(&MotionKind::Continuous) && kinds.contains(&MotionKind::Discrete));
}
