//! Simulator tests on the demo specs in `specs/`: consistency of a correctly tuned
//! filter and failure of a mistuned one, reproducibility, scenario diagnostics and
//! the plots.

use std::path::{Path, PathBuf};

use super::*;
use crate::project::parse_project;

fn repository() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("..")
}

fn scenario(toml: &str) -> Scenario {
    let project = parse_project(toml).expect("valid project text");
    project.scenarios.into_iter().next().expect("one scenario")
}

fn quiet(_: usize, _: usize) {}

fn simulate(toml: &str) -> SimReport {
    run_scenario(&repository(), &scenario(toml), &quiet).expect("scenario runs")
}

/// The linear rail cart with a laser at 10 Hz and the encoder at 20 Hz, 100 runs.
fn rail_cart(runs: usize, seed: u64, noise_scale: f64) -> String {
    format!(
        r#"
        [[scenario]]
        name = "rail_cart"
        spec = "specs/rail_cart.reckon"
        method = "kf"
        duration = "4 s"
        step = "20 ms"
        runs = {runs}
        seed = {seed}
        process_noise_scale = {noise_scale}
        inputs = {{ accel = [{{ from = "0 s", value = "0.3 m/s^2" }}, {{ from = "2 s", value = "-0.3 m/s^2" }}] }}

        [[scenario.sensor]]
        name = "laser"
        rate = "10 Hz"

        [[scenario.sensor]]
        name = "encoder"
        rate = "20 Hz"
        "#
    )
}

/// Averaged NEES over 100 runs with the 95% band of Bar-Shalom, Li & Kirubarajan
/// 2001, sec. 5.4: the correctly specified filter stays inside at >= 90% of the
/// steps; with its process-noise covariance 10x too small it does not, and its
/// NEES lies above the band (an optimistic filter).
#[test]
fn a_correct_filter_passes_the_nees_band_and_a_mistuned_one_fails_it() {
    let good = simulate(&rail_cart(100, 11, 1.0));
    assert!(good.nees.inside >= 0.9, "{}", good.summary_text());
    assert_eq!(good.nees.verdict, Verdict::Consistent);
    assert_eq!(good.rejected, 0);
    for sensor in &good.sensors {
        let nis = sensor.nis.as_ref().expect("a Kalman filter has a NIS");
        assert!(nis.inside >= 0.85, "{}", good.summary_text());
    }
    let bad = simulate(&rail_cart(100, 11, 0.1));
    assert!(bad.nees.inside < 0.9, "{}", bad.summary_text());
    assert_eq!(bad.nees.verdict, Verdict::Optimistic);
}

#[test]
fn same_seed_same_numbers_different_seed_different_numbers() {
    let first = simulate(&rail_cart(6, 5, 1.0));
    let again = simulate(&rail_cart(6, 5, 1.0));
    assert_eq!(first.nees.mean, again.nees.mean);
    assert_eq!(first.sample, again.sample);
    assert_eq!(first.sensors, again.sensors);
    let other = simulate(&rail_cart(6, 6, 1.0));
    assert_ne!(first.nees.mean, other.nees.mean);
    assert_ne!(first.sample.truth, other.sample.truth);
}

#[test]
fn readings_between_motion_steps_are_processed_at_their_time() {
    // 7 Hz against a 20 ms step: most readings fall between steps.
    let report = simulate(&rail_cart(4, 1, 1.0).replace("rate = \"10 Hz\"", "rate = \"7 Hz\""));
    let laser = &report.sensors[0];
    assert_eq!(laser.times.len(), 28);
    assert!((laser.times[0] - 1.0 / 7.0).abs() < 1e-12);
    let nis = laser.nis.as_ref().expect("a Kalman filter has a NIS");
    assert_eq!(nis.mean.len(), 28);
    assert!(nis.mean.iter().all(|v| v.is_finite()));
    assert_eq!(report.times.len(), 200);
}

