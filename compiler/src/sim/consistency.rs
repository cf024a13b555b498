//! Consistency of a filter over Monte Carlo runs: averaged NEES and NIS against the
//! two-sided chi-square acceptance band, and the verdict drawn from them.
//!
//! With `N` runs and `n` degrees of freedom, `N` times the averaged normalised error
//! squared is chi-square with `N n` degrees of freedom when the filter is consistent
//! (Bar-Shalom, Li & Kirubarajan 2001, sec. 5.4), so the 95% band of the average is
//! `[chi2_{Nn}(0.025) / N, chi2_{Nn}(0.975) / N]`.

use std::fmt;

use crate::stats::chi2_quantile;

/// Probability mass inside the acceptance band.
pub const BAND_PROBABILITY: f64 = 0.95;

/// Fraction of instants inside the band above which a filter is called consistent.
/// Below the nominal 95% because neighbouring instants are correlated and a finite
/// run wanders (common practice, no source).
pub const CONSISTENT_FRACTION: f64 = 0.9;

/// An acceptance band for an averaged normalised error squared.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Band {
    /// Lower bound.
    pub lower: f64,
    /// Upper bound.
    pub upper: f64,
}

impl Band {
    /// The two-sided band of probability [`BAND_PROBABILITY`] for the average of
    /// `runs` chi-square variables with `dof` degrees of freedom each; `None` when
    /// either is zero.
    pub fn averaged(runs: usize, dof: usize) -> Option<Band> {
        let total = u32::try_from(runs.checked_mul(dof)?).ok()?;
        let tail = (1.0 - BAND_PROBABILITY) / 2.0;
        let n = runs as f64;
        Some(Band {
            lower: chi2_quantile(tail, total)? / n,
            upper: chi2_quantile(1.0 - tail, total)? / n,
        })
    }

    fn contains(&self, value: f64) -> bool {
        value >= self.lower && value <= self.upper
    }
}

/// What the averaged figures say about the filter.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Verdict {
    /// Inside the band at least [`CONSISTENT_FRACTION`] of the time.
    Consistent,
    /// Mostly above the band: the filter's covariance is too small for its errors.
    Optimistic,
    /// Mostly below the band: the covariance is larger than the errors warrant.
    Pessimistic,
}

impl fmt::Display for Verdict {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            Verdict::Consistent => "consistent",
            Verdict::Optimistic => "optimistic (covariance too small)",
            Verdict::Pessimistic => "pessimistic (covariance too large)",
        })
    }
}

/// An averaged series checked against its band.
#[derive(Debug, Clone, PartialEq)]
pub struct Check {
    /// Degrees of freedom of one sample.
    pub dof: usize,
    /// The average over runs at each instant.
    pub mean: Vec<f64>,
    /// The acceptance band.
    pub band: Band,
    /// Fraction of instants inside the band.
    pub inside: f64,
    /// Instants above the band (not finite values count as above).
    pub above: usize,
    /// Instants below the band.
    pub below: usize,
    /// The verdict.
    pub verdict: Verdict,
}

/// `per_run[run][instant]` averaged over runs, for the instants every run has.
pub(crate) fn average_over_runs(per_run: &[&[f64]]) -> Vec<f64> {
    let instants = per_run.iter().map(|r| r.len()).min().unwrap_or(0);
    (0..instants)
        .map(|k| per_run.iter().map(|r| r[k]).sum::<f64>() / per_run.len() as f64)
        .collect()
}

impl Check {
    /// The fraction of instants from `start` on inside the band (0 when none).
    pub fn inside_from(&self, start: usize) -> f64 {
        let late = self.mean.get(start..).unwrap_or_default();
        let inside = late.iter().filter(|&&m| self.band.contains(m)).count();
        inside as f64 / late.len().max(1) as f64
    }

    /// Averages `per_run[run][instant]` over runs and checks it against the band.
    /// `None` when there are no runs or no degrees of freedom.
    pub fn of_runs(per_run: &[&[f64]], dof: usize) -> Option<Check> {
        let runs = per_run.len();
        let band = Band::averaged(runs, dof)?;
        let mean = average_over_runs(per_run);
        let instants = mean.len();
        let below = mean.iter().filter(|&&m| m < band.lower).count();
        let inside_count = mean.iter().filter(|&&m| band.contains(m)).count();
        let above = instants - below - inside_count;
        let inside = if instants == 0 {
            0.0
        } else {
            inside_count as f64 / instants as f64
        };
        let verdict = if instants > 0 && inside >= CONSISTENT_FRACTION {
            Verdict::Consistent
        } else if above >= below {
            Verdict::Optimistic
        } else {
            Verdict::Pessimistic
        };
        Some(Check {
            dof,
            mean,
            band,
            inside,
            above,
            below,
            verdict,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Bands computed with scipy 1.17.1, `chi2.ppf(0.025, N*n)/N` and
    /// `chi2.ppf(0.975, N*n)/N` (script: tests/reference/consistency_band.py, output
    /// beside it). N = 50, n = 2 gives [1.4844, 2.5912] as quoted for the averaged
    /// NEES test of Bar-Shalom, Li & Kirubarajan 2001, sec. 5.4.
    #[test]
    fn bands_match_scipy() {
        let rows = [
            (50, 2, 1.4844385494984746, 2.5912239437167317),
            (100, 2, 1.6272798250184628, 2.410578955063109),
            (100, 3, 2.5391232260248975, 3.4987446882991526),
            (100, 1, 0.7422192747492373, 1.2956119718583659),
            (1, 2, 0.05063561596857975, 7.377758908227871),
        ];
        for (runs, dof, lower, upper) in rows {
            let band = Band::averaged(runs, dof).expect("valid");
            assert!(
                (band.lower - lower).abs() <= 1e-9 * lower,
                "{runs} {dof}: {band:?}"
            );
            assert!(
                (band.upper - upper).abs() <= 1e-9 * upper,
                "{runs} {dof}: {band:?}"
            );
        }
        assert_eq!(Band::averaged(0, 2), None);
    }

    #[test]
    fn verdicts_follow_the_side_of_the_band() {
        let inside = vec![2.0; 10];
        let high = vec![9.0; 10];
        let low = vec![0.1; 10];
        fn runs(v: &[f64]) -> Vec<&[f64]> {
            vec![v; 50]
        }
        assert_eq!(
            Check::of_runs(&runs(&inside), 2).expect("ok").verdict,
            Verdict::Consistent
        );
        assert_eq!(
            Check::of_runs(&runs(&high), 2).expect("ok").verdict,
            Verdict::Optimistic
        );
        let pessimistic = Check::of_runs(&runs(&low), 2).expect("ok");
        assert_eq!(
            (pessimistic.verdict, pessimistic.below, pessimistic.inside),
            (Verdict::Pessimistic, 10, 0.0)
        );
        let with_nan = vec![f64::NAN; 10];
        assert_eq!(
            Check::of_runs(&runs(&with_nan), 2).expect("ok").verdict,
            Verdict::Optimistic
        );
    }
}
