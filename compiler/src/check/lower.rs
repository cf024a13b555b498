//! The item-by-item walk: declarations, structure checks, motion, noise, sensors and
//! initial beliefs, then the assembly of the [`Model`] when nothing failed.

use std::collections::HashMap;

use super::expr::{seconds, Place, SensorArgInfo};
use super::names::{did_you_mean, is_reserved, suggest};
use super::noise::{Noise, Subject, WhiteRule};
use super::{Checker, ConstInfo, Global, Reported, VarInfo};
use crate::diag::{codes, Diagnostic, Span};
use crate::model::{
    Constant, DeclaredUnit, Distribution, Expr, ExprKind, Gate, GridRange, InputVar, Model, Motion,
    MotionKind, ProcessNoise, ProcessNoiseKind, ReadingComponent, Sensor, SensorArg, SensorNoise,
    StateVar,
};
use crate::syntax::ast::{self, Item};
use crate::units::Dimension;

/// The singular items of a file, each at most once.
#[derive(Default)]
struct Parts<'f> {
    model: Option<&'f ast::ModelDecl>,
    state: Option<&'f ast::StateBlock>,
    input: Option<&'f ast::InputBlock>,
    motion: Option<&'f ast::MotionBlock>,
    process: Option<&'f ast::NoiseBlock>,
    initial: Option<&'f ast::NoiseBlock>,
    constants: Vec<&'f ast::ConstDecl>,
    sensors: Vec<&'f ast::SensorBlock>,
}

/// Keeps the first of a singular item and reports the others.
fn keep_first<'f, T>(
    checker: &mut Checker,
    slot: &mut Option<&'f T>,
    item: &'f T,
    span: Span,
    first: impl Fn(&T) -> Span,
    what: &str,
) {
    match slot {
        Some(existing) => {
            checker.report(
                Diagnostic::new(
                    codes::DUPLICATE_BLOCK,
                    span,
                    format!("{what} is given twice"),
                )
                .with_secondary(first(existing), "first given here")
                .with_hint("a spec has one of each; merge the two"),
            );
        }
        None => *slot = Some(item),
    }
}

fn model_expr(kind: ExprKind, dimension: Dimension, span: Span) -> Expr {
    Expr {
        kind,
        dimension,
        span,
    }
}

impl Checker {
    /// Lowers a whole file.
    pub(super) fn run(mut self, file: &ast::File) -> (Option<Model>, Vec<crate::diag::Diagnostic>) {
        let parts = self.partition(file);
        let model = self.lower(&parts);
        (model, self.diagnostics)
    }