/// A nonlinear spec with a wrapped heading, beacon arguments cycled reading by
/// reading and a full reading covariance, run with the unscented filter.
#[test]
fn unscented_filter_on_a_nonlinear_spec_with_cycled_beacons() {
    let report = simulate(
        r#"
        [[scenario]]
        name = "launch"
        spec = "specs/survey_launch.reckon"
        method = "ukf"
        duration = "6 s"
        step = "50 ms"
        runs = 30
        seed = 3
        inputs = { accel = "0.1 m/s^2" }
        truth = { heading = "20 deg" }

        [[scenario.sensor]]
        name = "transponder"
        rate = "2 Hz"
        args = [{ beacon_east = "150 m", beacon_north = "0 m" }, { beacon_east = "0 m", beacon_north = "150 m" }]

        [[scenario.sensor]]
        name = "compass"
        rate = "5 Hz"

        [[scenario.sensor]]
        name = "gyro"
        rate = "10 Hz"
        "#,
    );
    assert_eq!(report.rejected, 0, "{}", report.summary_text());
    assert_eq!(report.sample.truth[0].len(), 5);
    // Every step's heading error is wrapped onto the circle.
    assert!(report
        .rms_per_step
        .iter()
        .all(|e| e[2] <= std::f64::consts::PI));
    assert!(report.nees.inside >= 0.8, "{}", report.summary_text());
}

fn scenario_errors(toml: &str) -> Vec<Diagnostic> {
    match run_scenario(&repository(), &scenario(toml), &quiet) {
        Err(SimError::Scenario(errors)) => errors,
        other => panic!("expected scenario errors, got {other:?}"),
    }
}

#[test]
fn scenario_mistakes_are_diagnosed_in_the_project_file() {
    let text = rail_cart(2, 1, 1.0)
        .replace("name = \"laser\"", "name = \"lazer\"")
        .replace("rate = \"20 Hz\"", "rate = \"20 m\"");
    let errors = scenario_errors(&text);
    let unknown = errors
        .iter()
        .find(|e| e.code == codes::SCENARIO_UNKNOWN_NAME)
        .expect("unknown sensor");
    let span = unknown.primary_span();
    assert_eq!(&text[span.start..span.end], "\"lazer\"");
    assert!(unknown.hint.as_deref().is_some_and(|h| h.contains("laser")));
    let rate = errors
        .iter()
        .find(|e| e.code == codes::SCENARIO_QUANTITY)
        .expect("rate with a length unit");
    let span = rate.primary_span();
    assert_eq!(&text[span.start..span.end], "\"20 m\"");
}

#[test]
fn a_missing_input_and_a_bad_unit_are_reported() {
    let text = rail_cart(2, 1, 1.0).replace("rate = \"10 Hz\"", "rate = \"10 furlong\"");
    let errors = scenario_errors(&text);
    let unit = errors
        .iter()
        .find(|e| e.code == codes::UNKNOWN_UNIT)
        .expect("unknown unit");
    let span = unit.primary_span();
    assert_eq!(&text[span.start..span.end], "furlong");
    // Inside a schedule the error points at the whole schedule.
    let text = rail_cart(2, 1, 1.0).replace("\"0.3 m/s^2\"", "\"0.3 m/furlong\"");
    let errors = scenario_errors(&text);
    let unit = errors
        .iter()
        .find(|e| e.code == codes::UNKNOWN_UNIT)
        .expect("unknown unit");
    let span = unit.primary_span();
    assert!(text[span.start..span.end].starts_with("[{ from = \"0 s\""));

    let no_inputs: String = rail_cart(2, 1, 1.0)
        .lines()
        .filter(|line| !line.trim_start().starts_with("inputs"))
        .collect::<Vec<_>>()
        .join("\n");
    let errors = scenario_errors(&no_inputs);
    assert!(errors
        .iter()
        .any(|e| e.code == codes::SCENARIO_MISSING_VALUE
            && e.hint.as_deref().is_some_and(|h| h.contains("accel"))));
}

