//! Checking: the AST to the checked [`Model`], with every problem reported.
//!
//! Lowering resolves names, fixes indices, types every expression with its
//! dimension, converts every number to SI with its exact unit factor, folds
//! constants, and brings noise to canonical SI form. It keeps going after an error
//! (a failed declaration is remembered as failed, so its uses stay quiet), so one
//! run reports every independent problem. A model comes out only when no error did.

mod expr;
mod lower;
mod names;
mod noise;
mod unit;

use std::collections::HashMap;

use crate::diag::{codes, Diagnostic, Span};
use crate::model::{DeclaredUnit, Model};
use crate::syntax::{self, ast};
use crate::units::Dimension;

/// The result of checking one spec.
#[derive(Debug, Clone)]
pub struct CheckOutput {
    /// The checked model; present exactly when no diagnostic is an error.
    pub model: Option<Model>,
    /// Every problem found, ordered by position.
    pub diagnostics: Vec<Diagnostic>,
}

impl CheckOutput {
    /// True when some diagnostic is an error.
    pub fn has_errors(&self) -> bool {
        self.diagnostics.iter().any(Diagnostic::is_error)
    }
}

/// Parses and checks spec text.
pub fn check_source(text: &str) -> CheckOutput {
    syntax::on_big_stack(|| {
        let (file, mut diagnostics) = syntax::parse_here(text);
        let model = file.and_then(|file| {
            let (model, mut found) = Checker::default().run(&file);
            diagnostics.append(&mut found);
            model
        });
        finish(model, diagnostics)
    })
}

/// Checks spec bytes as read from a file: invalid UTF-8 is reported with its offset.
pub fn check_bytes(bytes: &[u8]) -> CheckOutput {
    match std::str::from_utf8(bytes) {
        Ok(text) => check_source(text),
        Err(error) => {
            let at = error.valid_up_to();
            let byte = bytes.get(at).copied().unwrap_or_default();
            let diagnostic = Diagnostic::new(
                codes::NOT_UTF8,
                Span::new(at, at + error.error_len().unwrap_or(1)),
                format!("byte 0x{byte:02X} at offset {at} is not valid UTF-8"),
            )
            .with_hint("save the spec as UTF-8 text");
            finish(None, vec![diagnostic])
        }
    }
}

/// Checks an already parsed file.
pub fn check_file(file: &ast::File) -> CheckOutput {
    syntax::on_big_stack(|| {
        let (model, diagnostics) = Checker::default().run(file);
        finish(model, diagnostics)
    })
}

/// Evaluates a quantity written outside a spec (`"10 ms"`, `"50 Hz"`, `"2 m / 3"`):
/// the spec language's constant expressions with units, so project files read numbers
/// exactly as specs do. Returns the value in SI and its dimension; diagnostic spans
/// point into `text`.
pub fn quantity(text: &str) -> Result<(f64, Dimension), Vec<Diagnostic>> {
    const PREFIX: &str = "const quantity = ";
    let source = format!("{PREFIX}{text}");
    let (value, mut diagnostics) = syntax::on_big_stack(|| {
        let (file, mut diagnostics) = syntax::parse_here(&source);
        let value = file.and_then(|file| match file.items.as_slice() {
            [ast::Item::Const(decl)] => {
                let mut checker = Checker::default();
                let value = checker.constant(&decl.value).ok();
                diagnostics.append(&mut checker.diagnostics);
                value
            }
            _ => None,
        });
        (value, diagnostics)
    });
    let shift = |span: Span| {
        Span::new(
            span.start.saturating_sub(PREFIX.len()).min(text.len()),
            span.end.saturating_sub(PREFIX.len()).min(text.len()),
        )
    };
    for diagnostic in &mut diagnostics {
        for label in &mut diagnostic.labels {
            label.span = shift(label.span);
        }
    }
    match value {
        Some(value) if !diagnostics.iter().any(Diagnostic::is_error) => Ok(value),
        _ if diagnostics.iter().any(Diagnostic::is_error) => Err(diagnostics),
        _ => Err(vec![Diagnostic::new(
            codes::NOT_CONSTANT,
            Span::new(0, text.len()),
            format!("`{text}` is not a single quantity"),
        )
        .with_hint(
            "write a number with its unit, such as \"10 ms\" or \"0.2 m/s^2\"",
        )]),
    }
}

