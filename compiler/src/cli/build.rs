//! `reckon build`: generates estimator modules from one spec (options on the command
//! line) or from every `[[estimator]]` of a `reckon.toml`, writing only what changed;
//! `--check` compares instead of writing, for CI.

use std::io::Write;
use std::path::PathBuf;

use reckon::back::output::{self, WriteOutcome};
use reckon::back::rust;
use reckon::diag::render;
use reckon::options::EstimatorOptions;

use super::options::{IntegratorArg, MethodArg, ScalarArg, UpdateArg};
use super::project_file;
use super::{EXIT_ERRORS, EXIT_OK, EXIT_USAGE};

#[derive(clap::Args)]
#[command(
    after_help = "Examples:\n  reckon build specs/survey_launch.reckon --method ekf --scalar f32 --out src/survey_launch.rs\n  reckon build                      # every [[estimator]] of ./reckon.toml\n  reckon build --check              # CI: fail when a generated file is out of date\n\nExit status: 0 success, 1 the spec has errors or (with --check) a file is out of date,\n2 a file cannot be read or written."
)]
pub struct Args {
    /// Spec to build. Without it, every estimator of the project file is built.
    #[arg(value_name = "SPEC")]
    spec: Option<PathBuf>,
    /// Project file listing estimators (used when no SPEC is given).
    #[arg(long, value_name = "FILE", default_value = "reckon.toml")]
    project: PathBuf,
    /// Output file for SPEC (default: standard output).
    #[arg(long, short, value_name = "FILE")]
    out: Option<PathBuf>,
    /// Filter method for SPEC.
    #[arg(long, value_enum, default_value = "ekf")]
    method: MethodArg,
    /// Scalar type for SPEC.
    #[arg(long, value_enum, default_value = "f64")]
    scalar: ScalarArg,
    /// Covariance update form for SPEC.
    #[arg(long, value_enum, default_value = "joseph")]
    update: UpdateArg,
    /// Integrator for continuous motion in SPEC.
    #[arg(long, value_enum, default_value = "auto")]
    integrator: IntegratorArg,
    /// Grid method: cells per axis for states whose range has no `by` cell size.
    #[arg(long, value_name = "N")]
    cells: Option<u32>,
    /// Particle method: number of particles (default 1000).
    #[arg(long, value_name = "N")]
    particles: Option<u32>,
    /// Compare with the files on disk instead of writing them; exit 1 when any differs.
    #[arg(long)]
    check: bool,
}

/// One module to produce.
struct Job {
    spec: PathBuf,
    /// `None`: standard output.
    output: Option<PathBuf>,
    options: EstimatorOptions,
}

pub fn run(args: &Args) -> i32 {
    let jobs = match jobs(args) {
        Ok(jobs) => jobs,
        Err(exit) => return exit,
    };
    let mut exit = EXIT_OK;
    for job in &jobs {
        exit = exit.max(build_one(job, args.check));
    }
    exit
}

fn jobs(args: &Args) -> Result<Vec<Job>, i32> {
    if let Some(spec) = &args.spec {
        let options = EstimatorOptions {
            method: args.method.into(),
            scalar: args.scalar.into(),
            update: args.update.into(),
            integrator: args.integrator.into(),
            grid_cells: args.cells,
            particles: args.particles,
            ..EstimatorOptions::default()
        };
        return Ok(vec![Job {
            spec: spec.clone(),
            output: args.out.clone(),
            options,
        }]);
    }
    let loaded = project_file::load(&args.project)?;
    if loaded.project.estimators.is_empty() {
        eprintln!("error: `{}` lists no [[estimator]]", loaded.name);
        return Err(EXIT_ERRORS);
    }
    let folder = &loaded.folder;
    Ok(loaded
        .project
        .estimators
        .into_iter()
        .map(|entry| Job {
            spec: folder.join(entry.spec),
            output: Some(folder.join(entry.output)),
            options: entry.options,
        })
        .collect())
}

fn build_one(job: &Job, check: bool) -> i32 {
    let name = job.spec.display().to_string();
    let text = match std::fs::read_to_string(&job.spec) {
        Ok(text) => text,
        Err(error) => {
            eprintln!("error: cannot read `{name}`: {error}");
            return EXIT_USAGE;
        }
    };
    let generated = match rust::generate(&name, &text, &job.options) {
        Ok(generated) => generated,
        Err(diagnostics) => {
            eprint!("{}", render::human(&name, &text, &diagnostics));
            return EXIT_ERRORS;
        }
    };
    eprint!("{}", render::human(&name, &text, &generated.warnings));
    let Some(path) = &job.output else {
        let written = std::io::stdout()
            .lock()
            .write_all(generated.code.as_bytes());
        return if written.is_ok() { EXIT_OK } else { EXIT_USAGE };
    };
    let shown = path.display();
    if check {
        if output::is_up_to_date(path, &generated.code) {
            eprintln!("up to date: {shown}");
            return EXIT_OK;
        }
        eprintln!("out of date: {shown} (from {name}); run `reckon build` and commit the result");
        return EXIT_ERRORS;
    }
    match output::write_if_changed(path, &generated.code) {
        Ok(outcome) => {
            let verb = match outcome {
                WriteOutcome::Written => "wrote",
                WriteOutcome::Unchanged => "unchanged",
            };
            eprintln!("{verb} {shown}: {}", generated.report.summary());
            EXIT_OK
        }
        Err(error) => {
            eprintln!("error: cannot write `{shown}`: {error}");
            EXIT_USAGE
        }
    }
}
