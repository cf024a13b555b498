//! Checked models built directly in Rust for the IR's unit tests: a builder that
//! computes each expression's dimension the way the checker does, and the models
//! the tests share (constant velocity, a rover with a range/bearing beacon, a
//! damped oscillator, a discrete model using every function, a 48-state fleet).

use std::cell::Cell;

use crate::diag::Span;
use crate::model::*;
use crate::units::{Base, Dimension, Rational};

pub(crate) fn metre() -> Dimension {
    Dimension::base(Base::Length)
}
pub(crate) fn second() -> Dimension {
    Dimension::base(Base::Time)
}
pub(crate) fn radian() -> Dimension {
    Dimension::base(Base::Angle)
}
pub(crate) fn per(a: Dimension, b: Dimension) -> Dimension {
    a.div(&b).unwrap_or(Dimension::NONE)
}

fn unit(dimension: Dimension) -> DeclaredUnit {
    DeclaredUnit {
        text: dimension.to_string(),
        dimension,
        to_si: 1.0,
        span: Span::default(),
    }
}

/// Builds a [`Model`] step by step; every expression gets a fresh span so tests
/// can tell sub-expressions apart.
pub(crate) struct ModelBuilder {
    model: Model,
    rates: Vec<Option<Expr>>,
    next_span: Cell<usize>,
}

impl ModelBuilder {
    pub fn new(name: &str, kind: MotionKind) -> ModelBuilder {
        ModelBuilder {
            model: Model {
                name: name.into(),
                doc: None,
                states: Vec::new(),
                inputs: Vec::new(),
                constants: Vec::new(),
                motion: Motion {
                    kind,
                    equations: Vec::new(),
                    written: Vec::new(),
                    span: Span::new(0, 1),
                },
                process_noise: Vec::new(),
                sensors: Vec::new(),
                initial: Vec::new(),
            },
            rates: Vec::new(),
            next_span: Cell::new(10),
        }
    }

    fn span(&self) -> Span {
        let s = self.next_span.get();
        self.next_span.set(s + 2);
        Span::new(s, s + 1)
    }

    fn expr(&self, kind: ExprKind, dimension: Dimension) -> Expr {
        Expr {
            kind,
            dimension,
            span: self.span(),
        }
    }

    pub fn state(&mut self, name: &str, dimension: Dimension, wrap: bool) -> usize {
        self.model.states.push(StateVar {
            name: name.into(),
            doc: None,
            unit: unit(dimension),
            wrap,
            range: None,
            span: self.span(),
        });
        self.rates.push(None);
        self.model.initial.push(None);
        self.model.states.len() - 1
    }

    pub fn input(&mut self, name: &str, dimension: Dimension, sigma: Option<f64>) -> usize {
        self.model.inputs.push(InputVar {
            name: name.into(),
            doc: None,
            unit: unit(dimension),
            noise: sigma.map(|sigma| Distribution::Normal { mean: 0.0, sigma }),
            span: self.span(),
        });
        self.model.inputs.len() - 1
    }

    pub fn white(&mut self, state: usize, amplitude: f64) {
        let span = self.span();
        self.model.process_noise.push(ProcessNoise {
            state,
            kind: ProcessNoiseKind::White { amplitude },
            span,
        });
    }

    pub fn per_step(&mut self, state: usize, distribution: Distribution) {
        let span = self.span();
        self.model.process_noise.push(ProcessNoise {
            state,
            kind: ProcessNoiseKind::PerStep(distribution),
            span,
        });
    }

    pub fn motion(&mut self, state: usize, e: Expr) {
        self.rates[state] = Some(e);
    }

