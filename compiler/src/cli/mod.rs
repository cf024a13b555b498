//! Command-line interface: the subcommand enum and the exit-code convention.
//!
//! Exit codes: 0 success (warnings allowed), 1 the input has errors, 2 usage or I/O
//! problem, 101 internal error (a panic caught in `main`: a bug in reckon; the same
//! status Rust gives an uncaught panic, so wrappers treat both alike). A new subcommand is a new variant of [`Command`] plus a module with an
//! `Args` struct and a `run` function.

mod analyze;
mod build;
mod check;
mod dump;
mod explain;
mod fmt;
mod new;
mod options;
mod project_file;
mod sim;

use clap::{Parser, Subcommand};

/// Exit code: everything checked out (warnings allowed).
pub const EXIT_OK: i32 = 0;
/// Exit code: some input has errors.
pub const EXIT_ERRORS: i32 = 1;
/// Exit code: bad usage or an I/O problem.
pub const EXIT_USAGE: i32 = 2;
/// Exit code: reckon itself failed (a caught panic).
pub const EXIT_INTERNAL: i32 = 101;

#[derive(Parser)]
#[command(
    name = "reckon",
    version,
    about = "Check state-estimator specs, generate estimators, simulate them",
    after_help = "Examples:\n  reckon check specs/rail_cart.reckon\n  reckon check --format json specs/*.reckon\n  reckon build specs/survey_launch.reckon --method ekf --out survey_launch.rs\n  reckon dump specs/rail_cart.reckon\n  reckon explain E0303"
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Check specs for syntax, unit, noise and structure errors.
    Check(check::Args),
    /// Generate estimator modules (from a spec, or every estimator of reckon.toml).
    Build(build::Args),
    /// Print what reckon derived from a spec: the IR with Jacobians and discretisation.
    Dump(dump::Args),
    /// Monte Carlo simulation of reckon.toml scenarios: NEES/NIS consistency, plots.
    Sim(sim::Args),
    /// Observability (with unobservable directions named), linearity, sparsity, op counts.
    Analyze(analyze::Args),
    /// Explain a diagnostic code, with an example.
    Explain(explain::Args),
    /// Lay specs out canonically (comments kept); --check for CI.
    Fmt(fmt::Args),
    /// Start a new spec with every section present and commented.
    New(new::Args),
}

/// Parses the command line, runs the subcommand, and returns the exit code.
pub fn run() -> i32 {
    let cli = match Cli::try_parse() {
        Ok(cli) => cli,
        Err(error) => {
            // `--help` and `--version` are reported as "errors" by clap but succeed.
            let code = if error.use_stderr() {
                EXIT_USAGE
            } else {
                EXIT_OK
            };
            // Nothing sensible remains to do if the terminal is gone.
            let _ = error.print();
            return code;
        }
    };
    match cli.command {
        Command::Check(args) => check::run(&args),
        Command::Build(args) => build::run(&args),
        Command::Dump(args) => dump::run(&args),
        Command::Sim(args) => sim::run(&args),
        Command::Analyze(args) => analyze::run(&args),
        Command::Explain(args) => explain::run(&args),
        Command::Fmt(args) => fmt::run(&args),
        Command::New(args) => new::run(&args),
    }
}
