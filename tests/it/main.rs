//! End-to-end and external-reference tests.
mod ir_reference;
mod runtime_reference;