    /// A sensor; components are `(name, unit dimension, wrap, expression)`.
    pub fn sensor(
        &mut self,
        name: &str,
        args: &[(&str, Dimension)],
        components: Vec<(&str, Dimension, bool, Expr)>,
        noise: SensorNoise,
    ) {
        let args = args
            .iter()
            .map(|(n, d)| SensorArg {
                name: (*n).into(),
                unit: unit(*d),
                span: self.span(),
            })
            .collect();
        let components = components
            .into_iter()
            .map(|(n, d, wrap, expr)| ReadingComponent {
                name: n.into(),
                doc: None,
                unit: unit(d),
                wrap,
                expr,
                span: self.span(),
            })
            .collect();
        let span = self.span();
        self.model.sensors.push(Sensor {
            name: name.into(),
            doc: None,
            args,
            components,
            noise,
            gate: None,
            span,
        });
    }

    /// The model, with unwritten equations filled in as the checker does.
    pub fn finish(mut self) -> Model {
        let kind = self.model.motion.kind;
        let rates = std::mem::take(&mut self.rates);
        for (i, rate) in rates.into_iter().enumerate() {
            self.model.motion.written.push(rate.is_some());
            let filled = rate.unwrap_or_else(|| match kind {
                MotionKind::Continuous => {
                    self.num(0.0, per(self.model.states[i].unit.dimension, second()))
                }
                MotionKind::Discrete => self.x(i),
            });
            self.model.motion.equations.push(filled);
        }
        self.model
    }

    pub fn x(&self, i: usize) -> Expr {
        self.expr(ExprKind::State(i), self.model.states[i].unit.dimension)
    }
    pub fn u(&self, i: usize) -> Expr {
        self.expr(ExprKind::Input(i), self.model.inputs[i].unit.dimension)
    }
    pub fn arg(&self, i: usize, dimension: Dimension) -> Expr {
        self.expr(ExprKind::Arg(i), dimension)
    }
    pub fn dt(&self) -> Expr {
        self.expr(ExprKind::Dt, second())
    }
    pub fn num(&self, v: f64, dimension: Dimension) -> Expr {
        self.expr(ExprKind::Number(v), dimension)
    }
    pub fn neg(&self, a: Expr) -> Expr {
        let d = a.dimension;
        self.expr(ExprKind::Neg(Box::new(a)), d)
    }
    fn bin(&self, op: BinOp, a: Expr, b: Expr) -> Expr {
        let d = match op {
            BinOp::Add | BinOp::Sub => a.dimension,
            BinOp::Mul => a.dimension.mul(&b.dimension).unwrap_or(Dimension::NONE),
            BinOp::Div => per(a.dimension, b.dimension),
            BinOp::Pow => match b.kind {
                ExprKind::Number(e) => Rational::from_f64_exact(e)
                    .and_then(|r| a.dimension.pow(r))
                    .unwrap_or(Dimension::NONE),
                _ => Dimension::NONE,
            },
        };
        self.expr(ExprKind::Binary(op, Box::new(a), Box::new(b)), d)
    }
    pub fn add(&self, a: Expr, b: Expr) -> Expr {
        self.bin(BinOp::Add, a, b)
    }
    pub fn sub(&self, a: Expr, b: Expr) -> Expr {
        self.bin(BinOp::Sub, a, b)
    }
    pub fn mul(&self, a: Expr, b: Expr) -> Expr {
        self.bin(BinOp::Mul, a, b)
    }
    pub fn div(&self, a: Expr, b: Expr) -> Expr {
        self.bin(BinOp::Div, a, b)
    }
    pub fn pow(&self, a: Expr, e: f64) -> Expr {
        let e = self.num(e, Dimension::NONE);
        self.bin(BinOp::Pow, a, e)
    }
    pub fn call(&self, f: Func, args: Vec<Expr>) -> Expr {
        let first = args.first().map(|a| a.dimension).unwrap_or(Dimension::NONE);
        let d = match f {
            Func::Sin | Func::Cos | Func::Tan | Func::Exp | Func::Ln => Dimension::NONE,
            Func::Asin | Func::Acos | Func::Atan | Func::Atan2 => radian(),
            Func::Sqrt => first.pow(Rational::HALF).unwrap_or(Dimension::NONE),
            Func::Hypot | Func::Abs | Func::Min | Func::Max => first,
        };
        self.expr(ExprKind::Call(f, args), d)
    }
}

