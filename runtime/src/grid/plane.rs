//! The grid filter's arithmetic on a plane of `NY` rows of `NX` cells, shared by the 1-D
//! grid (one row, centred at zero) and the 2-D grid: prediction by pushing and
//! spreading mass, correction in log space, normalisation with pruning, and the
//! statistics of the belief.
//!
//! Invariants kept by every method: the masses are finite, non-negative and sum to one
//! (up to round-off); every cell outside `support` is exactly zero, in particular every
//! cell past an axis's count (the arrays have the capacity `NX x NY`, the belief lives
//! on the first `x.count() x y.count()` cells); no cell holds less than the pruning
//! threshold. A rejected step leaves the masses bit-identical.

use nalgebra::RealField;

use super::line::{prune_over, scale_over, sum_over, Axis, LineKernel, Span, Split};
use super::model::{checked_ln_likelihood, CorrectError, PredictError};
use super::noise::minus_infinity;
use super::{GridCorrection, GridError, GridOptions, GridPrediction};

/// The rows and columns that hold all of the belief's mass.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) struct Support {
    pub rows: Span,
    pub cols: Span,
}

impl Support {
    fn cells(self) -> impl Iterator<Item = (usize, usize)> {
        self.rows
            .indices()
            .flat_map(move |row| self.cols.indices().map(move |col| (row, col)))
    }

    fn union(self, other: Support) -> Support {
        Support {
            rows: self.rows.union(other.rows),
            cols: self.cols.union(other.cols),
        }
    }

    fn single(row: usize, col: usize) -> Support {
        let span = |i| Span { first: i, last: i };
        Support {
            rows: span(row),
            cols: span(col),
        }
    }
}

fn grow(support: Option<Support>, more: Support) -> Option<Support> {
    Some(support.map_or(more, |s| s.union(more)))
}

/// A belief on a plane of cells.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct Plane<T, const NX: usize, const NY: usize> {
    pub x: Axis<T, NX>,
    pub y: Axis<T, NY>,
    pub mass: [[T; NX]; NY],
    pub support: Support,
    skip_below: T,
}

/// Normalises `rows` over `support`, zeroes cells below `threshold` and normalises
/// again. Returns the tightened support and the mass found before normalising, or
/// `None` when there was no mass.
fn settle<T: RealField + Copy, const NX: usize>(
    rows: &mut [[T; NX]],
    support: Support,
    threshold: T,
) -> Option<(Support, T)> {
    let total_over = |rows: &[[T; NX]], support: Support| {
        support.rows.indices().fold(T::zero(), |sum, row| {
            sum + sum_over(&rows[row], support.cols)
        })
    };
    let total = total_over(rows, support);
    if !(total > T::zero() && total.is_finite()) {
        return None;
    }
    let mut kept: Option<Support> = None;
    for row in support.rows.indices() {
        scale_over(&mut rows[row], support.cols, T::one() / total);
        if let Some(cols) = prune_over(&mut rows[row], support.cols, threshold) {
            let here = Support {
                rows: Span {
                    first: row,
                    last: row,
                },
                cols,
            };
            kept = grow(kept, here);
        }
    }
    let kept = kept?;
    let remaining = total_over(rows, kept);
    for row in kept.rows.indices() {
        scale_over(&mut rows[row], kept.cols, T::one() / remaining);
    }
    Some((kept, total))
}

impl<T: RealField + Copy, const NX: usize, const NY: usize> Plane<T, NX, NY> {
    /// A belief from (unnormalised) masses. Cells past an axis's count must hold zero:
    /// a mass there is refused rather than silently dropped.
    pub fn new(
        x: Axis<T, NX>,
        y: Axis<T, NY>,
        mut mass: [[T; NX]; NY],
        options: GridOptions<T>,
    ) -> Result<Self, GridError> {
        let cells: T = nalgebra::convert((x.count * y.count) as f64);
        let skip_below = options.skip_below;
        if !(skip_below >= T::zero() && skip_below * cells < T::one()) {
            return Err(GridError::InvalidThreshold);
        }
        let in_use = |row: usize, col: usize| row < y.count && col < x.count;
        let refused = mass.iter().enumerate().any(|(row, masses)| {
            masses.iter().enumerate().any(|(col, &m)| {
                !m.is_finite() || m < T::zero() || (m != T::zero() && !in_use(row, col))
            })
        });
        if refused {
            return Err(GridError::InvalidMass);
        }
        let full = Support {
            rows: Span::full(y.count),
            cols: Span::full(x.count),
        };
        let (support, _) = settle(&mut mass, full, skip_below).ok_or(GridError::NoMass)?;
        Ok(Self {
            x,
            y,
            mass,
            support,
            skip_below,
        })
    }