    fn partition<'f>(&mut self, file: &'f ast::File) -> Parts<'f> {
        let mut parts = Parts::default();
        for item in &file.items {
            match item {
                Item::Model(m) => keep_first(
                    self,
                    &mut parts.model,
                    m,
                    m.span,
                    |m| m.span,
                    "the `model` line",
                ),
                Item::State(b) => keep_first(
                    self,
                    &mut parts.state,
                    b,
                    b.keyword,
                    |b| b.keyword,
                    "the `state` block",
                ),
                Item::Input(b) => keep_first(
                    self,
                    &mut parts.input,
                    b,
                    b.keyword,
                    |b| b.keyword,
                    "the `input` block",
                ),
                Item::Motion(b) => keep_first(
                    self,
                    &mut parts.motion,
                    b,
                    b.header,
                    |b| b.header,
                    "the `motion` block",
                ),
                Item::Process(b) => keep_first(
                    self,
                    &mut parts.process,
                    b,
                    b.keyword,
                    |b| b.keyword,
                    "the `process` block",
                ),
                Item::Initial(b) => keep_first(
                    self,
                    &mut parts.initial,
                    b,
                    b.keyword,
                    |b| b.keyword,
                    "the `initial` block",
                ),
                Item::Const(c) => parts.constants.push(c),
                Item::Sensor(s) => parts.sensors.push(s),
            }
        }
        parts
    }

    /// Refuses a declaration of a built-in name.
    fn not_reserved(&mut self, ident: &ast::Ident) -> bool {
        if is_reserved(&ident.name) {
            self.report(
                Diagnostic::new(
                    codes::RESERVED_NAME,
                    ident.span,
                    format!("`{}` is a built-in name and cannot be declared", ident.name),
                )
                .with_hint("choose another name"),
            );
            return false;
        }
        true
    }

    /// Declares a global name, refusing reserved and duplicate names.
    fn declare(&mut self, ident: &ast::Ident, global: Global) {
        if !self.not_reserved(ident) {
            return;
        }
        if let Some(first) = self.declared_at.get(&ident.name) {
            let first = *first;
            self.report(
                Diagnostic::new(
                    codes::DUPLICATE_NAME,
                    ident.span,
                    format!("`{}` is declared twice", ident.name),
                )
                .with_secondary(first, "first declared here")
                .with_hint("states, inputs and constants share one namespace; rename one of them"),
            );
            return;
        }
        self.declared_at.insert(ident.name.clone(), ident.span);
        self.globals.insert(ident.name.clone(), global);
    }

    fn lower(&mut self, parts: &Parts<'_>) -> Option<Model> {
        let model_decl = parts.model;
        if model_decl.is_none() {
            self.report(
                Diagnostic::new(
                    codes::MISSING_MODEL,
                    Span::new(0, 0),
                    "the spec has no `model` line",
                )
                .with_hint("start the spec with `model name`"),
            );
        }
        let anchor = model_decl.map_or(Span::new(0, 0), |m| m.name.span);

        // Declarations first, so every later expression sees every name.
        let state_decls: Vec<&ast::StateVarDecl> = parts
            .state
            .map(|b| b.vars.iter().collect())
            .unwrap_or_default();
        let input_decls: Vec<&ast::InputVarDecl> = parts
            .input
            .map(|b| b.vars.iter().collect())
            .unwrap_or_default();
        match parts.state {
            None => {
                self.report(
                    Diagnostic::new(codes::NO_STATES, anchor, "the spec has no `state` block")
                        .with_hint("declare the state: `state { x : m  v : m/s }`"),
                );
            }
            Some(block) if block.vars.is_empty() => {
                self.report(
                    Diagnostic::new(
                        codes::NO_STATES,
                        block.keyword,
                        "the `state` block declares no state",
                    )
                    .with_hint("declare at least one: `x : m`"),
                );
            }
            Some(_) => {}
        }
        let mut state_units = Vec::new();
        for (i, decl) in state_decls.iter().enumerate() {
            self.declare(&decl.name, Global::State(i));
            let unit = self.declared_unit(&decl.unit).ok();
            self.states.push(VarInfo { unit: unit.clone() });
            state_units.push(unit);
        }
        let mut input_units = Vec::new();
        for (i, decl) in input_decls.iter().enumerate() {
            self.declare(&decl.name, Global::Input(i));
            let unit = self.declared_unit(&decl.unit).ok();
            self.inputs.push(VarInfo { unit: unit.clone() });
            input_units.push(unit);
        }
        for (i, decl) in parts.constants.iter().enumerate() {
            self.declare(&decl.name, Global::Const(i));
            self.constants.push(ConstInfo {
                value: None,
                span: decl.name.span,
            });
        }

        let constants = self.constants_in_order(&parts.constants);
        let states: Vec<Option<StateVar>> = state_decls
            .iter()
            .zip(state_units)
            .map(|(d, u)| self.state_var(d, u?))
            .collect();
        let inputs: Vec<Option<InputVar>> = input_decls
            .iter()
            .zip(input_units)
            .map(|(d, u)| self.input_var(d, u?))
            .collect();
        let motion = match parts.motion {
            Some(block) => self.motion(block, &state_decls),
            None => {
                self.report(
                    Diagnostic::new(codes::MISSING_MOTION, anchor, "the spec has no `motion` block")
                        .with_hint("say how the state moves: `motion continuous { x' = v }` or `motion discrete { x = x + v * dt }`"),
                );
                None
            }
        };
        let white = match parts.motion.map(|m| m.kind) {
            Some(ast::MotionKind::Discrete) => WhiteRule::DiscreteMotion,
            _ => WhiteRule::Allowed,
        };
        let process = parts
            .process
            .map(|b| self.process(b, white))
            .unwrap_or_default();
        let mut sensor_spans: HashMap<String, Span> = HashMap::new();
        let sensors: Vec<Option<Sensor>> = parts
            .sensors
            .iter()
            .map(|s| self.sensor(s, &mut sensor_spans))
            .collect();
        let initial = self.initial(parts.initial, state_decls.len());

        let states: Option<Vec<StateVar>> = states.into_iter().collect();
        let inputs: Option<Vec<InputVar>> = inputs.into_iter().collect();
        let sensors: Option<Vec<Sensor>> = sensors.into_iter().collect();
        if self.diagnostics.iter().any(Diagnostic::is_error) {
            return None;
        }
        // Only a sound model is worth the structural warning.
        if let (Some(states), Some(motion), Some(sensors)) = (&states, &motion, &sensors) {
            self.observability(states, motion, sensors);
        }
        Some(Model {
            name: model_decl?.name.name.clone(),
            doc: model_decl?.doc.as_ref().map(|d| d.text.clone()),
            states: states?,
            inputs: inputs?,
            constants: constants?,
            motion: motion?,
            process_noise: process,
            sensors: sensors?,
            initial,
        })
    }

    fn constants_in_order(&mut self, decls: &[&ast::ConstDecl]) -> Option<Vec<Constant>> {
        let mut out = Vec::new();
        for (i, decl) in decls.iter().enumerate() {
            self.constants_ready = i;
            let lowered = self.constant(&decl.value).ok();
            // A duplicate keeps the first declaration's slot in the namespace.
            if self.globals.get(&decl.name.name) == Some(&Global::Const(i)) {
                self.constants[i].value = lowered;
            }
            out.push(lowered.map(|(value, dimension)| Constant {
                name: decl.name.name.clone(),
                doc: decl.doc.as_ref().map(|d| d.text.clone()),
                value,
                dimension,
                span: decl.name.span,
            }));
        }
        self.constants_ready = decls.len();
        out.into_iter().collect()
    }

    /// A value that must be a constant of `dimension` (range bounds).
    fn constant_of(
        &mut self,
        expr: &ast::Expr,
        dimension: Dimension,
        what: &str,
    ) -> Result<f64, Reported> {
        let (value, found) = self.constant(expr)?;
        if !found.compatible(&dimension) {
            return Err(self.report(
                Diagnostic::new(
                    codes::RANGE_DIMENSION,
                    expr.span,
                    format!("{what} must be {dimension}, but this is {found}"),
                )
                .with_label_message(format!("{found}")),
            ));
        }
        Ok(value)
    }

    fn wrap_check(&mut self, wrap: Option<Span>, unit: &DeclaredUnit, name: &str) -> bool {
        match wrap {
            Some(span) if !unit.dimension.is_angle() => {
                self.report(
                    Diagnostic::new(
                        codes::WRAP_NOT_ANGLE,
                        span,
                        format!(
                            "`{name}` is {}, not an angle, so it cannot wrap",
                            unit.dimension
                        ),
                    )
                    .with_secondary(unit.span, "declared unit")
                    .with_hint(
                        "remove `wrap`, or declare the unit as an angle such as `rad` or `deg`",
                    ),
                );
                false
            }
            Some(_) => true,
            None => false,
        }
    }

    fn state_var(&mut self, decl: &ast::StateVarDecl, unit: DeclaredUnit) -> Option<StateVar> {
        let wrap = self.wrap_check(decl.wrap, &unit, &decl.name.name);
        let range = match &decl.range {
            None => Some(None),
            Some(range) => self
                .grid_range(range, unit.dimension, &decl.name.name)
                .ok()
                .map(Some),
        };
        range.map(|range| StateVar {
            name: decl.name.name.clone(),
            doc: decl.doc.as_ref().map(|d| d.text.clone()),
            unit,
            wrap,
            range,
            span: decl.name.span,
        })
    }

    fn grid_range(
        &mut self,
        range: &ast::GridRangeDecl,
        dimension: Dimension,
        name: &str,
    ) -> Result<GridRange, Reported> {
        let what = format!("a bound of `{name}`");
        let lo = self.constant_of(&range.lo, dimension, &what);
        let hi = self.constant_of(&range.hi, dimension, &what);
        let cell = range
            .cell
            .as_ref()
            .map(|c| self.constant_of(c, dimension, &format!("the cell size of `{name}`")));
        let (lo, hi) = (lo?, hi?);
        let cell = cell.transpose()?;
        if lo >= hi {
            return Err(self.report(
                Diagnostic::new(codes::INVALID_RANGE, range.span, format!("the range of `{name}` is empty: its lower bound is not below its upper bound"))
                    .with_hint("write `in lo .. hi` with lo < hi"),
            ));
        }
        if let Some(cell) = cell {
            if cell <= 0.0 || cell > hi - lo {
                let span = range.cell.as_ref().map_or(range.span, |c| c.span);
                return Err(self.report(
                    Diagnostic::new(codes::INVALID_RANGE, span, format!("the cell size of `{name}` must be greater than zero and at most the width of the range"))
                        .with_hint("pick a cell a small fraction of the range, e.g. a hundredth"),
                ));
            }
        }
        Ok(GridRange { lo, hi, cell })
    }

    fn input_var(&mut self, decl: &ast::InputVarDecl, unit: DeclaredUnit) -> Option<InputVar> {
        let what = format!("input `{}`", decl.name.name);
        let noise = match &decl.noise {
            None => Some(None),
            Some(dist) => self
                .noise(
                    dist,
                    &Subject {
                        what: &what,
                        unit: &unit,
                        white: WhiteRule::NotProcess,
                    },
                )
                .ok()
                .and_then(|n| match n {
                    Noise::Dist(d) => Some(Some(d)),
                    Noise::White(_) => None,
                }),
        };
        Some(InputVar {
            name: decl.name.name.clone(),
            doc: decl.doc.as_ref().map(|d| d.text.clone()),
            unit,
            noise: noise?,
            span: decl.name.span,
        })
    }

    /// Resolves the subject of a motion, process or initial statement to a state.
    fn target_state(&mut self, ident: &ast::Ident, block: &str) -> Result<usize, Reported> {
        match self.globals.get(&ident.name).copied() {
            Some(Global::State(i)) => Ok(i),
            other => {
                let kind = match other {
                    Some(Global::Input(_)) => format!("`{}` is an input, not a state", ident.name),
                    Some(Global::Const(_)) => {
                        format!("`{}` is a constant, not a state", ident.name)
                    }
                    _ => format!("`{}` is not a state", ident.name),
                };
                let states: Vec<&str> = self
                    .globals
                    .iter()
                    .filter(|(_, g)| matches!(g, Global::State(_)))
                    .map(|(n, _)| n.as_str())
                    .collect();
                let mut d = Diagnostic::new(codes::NOT_A_STATE, ident.span, kind)
                    .with_label_message(format!("the {block} block speaks of states only"));
                if let Some(hint) = did_you_mean(&suggest(&ident.name, states)) {
                    d = d.with_hint(hint);
                } else if matches!(other, Some(Global::Input(_))) {
                    d = d.with_hint(
                        "noise on an input goes on its declaration: `name : unit ~ normal(sigma)`",
                    );
                }
                Err(self.report(d))
            }
        }
    }

    /// Reports a second statement about the same state.
    fn once(
        &mut self,
        seen: &mut HashMap<usize, Span>,
        state: usize,
        span: Span,
        what: &str,
        name: &str,
    ) -> bool {
        if let Some(first) = seen.get(&state) {
            self.report(
                Diagnostic::new(
                    codes::DUPLICATE_TARGET,
                    span,
                    format!("{what} for `{name}` is given twice"),
                )
                .with_secondary(*first, "first given here"),
            );
            return false;
        }
        seen.insert(state, span);
        true
    }

    fn motion(&mut self, block: &ast::MotionBlock, decls: &[&ast::StateVarDecl]) -> Option<Motion> {
        let kind = match block.kind {
            ast::MotionKind::Continuous => MotionKind::Continuous,
            ast::MotionKind::Discrete => MotionKind::Discrete,
        };
        let mut equations: Vec<Option<Expr>> = vec![None; decls.len()];
        let mut seen = HashMap::new();
        let mut failed = false;
        for eq in &block.equations {
            let Ok(state) = self.target_state(&eq.target, "motion") else {
                failed = true;
                continue;
            };
            let name = &eq.target.name;
            match (kind, eq.prime) {
                (MotionKind::Discrete, Some(prime)) => {
                    self.report(
                        Diagnostic::new(codes::RATE_IN_DISCRETE, prime, format!("`{name}'` is a rate, but this motion is discrete"))
                            .with_secondary(block.kind_span, "discrete motion gives next values")
                            .with_hint(format!("write the next value, e.g. `{name} = {name} + rate * dt`, or use `motion continuous`")),
                    );
                    failed = true;
                    continue;
                }
                (MotionKind::Continuous, None) => {
                    self.report(
                        Diagnostic::new(
                            codes::VALUE_IN_CONTINUOUS,
                            eq.target.span,
                            format!(
                                "`{name} = ...` gives a next value, but this motion is continuous"
                            ),
                        )
                        .with_secondary(block.kind_span, "continuous motion gives rates")
                        .with_hint(format!(
                            "write the rate: `{name}' = ...`, or use `motion discrete`"
                        )),
                    );
                    failed = true;
                    continue;
                }
                _ => {}
            }
            if !self.once(&mut seen, state, eq.span, "a motion equation", name) {
                failed = true;
                continue;
            }
            let place = match kind {
                MotionKind::Continuous => Place::ContinuousMotion,
                MotionKind::Discrete => Place::DiscreteMotion,
            };
            let Ok(value) = self.expr(&eq.value, place) else {
                failed = true;
                continue;
            };
            let Some(state_dim) = self.states[state].dimension() else {
                failed = true;
                continue;
            };
            let expected = match kind {
                MotionKind::Continuous => state_dim.div(&seconds()),
                MotionKind::Discrete => Some(state_dim),
            };
            let Some(expected) = expected else {
                failed = true;
                continue;
            };
            if !value.dimension.compatible(&expected) {
                let rate = if kind == MotionKind::Continuous {
                    "the rate of "
                } else {
                    ""
                };
                let mut d = Diagnostic::new(
                    codes::MOTION_DIMENSION,
                    eq.value.span,
                    format!(
                        "{rate}`{name}` must be {expected}, but this is {}",
                        value.dimension
                    ),
                )
                .with_label_message(format!("{}", value.dimension))
                .with_secondary(
                    decls[state].unit.span,
                    format!("`{name}` is declared in {}", decls[state].unit.text()),
                );
                if kind == MotionKind::Continuous && value.dimension.compatible(&state_dim) {
                    d = d.with_hint("this has the state's own unit: continuous motion gives rates (per second); for a next value use `motion discrete`");
                }
                self.report(d);
                failed = true;
                continue;
            }
            if value.dimension.angle_cycle_conflict(&expected) {
                let d = self.cycle_conflict(eq.value.span, value.dimension, expected);
                self.report(d);
                failed = true;
                continue;
            }
            equations[state] = Some(value);
        }
        if failed {
            return None;
        }
        let written: Vec<bool> = equations.iter().map(Option::is_some).collect();
        let equations: Option<Vec<Expr>> = equations
            .into_iter()
            .enumerate()
            .map(|(i, eq)| {
                let dimension = self.states[i].dimension()?;
                Some(eq.unwrap_or_else(|| match kind {
                    MotionKind::Continuous => model_expr(
                        ExprKind::Number(0.0),
                        dimension.div(&seconds()).unwrap_or(dimension),
                        block.header,
                    ),
                    MotionKind::Discrete => model_expr(ExprKind::State(i), dimension, block.header),
                }))
            })
            .collect();
        Some(Motion {
            kind,
            equations: equations?,
            written,
            span: block.header,
        })
    }

    fn process(&mut self, block: &ast::NoiseBlock, white: WhiteRule) -> Vec<ProcessNoise> {
        let mut out = Vec::new();
        let mut seen = HashMap::new();
        for stmt in &block.stmts {
            let Ok(state) = self.target_state(&stmt.target, "process") else {
                continue;
            };
            if !self.once(
                &mut seen,
                state,
                stmt.span,
                "process noise",
                &stmt.target.name,
            ) {
                continue;
            }
            let Some(unit) = self.states[state].unit.clone() else {
                continue;
            };
            let what = format!("state `{}`", stmt.target.name);
            let subject = Subject {
                what: &what,
                unit: &unit,
                white,
            };
            if let Ok(noise) = self.noise(&stmt.dist, &subject) {
                out.push(ProcessNoise {
                    state,
                    kind: match noise {
                        Noise::White(amplitude) => ProcessNoiseKind::White { amplitude },
                        Noise::Dist(d) => ProcessNoiseKind::PerStep(d),
                    },
                    span: stmt.span,
                });
            }
        }
        out.sort_by_key(|p| p.state);
        out
    }

    fn initial(
        &mut self,
        block: Option<&ast::NoiseBlock>,
        count: usize,
    ) -> Vec<Option<Distribution>> {
        let mut out = vec![None; count];
        let Some(block) = block else {
            return out;
        };
        let mut seen = HashMap::new();
        for stmt in &block.stmts {
            let Ok(state) = self.target_state(&stmt.target, "initial") else {
                continue;
            };
            if !self.once(
                &mut seen,
                state,
                stmt.span,
                "an initial belief",
                &stmt.target.name,
            ) {
                continue;
            }
            let Some(unit) = self.states[state].unit.clone() else {
                continue;
            };
            let what = format!("the initial belief of `{}`", stmt.target.name);
            let subject = Subject {
                what: &what,
                unit: &unit,
                white: WhiteRule::NotProcess,
            };
            if let Ok(Noise::Dist(d)) = self.noise(&stmt.dist, &subject) {
                out[state] = Some(d);
            }
        }
        out
    }

    fn sensor(
        &mut self,
        block: &ast::SensorBlock,
        sensor_spans: &mut HashMap<String, Span>,
    ) -> Option<Sensor> {
        let sensor_name = &block.name.name;
        if let Some(first) = sensor_spans.get(sensor_name) {
            self.report(
                Diagnostic::new(
                    codes::DUPLICATE_NAME,
                    block.name.span,
                    format!("sensor `{sensor_name}` is declared twice"),
                )
                .with_secondary(*first, "first declared here"),
            );
        } else {
            sensor_spans.insert(sensor_name.clone(), block.name.span);
        }
        let mut failed = false;
        // Arguments and components share the sensor's namespace.
        let mut local: HashMap<String, Span> = HashMap::new();
        let mut local_name = |checker: &mut Checker, ident: &ast::Ident| -> bool {
            if !checker.not_reserved(ident) {
                return false;
            }
            let (first, hint) = match (local.get(&ident.name), checker.declared_at.get(&ident.name)) {
                (Some(first), _) => (*first, None),
                (None, Some(first)) => (
                    *first,
                    Some("a sensor's arguments and components must not reuse the name of a state, input or constant"),
                ),
                (None, None) => {
                    local.insert(ident.name.clone(), ident.span);
                    return true;
                }
            };
            let mut d = Diagnostic::new(
                codes::DUPLICATE_NAME,
                ident.span,
                format!("`{}` is already declared", ident.name),
            )
            .with_secondary(first, "first declared here");
            if let Some(hint) = hint {
                d = d.with_hint(hint);
            }
            checker.report(d);
            false
        };

        let mut args = Vec::new();
        let mut arg_info = Vec::new();
        for param in &block.params {
            failed |= !local_name(self, &param.name);
            let unit = self.declared_unit(&param.unit).ok();
            arg_info.push(SensorArgInfo {
                name: param.name.name.clone(),
                dimension: unit.as_ref().map(|u| u.dimension),
            });
            match unit {
                Some(unit) => args.push(SensorArg {
                    name: param.name.name.clone(),
                    unit,
                    span: param.name.span,
                }),
                None => failed = true,
            }
        }

        let mut components: Vec<(ReadingComponent, &ast::ComponentDecl)> = Vec::new();
        for item in &block.items {
            let ast::SensorItem::Component(decl) = item else {
                continue;
            };
            failed |= !local_name(self, &decl.name);
            let Ok(unit) = self.declared_unit(&decl.unit) else {
                failed = true;
                continue;
            };
            let wrap = self.wrap_check(decl.wrap, &unit, &decl.name.name);
            let Ok(expr) = self.expr(&decl.value, Place::Sensor(&arg_info)) else {
                failed = true;
                continue;
            };
            if !expr.dimension.compatible(&unit.dimension) {
                self.report(
                    Diagnostic::new(
                        codes::READING_DIMENSION,
                        decl.value.span,
                        format!(
                            "reading `{}` is declared in {} ({}), but this is {}",
                            decl.name.name, unit.text, unit.dimension, expr.dimension
                        ),
                    )
                    .with_label_message(format!("{}", expr.dimension))
                    .with_secondary(unit.span, "declared unit"),
                );
                failed = true;
                continue;
            }
            if expr.dimension.angle_cycle_conflict(&unit.dimension) {
                let d = self.cycle_conflict(decl.value.span, expr.dimension, unit.dimension);
                self.report(d);
                failed = true;
                continue;
            }
            components.push((
                ReadingComponent {
                    name: decl.name.name.clone(),
                    doc: decl.doc.as_ref().map(|d| d.text.clone()),
                    unit,
                    wrap,
                    expr,
                    span: decl.name.span,
                },
                decl,
            ));
        }
        let declared = block
            .items
            .iter()
            .filter(|i| matches!(i, ast::SensorItem::Component(_)))
            .count();
        if declared == 0 {
            self.report(
                Diagnostic::new(
                    codes::SENSOR_WITHOUT_COMPONENTS,
                    block.name.span,
                    format!("sensor `{sensor_name}` reads nothing"),
                )
                .with_hint("declare a reading component: `name : unit = expression`"),
            );
            return None;
        }

        let gate = self.gate(block);
        let complete = !failed && components.len() == declared;
        let comps: Vec<(&ast::ComponentDecl, DeclaredUnit)> = components
            .iter()
            .map(|(c, d)| (*d, c.unit.clone()))
            .collect();
        let noise = self.sensor_noise(block, &comps, complete);
        Some(Sensor {
            name: sensor_name.clone(),
            doc: block.doc.as_ref().map(|d| d.text.clone()),
            args,
            components: components.into_iter().map(|(c, _)| c).collect(),
            noise: noise?,
            gate: gate.ok()?,
            span: block.name.span,
        })
    }

    fn gate(&mut self, block: &ast::SensorBlock) -> Result<Option<Gate>, Reported> {
        let mut gate = None;
        let mut failed = false;
        for item in &block.items {
            let ast::SensorItem::Gate(stmt) = item else {
                continue;
            };
            if let Some(Gate { span, .. }) = gate {
                self.report(
                    Diagnostic::new(
                        codes::DUPLICATE_GATE,
                        stmt.span,
                        "this sensor already has a gate",
                    )
                    .with_secondary(span, "first gate"),
                );
                failed = true;
                continue;
            }
            let Ok((value, dimension)) = self.constant(&stmt.value) else {
                failed = true;
                continue;
            };
            if dimension != Dimension::NONE || !(value > 0.0 && value < 1.0) {
                let mut d = Diagnostic::new(
                    codes::GATE_RANGE,
                    stmt.value.span,
                    "a gate probability must lie strictly between 0 and 100 %",
                );
                if dimension != Dimension::NONE {
                    d = d.with_label_message(format!("this is {dimension}, not a probability"));
                } else {
                    d = d.with_label_message(format!("this is {}", value));
                }
                if dimension == Dimension::NONE && value > 1.0 && value < 100.0 {
                    d = d.with_hint(format!("write the percent sign: `gate {} %`", value));
                }
                self.report(d);
                failed = true;
                continue;
            }
            gate = Some(Gate {
                probability: value,
                span: stmt.span,
            });
        }
        if failed {
            Err(Reported)
        } else {
            Ok(gate)
        }
    }

    /// Reading noise for the lowered `components`. When some component failed
    /// (`complete` false), the noise of the others is still checked, but nothing is
    /// reported missing and no noise is returned.
    fn sensor_noise(
        &mut self,
        block: &ast::SensorBlock,
        components: &[(&ast::ComponentDecl, DeclaredUnit)],
        complete: bool,
    ) -> Option<SensorNoise> {
        let mut shared: Option<&ast::SharedNoise> = None;
        let mut own: HashMap<&str, &ast::NoiseStmt> = HashMap::new();
        let mut failed = false;
        let component_names: Vec<&str> = block
            .items
            .iter()
            .filter_map(|i| match i {
                ast::SensorItem::Component(c) => Some(c.name.name.as_str()),
                _ => None,
            })
            .collect();
        for item in &block.items {
            match item {
                ast::SensorItem::SharedNoise(stmt) => {
                    if let Some(first) = shared {
                        self.report(
                            Diagnostic::new(
                                codes::DUPLICATE_READING_NOISE,
                                stmt.span,
                                "this sensor's noise is given twice",
                            )
                            .with_secondary(first.span, "first given here"),
                        );
                        failed = true;
                    } else {
                        shared = Some(stmt);
                    }
                }
                ast::SensorItem::ComponentNoise(stmt) => {
                    let name = stmt.target.name.as_str();
                    if !component_names.contains(&name) {
                        let mut d = Diagnostic::new(
                            codes::UNKNOWN_COMPONENT,
                            stmt.target.span,
                            format!("sensor `{}` has no component `{name}`", block.name.name),
                        )
                        .with_label_message("not a reading component of this sensor");
                        if let Some(hint) =
                            did_you_mean(&suggest(name, component_names.iter().copied()))
                        {
                            d = d.with_hint(hint);
                        } else {
                            d = d.with_hint("`name ~ distribution` in a sensor gives the noise of its reading component `name`");
                        }
                        self.report(d);
                        failed = true;
                    } else if let Some(first) = own.get(name) {
                        self.report(
                            Diagnostic::new(
                                codes::DUPLICATE_READING_NOISE,
                                stmt.span,
                                format!("the noise of `{name}` is given twice"),
                            )
                            .with_secondary(first.span, "first given here"),
                        );
                        failed = true;
                    } else {
                        own.insert(name, stmt);
                    }
                }
                _ => {}
            }
        }
        if let Some(shared) = shared {
            for stmt in own.values() {
                self.report(
                    Diagnostic::new(
                        codes::DUPLICATE_READING_NOISE,
                        stmt.span,
                        format!(
                            "the noise of `{}` is also given by the shared `noise` statement",
                            stmt.target.name
                        ),
                    )
                    .with_secondary(shared.span, "shared noise")
                    .with_hint("keep either the shared statement or the per-component ones"),
                );
                failed = true;
            }
        }
        if failed {
            return None;
        }
        if let (
            true,
            Some(ast::SharedNoise {
                kind: ast::SharedNoiseKind::Covariance(cov),
                ..
            }),
        ) = (complete, shared)
        {
            let comps: Vec<(String, Dimension)> = components
                .iter()
                .map(|(c, u)| (c.name.name.clone(), u.dimension))
                .collect();
            return self
                .covariance(cov, &comps)
                .ok()
                .map(SensorNoise::Covariance);
        }
        let mut dists = Vec::new();
        for (decl, unit) in components {
            let name = decl.name.name.as_str();
            let dist = match (own.get(name), shared) {
                (Some(stmt), _) => &stmt.dist,
                (
                    None,
                    Some(ast::SharedNoise {
                        kind: ast::SharedNoiseKind::Each(dist),
                        ..
                    }),
                ) => dist,
                (None, Some(_)) => continue,
                _ if !complete => continue,
                _ => {
                    self.report(
                        Diagnostic::new(
                            codes::MISSING_READING_NOISE,
                            decl.name.span,
                            format!("reading `{name}` has no noise"),
                        )
                        .with_hint(format!(
                            "add `{name} ~ normal(sigma)` or a shared `noise ~ normal(sigma)`"
                        )),
                    );
                    failed = true;
                    continue;
                }
            };
            let what = format!("reading `{name}`");
            let subject = Subject {
                what: &what,
                unit,
                white: WhiteRule::NotProcess,
            };
            match self.noise(dist, &subject) {
                Ok(Noise::Dist(d)) => dists.push(d),
                _ => failed = true,
            }
        }
        (complete && !failed).then_some(SensorNoise::PerComponent(dists))
    }

    /// Warns about states no reading depends on, directly or through the motion of
    /// a state that is read (a structural test; the IR stage runs the full one).
    fn observability(&mut self, states: &[StateVar], motion: &Motion, sensors: &[Sensor]) {
        let mut observed = vec![false; states.len()];
        let mut frontier = Vec::new();
        for sensor in sensors {
            for component in &sensor.components {
                collect_states(&component.expr, &mut frontier);
            }
        }
        while let Some(i) = frontier.pop() {
            if i < observed.len() && !observed[i] {
                observed[i] = true;
                if let Some(eq) = motion.equations.get(i) {
                    collect_states(eq, &mut frontier);
                }
            }
        }
        for (state, seen) in states.iter().zip(observed) {
            if !seen {
                self.report(
                    Diagnostic::new(codes::UNOBSERVED_STATE, state.span, format!("no sensor reading depends on `{}`", state.name))
                        .with_label_message("never observed")
                        .with_hint("add a sensor that reads it (or a state it drives), or remove it if it is not needed"),
                );
            }
        }
    }
}

/// Pushes the index of every state `expr` reads.
fn collect_states(expr: &Expr, out: &mut Vec<usize>) {
    match &expr.kind {
        ExprKind::State(i) => out.push(*i),
        ExprKind::Neg(a) => collect_states(a, out),
        ExprKind::Binary(_, a, b) => {
            collect_states(a, out);
            collect_states(b, out);
        }
        ExprKind::Call(_, args) => args.iter().for_each(|a| collect_states(a, out)),
        ExprKind::Number(_) | ExprKind::Input(_) | ExprKind::Arg(_) | ExprKind::Dt => {}
    }
}