/// Position and velocity on a line, white acceleration of density `q`, a position
/// sensor.
pub(crate) fn constant_velocity(q: f64) -> Model {
    let mut b = ModelBuilder::new("constant_velocity", MotionKind::Continuous);
    let pos = b.state("pos", metre(), false);
    let vel = b.state("vel", per(metre(), second()), false);
    b.motion(pos, b.x(vel));
    b.white(vel, q.sqrt());
    b.sensor(
        "ruler",
        &[],
        vec![("pos_m", metre(), false, b.x(pos))],
        SensorNoise::PerComponent(vec![Distribution::Normal {
            mean: 0.0,
            sigma: 1.0,
        }]),
    );
    b.finish()
}

/// A rover: east, north, heading (wrapped), speed; noisy yaw-rate and acceleration
/// inputs; a range/bearing beacon with per-reading position and a GNSS fix.
pub(crate) fn rover_with_beacon() -> Model {
    let mut b = ModelBuilder::new("rover", MotionKind::Continuous);
    let east = b.state("east", metre(), false);
    let north = b.state("north", metre(), false);
    let heading = b.state("heading", radian(), true);
    let speed = b.state("speed", per(metre(), second()), false);
    let yaw_rate = b.input("yaw_rate", per(radian(), second()), Some(0.01));
    let accel = b.input(
        "accel",
        per(
            metre(),
            second()
                .pow(Rational::integer(2))
                .unwrap_or(Dimension::NONE),
        ),
        Some(0.1),
    );
    let cos_h = b.call(Func::Cos, vec![b.x(heading)]);
    let sin_h = b.call(Func::Sin, vec![b.x(heading)]);
    b.motion(east, b.mul(b.x(speed), cos_h));
    b.motion(north, b.mul(b.x(speed), sin_h));
    b.motion(heading, b.u(yaw_rate));
    b.motion(speed, b.u(accel));
    b.white(speed, 0.05);
    b.per_step(
        heading,
        Distribution::Normal {
            mean: 0.0,
            sigma: 0.002,
        },
    );
    let dx = b.sub(b.x(east), b.arg(0, metre()));
    let dy = b.sub(b.x(north), b.arg(1, metre()));
    let range = b.call(Func::Hypot, vec![dx, dy]);
    let bearing = b.sub(
        b.call(
            Func::Atan2,
            vec![
                b.sub(b.arg(1, metre()), b.x(north)),
                b.sub(b.arg(0, metre()), b.x(east)),
            ],
        ),
        b.x(heading),
    );
    b.sensor(
        "beacon",
        &[("bx", metre()), ("by", metre())],
        vec![
            ("range", metre(), false, range),
            ("bearing", radian(), true, bearing),
        ],
        SensorNoise::Covariance(vec![vec![0.0625, 0.0], vec![0.0, 0.0012]]),
    );
    b.sensor(
        "gnss",
        &[],
        vec![
            ("east_m", metre(), false, b.x(east)),
            ("north_m", metre(), false, b.x(north)),
        ],
        SensorNoise::PerComponent(vec![
            Distribution::Normal {
                mean: 0.0,
                sigma: 1.5
            };
            2
        ]),
    );
    b.finish()
}

/// A damped oscillator driven by a force input: linear time-invariant, not
/// nilpotent. `pos' = vel`, `vel' = -k pos - c vel + u`.
pub(crate) fn damped_oscillator(k: f64, c: f64) -> Model {
    let mut b = ModelBuilder::new("oscillator", MotionKind::Continuous);
    let pos = b.state("pos", metre(), false);
    let vel = b.state("vel", per(metre(), second()), false);
    let accel_dim = per(per(metre(), second()), second());
    let force = b.input("push", accel_dim, Some(0.2));
    let per_s2 = per(
        Dimension::NONE,
        second()
            .pow(Rational::integer(2))
            .unwrap_or(Dimension::NONE),
    );
    let spring = b.mul(b.num(-k, per_s2), b.x(pos));
    let damping = b.mul(b.num(c, per(Dimension::NONE, second())), b.x(vel));
    b.motion(pos, b.x(vel));
    b.motion(vel, b.add(b.sub(spring, damping), b.u(force)));
    b.white(vel, 0.3);
    b.sensor(
        "ruler",
        &[],
        vec![("pos_m", metre(), false, b.x(pos))],
        SensorNoise::PerComponent(vec![Distribution::Normal {
            mean: 0.0,
            sigma: 0.1,
        }]),
    );
    b.finish()
}

