//! End-to-end and external-reference tests.
mod bayes;
mod drive;
mod endurance;
mod faults;
mod generated;
mod ir_reference;
mod runtime_reference;
