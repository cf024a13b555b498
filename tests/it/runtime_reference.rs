//! External-reference tests of the runtime crate: steady-state Kalman filtering, the
//! matrix exponential and Van Loan's discretisation against scipy values produced by
//! `tests/reference/runtime_reference.py` (scipy 1.17.1, numpy 2.4.6), on fixed-size and
//! dynamically sized matrices alike.

use nalgebra::{
    Const, DMatrix, DVector, Dim, Dyn, Matrix2, Matrix4, OMatrix, OVector, Vector1, Vector2,
};
use reckon_runtime::expm::{expm, van_loan};
use reckon_runtime::{KalmanFilter, MotionModel, ReadingModel, UnscentedParams, UnscentedWeights};

const REFERENCE: &str = include_str!("../reference/runtime_reference.txt");

/// The matrix named `name` in the reference file, as (rows, cols, row-major values).
fn reference(name: &str) -> (usize, usize, Vec<f64>) {
    let line = REFERENCE
        .lines()
        .find(|line| line.split_whitespace().next() == Some(name))
        .unwrap_or_else(|| panic!("{name} missing from runtime_reference.txt"));
    let mut fields = line.split_whitespace().skip(1);
    let mut next_usize = || {
        fields
            .next()
            .and_then(|field| field.parse::<usize>().ok())
            .expect("shape")
    };
    let (rows, cols) = (next_usize(), next_usize());
    let values: Vec<f64> = line
        .split_whitespace()
        .skip(3)
        .map(|field| field.parse().expect("value"))
        .collect();
    assert_eq!(values.len(), rows * cols, "{name}");
    (rows, cols, values)
}

fn reference_matrix(name: &str) -> DMatrix<f64> {
    let (rows, cols, values) = reference(name);
    DMatrix::from_row_slice(rows, cols, &values)
}

/// A constant-velocity track (position, velocity) under white-noise acceleration of unit
/// density with a unit-variance position reading, written once for any dimension type the
/// way the simulator's adapter is: `Const` for firmware sizes, `Dyn` for the simulator.
struct Track<U, M> {
    input: U,
    reading: M,
}

impl<N: Dim, U: Dim, M: Dim> MotionModel<f64, N, U> for Track<U, M>
where
    nalgebra::DefaultAllocator: nalgebra::allocator::Allocator<N>
        + nalgebra::allocator::Allocator<N, N>
        + nalgebra::allocator::Allocator<U>,
{
    fn input_dim(&self) -> U {
        self.input
    }
    fn transition(
        &self,
        x: &OVector<f64, N>,
        _: &OVector<f64, U>,
        dt: f64,
        x_next: &mut OVector<f64, N>,
    ) {
        x_next[0] = x[0] + dt * x[1];
        x_next[1] = x[1];
    }
    fn transition_jacobian(
        &self,
        _: &OVector<f64, N>,
        _: &OVector<f64, U>,
        dt: f64,
        f: &mut OMatrix<f64, N, N>,
    ) {
        f[(0, 0)] = 1.0;
        f[(0, 1)] = dt;
        f[(1, 1)] = 1.0;
    }
    fn process_noise(
        &self,
        _: &OVector<f64, N>,
        _: &OVector<f64, U>,
        dt: f64,
        q: &mut OMatrix<f64, N, N>,
    ) {
        q[(0, 0)] = dt.powi(3) / 3.0;
        q[(0, 1)] = dt * dt / 2.0;
        q[(1, 0)] = dt * dt / 2.0;
        q[(1, 1)] = dt;
    }
}

impl<N: Dim, U, M: Dim> ReadingModel<f64, N, M> for Track<U, M>
where
    nalgebra::DefaultAllocator: nalgebra::allocator::Allocator<N>
        + nalgebra::allocator::Allocator<N, N>
        + nalgebra::allocator::Allocator<M>
        + nalgebra::allocator::Allocator<M, M>
        + nalgebra::allocator::Allocator<M, N>
        + nalgebra::allocator::Allocator<N, M>,
{
    type Args = ();
    fn reading_dim(&self) -> M {
        self.reading
    }
    fn predict_reading(&self, x: &OVector<f64, N>, _: &(), z_hat: &mut OVector<f64, M>) {
        z_hat[0] = x[0];
    }
    fn reading_jacobian(&self, _: &OVector<f64, N>, _: &(), h: &mut OMatrix<f64, M, N>) {
        h[(0, 0)] = 1.0;
    }
    fn reading_noise(&self, _: &OVector<f64, N>, _: &(), r: &mut OMatrix<f64, M, M>) {
        r[(0, 0)] = 1.0;
    }
}