/// A discrete model whose motion and sensor use every function of the language.
pub(crate) fn every_function_discrete() -> Model {
    let mut b = ModelBuilder::new("every_function", MotionKind::Discrete);
    let a = b.state("a", Dimension::NONE, false);
    let p = b.state("p", metre(), false);
    let th = b.state("th", radian(), true);
    let gain = b.input("gain", Dimension::NONE, Some(0.05));
    let one = |b: &ModelBuilder| b.num(1.0, Dimension::NONE);
    // a = a + dt/1s * (sin(a) - tan(a/4) + exp(-a^2) + ln(2 + a^2) + atan(a) * gain)
    let a2 = b.pow(b.x(a), 2.0);
    let terms = b.add(
        b.add(
            b.sub(
                b.call(Func::Sin, vec![b.x(a)]),
                b.call(Func::Tan, vec![b.div(b.x(a), b.num(4.0, Dimension::NONE))]),
            ),
            b.call(Func::Exp, vec![b.neg(a2.clone())]),
        ),
        b.add(
            b.call(Func::Ln, vec![b.add(b.num(2.0, Dimension::NONE), a2)]),
            b.mul(b.call(Func::Atan, vec![b.x(a)]), b.u(gain)),
        ),
    );
    let rate = b.div(b.dt(), b.num(1.0, second()));
    b.motion(a, b.add(b.x(a), b.mul(rate.clone(), terms)));
    // p = p + dt * sqrt(p^2 + 1 m^2)/1 s * asin(a / (1 + abs(a)))
    let root = b.call(
        Func::Sqrt,
        vec![b.add(
            b.pow(b.x(p), 2.0),
            b.num(
                1.0,
                metre().pow(Rational::integer(2)).unwrap_or(Dimension::NONE),
            ),
        )],
    );
    let bounded = b.div(b.x(a), b.add(one(&b), b.call(Func::Abs, vec![b.x(a)])));
    let asin = b.call(Func::Asin, vec![bounded.clone()]);
    b.motion(p, b.add(b.x(p), b.mul(b.mul(rate.clone(), root), asin)));
    // th = th + acos(bounded) * p^1.5 / (1 m^1.5) * 0.1
    let m15 = metre()
        .pow(Rational::new(3, 2).unwrap_or(Rational::ONE))
        .unwrap_or(Dimension::NONE);
    let p_abs = b.call(Func::Abs, vec![b.x(p)]);
    let acos = b.call(Func::Acos, vec![bounded]);
    b.motion(
        th,
        b.add(
            b.x(th),
            b.mul(
                b.num(0.1, Dimension::NONE),
                b.mul(acos, b.div(b.pow(p_abs, 1.5), b.num(1.0, m15))),
            ),
        ),
    );
    // A sensor reading min/max/atan2/hypot.
    let lo = b.call(Func::Min, vec![b.x(p), b.arg(0, metre())]);
    let hi = b.call(Func::Max, vec![b.x(p), b.mul(b.x(a), b.num(1.0, metre()))]);
    let angle = b.call(Func::Atan2, vec![b.x(p), b.arg(0, metre())]);
    let reach = b.call(
        Func::Hypot,
        vec![b.x(p), b.mul(b.x(a), b.num(1.0, metre()))],
    );
    b.sensor(
        "probe",
        &[("ref_m", metre())],
        vec![
            ("lo", metre(), false, lo),
            ("hi", metre(), false, hi),
            ("angle", radian(), true, b.add(angle, b.x(th))),
            ("reach", metre(), false, reach),
        ],
        SensorNoise::PerComponent(vec![
            Distribution::Normal {
                mean: 0.0,
                sigma: 0.1
            };
            4
        ]),
    );
    b.per_step(
        p,
        Distribution::Triangle {
            mean: 0.0,
            half_width: 0.3,
        },
    );
    b.finish()
}

