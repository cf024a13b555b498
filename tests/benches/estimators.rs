//! Estimator cost, side by side, for the demo specs: the generated estimator (`f64` and
//! `f32`), a hand-written extended Kalman filter with fixed-size dense matrices, and a
//! generic one with finite-difference Jacobians on dynamically sized matrices. Each
//! prediction, each correction and a full cycle (prediction plus one reading of every
//! sensor) is measured from the same warmed-up filter.
//!
//! Three modes, one binary:
//! * `cargo bench -p reckon-tests --bench estimators`: prints the heap allocations per
//!   operation (and fails if a generated or hand-written step allocates), then runs the
//!   criterion wall-time benchmarks (`-- --test` runs each once).
//! * `RECKON_CALLGRIND_JOB=list <binary>` lists the jobs; `RECKON_CALLGRIND_JOB=<job>`
//!   runs one operation `RECKON_CALLGRIND_REPEAT` times (default 1000) inside
//!   [`measured_operation`], the only function `tests/benches/callgrind.sh` tells
//!   callgrind to count.

mod filters;

use std::hint::black_box;

use criterion::{BatchSize, Criterion};
use filters::counting::{allocations_during, Counting};
use filters::scenario::{run_cycle, warmed, Step};
use filters::{pallet_robot, rail_cart, survey_launch, Filter};

#[global_allocator]
static ALLOCATOR: Counting = Counting;

/// Steps run before measuring, so the covariance has converged.
const WARM_UP: usize = 50;

/// A demo spec's scenario and sensor names.
struct Case {
    spec: &'static str,
    sensors: &'static [&'static str],
    steps: Vec<Step>,
}

/// What is measured: one prediction, one correction of sensor `n`, or a cycle.
#[derive(Clone, Copy)]
enum Operation {
    Predict,
    Correct(usize),
    Cycle,
}

impl Case {
    fn step(&self) -> &Step {
        &self.steps[WARM_UP]
    }

    fn operations(&self) -> Vec<(String, Operation)> {
        let corrections = self
            .sensors
            .iter()
            .enumerate()
            .map(|(index, name)| (format!("correct_{name}"), Operation::Correct(index)));
        std::iter::once(("predict".to_owned(), Operation::Predict))
            .chain(corrections)
            .chain(std::iter::once(("cycle".to_owned(), Operation::Cycle)))
            .collect()
    }

    /// The filter an operation starts from: warmed up, and for a correction also
    /// predicted to the reading's time, as it would be in use.
    fn start<F: Filter>(&self, filter: &F, operation: Operation) -> F {
        let mut start = filter.clone();
        if let Operation::Correct(_) = operation {
            start.predict(self.step().dt, &self.step().input);
        }
        start
    }
}

/// Runs `operation` once; returns how many steps were accepted, to keep the optimiser
/// honest and to let the driver check that nothing was rejected.
fn run<F: Filter>(filter: &mut F, operation: Operation, step: &Step) -> usize {
    match operation {
        Operation::Predict => usize::from(filter.predict(step.dt, &step.input)),
        Operation::Correct(index) => {
            let reading = &step.readings[index];
            usize::from(filter.correct(reading.sensor, &reading.values, &reading.args))
        }
        Operation::Cycle => run_cycle(filter, step),
    }
}

/// Something done with every (spec, variant) pair.
trait Visitor {
    fn visit<F: Filter>(&mut self, case: &Case, variant: &str, filter: F);
}

macro_rules! visit_spec {
    ($visitor:expr, $spec:ident) => {{
        let case = Case {
            spec: stringify!($spec),
            sensors: &$spec::SENSORS,
            steps: $spec::scenario(WARM_UP + 1),
        };
        $visitor.visit(
            &case,
            "generated_f64",
            warmed($spec::GeneratedF64::from_spec(), &case.steps, WARM_UP),
        );
        $visitor.visit(
            &case,
            "generated_f32",
            warmed($spec::GeneratedF32::from_spec(), &case.steps, WARM_UP),
        );
        $visitor.visit(
            &case,
            "hand_written",
            warmed($spec::Hand::from_spec(), &case.steps, WARM_UP),
        );
        $visitor.visit(
            &case,
            "finite_difference",
            warmed($spec::finite_difference(), &case.steps, WARM_UP),
        );
    }};
}

