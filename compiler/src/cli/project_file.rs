//! Reading `reckon.toml` for the subcommands that use it, with its diagnostics
//! rendered against the file.

use std::path::{Path, PathBuf};

use reckon::diag::render;
use reckon::project::{self, Project};

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