#[test]
fn methods_the_spec_does_not_allow_are_refused_with_the_spec() {
    let text = rail_cart(2, 1, 1.0).replace(
        "spec = \"specs/rail_cart.reckon\"\n        method = \"kf\"",
        "spec = \"specs/survey_launch.reckon\"\n        method = \"kf\"",
    );
    match run_scenario(&repository(), &scenario(&text), &quiet) {
        Err(SimError::Spec { diagnostics, .. }) => {
            assert!(diagnostics
                .iter()
                .any(|d| d.code == codes::KF_NEEDS_LINEAR_MODEL));
        }
        other => panic!("expected a refusal, got {other:?}"),
    }
    // The rail cart's states have no range, so no grid covers them.
    let grid = rail_cart(2, 1, 1.0).replace("method = \"kf\"", "method = \"grid\"");
    match run_scenario(&repository(), &scenario(&grid), &quiet) {
        Err(SimError::Spec { diagnostics, .. }) => {
            assert!(diagnostics
                .iter()
                .any(|d| d.code == codes::MODEL_DOES_NOT_FIT_METHOD));
        }
        other => panic!("expected a refusal, got {other:?}"),
    }
}

/// Element-level check of the SVG output: it parses as XML, and the state figure has
/// one panel (captioned "name [unit]") per state.
#[test]
fn outputs_are_well_formed_with_one_panel_per_state() {
    let report = simulate(&rail_cart(3, 2, 1.0));
    let dir = std::env::temp_dir().join(format!("reckon-sim-test-{}", std::process::id()));
    let written = write_outputs(&report, &dir).expect("outputs written");
    let names: Vec<String> = written
        .iter()
        .filter_map(|p| p.file_name().map(|n| n.to_string_lossy().into_owned()))
        .collect();
    assert_eq!(
        names,
        [
            "states.svg",
            "nees.svg",
            "nis.svg",
            "steps.csv",
            "readings.csv",
            "summary.txt"
        ]
    );
    for svg in ["states.svg", "nees.svg", "nis.svg"] {
        let text = std::fs::read_to_string(dir.join(svg)).expect("svg");
        roxmltree::Document::parse(&text).unwrap_or_else(|e| panic!("{svg}: {e}"));
    }
    let states = std::fs::read_to_string(dir.join("states.svg")).expect("svg");
    let document = roxmltree::Document::parse(&states).expect("xml");
    let captions: Vec<&str> = document
        .descendants()
        .filter(|n| n.has_tag_name("text"))
        .filter_map(|n| n.text())
        .map(str::trim)
        .filter(|t| t.contains('[') && !t.starts_with("time"))
        .collect();
    assert_eq!(captions, ["position [m]", "speed [m/s]"]);
    let csv = std::fs::read_to_string(dir.join("steps.csv")).expect("csv");
    assert_eq!(csv.lines().count(), 1 + report.times.len());
    assert!(csv
        .starts_with("time_s,nees_mean,nees_lower,nees_upper,rms_position_m,rms_speed_m_per_s\n"));
    std::fs::remove_dir_all(&dir).expect("cleanup");
}

#[test]
fn progress_is_reported_once_per_run() {
    let calls = std::sync::Mutex::new(Vec::new());
    let record = |done: usize, total: usize| {
        if let Ok(mut calls) = calls.lock() {
            calls.push((done, total));
        }
    };
    run_scenario(&repository(), &scenario(&rail_cart(5, 1, 1.0)), &record).expect("runs");
    let mut calls = calls.into_inner().expect("lock");
    calls.sort_unstable();
    assert_eq!(calls, (1..=5).map(|d| (d, 5)).collect::<Vec<_>>());
}

/// Every scenario of the demo project file runs. By default with 4 runs each (and at
/// most 2000 particles, which an unoptimised build runs in seconds); with
/// `RECKON_FULL_DEMOS=1` as the file asks, printing each summary and its wall-clock
/// time (for the report, not an assertion).
#[test]
fn demo_project_scenarios_run() {
    let text = std::fs::read_to_string(repository().join("reckon.toml")).expect("demo project");
    let project = parse_project(&text).expect("valid demo project");
    let full = std::env::var_os("RECKON_FULL_DEMOS").is_some();
    assert!(project.scenarios.len() >= 5);
    for mut scenario in project.scenarios {
        if !full {
            scenario.runs = 4;
            scenario.particles = scenario.particles.map(|count| count.min(2000));
        }
        let started = std::time::Instant::now();
        let report = run_scenario(&repository(), &scenario, &quiet)
            .unwrap_or_else(|e| panic!("{}: {e:?}", scenario.name));
        if full {
            eprintln!(
                "{}({:.2} s)\n",
                report.summary_text(),
                started.elapsed().as_secs_f64()
            );
        }
        // A particle filter that lost the true peak to resampling sees its remaining
        // particles leave the range, and the runtime then rejects their corrections
        // (zero posterior): a result of the scenario, not a failure to run it.
        if scenario.method != Method::Particle {
            assert_eq!(report.rejected, 0, "{}", report.summary_text());
        }
        assert_eq!(report.nees.mean.len(), report.times.len());
    }
}

