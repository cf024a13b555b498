//! Angle arithmetic: wrapping to the half-open interval (-pi, pi].

use crate::Real;

/// Wraps an angle in radians to (-pi, pi].
///
/// `pi` itself stays `pi` and `-pi` maps to `pi`, so every direction has exactly one
/// representative. Non-finite input gives non-finite output (the callers test for it).
pub fn wrap_angle<T: Real>(angle: T) -> T {
    let two_pi = T::two_pi();
    let wrapped = angle - two_pi * ((angle - T::pi()) / two_pi).ceil();
    // Round-off in the product can land a hair outside the interval at its ends.
    if wrapped <= -T::pi() {
        wrapped + two_pi
    } else if wrapped > T::pi() {
        wrapped - two_pi
    } else {
        wrapped
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use core::f64::consts::PI;

    #[test]
    fn wrap_keeps_pi_and_maps_minus_pi_to_pi() {
        // The interval (-pi, pi] is the convention of the reading models (issue spec).
        assert_eq!(wrap_angle(PI), PI);
        assert_eq!(wrap_angle(-PI), PI);
        assert_eq!(wrap_angle(0.0_f64), 0.0);
    }

    #[test]
    fn wrap_removes_whole_turns() {
        for turns in -5..=5 {
            let angle = 0.3 + f64::from(turns) * 2.0 * PI;
            assert!((wrap_angle(angle) - 0.3).abs() < 1e-12, "turns {turns}");
        }
        assert!((wrap_angle(3.0 * PI / 2.0) + PI / 2.0).abs() < 1e-12);
        assert!((wrap_angle(-3.0 * PI / 2.0) - PI / 2.0).abs() < 1e-12);
        assert!((wrap_angle(3.5_f32) - (3.5 - 2.0 * core::f32::consts::PI)).abs() < 1e-6);
    }

    #[test]
    fn nan_propagates() {
        assert!(wrap_angle(f64::NAN).is_nan());
        assert!(!wrap_angle(f64::INFINITY).is_finite());
    }

    proptest::proptest! {
        #[test]
        fn wrapped_angle_is_in_range_and_same_direction(angle in -1e4_f64..1e4) {
            let wrapped = wrap_angle(angle);
            proptest::prop_assert!(wrapped > -PI && wrapped <= PI);
            proptest::prop_assert!((wrapped.sin() - angle.sin()).abs() < 1e-9);
            proptest::prop_assert!((wrapped.cos() - angle.cos()).abs() < 1e-9);
        }
    }
}
