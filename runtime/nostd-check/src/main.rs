//! Freestanding program that runs an `f32`, fixed-size extended and unscented Kalman
//! filter, and a grid and a particle filter using fewer cells and particles than their
//! capacity, on the runtime and exits with status 0 only if the results are sane,
//! proving the runtime needs neither std nor a heap.
#![no_std]
#![no_main]

use nalgebra::{Matrix2, OMatrix, OVector, Vector1, Vector2, U0, U1, U2};
use reckon_runtime::grid::{
    Axis, Grid1, GridOptions, Motion, Noise, ReadingPrediction, ResidualLikelihood,
};
use reckon_runtime::particle::{ParticleFilter, ParticleOptions, Pcg32, SampledMotion};
use reckon_runtime::{KalmanFilter, MotionModel, ReadingModel, UnscentedParams, UnscentedWeights};

/// Constant-velocity track with a position reading.
struct Track;

impl MotionModel<f32, U2, U0> for Track {
    fn input_dim(&self) -> U0 {
        U0
    }
    fn transition(
        &self,
        x: &OVector<f32, U2>,
        _: &OVector<f32, U0>,
        dt: f32,
        x_next: &mut OVector<f32, U2>,
    ) {
        *x_next = Vector2::new(x[0] + dt * x[1], x[1]);
    }
    fn transition_jacobian(
        &self,
        _: &OVector<f32, U2>,
        _: &OVector<f32, U0>,
        dt: f32,
        f: &mut OMatrix<f32, U2, U2>,
    ) {
        *f = Matrix2::new(1.0, dt, 0.0, 1.0);
    }
    fn process_noise(
        &self,
        _: &OVector<f32, U2>,
        _: &OVector<f32, U0>,
        dt: f32,
        q: &mut OMatrix<f32, U2, U2>,
    ) {
        *q = Matrix2::new(dt * dt * dt / 3.0, dt * dt / 2.0, dt * dt / 2.0, dt) * 0.01;
    }
}

impl ReadingModel<f32, U2, U1> for Track {
    type Args = ();
    fn reading_dim(&self) -> U1 {
        U1
    }
    fn predict_reading(&self, x: &OVector<f32, U2>, _: &(), z_hat: &mut OVector<f32, U1>) {
        z_hat[0] = x[0];
    }
    fn reading_jacobian(&self, _: &OVector<f32, U2>, _: &(), h: &mut OMatrix<f32, U1, U2>) {
        h[(0, 0)] = 1.0;
    }
    fn reading_noise(&self, _: &OVector<f32, U2>, _: &(), r: &mut OMatrix<f32, U1, U1>) {
        r[0] = 0.25;
    }
}

/// Tracks a target moving at 2 m/s with both filters; true when both estimate the speed
/// within 0.1 m/s and reject a non-finite reading.
fn filters_work() -> bool {
    let Ok(mut extended) =
        KalmanFilter::new(Vector2::new(0.0_f32, 0.0), Matrix2::identity() * 10.0)
    else {
        return false;
    };
    let mut unscented = extended.clone();
    let Ok(weights) = UnscentedWeights::new(
        &UnscentedParams {
            alpha: 1.0,
            beta: 2.0,
            kappa: 1.0,
        },
        2,
    ) else {
        return false;
    };
    let none = OVector::<f32, U0>::zeros();
    for step in 1..=200 {
        let position = Vector1::new(2.0 * 0.1 * step as f32);
        let ok = extended.predict(&Track, &none, 0.1).is_ok()
            && extended.correct(&Track, &position, &(), Some(9.0)).is_ok()
            && unscented
                .predict_unscented(&Track, &none, 0.1, &weights)
                .is_ok()
            && unscented
                .correct_unscented(&Track, &position, &(), Some(9.0), &weights)
                .is_ok();
        if !ok {
            return false;
        }
    }
    let rejected = extended
        .correct(&Track, &Vector1::new(f32::NAN), &(), None)
        .is_err();
    let exponential = reckon_runtime::expm::expm(&Matrix2::new(0.0_f32, 1.0, 0.0, 0.0));
    rejected
        && (extended.state()[1] - 2.0).abs() < 0.1
        && (unscented.state()[1] - 2.0).abs() < 0.1
        && exponential.is_ok_and(|value| (value[(0, 1)] - 1.0).abs() < 1e-6)
}

/// A cart on a line driven by a measured speed: additive noise for the grid, the speed's
/// own noise drawn per particle for the particle filter; the reading is the position.
struct Cart;

impl Motion<f32, 1, 1> for Cart {
    fn transition(&self, x: &Vector1<f32>, u: &Vector1<f32>, dt: f32) -> Vector1<f32> {
        x + u * dt
    }
    fn noise(&self, _: &Vector1<f32>, dt: f32) -> [Noise<f32>; 1] {
        [Noise::Normal { std_dev: 0.1 * dt }]
    }
    fn translation(&self, u: &Vector1<f32>, dt: f32) -> Option<Vector1<f32>> {
        Some(u * dt)
    }
}

/// The particle filter's view of the cart: the speed is measured with normal noise.
struct NoisySpeedCart;