/// The tunnel trolley of `specs/marker_track.reckon` starting at 1.3 m and driving
/// east at 0.5 m/s, the marker detector read at 10 Hz.
fn marker_track(method: &str, settings: &str, duration: &str, runs: usize) -> String {
    format!(
        r#"
        [[scenario]]
        name = "marker_track_{method}"
        spec = "specs/marker_track.reckon"
        method = "{method}"
        {settings}
        duration = "{duration}"
        step = "100 ms"
        runs = {runs}
        seed = 7
        inputs = {{ speed = "0.5 m/s" }}
        truth = {{ position = "1.3 m" }}

        [[scenario.sensor]]
        name = "marker"
        rate = "10 Hz"
        "#
    )
}

/// Grid and particle scenarios run end to end: NEES at every step, a log evidence
/// for every reading instead of a NIS, and the outputs without a NIS plot.
#[test]
fn grid_and_particle_scenarios_run_end_to_end() {
    for (method, settings) in [("grid", ""), ("particle", "particles = 300")] {
        let report = simulate(&marker_track(method, settings, "6 s", 2));
        assert_eq!(report.rejected, 0, "{}", report.summary_text());
        assert_eq!(report.nees.mean.len(), report.times.len());
        assert!(report.nees.mean.iter().all(|v| v.is_finite()));
        let marker = &report.sensors[0];
        assert!(marker.nis.is_none());
        assert_eq!(marker.ln_evidence.len(), 60);
        assert!(marker.ln_evidence.iter().all(|v| v.is_finite()));
        assert!(report.summary_text().contains("no NIS"));
        let dir =
            std::env::temp_dir().join(format!("reckon-sim-{method}-test-{}", std::process::id()));
        let written = write_outputs(&report, &dir).expect("outputs written");
        assert!(written.iter().all(|p| !p.ends_with("nis.svg")));
        let readings = std::fs::read_to_string(dir.join("readings.csv")).expect("csv");
        assert!(readings.starts_with("sensor,time_s,ln_evidence_mean\n"));
        assert_eq!(readings.lines().count(), 61);
        std::fs::remove_dir_all(&dir).expect("cleanup");
    }
}

/// Where a Kalman filter is wrong and the grid is right. From a start the markers
/// cannot tell apart (a peak every 2 m), the extended Kalman filter locks onto one
/// pair and ends whole marker spacings off with a tiny covariance; the grid keeps
/// every peak, drops each as it passes the east wall, and ends within centimetres.
#[test]
fn on_the_marker_track_the_ekf_is_wrong_and_the_grid_is_right() {
    let ekf = simulate(&marker_track("ekf", "", "76 s", 3));
    let end = |report: &SimReport| report.rms_per_step.last().expect("steps")[0];
    assert!(end(&ekf) > 1.0, "{}", ekf.summary_text());
    assert_eq!(ekf.nees.verdict, Verdict::Optimistic);
    let grid = simulate(&marker_track("grid", "", "76 s", 3));
    assert_eq!(grid.rejected, 0, "{}", grid.summary_text());
    assert!(end(&grid) < 0.1, "{}", grid.summary_text());
}

