//! Compiler cost: checking and generating (check, lower, emit, pretty-print) an
//! extended Kalman filter in f64 for every demo spec, and for synthetic specs of 6, 12,
//! 24 and 48 states, to show how the cost grows with the model. Before timing, prints
//! one line per spec with the states, sensors, IR nodes and generated lines, so the
//! times can be read against the size of what was compiled.
//!
//! `cargo bench -p reckon --bench compile` (`-- --test` runs each once).

use std::fmt::Write as _;
use std::hint::black_box;

use criterion::{BenchmarkId, Criterion};
use reckon::back::rust::{generate, lower_options};
use reckon::check::check_source;
use reckon::options::EstimatorOptions;

/// States per synthetic vehicle.
const VEHICLE_STATES: usize = 6;

/// A synthetic spec of `vehicles` differential-drive robots (six states each: position,
/// heading, speed, turn rate, gyro bias) with nonlinear motion, a gyro and a floor-tag
/// camera per robot, and a range between consecutive robots that couples them. Every
/// robot adds the same expressions, so the model's size grows linearly with the state.
fn synthetic_spec(vehicles: usize) -> String {
    let mut spec = format!(
        "/// {vehicles} robots tracked together, for the compiler benchmark.\nmodel synthetic_{}\n\nstate {{\n",
        vehicles * VEHICLE_STATES
    );
    let each = |spec: &mut String, line: &dyn Fn(usize) -> String| {
        for i in 0..vehicles {
            spec.push_str(&line(i));
        }
    };
    each(&mut spec, &|i| {
        format!(
            "  east_{i} : m\n  north_{i} : m\n  heading_{i} : rad wrap\n  speed_{i} : m/s\n  yaw_rate_{i} : rad/s\n  bias_{i} : rad/s\n"
        )
    });
    spec.push_str("}\n\nmotion continuous {\n");
    each(&mut spec, &|i| {
        format!(
            "  east_{i}' = speed_{i} * cos(heading_{i})\n  north_{i}' = speed_{i} * sin(heading_{i})\n  heading_{i}' = yaw_rate_{i}\n"
        )
    });
    spec.push_str("}\n\nprocess {\n");
    each(&mut spec, &|i| {
        format!(
            "  speed_{i} ~ white(0.2 m/s^2/sqrt(Hz))\n  yaw_rate_{i} ~ white(0.3 rad/s^2/sqrt(Hz))\n  bias_{i} ~ white(4 deg/h/sqrt(h))\n"
        )
    });
    spec.push_str("}\n\n");
    each(&mut spec, &|i| {
        let mut sensors = format!(
            "sensor gyro_{i} {{\n  rate : deg/s = yaw_rate_{i} + bias_{i}\n  noise ~ normal(0.1 deg/s)\n}}\n\n\
             sensor tag_{i}(tag_east: m, tag_north: m) {{\n  \
             forward : mm = cos(heading_{i}) * (tag_east - east_{i}) + sin(heading_{i}) * (tag_north - north_{i})\n  \
             left : mm = cos(heading_{i}) * (tag_north - north_{i}) - sin(heading_{i}) * (tag_east - east_{i})\n  \
             noise ~ normal(5 mm)\n}}\n\n"
        );
        if i + 1 < vehicles {
            let next = i + 1;
            let _ = write!(
                sensors,
                "sensor link_{i} {{\n  range : m = hypot(east_{next} - east_{i}, north_{next} - north_{i})\n  noise ~ normal(5 cm)\n  gate 99 %\n}}\n\n"
            );
        }
        sensors
    });
    spec.push_str("initial {\n");
    each(&mut spec, &|i| {
        format!(
            "  east_{i} ~ normal({i} m, 0.5 m)\n  north_{i} ~ normal(0 m, 0.5 m)\n  heading_{i} ~ normal(0 deg, 10 deg)\n  \
             speed_{i} ~ normal(0 m/s, 0.1 m/s)\n  yaw_rate_{i} ~ normal(0 deg/s, 1 deg/s)\n  bias_{i} ~ normal(0 deg/s, 0.5 deg/s)\n"
        )
    });
    spec.push_str("}\n");
    spec
}

/// A spec to compile: name, path (for the generated header) and text.
struct Subject {
    name: String,
    path: String,
    text: String,
}

fn subjects() -> Vec<Subject> {
    let specs = concat!(env!("CARGO_MANIFEST_DIR"), "/../specs");
    let mut subjects: Vec<Subject> = std::fs::read_dir(specs)
        .expect("the demo specs folder")
        .flatten()
        .map(|entry| entry.path())
        .filter(|path| path.extension().is_some_and(|ext| ext == "reckon"))
        .map(|path| Subject {
            name: path
                .file_stem()
                .map(|stem| stem.to_string_lossy().into_owned())
                .unwrap_or_default(),
            text: std::fs::read_to_string(&path).expect("a readable demo spec"),
            path: path.to_string_lossy().into_owned(),
        })
        .collect();
    subjects.sort_by(|a, b| a.name.cmp(&b.name));
    for states in [6, 12, 24, 48] {
        subjects.push(Subject {
            name: format!("synthetic_{states}"),
            path: format!("synthetic_{states}.reckon"),
            text: synthetic_spec(states / VEHICLE_STATES),
        });
    }
    subjects
}

/// Prints the size of each subject; fails if a synthetic spec does not check clean.
/// Returns the subjects an extended Kalman filter can be generated for.
fn describe(subjects: Vec<Subject>) -> Vec<Subject> {
    let options = EstimatorOptions::default();
    println!("spec | states | sensors | IR nodes | generated lines");
    subjects
        .into_iter()
        .filter(|subject| {
            let checked = check_source(&subject.text);
            let synthetic = subject.name.starts_with("synthetic");
            assert!(
                !synthetic || checked.diagnostics.is_empty(),
                "{} does not check clean: {:?}",
                subject.name,
                checked.diagnostics
            );
            let Some(model) = checked.model else {
                return false;
            };
            let Ok(generated) = generate(&subject.path, &subject.text, &options) else {
                // Grid and particle specs have no Kalman variant yet.
                println!("{} | (not a Kalman spec) | | |", subject.name);
                return false;
            };
            let nodes = reckon::ir::lower(&model, &lower_options(&options))
                .map(|lowered| lowered.arena.len())
                .unwrap_or_default();
            let report = generated.report;
            println!(
                "{} | {} | {} | {nodes} | {}",
                subject.name, report.states, report.sensors, report.lines
            );
            true
        })
        .collect()
}

fn main() {
    let subjects = describe(subjects());
    let options = EstimatorOptions::default();
    let mut criterion = Criterion::default().configure_from_args();
    let mut group = criterion.benchmark_group("compile");
    for subject in &subjects {
        group.bench_with_input(BenchmarkId::new("check", &subject.name), subject, |b, s| {
            b.iter(|| check_source(black_box(&s.text)))
        });
        group.bench_with_input(
            BenchmarkId::new("check_and_generate", &subject.name),
            subject,
            |b, s| b.iter(|| generate(&s.path, black_box(&s.text), &options)),
        );
    }
    group.finish();
    criterion.final_summary();
}
