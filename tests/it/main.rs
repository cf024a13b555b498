//! End-to-end and external-reference tests.
mod generated;
mod ir_reference;
mod runtime_reference;
