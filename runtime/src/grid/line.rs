//! One grid axis and the operations along one line of cells that the 1-D and 2-D grids
//! share: the motion kernel integrated over cells, spreading mass through it, splitting
//! a moved cell's mass between neighbours, and the support bookkeeping.
//!
//! An axis stores up to `N` cells (its capacity) and uses the first [`Axis::count`] of
//! them; everything here measures the line by the count, so the cells past it never
//! receive mass.

use nalgebra::RealField;

use super::noise::{lit, to_f64, Noise};

/// One axis of a grid: `count <= N` cells of equal width starting at `lo`; cell `i`
/// covers `[lo + i width, lo + (i + 1) width)` and its mass sits at its centre. `N` is
/// the capacity of the grid's arrays; a count below it lets one instantiation serve
/// grids whose size is only known at run time.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Axis<T, const N: usize> {
    pub(super) lo: T,
    pub(super) width: T,
    pub(super) count: usize,
}

/// Why an axis was refused.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum AxisError {
    /// The lower end or the width is NaN or infinite.
    NonFinite,
    /// The cell width is zero or negative.
    NonPositiveWidth,
    /// The axis has no cells (a count of zero).
    NoCells,
    /// The count exceeds the capacity `N`.
    TooManyCells,
}

impl<T: RealField + Copy, const N: usize> Axis<T, N> {
    /// An axis of `N` cells of width `width` starting at `lo`.
    pub fn new(lo: T, width: T) -> Result<Self, AxisError> {
        Self::with_count(lo, width, N)
    }

    /// An axis of `count` cells of width `width` starting at `lo`, stored in arrays of
    /// capacity `N`.
    pub fn with_count(lo: T, width: T, count: usize) -> Result<Self, AxisError> {
        if !lo.is_finite() || !width.is_finite() {
            Err(AxisError::NonFinite)
        } else if width <= T::zero() {
            Err(AxisError::NonPositiveWidth)
        } else if count == 0 {
            Err(AxisError::NoCells)
        } else if count > N {
            Err(AxisError::TooManyCells)
        } else {
            Ok(Self { lo, width, count })
        }
    }

    /// The lower end of the first cell.
    pub fn lo(&self) -> T {
        self.lo
    }

    /// The cell width.
    pub fn width(&self) -> T {
        self.width
    }

    /// The number of cells in use (at most the capacity `N`).
    pub fn count(&self) -> usize {
        self.count
    }

    /// The upper end of the last cell.
    pub fn hi(&self) -> T {
        self.lo + self.width * lit(self.count as f64)
    }

    /// The centre of cell `index`.
    pub fn centre(&self, index: usize) -> T {
        self.lo + self.width * (lit::<T>(index as f64) + lit(0.5))
    }

    /// The cell containing `x`, if any.
    pub fn cell_of(&self, x: T) -> Option<usize> {
        let position = to_f64((x - self.lo) / self.width);
        if (0.0..self.count as f64).contains(&position) {
            Some(position as usize)
        } else {
            None
        }
    }

    /// The mass of each cell under the density `shape` centred at `mean`, integrated
    /// over the cell; zero past the count.
    pub(crate) fn cell_masses(&self, mean: T, shape: &Noise<T>) -> [T; N] {
        core::array::from_fn(|index| {
            let start = self.lo + self.width * lit::<T>(index as f64) - mean;
            if index < self.count {
                shape.mass_between(start, start + self.width)
            } else {
                T::zero()
            }
        })
    }

    /// One in each cell in use, zero past the count.
    pub(crate) fn ones(&self) -> [T; N] {
        core::array::from_fn(|index| {
            if index < self.count {
                T::one()
            } else {
                T::zero()
            }
        })
    }

    /// `x` in units of cells, measured from the centre of cell 0.
    pub(crate) fn position_in_cells(&self, x: T) -> T {
        (x - self.lo) / self.width - lit(0.5)
    }

