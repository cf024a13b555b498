//! The units engine: exact dimensions, exact conversion factors and the unit catalogue.
//!
//! Owns the dimension algebra ([`Dimension`], [`Rational`]), exact factors to coherent
//! SI ([`Scale`]), units as dimension plus factor ([`Unit`]), and the catalogue of unit
//! symbols with SI prefixes ([`lookup`], [`reading`], [`catalogue`], [`prefixes`]). Parsing unit
//! *expressions* (`m/s^2`, `sqrt(Hz)`) belongs to the front end, which calls [`lookup`]
//! per symbol and combines the results with the checked [`Unit`] operations.

mod catalogue;
mod dimension;
mod rational;
mod scale;
mod unit;

pub use catalogue::{
    catalogue, lookup, prefixes, reading, CatalogueEntry, Prefix, Reading, UnitKind, UnknownUnit,
    MAX_SUGGESTIONS,
};
pub use dimension::{Base, Dimension};
pub use rational::Rational;
pub use scale::{Scale, MAX_PRIMES};
pub use unit::Unit;
