use super::test_specs::{checked_model as model, options, MARKER_TRACK, MIXED_NOISE};
use super::*;
use crate::options::EstimatorOptions;

fn refusal_codes(text: &str, options: &EstimatorOptions) -> Vec<&'static str> {
    match plan(&model(text), options) {
        Ok(_) => Vec::new(),
        Err(errors) => errors.iter().map(|e| e.code.id).collect(),
    }
}

#[test]
fn marker_track_is_a_translated_grid_of_800_cells() {
    let plan = plan(&model(MARKER_TRACK), &options(Method::Grid)).unwrap();
    let grid = plan.grid.as_ref().unwrap();
    assert_eq!(grid.axes.len(), 1);
    assert_eq!(grid.axes[0].count, 800);
    assert_eq!((grid.axes[0].lo, grid.axes[0].width), (0.0, 0.05));
    assert!(grid.translation.is_some());
    // Slip (normal) and odometry noise (normal, gain dt) combine on the one axis.
    assert_eq!(grid.noise[0].terms.len(), 2);
    assert_eq!(grid.noise[0].shape, Shape::Normal);
    // No initial block entry: uniform over the whole tunnel.
    let (mean, spread) = plan.initial[0].unwrap();
    assert_eq!(mean, 20.0);
    assert_eq!(
        spread,
        Spread {
            shape: Shape::Uniform,
            width: 20.0
        }
    );
}

#[test]
fn a_triangle_and_a_normal_on_one_axis_refuse_the_grid_but_not_the_particles() {
    assert_eq!(
        refusal_codes(MIXED_NOISE, &options(Method::Grid)),
        ["E0606"]
    );
    let plan = plan(&model(MIXED_NOISE), &options(Method::Particle)).unwrap();
    let shapes: Vec<Shape> = plan.sources.iter().map(|s| s.spread.shape).collect();
    assert_eq!(shapes, [Shape::Triangle, Shape::Normal]);
    assert_eq!(
        plan.reading_noise[0][0],
        Spread {
            shape: Shape::Uniform,
            width: 0.05
        }
    );
}

#[test]
fn grid_refusals_name_what_is_missing() {
    let three_states = "model m
state { a : m in 0 m .. 1 m by 1 cm
  b : m in 0 m .. 1 m by 1 cm
  c : m in 0 m .. 1 m by 1 cm }
motion discrete { a = a }
process { a ~ normal(1 cm)
  b ~ normal(1 cm)
  c ~ normal(1 cm) }
";
    assert_eq!(
        refusal_codes(three_states, &options(Method::Grid)),
        ["E0605"]
    );
    assert!(refusal_codes(three_states, &options(Method::Particle)).is_empty());

    let no_range = "model m
state { a : m }
motion discrete { a = a }
process { a ~ normal(1 cm) }
";
    assert_eq!(refusal_codes(no_range, &options(Method::Grid)), ["E0605"]);

    let no_cell = "model m
state { a : m in 0 m .. 1 m }
motion discrete { a = a }
process { a ~ normal(1 cm) }
";
    assert_eq!(refusal_codes(no_cell, &options(Method::Grid)), ["E0605"]);
    let with_cells = EstimatorOptions {
        grid_cells: Some(250),
        ..options(Method::Grid)
    };
    let plan = plan(&model(no_cell), &with_cells).unwrap();
    let axis = plan.grid.unwrap().axes[0];
    assert_eq!((axis.count, axis.width), (250, 0.004));

    let noiseless = "model m
state { a : m in 0 m .. 1 m by 1 cm }
motion discrete { a = a }
";
    assert_eq!(refusal_codes(noiseless, &options(Method::Grid)), ["E0606"]);

    let huge = "model m
state { a : m in 0 m .. 1 km by 1 mm
  b : m in 0 m .. 1 km by 1 mm }
motion discrete { a = a }
process { a ~ normal(1 cm)
  b ~ normal(1 cm) }
";
    assert_eq!(refusal_codes(huge, &options(Method::Grid)), ["E0607"]);
}

