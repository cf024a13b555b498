//! Matrix exponential for small matrices, and Van Loan's discretisation of a linear
//! continuous-time model with white process noise built on it.
//!
//! Linear time-invariant models whose dynamics matrix is not nilpotent need `exp(A dt)`
//! at run time when `dt` varies; the generated code calls these functions.
//!
//! Method: scaling and squaring with a diagonal Padé approximant of degree 3, 5, 7, 9 or
//! 13 chosen from the 1-norm, as in N. J. Higham, "The scaling and squaring method for the
//! matrix exponential revisited", SIAM J. Matrix Anal. Appl. 26(4), 2005, Algorithm 2.3.

use nalgebra::{allocator::Allocator, DefaultAllocator, Dim, DimMin, OMatrix};

use crate::linalg::all_finite;
use crate::{lit, Real};

/// Why a matrix exponential could not be computed.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ExpmError {
    /// An entry of the argument, or of the result, is NaN or infinite.
    NonFinite,
    /// The Padé denominator could not be inverted (only possible after overflow).
    Singular,
    /// A block dimension does not match (Van Loan: the block must be twice the state).
    DimensionMismatch,
}

/// Largest 1-norm for which the Padé approximant of degree `m` reaches double precision
/// without scaling (Higham 2005, Table 2.3, for m = 3, 5, 7, 9, 13).
const THETA: [(usize, f64); 5] = [
    (3, 1.495585217958292e-2),
    (5, 2.53939833006323e-1),
    (7, 9.504178996162932e-1),
    (9, 2.097847961257068e0),
    (13, 5.371920351148152e0),
];

/// Coefficients of the diagonal Padé approximant of degree `m` to `exp`, normalised to
/// `c_0 = 1`: `c_j = (2m - j)! m! / ((2m)! j! (m - j)!)`, built by the ratio recurrence
/// `c_j = c_{j-1} (m - j + 1) / (j (2m - j + 1))`.
fn pade_coefficients(m: usize) -> [f64; 14] {
    let mut coefficients = [0.0; 14];
    coefficients[0] = 1.0;
    for j in 1..=m {
        let ratio = (m - j + 1) as f64 / (j * (2 * m - j + 1)) as f64;
        coefficients[j] = coefficients[j - 1] * ratio;
    }
    coefficients
}

fn one_norm<T: Real, D: Dim>(a: &OMatrix<T, D, D>) -> T
where
    DefaultAllocator: Allocator<D, D>,
{
    a.column_iter()
        .map(|column| {
            column
                .iter()
                .fold(T::zero(), |sum, value| sum + value.abs())
        })
        .fold(T::zero(), |max, sum| if sum > max { sum } else { max })
}

/// `exp(a)` for a square matrix.
///
/// Accurate to about the working precision times the condition of the problem; `f32`
/// uses the same degree choice as `f64`, which is more accurate than `f32` needs.
pub fn expm<T: Real, D: Dim + DimMin<D, Output = D>>(
    a: &OMatrix<T, D, D>,
) -> Result<OMatrix<T, D, D>, ExpmError>
where
    DefaultAllocator: Allocator<D, D> + Allocator<D>,
{
    if !all_finite(a) {
        return Err(ExpmError::NonFinite);
    }
    let norm = one_norm(a);
    let (degree, squarings) = match THETA.iter().find(|&&(_, theta)| norm <= lit(theta)) {
        Some(&(degree, _)) if degree < 13 => (degree, 0),
        _ => {
            let theta13: T = lit(THETA[4].1);
            let ratio = norm / theta13;
            let squarings = if ratio > T::one() {
                ratio.log2().ceil()
            } else {
                T::zero()
            };
            // The norm is finite, so the count fits easily: log2 of f64::MAX is 1024.
            (
                13,
                squarings.to_subset().map_or(0, |value: f64| value as u32),
            )
        }
    };
    let scaled = a * lit::<T>(0.5).powi(squarings as i32);
    let (u, v) = pade_terms(&scaled, degree);
    let denominator = &v - &u;
    let numerator = v + u;
    let mut result = denominator
        .lu()
        .solve(&numerator)
        .ok_or(ExpmError::Singular)?;
    for _ in 0..squarings {
        result = &result * &result;
    }
    if !all_finite(&result) {
        return Err(ExpmError::NonFinite);
    }
    Ok(result)
}

