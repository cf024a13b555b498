//! The generated grid and particle estimators, end to end: the marker-track demo where
//! a Kalman filter locks onto the wrong marker pair and the whole-belief filters find
//! the trolley, agreement with the Kalman filter on a linear Gaussian model, a 2-D grid
//! with triangle and uniform noise, and refused steps that leave the belief untouched.

use reckon_runtime::grid::{CorrectError, Noise};
use reckon_runtime::particle::Pcg32;
use reckon_tests::{
    canal_ferry_kf_f64 as ferry_kf, canal_ferry_particle_f64 as ferry_particle,
    dock_grid_grid_f32 as dock_grid_f32, dock_grid_grid_f64 as dock_grid,
    dock_grid_particle_f64 as dock_particle, marker_track_ekf_f64 as marker_ekf,
    marker_track_grid_f32 as marker_grid_f32, marker_track_grid_f64 as marker_grid,
    marker_track_particle_f32 as marker_particle_f32, marker_track_particle_f64 as marker_particle,
};

fn normal(rng: &mut Pcg32, std_dev: f64) -> f64 {
    rng.sample(&Noise::Normal { std_dev })
}

/// One drive of the marker-track trolley: the truth and what the sensors report at
/// each 0.1 s step, drawn with the spec's noise (slip 1 cm per step, odometry
/// 0.02 m/s, marker phase 0.1). The marker detector reports at 2 Hz.
struct Drive {
    truth: Vec<f64>,
    speeds: Vec<f64>,
    readings: Vec<Option<[f64; 2]>>,
}

/// Motion steps per marker reading.
const STEPS_PER_READING: usize = 5;

const STEP: f64 = 0.1;

impl Drive {
    /// From `start` eastwards at 0.5 m/s for `steps` steps.
    fn east(start: f64, steps: usize, rng: &mut Pcg32) -> Drive {
        let mut position = start;
        let mut drive = Drive {
            truth: Vec::new(),
            speeds: Vec::new(),
            readings: Vec::new(),
        };
        for step in 0..steps {
            let speed = 0.5;
            drive.speeds.push(speed + normal(rng, 0.02));
            position += speed * STEP + normal(rng, 0.01);
            let phase = std::f64::consts::PI * position;
            drive.truth.push(position);
            let reading = [
                phase.cos() + normal(rng, 0.1),
                phase.sin() + normal(rng, 0.1),
            ];
            drive
                .readings
                .push((step % STEPS_PER_READING == STEPS_PER_READING - 1).then_some(reading));
        }
        drive
    }
}

/// Runs one estimator over a drive: `step(speed, reading)` predicts, and corrects
/// when a reading arrived.
fn follow(drive: &Drive, mut step: impl FnMut(f64, Option<[f64; 2]>)) {
    for (speed, reading) in drive.speeds.iter().zip(&drive.readings) {
        step(*speed, *reading);
    }
}

#[test]
fn grid_and_particle_find_the_trolley_where_the_kalman_filter_locks_onto_a_wrong_marker() {
    // The trolley starts near the west wall, unknown to the filters, and drives 37 m
    // east. Markers every 2 m look alike, so every marker pair fits the readings until
    // the copies of the belief further east are pushed past the east wall.
    let mut rng = Pcg32::new(20261202, 7);
    let runs = 12;
    let (mut particles_right, mut kalman_right) = (0, 0);
    for run in 0..runs {
        let start = 1.0 + 0.9 * rng.unit_open::<f64>();
        let drive = Drive::east(start, 740, &mut rng);
        let truth = *drive.truth.last().unwrap();
        let near = |lo: f64, hi: f64| (lo, hi);
        let (lo, hi) = near(truth - 0.25, truth + 0.25);

        let mut grid = marker_grid::Estimator::new().unwrap();
        follow(&drive, |speed, reading| {
            grid.predict(&marker_grid::Input { speed }, STEP).unwrap();
            if let Some([in_phase, quadrature]) = reading {
                grid.correct_marker(&marker_grid::MarkerReading {
                    in_phase,
                    quadrature,
                })
                .unwrap();
            }
        });
        let mass = grid.probability_in(
            &marker_grid::State { position: lo },
            &marker_grid::State { position: hi },
        );
        assert!(mass > 0.95, "run {run}: grid mass near the truth {mass}");

        // A particle filter whose particles have all left the tunnel refuses every
        // reading from then on (ZeroPosterior): it lost the true peak.
        let mut particles = marker_particle::Estimator::new(run).unwrap();
        let mut lost = false;
        follow(&drive, |speed, reading| {
            particles
                .predict(&marker_particle::Input { speed }, STEP)
                .unwrap();
            if let Some([in_phase, quadrature]) = reading {
                let reading = marker_particle::MarkerReading {
                    in_phase,
                    quadrature,
                };
                lost |= particles.correct_marker(&reading).is_err();
            }
        });
        let weight = particles.probability_in(
            &marker_particle::State { position: lo },
            &marker_particle::State { position: hi },
        );
        if !lost && weight > 0.9 {
            particles_right += 1;
        }

        let mut kalman = marker_ekf::Estimator::new().unwrap();
        follow(&drive, |speed, reading| {
            // A diverged Kalman filter may refuse steps; its final answer is what counts.
            let _ = kalman.predict(&marker_ekf::Input { speed }, STEP);
            if let Some([in_phase, quadrature]) = reading {
                let _ = kalman.correct_marker(&marker_ekf::MarkerReading {
                    in_phase,
                    quadrature,
                });
            }
        });
        if (kalman.state().position - truth).abs() < 0.5 {
            kalman_right += 1;
        }
    }
    // The particle filter holds the twenty look-alike peaks with a finite sample: as
    // resampling moves particles between peaks at random, the true peak can empty
    // before the wall removes the others (a known weakness, common practice, no
    // source). The grid keeps every cell and never loses it.
    assert!(
        particles_right >= runs - 3,
        "particles right in {particles_right} of {runs} runs"
    );
    // One Gaussian started at the tunnel's middle settles on whichever marker pair its
    // first corrections favour: right by chance in about one start in twenty.
    assert!(
        kalman_right <= 2,
        "the Kalman filter was right in {kalman_right} of {runs} runs"
    );
    eprintln!("marker track, {runs} runs: grid right in all, particles in {particles_right}, Kalman in {kalman_right}");
}

