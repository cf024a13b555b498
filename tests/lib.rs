//! Shared helpers for the end-to-end tests, and the estimators `build.rs` generates
//! from every demo spec, one module per spec, method and scalar type.
//!
//! The generated modules are compiled under this crate's lints (and the workspace's
//! `clippy -D warnings`), which is the check that generated code is warning-free.
#![deny(warnings, missing_docs)]

/// Includes `$OUT_DIR/<file>` as module `<name>`.
macro_rules! generated {
    ($($name:ident),* $(,)?) => {
        $(
            #[doc = concat!("Generated from the spec; see `", stringify!($name), ".rs` in `OUT_DIR`.")]
            pub mod $name {
                include!(concat!(env!("OUT_DIR"), "/", stringify!($name), ".rs"));
            }
        )*
    };
}

generated!(
    canal_ferry_ekf_f64,
    canal_ferry_ekf_f32,
    canal_ferry_ukf_f64,
    canal_ferry_kf_f64,
    canal_ferry_particle_f64,
    dock_grid_grid_f64,
    dock_grid_grid_f32,
    dock_grid_particle_f64,
    goods_lift_ekf_f64,
    goods_lift_ekf_f32,
    goods_lift_ukf_f64,
    goods_lift_kf_f64,
    marker_track_ekf_f64,
    marker_track_grid_f64,
    marker_track_grid_f32,
    marker_track_particle_f64,
    marker_track_particle_f32,
    pallet_robot_ekf_f64,
    pallet_robot_ekf_f32,
    pallet_robot_ukf_f64,
    rail_cart_ekf_f64,
    rail_cart_ekf_f32,
    rail_cart_ukf_f64,
    rail_cart_kf_f64,
    survey_launch_ekf_f64,
    survey_launch_ekf_f32,
    survey_launch_ukf_f64,
    every_function_ekf_f64,
    every_function_ekf_f32,
    every_function_ukf_f64,
    units_declared_ekf_f64,
    units_declared_ukf_f64,
    units_si_ekf_f64,
    units_si_ukf_f64,
);
