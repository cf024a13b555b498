//! `reckon explain CODE`: the long explanation of a diagnostic code.

use reckon::diag::codes;

use super::{EXIT_OK, EXIT_USAGE};

#[derive(clap::Args)]
#[command(after_help = "Examples:\n  reckon explain E0303\n  reckon explain w0801")]
pub struct Args {
    /// A code such as E0303 (case does not matter).
    code: String,
}

pub fn run(args: &Args) -> i32 {
    match codes::find(&args.code) {
        Some(code) => {
            let severity = if code.severity == reckon::diag::Severity::Error {
                "error"
            } else {
                "warning"
            };
            println!(
                "{} ({severity}): {}\n\n{}",
                code.id, code.title, code.explanation
            );
            EXIT_OK
        }
        None => {
            eprintln!("error: `{}` is not a reckon diagnostic code", args.code);
            let close = closest(&args.code);
            if !close.is_empty() {
                eprintln!("help: did you mean {}?", close.join(" or "));
            } else {
                eprintln!("help: codes look like E0101 (errors) or W0801 (warnings)");
            }
            EXIT_USAGE
        }
    }
}

/// Codes that differ from `input` in at most one character, or that end in the
/// same digits (`301` finds `E0301`).
fn closest(input: &str) -> Vec<String> {
    let input = input.to_ascii_uppercase();
    codes::ALL
        .iter()
        .filter(|c| {
            let differing =
                c.id.chars()
                    .zip(input.chars())
                    .filter(|(a, b)| a != b)
                    .count()
                    + c.id.len().abs_diff(input.len());
            differing <= 1 || (input.len() >= 3 && c.id.ends_with(&input))
        })
        .map(|c| format!("`{}`", c.id))
        .take(3)
        .collect()
}
