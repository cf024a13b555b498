//! The grid and particle filters in the simulator: which capacity of the runtime's
//! fixed-size filters a scenario runs in ([`Layout`]), the dispatch from the state
//! dimension and capacity known at run time to the runtime's const parameters, and the
//! filters driven by the run loop as an [`Estimate`].
//!
//! The runtime keeps a belief in arrays of a const capacity and uses a count of them
//! ([`Axis::with_count`], [`ParticleFilter::from_noise_counted`]), with results
//! bit-for-bit those of a filter of exactly that size. The simulator instantiates a
//! small menu of capacities, each a factor 4 above the last, and runs a scenario in the
//! smallest that holds it; the cost of the unused slots (clearing and copying the
//! arrays) is at most that factor. The arrays live on the stack, so the workers get a
//! stack sized for the capacity ([`Layout::stack_bytes`]).

use nalgebra::{DMatrix, DVector, SVector};
use rand_pcg::Pcg64;
use reckon_runtime::grid::{Axis, Grid1, Grid2, GridOptions, Noise};
use reckon_runtime::particle::{ParticleFilter, ParticleOptions, Pcg32};

use crate::back::bayes::BayesPlan;
use crate::back::interp_bayes::{
    spread_noise, GridMotion, ParticleMotion, ReadingLikelihood, SensorLikelihood,
};

use super::run::{Correction, Estimate, Machinery, RunRecord};
use super::scenario::Plan;

/// The most states a simulated particle filter may have.
pub const MAX_PARTICLE_STATES: usize = 8;

/// A capacity of a 1-D grid or a particle filter: cells or particles.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Capacity {
    C256,
    C1024,
    C4096,
    C16384,
    C65536,
}

impl Capacity {
    const ALL: [Capacity; 5] = [
        Capacity::C256,
        Capacity::C1024,
        Capacity::C4096,
        Capacity::C16384,
        Capacity::C65536,
    ];

    fn slots(self) -> usize {
        match self {
            Capacity::C256 => 256,
            Capacity::C1024 => 1024,
            Capacity::C4096 => 4096,
            Capacity::C16384 => 16384,
            Capacity::C65536 => 65536,
        }
    }

    /// The smallest capacity holding `count`.
    fn fitting(count: usize) -> Option<Capacity> {
        Capacity::ALL.into_iter().find(|c| c.slots() >= count)
    }
}

/// The capacity of one axis of a 2-D grid.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum AxisCapacity {
    A32,
    A128,
    A512,
}

impl AxisCapacity {
    const ALL: [AxisCapacity; 3] = [AxisCapacity::A32, AxisCapacity::A128, AxisCapacity::A512];

    fn slots(self) -> usize {
        match self {
            AxisCapacity::A32 => 32,
            AxisCapacity::A128 => 128,
            AxisCapacity::A512 => 512,
        }
    }

    fn fitting(count: usize) -> Option<AxisCapacity> {
        AxisCapacity::ALL.into_iter().find(|c| c.slots() >= count)
    }
}

/// Which runtime filter, at which capacity, a scenario runs in.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Layout {
    /// A 1-D grid.
    Grid1(Capacity),
    /// A 2-D grid, capacity per axis.
    Grid2(AxisCapacity, AxisCapacity),
    /// A particle filter over `states` states.
    Particles { states: usize, capacity: Capacity },
}

/// The runtime filter and capacity `plan` runs in, or why the simulator cannot hold it
/// (the message of an E0715).
pub(crate) fn layout(plan: &BayesPlan) -> Result<Layout, String> {
    let largest = |slots: usize| format!("the simulator holds at most {slots}");
    match &plan.grid {
        Some(grid) => match grid.axes.as_slice() {
            [x] => Capacity::fitting(x.count)
                .map(Layout::Grid1)
                .ok_or_else(|| {
                    format!(
                        "the grid has {} cells; {} cells on one axis",
                        x.count,
                        largest(Capacity::C65536.slots())
                    )
                }),
            [x, y] => match (
                AxisCapacity::fitting(x.count),
                AxisCapacity::fitting(y.count),
            ) {
                (Some(cx), Some(cy)) => Ok(Layout::Grid2(cx, cy)),
                _ => Err(format!(
                    "the grid has {} x {} cells; {} cells on each of two axes",
                    x.count,
                    y.count,
                    largest(AxisCapacity::A512.slots())
                )),
            },
            axes => Err(format!("the grid has {} axes", axes.len())),
        },
        None => {
            let states = plan.lowered.state_count;
            if !(1..=MAX_PARTICLE_STATES).contains(&states) {
                return Err(format!(
                    "the particle filter has {states} states; the simulator runs 1 to {MAX_PARTICLE_STATES}"
                ));
            }
            let capacity = Capacity::fitting(plan.particles).ok_or_else(|| {
                format!(
                    "{} particles; {} particles",
                    plan.particles,
                    largest(Capacity::C65536.slots())
                )
            })?;
            Ok(Layout::Particles { states, capacity })
        }
    }
}

