//! What the grid and particle methods take from a model, shared by the Rust back end
//! and the simulator so that both run the same filter: the noise sources of a step and
//! the transition that samples them, the motion noise a grid spreads along each axis,
//! the grid's axes, each sensor's residuals and noise shapes, and the initial belief.
//! Models these methods cannot run are refused here, with a diagnostic.
//!
//! # Noise sources
//!
//! Sources are numbered as the IR's `Symbol::Noise`: the lowered model's discrete
//! sources (per-step process noise, then noisy inputs), then one source per state with
//! white process noise. White noise enters by the Euler-Maruyama step, a normal sample
//! of standard deviation `amplitude * sqrt(dt)` added to its own state (common practice,
//! no source); unlike the Kalman methods' discretised covariance it does not couple
//! into other states within the step.
//!
//! # Grid motion noise
//!
//! A grid spreads each axis with one kernel for every cell, so the noise reaching a state
//! must not depend on the state, each source may reach one state only (the axes' noises
//! are independent), and a state may combine several sources only when all are normal.
//! Everything else is refused with `E0606`; the particle method has none of these limits.
//!
//! # Ranges
//!
//! A state's range (`in lo .. hi`) is where the state can be. The grid covers exactly
//! that and drops mass moved past its ends; the particle filter gives a particle outside
//! it zero likelihood at the next correction ([`BayesPlan::support`]), the same rule
//! applied one step later.

use std::collections::HashMap;

use crate::diag::{codes, Diagnostic, Span};
use crate::ir::{self, Integrator, LowerOptions, Lowered, NodeId, NoiseSourceKind, Symbol};
use crate::model::{Distribution, Model, ProcessNoiseKind, SensorNoise};
use crate::options::{self, EstimatorOptions, Method};

/// The most cells a generated grid may hold (its arrays live on the stack).
pub const MAX_GRID_CELLS: usize = 1_000_000;

/// The most particles a generated particle filter may hold.
pub const MAX_PARTICLES: u32 = 1_000_000;

/// The shape of a centred noise distribution, as the runtime's `Noise` names it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Shape {
    /// Normal; the width is the standard deviation.
    Normal,
    /// Symmetric triangle; the width is the half-width.
    Triangle,
    /// Uniform; the width is the half-width.
    Uniform,
}

impl Shape {
    /// The runtime's variant name.
    pub fn name(self) -> &'static str {
        match self {
            Shape::Normal => "Normal",
            Shape::Triangle => "Triangle",
            Shape::Uniform => "Uniform",
        }
    }

    /// The name of the width parameter, as the runtime's `Noise` fields spell it.
    pub fn width_name(self) -> &'static str {
        match self {
            Shape::Normal => "std_dev",
            Shape::Triangle | Shape::Uniform => "half_width",
        }
    }
}

/// A centred noise: its shape and width (SI).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Spread {
    /// Shape.
    pub shape: Shape,
    /// Standard deviation (normal) or half-width (triangle, uniform).
    pub width: f64,
}

impl Spread {
    /// The spread of `distribution` about its mean.
    pub fn of(distribution: &Distribution) -> Spread {
        match *distribution {
            Distribution::Normal { sigma, .. } => Spread {
                shape: Shape::Normal,
                width: sigma,
            },
            Distribution::Triangle { half_width, .. } => Spread {
                shape: Shape::Triangle,
                width: half_width,
            },
            Distribution::Uniform { lo, hi } => Spread {
                shape: Shape::Uniform,
                width: 0.5 * (hi - lo),
            },
        }
    }
}

/// Where a noise source enters the step.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SourceKind {
    /// Per-step process noise added to a state.
    Process {
        /// The state.
        state: usize,
    },
    /// Noise on a measured input.
    Input {
        /// The input.
        input: usize,
    },
    /// White process noise on a state, as an Euler-Maruyama sample.
    White {
        /// The state.
        state: usize,
    },
}

/// One noise source of a step.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Source {
    /// Where it enters.
    pub kind: SourceKind,
    /// Its spread. For white noise: normal, with the amplitude (per square-root second)
    /// as width; the step's standard deviation is `width * sqrt(dt)`.
    pub spread: Spread,
    /// Where the spec gives it.
    pub span: Span,
}