/// Runs the track filter to steady state; returns the a-priori covariance and the gain of
/// the last step, as dynamically sized matrices.
fn steady_state<N: Dim, U: Dim, M: Dim>(
    mut filter: KalmanFilter<f64, N>,
    model: &Track<U, M>,
    input: &OVector<f64, U>,
    reading: impl Fn(f64) -> OVector<f64, M>,
) -> (DMatrix<f64>, DMatrix<f64>)
where
    nalgebra::DefaultAllocator: nalgebra::allocator::Allocator<N>
        + nalgebra::allocator::Allocator<N, N>
        + nalgebra::allocator::Allocator<U>
        + nalgebra::allocator::Allocator<M>
        + nalgebra::allocator::Allocator<M, M>
        + nalgebra::allocator::Allocator<M, N>
        + nalgebra::allocator::Allocator<N, M>,
{
    let mut prior = DMatrix::zeros(2, 2);
    let mut gain = DMatrix::zeros(2, 1);
    for step in 0..300 {
        filter.predict(model, input, 1.0).expect("predict");
        prior = DMatrix::from_iterator(2, 2, filter.covariance().iter().copied());
        let innovation = filter
            .correct(model, &reading(f64::from(step)), &(), None)
            .expect("correct");
        gain = DMatrix::from_iterator(
            2,
            1,
            prior
                .column(0)
                .iter()
                .map(|value| value / innovation.covariance[(0, 0)]),
        );
    }
    (prior, gain)
}

#[test]
fn constant_velocity_filter_reaches_discrete_riccati_solution() {
    // scipy.linalg.solve_discrete_are(F^T, H^T, Q, R) (scipy 1.17.1) for F = [[1, 1], [0, 1]],
    // H = [1, 0], Q = [[1/3, 1/2], [1/2, 1]], R = 1; the filter's a-priori covariance and
    // gain converge to it whatever the readings.
    let expected_prior = reference_matrix("dare_prior");
    let expected_gain = reference_matrix("dare_gain");
    let p0 = Matrix2::new(10.0, 0.0, 0.0, 10.0);

    let fixed = KalmanFilter::new(Vector2::new(0.0, 0.0), p0).expect("filter");
    let fixed_model = Track {
        input: Const::<0>,
        reading: Const::<1>,
    };
    let (prior, gain) = steady_state(
        fixed,
        &fixed_model,
        &OVector::<f64, Const<0>>::zeros(),
        |k| Vector1::new((k * 0.7).sin() * 3.0),
    );
    assert!(
        (&prior - &expected_prior).norm() < 1e-9,
        "{prior} vs {expected_prior}"
    );
    assert!(
        (&gain - &expected_gain).norm() < 1e-9,
        "{gain} vs {expected_gain}"
    );

    let dynamic = KalmanFilter::new(
        DVector::from_element(2, 0.0),
        DMatrix::from_column_slice(2, 2, p0.as_slice()),
    )
    .expect("filter");
    let dynamic_model = Track {
        input: Dyn(0),
        reading: Dyn(1),
    };
    let (dynamic_prior, dynamic_gain) =
        steady_state(dynamic, &dynamic_model, &DVector::zeros(0), |k| {
            DVector::from_element(1, (k * 0.7).sin() * 3.0)
        });
    assert!((&dynamic_prior - &prior).norm() < 1e-12);
    assert!((&dynamic_gain - &gain).norm() < 1e-12);
}

#[test]
fn unscented_filter_runs_on_dynamic_dimensions() {
    // The simulator runs the unscented filter on `Dyn` matrices; it must give what the
    // fixed-size firmware filter gives, and both must reach the Riccati solution above
    // (the transform is exact on this linear model).
    let weights = UnscentedWeights::new(
        &UnscentedParams {
            alpha: 1.0,
            beta: 2.0,
            kappa: 1.0,
        },
        2,
    )
    .expect("weights");
    let p0 = Matrix2::new(10.0, 0.0, 0.0, 10.0);
    let mut fixed = KalmanFilter::new(Vector2::new(0.0, 0.0), p0).expect("filter");
    let fixed_model = Track {
        input: Const::<0>,
        reading: Const::<1>,
    };
    let mut dynamic = KalmanFilter::new(
        DVector::from_element(2, 0.0),
        DMatrix::from_column_slice(2, 2, p0.as_slice()),
    )
    .expect("filter");
    let dynamic_model = Track {
        input: Dyn(0),
        reading: Dyn(1),
    };
    let expected_prior = reference_matrix("dare_prior");
    for step in 0..300 {
        let reading = (f64::from(step) * 0.7).sin() * 3.0;
        fixed
            .predict_unscented(
                &fixed_model,
                &OVector::<f64, Const<0>>::zeros(),
                1.0,
                &weights,
            )
            .expect("predict");
        dynamic
            .predict_unscented(&dynamic_model, &DVector::zeros(0), 1.0, &weights)
            .expect("predict");
        if step == 299 {
            let prior = DMatrix::from_iterator(2, 2, fixed.covariance().iter().copied());
            // scipy.linalg.solve_discrete_are (scipy 1.17.1), as above.
            assert!((prior - &expected_prior).norm() < 1e-9);
        }
        fixed
            .correct_unscented(&fixed_model, &Vector1::new(reading), &(), None, &weights)
            .expect("correct");
        dynamic
            .correct_unscented(
                &dynamic_model,
                &DVector::from_element(1, reading),
                &(),
                None,
                &weights,
            )
            .expect("correct");
    }
    let fixed_state = DVector::from_iterator(2, fixed.state().iter().copied());
    assert!((fixed_state - dynamic.state()).norm() < 1e-12);
}