impl Layout {
    /// Stack for one run: sixteen copies of the filter's arrays (a step keeps a few
    /// grid- or particle-sized temporaries, and unoptimised builds copy more) plus
    /// 8 MiB for everything else. Untouched stack costs no memory.
    pub(crate) fn stack_bytes(self) -> usize {
        let value = std::mem::size_of::<f64>();
        let arrays = match self {
            Layout::Grid1(capacity) => capacity.slots() * value,
            Layout::Grid2(x, y) => x.slots() * y.slots() * value,
            Layout::Particles { states, capacity } => capacity.slots() * (states + 2) * value,
        };
        16 * arrays + (8 << 20)
    }
}

/// What a grid or particle run needs beyond the machinery: the plan, the capacity, and
/// the interpreted model functions.
pub(crate) struct BayesParts<'a> {
    plan: &'a BayesPlan,
    layout: Layout,
    grid: Option<GridMotion<'a>>,
    particle: ParticleMotion<'a>,
    /// One per scheduled sensor.
    likelihoods: Vec<SensorLikelihood<'a>>,
}

impl<'a> BayesParts<'a> {
    /// The parts of `plan` run in `layout` on the scenario `scenario`, the motion noise
    /// scaled by the scenario's process-noise factor (on the variance, as for the
    /// Kalman methods' covariance).
    pub(crate) fn new(plan: &'a BayesPlan, layout: Layout, scenario: &Plan) -> BayesParts<'a> {
        let width_scale = scenario.noise_scale.sqrt();
        BayesParts {
            plan,
            layout,
            grid: GridMotion::new(plan, width_scale),
            particle: ParticleMotion::new(plan, width_scale),
            likelihoods: scenario
                .sensors
                .iter()
                .filter_map(|s| SensorLikelihood::new(plan, s.sensor))
                .collect(),
        }
    }

    pub(crate) fn layout(&self) -> Layout {
        self.layout
    }

    fn initial_noise<const D: usize>(&self) -> Option<(SVector<f64, D>, [Noise<f64>; D])> {
        let initial: Vec<_> = self.plan.initial.iter().copied().collect::<Option<_>>()?;
        if initial.len() != D {
            return None;
        }
        let mean = SVector::from_fn(|i, _| initial[i].0);
        let spread = core::array::from_fn(|i| spread_noise(&initial[i].1));
        Some((mean, spread))
    }

    fn grid_axis<const N: usize>(&self, index: usize) -> Option<Axis<f64, N>> {
        let axis = self.plan.grid.as_ref()?.axes.get(index)?;
        Axis::with_count(axis.lo, axis.width, axis.count).ok()
    }

    fn correct_with(
        &self,
        schedule: usize,
        z: &DVector<f64>,
        args: &[f64],
        correct: impl FnOnce(&ReadingLikelihood<'_, 'a>) -> Option<f64>,
    ) -> Correction {
        let Some(sensor) = self.likelihoods.get(schedule) else {
            return Correction::Rejected;
        };
        match correct(&sensor.reading(z.as_slice(), args)) {
            Some(ln_evidence) => Correction::Evidence { ln_evidence },
            None => Correction::Rejected,
        }
    }
}

/// The runtime has no input or reading of its own here (see
/// [`crate::back::interp_bayes`]): the adapters carry them.
fn nothing() -> SVector<f64, 0> {
    SVector::zeros()
}

struct Grid1Run<'m, 'a, const N: usize> {
    grid: Grid1<f64, N>,
    parts: &'m BayesParts<'a>,
    motion: &'m GridMotion<'a>,
}

impl<const N: usize> Estimate for Grid1Run<'_, '_, N> {
    fn predict(&mut self, u: &DVector<f64>, dt: f64) -> bool {
        self.grid
            .predict(&self.motion.at(u.as_slice()), &nothing(), dt)
            .is_ok()
    }