    /// The range of cells whose centres lie in `[lo, hi]`, if any.
    pub(crate) fn cells_centred_in(&self, lo: T, hi: T) -> Option<Span> {
        let first = libm::ceil(to_f64(self.position_in_cells(lo))).max(0.0);
        let last = libm::floor(to_f64(self.position_in_cells(hi))).min(self.count as f64 - 1.0);
        // `first <= last` is false for NaN bounds too.
        (first <= last).then_some(Span {
            first: first as usize,
            last: last as usize,
        })
    }
}

/// An inclusive range of cell indices along one axis.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) struct Span {
    pub first: usize,
    pub last: usize,
}

impl Span {
    pub fn full(count: usize) -> Self {
        Self {
            first: 0,
            last: count - 1,
        }
    }

    pub fn indices(self) -> core::ops::RangeInclusive<usize> {
        self.first..=self.last
    }

    /// The smallest span holding both.
    pub fn union(self, other: Span) -> Span {
        Span {
            first: self.first.min(other.first),
            last: self.last.max(other.last),
        }
    }
}

/// The motion noise integrated over cells: `weight(k)` is the probability that mass
/// starting at a cell centre moves by `k` cells, for `k` in `first..=last` (the offsets
/// that can land on the `cells` cells of the axis and where the noise has mass).
pub(crate) struct LineKernel<T, const N: usize> {
    /// Offsets `0..N`.
    forward: [T; N],
    /// Offsets `-1, -2, ..., -N` at indices `0, 1, ..., N - 1`.
    backward: [T; N],
    first: isize,
    last: isize,
    /// The axis's cell count: mass spread past it leaves the grid.
    cells: usize,
}

impl<T: RealField + Copy, const N: usize> LineKernel<T, N> {
    /// The kernel of a move by `shift` cells plus `noise`: the weight of offset `k` is
    /// the noise's mass over the destination cell seen from the moved centre,
    /// `F((k + 1/2 - shift) width) - F((k - 1/2 - shift) width)`. Integrating (rather than
    /// sampling the density at the offset) keeps the weights summing to one for noise
    /// narrower than a cell and makes sub-cell shifts exact for mass at cell centres.
    pub fn new(noise: &Noise<T>, shift: T, axis: &Axis<T, N>) -> Self {
        let width = axis.width;
        let reach = to_f64(noise.reach() / width);
        let shift_f64 = to_f64(shift);
        let max_offset = axis.count as f64 - 1.0;
        let first = libm::floor(shift_f64 - reach - 0.5).max(-max_offset);
        let last = libm::ceil(shift_f64 + reach + 0.5).min(max_offset);
        let mut kernel = Self {
            forward: [T::zero(); N],
            backward: [T::zero(); N],
            first: first as isize,
            last: last as isize,
            cells: axis.count,
        };
        let half = lit::<T>(0.5);
        for offset in kernel.first..=kernel.last {
            let centre = lit::<T>(offset as f64) - shift;
            let weight = noise.mass_between((centre - half) * width, (centre + half) * width);
            if offset >= 0 {
                kernel.forward[offset.unsigned_abs()] = weight;
            } else {
                kernel.backward[offset.unsigned_abs() - 1] = weight;
            }
        }
        kernel
    }

    fn weight(&self, offset: isize) -> T {
        if offset >= 0 {
            self.forward[offset.unsigned_abs()]
        } else {
            self.backward[offset.unsigned_abs() - 1]
        }
    }

    /// Adds `mass` at `source` spread through the kernel into `destination` (at least
    /// `cells` long); the parts that land past either end of the axis are dropped.
    /// Returns the cells touched, if any.
    fn spread_one(&self, source: usize, mass: T, destination: &mut [T]) -> Option<Span> {
        let count = self.cells.min(destination.len()) as isize;
        let first = (source as isize + self.first).max(0);
        let last = (source as isize + self.last).min(count - 1);
        if first > last {
            return None;
        }
        for target in first..=last {
            let offset = target - source as isize;
            destination[target.unsigned_abs()] += mass * self.weight(offset);
        }
        Some(Span {
            first: first.unsigned_abs(),
            last: last.unsigned_abs(),
        })
    }