    /// Moves every cell's mass to `map(centre)` (split between the nearest centres, see
    /// [`Split`]; mass moved past the ends is dropped), then spreads it through the
    /// noise kernels. `map` returns `None` for a non-finite state.
    pub fn push(
        &mut self,
        mut map: impl FnMut(T, T) -> Option<(T, T)>,
        kernel_x: &LineKernel<T, NX>,
        kernel_y: Option<&LineKernel<T, NY>>,
    ) -> Result<GridPrediction<T>, PredictError> {
        let mut moved = [[T::zero(); NX]; NY];
        let mut moved_support: Option<Support> = None;
        for (row, col) in self.support.cells() {
            let mass = self.mass[row][col];
            if mass <= T::zero() {
                continue;
            }
            let (to_x, to_y) = map(self.x.centre(col), self.y.centre(row))
                .filter(|(a, b)| a.is_finite() && b.is_finite())
                .ok_or(PredictError::NonFiniteTransition)?;
            let split_x = Split::at(self.x.position_in_cells(to_x));
            let split_y = Split::at(self.y.position_in_cells(to_y));
            for (target_row, share_y) in split_y.shares(self.y.count) {
                for (target_col, share_x) in split_x.shares(self.x.count) {
                    moved[target_row][target_col] += mass * share_y * share_x;
                    moved_support = grow(moved_support, Support::single(target_row, target_col));
                }
            }
        }
        let moved_support = moved_support.ok_or(PredictError::AllMassLeftGrid)?;
        let (spread, support, total) = self.spread(&moved, moved_support, kernel_x, kernel_y)?;
        Ok(self.commit_prediction(spread, support, total))
    }

    /// Spreads the belief through the noise kernels (which carry the translation).
    pub fn translate(
        &mut self,
        kernel_x: &LineKernel<T, NX>,
        kernel_y: Option<&LineKernel<T, NY>>,
    ) -> Result<GridPrediction<T>, PredictError> {
        let (spread, support, total) = self.spread(&self.mass, self.support, kernel_x, kernel_y)?;
        Ok(self.commit_prediction(spread, support, total))
    }

    fn commit_prediction(
        &mut self,
        mass: [[T; NX]; NY],
        support: Support,
        total: T,
    ) -> GridPrediction<T> {
        self.mass = mass;
        self.support = support;
        GridPrediction {
            mass_lost: (T::one() - total).max(T::zero()),
        }
    }

    /// Spreads `source` along the rows through `kernel_x`, then along the columns
    /// through `kernel_y` (the noise components are independent, so the 2-D kernel is
    /// separable) and settles the result; returns it with its support and the mass that
    /// stayed on the grid.
    fn spread(
        &self,
        source: &[[T; NX]; NY],
        support: Support,
        kernel_x: &LineKernel<T, NX>,
        kernel_y: Option<&LineKernel<T, NY>>,
    ) -> Result<([[T; NX]; NY], Support, T), PredictError> {
        let mut along_rows = [[T::zero(); NX]; NY];
        let mut cols: Option<Span> = None;
        for row in support.rows.indices() {
            if let Some(span) = kernel_x.spread(&source[row], &mut along_rows[row], support.cols) {
                cols = Some(cols.map_or(span, |c| c.union(span)));
            }
        }
        let cols = cols.ok_or(PredictError::AllMassLeftGrid)?;
        let (mut spread, spread_support) = match kernel_y {
            None => (
                along_rows,
                Support {
                    rows: support.rows,
                    cols,
                },
            ),
            Some(kernel_y) => {
                let mut along_cols = [[T::zero(); NX]; NY];
                let mut rows: Option<Span> = None;
                for col in cols.indices() {
                    let column: [T; NY] = core::array::from_fn(|row| along_rows[row][col]);
                    let mut spread_column = [T::zero(); NY];
                    if let Some(span) = kernel_y.spread(&column, &mut spread_column, support.rows) {
                        for row in span.indices() {
                            along_cols[row][col] = spread_column[row];
                        }
                        rows = Some(rows.map_or(span, |r| r.union(span)));
                    }
                }
                let rows = rows.ok_or(PredictError::AllMassLeftGrid)?;
                (along_cols, Support { rows, cols })
            }
        };
        let (settled, total) = settle(&mut spread, spread_support, self.skip_below)
            .ok_or(PredictError::AllMassLeftGrid)?;
        Ok((spread, settled, total))
    }

