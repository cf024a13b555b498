//! End-to-end and external-reference tests.
mod runtime_reference;