impl Source {
    /// True when the width scales with `sqrt(dt)` (white noise).
    pub fn is_white(&self) -> bool {
        matches!(self.kind, SourceKind::White { .. })
    }
}

/// The motion noise a grid spreads along one axis: the sources reaching the state,
/// each through a gain that may depend on the inputs and `dt` but not on the state.
#[derive(Debug, Clone, PartialEq)]
pub struct AxisNoise {
    /// `(source, gain)` pairs; the gain multiplies the source's sample.
    pub terms: Vec<(usize, NodeId)>,
    /// The kernel's shape: the one source's shape, or normal when several (all normal)
    /// combine by adding variances.
    pub shape: Shape,
}

/// One grid axis.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GridAxis {
    /// Lower end of the first cell (SI).
    pub lo: f64,
    /// Cell width (SI).
    pub width: f64,
    /// Number of cells.
    pub count: usize,
}

/// What the grid method needs beyond the shared plan.
#[derive(Debug, Clone, PartialEq)]
pub struct GridPlan {
    /// One axis per state.
    pub axes: Vec<GridAxis>,
    /// One motion noise per state.
    pub noise: Vec<AxisNoise>,
    /// `Some(t)` when the motion is `x_next = x + t(u, dt)`: one node per state, with
    /// no state in it. The grid then shifts the belief exactly instead of pushing cells.
    pub translation: Option<Vec<NodeId>>,
}

impl GridPlan {
    /// Total number of cells.
    pub fn cells(&self) -> usize {
        self.axes.iter().map(|a| a.count).product()
    }
}

/// A model ready for the grid or particle method.
#[derive(Debug, Clone)]
pub struct BayesPlan {
    /// The lowered model, its arena extended with this plan's nodes.
    pub lowered: Lowered,
    /// The noise sources of a step, in `Symbol::Noise` order.
    pub sources: Vec<Source>,
    /// `x_next(x, u, w, dt)` per state, with every source's sample `w` in it.
    pub sampled_transition: Vec<NodeId>,
    /// Per state, the range the state must lie in (particle method; the grid's cells
    /// are always inside it).
    pub support: Vec<Option<(f64, f64)>>,
    /// Per sensor, the spread of each reading component's noise (the residuals are
    /// `lowered.sensors[s].residual`, wrapped where the component is an angle).
    pub reading_noise: Vec<Vec<Spread>>,
    /// Grid method only.
    pub grid: Option<GridPlan>,
    /// Initial belief per state: mean and spread (a state without one, but with a
    /// range, starts uniform over its range).
    pub initial: Vec<Option<(f64, Spread)>>,
    /// Particle count.
    pub particles: usize,
    /// Resample below this fraction of the particle count.
    pub resample_below: f64,
    /// Warnings about the spec under the method.
    pub warnings: Vec<Diagnostic>,
}

/// The IR options of the grid and particle methods: the `auto` integrator becomes
/// RK4, since the exact exponential of linear motion is a Kalman-method feature that
/// computes matrices at run time.
pub fn lower_options(options: &EstimatorOptions) -> LowerOptions {
    LowerOptions {
        integrator: match options.integrator {
            options::Integrator::Euler => Integrator::Euler,
            options::Integrator::Auto | options::Integrator::Rk4 => Integrator::Rk4,
        },
    }
}

