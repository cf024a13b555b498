//! `reckon check FILE...`: reads each spec, checks it, prints its diagnostics.

use std::io::Write;
use std::path::PathBuf;

use reckon::check::check_bytes;
use reckon::diag::render;

use super::{EXIT_ERRORS, EXIT_OK, EXIT_USAGE};

/// How diagnostics are printed.
#[derive(Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum Format {
    /// Text for people, with source excerpts (on stderr).
    Human,
    /// One JSON object per diagnostic and line (on stdout).
    Json,
}

#[derive(clap::Args)]
#[command(
    after_help = "Examples:\n  reckon check specs/rail_cart.reckon\n  reckon check --format json specs/*.reckon > diagnostics.jsonl\n\nExit status: 0 when no file has errors (warnings allowed), 1 when some file has\nerrors, 2 when a file cannot be read."
)]
pub struct Args {
    /// Spec files to check.
    #[arg(required = true, value_name = "FILE")]
    files: Vec<PathBuf>,
    /// Output format.
    #[arg(long, value_enum, default_value = "human")]
    format: Format,
}

pub fn run(args: &Args) -> i32 {
    let mut exit = EXIT_OK;
    let (mut errors, mut warnings) = (0usize, 0usize);
    let mut stdout = std::io::stdout().lock();
    let mut stderr = std::io::stderr().lock();
    for path in &args.files {
        let name = path.display().to_string();
        let bytes = match std::fs::read(path) {
            Ok(bytes) => bytes,
            Err(error) => {
                let _ = writeln!(stderr, "error: cannot read `{name}`: {error}");
                exit = EXIT_USAGE;
                continue;
            }
        };
        let output = check_bytes(&bytes);
        let text = String::from_utf8_lossy(&bytes);
        let printed = match args.format {
            Format::Human => write!(
                stderr,
                "{}",
                render::human(&name, &text, &output.diagnostics)
            ),
            Format::Json => write!(
                stdout,
                "{}",
                render::json_lines(&name, &text, &output.diagnostics)
            ),
        };
        if printed.is_err() {
            return EXIT_USAGE;
        }
        let file_errors = output.diagnostics.iter().filter(|d| d.is_error()).count();
        errors += file_errors;
        warnings += output.diagnostics.len() - file_errors;
        if file_errors > 0 && exit == EXIT_OK {
            exit = EXIT_ERRORS;
        }
    }
    if args.format == Format::Human {
        let files = args.files.len();
        let _ = writeln!(
            stderr,
            "checked {files} file{}: {errors} error{}, {warnings} warning{}",
            plural(files),
            plural(errors),
            plural(warnings)
        );
    }
    exit
}

fn plural(n: usize) -> &'static str {
    if n == 1 {
        ""
    } else {
        "s"
    }
}
