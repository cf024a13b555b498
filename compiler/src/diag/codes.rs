//! The catalogue of diagnostic codes: identifier, default severity, title, and the
//! long explanation with an example that `reckon explain CODE` prints.
//!
//! Codes are stable: never renumber or reuse one. Ranges:
//! `E01xx` syntax, `E02xx` names and structure, `E03xx` units and dimensions,
//! `E04xx` noise and distributions, `E05xx` sensors and gates, `E06xx` methods and
//! back ends, `E07xx` project files, `W08xx` warnings.
//! Every code must have a test in the invalid-spec corpus (a test enforces it).

use super::Severity;

/// The documentation of a diagnostic code.
#[derive(Debug, PartialEq, Eq, Hash)]
pub struct CodeInfo {
    /// Stable identifier such as `E0301`.
    pub id: &'static str,
    /// Default severity.
    pub severity: Severity,
    /// Short title.
    pub title: &'static str,
    /// Long explanation with a small example (plain text, may span lines).
    pub explanation: &'static str,
}

/// A diagnostic code: a pointer-sized handle to its [`CodeInfo`] (fields readable
/// through `Deref`, e.g. `code.id`), so diagnostics stay small.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub struct Code(&'static CodeInfo);

impl std::ops::Deref for Code {
    type Target = CodeInfo;

    fn deref(&self) -> &CodeInfo {
        self.0
    }
}

impl serde::Serialize for Code {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(self.id)
    }
}

/// Looks a code up by identifier (case-insensitive).
pub fn find(id: &str) -> Option<Code> {
    ALL.iter().copied().find(|c| c.id.eq_ignore_ascii_case(id))
}

macro_rules! codes {
    ($($name:ident = $id:literal, $sev:ident, $title:literal, $expl:literal;)*) => {
        $(
            #[doc = $title]
            pub const $name: Code = Code(&CodeInfo {
                id: $id,
                severity: Severity::$sev,
                title: $title,
                explanation: $expl,
            });
        )*
        /// Every code, in catalogue order.
        pub const ALL: &[Code] = &[$($name),*];
    };
}

codes! {
    // Entries are added by each stage as it grows; keep ids unique and sorted.
    INTERNAL = "E0001", Error, "internal error in reckon",
        "The compiler reached a state it believed impossible. This is a bug in reckon, not in your spec.\nPlease report it with the spec that triggers it.";
    PROJECT_FILE_INVALID = "E0701", Error, "the project file is not valid",
        "`reckon.toml` could not be read: a key is unknown, a value has the wrong type, or a\nrequired key is missing. Each `[[estimator]]` table needs `spec` and `output`:\n\n    [[estimator]]\n    spec = \"specs/rail_cart.reckon\"\n    output = \"src/rail_cart.rs\"\n    method = \"ekf\"      # kf, ekf, ukf, grid, particle\n    scalar = \"f32\"      # f32 or f64\n";
}