    /// Spreads every cell of `source` within `support` into `destination` (which must
    /// be zero wherever it can be reached). Returns the cells touched, if any: the cost
    /// is the support's length times the kernel's.
    pub fn spread(&self, source: &[T], destination: &mut [T], support: Span) -> Option<Span> {
        let mut touched: Option<Span> = None;
        for index in support.indices() {
            let mass = source[index];
            if mass > T::zero() {
                if let Some(span) = self.spread_one(index, mass, destination) {
                    touched = Some(touched.map_or(span, |t| t.union(span)));
                }
            }
        }
        touched
    }
}

/// Where mass moved to a point at `position` (in cells from the centre of cell 0) goes:
/// the share `1 - fraction` to cell `lower` and `fraction` to `lower + 1` (linear
/// interpolation between the two nearest centres, which keeps the mean exact).
pub(crate) struct Split<T> {
    pub lower: isize,
    pub fraction: T,
}

impl<T: RealField + Copy> Split<T> {
    pub fn at(position: T) -> Self {
        let lower = position.floor();
        Self {
            lower: to_f64(lower) as isize,
            fraction: position - lower,
        }
    }

    /// The (cell, share) pairs that land on an axis of `count` cells.
    pub fn shares(&self, count: usize) -> impl Iterator<Item = (usize, T)> {
        [
            (self.lower, T::one() - self.fraction),
            (self.lower.saturating_add(1), self.fraction),
        ]
        .into_iter()
        .filter(move |&(cell, share)| cell >= 0 && (cell as usize) < count && share > T::zero())
        .map(|(cell, share)| (cell.unsigned_abs(), share))
    }
}

/// The sum of `data` over `span`.
pub(crate) fn sum_over<T: RealField + Copy>(data: &[T], span: Span) -> T {
    data[span.indices()]
        .iter()
        .fold(T::zero(), |sum, &mass| sum + mass)
}

/// Multiplies `data` over `span` by `factor`.
pub(crate) fn scale_over<T: RealField + Copy>(data: &mut [T], span: Span, factor: T) {
    data[span.indices()]
        .iter_mut()
        .for_each(|mass| *mass *= factor);
}

