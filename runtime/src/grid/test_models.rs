//! Models shared by the grid and particle filter tests: a drifting cart, a direct
//! position reading, a track with irregularly spaced identical markers, and the scalar
//! Kalman recursion the Gaussian cases are checked against.

use core::cell::Cell;

use nalgebra::{RealField, SVector, Vector1};

use super::{Likelihood, Motion, Noise, ReadingPrediction};

/// `x_next = x + u dt + w`, with `u` the velocity. `as_translation` decides whether the
/// grid sees the motion as a translation (kernel shift) or pushes each cell.
pub struct Drift<T> {
    pub noise: Noise<T>,
    pub as_translation: bool,
}

impl<T: RealField + Copy, const D: usize> Motion<T, D, D> for Drift<T> {
    fn transition(&self, x: &SVector<T, D>, u: &SVector<T, D>, dt: T) -> SVector<T, D> {
        x + u * dt
    }
    fn noise(&self, _: &SVector<T, D>, _: T) -> [Noise<T>; D] {
        [self.noise; D]
    }
    fn translation(&self, u: &SVector<T, D>, dt: T) -> Option<SVector<T, D>> {
        self.as_translation.then(|| u * dt)
    }
}

/// Any motion through a plain function, counting its calls.
pub struct Mapped<F> {
    pub map: F,
    pub noise: Noise<f64>,
    pub calls: Cell<usize>,
}

impl<F: Fn(&SVector<f64, D>) -> SVector<f64, D>, const D: usize> Motion<f64, D, 0> for Mapped<F> {
    fn transition(&self, x: &SVector<f64, D>, _: &SVector<f64, 0>, _: f64) -> SVector<f64, D> {
        self.calls.set(self.calls.get() + 1);
        (self.map)(x)
    }
    fn noise(&self, _: &SVector<f64, 0>, _: f64) -> [Noise<f64>; D] {
        [self.noise; D]
    }
}

/// Reads the state directly: `z = x + v`.
pub struct Direct<T> {
    pub noise: Noise<T>,
}

impl<T: RealField + Copy, const D: usize> ReadingPrediction<T, D, D> for Direct<T> {
    fn predict_reading(&self, x: &SVector<T, D>) -> SVector<T, D> {
        *x
    }
    fn reading_noise(&self) -> [Noise<T>; D] {
        [self.noise; D]
    }
}

/// A likelihood through a plain function, counting its calls.
pub struct CountingLikelihood<F> {
    pub ln_likelihood: F,
    pub calls: Cell<usize>,
}

impl<F: Fn(f64, f64) -> f64> Likelihood<f64, 1, 1> for CountingLikelihood<F> {
    fn ln_likelihood(&self, x: &Vector1<f64>, z: &Vector1<f64>) -> f64 {
        self.calls.set(self.calls.get() + 1);
        (self.ln_likelihood)(x[0], z[0])
    }
}

/// A rail track with identical markers at irregular positions; the cart reads the
/// distance to the nearest marker ahead of it.
pub struct MarkerTrack {
    pub markers: &'static [f64],
    pub noise: Noise<f64>,
}

/// An invented track: markers every 2.5 to 4.5 m, no two gaps in a row alike.
pub const MARKERS: &[f64] = &[
    1.0, 4.0, 8.5, 11.0, 15.5, 19.0, 21.5, 26.0, 30.0, 33.5, 37.0, 41.5, 44.0, 48.0,
];

impl MarkerTrack {
    pub fn distance_ahead(&self, x: f64) -> Option<f64> {
        self.markers.iter().find(|&&m| m > x).map(|m| m - x)
    }
}

impl Likelihood<f64, 1, 1> for MarkerTrack {
    fn ln_likelihood(&self, x: &Vector1<f64>, z: &Vector1<f64>) -> f64 {
        // No marker ahead: a reading is impossible there.
        self.distance_ahead(x[0])
            .map_or(f64::NEG_INFINITY, |d| self.noise.ln_pdf(z[0] - d))
    }
}

/// The scalar Kalman filter for `x_next = x + v dt + w`, `z = x + r`: the closed-form
/// answer for a linear Gaussian problem (common practice, no source).
#[derive(Clone, Copy, Debug)]
pub struct ScalarKalman {
    pub mean: f64,
    pub variance: f64,
}

impl ScalarKalman {
    pub fn predict(&mut self, shift: f64, motion_variance: f64) {
        self.mean += shift;
        self.variance += motion_variance;
    }

    /// Returns the gain's derivative factor `R / (P + R)^2` used to carry a prior
    /// variance error into the posterior mean, and the innovation.
    pub fn correct(&mut self, z: f64, reading_variance: f64) -> (f64, f64) {
        let innovation = z - self.mean;
        let total = self.variance + reading_variance;
        let gain = self.variance / total;
        self.mean += gain * innovation;
        self.variance *= 1.0 - gain;
        (reading_variance / (total * total), innovation)
    }
}
