//! The units engine: exact rational dimensions and exact conversion factors.
//!
//! Owns the dimension algebra ([`Dimension`], [`Rational`]); the catalogue of unit
//! symbols with SI prefixes and the exact factors of trade units are added by the
//! catalogue module.

mod dimension;
mod rational;

pub use dimension::{Base, Dimension};
pub use rational::Rational;
