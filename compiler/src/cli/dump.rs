//! `reckon dump FILE`: prints the IR reckon derived from a spec (motion, Jacobians,
//! discretised noise, sensors, sparsity), for the curious and for snapshot tests.

use std::path::PathBuf;

use reckon::back::rust::lower_options;
use reckon::check::check_source;
use reckon::diag::render;
use reckon::ir;
use reckon::options::EstimatorOptions;

use super::options::IntegratorArg;
use super::{EXIT_ERRORS, EXIT_OK, EXIT_USAGE};

#[derive(clap::Args)]
#[command(
    after_help = "Examples:\n  reckon dump specs/rail_cart.reckon\n  reckon dump --integrator euler specs/survey_launch.reckon | less"
)]
pub struct Args {
    /// Spec to lower.
    #[arg(value_name = "FILE")]
    file: PathBuf,
    /// Integrator for continuous motion.
    #[arg(long, value_enum, default_value = "auto")]
    integrator: IntegratorArg,
}

pub fn run(args: &Args) -> i32 {
    let name = args.file.display().to_string();
    let text = match std::fs::read_to_string(&args.file) {
        Ok(text) => text,
        Err(error) => {
            eprintln!("error: cannot read `{name}`: {error}");
            return EXIT_USAGE;
        }
    };
    let checked = check_source(&text);
    eprint!("{}", render::human(&name, &text, &checked.diagnostics));
    let Some(model) = checked.model else {
        return EXIT_ERRORS;
    };
    let options = EstimatorOptions {
        integrator: args.integrator.into(),
        ..EstimatorOptions::default()
    };
    match ir::lower(&model, &lower_options(&options)) {
        Ok(lowered) => {
            print!("{}", ir::dump(&lowered));
            EXIT_OK
        }
        Err(diagnostics) => {
            eprint!("{}", render::human(&name, &text, &diagnostics));
            EXIT_ERRORS
        }
    }
}
