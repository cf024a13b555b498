//! Shared pieces of the fuzz targets: the whole-pipeline driver with its invariants,
//! and a structure-aware spec generator that emits syntactically valid specs from a
//! small grammar, so the fuzzer spends its time in the checker and the back end
//! rather than in the lexer.

use arbitrary::{Arbitrary, Unstructured};

#[path = "../../compiler/tests/it/invariants.rs"]
mod invariants;

pub use invariants::{assert_spans_inside, run_pipeline};

/// Units the generator draws from; each is a valid unit expression.
const UNITS: &[&str] = &[
    "m", "m/s", "m/s^2", "rad", "deg", "rad/s", "s", "ft", "Pa", "K", "1", "kg", "mm",
];
/// Functions of one argument the language provides.
const FUNCTIONS: &[&str] = &["sin", "cos", "sqrt", "exp", "abs"];

/// An expression over the spec's states, constants and `dt`.
#[derive(Debug, Arbitrary)]
pub enum Expr {
    /// A state by index (modulo the state count).
    State(u8),
    /// A number with a unit.
    Quantity(i16, u8),
    /// A bare number.
    Number(i32),
    /// The step.
    Dt,
    /// A binary operation.
    Binary(Box<Expr>, u8, Box<Expr>),
    /// Negation.
    Neg(Box<Expr>),
    /// A function call.
    Call(u8, Box<Expr>),
    /// A power with a small integer exponent.
    Power(Box<Expr>, i8),
}

/// Deep trees only exercise the nesting limit, which the corpus covers already.
const MAX_EXPR_DEPTH: usize = 6;

impl Expr {
    fn render(&self, states: &[String], depth: usize, out: &mut String) {
        if depth > MAX_EXPR_DEPTH {
            out.push('1');
            return;
        }
        match self {
            Expr::State(i) => out.push_str(&states[usize::from(*i) % states.len()]),
            Expr::Quantity(value, unit) => {
                out.push_str(&format!(
                    "{} {}",
                    f64::from(*value) / 8.0,
                    UNITS[usize::from(*unit) % UNITS.len()]
                ));
            }
            Expr::Number(value) => out.push_str(&format!("{}", f64::from(*value) / 16.0)),
            Expr::Dt => out.push_str("dt"),
            Expr::Binary(a, op, b) => {
                out.push('(');
                a.render(states, depth + 1, out);
                out.push_str([" + ", " - ", " * ", " / "][usize::from(*op) % 4]);
                b.render(states, depth + 1, out);
                out.push(')');
            }
            Expr::Neg(a) => {
                out.push_str("-(");
                a.render(states, depth + 1, out);
                out.push(')');
            }
            Expr::Call(f, a) => {
                out.push_str(FUNCTIONS[usize::from(*f) % FUNCTIONS.len()]);
                out.push('(');
                a.render(states, depth + 1, out);
                out.push(')');
            }
            Expr::Power(a, exponent) => {
                out.push('(');
                a.render(states, depth + 1, out);
                out.push_str(&format!(")^{}", exponent % 4));
            }
        }
    }
}

/// A spec drawn from the grammar: states, a motion model, sensors, noise, initial
/// beliefs. Names are fixed patterns so references resolve most of the time.
#[derive(Debug)]
pub struct GeneratedSpec {
    /// The spec text.
    pub text: String,
}

impl<'a> Arbitrary<'a> for GeneratedSpec {
    fn arbitrary(u: &mut Unstructured<'a>) -> arbitrary::Result<Self> {
        let state_count = u.int_in_range(1..=4)?;
        let states: Vec<String> = (0..state_count).map(|i| format!("x{i}")).collect();
        let units: Vec<&str> = (0..state_count)
            .map(|_| u.choose(UNITS).copied())
            .collect::<arbitrary::Result<_>>()?;
        let mut text = String::from("model fuzzed\n\nstate {\n");
        for (name, unit) in states.iter().zip(&units) {
            let wrap = if *unit == "rad" && u.arbitrary()? {
                " wrap"
            } else {
                ""
            };
            text.push_str(&format!("  {name} : {unit}{wrap}\n"));
        }
        text.push_str("}\n\n");
        let continuous: bool = u.arbitrary()?;
        text.push_str(if continuous {
            "motion continuous {\n"
        } else {
            "motion discrete {\n"
        });
        for name in &states {
            if u.arbitrary()? {
                let expr: Expr = u.arbitrary()?;
                let mut rendered = String::new();
                expr.render(&states, 0, &mut rendered);
                if continuous {
                    text.push_str(&format!("  {name}' = {rendered}\n"));
                } else {
                    text.push_str(&format!("  {name} = {rendered}\n"));
                }
            }
        }
        text.push_str("}\n\nprocess {\n");
        for (name, unit) in states.iter().zip(&units) {
            let spread = u.int_in_range(1..=50)?;
            if continuous {
                text.push_str(&format!("  {name} ~ white({spread} {unit}/s/sqrt(Hz))\n"));
            } else {
                text.push_str(&format!("  {name} ~ normal({spread} {unit})\n"));
            }
        }
        text.push_str("}\n\n");
        let sensor_count = u.int_in_range(1..=3)?;
        for sensor in 0..sensor_count {
            let expr: Expr = u.arbitrary()?;
            let mut rendered = String::new();
            expr.render(&states, 0, &mut rendered);
            let unit = u.choose(UNITS)?;
            let spread = u.int_in_range(1..=50)?;
            text.push_str(&format!(
                "sensor s{sensor} {{\n  value : {unit} = {rendered}\n  noise ~ normal({spread} {unit})\n"
            ));
            if u.arbitrary()? {
                text.push_str(&format!("  gate {} %\n", u.int_in_range(50..=99)?));
            }
            text.push_str("}\n\n");
        }
        text.push_str("initial {\n");
        for (name, unit) in states.iter().zip(&units) {
            let spread = u.int_in_range(1..=50)?;
            text.push_str(&format!("  {name} ~ normal(0 {unit}, {spread} {unit})\n"));
        }
        text.push_str("}\n");
        Ok(GeneratedSpec { text })
    }
}
