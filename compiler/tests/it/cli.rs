//! The `reckon` binary: exit codes, output formats and help texts.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn reckon(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_reckon"))
        .args(args)
        .output()
        .unwrap_or_else(|e| panic!("cannot run reckon: {e}"))
}

fn repo(path: &str) -> String {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("..")
        .join(path)
        .display()
        .to_string()
}

fn text(bytes: &[u8]) -> String {
    String::from_utf8_lossy(bytes).into_owned()
}

/// A scratch file unique to this test process.
fn scratch(name: &str, contents: &[u8]) -> PathBuf {
    let path = std::env::temp_dir().join(format!("reckon-cli-{}-{name}", std::process::id()));
    std::fs::write(&path, contents)
        .unwrap_or_else(|e| panic!("cannot write {}: {e}", path.display()));
    path
}

#[test]
fn clean_specs_exit_zero() {
    let out = reckon(&[
        "check",
        &repo("specs/rail_cart.reckon"),
        &repo("specs/canal_ferry.reckon"),
    ]);
    assert_eq!(out.status.code(), Some(0), "{}", text(&out.stderr));
    assert!(text(&out.stderr).contains("checked 2 files: 0 errors, 0 warnings"));
}

#[test]
fn warnings_alone_still_exit_zero() {
    let out = reckon(&["check", &repo("tests/ui/W0801_unobserved_state.reckon")]);
    assert_eq!(out.status.code(), Some(0));
    assert!(text(&out.stderr).contains("warning[W0801]"));
}

#[test]
fn errors_exit_one_and_render_for_people() {
    let out = reckon(&[
        "check",
        &repo("tests/ui/E0303_rate_with_position_unit.reckon"),
    ]);
    assert_eq!(out.status.code(), Some(1));
    let stderr = text(&out.stderr);
    assert!(stderr.contains("error[E0303]"), "{stderr}");
    assert!(
        stderr.contains("E0303_rate_with_position_unit.reckon:9:11"),
        "{stderr}"
    );
}

#[test]
fn json_lines_go_to_stdout_one_object_per_diagnostic() {
    let out = reckon(&[
        "check",
        "--format",
        "json",
        &repo("tests/ui/E0302_atan2_of_unlike_values.reckon"),
        &repo("tests/ui/W0802_bare_number_as_angle.reckon"),
    ]);
    assert_eq!(out.status.code(), Some(1));
    let stdout = text(&out.stdout);
    let objects: Vec<serde_json::Value> = stdout
        .lines()
        .map(|l| serde_json::from_str(l).unwrap_or_else(|e| panic!("bad JSON line {l}: {e}")))
        .collect();
    assert_eq!(objects.len(), 2);
    assert_eq!(objects[0]["code"], "E0302");
    assert_eq!(objects[0]["line"], 13);
    assert_eq!(objects[1]["code"], "W0802");
    assert_eq!(objects[1]["severity"], "warning");
    assert!(objects[1]["file"]
        .as_str()
        .is_some_and(|f| f.ends_with("W0802_bare_number_as_angle.reckon")));
}

#[test]
fn unreadable_files_exit_two() {
    let out = reckon(&["check", &repo("specs/no_such_spec.reckon")]);
    assert_eq!(out.status.code(), Some(2));
    assert!(text(&out.stderr).contains("cannot read"));
}

#[test]
fn invalid_utf8_is_a_diagnostic_with_its_offset() {
    let path = scratch("latin1.reckon", b"model t\n// caf\xe9\n");
    let out = reckon(&["check", &path.display().to_string()]);
    let _ = std::fs::remove_file(&path);
    assert_eq!(out.status.code(), Some(1));
    assert!(
        text(&out.stderr).contains("byte 0xE9 at offset 14"),
        "{}",
        text(&out.stderr)
    );
}

#[test]
fn usage_errors_exit_two() {
    assert_eq!(reckon(&[]).status.code(), Some(2));
    assert_eq!(reckon(&["check"]).status.code(), Some(2));
    assert_eq!(
        reckon(&["check", "--format", "xml", "x.reckon"])
            .status
            .code(),
        Some(2)
    );
}

#[test]
fn explain_prints_the_long_text() {
    let out = reckon(&["explain", "e0404"]);
    assert_eq!(out.status.code(), Some(0));
    let stdout = text(&out.stdout);
    assert!(
        stdout.starts_with("E0404 (error): white-noise density has the wrong dimension"),
        "{stdout}"
    );
    assert!(stdout.contains("Example:"));
}

#[test]
fn explain_suggests_for_unknown_codes() {
    let out = reckon(&["explain", "0303"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(
        text(&out.stderr).contains("did you mean `E0303`?"),
        "{}",
        text(&out.stderr)
    );
}

#[test]
fn every_command_has_help_with_an_example() {
    for args in [
        vec!["--help"],
        vec!["check", "--help"],
        vec!["explain", "--help"],
    ] {
        let out = reckon(&args);
        assert_eq!(out.status.code(), Some(0), "{args:?}");
        assert!(
            text(&out.stdout).contains("Examples:"),
            "{args:?}: {}",
            text(&out.stdout)
        );
    }
}
