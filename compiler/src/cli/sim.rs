//! `reckon sim [NAME...]`: Monte Carlo runs of the scenarios in `reckon.toml`, with a
//! consistency summary on the terminal and plots, tables and the summary on disk.

use std::io::{IsTerminal, Write};
use std::path::PathBuf;
use std::time::{Duration, Instant};

use reckon::diag::render;
use reckon::sim;

use super::project_file;
use super::{EXIT_OK, EXIT_USAGE};

#[derive(clap::Args)]
#[command(
    after_help = "Examples:\n  reckon sim                        # every [[scenario]] of ./reckon.toml\n  reckon sim rail_cart --runs 500 --seed 7\n  reckon sim survey_launch --out sim-out\n\nWrites states.svg (truth, estimate, +/-3 sigma per state), nees.svg, nis.svg, steps.csv,\nreadings.csv and summary.txt into OUT/<scenario>/.\n\nExit status: 0 every scenario ran, 1 a scenario or spec has errors, 2 a file cannot be\nread or written."
)]
pub struct Args {
    /// Scenarios to run (default: all of them).
    #[arg(value_name = "NAME")]
    names: Vec<String>,
    /// Project file with the scenarios.
    #[arg(long, value_name = "FILE", default_value = "reckon.toml")]
    project: PathBuf,
    /// Output folder; each scenario writes into a subfolder named after it.
    #[arg(long, value_name = "DIR", default_value = "sim-out")]
    out: PathBuf,
    /// Monte Carlo runs (overrides the scenario's `runs`).
    #[arg(long)]
    runs: Option<usize>,
    /// Random seed (overrides the scenario's `seed`).
    #[arg(long)]
    seed: Option<u64>,
}

pub fn run(args: &Args) -> i32 {
    let loaded = match project_file::load(&args.project) {
        Ok(loaded) => loaded,
        Err(exit) => return exit,
    };
    let scenarios = &loaded.project.scenarios;
    if let Some(unknown) = args
        .names
        .iter()
        .find(|n| !scenarios.iter().any(|s| &s.name == *n))
    {
        let known: Vec<&str> = scenarios.iter().map(|s| s.name.as_str()).collect();
        eprintln!(
            "error: no scenario `{unknown}` in `{}`; it has: {}",
            loaded.name,
            known.join(", ")
        );
        return EXIT_USAGE;
    }
    let selected = scenarios
        .iter()
        .filter(|s| args.names.is_empty() || args.names.contains(&s.name));
    let mut exit = EXIT_OK;
    for scenario in selected {
        let mut scenario = scenario.clone();
        scenario.runs = args.runs.unwrap_or(scenario.runs);
        scenario.seed = args.seed.unwrap_or(scenario.seed);
        let bar = ProgressBar::new(&scenario.name);
        let result = sim::run_scenario(&loaded.folder, &scenario, &|done, total| {
            bar.show(done, total)
        });
        bar.finish();
        let report = match result {
            Ok(report) => report,
            Err(error) => {
                exit = exit.max(project_file::report_sim_error(&loaded, error));
                continue;
            }
        };
        let spec = report.spec_path.display().to_string();
        eprint!(
            "{}",
            render::human(&spec, &report.spec_text, &report.warnings)
        );
        println!("{}", report.summary_text());
        match sim::write_outputs(&report, &args.out.join(&scenario.name)) {
            Ok(paths) => {
                for path in paths {
                    println!("wrote {}", path.display());
                }
            }
            Err(error) => {
                eprintln!("error: cannot write into `{}`: {error}", args.out.display());
                exit = exit.max(EXIT_USAGE);
            }
        }
    }
    exit
}

/// A one-line progress bar on stderr, shown only on a terminal and only once a
/// scenario has taken more than a second.
struct ProgressBar<'a> {
    name: &'a str,
    start: Instant,
    visible: bool,
}

impl<'a> ProgressBar<'a> {
    fn new(name: &'a str) -> ProgressBar<'a> {
        ProgressBar {
            name,
            start: Instant::now(),
            visible: std::io::stderr().is_terminal(),
        }
    }

    fn show(&self, done: usize, total: usize) {
        if !self.visible || self.start.elapsed() < Duration::from_secs(1) || total == 0 {
            return;
        }
        const WIDTH: usize = 30;
        let filled = WIDTH * done / total;
        let mut stderr = std::io::stderr().lock();
        let _ = write!(
            stderr,
            "\r{} [{}{}] {done}/{total} runs",
            self.name,
            "#".repeat(filled),
            ".".repeat(WIDTH - filled)
        );
        let _ = stderr.flush();
    }

    fn finish(&self) {
        if self.visible && self.start.elapsed() >= Duration::from_secs(1) {
            eprintln!();
        }
    }
}
