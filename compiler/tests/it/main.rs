//! Integration tests of the `reckon` package, in one test binary: the invalid-spec
//! corpus, the demo specs, the command-line tool and the language reference.

mod cli;
mod docs;
mod invariants;
mod robust;
mod specs;
mod ui;