#[test]
fn noise_whose_effect_depends_on_the_state_refuses_the_grid() {
    let scaled = "model m
state { a : m in 1 m .. 2 m by 1 cm }
input { r : s^-1 ~ normal(0.01 s^-1) }
motion discrete { a = a + a * r * dt }
process { a ~ normal(1 mm) }
";
    assert_eq!(refusal_codes(scaled, &options(Method::Grid)), ["E0606"]);
    let spread = "model m
state { a : m in 0 m .. 1 m by 1 cm
  b : m in 0 m .. 1 m by 1 cm }
input { v : m/s ~ normal(0.01 m/s) }
motion discrete { a = a + v * dt
  b = b + v * dt }
process { a ~ normal(1 mm)
  b ~ normal(1 mm) }
";
    assert_eq!(refusal_codes(spread, &options(Method::Grid)), ["E0606"]);
}

#[test]
fn wrapped_states_and_full_covariances_refuse_both_methods() {
    let wrapped = "model m
state { h : rad wrap }
motion discrete { h = h }
process { h ~ normal(0.01 rad) }
";
    for method in [Method::Grid, Method::Particle] {
        assert!(refusal_codes(wrapped, &options(method)).contains(&"E0605"));
    }
    let correlated = "model m
state { a : m
  b : m }
motion discrete { a = a }
process { a ~ normal(1 mm) }
sensor s { p : m = a
  q : m = b
  noise ~ covariance [1 m^2, 0.5 m^2; 0.5 m^2, 1 m^2] }
";
    assert_eq!(
        refusal_codes(correlated, &options(Method::Particle)),
        ["E0605"]
    );
}

#[test]
fn settings_out_of_range_are_refused() {
    for (particles, resample_below) in [
        (Some(0), None),
        (Some(2_000_000), None),
        (None, Some(0.0)),
        (None, Some(1.5)),
    ] {
        let options = EstimatorOptions {
            particles,
            resample_below,
            ..options(Method::Particle)
        };
        assert_eq!(refusal_codes(MARKER_TRACK, &options), ["E0607"]);
    }
}

#[test]
fn nonlinear_motion_is_pushed_not_translated() {
    let drag = "model m
state { v : m/s in 0 m/s .. 10 m/s by 1 cm/s }
motion discrete { v = v - v * dt / 10 s }
process { v ~ normal(1 cm/s) }
";
    let plan = plan(&model(drag), &options(Method::Grid)).unwrap();
    assert!(plan.grid.unwrap().translation.is_none());
}

#[test]
fn white_noise_becomes_an_euler_maruyama_source_on_its_state() {
    let canal = include_str!("../../../../specs/canal_ferry.reckon");
    let plan = plan(&model(canal), &options(Method::Particle)).unwrap();
    let white: Vec<&Source> = plan.sources.iter().filter(|s| s.is_white()).collect();
    assert_eq!(white.len(), 1);
    assert_eq!(white[0].kind, SourceKind::White { state: 1 });
    // The sample enters the speed's transition and nothing else.
    let index = plan.sources.iter().position(Source::is_white).unwrap() as u32;
    let reads = |root: NodeId| {
        plan.lowered
            .arena
            .reachable(&[root])
            .into_iter()
            .any(|id| plan.lowered.arena.node(id) == &ir::Node::Symbol(Symbol::Noise(index)))
    };
    assert!(!reads(plan.sampled_transition[0]));
    assert!(reads(plan.sampled_transition[1]));
}

#[test]
fn cell_counts_cover_the_range() {
    // 40 m by 5 cm divides exactly, up to the round-off of 40 / 0.05.
    assert_eq!(cells_covering(40.0, 0.05), 800);
    assert_eq!(cells_covering(1.0, 0.3), 4);
    assert_eq!(cells_covering(1.0, 1e-300), usize::MAX);
}

#[test]
fn gates_are_reported_as_not_applied() {
    let gated = "model m
state { a : m in 0 m .. 1 m by 1 cm }
motion discrete { a = a }
process { a ~ normal(1 cm) }
sensor s { p : m = a
  noise ~ normal(1 cm)
  gate 99 % }
";
    let plan = plan(&model(gated), &options(Method::Grid)).unwrap();
    let codes: Vec<&str> = plan.warnings.iter().map(|w| w.code.id).collect();
    assert_eq!(codes, ["W0852"]);
}