impl SampledMotion<f32, 1, 1> for NoisySpeedCart {
    fn check_noise(
        &self,
        _: &Vector1<f32>,
        _: f32,
    ) -> Result<(), reckon_runtime::grid::PredictError> {
        Ok(())
    }
    fn sample_transition(
        &self,
        x: &Vector1<f32>,
        u: &Vector1<f32>,
        dt: f32,
        rng: &mut Pcg32,
    ) -> Vector1<f32> {
        let speed = u[0] + rng.sample(&Noise::Normal { std_dev: 0.1 });
        x.map(|p| p + speed * dt)
    }
}

impl ReadingPrediction<f32, 1, 1> for Cart {
    fn predict_reading(&self, x: &Vector1<f32>) -> Vector1<f32> {
        *x
    }
    fn reading_noise(&self) -> [Noise<f32>; 1] {
        [Noise::Normal { std_dev: 0.2 }]
    }
}

/// Tracks a cart moving at 1 m/s from 5 m with a grid of 200 of 256 cells and 200 of
/// 256 particles; true when both end within 0.2 m of the cart.
fn bayes_filters_work() -> bool {
    let Ok(axis) = Axis::<f32, 256>::with_count(0.0, 0.1, 200) else {
        return false;
    };
    let start = Noise::Normal { std_dev: 0.5 };
    let Ok(mut grid) = Grid1::from_density(axis, 5.0, start, GridOptions::default()) else {
        return false;
    };
    let Ok(mut particles) = ParticleFilter::<f32, 1, 256>::from_noise_counted(
        200,
        Vector1::new(5.0),
        [start],
        Pcg32::new(7, 1),
        ParticleOptions::default(),
    ) else {
        return false;
    };
    let (speed, reading) = (Vector1::new(1.0), ResidualLikelihood(Cart));
    for step in 1..=20 {
        let position = Vector1::new(5.0 + 0.1 * step as f32);
        let ok = grid.predict(&Cart, &speed, 0.1).is_ok()
            && grid.correct(&reading, &position).is_ok()
            && particles.predict(&NoisySpeedCart, &speed, 0.1).is_ok()
            && particles.correct(&reading, &position).is_ok();
        if !ok {
            return false;
        }
    }
    (grid.mean() - 7.0).abs() < 0.2 && (particles.mean()[0] - 7.0).abs() < 0.2
}

/// Ends the process through the Linux `exit` system call (no C runtime is linked).
fn exit(status: i32) -> ! {
    #[cfg(all(target_os = "linux", target_arch = "x86_64"))]
    // SAFETY: system call 60 (`exit`) takes one integer argument and never returns.
    unsafe {
        core::arch::asm!("syscall", in("rax") 60, in("rdi") status, options(noreturn));
    }
    #[cfg(not(all(target_os = "linux", target_arch = "x86_64")))]
    {
        let _ = status;
        loop {}
    }
}

/// Entry point of the freestanding binary. The kernel enters with the stack 16-byte
/// aligned, whereas a C function expects the alignment a `call` leaves, so the entry
/// realigns and calls into Rust.
#[cfg(all(target_os = "linux", target_arch = "x86_64"))]
#[unsafe(naked)]
#[unsafe(no_mangle)]
pub extern "C" fn _start() -> ! {
    core::arch::naked_asm!("xor ebp, ebp", "and rsp, -16", "call {run}", "ud2", run = sym run)
}

/// Entry point on targets where the check only links.
#[cfg(not(all(target_os = "linux", target_arch = "x86_64")))]
#[unsafe(no_mangle)]
pub extern "C" fn _start() -> ! {
    run()
}

extern "C" fn run() -> ! {
    exit(if filters_work() && bayes_filters_work() {
        0
    } else {
        1
    })
}

#[panic_handler]
fn panic(_: &core::panic::PanicInfo) -> ! {
    exit(101)
}

/// Referenced by the precompiled `core` even with `panic = "abort"`; never called.
#[unsafe(no_mangle)]
pub extern "C" fn rust_eh_personality() {}

/// `memset` for the linker: on a hosted target the C library normally supplies it (firmware
/// targets get it from `compiler_builtins`). Volatile stores keep the compiler from
/// turning the loop back into a call to `memset`.
///
/// # Safety
/// `destination` must be valid for `count` byte writes.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn memset(destination: *mut u8, value: i32, count: usize) -> *mut u8 {
    for offset in 0..count {
        // SAFETY: the caller guarantees `destination..destination + count` is writable.
        unsafe { core::ptr::write_volatile(destination.add(offset), value as u8) };
    }
    destination
}

/// `memcpy` for the linker, for the same reason as [`memset`]: the grid and particle
/// filters copy their arrays.
///
/// # Safety
/// `source` must be valid for `count` byte reads, `destination` for `count` byte writes,
/// and the two must not overlap.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn memcpy(destination: *mut u8, source: *const u8, count: usize) -> *mut u8 {
    for offset in 0..count {
        // SAFETY: the caller guarantees both ranges are valid and disjoint.
        unsafe {
            core::ptr::write_volatile(
                destination.add(offset),
                core::ptr::read_volatile(source.add(offset)),
            )
        };
    }
    destination
}
