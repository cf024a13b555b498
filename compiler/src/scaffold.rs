//! `reckon new NAME`: a starter spec with every section present and explained, plus
//! the lines that wire it into a project (`reckon.toml`) and into a firmware crate
//! (build script, dependencies, the `include!` of the generated module).
//!
//! The starter describes an invented small differential-drive rover with wheel
//! odometry and a position fix; its noise figures are written the way a datasheet
//! gives them, so the user's first edit is replacing numbers, not learning syntax.

use crate::diag::{codes, Diagnostic, Span};

/// Everything `reckon new` produces for one estimator.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Scaffold {
    /// Where the spec goes, relative to the project root: `specs/NAME.reckon`.
    pub spec_path: String,
    /// The starter spec.
    pub spec_text: String,
    /// An `[[estimator]]` table to append to `reckon.toml`.
    pub toml_entry: String,
    /// A `build.rs` for the firmware crate that generates the module at build time.
    pub build_rs: String,
    /// Lines for the firmware crate's `Cargo.toml`.
    pub cargo_lines: String,
    /// The line that brings the generated module into the firmware's source.
    pub include_line: String,
}

/// The starter files for a model called `name`. The name must be a spec identifier
/// (letters, digits and `_`, not starting with a digit) and not a keyword of the spec
/// language or of Rust, since it names the model, the spec file and the generated
/// module.
pub fn scaffold(name: &str) -> Result<Scaffold, Diagnostic> {
    check_name(name)?;
    let spec_path = format!("specs/{name}.reckon");
    Ok(Scaffold {
        spec_text: STARTER_SPEC.replace("NAME", name),
        toml_entry: format!(
            "[[estimator]]\n\
             spec = \"{spec_path}\"\n\
             output = \"src/{name}.rs\"\n\
             method = \"ekf\"          # kf, ekf, ukf, grid, particle\n\
             scalar = \"f32\"          # f32 or f64\n\
             update = \"joseph\"       # joseph or sequential\n\
             integrator = \"auto\"     # auto, euler or rk4\n"
        ),
        build_rs: format!(
            "// build.rs: regenerates the estimator into OUT_DIR whenever the spec changes.\n\
             fn main() {{\n    \
                 // Extended Kalman filter in f64. For other options:\n    \
                 // reckon::build::Builder::new().scalar(reckon::build::Scalar::F32).compile(&[\"{spec_path}\"])\n    \
                 reckon::build::compile_spec(\"{spec_path}\").unwrap();\n\
             }}\n"
        ),
        cargo_lines: "[dependencies]\n\
                      reckon-runtime = \"0.1\"   # or { path = \"../reckon/runtime\" }\n\
                      \n\
                      [build-dependencies]\n\
                      reckon = \"0.1\"           # or { path = \"../reckon/compiler\" }\n"
            .to_string(),
        include_line: format!(
            "mod {name} {{\n    include!(concat!(env!(\"OUT_DIR\"), \"/{name}.rs\"));\n}}\n"
        ),
        spec_path,
    })
}

/// Rust's strict and reserved keywords (Rust reference, "Keywords"): the name also
/// becomes a Rust module, so it cannot be one of these.
const RUST_KEYWORDS: [&str; 51] = [
    "as", "break", "const", "continue", "crate", "else", "enum", "extern", "false", "fn", "for",
    "if", "impl", "in", "let", "loop", "match", "mod", "move", "mut", "pub", "ref", "return",
    "self", "Self", "static", "struct", "super", "trait", "true", "type", "unsafe", "use", "where",
    "while", "async", "await", "dyn", "abstract", "become", "box", "do", "final", "macro",
    "override", "priv", "typeof", "unsized", "virtual", "yield", "try",
];

/// Accepts the names the spec grammar accepts after `model` (asking the parser, so
/// that rule lives in one place) that are not Rust keywords.
fn check_name(name: &str) -> Result<(), Diagnostic> {
    let (file, diagnostics) = crate::syntax::parse(&format!("model {name}"));
    let parsed_as_name = file.is_some_and(|f| {
        matches!(f.items.as_slice(), [crate::syntax::ast::Item::Model(m)] if m.name.name == name)
    });
    if parsed_as_name && diagnostics.is_empty() && !RUST_KEYWORDS.contains(&name) {
        return Ok(());
    }
    Err(Diagnostic::new(
        codes::SYNTAX,
        Span::new(0, name.len()),
        format!("`{name}` cannot name a model"),
    )
    .with_label_message(
        "the name becomes the model's name, the spec's file name and the module's name",
    )
    .with_hint(
        "use letters, digits and `_`, starting with a letter, and not a keyword of the spec \
         language or of Rust (such as `state` or `mod`): for example `field_rover`",
    ))
}

/// The starter spec; `NAME` stands for the model's name.
const STARTER_SPEC: &str = r#"/// NAME: a small differential-drive rover (starter spec from `reckon new`).
/// Two driven wheels, wheel encoders, a forward accelerometer and a position fix.
/// Replace the figures with your vehicle's own datasheet values.
model NAME