/// `bodies` planar unicycles (east, north, heading, speed each), each with a
/// range from the origin: a synthetic model of `4 * bodies` states.
pub(crate) fn fleet(bodies: usize) -> Model {
    let mut b = ModelBuilder::new("fleet", MotionKind::Continuous);
    let mut components = Vec::new();
    for body in 0..bodies {
        let east = b.state(&format!("east{body}"), metre(), false);
        let north = b.state(&format!("north{body}"), metre(), false);
        let heading = b.state(&format!("heading{body}"), radian(), true);
        let speed = b.state(&format!("speed{body}"), per(metre(), second()), false);
        b.motion(
            east,
            b.mul(b.x(speed), b.call(Func::Cos, vec![b.x(heading)])),
        );
        b.motion(
            north,
            b.mul(b.x(speed), b.call(Func::Sin, vec![b.x(heading)])),
        );
        b.motion(heading, b.div(b.x(speed), b.num(20.0, metre())));
        b.white(speed, 0.1);
        components.push((body, b.call(Func::Hypot, vec![b.x(east), b.x(north)])));
    }
    let names: Vec<String> = components
        .iter()
        .map(|(body, _)| format!("range{body}"))
        .collect();
    let comps = components
        .into_iter()
        .zip(&names)
        .map(|((_, e), n)| (n.as_str(), metre(), false, e))
        .collect();
    b.sensor(
        "ranges",
        &[],
        comps,
        SensorNoise::PerComponent(vec![
            Distribution::Normal {
                mean: 0.0,
                sigma: 1.0
            };
            bodies
        ]),
    );
    b.finish()
}

/// Number of expression nodes in a model's motion and sensors: its source size.
pub(crate) fn source_size(model: &Model) -> usize {
    fn count(e: &Expr) -> usize {
        1 + match &e.kind {
            ExprKind::Neg(a) => count(a),
            ExprKind::Binary(_, a, b) => count(a) + count(b),
            ExprKind::Call(_, args) => args.iter().map(count).sum(),
            _ => 0,
        }
    }
    let motion: usize = model.motion.equations.iter().map(count).sum();
    let sensors: usize = model
        .sensors
        .iter()
        .flat_map(|s| &s.components)
        .map(|c| count(&c.expr))
        .sum();
    motion + sensors
}

/// `pos' = vel`, `vel' = acc + u0`, `acc' = u1 + 0.05 m/s^3`; white noise on vel
/// (amplitude 0.1) and acc (0.3). Mirrors the chain in tests/reference/expm_reference.py.
pub(crate) fn jerk_chain() -> Model {
    let mut b = ModelBuilder::new("jerk_chain", MotionKind::Continuous);
    let speed = per(metre(), second());
    let accel = per(speed, second());
    let jerk = per(accel, second());
    let pos = b.state("pos", metre(), false);
    let vel = b.state("vel", speed, false);
    let acc = b.state("acc", accel, false);
    let push = b.input("push", accel, None);
    let jolt = b.input("jolt", jerk, None);
    b.motion(pos, b.x(vel));
    b.motion(vel, b.add(b.x(acc), b.u(push)));
    b.motion(acc, b.add(b.u(jolt), b.num(0.05, jerk)));
    b.white(vel, 0.1);
    b.white(acc, 0.3);
    b.finish()
}

/// `x' = -x^2 / (1 s)`, dimensionless x: solution `x0 / (1 + x0 t)`.
pub(crate) fn quadratic_decay() -> Model {
    let mut b = ModelBuilder::new("quadratic_decay", MotionKind::Continuous);
    let x = b.state("x", Dimension::NONE, false);
    b.motion(x, b.div(b.neg(b.pow(b.x(x), 2.0)), b.num(1.0, second())));
    b.finish()
}