/// Plans `model` for `options.method` (grid or particle).
pub fn plan(model: &Model, options: &EstimatorOptions) -> Result<BayesPlan, Vec<Diagnostic>> {
    let mut errors = shared_refusals(model);
    let (particles, resample_below) = match particle_settings(options) {
        Ok(settings) => settings,
        Err(error) => {
            errors.push(error);
            (0, 0.0)
        }
    };
    let axes = if options.method == Method::Grid {
        match grid_axes(model, options) {
            Ok(axes) => Some(axes),
            Err(mut refusals) => {
                errors.append(&mut refusals);
                None
            }
        }
    } else {
        None
    };
    if !errors.is_empty() {
        return Err(errors);
    }
    let mut lowered = ir::lower(model, &lower_options(options))?;
    let sources = sources(model, &lowered);
    let sampled_transition = sampled_transition(&mut lowered, &sources);
    let grid = match axes {
        Some(axes) => Some(GridPlan {
            noise: grid_noise(model, &mut lowered, &sources)?,
            translation: translation(&mut lowered),
            axes,
        }),
        None => None,
    };
    let reading_noise = model
        .sensors
        .iter()
        .map(|sensor| match &sensor.noise {
            SensorNoise::PerComponent(list) => list.iter().map(Spread::of).collect(),
            // Refused by `shared_refusals`.
            SensorNoise::Covariance(_) => Vec::new(),
        })
        .collect();
    let initial = model
        .states
        .iter()
        .zip(&model.initial)
        .map(|(state, initial)| match (initial, state.range) {
            (Some(distribution), _) => Some((distribution.mean(), Spread::of(distribution))),
            (None, Some(range)) => Some((
                0.5 * (range.lo + range.hi),
                Spread {
                    shape: Shape::Uniform,
                    width: 0.5 * (range.hi - range.lo),
                },
            )),
            (None, None) => None,
        })
        .collect();
    let support = if grid.is_some() {
        vec![None; model.states.len()]
    } else {
        model
            .states
            .iter()
            .map(|state| state.range.map(|range| (range.lo, range.hi)))
            .collect()
    };
    Ok(BayesPlan {
        lowered,
        support,
        sources,
        sampled_transition,
        reading_noise,
        grid,
        initial,
        particles,
        resample_below,
        warnings: gate_warnings(model),
    })
}

fn mismatch(span: Span, message: String, hint: &str) -> Diagnostic {
    Diagnostic::new(codes::MODEL_DOES_NOT_FIT_METHOD, span, message).with_hint(hint)
}

/// Refusals that apply to both methods.
fn shared_refusals(model: &Model) -> Vec<Diagnostic> {
    let wrapped = model.states.iter().filter(|s| s.wrap).map(|state| {
        mismatch(
            state.span,
            format!(
                "state `{}` wraps; the grid and particle methods do not average angles on the circle",
                state.name
            ),
            "use `ekf` or `ukf` for a model with angle states",
        )
    });
    let correlated = model
        .sensors
        .iter()
        .filter(|s| matches!(s.noise, SensorNoise::Covariance(_)))
        .map(|sensor| {
            mismatch(
                sensor.span,
                format!(
                    "sensor `{}` gives a full reading-noise covariance; the grid and particle methods take one noise per component",
                    sensor.name
                ),
                "give each reading component its own `noise ~ ...`, or use `ekf` or `ukf`",
            )
        });
    wrapped.chain(correlated).collect()
}

fn particle_settings(options: &EstimatorOptions) -> Result<(usize, f64), Diagnostic> {
    let count = options.particle_count();
    let threshold = options.resample_threshold();
    let invalid = |message: String| {
        Diagnostic::new(codes::BELIEF_SIZE_INVALID, Span::default(), message).with_note(
            "the setting comes from the build options (reckon.toml, command line or build script)",
        )
    };
    if !(1..=MAX_PARTICLES).contains(&count) {
        return Err(invalid(format!(
            "{count} particles: the count must be between 1 and {MAX_PARTICLES}"
        )));
    }
    if !(threshold > 0.0 && threshold <= 1.0) {
        return Err(invalid(format!(
            "resample_below = {threshold}: the threshold must be in (0, 1]"
        )));
    }
    Ok((count as usize, threshold))
}