/// Odd part `U` and even part `V` of the Padé numerator `p(A) = V + U`, whose
/// denominator is `q(A) = V - U`.
fn pade_terms<T: Real, D: Dim>(
    a: &OMatrix<T, D, D>,
    degree: usize,
) -> (OMatrix<T, D, D>, OMatrix<T, D, D>)
where
    DefaultAllocator: Allocator<D, D>,
{
    let c = pade_coefficients(degree).map(lit::<T>);
    let (rows, cols) = a.shape_generic();
    let identity = OMatrix::<T, D, D>::identity_generic(rows, cols);
    let a2 = a * a;
    let a4 = &a2 * &a2;
    let a6 = &a4 * &a2;
    if degree == 13 {
        // Higham 2005, eq. (2.11)-(2.12): evaluates degree 13 with six products.
        let inner_u = &a6 * (&a6 * c[13] + &a4 * c[11] + &a2 * c[9]);
        let u = a * (inner_u + &a6 * c[7] + &a4 * c[5] + &a2 * c[3] + &identity * c[1]);
        let inner_v = &a6 * (&a6 * c[12] + &a4 * c[10] + &a2 * c[8]);
        let v = inner_v + &a6 * c[6] + &a4 * c[4] + &a2 * c[2] + identity * c[0];
        return (u, v);
    }
    let a8 = &a4 * &a4;
    let even_powers = [&identity, &a2, &a4, &a6, &a8];
    let mut odd_sum = OMatrix::<T, D, D>::zeros_generic(rows, cols);
    let mut v = OMatrix::<T, D, D>::zeros_generic(rows, cols);
    for (k, power) in even_powers.iter().enumerate().take(degree / 2 + 1) {
        v += *power * c[2 * k];
        odd_sum += *power * c[2 * k + 1];
    }
    (a * odd_sum, v)
}

/// A linear model discretised over one step.
#[derive(Clone, Debug, PartialEq)]
pub struct Discretised<T: Real, N: Dim>
where
    DefaultAllocator: Allocator<N, N>,
{
    /// The transition matrix `Phi = exp(A dt)`.
    pub transition: OMatrix<T, N, N>,
    /// The process-noise covariance `Q_d` accumulated over the step (exactly symmetric).
    pub noise: OMatrix<T, N, N>,
}

/// The discrete transition matrix and process-noise covariance of `dx/dt = A x + w`,
/// `E[w(t) w(s)^T] = W delta(t - s)`, over a step `dt`:
/// `Phi = exp(A dt)`, `Q_d = integral_0^dt exp(A s) W exp(A s)^T ds`.
///
/// C. F. Van Loan, "Computing integrals involving the matrix exponential", IEEE Trans.
/// Automatic Control 23(3), 1978: the exponential of `[[-A, W], [0, A^T]] dt` holds
/// `Phi^-1 Q_d` in its upper right block and `Phi^T` in its lower right block.
/// `block_dim` is the dimension of that block matrix, twice `A`'s (`Const::<{2 * N}>`
/// for fixed sizes).
pub fn van_loan<T, N, B>(
    a: &OMatrix<T, N, N>,
    noise_density: &OMatrix<T, N, N>,
    dt: T,
    block_dim: B,
) -> Result<Discretised<T, N>, ExpmError>
where
    T: Real,
    N: Dim,
    B: Dim + DimMin<B, Output = B>,
    DefaultAllocator: Allocator<N, N> + Allocator<B, B> + Allocator<B>,
{
    let (rows, cols) = a.shape_generic();
    let n = rows.value();
    if block_dim.value() != 2 * n || noise_density.shape() != (n, n) {
        return Err(ExpmError::DimensionMismatch);
    }
    // Element loops: views of a generic block dimension cannot be matched to `N`.
    let mut block = OMatrix::<T, B, B>::zeros_generic(block_dim, block_dim);
    for i in 0..n {
        for j in 0..n {
            block[(i, j)] = -a[(i, j)] * dt;
            block[(i, n + j)] = noise_density[(i, j)] * dt;
            block[(n + i, n + j)] = a[(j, i)] * dt;
        }
    }
    let exponential = expm(&block)?;
    let transition =
        OMatrix::<T, N, N>::from_fn_generic(rows, cols, |i, j| exponential[(n + j, n + i)]);
    let upper_right =
        OMatrix::<T, N, N>::from_fn_generic(rows, cols, |i, j| exponential[(i, n + j)]);
    let mut noise = &transition * upper_right;
    crate::health::symmetrise(&mut noise);
    Ok(Discretised { transition, noise })
}