    fn correct(&mut self, schedule: usize, z: &DVector<f64>, args: &[f64]) -> Correction {
        let grid = &mut self.grid;
        self.parts.correct_with(schedule, z, args, |likelihood| {
            grid.correct(likelihood, &nothing())
                .ok()
                .map(|c| c.ln_evidence)
        })
    }

    fn mean(&self) -> DVector<f64> {
        DVector::from_element(1, self.grid.mean())
    }

    fn covariance(&self) -> DMatrix<f64> {
        DMatrix::from_element(1, 1, self.grid.histogram_variance())
    }
}

struct Grid2Run<'m, 'a, const NX: usize, const NY: usize> {
    grid: Grid2<f64, NX, NY>,
    parts: &'m BayesParts<'a>,
    motion: &'m GridMotion<'a>,
}

impl<const NX: usize, const NY: usize> Estimate for Grid2Run<'_, '_, NX, NY> {
    fn predict(&mut self, u: &DVector<f64>, dt: f64) -> bool {
        self.grid
            .predict(&self.motion.at(u.as_slice()), &nothing(), dt)
            .is_ok()
    }

    fn correct(&mut self, schedule: usize, z: &DVector<f64>, args: &[f64]) -> Correction {
        let grid = &mut self.grid;
        self.parts.correct_with(schedule, z, args, |likelihood| {
            grid.correct(likelihood, &nothing())
                .ok()
                .map(|c| c.ln_evidence)
        })
    }

    fn mean(&self) -> DVector<f64> {
        DVector::from_column_slice(self.grid.mean().as_slice())
    }

    fn covariance(&self) -> DMatrix<f64> {
        DMatrix::from_column_slice(2, 2, self.grid.histogram_covariance().as_slice())
    }
}

struct ParticleRun<'m, 'a, const D: usize, const N: usize> {
    filter: ParticleFilter<f64, D, N>,
    parts: &'m BayesParts<'a>,
}

impl<const D: usize, const N: usize> Estimate for ParticleRun<'_, '_, D, N> {
    fn predict(&mut self, u: &DVector<f64>, dt: f64) -> bool {
        let motion = self.parts.particle.at(u.as_slice());
        self.filter.predict(&motion, &nothing(), dt).is_ok()
    }

    fn correct(&mut self, schedule: usize, z: &DVector<f64>, args: &[f64]) -> Correction {
        let filter = &mut self.filter;
        self.parts.correct_with(schedule, z, args, |likelihood| {
            filter
                .correct(likelihood, &nothing())
                .ok()
                .map(|c| c.ln_evidence)
        })
    }

    fn mean(&self) -> DVector<f64> {
        DVector::from_column_slice(self.filter.mean().as_slice())
    }

    fn covariance(&self) -> DMatrix<f64> {
        DMatrix::from_column_slice(D, D, self.filter.covariance().as_slice())
    }
}

/// One run's random streams and record.
pub(super) struct RunState<'r> {
    /// Seed of the particle filter's generator.
    pub seed: u64,
    /// Initial truth.
    pub truth: DVector<f64>,
    /// The truth's and readings' generator.
    pub rng: &'r mut Pcg64,
    /// Where the run's figures go.
    pub record: &'r mut RunRecord,
}

/// Runs the grid or particle filter of `parts` in `machinery`'s scenario. False when
/// the initial belief was refused (it puts no mass on the grid).
pub(super) fn run(machinery: &Machinery<'_>, parts: &BayesParts<'_>, state: RunState<'_>) -> bool {
    match parts.layout {
        Layout::Grid1(capacity) => match capacity {
            Capacity::C256 => grid1::<256>(machinery, parts, state),
            Capacity::C1024 => grid1::<1024>(machinery, parts, state),
            Capacity::C4096 => grid1::<4096>(machinery, parts, state),
            Capacity::C16384 => grid1::<16384>(machinery, parts, state),
            Capacity::C65536 => grid1::<65536>(machinery, parts, state),
        },
        Layout::Grid2(x, y) => match x {
            AxisCapacity::A32 => grid2_rows::<32>(y, machinery, parts, state),
            AxisCapacity::A128 => grid2_rows::<128>(y, machinery, parts, state),
            AxisCapacity::A512 => grid2_rows::<512>(y, machinery, parts, state),
        },
        Layout::Particles { states, capacity } => match states {
            1 => particles::<1>(capacity, machinery, parts, state),
            2 => particles::<2>(capacity, machinery, parts, state),
            3 => particles::<3>(capacity, machinery, parts, state),
            4 => particles::<4>(capacity, machinery, parts, state),
            5 => particles::<5>(capacity, machinery, parts, state),
            6 => particles::<6>(capacity, machinery, parts, state),
            7 => particles::<7>(capacity, machinery, parts, state),
            8 => particles::<8>(capacity, machinery, parts, state),
            // `layout` admits no other dimension.
            _ => false,
        },
    }
}