fn visit_all(visitor: &mut impl Visitor) {
    visit_spec!(visitor, rail_cart);
    visit_spec!(visitor, pallet_robot);
    visit_spec!(visitor, survey_launch);
}

/// Prints allocations per operation and fails if generated or hand-written code
/// allocates.
struct AllocationTable {
    failures: Vec<String>,
}

impl Visitor for AllocationTable {
    fn visit<F: Filter>(&mut self, case: &Case, variant: &str, filter: F) {
        for (name, operation) in case.operations() {
            let mut start = case.start(&filter, operation);
            let count = allocations_during(|| {
                black_box(run(&mut start, operation, case.step()));
            });
            println!("allocations {}/{variant}/{name} {count}", case.spec);
            if count > 0 && variant != "finite_difference" {
                self.failures
                    .push(format!("{}/{variant}/{name}: {count}", case.spec));
            }
        }
    }
}

/// Prints how far each variant's warmed-up state is from the generated `f64` one's, as
/// the largest difference relative to `1 + |reference|`: the variants must be running
/// the same filter for their costs to be comparable.
#[derive(Default)]
struct Agreement {
    reference: Vec<f64>,
}

impl Visitor for Agreement {
    fn visit<F: Filter>(&mut self, case: &Case, variant: &str, filter: F) {
        let snapshot = filter.snapshot();
        if variant == "generated_f64" {
            self.reference = snapshot;
            return;
        }
        let largest = snapshot
            .iter()
            .zip(&self.reference)
            .map(|(value, reference)| (value - reference).abs() / (1.0 + reference.abs()))
            .fold(0.0, f64::max);
        println!(
            "agreement {}/{variant} with generated_f64: {largest:.1e}",
            case.spec
        );
    }
}

/// Criterion wall-time benchmarks: group `<spec>/<variant>`, one function per operation.
struct WallTime<'a>(&'a mut Criterion);

impl Visitor for WallTime<'_> {
    fn visit<F: Filter>(&mut self, case: &Case, variant: &str, filter: F) {
        let mut group = self.0.benchmark_group(format!("{}/{variant}", case.spec));
        for (name, operation) in case.operations() {
            let start = case.start(&filter, operation);
            group.bench_function(name, |b| {
                b.iter_batched_ref(
                    || start.clone(),
                    |filter| run(filter, operation, black_box(case.step())),
                    BatchSize::SmallInput,
                )
            });
        }
        group.finish();
    }
}

/// The only code callgrind counts: everything `work` does, and nothing else.
#[inline(never)]
fn measured_operation(work: &mut dyn FnMut() -> usize) -> usize {
    work()
}

/// Runs the job named `<spec>/<variant>/<operation>` `repeat` times from the same start,
/// or lists the job names.
struct CallgrindDriver {
    job: String,
    repeat: usize,
    found: bool,
}

impl Visitor for CallgrindDriver {
    fn visit<F: Filter>(&mut self, case: &Case, variant: &str, filter: F) {
        for (name, operation) in case.operations() {
            let job = format!("{}/{variant}/{name}", case.spec);
            if self.job == "list" {
                println!("{job}");
                continue;
            }
            if job != self.job {
                continue;
            }
            self.found = true;
            let start = case.start(&filter, operation);
            let step = case.step();
            let mut accepted = 0;
            for _ in 0..self.repeat {
                let mut current = start.clone();
                accepted += measured_operation(&mut || run(&mut current, operation, step));
            }
            println!("{job} accepted {accepted} of {} operations", self.repeat);
        }
    }
}

fn main() {
    if let Ok(job) = std::env::var("RECKON_CALLGRIND_JOB") {
        let repeat = std::env::var("RECKON_CALLGRIND_REPEAT")
            .ok()
            .and_then(|text| text.parse().ok())
            .unwrap_or(1000);
        let mut driver = CallgrindDriver {
            job,
            repeat,
            found: false,
        };
        visit_all(&mut driver);
        assert!(
            driver.found || driver.job == "list",
            "no job {}",
            driver.job
        );
        return;
    }
    visit_all(&mut Agreement::default());
    let mut table = AllocationTable {
        failures: Vec::new(),
    };
    visit_all(&mut table);
    assert!(
        table.failures.is_empty(),
        "generated or hand-written steps allocated: {:?}",
        table.failures
    );
    let mut criterion = Criterion::default().configure_from_args();
    visit_all(&mut WallTime(&mut criterion));
    criterion.final_summary();
}
