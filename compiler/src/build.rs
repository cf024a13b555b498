//! The build-script API: generating estimator modules from a crate's `build.rs`.
//!
//! ```no_run
//! // build.rs of a firmware crate
//! fn main() {
//!     reckon::build::compile_spec("specs/rail_cart.reckon").unwrap();
//! }
//! // src/main.rs: mod rail_cart { include!(concat!(env!("OUT_DIR"), "/rail_cart.rs")); }
//! ```
//!
//! [`compile_spec`] is the one-call shortcut; [`Builder`] sets options, the output
//! folder and file-name suffixes, or builds every `[[estimator]]` of a `reckon.toml`.
//! Files are written only when their content changed, and `cargo:rerun-if-changed=`
//! lines are printed for every input. Failures are a [`BuildError`] whose `Display`
//! and `Debug` both show the diagnostics with file, line and column, so `unwrap()` in
//! a build script fails readably.

use std::fmt;
use std::io;
use std::path::{Path, PathBuf};

use crate::back::output;
use crate::back::rust;
use crate::diag::{self, Diagnostic};
pub use crate::options::{EstimatorOptions, Integrator, Method, Scalar, UnscentedParams, UpdateForm};
use crate::project;

/// Generates the module for one spec into `$OUT_DIR/<model>.rs` with default options
/// (extended Kalman filter, `f64`); returns the path written.
pub fn compile_spec(spec: impl AsRef<Path>) -> Result<PathBuf, BuildError> {
    let mut written = Builder::new().compile(&[spec])?;
    written.pop().ok_or(BuildError::NothingToBuild)
}

/// Why a build failed.
pub enum BuildError {
    /// A file could not be read or written.
    Io {
        /// The file.
        path: PathBuf,
        /// What the operating system said.
        error: io::Error,
    },
    /// A spec (or project file) has errors.
    Diagnostics {
        /// The file the diagnostics point into.
        path: PathBuf,
        /// Its text, for line and column numbers.
        text: String,
        /// The errors.
        diagnostics: Vec<Diagnostic>,
    },
    /// No output folder: `OUT_DIR` is unset (not in a build script) and none was given.
    NoOutDir,
    /// Nothing was asked for.
    NothingToBuild,
}

impl fmt::Display for BuildError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            BuildError::Io { path, error } => write!(f, "{}: {error}", path.display()),
            BuildError::Diagnostics {
                path,
                text,
                diagnostics,
            } => {
                let path = path.display().to_string();
                f.write_str(&diag::render::human(&path, text, diagnostics))
            }
            BuildError::NoOutDir => f.write_str(
                "no output folder: OUT_DIR is not set (call from a build script, or set Builder::out_dir)",
            ),
            BuildError::NothingToBuild => f.write_str("no spec to build"),
        }
    }
}

impl fmt::Debug for BuildError {
    /// The same text as `Display`: `unwrap()` in a build script prints it as is.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "\n{self}")
    }
}

impl std::error::Error for BuildError {}

/// One module to generate.
#[derive(Debug, Clone, PartialEq)]
struct Job {
    spec: PathBuf,
    /// `None`: `<out_dir>/<model><suffix>.rs`.
    output: Option<PathBuf>,
    options: EstimatorOptions,
}

/// Options and outputs of a build; see the module documentation.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Builder {
    options: EstimatorOptions,
    out_dir: Option<PathBuf>,
    suffix: String,
    cargo_metadata: bool,
    jobs: Vec<Job>,
}

impl Builder {
    /// Default options: extended Kalman filter, `f64`, Joseph form, output in `$OUT_DIR`,
    /// `cargo:` lines printed.
    pub fn new() -> Builder {
        Builder {
            cargo_metadata: true,
            ..Builder::default()
        }
    }

