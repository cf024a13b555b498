//! Freestanding program that runs an `f32`, fixed-size extended and unscented Kalman
//! filter on the runtime and exits with status 0 only if the results are sane, proving
//! the runtime needs neither std nor a heap.
#![no_std]
#![no_main]

use nalgebra::{Matrix2, OMatrix, OVector, Vector1, Vector2, U0, U1, U2};
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
    exit(if filters_work() { 0 } else { 1 })
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
