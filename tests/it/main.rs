//! End-to-end and external-reference tests.
mod generated;
mod runtime_reference;