fn finish(model: Option<Model>, mut diagnostics: Vec<Diagnostic>) -> CheckOutput {
    diagnostics.sort_by_key(|d| d.primary_span().start);
    let failed = diagnostics.iter().any(Diagnostic::is_error);
    CheckOutput {
        model: if failed { None } else { model },
        diagnostics,
    }
}

/// Marks a failure whose diagnostic has already been pushed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct Reported;

/// What a global name refers to.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Global {
    State(usize),
    Input(usize),
    Const(usize),
}

/// A state or input as expressions see it.
struct VarInfo {
    /// `None` when its unit was refused (already reported).
    unit: Option<DeclaredUnit>,
}

impl VarInfo {
    fn dimension(&self) -> Option<Dimension> {
        self.unit.as_ref().map(|u| u.dimension)
    }
}

/// A constant as expressions see it.
struct ConstInfo {
    /// Value in SI and dimension; `None` when it failed (already reported).
    value: Option<(f64, Dimension)>,
    /// Span of its name.
    span: Span,
}

/// Lowering state for one file.
#[derive(Default)]
struct Checker {
    diagnostics: Vec<Diagnostic>,
    globals: HashMap<String, Global>,
    /// Where each global name was first declared.
    declared_at: HashMap<String, Span>,
    states: Vec<VarInfo>,
    inputs: Vec<VarInfo>,
    constants: Vec<ConstInfo>,
    /// Constants with a smaller index may be used; the rest are declared later.
    constants_ready: usize,
}

impl Checker {
    /// Records a diagnostic (of any severity).
    fn report(&mut self, diagnostic: Diagnostic) -> Reported {
        self.diagnostics.push(diagnostic);
        Reported
    }

    /// True when `name` is declared or built in (used to explain unit mistakes).
    fn is_declared(&self, name: &str) -> bool {
        self.globals.contains_key(name) || names::is_reserved(name)
    }
}

#[cfg(test)]
mod quantity_tests {
    use super::*;
    use crate::units::{Base, Dimension};

    /// Unit factors: NIST SP 811 (2008), Appendix B.8 (ft = 0.3048 m, exact; kn =
    /// 1852/3600 m/s).
    #[test]
    fn quantities_read_with_units_in_si() {
        let (value, dimension) = quantity("10 ms").expect("valid");
        assert!((value - 0.01).abs() < 1e-15);
        assert_eq!(dimension, Dimension::base(Base::Time));
        let (value, _) = quantity("3 ft").expect("valid");
        assert!((value - 0.9144).abs() < 1e-15);
        let (value, _) = quantity("36 kn").expect("valid");
        assert!((value - 18.52).abs() < 1e-12);
        let (value, dimension) = quantity("0.5").expect("valid");
        assert_eq!((value, dimension.is_dimensionless()), (0.5, true));
    }

    #[test]
    fn bad_quantities_point_into_the_text() {
        let text = "3 furlongs";
        let errors = quantity(text).expect_err("unknown unit");
        let span = errors[0].primary_span();
        assert_eq!(&text[span.start..span.end], "furlongs");
        let errors = quantity("1 m state { x : m }").expect_err("not one quantity");
        assert!(errors.iter().any(Diagnostic::is_error));
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::{ExprKind, ProcessNoiseKind, SensorNoise};

    const DEG: f64 = std::f64::consts::PI / 180.0;

    /// A small valid spec around `extra` items.
    fn spec(extra: &str) -> String {
        format!(
            "model t\nstate {{\n  x : m\n  v : m/s\n  heading : deg wrap\n}}\nmotion continuous {{\n  x' = v\n}}\n\
             sensor s {{\n  r : m = x\n  noise ~ normal(1 m)\n}}\nsensor compass {{\n  h : deg wrap = heading\n  h ~ normal(2 deg)\n}}\n{extra}"
        )
    }

    fn model(text: &str) -> Model {
        let output = check_source(text);
        assert!(!output.has_errors(), "{:#?}", output.diagnostics);
        output.model.expect("a model when there is no error")
    }

    fn codes_of(text: &str) -> Vec<&'static str> {
        check_source(text)
            .diagnostics
            .iter()
            .map(|d| d.code.id)
            .collect()
    }

