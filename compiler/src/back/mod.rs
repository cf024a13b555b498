//! Back ends: turning a lowered model into artifacts (generated Rust modules).
//!
//! `output` owns how generated files reach a repository (header, hashing,
//! write-if-changed, check mode).

pub mod bayes;
pub mod interp;
pub mod interp_bayes;
pub mod output;
pub mod rust;
