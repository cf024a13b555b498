//! reckon: a compiler from state-estimator specs to checked models, symbolic
//! derivatives, generated Rust estimators and simulations.
//!
//! The library is pure: text in, artifacts and diagnostics out. It prints nothing
//! and exits nothing; the `reckon` binary and the build-script API do the I/O.
//! Stages, in pipeline order: [`syntax`] (text to AST), [`check`] (AST to the checked
//! [`model`]), `ir` (symbolic expressions and derivatives), back ends.

pub mod analyze;
pub mod back;
pub mod build;
pub mod check;
pub mod diag;
pub mod format;
pub mod ir;
pub mod model;
pub mod options;
pub mod project;
pub mod reference;
pub mod scaffold;
pub mod sim;
pub mod stats;
pub mod syntax;
pub mod units;
