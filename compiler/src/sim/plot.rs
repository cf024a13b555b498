//! SVG figures of a simulation report: truth against estimate with its 3-sigma band
//! per state, and the averaged NEES and NIS against their acceptance bands.
//!
//! Every figure is a column of panels drawn by one function, [`figure`]; the three
//! public builders only say what goes in the panels. Values are shown in the units the
//! spec declares.

use plotters::prelude::*;

use super::{Check, SimReport};

/// One line of a panel.
struct Line {
    label: String,
    points: Vec<(f64, f64)>,
    color: RGBColor,
}

/// One chart: a caption, axis descriptions and lines.
struct Panel {
    caption: String,
    y_label: String,
    lines: Vec<Line>,
}

const TRUTH: RGBColor = RGBColor(20, 20, 20);
const ESTIMATE: RGBColor = RGBColor(31, 119, 180);
const BAND: RGBColor = RGBColor(214, 39, 40);

const WIDTH: u32 = 900;
const PANEL_HEIGHT: u32 = 260;

/// The x and y extent of the finite points of `lines`, widened when degenerate.
fn extent(lines: &[Line]) -> ((f64, f64), (f64, f64)) {
    let points = lines
        .iter()
        .flat_map(|l| l.points.iter())
        .filter(|(x, y)| x.is_finite() && y.is_finite());
    let (mut x0, mut x1, mut y0, mut y1) = (
        f64::INFINITY,
        f64::NEG_INFINITY,
        f64::INFINITY,
        f64::NEG_INFINITY,
    );
    for &(x, y) in points {
        x0 = x0.min(x);
        x1 = x1.max(x);
        y0 = y0.min(y);
        y1 = y1.max(y);
    }
    let widen = |lo: f64, hi: f64| {
        if !(lo.is_finite() && hi.is_finite()) {
            (0.0, 1.0)
        } else if hi - lo <= f64::EPSILON * hi.abs().max(1.0) {
            (lo - 0.5 * lo.abs().max(1.0), hi + 0.5 * hi.abs().max(1.0))
        } else {
            let pad = 0.05 * (hi - lo);
            (lo - pad, hi + pad)
        }
    };
    let (x0, x1) = if x1 > x0 { (x0, x1) } else { widen(x0, x1) };
    ((x0, x1), widen(y0, y1))
}

/// Draws `panels` one under the other into an SVG document.
fn figure(panels: &[Panel]) -> Result<String, String> {
    let mut svg = String::new();
    {
        let height = PANEL_HEIGHT * panels.len().max(1) as u32;
        let root = SVGBackend::with_string(&mut svg, (WIDTH, height)).into_drawing_area();
        root.fill(&WHITE).map_err(|e| e.to_string())?;
        let areas = root.split_evenly((panels.len().max(1), 1));
        for (area, panel) in areas.iter().zip(panels) {
            let ((x0, x1), (y0, y1)) = extent(&panel.lines);
            let mut chart = ChartBuilder::on(area)
                .caption(&panel.caption, ("sans-serif", 16))
                .margin(8)
                .x_label_area_size(32)
                .y_label_area_size(70)
                .build_cartesian_2d(x0..x1, y0..y1)
                .map_err(|e| e.to_string())?;
            chart
                .configure_mesh()
                .x_desc("time [s]")
                .y_desc(panel.y_label.as_str())
                .draw()
                .map_err(|e| e.to_string())?;
            for line in &panel.lines {
                let color = line.color;
                let finite = line
                    .points
                    .iter()
                    .copied()
                    .filter(|(x, y)| x.is_finite() && y.is_finite());
                chart
                    .draw_series(LineSeries::new(finite, color.stroke_width(1)))
                    .map_err(|e| e.to_string())?
                    .label(line.label.as_str())
                    .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 16, y)], color));
            }
            chart
                .configure_series_labels()
                .border_style(BLACK)
                .background_style(WHITE.mix(0.8))
                .draw()
                .map_err(|e| e.to_string())?;
        }
        root.present().map_err(|e| e.to_string())?;
    }
    Ok(svg)
}

/// Truth, estimate and estimate +/- 3 sigma of the first run, one panel per state.
pub(crate) fn states_svg(report: &SimReport) -> Result<String, String> {
    let sample = &report.sample;
    let panels: Vec<Panel> = report
        .states
        .iter()
        .enumerate()
        .map(|(i, state)| {
            let series = |values: &Vec<Vec<f64>>, offset: f64| -> Vec<(f64, f64)> {
                report
                    .times
                    .iter()
                    .zip(values)
                    .zip(&sample.sigma)
                    .map(|((&t, v), s)| (t, (v[i] + offset * s[i]) / state.to_si))
                    .collect()
            };
            Panel {
                caption: format!("{} [{}]", state.name, state.unit),
                y_label: state.unit.clone(),
                lines: vec![
                    Line {
                        label: "truth".into(),
                        points: series(&sample.truth, 0.0),
                        color: TRUTH,
                    },
                    Line {
                        label: "estimate".into(),
                        points: series(&sample.estimate, 0.0),
                        color: ESTIMATE,
                    },
                    Line {
                        label: "estimate + 3 sigma".into(),
                        points: series(&sample.estimate, 3.0),
                        color: BAND,
                    },
                    Line {
                        label: "estimate - 3 sigma".into(),
                        points: series(&sample.estimate, -3.0),
                        color: BAND,
                    },
                ],
            }
        })
        .collect();
    figure(&panels)
}

fn check_panel(caption: String, times: &[f64], check: &Check) -> Panel {
    let flat = |value: f64| times.iter().map(|&t| (t, value)).collect::<Vec<_>>();
    Panel {
        caption,
        y_label: "average".into(),
        lines: vec![
            Line {
                label: "average over runs".into(),
                points: times
                    .iter()
                    .copied()
                    .zip(check.mean.iter().copied())
                    .collect(),
                color: ESTIMATE,
            },
            Line {
                label: "band lower".into(),
                points: flat(check.band.lower),
                color: BAND,
            },
            Line {
                label: "band upper".into(),
                points: flat(check.band.upper),
                color: BAND,
            },
        ],
    }
}

/// Averaged NEES per step with its acceptance band.
pub(crate) fn nees_svg(report: &SimReport) -> Result<String, String> {
    figure(&[check_panel(
        format!(
            "NEES, average of {} runs ({} dof)",
            report.runs, report.nees.dof
        ),
        &report.times,
        &report.nees,
    )])
}

/// Averaged NIS per reading with its acceptance band, one panel per sensor.
pub(crate) fn nis_svg(report: &SimReport) -> Result<String, String> {
    let panels: Vec<Panel> = report
        .sensors
        .iter()
        .filter_map(|s| {
            let nis = s.nis.as_ref()?;
            Some(check_panel(
                format!(
                    "NIS {}, average of {} runs ({} dof)",
                    s.name, report.runs, nis.dof
                ),
                &s.times,
                nis,
            ))
        })
        .collect();
    figure(&panels)
}