    /// Multiplies the belief by `exp(ln_likelihood(centre))` and normalises. The product
    /// is formed in log space relative to its largest term, so a reading far from the
    /// belief (every likelihood underflowing) still gives the right posterior.
    pub fn correct(
        &mut self,
        mut ln_likelihood: impl FnMut(T, T) -> T,
    ) -> Result<GridCorrection<T>, CorrectError> {
        let mut posterior = [[T::zero(); NX]; NY];
        let mut largest = minus_infinity::<T>();
        for (row, col) in self.support.cells() {
            let mass = self.mass[row][col];
            if mass > T::zero() {
                let ln_l =
                    checked_ln_likelihood(ln_likelihood(self.x.centre(col), self.y.centre(row)))?;
                let score = mass.ln() + ln_l;
                posterior[row][col] = score;
                largest = largest.max(score);
            }
        }
        if !largest.is_finite() {
            return Err(CorrectError::ZeroPosterior);
        }
        for (row, col) in self.support.cells() {
            posterior[row][col] = if self.mass[row][col] > T::zero() {
                (posterior[row][col] - largest).exp()
            } else {
                T::zero()
            };
        }
        // The largest term is exp(0) = 1, so the total is at least 1 and settling
        // cannot fail.
        let (settled, total) = settle(&mut posterior, self.support, self.skip_below)
            .ok_or(CorrectError::ZeroPosterior)?;
        self.mass = posterior;
        self.support = settled;
        Ok(GridCorrection {
            ln_evidence: largest + total.ln(),
        })
    }

    /// The mean `(x, y)` and the covariance `[[xx, xy], [xy, yy]]` of the belief, with
    /// the mass of each cell at its centre.
    pub fn moments(&self) -> ([T; 2], [[T; 2]; 2]) {
        let mut mean = [T::zero(); 2];
        for (row, col) in self.support.cells() {
            let mass = self.mass[row][col];
            mean[0] += mass * self.x.centre(col);
            mean[1] += mass * self.y.centre(row);
        }
        let mut covariance = [[T::zero(); 2]; 2];
        for (row, col) in self.support.cells() {
            let mass = self.mass[row][col];
            let dx = self.x.centre(col) - mean[0];
            let dy = self.y.centre(row) - mean[1];
            covariance[0][0] += mass * dx * dx;
            covariance[0][1] += mass * dx * dy;
            covariance[1][1] += mass * dy * dy;
        }
        covariance[1][0] = covariance[0][1];
        (mean, covariance)
    }

    /// Calls `found(row, col, mass)` for every local maximum holding at least
    /// `min_fraction_of_peak` times the largest mass, in row-major order; returns how
    /// many there are. A cell is a local maximum when its mass is positive, at least
    /// that of its (up to 8) neighbours earlier in row-major order and greater than that
    /// of the later ones, so a plateau counts once, at its last cell.
    pub fn modes(&self, min_fraction_of_peak: T, mut found: impl FnMut(usize, usize, T)) -> usize {
        let peak = self
            .support
            .cells()
            .fold(T::zero(), |peak, (row, col)| peak.max(self.mass[row][col]));
        let floor = peak * min_fraction_of_peak;
        let mut count = 0;
        for (row, col) in self.support.cells() {
            let mass = self.mass[row][col];
            if mass > T::zero() && mass >= floor && self.is_local_maximum(row, col) {
                found(row, col, mass);
                count += 1;
            }
        }
        count
    }

    fn is_local_maximum(&self, row: usize, col: usize) -> bool {
        let mass = self.mass[row][col];
        let rows = row.saturating_sub(1)..=(row + 1).min(self.y.count - 1);
        let last_col = (col + 1).min(self.x.count - 1);
        rows.flat_map(|r| (col.saturating_sub(1)..=last_col).map(move |c| (r, c)))
            .filter(|&cell| cell != (row, col))
            .all(|(r, c)| {
                let earlier = (r, c) < (row, col);
                let neighbour = self.mass[r][c];
                if earlier {
                    mass >= neighbour
                } else {
                    mass > neighbour
                }
            })
    }

    /// The mass of the cells whose centres lie in `[x_lo, x_hi] x [y_lo, y_hi]`.
    pub fn probability_in(&self, (x_lo, x_hi): (T, T), (y_lo, y_hi): (T, T)) -> T {
        match (
            self.x.cells_centred_in(x_lo, x_hi),
            self.y.cells_centred_in(y_lo, y_hi),
        ) {
            (Some(cols), Some(rows)) => rows
                .indices()
                .fold(T::zero(), |sum, row| sum + sum_over(&self.mass[row], cols)),
            _ => T::zero(),
        }
    }
}
