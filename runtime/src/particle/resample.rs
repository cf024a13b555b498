//! Systematic resampling: one uniform offset, equally spaced pointers into the
//! cumulative weights.

use nalgebra::RealField;

use crate::grid::lit;

/// Writes into each slot of `chosen` the index (into `weights`) of the particle that new
/// particle copies.
///
/// With `n = chosen.len()`, pointer `k` sits at `(k + offset) / n` of the total weight,
/// so particle `i` is chosen `floor(n w_i)` or `ceil(n w_i)` times (`w_i` its normalised
/// weight): the expected count with the least spread, and `O(n + weights.len())` work.
/// `offset` is a uniform draw from `[0, 1)`; the weights need not be normalised but must
/// be non-negative with a positive sum. Particles of zero weight are never chosen;
/// `chosen` is sorted. With no weights there is nothing to choose and `chosen` is left
/// as it is.
pub fn systematic_resample<T: RealField + Copy>(weights: &[T], offset: T, chosen: &mut [usize]) {
    let Some((&first, _)) = weights.split_first() else {
        return;
    };
    let total = weights.iter().fold(T::zero(), |sum, &w| sum + w);
    let spacing = total / lit(chosen.len() as f64);
    let mut index = 0;
    let mut cumulative = first;
    for (k, slot) in chosen.iter_mut().enumerate() {
        let pointer = (lit::<T>(k as f64) + offset) * spacing;
        // The pointer stays below `total`, which the cumulative sum reaches at the last
        // particle of positive weight (same summation order), so `index` never passes it.
        while pointer >= cumulative && index + 1 < weights.len() {
            index += 1;
            cumulative += weights[index];
        }
        *slot = index;
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::particle::Pcg32;

    #[test]
    fn counts_stay_within_one_of_the_expected_count() {
        // Systematic resampling gives each particle floor(N w) or ceil(N w) copies
        // (common practice, no source), whatever the offset.
        const N: usize = 10;
        let weights: [f64; N] = [0.31, 0.0, 0.05, 0.12, 0.0, 0.02, 0.2, 0.08, 0.17, 0.05];
        let mut rng = Pcg32::new(2024, 5);
        for offset in [0.0, 0.5, 0.999_999]
            .into_iter()
            .chain((0..50).map(|_| rng.unit_open::<f64>()))
        {
            let mut chosen = [0; N];
            systematic_resample(&weights, offset, &mut chosen);
            for (particle, &weight) in weights.iter().enumerate() {
                let count = chosen.iter().filter(|&&c| c == particle).count() as f64;
                let expected = N as f64 * weight;
                assert!(
                    count >= expected.floor() - 1e-9 && count <= expected.ceil() + 1e-9,
                    "offset {offset}: particle {particle} chosen {count} times, expected {expected}"
                );
            }
            assert!(chosen.windows(2).all(|pair| pair[0] <= pair[1]));
        }
    }

    #[test]
    fn a_worked_example() {
        // By hand: weights 0.5, 0.25, 0.125, 0.125 and offset 0.5 put the pointers at
        // 0.125, 0.375, 0.625, 0.875 of the cumulative 0.5, 0.75, 0.875, 1.
        let mut chosen = [0; 4];
        systematic_resample(&[0.5, 0.25, 0.125, 0.125_f64], 0.5, &mut chosen);
        assert_eq!(chosen, [0, 0, 1, 3]);
    }

    #[test]
    fn trailing_zero_weights_are_never_chosen() {
        let mut chosen = [0; 5];
        systematic_resample(&[0.1_f32, 0.3, 0.6, 0.0, 0.0], 0.999_99, &mut chosen);
        assert!(chosen.iter().all(|&c| c <= 2));
    }
}