// ---------------------------------------------------------------- constants
// Fixed numbers with units, usable in any expression below.

/// Distance between the two wheel contact points.
const track = 0.32 m

// ---------------------------------------------------------------- state
// What the estimator tracks. Each variable has the unit you think in; the
// generated code keeps SI internally and converts at the edges.

state {
  /// Position east of the start point.
  east     : m
  /// Position north of the start point.
  north    : m
  /// Direction of travel, counter-clockwise from east.
  heading  : rad wrap
  /// Forward speed.
  speed    : m/s
  /// Turn rate, counter-clockwise positive.
  yaw_rate : rad/s
}

// ---------------------------------------------------------------- inputs
// Values the firmware passes to every prediction step, with their noise.

input {
  /// Forward acceleration from the IMU; datasheet noise 0.05 m/s^2 (1 sigma).
  accel : m/s^2 ~ normal(0.05 m/s^2)
}

// ---------------------------------------------------------------- motion
// How the state changes: rates (`name'`) in continuous time. States left out
// keep a zero rate. Use `motion discrete { x = ... dt ... }` for step equations.

motion continuous {
  east'    = speed * cos(heading)
  north'   = speed * sin(heading)
  heading' = yaw_rate
  speed'   = accel
}

// ---------------------------------------------------------------- process noise
// How far the real vehicle strays from the motion model: white noise on the
// rate, given as a density (sqrt of the power spectral density).

process {
  speed    ~ white(0.02 m/s^2/sqrt(Hz))
  yaw_rate ~ white(0.1 rad/s^2/sqrt(Hz))
}

// ---------------------------------------------------------------- sensors
// Each sensor predicts its reading from the state. Readings arrive in the
// units declared here; the firmware calls `correct_<sensor>` with them.

/// Wheel encoders, converted to wheel surface speeds.
sensor wheels {
  v_left  : m/s = speed - yaw_rate * track / 2
  v_right : m/s = speed + yaw_rate * track / 2
  noise   ~ normal(0.03 m/s)  // encoder quantisation and slip, 1 sigma
}

/// Position fix (for example a GNSS receiver), east and north in metres.
sensor position_fix {
  fix_east  : m = east
  fix_north : m = north
  noise     ~ normal(1.5 m)  // horizontal accuracy, 1 sigma
  gate 99.9 %                // reject readings this unlikely
}

// ---------------------------------------------------------------- initial belief
// Mean and standard deviation of each state at start-up.

initial {
  east     ~ normal(0 m, 2 m)
  north    ~ normal(0 m, 2 m)
  heading  ~ normal(0 deg, 30 deg)
  speed    ~ normal(0 m/s, 0.1 m/s)
  yaw_rate ~ normal(0 rad/s, 0.05 rad/s)
}
"#;

#[cfg(test)]
mod tests {
    use super::*;

    fn starter() -> Scaffold {
        scaffold("field_rover").expect("a valid name")
    }

    #[test]
    fn starter_spec_passes_check_without_warnings() {
        let output = crate::check::check_source(&starter().spec_text);
        assert!(output.diagnostics.is_empty(), "{:?}", output.diagnostics);
        let model = output.model.expect("a checked model");
        assert_eq!(model.name, "field_rover");
        assert_eq!(model.sensors.len(), 2);
        assert!(
            model.initial.iter().all(Option::is_some),
            "every state has an initial belief"
        );
    }

    #[test]
    fn starter_spec_is_already_formatted() {
        let spec = starter().spec_text;
        assert_eq!(
            crate::format::format_source(&spec).ok().as_deref(),
            Some(spec.as_str())
        );
    }

    #[test]
    fn starter_spec_has_every_section() {
        let (file, _) = crate::syntax::parse(&starter().spec_text);
        let file = file.expect("parses");
        let kinds: Vec<&str> = file
            .items
            .iter()
            .map(|item| match item {
                crate::syntax::ast::Item::Model(_) => "model",
                crate::syntax::ast::Item::Const(_) => "const",
                crate::syntax::ast::Item::State(_) => "state",
                crate::syntax::ast::Item::Input(_) => "input",
                crate::syntax::ast::Item::Motion(_) => "motion",
                crate::syntax::ast::Item::Process(_) => "process",
                crate::syntax::ast::Item::Sensor(_) => "sensor",
                crate::syntax::ast::Item::Initial(_) => "initial",
            })
            .collect();
        for section in [
            "model", "const", "state", "input", "motion", "process", "sensor", "initial",
        ] {
            assert!(kinds.contains(&section), "no {section} section");
        }
        assert!(
            file.items.iter().all(|item| {
                let before = &starter().spec_text[..item.span().start];
                before
                    .trim_end()
                    .lines()
                    .last()
                    .is_some_and(|l| l.trim_start().starts_with("//"))
            }),
            "every section is introduced by a comment"
        );
    }