fn grid_axes(model: &Model, options: &EstimatorOptions) -> Result<Vec<GridAxis>, Vec<Diagnostic>> {
    if !(1..=2).contains(&model.states.len()) {
        let span = model
            .states
            .get(2)
            .map_or(model.motion.span, |state| state.span);
        return Err(vec![mismatch(
            span,
            format!(
                "the grid method covers one or two states; `{}` has {}",
                model.name,
                model.states.len()
            ),
            "use `particle` for more states, or `ekf`/`ukf`",
        )]);
    }
    let mut errors = Vec::new();
    let mut axes = Vec::new();
    for state in &model.states {
        let Some(range) = state.range else {
            errors.push(mismatch(
                state.span,
                format!("state `{}` has no range for the grid", state.name),
                "declare the range and cell size, e.g. `position : m in 0 m .. 40 m by 5 cm`",
            ));
            continue;
        };
        let span = range.hi - range.lo;
        let axis = match (range.cell, options.grid_cells) {
            (Some(cell), _) => GridAxis {
                lo: range.lo,
                width: cell,
                count: cells_covering(span, cell),
            },
            (None, Some(cells)) if cells > 0 => GridAxis {
                lo: range.lo,
                width: span / f64::from(cells),
                count: cells as usize,
            },
            (None, _) => {
                errors.push(mismatch(
                    state.span,
                    format!("the range of `{}` gives no cell size", state.name),
                    "add `by <cell>` to the range, or `cells = N` to the [[estimator]] table",
                ));
                continue;
            }
        };
        axes.push(axis);
    }
    let total = axes
        .iter()
        .try_fold(1usize, |product, axis| product.checked_mul(axis.count));
    if errors.is_empty() && total.is_none_or(|cells| cells > MAX_GRID_CELLS) {
        let counts: Vec<String> = axes.iter().map(|a| a.count.to_string()).collect();
        errors.push(
            Diagnostic::new(
                codes::BELIEF_SIZE_INVALID,
                model.states[0].span,
                format!(
                    "the grid would hold {} cells, more than {MAX_GRID_CELLS}",
                    counts.join(" x ")
                ),
            )
            .with_hint("use a coarser cell or a smaller range"),
        );
    }
    if errors.is_empty() {
        Ok(axes)
    } else {
        Err(errors)
    }
}

/// The number of cells of width `cell` covering `span`: a whole number when the cell
/// divides the span up to round-off (40 m by 5 cm is 800 cells, not 801), otherwise
/// rounded up so the grid covers the whole range. Saturates for absurd ratios, which
/// the size check then refuses.
fn cells_covering(span: f64, cell: f64) -> usize {
    let ratio = span / cell;
    let nearest = ratio.round();
    let count = if (ratio - nearest).abs() <= 1e-9 * nearest {
        nearest
    } else {
        ratio.ceil()
    };
    if count >= usize::MAX as f64 {
        usize::MAX
    } else {
        (count as usize).max(1)
    }
}

/// The sources in `Symbol::Noise` order, with the spans the spec gives them at.
fn sources(model: &Model, lowered: &Lowered) -> Vec<Source> {
    let process_span = |state: usize| {
        model
            .process_noise
            .iter()
            .find(|p| p.state == state)
            .map_or(model.states[state].span, |p| p.span)
    };
    let discrete = lowered.noise_sources.iter().map(|source| {
        let (kind, span) = match source.kind {
            NoiseSourceKind::PerStep { state } => {
                (SourceKind::Process { state }, process_span(state))
            }
            NoiseSourceKind::Input { input } => {
                (SourceKind::Input { input }, model.inputs[input].span)
            }
        };
        Source {
            kind,
            spread: Spread::of(&source.distribution),
            span,
        }
    });
    let white = model
        .process_noise
        .iter()
        .filter_map(|noise| match noise.kind {
            ProcessNoiseKind::White { amplitude } => Some(Source {
                kind: SourceKind::White { state: noise.state },
                spread: Spread {
                    shape: Shape::Normal,
                    width: amplitude,
                },
                span: noise.span,
            }),
            ProcessNoiseKind::PerStep(_) => None,
        });
    discrete.chain(white).collect()
}

/// The lowered noisy transition with each white source's sample added to its state.
fn sampled_transition(lowered: &mut Lowered, sources: &[Source]) -> Vec<NodeId> {
    let mut transition = lowered.transition_noisy.clone();
    for (index, source) in sources.iter().enumerate() {
        if let SourceKind::White { state } = source.kind {
            let sample = lowered.arena.symbol(Symbol::Noise(index as u32));
            transition[state] = lowered.arena.add(transition[state], sample);
        }
    }
    transition
}

/// True when `node` reads a state.
fn reads_state(lowered: &Lowered, node: NodeId) -> bool {
    lowered
        .arena
        .reachable(&[node])
        .into_iter()
        .any(|id| matches!(lowered.arena.node(id), ir::Node::Symbol(Symbol::State(_))))
}

