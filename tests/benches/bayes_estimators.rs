//! Cost of one step (predict, then correct) of the generated grid and particle
//! estimators: the marker track's 1-D grid (800 cells) in `f64` and `f32`, its particle
//! filter (4000 particles), and the 2-D dock grid (120 x 80 cells). Each is measured on
//! a wide belief (the marker track's start: a peak between every marker pair; the dock
//! grid's broad prior) and on a narrow one (after the drive that collapses it), since a
//! grid step costs in proportion to the cells the belief covers.

use criterion::{BatchSize, Criterion};
use reckon_tests::{
    dock_grid_grid_f64 as dock, marker_track_grid_f32 as grid_f32, marker_track_grid_f64 as grid,
    marker_track_particle_f64 as particle,
};

/// The marker readings of a trolley at `position` (noise-free: the cost does not depend
/// on the noise).
fn marker(position: f64) -> (f64, f64) {
    let phase = std::f64::consts::PI * position;
    (phase.cos(), phase.sin())
}

/// Drives an estimator from 1.3 m to about 38 m at 0.5 m/s with a reading every 0.5 s,
/// the drive that leaves one peak.
fn collapse(mut step: impl FnMut(f64, Option<(f64, f64)>)) {
    let mut position = 1.3;
    for k in 0..735 {
        position += 0.05;
        step(0.5, (k % 5 == 4).then(|| marker(position)));
    }
}

fn bench_marker_track(c: &mut Criterion) {
    let wide = grid::Estimator::new().expect("valid prior");
    let mut narrow = wide.clone();
    collapse(|speed, reading| {
        narrow.predict(&grid::Input { speed }, 0.1).expect("step");
        if let Some((in_phase, quadrature)) = reading {
            narrow
                .correct_marker(&grid::MarkerReading {
                    in_phase,
                    quadrature,
                })
                .expect("reading");
        }
    });
    let (in_phase, quadrature) = marker(38.05);
    let mut group = c.benchmark_group("marker_track_grid_f64_800_cells");
    for (name, start) in [("wide", &wide), ("narrow", &narrow)] {
        group.bench_function(name, |b| {
            b.iter_batched(
                || start.clone(),
                |mut estimator| {
                    estimator.predict(&grid::Input { speed: 0.5 }, 0.1).ok();
                    estimator
                        .correct_marker(&grid::MarkerReading {
                            in_phase,
                            quadrature,
                        })
                        .ok();
                    estimator
                },
                BatchSize::SmallInput,
            )
        });
    }
    group.finish();

    let wide = grid_f32::Estimator::new().expect("valid prior");
    let mut group = c.benchmark_group("marker_track_grid_f32_800_cells");
    group.bench_function("wide", |b| {
        b.iter_batched(
            || wide.clone(),
            |mut estimator| {
                estimator.predict(&grid_f32::Input { speed: 0.5 }, 0.1).ok();
                estimator
                    .correct_marker(&grid_f32::MarkerReading {
                        in_phase: in_phase as f32,
                        quadrature: quadrature as f32,
                    })
                    .ok();
                estimator
            },
            BatchSize::SmallInput,
        )
    });
    group.finish();

    let wide = particle::Estimator::new(1).expect("valid prior");
    let mut narrow = wide.clone();
    collapse(|speed, reading| {
        narrow
            .predict(&particle::Input { speed }, 0.1)
            .expect("step");
        if let Some((in_phase, quadrature)) = reading {
            // A lost peak shows as refused readings; the cost is measured either way.
            narrow
                .correct_marker(&particle::MarkerReading {
                    in_phase,
                    quadrature,
                })
                .ok();
        }
    });
    let mut group = c.benchmark_group(format!("marker_track_particle_f64_{}", particle::PARTICLES));
    for (name, start) in [("wide", &wide), ("narrow", &narrow)] {
        group.bench_function(name, |b| {
            b.iter_batched(
                || start.clone(),
                |mut estimator| {
                    estimator.predict(&particle::Input { speed: 0.5 }, 0.1).ok();
                    estimator
                        .correct_marker(&particle::MarkerReading {
                            in_phase,
                            quadrature,
                        })
                        .ok();
                    estimator
                },
                BatchSize::SmallInput,
            )
        });
    }
    group.finish();
}

fn bench_dock_grid(c: &mut Criterion) {
    let start = dock::Estimator::new().expect("valid prior");
    let mut group = c.benchmark_group(format!(
        "dock_grid_f64_{}x{}_cells",
        dock::EAST_CELLS,
        dock::NORTH_CELLS
    ));
    group.bench_function("wide", |b| {
        b.iter_batched(
            || start.clone(),
            |mut estimator| {
                estimator.predict(&dock::Input { current: 0.05 }, 0.5).ok();
                estimator
                    .correct_beacon(&dock::BeaconReading { range: 7.2 })
                    .ok();
                estimator
            },
            BatchSize::LargeInput,
        )
    });
    group.finish();
}

fn main() {
    let mut criterion = Criterion::default().configure_from_args();
    bench_marker_track(&mut criterion);
    bench_dock_grid(&mut criterion);
    criterion.final_summary();
}
