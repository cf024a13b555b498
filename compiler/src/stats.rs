//! Chi-square distribution functions, evaluated at build time.
//!
//! The compiler turns a gate probability ("gate 99.9 %") into a Mahalanobis threshold
//! once, when it generates code, so the runtime only compares numbers; the simulator
//! uses the same quantiles for its consistency bands. Accuracy target: relative 1e-10
//! over the probabilities and degrees of freedom a filter meets (dof 1..=1000).

/// ln Γ(x) for x > 0, by the Lanczos approximation (g = 7, nine coefficients), accurate
/// to about 1e-15 relative; for x < 0.5 the reflection formula is used.
fn ln_gamma(x: f64) -> f64 {
    const G: f64 = 7.0;
    const COEFFS: [f64; 9] = [
        0.999_999_999_999_809_9,
        676.520_368_121_885_1,
        -1_259.139_216_722_402_8,
        771.323_428_777_653_1,
        -176.615_029_162_140_6,
        12.507_343_278_686_905,
        -0.138_571_095_265_720_12,
        9.984_369_578_019_572e-6,
        1.505_632_735_149_311_6e-7,
    ];
    if x < 0.5 {
        let pi = std::f64::consts::PI;
        return (pi / (pi * x).sin()).ln() - ln_gamma(1.0 - x);
    }
    let x = x - 1.0;
    let mut sum = COEFFS[0];
    for (i, c) in COEFFS.iter().enumerate().skip(1) {
        sum += c / (x + i as f64);
    }
    let t = x + G + 0.5;
    0.5 * (2.0 * std::f64::consts::PI).ln() + (x + 0.5) * t.ln() - t + sum.ln()
}

/// Regularised lower incomplete gamma function P(a, x), for a > 0, x >= 0.
///
/// Series expansion below x < a + 1, Lentz's continued fraction for Q = 1 - P above,
/// the usual split that keeps both converging quickly.
fn regularized_gamma_p(a: f64, x: f64) -> f64 {
    if x <= 0.0 {
        return 0.0;
    }
    let log_prefactor = a * x.ln() - x - ln_gamma(a);
    if x < a + 1.0 {
        let mut term = 1.0 / a;
        let mut sum = term;
        let mut n = a;
        for _ in 0..10_000 {
            n += 1.0;
            term *= x / n;
            sum += term;
            if term.abs() < sum.abs() * 1e-17 {
                break;
            }
        }
        (sum.ln() + log_prefactor).exp()
    } else {
        const TINY: f64 = 1e-300;
        let mut b = x + 1.0 - a;
        let mut c = 1.0 / TINY;
        let mut d = 1.0 / b;
        let mut h = d;
        for i in 1..10_000 {
            let an = -(i as f64) * (i as f64 - a);
            b += 2.0;
            d = an * d + b;
            if d.abs() < TINY {
                d = TINY;
            }
            c = b + an / c;
            if c.abs() < TINY {
                c = TINY;
            }
            d = 1.0 / d;
            let delta = d * c;
            h *= delta;
            if (delta - 1.0).abs() < 1e-16 {
                break;
            }
        }
        1.0 - (h.ln() + log_prefactor).exp()
    }
}

/// Cumulative distribution function of chi-square with `dof` degrees of freedom.
pub fn chi2_cdf(x: f64, dof: u32) -> f64 {
    regularized_gamma_p(f64::from(dof) / 2.0, x / 2.0)
}

/// The quantile: the `x` with `chi2_cdf(x, dof) == p`. `None` unless `0 < p < 1` and
/// `dof >= 1`.
pub fn chi2_quantile(p: f64, dof: u32) -> Option<f64> {
    if !(p > 0.0 && p < 1.0) || dof == 0 {
        return None;
    }
    // Bracket, then bisect on the CDF: robust for every p and dof, and build-time cost
    // is irrelevant (a few hundred CDF evaluations).
    let k = f64::from(dof);
    let mut lo = 0.0;
    let mut hi = k.max(1.0);
    while chi2_cdf(hi, dof) < p {
        lo = hi;
        hi *= 2.0;
        if hi > 1e9 {
            return None;
        }
    }
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if chi2_cdf(mid, dof) < p {
            lo = mid;
        } else {
            hi = mid;
        }
        if hi - lo <= hi * 1e-15 {
            break;
        }
    }
    Some(0.5 * (lo + hi))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn assert_close(actual: f64, expected: f64, rel: f64) {
        assert!(
            ((actual - expected) / expected).abs() <= rel,
            "{actual} vs {expected} (relative tolerance {rel})"
        );
    }

    /// Upper critical values of chi-square, NIST/SEMATECH e-Handbook of Statistical
    /// Methods, sec. 1.3.6.7.4 (table printed to three decimals, hence 5e-4 absolute).
    #[test]
    fn quantiles_match_the_nist_sematech_table() {
        let table: [(u32, [f64; 3]); 6] = [
            (1, [3.841, 6.635, 10.828]),
            (2, [5.991, 9.210, 13.816]),
            (3, [7.815, 11.345, 16.266]),
            (4, [9.488, 13.277, 18.467]),
            (5, [11.070, 15.086, 20.515]),
            (6, [12.592, 16.812, 22.458]),
        ];
        for (dof, row) in table {
            for (p, expected) in [0.95, 0.99, 0.999].into_iter().zip(row) {
                let q = chi2_quantile(p, dof).expect("valid probability");
                assert!(
                    (q - expected).abs() <= 5e-4,
                    "dof {dof}, p {p}: {q} vs {expected}"
                );
            }
        }
    }

    /// Values computed with scipy 1.17.1 `scipy.stats.chi2.ppf` (script:
    /// tests/reference/chi2_quantiles.py, output beside it).
    #[test]
    fn quantiles_match_scipy() {
        let rows = [
            (0.997, 1, 8.807468393511947),
            (0.997, 2, 11.618285980628052),
            (0.997, 6, 19.8046523588496),
            (0.025, 100, 74.22192747492373),
            (0.975, 100, 129.5611971858366),
            (0.5, 1, 0.454936423119572),
        ];
        for (p, dof, expected) in rows {
            assert_close(
                chi2_quantile(p, dof).expect("valid probability"),
                expected,
                1e-9,
            );
        }
    }

    /// P(chi2_1 <= 9) = 0.9973002039367398: the "3 sigma" gate for one dimension is
    /// 9 (erf(3/sqrt 2), scipy 1.17 `chi2.cdf(9, 1)`).
    #[test]
    fn three_sigma_gate_in_one_dimension() {
        assert_close(chi2_cdf(9.0, 1), 0.997_300_203_936_739_8, 1e-12);
    }

    #[test]
    fn out_of_range_probabilities_have_no_quantile() {
        assert_eq!(chi2_quantile(0.0, 2), None);
        assert_eq!(chi2_quantile(1.0, 2), None);
        assert_eq!(chi2_quantile(f64::NAN, 2), None);
        assert_eq!(chi2_quantile(0.5, 0), None);
    }
}
