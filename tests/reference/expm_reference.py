"""Reference values for the IR's discretisation tests, computed with scipy.linalg.expm.

For each linear time-invariant system x' = A x + B u + c + w (w white with density
M = L Qc L^T) and step dt this writes:
  phi   = expm(A dt)
  gamma = integral_0^dt expm(A s) ds, the top-right block of expm([[A, I], [0, 0]] dt)
  q     = Van Loan (IEEE TAC 23(3), 1978): V = expm([[-A, M], [0, A^T]] dt),
          phi = V22^T, q = phi V12
and, for one state and input, x_next = phi x + gamma (B u + c).

Run: python3 tests/reference/expm_reference.py > tests/reference/expm_reference.json
"""

import json

import numpy as np
import scipy
from scipy.linalg import expm


def discretise(a, b, c, m, dt, x, u):
    n = a.shape[0]
    phi = expm(a * dt)
    block = np.zeros((2 * n, 2 * n))
    block[:n, :n] = a
    block[:n, n:] = np.eye(n)
    gamma = expm(block * dt)[:n, n:]
    van_loan = np.zeros((2 * n, 2 * n))
    van_loan[:n, :n] = -a
    van_loan[:n, n:] = m
    van_loan[n:, n:] = a.T
    v = expm(van_loan * dt)
    q = v[n:, n:].T @ v[:n, n:]
    x_next = phi @ x + gamma @ (b @ u + c)
    return {
        "dt": dt,
        "x": x.tolist(),
        "u": u.tolist(),
        "phi": phi.tolist(),
        "gamma_b": (gamma @ b).tolist(),
        "gamma_c": (gamma @ c).tolist(),
        "q": q.tolist(),
        "x_next": x_next.tolist(),
    }


# Jerk chain: pos' = vel, vel' = acc + u0, acc' = u1 + 0.05; white noise on vel
# (amplitude 0.1) and acc (amplitude 0.3). A is nilpotent.
chain = discretise(
    a=np.array([[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [0.0, 0.0, 0.0]]),
    b=np.array([[0.0, 0.0], [1.0, 0.0], [0.0, 1.0]]),
    c=np.array([0.0, 0.0, 0.05]),
    m=np.diag([0.0, 0.01, 0.09]),
    dt=0.37,
    x=np.array([1.5, -0.4, 0.2]),
    u=np.array([0.3, -0.1]),
)

# Damped oscillator: pos' = vel, vel' = -4 pos - 0.5 vel + u0; white noise on vel
# (amplitude 0.3). A is not nilpotent.
oscillator = discretise(
    a=np.array([[0.0, 1.0], [-4.0, -0.5]]),
    b=np.array([[0.0], [1.0]]),
    c=np.array([0.0, 0.0]),
    m=np.diag([0.0, 0.09]),
    dt=0.25,
    x=np.array([0.7, -0.2]),
    u=np.array([0.3]),
)

print(json.dumps({"scipy": scipy.__version__, "numpy": np.__version__, "chain": chain, "oscillator": oscillator}, indent=1))