    fn constant(text: &str) -> f64 {
        model(&spec(text)).constants[0].value
    }

    fn close(a: f64, b: f64) -> bool {
        (a - b).abs() <= 1e-12 * a.abs().max(b.abs())
    }

    #[test]
    fn literals_fold_to_si() {
        // International foot: 0.3048 m exactly (NIST SP 811, Appendix B.8).
        assert_eq!(constant("const c = 1 ft"), 0.3048);
        // Knot: 1852 m per hour (BIPM SI Brochure, 9th ed., Table 8 note).
        assert!(close(constant("const c = 1 kn"), 1852.0 / 3600.0));
        // Millibar: 100 Pa (NIST SP 811, Appendix B.8).
        assert!(close(constant("const c = 1013.25 mbar"), 101_325.0));
        assert!(close(constant("const c = 30 deg"), 30.0 * DEG));
        assert_eq!(constant("const c = 99.9 %"), 0.999);
        assert_eq!(constant("const c = 1.5 mm"), 0.0015);
        assert_eq!(constant("const c = 2.5e-3 km"), 2.5);
        assert!(close(constant("const c = 0.62 m / 2"), 0.31));
        assert!(close(constant("const c = 2 * pi"), std::f64::consts::TAU));
    }

    #[test]
    fn constants_chain_and_inline() {
        let m = model(&spec("const track = 0.62 m\nconst half = track / 2\nsensor w {\n  q : m = x + half\n  noise ~ normal(1 cm)\n}\n"));
        assert!(close(m.constants[1].value, 0.31));
        let q = &m.sensors[2].components[0].expr;
        let ExprKind::Binary(_, _, rhs) = &q.kind else {
            panic!("expected a sum, got {q:?}");
        };
        assert!(matches!(rhs.kind, ExprKind::Number(v) if close(v, 0.31)));
    }

    #[test]
    fn declared_units_keep_their_factor_and_values_stay_si() {
        let m = model(&spec("initial {\n  heading ~ normal(90 deg, 10 deg)\n}\n"));
        let heading = &m.states[2];
        assert!(heading.wrap);
        assert_eq!(heading.unit.text, "deg");
        assert!(close(heading.unit.to_si, DEG));
        let Some(crate::model::Distribution::Normal { mean, sigma }) = m.initial[2] else {
            panic!("expected a normal initial belief");
        };
        assert!(close(mean, 90.0 * DEG) && close(sigma, 10.0 * DEG));
        let SensorNoise::PerComponent(noise) = &m.sensors[1].noise else {
            panic!("expected per-component noise");
        };
        assert!(close(noise[0].variance(), (2.0 * DEG).powi(2)));
    }

    #[test]
    fn datasheet_densities_become_si_amplitudes() {
        let m = model(&spec(
            "process {\n  heading ~ white(0.15 deg/sqrt(h))\n  v ~ white(0.3 m/s^2/sqrt(Hz))\n}\n",
        ));
        let amplitude = |state: usize| match m
            .process_noise
            .iter()
            .find(|p| p.state == state)
            .map(|p| &p.kind)
        {
            Some(ProcessNoiseKind::White { amplitude }) => *amplitude,
            other => panic!("expected white noise, got {other:?}"),
        };
        // 0.15 deg/sqrt(h) = 0.15 * (pi/180) rad / sqrt(3600 s); degree and hour as
        // defined in the BIPM SI Brochure, Table 8.
        assert!(close(amplitude(2), 0.15 * DEG / 60.0));
        assert!(close(amplitude(1), 0.3));
    }

