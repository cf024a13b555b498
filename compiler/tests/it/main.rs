//! Integration tests of the `reckon` package, in one test binary: the invalid-spec
//! corpus, the demo specs, the command-line tool and the language reference.

mod cli;
mod docs;
mod invariants;
mod robust;
mod specs;
mod ui;

use reckon::diag::codes::{self, Code};

/// The codes the front end (syntax and check) owns. E0001 is an internal error;
/// E06xx, E07xx and the back-end warnings W085x belong to later stages, whose own
/// tests produce them.
fn front_end_codes() -> impl Iterator<Item = &'static Code> {
    codes::ALL.iter().filter(|c| {
        c.id != codes::INTERNAL.id
            && !c.id.starts_with("E06")
            && !c.id.starts_with("E07")
            && !c.id.starts_with("W085")
    })
}