// Never inlined: each capacity's arrays must live in a frame of their own. Inlined into
// the dispatch, every arm's arrays would share one frame far larger than the stack
// sized for the capacity in use.
#[inline(never)]
fn grid1<const N: usize>(
    machinery: &Machinery<'_>,
    parts: &BayesParts<'_>,
    state: RunState<'_>,
) -> bool {
    let (Some(motion), Some(axis), Some((mean, [spread]))) = (
        parts.grid.as_ref(),
        parts.grid_axis::<N>(0),
        parts.initial_noise::<1>(),
    ) else {
        return false;
    };
    let Ok(grid) = Grid1::from_density(axis, mean[0], spread, GridOptions::default()) else {
        return false;
    };
    let mut estimate = Grid1Run {
        grid,
        parts,
        motion,
    };
    machinery.run_loop(&mut estimate, state.truth, state.rng, state.record);
    true
}

fn grid2_rows<const NX: usize>(
    y: AxisCapacity,
    machinery: &Machinery<'_>,
    parts: &BayesParts<'_>,
    state: RunState<'_>,
) -> bool {
    match y {
        AxisCapacity::A32 => grid2::<NX, 32>(machinery, parts, state),
        AxisCapacity::A128 => grid2::<NX, 128>(machinery, parts, state),
        AxisCapacity::A512 => grid2::<NX, 512>(machinery, parts, state),
    }
}

// Never inlined: each capacity's arrays must live in a frame of their own. Inlined into
// the dispatch, every arm's arrays would share one frame far larger than the stack
// sized for the capacity in use.
#[inline(never)]
fn grid2<const NX: usize, const NY: usize>(
    machinery: &Machinery<'_>,
    parts: &BayesParts<'_>,
    state: RunState<'_>,
) -> bool {
    let (Some(motion), Some(x), Some(y), Some((mean, spread))) = (
        parts.grid.as_ref(),
        parts.grid_axis::<NX>(0),
        parts.grid_axis::<NY>(1),
        parts.initial_noise::<2>(),
    ) else {
        return false;
    };
    let Ok(grid) = Grid2::from_density(x, y, mean, spread, GridOptions::default()) else {
        return false;
    };
    let mut estimate = Grid2Run {
        grid,
        parts,
        motion,
    };
    machinery.run_loop(&mut estimate, state.truth, state.rng, state.record);
    true
}

fn particles<const D: usize>(
    capacity: Capacity,
    machinery: &Machinery<'_>,
    parts: &BayesParts<'_>,
    state: RunState<'_>,
) -> bool {
    match capacity {
        Capacity::C256 => particles_in::<D, 256>(machinery, parts, state),
        Capacity::C1024 => particles_in::<D, 1024>(machinery, parts, state),
        Capacity::C4096 => particles_in::<D, 4096>(machinery, parts, state),
        Capacity::C16384 => particles_in::<D, 16384>(machinery, parts, state),
        Capacity::C65536 => particles_in::<D, 65536>(machinery, parts, state),
    }
}

// Never inlined: each capacity's arrays must live in a frame of their own. Inlined into
// the dispatch, every arm's arrays would share one frame far larger than the stack
// sized for the capacity in use.
#[inline(never)]
fn particles_in<const D: usize, const N: usize>(
    machinery: &Machinery<'_>,
    parts: &BayesParts<'_>,
    state: RunState<'_>,
) -> bool {
    let Some((mean, spread)) = parts.initial_noise::<D>() else {
        return false;
    };
    let options = ParticleOptions {
        resample_below: parts.plan.resample_below,
    };
    let rng = Pcg32::new(state.seed, 0);
    let Ok(filter) = ParticleFilter::<f64, D, N>::from_noise_counted(
        parts.plan.particles,
        mean,
        spread,
        rng,
        options,
    ) else {
        return false;
    };
    let mut estimate = ParticleRun { filter, parts };
    machinery.run_loop(&mut estimate, state.truth, state.rng, state.record);
    true
}