    #[test]
    fn unnamed_states_are_filled_in() {
        let m = model(&spec(""));
        assert_eq!(m.motion.written, [true, false, false]);
        assert!(matches!(m.motion.equations[1].kind, ExprKind::Number(v) if v == 0.0));
        let text = "model t\nstate { x : m }\nmotion discrete { }\nsensor s { r : m = x  noise ~ normal(1 m) }\n";
        assert!(matches!(
            model(text).motion.equations[0].kind,
            ExprKind::State(0)
        ));
    }

    #[test]
    fn mixed_units_of_one_dimension_combine_without_casts() {
        let m = model(&spec(
            "sensor b(bx: ft) {\n  bearing : deg = atan2(bx, x)\n  noise ~ normal(1 deg)\n}\n",
        ));
        let bearing = &m.sensors[2].components[0];
        assert!(bearing.expr.dimension.is_angle());
        assert!(
            matches!(&bearing.expr.kind, ExprKind::Call(crate::model::Func::Atan2, args) if matches!(args[0].kind, ExprKind::Arg(0)))
        );
        // A differential-drive yaw rate: 1/s into rad/s is fine in SI.
        let text = "model t\nconst track = 0.5 m\nstate { yaw : rad  vl : m/s  vr : m/s }\nmotion continuous { yaw' = (vr - vl) / track }\n\
                    sensor s { a : rad = yaw  b : m/s = vl  c : m/s = vr  noise ~ covariance [ 1 deg^2, 0 m·deg/s, 0 m·deg/s ; 0 m·deg/s, 1 m^2/s^2, 0 m^2/s^2 ; 0 m·deg/s, 0 m^2/s^2, 1 m^2/s^2 ] }\n";
        let m = model(text);
        let SensorNoise::Covariance(cov) = &m.sensors[0].noise else {
            panic!("expected a covariance");
        };
        assert!(close(cov[0][0], DEG * DEG));
    }

    #[test]
    fn gate_and_noise_forms() {
        let m = model(&spec("sensor g {\n  a : m = x\n  b : m = x\n  noise ~ normal(1 m)\n  gate 99.9 %\n}\ninitial {\n  x ~ uniform(0 m .. 10 m)\n  v ~ triangle(1 m/s, 0.5 m/s)\n}\n"));
        assert_eq!(m.sensors[2].gate.map(|g| g.probability), Some(0.999));
        assert_eq!(
            m.initial[0],
            Some(crate::model::Distribution::Uniform { lo: 0.0, hi: 10.0 })
        );
        assert_eq!(
            m.initial[1],
            Some(crate::model::Distribution::Triangle {
                mean: 1.0,
                half_width: 0.5
            })
        );
    }

    #[test]
    fn independent_errors_are_all_reported() {
        let text = spec("const a = 1 m + 1 s\nsensor bad {\n  q : m = x * sin(v)\n  noise ~ normal(1 m)\n}\ninitial {\n  nope ~ normal(0 m, 1 m)\n}\n");
        assert_eq!(codes_of(&text), ["E0302", "E0304", "E0207"]);
        assert!(check_source(&text).model.is_none());
    }

    #[test]
    fn structural_observability_follows_the_motion() {
        // `v` is never read but drives `x`, which is: observed. `drift` is not.
        let text = spec("").replace("heading : deg wrap", "heading : deg wrap\n  drift : m/s");
        assert_eq!(codes_of(&text), ["W0801"]);
        assert!(check_source(&text).model.is_some());
    }

