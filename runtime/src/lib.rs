//! reckon-runtime: the predict/correct machinery shared by generated estimators and
//! the simulator.
#![no_std]

pub mod grid;
pub mod particle;