#[test]
fn single_precision_grid_and_particle_estimators_follow_their_double_twins() {
    let mut rng = Pcg32::new(5, 1);
    let drive = Drive::east(1.4, 740, &mut rng);
    let mut grid = marker_grid::Estimator::new().unwrap();
    let mut grid_f32 = marker_grid_f32::Estimator::new().unwrap();
    let mut particles_f32 = marker_particle_f32::Estimator::new(3).unwrap();
    follow(&drive, |speed, reading| {
        grid.predict(&marker_grid::Input { speed }, STEP).unwrap();
        let single = speed as f32;
        grid_f32
            .predict(&marker_grid_f32::Input { speed: single }, STEP as f32)
            .unwrap();
        particles_f32
            .predict(&marker_particle_f32::Input { speed: single }, STEP as f32)
            .unwrap();
        if let Some([in_phase, quadrature]) = reading {
            grid.correct_marker(&marker_grid::MarkerReading {
                in_phase,
                quadrature,
            })
            .unwrap();
            let (in_phase, quadrature) = (in_phase as f32, quadrature as f32);
            grid_f32
                .correct_marker(&marker_grid_f32::MarkerReading {
                    in_phase,
                    quadrature,
                })
                .unwrap();
            // This seed keeps the true peak (see the test above for when it does not).
            particles_f32
                .correct_marker(&marker_particle_f32::MarkerReading {
                    in_phase,
                    quadrature,
                })
                .unwrap();
        }
    });
    let truth = *drive.truth.last().unwrap();
    let mean = grid.state().position;
    let sigma = grid.std_dev().position;
    assert!(
        (mean - truth).abs() < 3.0 * sigma,
        "{mean} vs {truth} (sigma {sigma})"
    );
    // Single precision: the mean within a tenth of the belief's width of its twin's.
    let single = f64::from(grid_f32.state().position);
    assert!((single - mean).abs() < 0.1 * sigma, "{single} vs {mean}");
    let sampled = f64::from(particles_f32.state().position);
    assert!((sampled - truth).abs() < 0.25, "{sampled} vs {truth}");
}

