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
    KF_NEEDS_LINEAR_MODEL = "E0601", Error, "the linear Kalman filter needs a linear model",
        "Method `kf` computes the covariance with fixed matrices, which is exact only when the\nmotion and every sensor are linear (affine) in the states and inputs. A product of two\nstates, a trigonometric function of a state or a division by a state is not:\n\n    motion continuous { east' = speed * cos(heading) }   // cos(heading): not linear\n\nChoose `ekf` or `ukf` for this model, or rewrite it linearly.";
    KALMAN_NEEDS_GAUSSIAN_NOISE = "E0602", Error, "Kalman methods need Gaussian noise",
        "Methods `kf`, `ekf` and `ukf` represent every noise by a mean and a covariance, so\nthey accept only `normal(...)` (and `white(...)`) noise. A triangle or uniform noise is\nrefused instead of being silently replaced:\n\n    process { slip ~ triangle(0.05 m) }   // refused by kf/ekf/ukf\n\nUse a Gaussian of the same variance: a triangle of half-width a has sigma a/sqrt(6);\na uniform of half-width a has sigma a/sqrt(3).";
    METHOD_NOT_AVAILABLE = "E0603", Error, "this estimation method cannot be generated yet",
        "The grid and particle methods are part of the design but their code generator is\nnot written yet. Choose `kf`, `ekf` or `ukf` in `reckon.toml` or on the command line:\n\n    [[estimator]]\n    method = \"ekf\"";
    UNSCENTED_PARAMETERS_INVALID = "E0604", Error, "the unscented scaling parameters are not valid",
        "The sigma points of `ukf` need `alpha > 0` and `alpha^2 (n + kappa) > 0` for a state of\ndimension n; otherwise their weights are undefined:\n\n    [[estimator]]\n    method = \"ukf\"\n    unscented = { alpha = 1.0, beta = 2.0, kappa = 0.0 }";
    PROJECT_FILE_INVALID = "E0701", Error, "the project file is not valid",
        "`reckon.toml` could not be read: a key is unknown, a value has the wrong type, or a\nrequired key is missing. Each `[[estimator]]` table needs `spec` and `output`:\n\n    [[estimator]]\n    spec = \"specs/rail_cart.reckon\"\n    output = \"src/rail_cart.rs\"\n    method = \"ekf\"      # kf, ekf, ukf, grid, particle\n    scalar = \"f32\"      # f32 or f64\n";
    SEQUENTIAL_NEEDS_DIAGONAL_NOISE = "W0850", Warning, "sequential updates need independent reading noise",
        "The sequential scalar update processes one reading component at a time, which is\nexact only when the components' noises are independent (a diagonal covariance). A\nsensor with a full `covariance [...]` noise is corrected with the Joseph form instead.";
    INITIAL_NOT_GAUSSIAN = "W0851", Warning, "a Kalman filter starts from a Gaussian initial belief",
        "A Kalman method represents the initial belief by its mean and variance, so an initial\n`uniform(lo .. hi)` or `triangle(...)` becomes the Gaussian with the same mean and\nvariance (uniform: sigma = (hi - lo)/sqrt(12)). Write `normal(mean, sigma)` to say so\nexplicitly.";
}
