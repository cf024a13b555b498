//! Reading `reckon.toml` for the subcommands that use it, with its diagnostics
//! rendered against the file.

use std::path::{Path, PathBuf};

use reckon::diag::render;
use reckon::project::{self, Project};
use reckon::sim::SimError;

use super::{EXIT_ERRORS, EXIT_USAGE};

/// The parsed project file and the folder its relative paths start from.
pub struct Loaded {
    pub project: Project,
    pub folder: PathBuf,
    pub name: String,
    pub text: String,
}

/// Reads and parses the project file; on failure prints why and returns the exit code.
pub fn load(path: &Path) -> Result<Loaded, i32> {
    let name = path.display().to_string();
    let text = std::fs::read_to_string(path).map_err(|error| {
        eprintln!("error: cannot read `{name}`: {error}");
        EXIT_USAGE
    })?;
    let project = project::parse_project(&text).map_err(|diagnostic| {
        eprint!("{}", render::human(&name, &text, &[diagnostic]));
        EXIT_ERRORS
    })?;
    let folder = path.parent().unwrap_or(Path::new("")).to_path_buf();
    Ok(Loaded {
        project,
        folder,
        name,
        text,
    })
}

/// Prints a scenario's errors against the file they point into (the project file or
/// the scenario's spec); returns the exit code.
pub fn report_sim_error(loaded: &Loaded, error: SimError) -> i32 {
    match error {
        SimError::Scenario(diagnostics) => {
            eprint!(
                "{}",
                render::human(&loaded.name, &loaded.text, &diagnostics)
            );
        }
        SimError::Spec {
            path,
            text,
            diagnostics,
        } => {
            eprint!(
                "{}",
                render::human(&path.display().to_string(), &text, &diagnostics)
            );
        }
    }
    EXIT_ERRORS
}
