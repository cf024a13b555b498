//! End-to-end and external-reference tests.
mod bayes;
mod bench_filters;
mod drive;
mod endurance;
mod faults;
mod generated;
mod ir_reference;
mod runtime_reference;

/// The filters the estimator benchmarks compare, shared with `benches/estimators.rs`.
#[path = "../benches/filters/mod.rs"]
mod filters;

/// Counts allocations per thread so tests can check that a step allocates nothing.
#[global_allocator]
static ALLOCATOR: filters::counting::Counting = filters::counting::Counting;
