//! `reckon fmt [--check] PATH...`: rewrites specs in canonical layout (folders are
//! searched for `*.reckon`); `--check` only reports the files that would change.

use std::path::{Path, PathBuf};

use reckon::back::output::write_if_changed;
use reckon::check::check_bytes;
use reckon::diag::render;
use reckon::format::format_source;

use super::{EXIT_ERRORS, EXIT_OK, EXIT_USAGE};

#[derive(clap::Args)]
#[command(
    after_help = "Examples:\n  reckon fmt specs/\n  reckon fmt --check specs/        # CI: exit 1 when a spec is not formatted\n\nExit status: 0 all formatted, 1 a file does not parse or (with --check) would change,\n2 a file cannot be read or written."
)]
pub struct Args {
    /// Spec files, or folders searched for `*.reckon`.
    #[arg(required = true, value_name = "PATH")]
    paths: Vec<PathBuf>,
    /// Report files that are not formatted instead of rewriting them.
    #[arg(long)]
    check: bool,
}

pub fn run(args: &Args) -> i32 {
    let mut files = Vec::new();
    for path in &args.paths {
        if let Err(error) = collect_specs(path, &mut files) {
            eprintln!("error: cannot read `{}`: {error}", path.display());
            return EXIT_USAGE;
        }
    }
    files
        .iter()
        .map(|file| format_one(file, args.check))
        .max()
        .unwrap_or(EXIT_OK)
}

/// `path` itself when it is a file; the `*.reckon` files below it (sorted) when it is
/// a folder.
fn collect_specs(path: &Path, files: &mut Vec<PathBuf>) -> std::io::Result<()> {
    if !path.is_dir() {
        files.push(path.to_path_buf());
        return Ok(());
    }
    let mut entries: Vec<PathBuf> = std::fs::read_dir(path)?
        .map(|entry| entry.map(|e| e.path()))
        .collect::<Result<_, _>>()?;
    entries.sort();
    for entry in entries {
        if entry.is_dir() || entry.extension().is_some_and(|e| e == "reckon") {
            collect_specs(&entry, files)?;
        }
    }
    Ok(())
}

fn format_one(file: &Path, check: bool) -> i32 {
    let name = file.display().to_string();
    let bytes = match std::fs::read(file) {
        Ok(bytes) => bytes,
        Err(error) => {
            eprintln!("error: cannot read `{name}`: {error}");
            return EXIT_USAGE;
        }
    };
    let Ok(text) = std::str::from_utf8(&bytes) else {
        let lossy = String::from_utf8_lossy(&bytes);
        eprint!(
            "{}",
            render::human(&name, &lossy, &check_bytes(&bytes).diagnostics)
        );
        return EXIT_ERRORS;
    };
    let formatted = match format_source(text) {
        Ok(formatted) => formatted,
        Err(diagnostics) => {
            eprint!("{}", render::human(&name, text, &diagnostics));
            return EXIT_ERRORS;
        }
    };
    if formatted == text {
        return EXIT_OK;
    }
    if check {
        eprintln!("would reformat {name}");
        return EXIT_ERRORS;
    }
    match write_if_changed(file, &formatted) {
        Ok(_) => {
            eprintln!("formatted {name}");
            EXIT_OK
        }
        Err(error) => {
            eprintln!("error: cannot write `{name}`: {error}");
            EXIT_USAGE
        }
    }
}
