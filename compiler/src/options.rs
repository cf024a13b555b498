//! Build options for one estimator: method, scalar type, update form, integrator.
//!
//! The same options arrive from three places - `reckon build` flags, an
//! `[[estimator]]` table in `reckon.toml`, and the build-script builder - and all of
//! them end up as one `EstimatorOptions`, so the back ends see a single type.

use serde::Deserialize;

/// Which member of the Bayes-filter family to generate.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Deserialize, Default)]
#[serde(rename_all = "lowercase")]
pub enum Method {
    /// Linear Kalman filter; refused when the model is not linear.
    Kf,
    /// Extended Kalman filter (exact symbolic Jacobians).
    #[default]
    Ekf,
    /// Unscented Kalman filter (scaled sigma points).
    Ukf,
    /// Grid (histogram) filter over bounded state ranges.
    Grid,
    /// Particle filter.
    Particle,
}

impl Method {
    /// Every method, for help texts.
    pub const ALL: [Method; 5] = [
        Method::Kf,
        Method::Ekf,
        Method::Ukf,
        Method::Grid,
        Method::Particle,
    ];

    /// The name used on the command line and in `reckon.toml`.
    pub fn name(self) -> &'static str {
        match self {
            Method::Kf => "kf",
            Method::Ekf => "ekf",
            Method::Ukf => "ukf",
            Method::Grid => "grid",
            Method::Particle => "particle",
        }
    }

    /// True for the Gaussian methods, which accept only normal noise.
    pub fn is_kalman(self) -> bool {
        matches!(self, Method::Kf | Method::Ekf | Method::Ukf)
    }
}

/// Floating-point type of the generated estimator.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Deserialize, Default)]
#[serde(rename_all = "lowercase")]
pub enum Scalar {
    /// Single precision: the usual choice on microcontrollers with a single-precision FPU.
    F32,
    /// Double precision.
    #[default]
    F64,
}

impl Scalar {
    /// The Rust type name.
    pub fn name(self) -> &'static str {
        match self {
            Scalar::F32 => "f32",
            Scalar::F64 => "f64",
        }
    }
}

/// How a Kalman correction updates the covariance.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Deserialize, Default)]
#[serde(rename_all = "lowercase")]
pub enum UpdateForm {
    /// Joseph form: stays symmetric positive definite under round-off.
    #[default]
    Joseph,
    /// One scalar update per reading component (needs independent component noise);
    /// no matrix inverse.
    Sequential,
}

impl UpdateForm {
    /// The name used on the command line and in `reckon.toml`.
    pub fn name(self) -> &'static str {
        match self {
            UpdateForm::Joseph => "joseph",
            UpdateForm::Sequential => "sequential",
        }
    }
}

/// How continuous motion is integrated over a step.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Deserialize, Default)]
#[serde(rename_all = "lowercase")]
pub enum Integrator {
    /// Exact matrix exponential when the model is linear time-invariant, RK4 otherwise.
    #[default]
    Auto,
    /// Forward Euler (first order).
    Euler,
    /// Classical fourth-order Runge-Kutta.
    Rk4,
}

impl Integrator {
    /// The name used on the command line and in `reckon.toml`.
    pub fn name(self) -> &'static str {
        match self {
            Integrator::Auto => "auto",
            Integrator::Euler => "euler",
            Integrator::Rk4 => "rk4",
        }
    }
}

/// Sigma-point scaling of the unscented filter.
#[derive(Debug, Clone, Copy, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct UnscentedParams {
    /// Spread of the sigma points (0 < alpha <= 1).
    #[serde(default = "UnscentedParams::default_alpha")]
    pub alpha: f64,
    /// Prior knowledge of the distribution (2 is optimal for a Gaussian).
    #[serde(default = "UnscentedParams::default_beta")]
    pub beta: f64,
    /// Secondary scaling.
    #[serde(default)]
    pub kappa: f64,
}

impl UnscentedParams {
    fn default_alpha() -> f64 {
        // Common practice, no source: a moderate spread that keeps every sigma point
        // inside the region where a vehicle model is smooth, and the centre weight
        // positive for small state dimensions.
        1.0
    }

    fn default_beta() -> f64 {
        2.0
    }
}

impl Default for UnscentedParams {
    fn default() -> Self {
        UnscentedParams {
            alpha: Self::default_alpha(),
            beta: Self::default_beta(),
            kappa: 0.0,
        }
    }
}

/// Everything that selects what code is generated for one spec.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct EstimatorOptions {
    /// Filter method.
    pub method: Method,
    /// Scalar type.
    pub scalar: Scalar,
    /// Covariance update form (Kalman methods).
    pub update: UpdateForm,
    /// Integrator for continuous motion.
    pub integrator: Integrator,
    /// Unscented scaling (UKF only).
    pub unscented: UnscentedParams,
    /// Grid only: cells per axis for states whose range gives no cell size (`by`).
    pub grid_cells: Option<u32>,
    /// Particle only: the number of particles (default [`DEFAULT_PARTICLES`]).
    pub particles: Option<u32>,
    /// Particle only: resample when the effective sample size falls below this
    /// fraction of the particle count (default [`DEFAULT_RESAMPLE_BELOW`]).
    pub resample_below: Option<f64>,
}

/// Particles when the options give no count. Common practice, no source: enough for
/// the low-dimensional, multimodal problems a particle filter is chosen for, small
/// enough for a microcontroller's RAM at a few states (1000 x 4 states x 4 bytes).
pub const DEFAULT_PARTICLES: u32 = 1000;

/// Resampling threshold when the options give none: half of the particle count, the
/// usual compromise between weight degeneracy and sample impoverishment (common
/// practice, no source).
pub const DEFAULT_RESAMPLE_BELOW: f64 = 0.5;

impl EstimatorOptions {
    /// The particle count in effect.
    pub fn particle_count(&self) -> u32 {
        self.particles.unwrap_or(DEFAULT_PARTICLES)
    }

    /// The resampling threshold in effect.
    pub fn resample_threshold(&self) -> f64 {
        self.resample_below.unwrap_or(DEFAULT_RESAMPLE_BELOW)
    }
}
