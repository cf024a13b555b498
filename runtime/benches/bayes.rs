//! Cost of one predict + correct step of the grid and particle filters: a narrow and a
//! wide belief on the same large grid (the grid's cost should follow the belief's
//! support), particle filters of two sizes, and each using a tenth of a ten times larger
//! capacity (what the capacity's array copies cost on top).

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion};
use nalgebra::{SVector, Vector1};
use reckon_runtime::grid::{
    Axis, Grid1, GridOptions, Motion, Noise, ReadingPrediction, ResidualLikelihood,
};
use reckon_runtime::particle::{ParticleFilter, ParticleOptions, Pcg32};
use std::hint::black_box;

/// `x_next = x + u dt`, normal motion noise; `translation` picks the grid's kernel shift.
struct Cart {
    translation: bool,
}

impl Motion<f64, 1, 1> for Cart {
    fn transition(&self, x: &SVector<f64, 1>, u: &SVector<f64, 1>, dt: f64) -> SVector<f64, 1> {
        x + u * dt
    }
    fn noise(&self, _: &SVector<f64, 1>, _: f64) -> [Noise<f64>; 1] {
        [Noise::Normal { std_dev: 0.05 }]
    }
    fn translation(&self, u: &SVector<f64, 1>, dt: f64) -> Option<SVector<f64, 1>> {
        self.translation.then(|| u * dt)
    }
}

struct Position;

impl ReadingPrediction<f64, 1, 1> for Position {
    fn predict_reading(&self, x: &SVector<f64, 1>) -> SVector<f64, 1> {
        *x
    }
    fn reading_noise(&self) -> [Noise<f64>; 1] {
        [Noise::Normal { std_dev: 0.1 }]
    }
}

/// One step on a grid of `CELLS` cells of 1 cm starting at 0 (stored in arrays of
/// `CAPACITY`), belief centred at 5 m: a narrow belief costs about the same whatever the
/// grid's size, a wide one follows the cells it covers.
fn grid_step<const CELLS: usize, const CAPACITY: usize>(c: &mut Criterion) {
    let axis = Axis::<f64, CAPACITY>::with_count(0.0, 0.01, CELLS).expect("valid axis");
    let reading = ResidualLikelihood(Position);
    let mut group = c.benchmark_group(format!("grid1_{CELLS}_of_{CAPACITY}_cells_step"));
    for (label, spread) in [("narrow_sd_0.1m", 0.1), ("wide_sd_2m", 2.0)] {
        for translation in [true, false] {
            let start = Grid1::from_density(
                axis,
                5.0,
                Noise::Normal { std_dev: spread },
                GridOptions::default(),
            )
            .expect("valid prior");
            let motion = Cart { translation };
            let path = if translation { "translate" } else { "push" };
            group.bench_function(BenchmarkId::new(label, path), |b| {
                b.iter_batched_ref(
                    || start.clone(),
                    |grid| {
                        grid.predict(&motion, &Vector1::new(0.3), 1.0)
                            .expect("on grid");
                        grid.correct(&reading, &Vector1::new(5.3))
                            .expect("consistent");
                        black_box(grid.mean())
                    },
                    criterion::BatchSize::LargeInput,
                )
            });
        }
    }
    group.finish();
}

fn particle_step<const N: usize, const CAPACITY: usize>(c: &mut Criterion) {
    let start = ParticleFilter::<f64, 1, CAPACITY>::from_noise_counted(
        N,
        Vector1::new(50.0),
        [Noise::Normal { std_dev: 1.0 }],
        Pcg32::new(1, 1),
        ParticleOptions::default(),
    )
    .expect("valid prior");
    let motion = Cart { translation: false };
    let reading = ResidualLikelihood(Position);
    c.bench_function(&format!("particle1_{N}_of_{CAPACITY}_step"), |b| {
        b.iter_batched_ref(
            || start.clone(),
            |filter| {
                filter
                    .predict(&motion, &Vector1::new(0.3), 1.0)
                    .expect("finite");
                filter
                    .correct(&reading, &Vector1::new(50.3))
                    .expect("consistent");
                black_box(filter.mean())
            },
            criterion::BatchSize::LargeInput,
        )
    });
}

criterion_group!(
    benches,
    grid_step::<1000, 1000>,
    grid_step::<10000, 10000>,
    grid_step::<1000, 10000>,
    particle_step::<1000, 1000>,
    particle_step::<10000, 10000>,
    particle_step::<1000, 10000>
);
criterion_main!(benches);