    /// Every `[[estimator]]` of a project file, with its own options and output path
    /// (both relative to the project file's folder). More specs may be added with
    /// [`Builder::compile`], which uses the builder's own options for them.
    pub fn from_project(path: impl AsRef<Path>) -> Result<Builder, BuildError> {
        let path = path.as_ref();
        let text = read(path)?;
        let parsed = project::parse_project(&text).map_err(|diagnostic| {
            BuildError::Diagnostics {
                path: path.to_path_buf(),
                text: text.clone(),
                diagnostics: vec![diagnostic],
            }
        })?;
        let folder = path.parent().unwrap_or(Path::new(""));
        let jobs = parsed
            .estimators
            .into_iter()
            .map(|entry| Job {
                spec: folder.join(entry.spec),
                output: Some(folder.join(entry.output)),
                options: entry.options,
            })
            .collect();
        let mut builder = Builder::new();
        builder.jobs = jobs;
        if builder.cargo_metadata {
            println!("cargo:rerun-if-changed={}", path.display());
        }
        Ok(builder)
    }

    /// All options at once.
    pub fn options(mut self, options: EstimatorOptions) -> Builder {
        self.options = options;
        self
    }

    /// Filter method.
    pub fn method(mut self, method: Method) -> Builder {
        self.options.method = method;
        self
    }

    /// Scalar type.
    pub fn scalar(mut self, scalar: Scalar) -> Builder {
        self.options.scalar = scalar;
        self
    }

    /// Covariance update form.
    pub fn update(mut self, update: UpdateForm) -> Builder {
        self.options.update = update;
        self
    }

    /// Integrator for continuous motion.
    pub fn integrator(mut self, integrator: Integrator) -> Builder {
        self.options.integrator = integrator;
        self
    }

    /// Sigma-point scaling (unscented filter).
    pub fn unscented(mut self, unscented: UnscentedParams) -> Builder {
        self.options.unscented = unscented;
        self
    }

    /// Output folder for specs given to [`Builder::compile`] (default: `$OUT_DIR`).
    pub fn out_dir(mut self, out_dir: impl Into<PathBuf>) -> Builder {
        self.out_dir = Some(out_dir.into());
        self
    }

    /// Appended to the model name in output file names (`rail_cart_f32.rs`), so one
    /// spec can be built with several options into one folder.
    pub fn suffix(mut self, suffix: impl Into<String>) -> Builder {
        self.suffix = suffix.into();
        self
    }

    /// Whether to print `cargo:rerun-if-changed=` lines (on by default; the `reckon`
    /// binary turns them off).
    pub fn cargo_metadata(mut self, enabled: bool) -> Builder {
        self.cargo_metadata = enabled;
        self
    }

    /// Generates the project's modules and one module per spec in `specs`; returns the
    /// paths written (or left unchanged), in order. Stops at the first failing spec.
    pub fn compile(mut self, specs: &[impl AsRef<Path>]) -> Result<Vec<PathBuf>, BuildError> {
        let options = self.options;
        self.jobs.extend(specs.iter().map(|spec| Job {
            spec: spec.as_ref().to_path_buf(),
            output: None,
            options,
        }));
        if self.jobs.is_empty() {
            return Err(BuildError::NothingToBuild);
        }
        self.jobs.iter().map(|job| self.run(job)).collect()
    }

    fn run(&self, job: &Job) -> Result<PathBuf, BuildError> {
        if self.cargo_metadata {
            println!("cargo:rerun-if-changed={}", job.spec.display());
        }
        let text = read(&job.spec)?;
        let spec_path = job.spec.display().to_string();
        let generated = rust::generate(&spec_path, &text, &job.options).map_err(|diagnostics| {
            BuildError::Diagnostics {
                path: job.spec.clone(),
                text: text.clone(),
                diagnostics,
            }
        })?;
        if self.cargo_metadata {
            let rendered = diag::render::human(&spec_path, &text, &generated.warnings);
            for line in rendered.lines() {
                println!("cargo:warning={line}");
            }
        }
        let path = match &job.output {
            Some(path) => path.clone(),
            None => {
                let folder = match &self.out_dir {
                    Some(folder) => folder.clone(),
                    None => std::env::var_os("OUT_DIR")
                        .map(PathBuf::from)
                        .ok_or(BuildError::NoOutDir)?,
                };
                folder.join(format!("{}{}.rs", generated.report.model, self.suffix))
            }
        };
        output::write_if_changed(&path, &generated.code)
            .map_err(|error| BuildError::Io {
                path: path.clone(),
                error,
            })?;
        Ok(path)
    }
}

fn read(path: &Path) -> Result<String, BuildError> {
    std::fs::read_to_string(path).map_err(|error| BuildError::Io {
        path: path.to_path_buf(),
        error,
    })
}
