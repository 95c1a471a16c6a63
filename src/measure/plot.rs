//! The sweep's picture: packed size against coverage (and reachability), one labelled point
//! per setting, drawn with `plotters` into SVG.

use plotters::prelude::*;

use super::SweepReport;
use crate::error::{Error, Result};

/// Width and height of the plot in pixels (one panel; two side by side with a reference).
const PANEL: (u32, u32) = (640, 480);

/// Draws `report` as SVG: x is the packed file size in bytes, y the test-token coverage and,
/// when the sweep had a reference, a second panel with the reachability of the reference.
/// Every setting is one circle labelled with its setting label, in each panel.
pub fn plot_svg(report: &SweepReport) -> Result<String> {
    let with_reference = report
        .settings
        .iter()
        .any(|s| s.figures.reachability.is_some());
    let panels = if with_reference { 2 } else { 1 };
    let mut svg = String::new();
    let failed = |e: String| Error::Unsupported(format!("drawing the sweep plot failed: {e}"));
    {
        let root =
            SVGBackend::with_string(&mut svg, (PANEL.0 * panels, PANEL.1)).into_drawing_area();
        root.fill(&WHITE).map_err(|e| failed(e.to_string()))?;
        let areas = root.split_evenly((1, panels as usize));
        let points: Vec<(String, f64, f64, f64)> = report
            .settings
            .iter()
            .map(|s| {
                let f = &s.figures;
                (
                    s.label.clone(),
                    f.size.file_bytes as f64,
                    f.coverage.as_ref().map_or(0.0, |c| c.token_coverage),
                    f.reachability.as_ref().map_or(0.0, |r| r.share),
                )
            })
            .collect();
        let (lo, hi) = points
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), p| {
                (lo.min(p.1), hi.max(p.1))
            });
        let pad = ((hi - lo) * 0.1).max(hi.abs() * 0.05).max(1.0);
        // more room on the right, where the labels of the largest tables go
        let x_range = (lo - pad).max(0.0)..hi + 3.0 * pad;
        for (panel, area) in areas.iter().enumerate() {
            let (title, y_label) = if panel == 0 {
                ("Size against test coverage", "share of test tokens covered")
            } else {
                (
                    "Size against reachability",
                    "share of reference n-grams (1-4) reachable",
                )
            };
            let y = |p: &(String, f64, f64, f64)| if panel == 0 { p.2 } else { p.3 };
            let (ylo, yhi) = points
                .iter()
                .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), p| {
                    (lo.min(y(p)), hi.max(y(p)))
                });
            let ypad = ((yhi - ylo) * 0.15).max(0.02);
            let y_range = (ylo - ypad).max(0.0)..(yhi + ypad).min(1.01);
            let offsets = label_offsets(&points, &x_range, &y_range, y);
            let mut chart = ChartBuilder::on(area)
                .caption(title, ("sans-serif", 18))
                .margin(16)
                .x_label_area_size(40)
                .y_label_area_size(72)
                .build_cartesian_2d(x_range.clone(), y_range)
                .map_err(|e| failed(e.to_string()))?;
            chart
                .configure_mesh()
                .x_desc("packed size (bytes)")
                .y_desc(y_label)
                .x_labels(6)
                .y_labels(6)
                .x_label_formatter(&|v| format!("{v:.0}"))
                .y_label_formatter(&|v| format!("{v:.3}"))
                .draw()
                .map_err(|e| failed(e.to_string()))?;
            chart
                .draw_series(points.iter().zip(&offsets).map(|(p, &dy)| {
                    EmptyElement::at((p.1, y(p)))
                        + Circle::new((0, 0), 4, BLUE.filled())
                        + Text::new(p.0.clone(), (6, dy), ("sans-serif", 11))
                }))
                .map_err(|e| failed(e.to_string()))?;
        }
        root.present().map_err(|e| failed(e.to_string()))?;
    }
    Ok(svg)
}

/// Vertical pixel offsets of the labels: a label that would land on an earlier one (points
/// close together, in plot pixels) is moved one line further down.
fn label_offsets<F>(
    points: &[(String, f64, f64, f64)],
    x: &std::ops::Range<f64>,
    y: &std::ops::Range<f64>,
    value: F,
) -> Vec<i32>
where
    F: Fn(&(String, f64, f64, f64)) -> f64,
{
    const LINE: i32 = 13;
    let (width, height) = (f64::from(PANEL.0 - 100), f64::from(PANEL.1 - 100));
    let px = |p: &(String, f64, f64, f64)| {
        (
            (p.1 - x.start) / (x.end - x.start) * width,
            (y.end - value(p)) / (y.end - y.start) * height,
        )
    };
    let mut placed: Vec<(f64, f64)> = Vec::new();
    let mut offsets = Vec::with_capacity(points.len());
    for p in points {
        let (a, b) = px(p);
        let mut dy = -LINE;
        while placed.iter().any(|&(pa, pb)| {
            (pa - a).abs() < 150.0 && (pb - (b + f64::from(dy))).abs() < f64::from(LINE)
        }) {
            dy += LINE;
        }
        placed.push((a, b + f64::from(dy)));
        offsets.push(dy);
    }
    offsets
}
