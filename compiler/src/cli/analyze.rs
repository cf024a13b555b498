//! `reckon analyze`: observability rank with the unobservable directions named in
//! state terms, linearity, sparsity and operation counts, for a spec at its initial
//! mean or along a scenario of `reckon.toml`.

use std::path::PathBuf;

use reckon::analyze;
use reckon::check::quantity;
use reckon::diag::render;
use reckon::options::EstimatorOptions;
use reckon::units::{Base, Dimension};

use super::options::IntegratorArg;
use super::project_file;
use super::{EXIT_ERRORS, EXIT_OK, EXIT_USAGE};

#[derive(clap::Args)]
#[command(
    after_help = "Examples:\n  reckon analyze specs/survey_launch.reckon --dt 10ms\n  reckon analyze --scenario rail_cart      # operating points along the scenario\n\nExit status: 0 analysed, 1 the spec or scenario has errors, 2 a file cannot be read."
)]
pub struct Args {
    /// Spec to analyse at its initial mean with zero inputs.
    #[arg(value_name = "SPEC", required_unless_present = "scenario")]
    spec: Option<PathBuf>,
    /// Analyse along this scenario of the project file instead.
    #[arg(long, value_name = "NAME", conflicts_with = "spec")]
    scenario: Option<String>,
    /// Project file with the scenario.
    #[arg(long, value_name = "FILE", default_value = "reckon.toml")]
    project: PathBuf,
    /// Motion step for the linearisation (a time quantity).
    #[arg(long, default_value = "10 ms")]
    dt: String,
    /// Integrator for continuous motion.
    #[arg(long, value_enum, default_value = "auto")]
    integrator: IntegratorArg,
}

pub fn run(args: &Args) -> i32 {
    match (&args.spec, &args.scenario) {
        (Some(spec), _) => analyze_spec(args, spec),
        (None, Some(name)) => analyze_scenario(args, name),
        (None, None) => EXIT_USAGE,
    }
}

fn analyze_spec(args: &Args, spec: &PathBuf) -> i32 {
    let dt = match quantity(&args.dt) {
        Ok((value, dimension))
            if dimension.compatible(&Dimension::base(Base::Time)) && value > 0.0 =>
        {
            value
        }
        Ok(_) => {
            eprintln!(
                "error: --dt must be a positive time, such as `10 ms` (got `{}`)",
                args.dt
            );
            return EXIT_USAGE;
        }
        Err(diagnostics) => {
            eprint!("{}", render::human("--dt", &args.dt, &diagnostics));
            return EXIT_USAGE;
        }
    };
    let name = spec.display().to_string();
    let text = match std::fs::read_to_string(spec) {
        Ok(text) => text,
        Err(error) => {
            eprintln!("error: cannot read `{name}`: {error}");
            return EXIT_USAGE;
        }
    };
    let options = EstimatorOptions {
        integrator: args.integrator.into(),
        ..EstimatorOptions::default()
    };
    match analyze::analyze_spec(&text, &options, dt) {
        Ok(report) => {
            print!("{report}");
            EXIT_OK
        }
        Err(diagnostics) => {
            eprint!("{}", render::human(&name, &text, &diagnostics));
            EXIT_ERRORS
        }
    }
}

fn analyze_scenario(args: &Args, name: &str) -> i32 {
    let loaded = match project_file::load(&args.project) {
        Ok(loaded) => loaded,
        Err(exit) => return exit,
    };
    let Some(scenario) = loaded.project.scenarios.iter().find(|s| s.name == name) else {
        eprintln!("error: no scenario `{name}` in `{}`", loaded.name);
        return EXIT_USAGE;
    };
    match analyze::analyze_scenario(&loaded.folder, scenario) {
        Ok(report) => {
            print!("{report}");
            EXIT_OK
        }
        Err(error) => project_file::report_sim_error(&loaded, error),
    }
}