/// Sizes the simulator has no capacity for are refused with `E0715`, naming the limit.
#[test]
fn sizes_beyond_the_simulator_are_refused() {
    let many = marker_track("particle", "particles = 100000", "1 s", 1);
    let errors = scenario_errors(&many);
    let refusal = errors
        .iter()
        .find(|e| e.code == codes::SCENARIO_METHOD)
        .expect("too many particles");
    assert!(refusal.message.contains("65536"), "{}", refusal.message);

    let states: Vec<String> = (0..9).map(|i| format!("s{i} : m")).collect();
    let motion: Vec<String> = (0..9).map(|i| format!("s{i} = s{i}")).collect();
    let noise: Vec<String> = (0..9).map(|i| format!("s{i} ~ normal(1 cm)")).collect();
    let initial: Vec<String> = (0..9).map(|i| format!("s{i} ~ normal(0 m, 1 m)")).collect();
    let spec = format!(
        "model nine\nstate {{ {} }}\nmotion discrete {{ {} }}\nprocess {{ {} }}\nsensor first {{ r : m = s0\n  noise ~ normal(1 m) }}\ninitial {{ {} }}\n",
        states.join("\n"),
        motion.join("\n"),
        noise.join("\n"),
        initial.join("\n")
    );
    let dir = std::env::temp_dir().join(format!("reckon-sim-nine-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("temp dir");
    std::fs::write(dir.join("nine.reckon"), spec).expect("spec written");
    let text = r#"
        [[scenario]]
        name = "nine"
        spec = "nine.reckon"
        method = "particle"
        duration = "1 s"
        step = "100 ms"
        runs = 1
        "#;
    let outcome = run_scenario(&dir, &scenario(text), &quiet);
    std::fs::remove_dir_all(&dir).expect("cleanup");
    match outcome {
        Err(SimError::Scenario(errors)) => {
            let refusal = errors
                .iter()
                .find(|e| e.code == codes::SCENARIO_METHOD)
                .expect("nine states");
            assert!(refusal.message.contains("9 states"), "{}", refusal.message);
        }
        other => panic!("expected a refusal, got {other:?}"),
    }
}

/// The grid and particle settings of a scenario reach the filter's options.
#[test]
fn scenario_settings_reach_the_estimator_options() {
    let text = marker_track(
        "particle",
        "cells = 40\n        particles = 500\n        resample_below = 0.25",
        "1 s",
        1,
    );
    let options = scenario(&text).options();
    assert_eq!(options.grid_cells, Some(40));
    assert_eq!(options.particle_count(), 500);
    assert_eq!(options.resample_threshold(), 0.25);
}

/// A plane walker read in both coordinates: the 2-D grid (100 x 100 cells) and a
/// two-state particle filter run end to end and end near the truth.
#[test]
fn two_state_grid_and_particle_scenarios_run() {
    let spec = "model walker
state { east : m in -5 m .. 5 m by 10 cm
  north : m in -5 m .. 5 m by 10 cm }
input { ve : m/s
  vn : m/s }
motion discrete { east = east + ve * dt
  north = north + vn * dt }
process { east ~ normal(5 cm)
  north ~ normal(5 cm) }
sensor fix { e : m = east
  n : m = north
  noise ~ normal(20 cm) }
initial { east ~ normal(-2 m, 50 cm)
  north ~ normal(1 m, 50 cm) }
";
    let dir = std::env::temp_dir().join(format!("reckon-sim-walker-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("temp dir");
    std::fs::write(dir.join("walker.reckon"), spec).expect("spec written");
    let reports: Vec<Result<SimReport, SimError>> = [("grid", ""), ("particle", "particles = 500")]
        .iter()
        .map(|(method, settings)| {
            let text = format!(
                r#"
                [[scenario]]
                name = "walker_{method}"
                spec = "walker.reckon"
                method = "{method}"
                {settings}
                duration = "3 s"
                step = "100 ms"
                runs = 2
                seed = 3
                inputs = {{ ve = "0.5 m/s", vn = "-0.2 m/s" }}

                [[scenario.sensor]]
                name = "fix"
                rate = "10 Hz"
                "#
            );
            run_scenario(&dir, &scenario(&text), &quiet)
        })
        .collect();
    std::fs::remove_dir_all(&dir).expect("cleanup");
    for report in reports {
        let report = report.unwrap_or_else(|e| panic!("{e:?}"));
        assert_eq!(report.rejected, 0, "{}", report.summary_text());
        assert_eq!(report.sample.truth[0].len(), 2);
        assert!(report.nees.mean.iter().all(|v| v.is_finite()));
        // The readings' 20 cm noise, averaged over many readings, leaves well under
        // 20 cm of error per coordinate.
        let end = report.rms_per_step.last().expect("steps");
        assert!(end.iter().all(|&e| e < 0.2), "{}", report.summary_text());
    }
}
