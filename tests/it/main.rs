//! End-to-end and external-reference tests.