#[test]
fn the_particle_estimator_agrees_with_the_kalman_filter_on_a_linear_gaussian_model() {
    // The canal ferry is linear with normal noise, so the Kalman filter's mean and
    // variance are the exact posterior (common practice, no source); the particle
    // filter must match them within its Monte Carlo error. Its white noise enters by
    // the Euler-Maruyama step and its motion by RK4, both exact to far below that
    // error over a 0.1 s step.
    let mut rng = Pcg32::new(42, 3);
    let mut kalman = ferry_kf::Estimator::new().unwrap();
    let mut particles = ferry_particle::Estimator::new(9).unwrap();
    let (dt, thrust) = (0.1, 0.3);
    let (mut distance, mut speed) = (0.0, 0.0);
    for step in 0..100 {
        speed += (thrust - speed / 8.0) * dt;
        distance += speed * dt;
        kalman.predict(&ferry_kf::Input { thrust }, dt).unwrap();
        particles
            .predict(&ferry_particle::Input { thrust }, dt)
            .unwrap();
        if step % 5 == 4 {
            // 1 kn = 1852/3600 m/s (NIST SP 811, B.8).
            let speed_over_ground =
                (speed + normal(&mut rng, 0.05 * 1852.0 / 3600.0)) * 3600.0 / 1852.0;
            let to_far_bank = 60.0 - distance + normal(&mut rng, 0.1);
            kalman
                .correct_sog(&ferry_kf::SogReading { speed_over_ground })
                .unwrap();
            kalman
                .correct_lidar(&ferry_kf::LidarReading { to_far_bank })
                .unwrap();
            particles
                .correct_sog(&ferry_particle::SogReading { speed_over_ground })
                .unwrap();
            particles
                .correct_lidar(&ferry_particle::LidarReading { to_far_bank })
                .unwrap();
        }
    }
    let effective = particles.effective_size();
    let exact = kalman.state().to_array();
    let sampled = particles.state().to_array();
    let exact_variance = kalman.covariance().diagonal();
    let sampled_variance = particles.covariance().diagonal();
    for k in 0..2 {
        // Standard error of a weighted mean: sigma / sqrt(ESS); of a variance:
        // sigma^2 sqrt(2 / ESS). Five of them, plus resampling's own noise within that.
        let error = (sampled[k] - exact[k]).abs();
        let allowed = 5.0 * (exact_variance[k] / effective).sqrt();
        assert!(
            error < allowed,
            "state {k}: mean {} vs {} (allowed {allowed})",
            sampled[k],
            exact[k]
        );
        let relative = (sampled_variance[k] / exact_variance[k] - 1.0).abs();
        let allowed = 5.0 * (2.0 / effective).sqrt();
        assert!(
            relative < allowed,
            "state {k}: variance {} vs {}",
            sampled_variance[k],
            exact_variance[k]
        );
    }
}

#[test]
fn the_2d_grid_with_triangle_and_uniform_noise_tracks_the_float() {
    let mut rng = Pcg32::new(11, 2);
    let mut grid = dock_grid::Estimator::new().unwrap();
    let mut grid_f32 = dock_grid_f32::Estimator::new().unwrap();
    let mut particles = dock_particle::Estimator::new(4).unwrap();
    let (mut east, mut north) = (5.0_f64, 3.0_f64);
    let (dt, current) = (0.5, 0.05);
    let mut sonar_refused = 0;
    for _ in 0..60 {
        east += current * dt + rng.sample(&Noise::Triangle { half_width: 0.04 });
        north += -0.05 * (north - 4.0) * dt + rng.sample(&Noise::Uniform { half_width: 0.02 });
        let range = east.hypot(north) + normal(&mut rng, 0.15);
        let to_far_wall = 8.0 - north + rng.sample(&Noise::Uniform { half_width: 0.15 });
        grid.predict(&dock_grid::Input { current }, dt).unwrap();
        grid.correct_beacon(&dock_grid::BeaconReading { range })
            .unwrap();
        grid.correct_sonar(&dock_grid::SonarReading { to_far_wall })
            .unwrap();
        grid_f32
            .predict(
                &dock_grid_f32::Input {
                    current: current as f32,
                },
                dt as f32,
            )
            .unwrap();
        grid_f32
            .correct_beacon(&dock_grid_f32::BeaconReading {
                range: range as f32,
            })
            .unwrap();
        grid_f32
            .correct_sonar(&dock_grid_f32::SonarReading {
                to_far_wall: to_far_wall as f32,
            })
            .unwrap();
        particles
            .predict(&dock_particle::Input { current }, dt)
            .unwrap();
        particles
            .correct_beacon(&dock_particle::BeaconReading { range })
            .unwrap();
        // The sonar's bounded noise can contradict every particle when the cloud lags
        // the truth by more than 15 cm: the runtime then refuses the reading (and keeps
        // the particles).
        match particles.correct_sonar(&dock_particle::SonarReading { to_far_wall }) {
            Ok(_) => {}
            Err(CorrectError::ZeroPosterior) => sonar_refused += 1,
            Err(other) => panic!("{other:?}"),
        }
    }
    assert!(
        sonar_refused < 15,
        "{sonar_refused} of 60 sonar readings contradicted every particle"
    );
    let (mean, sigma) = (grid.state(), grid.std_dev());
    assert!(
        (mean.east - east).abs() < 4.0 * sigma.east,
        "{mean:?} vs {east}"
    );
    assert!(
        (mean.north - north).abs() < 4.0 * sigma.north,
        "{mean:?} vs {north}"
    );
    // The sonar's uniform noise bounds north to within 15 cm of each reading; several
    // readings together pin it down tighter than the beacon's 15 cm alone.
    assert!(sigma.north < 0.1, "{sigma:?}");
    let single = grid_f32.state();
    assert!((f64::from(single.east) - mean.east).abs() < 0.1 * sigma.east);
    let sampled = particles.state();
    assert!(
        (sampled.east - mean.east).abs() < 3.0 * sigma.east,
        "{sampled:?} vs {mean:?}"
    );
    assert!(
        (sampled.north - mean.north).abs() < 3.0 * sigma.north,
        "{sampled:?} vs {mean:?}"
    );
}