#[test]
fn dynamic_filter_rejects_wrong_lengths() {
    // The simulator's dimensions are runtime values: a mismatch must be an error, not a
    // panic inside the linear algebra.
    let mut filter =
        KalmanFilter::new(DVector::from_element(2, 0.0), DMatrix::identity(2, 2)).expect("filter");
    let model = Track {
        input: Dyn(0),
        reading: Dyn(1),
    };
    assert_eq!(
        filter.predict(&model, &DVector::zeros(1), 1.0),
        Err(reckon_runtime::PredictError::DimensionMismatch)
    );
    assert_eq!(
        filter.correct(&model, &DVector::zeros(2), &(), None),
        Err(reckon_runtime::CorrectError::DimensionMismatch)
    );
    assert_eq!(
        KalmanFilter::new(DVector::from_element(3, 0.0), DMatrix::identity(2, 2)),
        Err(reckon_runtime::InitError::DimensionMismatch)
    );
}

#[test]
fn matrix_exponential_matches_scipy() {
    // scipy.linalg.expm (scipy 1.17.1) on random non-normal 4x4 matrices whose 1-norms
    // (0.01 ... 40) cover every Pade degree and the scaled branch.
    for index in 0..6 {
        let input = reference_matrix(&format!("expm_in_{index}"));
        let expected = reference_matrix(&format!("expm_out_{index}"));
        let dynamic = expm(&input).expect("expm");
        let tolerance = 1e-13 * expected.norm() * (1.0 + input.norm());
        assert!(
            (&dynamic - &expected).norm() < tolerance,
            "case {index}: {dynamic} vs {expected}"
        );

        let fixed = expm(&Matrix4::from_iterator(input.iter().copied())).expect("expm");
        assert!(
            (DMatrix::from_iterator(4, 4, fixed.iter().copied()) - &dynamic).norm() <= tolerance
        );

        let single = expm(&Matrix4::from_iterator(
            input.iter().map(|&value| value as f32),
        ))
        .expect("expm");
        let single = DMatrix::from_iterator(4, 4, single.iter().map(|&value| f64::from(value)));
        assert!(
            (single - &expected).norm() < 1e-5 * expected.norm() * (1.0 + input.norm()),
            "f32 case {index}"
        );
    }
}

#[test]
fn van_loan_matches_quadrature_of_the_noise_integral() {
    // Q_d = integral_0^dt exp(A s) W exp(A s)^T ds by adaptive quadrature
    // (scipy.integrate.quad_vec, scipy 1.17.1) for a damped oscillator; independent of
    // the block-exponential route the runtime takes.
    let a = reference_matrix("van_loan_a");
    let w = reference_matrix("van_loan_w");
    let dt = reference_matrix("van_loan_dt")[(0, 0)];
    let fixed = van_loan(
        &Matrix2::from_iterator(a.iter().copied()),
        &Matrix2::from_iterator(w.iter().copied()),
        dt,
        Const::<4>,
    )
    .expect("van loan");
    let transition = DMatrix::from_iterator(2, 2, fixed.transition.iter().copied());
    let noise = DMatrix::from_iterator(2, 2, fixed.noise.iter().copied());
    assert!((transition - reference_matrix("van_loan_transition")).norm() < 1e-13);
    assert!((noise - reference_matrix("van_loan_noise")).norm() < 1e-12);

    let dynamic = van_loan(&a, &w, dt, Dyn(4)).expect("van loan");
    assert!((dynamic.noise - reference_matrix("van_loan_noise")).norm() < 1e-12);
}