    #[test]
    fn hostile_inputs_never_panic() {
        assert!(codes_of("").contains(&"E0203"));
        let garbage: Vec<u8> = (0..20_000u32)
            .map(|i| (i.wrapping_mul(2_654_435_761) >> 7) as u8)
            .collect();
        assert!(check_bytes(&garbage).has_errors());
        let output = check_bytes(b"model t\nconst c = 1 \xC3\x28\n");
        assert_eq!(output.diagnostics[0].code.id, "E0102");
        assert!(
            output.diagnostics[0].message.contains("offset 20"),
            "{}",
            output.diagnostics[0].message
        );
        assert_eq!(codes_of("model t\nconst c = 1e400 m\n"), ["E0104"]);
        let deep = format!(
            "model t\nconst c = {}1{}\n",
            "(".repeat(10_000),
            ")".repeat(10_000)
        );
        assert_eq!(codes_of(&deep), ["E0103"]);
        let minus = format!("model t\nconst c = {}1\n", "-".repeat(100_000));
        assert_eq!(codes_of(&minus), ["E0103"]);
        let unit = format!("model t\nstate {{ x : m{} }}\n", "/m".repeat(100_000));
        assert!(codes_of(&unit).contains(&"E0103"));
        assert!(codes_of("model t\nconst c = 10^400\n").contains(&"E0312"));
        assert!(codes_of("model t\nconst c = sqrt(-1)\n").contains(&"E0312"));
    }

    #[test]
    fn ten_megabytes_are_checked_without_trouble() {
        let mut text = String::from("model big\n");
        let mut i = 0;
        while text.len() < 10 << 20 {
            text.push_str(&format!("const c{i} = {i} m // constant number {i}\n"));
            i += 1;
        }
        let output = check_source(&text);
        // No state, no motion: exactly those two errors, whatever the size.
        let codes: Vec<&str> = output.diagnostics.iter().map(|d| d.code.id).collect();
        assert_eq!(codes, ["E0206", "E0205"]);
    }
}

/// Random damage to real specs must give diagnostics, never a panic, and a model
/// exactly when there is no error.
#[cfg(test)]
mod never_panics {
    use proptest::prelude::*;

    use super::*;
    use crate::diag::render;

    const DEMO: &str = include_str!("../../../specs/survey_launch.reckon");

    const TOKENS: &[&str] = &[
        "model",
        "const",
        "state",
        "input",
        "motion",
        "continuous",
        "discrete",
        "process",
        "sensor",
        "initial",
        "noise",
        "gate",
        "wrap",
        "in",
        "by",
        "covariance",
        "x",
        "v",
        "dt",
        "pi",
        "{",
        "}",
        "(",
        ")",
        "[",
        "]",
        ":",
        "=",
        "'",
        "~",
        ",",
        ";",
        "..",
        "+",
        "-",
        "*",
        "/",
        "^",
        "%",
        "·",
        "1",
        "0",
        "2.5",
        "1e400",
        "m",
        "s",
        "deg",
        "Hz",
        "m/s",
        "sqrt",
        "sin",
        "atan2",
        "normal",
        "white",
        "uniform",
        "triangle",
        "///",
        "//",
        "\n",
        "µs",
    ];

    fn check_and_render(text: &str) -> Result<(), TestCaseError> {
        let output = check_source(text);
        prop_assert_eq!(output.model.is_some(), !output.has_errors());
        let _ = render::human("fuzz.reckon", text, &output.diagnostics);
        let _ = render::json_lines("fuzz.reckon", text, &output.diagnostics);
        Ok(())
    }

    proptest! {
        #![proptest_config(ProptestConfig { cases: 200, failure_persistence: None, ..ProptestConfig::default() })]

        #[test]
        fn damaged_demo_specs(cut in 0..DEMO.len(), len in 0usize..40, insert in prop::sample::select(TOKENS)) {
            let mut start = cut;
            while !DEMO.is_char_boundary(start) {
                start -= 1;
            }
            let mut end = (start + len).min(DEMO.len());
            while !DEMO.is_char_boundary(end) {
                end += 1;
            }
            let damaged = format!("{}{insert}{}", &DEMO[..start], &DEMO[end..]);
            check_and_render(&damaged)?;
        }

        #[test]
        fn token_soup(tokens in prop::collection::vec(prop::sample::select(TOKENS), 0..80)) {
            check_and_render(&tokens.join(" "))?;
        }

        #[test]
        fn arbitrary_bytes(bytes in prop::collection::vec(any::<u8>(), 0..300)) {
            let output = check_bytes(&bytes);
            prop_assert_eq!(output.model.is_some(), !output.has_errors());
            let _ = render::human("fuzz.reckon", &String::from_utf8_lossy(&bytes), &output.diagnostics);
        }
    }
}