    #[test]
    fn the_toml_entry_is_a_valid_project_file() {
        let project =
            crate::project::parse_project(&starter().toml_entry).expect("valid reckon.toml");
        let entry = &project.estimators[0];
        assert_eq!(entry.spec.to_str(), Some("specs/field_rover.reckon"));
        assert_eq!(entry.output.to_str(), Some("src/field_rover.rs"));
        assert_eq!(entry.options.scalar, crate::options::Scalar::F32);
    }

    #[test]
    fn wiring_names_the_spec_and_the_module() {
        let s = starter();
        assert_eq!(s.spec_path, "specs/field_rover.reckon");
        assert!(s.spec_text.contains("model field_rover\n"));
        assert!(s
            .build_rs
            .contains("compile_spec(\"specs/field_rover.reckon\")"));
        assert!(s.include_line.contains("\"/field_rover.rs\""));
        assert!(s.cargo_lines.contains("reckon-runtime"));
        let manifest: toml::Table = toml::from_str(&s.cargo_lines).expect("Cargo lines are TOML");
        assert!(manifest["build-dependencies"].get("reckon").is_some());
    }

    #[test]
    fn bad_names_are_refused_with_a_hint() {
        for bad in [
            "", "3rover", "my-rover", "state", "rover x", "rövér", "fn", "mod",
        ] {
            let error = scaffold(bad).expect_err(bad);
            assert_eq!(error.code, codes::SYNTAX);
            assert!(error.hint.is_some());
        }
        assert!(scaffold("_rover2").is_ok());
    }

    /// A firmware-like crate made only of what `reckon new` prints: the spec, the
    /// build script, the dependency lines (pointed at this repository) and the
    /// `include!`. It must build, and its estimator must run a predict/correct cycle.
    #[test]
    #[ignore = "slow: compiles reckon as a build dependency; run with --ignored"]
    fn starter_builds_and_runs_through_a_build_script() {
        let s = starter();
        let repository = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("..");
        let repository = repository.canonicalize().expect("repository folder");
        let crate_dir = std::env::temp_dir().join(format!("reckon-starter-{}", std::process::id()));
        std::fs::create_dir_all(crate_dir.join("specs")).expect("temporary crate");
        std::fs::create_dir_all(crate_dir.join("src")).expect("temporary crate");

        let mut manifest: toml::Table =
            toml::from_str(&s.cargo_lines).expect("Cargo lines are TOML");
        let local = |folder: &str| {
            let mut table = toml::Table::new();
            table.insert(
                "path".into(),
                repository.join(folder).display().to_string().into(),
            );
            toml::Value::Table(table)
        };
        manifest["dependencies"]["reckon-runtime"] = local("runtime");
        manifest["build-dependencies"]["reckon"] = local("compiler");
        let package = "[package]\nname = \"starter_firmware\"\nversion = \"0.1.0\"\nedition = \"2021\"\n\n[workspace]\n\n";
        let files = [
            ("Cargo.toml", format!("{package}{manifest}")),
            (s.spec_path.as_str(), s.spec_text.clone()),
            ("build.rs", s.build_rs.clone()),
            (
                "src/main.rs",
                format!(
                    "{}\nfn main() {{\n\
                     let mut estimator = field_rover::Estimator::new().expect(\"initial belief\");\n\
                     estimator.predict(&field_rover::Input {{ accel: 0.2 }}, 0.01).expect(\"predict\");\n\
                     estimator.correct_wheels(&field_rover::WheelsReading {{ v_left: 0.1, v_right: 0.12 }}).expect(\"wheels\");\n\
                     estimator.correct_position_fix(&field_rover::PositionFixReading {{ fix_east: 0.5, fix_north: -0.3 }}).expect(\"fix\");\n\
                     let state = estimator.state();\n\
                     assert!(state.speed > 0.0 && state.east > 0.0, \"{{state:?}}\");\n\
                     println!(\"ok\");\n}}\n",
                    s.include_line
                ),
            ),
        ];
        for (name, text) in &files {
            std::fs::write(crate_dir.join(name), text).expect("write the temporary crate");
        }
        // The workspace's lock file pins the same dependency versions, so the build
        // works offline and reuses compiled dependencies.
        std::fs::copy(repository.join("Cargo.lock"), crate_dir.join("Cargo.lock"))
            .expect("lock file");
        let output = std::process::Command::new(env!("CARGO"))
            .args(["run", "--offline", "--quiet"])
            .current_dir(&crate_dir)
            .env(
                "CARGO_TARGET_DIR",
                repository.join("target").join("starter-crate"),
            )
            .output()
            .expect("cargo runs");
        let stdout = String::from_utf8_lossy(&output.stdout);
        assert!(
            output.status.success() && stdout.trim() == "ok",
            "{stdout}\n{}",
            String::from_utf8_lossy(&output.stderr)
        );
        let _ = std::fs::remove_dir_all(&crate_dir);
    }
}
