"""Reference values for the runtime's external-reference tests (tests/it/runtime_reference.rs).

Run: python3 tests/reference/runtime_reference.py > tests/reference/runtime_reference.txt
Produced with scipy 1.17.1 and numpy 2.4.6 (printed in the output header).

Output format, one matrix per line: `name rows cols v11 v12 ... (row-major)`.
"""

import numpy as np
import scipy
import scipy.integrate
import scipy.linalg


def emit(name, matrix):
    matrix = np.atleast_2d(np.asarray(matrix, dtype=float))
    values = " ".join(repr(float(v)) for v in matrix.ravel())
    print(f"{name} {matrix.shape[0]} {matrix.shape[1]} {values}")


print(f"# scipy {scipy.__version__}, numpy {np.__version__}")

# Steady-state Kalman filter of a constant-velocity track, dt = 1, white-noise
# acceleration of unit density, position reading of unit variance.
F = np.array([[1.0, 1.0], [0.0, 1.0]])
H = np.array([[1.0, 0.0]])
Q = np.array([[1.0 / 3.0, 0.5], [0.5, 1.0]])
R = np.array([[1.0]])
prior = scipy.linalg.solve_discrete_are(F.T, H.T, Q, R)
gain = prior @ H.T @ np.linalg.inv(H @ prior @ H.T + R)
emit("dare_prior", prior)
emit("dare_gain", gain)

# Matrix exponentials: a non-normal matrix in each degree range of the norm table and
# one that needs scaling and squaring.
rng = np.random.default_rng(20261202)
for index, scale in enumerate([0.01, 0.2, 0.9, 2.0, 5.0, 40.0]):
    a = rng.standard_normal((4, 4))
    a = a / np.linalg.norm(a, 1) * scale
    emit(f"expm_in_{index}", a)
    emit(f"expm_out_{index}", scipy.linalg.expm(a))

# Van Loan discretisation of a damped oscillator driven by white noise on velocity,
# checked by direct quadrature of Q_d = int_0^dt e^{As} W e^{As}^T ds.
A = np.array([[0.0, 1.0], [-4.0, -0.6]])
W = np.array([[0.0, 0.0], [0.0, 0.25]])
dt = 0.7
noise, _ = scipy.integrate.quad_vec(
    lambda s: scipy.linalg.expm(A * s) @ W @ scipy.linalg.expm(A * s).T, 0.0, dt, epsabs=1e-14, epsrel=1e-13
)
emit("van_loan_a", A)
emit("van_loan_w", W)
emit("van_loan_dt", [[dt]])
emit("van_loan_transition", scipy.linalg.expm(A * dt))
emit("van_loan_noise", noise)
