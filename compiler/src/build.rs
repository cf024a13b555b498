//! The build-script API: generating estimator modules from a crate's `build.rs`.
//!
//! ```no_run
//! // In the `main` of a firmware crate's build.rs:
//! reckon::build::compile_spec("specs/rail_cart.reckon").unwrap();
//! // and in its src/main.rs:
//! // mod rail_cart { include!(concat!(env!("OUT_DIR"), "/rail_cart.rs")); }
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

use crate::back::output::{self, WriteOutcome};
use crate::back::rust::{self, GenerationReport};
use crate::diag::{self, Diagnostic};
pub use crate::options::{
    EstimatorOptions, Integrator, Method, Scalar, UnscentedParams, UpdateForm,
};
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
    /// Check mode: the file differs from what the spec generates now.
    OutOfDate {
        /// The stale file.
        path: PathBuf,
    },
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
            BuildError::OutOfDate { path } => write!(
                f,
                "{} is out of date: regenerate it from its spec",
                path.display()
            ),
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
    verify_only: bool,
    project: Option<PathBuf>,
    jobs: Vec<Job>,
}

/// One generated module.
#[derive(Debug, Clone, PartialEq)]
pub struct Built {
    /// Where it was written (or, when verifying, where it was compared).
    pub path: PathBuf,
    /// Whether the file changed.
    pub outcome: WriteOutcome,
    /// Facts about the generated code.
    pub report: GenerationReport,
    /// Warnings about the spec under the chosen method.
    pub warnings: Vec<Diagnostic>,
    /// The spec's text, for rendering the warnings.
    pub spec_text: String,
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
        let parsed =
            project::parse_project(&text).map_err(|diagnostic| BuildError::Diagnostics {
                path: path.to_path_buf(),
                text: text.clone(),
                diagnostics: vec![diagnostic],
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
        builder.project = Some(path.to_path_buf());
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

    /// Grid method: cells per axis for states whose range gives no cell size.
    pub fn grid_cells(mut self, cells: u32) -> Builder {
        self.options.grid_cells = Some(cells);
        self
    }

    /// Particle method: the number of particles.
    pub fn particles(mut self, particles: u32) -> Builder {
        self.options.particles = Some(particles);
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

    /// Compare instead of writing: a file that would change is a
    /// [`BuildError::OutOfDate`] (check mode for CI; nothing is written).
    pub fn verify_only(mut self, enabled: bool) -> Builder {
        self.verify_only = enabled;
        self
    }

    /// Generates the project's modules and one module per spec in `specs`; returns the
    /// paths written (or left unchanged), in order. Stops at the first failing spec.
    pub fn compile(self, specs: &[impl AsRef<Path>]) -> Result<Vec<PathBuf>, BuildError> {
        Ok(self
            .build(specs)?
            .into_iter()
            .map(|built| built.path)
            .collect())
    }

    /// As [`Builder::compile`], with each module's report and warnings.
    pub fn build(mut self, specs: &[impl AsRef<Path>]) -> Result<Vec<Built>, BuildError> {
        if let (true, Some(project)) = (self.cargo_metadata, &self.project) {
            println!("cargo:rerun-if-changed={}", project.display());
        }
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

    fn run(&self, job: &Job) -> Result<Built, BuildError> {
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
        let outcome = if self.verify_only {
            if !output::is_up_to_date(&path, &generated.code) {
                return Err(BuildError::OutOfDate { path });
            }
            WriteOutcome::Unchanged
        } else {
            output::write_if_changed(&path, &generated.code).map_err(|error| BuildError::Io {
                path: path.clone(),
                error,
            })?
        };
        Ok(Built {
            path,
            outcome,
            report: generated.report,
            warnings: generated.warnings,
            spec_text: text,
        })
    }
}

fn read(path: &Path) -> Result<String, BuildError> {
    std::fs::read_to_string(path).map_err(|error| BuildError::Io {
        path: path.to_path_buf(),
        error,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A fresh folder under the system temporary folder.
    fn scratch(name: &str) -> PathBuf {
        let dir = std::env::temp_dir().join(format!("reckon-build-{name}-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        dir
    }

    const SPEC: &str = "model probe\nstate { x : m }\nmotion continuous { x' = 0 m/s }\nprocess { x ~ white(0.1 m/sqrt(s)) }\nsensor ruler { reading : ft = x\n noise ~ normal(0.1 ft) }\ninitial { x ~ normal(0 m, 1 m) }\n";

    #[test]
    fn builds_once_then_leaves_the_file_alone() {
        let dir = scratch("once");
        let spec = dir.join("probe.reckon");
        assert!(write_if_changed_ok(&spec, SPEC));
        let builder = || {
            Builder::new()
                .cargo_metadata(false)
                .out_dir(&dir)
                .suffix("_f32")
                .scalar(Scalar::F32)
        };
        let first = builder().build(&[&spec]).unwrap_or_else(|e| panic!("{e}"));
        assert_eq!(first[0].path, dir.join("probe_f32.rs"));
        assert_eq!(first[0].outcome, WriteOutcome::Written);
        assert!(first[0].report.summary().contains("f32"));
        let second = builder().build(&[&spec]).unwrap_or_else(|e| panic!("{e}"));
        assert_eq!(second[0].outcome, WriteOutcome::Unchanged);
        // Check mode: up to date now, out of date after the spec changes.
        assert!(builder().verify_only(true).build(&[&spec]).is_ok());
        assert!(write_if_changed_ok(
            &spec,
            &SPEC.replace("0.1 ft", "0.2 ft")
        ));
        let stale = builder().verify_only(true).build(&[&spec]);
        assert!(matches!(stale, Err(BuildError::OutOfDate { .. })));
        let _ = std::fs::remove_dir_all(dir);
    }

    fn write_if_changed_ok(path: &Path, text: &str) -> bool {
        output::write_if_changed(path, text).is_ok()
    }

    #[test]
    fn errors_render_with_file_line_and_column_in_display_and_debug() {
        let dir = scratch("errors");
        let spec = dir.join("broken.reckon");
        let text = SPEC.replace("0.1 ft", "0.1 s");
        assert!(write_if_changed_ok(&spec, &text));
        let error = Builder::new()
            .cargo_metadata(false)
            .out_dir(&dir)
            .compile(&[&spec])
            .err()
            .unwrap_or_else(|| panic!("a reading noise in seconds was accepted"));
        let shown = format!("{error}");
        let location = format!("{}:6:17", spec.display());
        assert!(shown.contains(&location), "{shown}");
        assert!(shown.contains("error["), "{shown}");
        assert!(format!("{error:?}").contains(&shown));
        let _ = std::fs::remove_dir_all(dir);
    }

    #[test]
    fn a_refused_method_is_a_build_error() {
        let dir = scratch("refused");
        let spec = dir.join("probe.reckon");
        assert!(write_if_changed_ok(&spec, SPEC));
        let error = Builder::new()
            .cargo_metadata(false)
            .out_dir(&dir)
            .method(Method::Grid)
            .compile(&[&spec]);
        // The probe's state has no range for a grid to cover.
        assert!(format!("{:?}", error.err()).contains("E0605"));
        let _ = std::fs::remove_dir_all(dir);
    }

    #[test]
    fn a_project_file_builds_each_estimator_to_its_output() {
        let dir = scratch("project");
        assert!(write_if_changed_ok(&dir.join("specs/probe.reckon"), SPEC));
        let project = "[[estimator]]\nspec = \"specs/probe.reckon\"\noutput = \"src/probe_ukf.rs\"\nmethod = \"ukf\"\n\n[[estimator]]\nspec = \"specs/probe.reckon\"\noutput = \"src/probe_kf.rs\"\nmethod = \"kf\"\nscalar = \"f32\"\n";
        assert!(write_if_changed_ok(&dir.join("reckon.toml"), project));
        let built = Builder::from_project(dir.join("reckon.toml"))
            .and_then(|b| b.cargo_metadata(false).build(&[] as &[&str]))
            .unwrap_or_else(|e| panic!("{e}"));
        assert_eq!(built.len(), 2);
        assert_eq!(built[0].path, dir.join("src/probe_ukf.rs"));
        assert_eq!(built[1].report.method, Method::Kf);
        assert_eq!(built[1].report.scalar, Scalar::F32);
        let bad = Builder::from_project(dir.join("missing.toml"));
        assert!(matches!(bad, Err(BuildError::Io { .. })));
        let _ = std::fs::remove_dir_all(dir);
    }
}
