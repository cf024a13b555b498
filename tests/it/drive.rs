//! A uniform handle on the generated estimators, so the endurance and fault tests
//! drive every module with the same code: values cross as `f64` in the units the
//! spec declares, and the raw bits of state and covariance are available for
//! exact before/after comparisons.

use reckon_runtime::Health;

/// One generated estimator behind a uniform, object-safe interface.
pub trait Filter {
    /// Predicts over `dt` seconds; `Err` carries the runtime's reason.
    fn predict(&mut self, input: &[f64], dt: f64) -> Result<(), String>;
    /// Corrects with `sensor`; on success returns the innovation covariance's
    /// diagonal (SI), on failure the runtime's reason.
    fn correct(&mut self, sensor: usize, reading: &[f64], args: &[f64])
        -> Result<Vec<f64>, String>;
    /// The state mean (SI).
    fn state(&self) -> Vec<f64>;
    /// The covariance, row-major (SI).
    fn covariance(&self) -> Vec<f64>;
    /// The exact bits of every state and covariance entry in the native scalar.
    fn bits(&self) -> Vec<u64>;
    /// The health counters.
    fn health(&self) -> Health;
}

/// Converts between `f64` and an estimator's scalar.
pub trait Scalar: Copy {
    fn from_f64(value: f64) -> Self;
    fn to_f64(self) -> f64;
    fn to_bits64(self) -> u64;
}

impl Scalar for f64 {
    fn from_f64(value: f64) -> f64 {
        value
    }
    fn to_f64(self) -> f64 {
        self
    }
    fn to_bits64(self) -> u64 {
        self.to_bits()
    }
}

impl Scalar for f32 {
    fn from_f64(value: f64) -> f32 {
        value as f32
    }
    fn to_f64(self) -> f64 {
        f64::from(self)
    }
    fn to_bits64(self) -> u64 {
        u64::from(self.to_bits())
    }
}

/// A fixed array of scalars from a slice; a length mismatch is a bug in the test.
pub fn array<T: Scalar, const N: usize>(values: &[f64]) -> [T; N] {
    assert_eq!(values.len(), N, "value count");
    std::array::from_fn(|i| T::from_f64(values[i]))
}

/// Implements [`Filter`] for a generated module; the sensor list maps each sensor
/// index to its correction method, reading type and argument names.
macro_rules! filter {
    ($name:ident, $module:ident, $t:ty, {
        $($index:literal => $method:ident($reading:ident $(, $arg:ident)*)),* $(,)?
    }) => {
        /// The generated module behind [`Filter`].
        pub struct $name(reckon_tests::$module::Estimator);

        impl $name {
            /// The estimator from the spec's `initial` block.
            pub fn boxed() -> Box<dyn Filter> {
                use reckon_tests::$module as m;
                Box::new($name(m::Estimator::new().expect("the spec's initial block is valid")))
            }
        }

        impl Filter for $name {
            fn predict(&mut self, input: &[f64], dt: f64) -> Result<(), String> {
                use reckon_tests::$module as m;
                self.0
                    .predict(&m::Input::from_array(array(input)), <$t>::from_f64(dt))
                    .map_err(|e| format!("{e:?}"))
            }

            fn correct(&mut self, sensor: usize, reading: &[f64], args: &[f64])
                -> Result<Vec<f64>, String> {
                use reckon_tests::$module as m;
                match sensor {
                    $($index => {
                        let [$($arg),*]: [$t; { let names: &[&str] = &[$(stringify!($arg)),*]; names.len() }] = array(args);
                        self.0
                            .$method(&m::$reading::from_array(array(reading)) $(, $arg)*)
                            .map(|innovation| innovation.covariance.diagonal().iter().map(|v| v.to_f64()).collect())
                            .map_err(|e| format!("{e:?}"))
                    })*
                    other => panic!("no sensor {other}"),
                }
            }

            fn state(&self) -> Vec<f64> {
                self.0.state().to_array().iter().map(|v| v.to_f64()).collect()
            }

            fn covariance(&self) -> Vec<f64> {
                // nalgebra stores column-major; the covariance is symmetric, but the
                // symmetry test needs the true layout, so transpose into rows.
                self.0.covariance().transpose().iter().map(|v| v.to_f64()).collect()
            }

            fn bits(&self) -> Vec<u64> {
                let state = self.0.state().to_array();
                state
                    .iter()
                    .chain(self.0.covariance().iter())
                    .map(|v| v.to_bits64())
                    .collect()
            }

            fn health(&self) -> Health {
                *self.0.health()
            }
        }
    };
}

