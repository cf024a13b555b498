//! The model contract: what generated code (or the simulator's interpreter adapter)
//! implements so the algorithms in this crate can run a filter.
//!
//! Each model function writes into a caller-allocated, zero-filled buffer of the right
//! shape, so fixed-size implementations never allocate. The `*_covariance` methods with
//! default bodies are the overridable kernels: the defaults are dense and generic;
//! generated code replaces them with straight-line code that skips structural zeros.
//!
//! Dimension parameters: `N` state, `U` input, `M` reading. They are nalgebra dimensions
//! (`Const<K>` in firmware, `Dyn` in the simulator).

use nalgebra::{allocator::Allocator, DefaultAllocator, Dim, OMatrix, OVector};

use crate::Real;

/// The motion model: how the state moves over a step `dt` under input `u`.
///
/// For a linear model `transition` is `F x + B u` and `transition_jacobian` writes `F`;
/// the extended and linear Kalman filters then coincide.
pub trait MotionModel<T: Real, N: Dim, U: Dim>
where
    DefaultAllocator: Allocator<N> + Allocator<N, N> + Allocator<U>,
{
    /// The input dimension (`Const::<K>` for fixed sizes); inputs of another length are
    /// rejected before any model function runs.
    fn input_dim(&self) -> U;

    /// Writes the state after one step: `x_next = f(x, u, dt)`.
    fn transition(&self, x: &OVector<T, N>, u: &OVector<T, U>, dt: T, x_next: &mut OVector<T, N>);

    /// Writes the Jacobian of `transition` with respect to the state, at `(x, u, dt)`.
    ///
    /// The unscented filter never calls it; an implementation used only with it may
    /// leave the buffer untouched.
    fn transition_jacobian(
        &self,
        x: &OVector<T, N>,
        u: &OVector<T, U>,
        dt: T,
        jacobian: &mut OMatrix<T, N, N>,
    );

    /// Writes the process-noise covariance accumulated over one step, in state
    /// coordinates: `G Q G^T` for noise entering through a gain `G`, or a discretised
    /// `Q_d` (for example from [`crate::expm::van_loan`]).
    fn process_noise(
        &self,
        x: &OVector<T, N>,
        u: &OVector<T, U>,
        dt: T,
        noise: &mut OMatrix<T, N, N>,
    );

    /// Kernel: writes the predicted covariance `F P F^T + Q` for the step from `x`.
    ///
    /// The default is dense; override it to exploit the structure of `F` and `Q`.
    fn propagate_covariance(
        &self,
        p: &OMatrix<T, N, N>,
        x: &OVector<T, N>,
        u: &OVector<T, U>,
        dt: T,
        p_next: &mut OMatrix<T, N, N>,
    ) {
        let (rows, cols) = p.shape_generic();
        let mut jacobian = OMatrix::<T, N, N>::zeros_generic(rows, cols);
        self.transition_jacobian(x, u, dt, &mut jacobian);
        p_next.fill(T::zero());
        self.process_noise(x, u, dt, p_next);
        let jp = &jacobian * p;
        p_next.gemm(T::one(), &jp, &jacobian.transpose(), T::one());
    }
}

/// How a correction folds a reading into the state.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum UpdateForm {
    /// One vector update with the Joseph-form covariance
    /// `(I - K H) P (I - K H)^T + K R K^T`, which stays symmetric positive semi-definite
    /// under round-off and for any gain.
    #[default]
    Joseph,
    /// One scalar update per reading component, each in Joseph form: no matrix
    /// factorisation or inverse. Exact only for diagonal reading noise; a model with
    /// correlated noise falls back to [`UpdateForm::Joseph`].
    SequentialScalar,
}

/// A reading model: what a sensor is expected to read in a given state.
///
/// `Args` carries whatever the reading depends on besides the state (a landmark
/// position, a mounting offset, a time of flight...); use `()` when there is nothing.
pub trait ReadingModel<T: Real, N: Dim, M: Dim>
where
    DefaultAllocator: Allocator<N>
        + Allocator<N, N>
        + Allocator<M>
        + Allocator<M, M>
        + Allocator<M, N>
        + Allocator<N, M>,
{
    /// Extra arguments of the reading functions.
    type Args: ?Sized;

    /// The reading dimension (`Const::<K>` for fixed sizes).
    fn reading_dim(&self) -> M;

    /// Writes the predicted reading `z_hat = h(x, args)`.
    fn predict_reading(&self, x: &OVector<T, N>, args: &Self::Args, z_hat: &mut OVector<T, M>);

    /// Writes the Jacobian `H` of `predict_reading` with respect to the state.
    ///
    /// The unscented filter never calls it.
    fn reading_jacobian(
        &self,
        x: &OVector<T, N>,
        args: &Self::Args,
        jacobian: &mut OMatrix<T, M, N>,
    );

    /// Writes the reading-noise covariance `R`.
    fn reading_noise(&self, x: &OVector<T, N>, args: &Self::Args, noise: &mut OMatrix<T, M, M>);

    /// Whether reading component `component` is an angle: its residual is wrapped to
    /// (-pi, pi] and the unscented filter averages it on the circle.
    fn is_angle(&self, component: usize) -> bool {
        let _ = component;
        false
    }

    /// Which update form the correction uses. Models with diagonal `R` choose
    /// [`UpdateForm::SequentialScalar`] to avoid the factorisation of `S`.
    fn update_form(&self) -> UpdateForm {
        UpdateForm::Joseph
    }

    /// Kernel: writes `P H^T`.
    fn cross_covariance(
        &self,
        p: &OMatrix<T, N, N>,
        h: &OMatrix<T, M, N>,
        pht: &mut OMatrix<T, N, M>,
    ) {
        p.mul_to(&h.transpose(), pht);
    }

    /// Kernel: writes the innovation covariance `S = H (P H^T) + R`, given `P H^T`.
    fn innovation_covariance(
        &self,
        h: &OMatrix<T, M, N>,
        pht: &OMatrix<T, N, M>,
        r: &OMatrix<T, M, M>,
        s: &mut OMatrix<T, M, M>,
    ) {
        s.copy_from(r);
        s.gemm(T::one(), h, pht, T::one());
    }
}
