"""Two-sided 95% acceptance bands of an averaged NEES/NIS over N Monte Carlo runs:
[chi2.ppf(0.025, N*n)/N, chi2.ppf(0.975, N*n)/N]. Checked by
compiler/src/sim/consistency.rs; output in consistency_band.txt."""
import scipy
from scipy.stats import chi2

print(f"# scipy {scipy.__version__}")
for runs, dof in [(50, 2), (100, 2), (100, 3), (100, 1), (1, 2)]:
    lo = chi2.ppf(0.025, runs * dof) / runs
    hi = chi2.ppf(0.975, runs * dof) / runs
    print(f"N={runs} n={dof}: {float(lo)!r} {float(hi)!r}")