/// Zeroes the cells of `span` whose mass is below `threshold`; returns the span of the
/// cells left with mass, if any.
pub(crate) fn prune_over<T: RealField + Copy>(
    data: &mut [T],
    span: Span,
    threshold: T,
) -> Option<Span> {
    let mut kept: Option<Span> = None;
    for index in span.indices() {
        if data[index] < threshold {
            data[index] = T::zero();
        } else if data[index] > T::zero() {
            let here = Span {
                first: index,
                last: index,
            };
            kept = Some(kept.map_or(here, |k| k.union(here)));
        }
    }
    kept
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn axis_centres_and_cells() {
        let axis = Axis::<f64, 10>::new(-1.0, 0.5).unwrap();
        assert_eq!(axis.centre(0), -0.75);
        assert_eq!(axis.hi(), 4.0);
        assert_eq!(axis.cell_of(-1.0), Some(0));
        assert_eq!(axis.cell_of(3.99), Some(9));
        assert_eq!(axis.cell_of(4.0), None);
        assert_eq!(axis.cell_of(f64::NAN), None);
        assert_eq!(
            axis.cells_centred_in(0.0, 1.0),
            Some(Span { first: 2, last: 3 })
        );
        assert_eq!(axis.cells_centred_in(1.1, 1.2), None);
    }

    #[test]
    fn bad_axes_are_refused() {
        assert_eq!(
            Axis::<f64, 3>::new(0.0, 0.0),
            Err(AxisError::NonPositiveWidth)
        );
        assert_eq!(
            Axis::<f64, 3>::new(f64::INFINITY, 1.0),
            Err(AxisError::NonFinite)
        );
        assert_eq!(Axis::<f64, 0>::new(0.0, 1.0), Err(AxisError::NoCells));
        assert_eq!(
            Axis::<f64, 3>::with_count(0.0, 1.0, 0),
            Err(AxisError::NoCells)
        );
        assert_eq!(
            Axis::<f64, 3>::with_count(0.0, 1.0, 4),
            Err(AxisError::TooManyCells)
        );
        assert_eq!(
            Axis::<f64, 3>::with_count(f64::NAN, 1.0, 4),
            Err(AxisError::NonFinite)
        );
    }

    #[test]
    fn a_counted_axis_ends_at_its_count() {
        let axis = Axis::<f64, 16>::with_count(-1.0, 0.5, 10).unwrap();
        assert_eq!(axis.count(), 10);
        assert_eq!(axis.hi(), 4.0);
        assert_eq!(axis.cell_of(3.99), Some(9));
        assert_eq!(axis.cell_of(4.0), None);
        assert_eq!(
            axis.cells_centred_in(3.0, 100.0),
            Some(Span { first: 8, last: 9 })
        );
        let masses = axis.cell_masses(0.0, &Noise::Uniform { half_width: 100.0 });
        assert!(masses[..10].iter().all(|&m| m > 0.0));
        assert!(masses[10..].iter().all(|&m| m == 0.0));
        assert_eq!(axis.ones()[9..11], [1.0, 0.0]);
        assert_eq!(Axis::<f64, 16>::new(-1.0, 0.5).unwrap().count(), 16);
    }

    #[test]
    fn kernel_and_spreading_stop_at_the_count() {
        // A wide kernel on 5 of 8 cells reaches offsets -4..=4 only, and spreading from
        // the last used cell drops whatever lands past it.
        let axis = Axis::<f64, 8>::with_count(0.0, 1.0, 5).unwrap();
        let kernel = LineKernel::new(&Noise::Uniform { half_width: 20.0 }, 0.0, &axis);
        assert_eq!((kernel.first, kernel.last), (-4, 4));
        let mut destination = [0.0; 8];
        let touched = kernel.spread_one(4, 1.0, &mut destination);
        assert_eq!(touched, Some(Span { first: 0, last: 4 }));
        assert!(destination[5..].iter().all(|&m| m == 0.0));
        assert!((destination.iter().sum::<f64>() - 5.0 / 40.0).abs() < 1e-15);
    }

    #[test]
    fn kernel_weights_are_cell_integrals_of_the_shifted_noise() {
        // Worked by hand from interval overlaps: uniform noise of half-width 1 cell
        // shifted by 0.25 cells covers [-0.75, 1.25] cells with density 1/2 per cell;
        // destination offset k covers [k - 1/2, k + 1/2].
        let noise = Noise::Uniform {
            half_width: 1.0_f64,
        };
        let kernel = LineKernel::new(&noise, 0.25, &Axis::<f64, 8>::new(0.0, 1.0).unwrap());
        let expected = [(-1, 0.125), (0, 0.5), (1, 0.375), (2, 0.0)];
        for (offset, weight) in expected {
            assert!((kernel.weight(offset) - weight).abs() < 1e-15, "{offset}");
        }
        let narrower = LineKernel::new(&noise, 0.25, &Axis::<f64, 8>::new(0.0, 0.5).unwrap());
        // Cells of 0.5: the noise covers [-1.75, 2.25] cells with density 1/4 per cell.
        let expected = [(-2, 0.0625), (-1, 0.25), (0, 0.25), (1, 0.25), (2, 0.1875)];
        for (offset, weight) in expected {
            assert!((narrower.weight(offset) - weight).abs() < 1e-15, "{offset}");
        }
    }

    #[test]
    fn split_shares_sum_to_one_and_keep_the_position() {
        let split = Split::at(3.3_f64);
        let (count, total, moment) =
            split
                .shares(10)
                .fold((0, 0.0, 0.0), |(count, total, moment), (cell, share)| {
                    (count + 1, total + share, moment + cell as f64 * share)
                });
        assert_eq!(count, 2);
        assert!((total - 1.0).abs() < 1e-15);
        assert!((moment - 3.3).abs() < 1e-12);
        assert_eq!(Split::at(-0.5_f64).shares(10).count(), 1);
    }
}