fn grid_noise(
    model: &Model,
    lowered: &mut Lowered,
    sources: &[Source],
) -> Result<Vec<AxisNoise>, Vec<Diagnostic>> {
    let refuse = |span: Span, message: String, hint: &str| {
        Diagnostic::new(codes::GRID_MOTION_NOISE, span, message).with_hint(hint)
    };
    let one = lowered.arena.constant(1.0);
    let mut terms: Vec<Vec<(usize, NodeId)>> = vec![Vec::new(); model.states.len()];
    let mut errors = Vec::new();
    for (index, source) in sources.iter().enumerate() {
        let reached: Vec<(usize, NodeId)> = match source.kind {
            SourceKind::White { state } => vec![(state, one)],
            _ => (0..model.states.len())
                .map(|state| (state, lowered.g_jac.get(state, index)))
                .filter(|&(_, gain)| !lowered.arena.is_zero(gain))
                .collect(),
        };
        if reached.len() > 1 {
            let names: Vec<&str> = reached
                .iter()
                .map(|&(s, _)| model.states[s].name.as_str())
                .collect();
            errors.push(refuse(
                source.span,
                format!(
                    "this noise reaches {} states ({}); a grid spreads each axis with its own, independent noise",
                    reached.len(),
                    names.join(", ")
                ),
                "use the `particle` method, which samples the noise where it enters the motion",
            ));
            continue;
        }
        for (state, gain) in reached {
            if reads_state(lowered, gain) {
                errors.push(refuse(
                    source.span,
                    format!(
                        "the effect of this noise on `{}` depends on the state; a grid uses one kernel for every cell",
                        model.states[state].name
                    ),
                    "use the `particle` method, or give the state its own process noise",
                ));
            } else {
                terms[state].push((index, gain));
            }
        }
    }
    let mut noise = Vec::new();
    for (state, terms) in terms.into_iter().enumerate() {
        let shape = match terms.as_slice() {
            [] => {
                errors.push(refuse(
                    model.states[state].span,
                    format!(
                        "state `{}` has no motion noise; a grid needs a kernel on every axis",
                        model.states[state].name
                    ),
                    "add process noise to it, e.g. a normal a fraction of the cell wide",
                ));
                continue;
            }
            [(source, _)] => sources[*source].spread.shape,
            several => {
                let odd = several
                    .iter()
                    .find(|(s, _)| sources[*s].spread.shape != Shape::Normal);
                if let Some(&(odd, _)) = odd {
                    errors.push(
                        refuse(
                            sources[odd].span,
                            format!(
                                "`{}` receives a {} noise together with other noise; a grid combines several noises on one state only when all are normal",
                                model.states[state].name,
                                sources[odd].spread.shape.name().to_ascii_lowercase()
                            ),
                            "give the state one noise with the summed variance, or use the `particle` method",
                        )
                        .with_label_message("not normal"),
                    );
                    continue;
                }
                Shape::Normal
            }
        };
        noise.push(AxisNoise { terms, shape });
    }
    if errors.is_empty() {
        Ok(noise)
    } else {
        Err(errors)
    }
}

/// `Some(t)` when `F` is the identity (structurally), so `x_next = x + t(u, dt)` with
/// `t` the transition at `x = 0`.
fn translation(lowered: &mut Lowered) -> Option<Vec<NodeId>> {
    let n = lowered.state_count;
    let identity = (0..n).all(|r| {
        (0..n).all(|c| {
            let entry = lowered.f_jac.get(r, c);
            if r == c {
                lowered.arena.constant_value(entry) == Some(1.0)
            } else {
                lowered.arena.is_zero(entry)
            }
        })
    });
    if !identity {
        return None;
    }
    let zero = lowered.arena.constant(0.0);
    let mut memo = HashMap::new();
    let at_origin = |s: Symbol| matches!(s, Symbol::State(_)).then_some(zero);
    Some(
        lowered
            .transition
            .clone()
            .into_iter()
            .map(|root| lowered.arena.substitute(root, &at_origin, &mut memo))
            .collect(),
    )
}

fn gate_warnings(model: &Model) -> Vec<Diagnostic> {
    model
        .sensors
        .iter()
        .filter_map(|sensor| {
            let gate = sensor.gate?;
            Some(
                Diagnostic::new(
                    codes::GATE_NOT_APPLIED,
                    gate.span,
                    format!(
                        "the gate of sensor `{}` is not applied by the grid and particle methods",
                        sensor.name
                    ),
                )
                .with_hint("every reading is weighed by its likelihood; the correction returns its log evidence"),
            )
        })
        .collect()
}

#[cfg(test)]
pub(crate) mod test_specs;
#[cfg(test)]
mod tests;