#[test]
fn refused_steps_leave_the_belief_bit_identical() {
    let bits = |masses: &[f64]| masses.iter().map(|m| m.to_bits()).collect::<Vec<_>>();
    let mut grid = marker_grid::Estimator::new().unwrap();
    grid.correct_marker(&marker_grid::MarkerReading {
        in_phase: 1.0,
        quadrature: 0.0,
    })
    .unwrap();
    let before = bits(grid.belief().masses());
    for (speed, dt) in [
        (f64::NAN, 0.1),
        (0.5, 0.0),
        (0.5, -0.1),
        (0.5, f64::INFINITY),
    ] {
        assert!(grid.predict(&marker_grid::Input { speed }, dt).is_err());
    }
    for (in_phase, quadrature) in [(f64::NAN, 0.0), (0.0, f64::INFINITY)] {
        assert!(grid
            .correct_marker(&marker_grid::MarkerReading {
                in_phase,
                quadrature
            })
            .is_err());
    }
    let mut tuning = *grid.tuning();
    tuning.position_step_sigma = -0.01;
    grid.set_tuning(tuning);
    assert!(grid
        .predict(&marker_grid::Input { speed: 0.5 }, 0.1)
        .is_err());
    assert_eq!(bits(grid.belief().masses()), before);

    let mut particles = marker_particle::Estimator::new(1).unwrap();
    let snapshot = |p: &marker_particle::Estimator| {
        let filter = p.filter();
        let states: Vec<u64> = filter.particles().iter().map(|x| x[0].to_bits()).collect();
        (states, bits(filter.ln_weights()), filter.rng())
    };
    let before = snapshot(&particles);
    assert!(particles
        .predict(&marker_particle::Input { speed: f64::NAN }, 0.1)
        .is_err());
    assert!(particles
        .correct_marker(&marker_particle::MarkerReading {
            in_phase: f64::NAN,
            quadrature: 0.0
        })
        .is_err());
    let mut tuning = *particles.tuning();
    tuning.speed_sigma = f64::NAN;
    particles.set_tuning(tuning);
    assert!(particles
        .predict(&marker_particle::Input { speed: 0.5 }, 0.1)
        .is_err());
    assert_eq!(snapshot(&particles), before);
}

#[test]
fn the_generated_grid_is_the_interpreted_plan_on_the_same_runtime() {
    // The generated module and the simulator's interpreter adapters run the same plan
    // through the same runtime grid: their beliefs must agree cell by cell.
    use reckon::back::bayes::plan;
    use reckon::back::interp_bayes::{GridMotion, SensorLikelihood};
    use reckon::options::{EstimatorOptions, Method};
    use reckon_runtime::grid::{Axis, Grid1, GridOptions};
    use reckon_runtime::nalgebra::SVector;

    let text = include_str!("../../specs/marker_track.reckon");
    let model = reckon::check::check_source(text)
        .model
        .expect("the demo spec checks");
    let options = EstimatorOptions {
        method: Method::Grid,
        ..EstimatorOptions::default()
    };
    let plan = plan(&model, &options).expect("a grid plan");
    let motion = GridMotion::new(&plan, 1.0).expect("grid motion");
    let marker = SensorLikelihood::new(&plan, 0).expect("marker likelihood");
    let mut interpreted = Grid1::<f64, 800>::from_density(
        Axis::new(0.0, 0.05).unwrap(),
        20.0,
        Noise::Uniform { half_width: 20.0 },
        GridOptions::default(),
    )
    .unwrap();
    let mut generated = marker_grid::Estimator::new().unwrap();

    let mut rng = Pcg32::new(3, 9);
    let drive = Drive::east(1.7, 300, &mut rng);
    let nothing = SVector::<f64, 0>::zeros();
    follow(&drive, |speed, reading| {
        generated
            .predict(&marker_grid::Input { speed }, STEP)
            .unwrap();
        interpreted
            .predict(&motion.at(&[speed]), &nothing, STEP)
            .unwrap();
        if let Some([in_phase, quadrature]) = reading {
            generated
                .correct_marker(&marker_grid::MarkerReading {
                    in_phase,
                    quadrature,
                })
                .unwrap();
            let z = [in_phase, quadrature];
            interpreted
                .correct(&marker.reading(&z, &[]), &nothing)
                .unwrap();
        }
    });
    let worst = generated
        .belief()
        .masses()
        .iter()
        .zip(interpreted.masses())
        .map(|(g, i)| (g - i).abs())
        .fold(0.0, f64::max);
    assert!(worst < 1e-12, "largest cell difference {worst}");
}