#[cfg(test)]
mod tests {
    use super::*;
    use nalgebra::{Const, Matrix2, Matrix3};

    #[test]
    fn degree_13_coefficients_match_published_integers() {
        // Higham 2005, eq. (2.11): b_0..b_13 of the degree-13 approximant, scaled so that
        // b_13 = 1. The normalised recurrence must give the same ratios.
        let published = [
            64764752532480000.0,
            32382376266240000.0,
            7771770303897600.0,
            1187353796428800.0,
            129060195264000.0,
            10559470521600.0,
            670442572800.0,
            33522128640.0,
            1323241920.0,
            40840800.0,
            960960.0,
            16380.0,
            182.0,
            1.0,
        ];
        let computed = pade_coefficients(13);
        for j in 0..14 {
            let expected = published[j] / published[0];
            assert!((computed[j] - expected).abs() <= 1e-15 * expected, "b_{j}");
        }
    }

    #[test]
    fn nilpotent_and_diagonal_closed_forms() {
        // exp([[0, t], [0, 0]]) = [[1, t], [0, 1]]; exp(diag(d)) = diag(exp(d)).
        let shear = expm(&Matrix2::new(0.0, 3.5, 0.0, 0.0)).unwrap();
        assert!((shear - Matrix2::new(1.0, 3.5, 0.0, 1.0)).norm() < 1e-15);
        let diagonal = expm(&Matrix3::from_diagonal(&nalgebra::Vector3::new(
            -40.0, 0.5, 12.0,
        )))
        .unwrap();
        for (i, d) in [-40.0_f64, 0.5, 12.0].into_iter().enumerate() {
            assert!((diagonal[(i, i)] - d.exp()).abs() <= 1e-13 * d.exp(), "{i}");
        }
    }

    #[test]
    fn rotation_generator_gives_rotation_at_every_degree() {
        // exp([[0, -w], [w, 0]]) = [[cos w, -sin w], [sin w, cos w]]; the angles cover every
        // degree range of the norm table and the scaled branch.
        for w in [1e-3_f64, 0.2, 0.9, 2.0, 5.0, 40.0] {
            let result = expm(&Matrix2::new(0.0, -w, w, 0.0)).unwrap();
            let expected = Matrix2::new(w.cos(), -w.sin(), w.sin(), w.cos());
            assert!((result - expected).norm() < 1e-13 * w.max(1.0), "w = {w}");
        }
        let result32 = expm(&Matrix2::new(0.0_f32, -2.0, 2.0, 0.0)).unwrap();
        assert!((result32[(0, 0)] - 2.0_f32.cos()).abs() < 1e-6);
    }

    #[test]
    fn non_finite_argument_is_rejected() {
        assert_eq!(
            expm(&Matrix2::new(f64::NAN, 0.0, 0.0, 0.0)),
            Err(ExpmError::NonFinite)
        );
        assert_eq!(
            expm(&Matrix2::new(1e300, 0.0, 0.0, 0.0)),
            Err(ExpmError::NonFinite)
        );
    }

    #[test]
    fn van_loan_reproduces_white_noise_acceleration() {
        // Bar-Shalom, Li & Kirubarajan (2001), sec. 6.2.2: for A = [[0, 1], [0, 0]] and
        // noise density q on velocity, Q = q [[dt^3/3, dt^2/2], [dt^2/2, dt]];
        // dt = 2 gives [[8/3, 2], [2, 2]].
        let a = Matrix2::new(0.0, 1.0, 0.0, 0.0);
        let density = Matrix2::new(0.0, 0.0, 0.0, 1.0);
        let discretised = van_loan(&a, &density, 2.0, Const::<4>).unwrap();
        assert!((discretised.transition - Matrix2::new(1.0, 2.0, 0.0, 1.0)).norm() < 1e-14);
        assert!((discretised.noise - Matrix2::new(8.0 / 3.0, 2.0, 2.0, 2.0)).norm() < 1e-13);
        assert_eq!(
            van_loan(&a, &density, 2.0, Const::<3>),
            Err(ExpmError::DimensionMismatch)
        );
    }
}