filter!(RailCartEkf32, rail_cart_ekf_f32, f32, {
    0 => correct_laser(LaserReading),
    1 => correct_encoder(EncoderReading),
});
filter!(RailCartEkf64, rail_cart_ekf_f64, f64, {
    0 => correct_laser(LaserReading),
    1 => correct_encoder(EncoderReading),
});
filter!(RailCartKf64, rail_cart_kf_f64, f64, {
    0 => correct_laser(LaserReading),
    1 => correct_encoder(EncoderReading),
});
filter!(RailCartUkf64, rail_cart_ukf_f64, f64, {
    0 => correct_laser(LaserReading),
    1 => correct_encoder(EncoderReading),
});
filter!(CanalFerryEkf32, canal_ferry_ekf_f32, f32, {
    0 => correct_sog(SogReading),
    1 => correct_lidar(LidarReading),
});
filter!(CanalFerryEkf64, canal_ferry_ekf_f64, f64, {
    0 => correct_sog(SogReading),
    1 => correct_lidar(LidarReading),
});
filter!(CanalFerryKf64, canal_ferry_kf_f64, f64, {
    0 => correct_sog(SogReading),
    1 => correct_lidar(LidarReading),
});
filter!(CanalFerryUkf64, canal_ferry_ukf_f64, f64, {
    0 => correct_sog(SogReading),
    1 => correct_lidar(LidarReading),
});
filter!(GoodsLiftEkf32, goods_lift_ekf_f32, f32, {
    0 => correct_barometer(BarometerReading),
    1 => correct_pit_laser(PitLaserReading),
});
filter!(GoodsLiftEkf64, goods_lift_ekf_f64, f64, {
    0 => correct_barometer(BarometerReading),
    1 => correct_pit_laser(PitLaserReading),
});
filter!(GoodsLiftKf64, goods_lift_kf_f64, f64, {
    0 => correct_barometer(BarometerReading),
    1 => correct_pit_laser(PitLaserReading),
});
filter!(GoodsLiftUkf64, goods_lift_ukf_f64, f64, {
    0 => correct_barometer(BarometerReading),
    1 => correct_pit_laser(PitLaserReading),
});
filter!(PalletRobotEkf32, pallet_robot_ekf_f32, f32, {
    0 => correct_wheels(WheelsReading),
    1 => correct_gyro(GyroReading),
    2 => correct_floor_tag(FloorTagReading, tag_east, tag_north),
});
filter!(PalletRobotEkf64, pallet_robot_ekf_f64, f64, {
    0 => correct_wheels(WheelsReading),
    1 => correct_gyro(GyroReading),
    2 => correct_floor_tag(FloorTagReading, tag_east, tag_north),
});
filter!(PalletRobotUkf64, pallet_robot_ukf_f64, f64, {
    0 => correct_wheels(WheelsReading),
    1 => correct_gyro(GyroReading),
    2 => correct_floor_tag(FloorTagReading, tag_east, tag_north),
});
filter!(SurveyLaunchEkf32, survey_launch_ekf_f32, f32, {
    0 => correct_transponder(TransponderReading, beacon_east, beacon_north),
    1 => correct_compass(CompassReading),
    2 => correct_log(LogReading),
    3 => correct_gyro(GyroReading),
});
filter!(SurveyLaunchEkf64, survey_launch_ekf_f64, f64, {
    0 => correct_transponder(TransponderReading, beacon_east, beacon_north),
    1 => correct_compass(CompassReading),
    2 => correct_log(LogReading),
    3 => correct_gyro(GyroReading),
});
filter!(SurveyLaunchUkf64, survey_launch_ukf_f64, f64, {
    0 => correct_transponder(TransponderReading, beacon_east, beacon_north),
    1 => correct_compass(CompassReading),
    2 => correct_log(LogReading),
    3 => correct_gyro(GyroReading),
});
