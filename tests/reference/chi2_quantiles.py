"""Chi-square quantiles and CDF values used by compiler/src/stats.rs tests.

Run: python3 tests/reference/chi2_quantiles.py > tests/reference/chi2_quantiles.txt
Produced with scipy 1.17.1, numpy 2.4.6.
"""
import scipy
from scipy.stats import chi2

print(f"# scipy {scipy.__version__}")
for p, dof in [(0.997, 1), (0.997, 2), (0.997, 6), (0.025, 100), (0.975, 100), (0.5, 1)]:
    print(f"ppf p={p} dof={dof}: {float(chi2.ppf(p, dof))!r}")
print(f"cdf x=9 dof=1: {float(chi2.cdf(9, 1))!r}")
