//! Generated estimator modules in a `#![no_std]` crate that has no allocator: if any
//! of them used `std`, `alloc` or a warning-producing construct, this would not build.
#![no_std]
#![deny(warnings, missing_docs)]

/// Differential-drive robot, extended Kalman filter in `f32`.
pub mod pallet_robot {
    include!(concat!(env!("OUT_DIR"), "/pallet_robot_ekf_f32.rs"));
}

/// Survey launch with range/bearing transponders, unscented filter in `f32`.
pub mod survey_launch {
    include!(concat!(env!("OUT_DIR"), "/survey_launch_ukf_f32.rs"));
}

/// Canal ferry: linear, with the run-time matrix exponential.
pub mod canal_ferry {
    include!(concat!(env!("OUT_DIR"), "/canal_ferry_kf_f64.rs"));
}

/// Inspection trolley between identical markers, 1-D grid filter in `f32`.
pub mod marker_track_grid {
    include!(concat!(env!("OUT_DIR"), "/marker_track_grid_f32.rs"));
}

/// Float in a dock basin, 2-D grid filter in `f32`.
pub mod dock_grid {
    include!(concat!(env!("OUT_DIR"), "/dock_grid_grid_f32.rs"));
}

/// Inspection trolley, particle filter in `f32`.
pub mod marker_track_particle {
    include!(concat!(env!("OUT_DIR"), "/marker_track_particle_f32.rs"));
}
