//! The sweep's pictures, drawn with `plotters` into SVG for a reader: packed size in MB on x,
//! a chosen figure on y (BLEU, chrF, coverage, ...), the unpruned base as a pair of dashed
//! reference lines, the settings of one series joined in order of size, labels placed so they
//! do not overlap (with a leader line when moved away from their point), and a y range fitted
//! to the data.

use plotters::prelude::*;

use super::SweepReport;
use crate::error::{Error, Result};

/// Width and height of one panel in pixels.
const PANEL: (u32, u32) = (720, 520);

/// One setting in a panel.
#[derive(Clone, Debug)]
pub struct PlotPoint {
    /// The label drawn beside the point.
    pub label: String,
    /// Points of one series are joined by a line in order of size.
    pub series: String,
    /// Packed size in bytes.
    pub bytes: u64,
    /// The plotted figure.
    pub value: f64,
}

/// One panel: a title, the y axis name, the base (size, value) and the points.
#[derive(Clone, Debug)]
pub struct Panel {
    /// Title above the panel.
    pub title: String,
    /// Name of the y axis.
    pub y_label: String,
    /// The unpruned table's size in bytes and figure, drawn as reference lines.
    pub base: Option<(u64, f64)>,
    /// The settings.
    pub points: Vec<PlotPoint>,
}

/// The series of a sweep label `name=value name=value ...`: every setting but the last one's
/// value, so that the last varied option runs along each line.
pub fn series_of(label: &str) -> String {
    let mut parts: Vec<&str> = label.split(' ').collect();
    if let Some(last) = parts.pop() {
        let name = last.split('=').next().unwrap_or(last);
        parts.push(name);
    }
    parts.join(" ")
}

const COLORS: [RGBColor; 6] = [
    RGBColor(31, 119, 180),
    RGBColor(214, 39, 40),
    RGBColor(44, 160, 44),
    RGBColor(148, 103, 189),
    RGBColor(255, 127, 14),
    RGBColor(23, 190, 207),
];

/// Draws panels side by side as SVG.
pub fn plot_panels(panels: &[Panel]) -> Result<String> {
    let mut svg = String::new();
    let failed = Error::Plot;
    {
        let n = panels.len().max(1) as u32;
        let root = SVGBackend::with_string(&mut svg, (PANEL.0 * n, PANEL.1)).into_drawing_area();
        root.fill(&WHITE).map_err(|e| failed(e.to_string()))?;
        let areas = root.split_evenly((1, n as usize));
        for (panel, area) in panels.iter().zip(areas.iter()) {
            draw_panel(panel, area).map_err(failed)?;
        }
        root.present().map_err(|e| failed(e.to_string()))?;
    }
    Ok(svg)
}

fn mb(bytes: u64) -> f64 {
    bytes as f64 / 1e6
}

fn draw_panel(
    panel: &Panel,
    area: &DrawingArea<SVGBackend<'_>, plotters::coord::Shift>,
) -> std::result::Result<(), String> {
    let e = |x: &dyn std::fmt::Display| x.to_string();
    let xs = panel
        .points
        .iter()
        .map(|p| mb(p.bytes))
        .chain(panel.base.map(|b| mb(b.0)));
    let ys = panel
        .points
        .iter()
        .map(|p| p.value)
        .chain(panel.base.map(|b| b.1));
    let (xlo, xhi) = xs.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), x| {
        (a.min(x), b.max(x))
    });
    let (ylo, yhi) = ys.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), y| {
        (a.min(y), b.max(y))
    });
    if !xlo.is_finite() {
        return Ok(());
    }
    let xpad = ((xhi - xlo) * 0.08).max(xhi.abs() * 0.02).max(0.001);
    // Room on the right for the labels of the largest tables.
    let x_range = (xlo - xpad).max(0.0)..xhi + 4.0 * xpad;
    let ypad = ((yhi - ylo) * 0.12).max(yhi.abs() * 0.005).max(1e-3);
    let y_range = ylo - ypad..yhi + ypad;
    // As many decimals as the spread of the values needs (BLEU: 1, shares: 3).
    let span = y_range.end - y_range.start;
    let ydec = if span >= 5.0 {
        1
    } else if span >= 0.5 {
        2
    } else {
        3
    };
    let mut chart = ChartBuilder::on(area)
        .caption(&panel.title, ("sans-serif", 18))
        .margin(16)
        .x_label_area_size(42)
        .y_label_area_size(64)
        .build_cartesian_2d(x_range.clone(), y_range.clone())
        .map_err(|x| e(&x))?;
    chart
        .configure_mesh()
        .x_desc("packed size (MB)")
        .y_desc(panel.y_label.as_str())
        .x_labels(7)
        .y_labels(7)
        .x_label_formatter(&|v| format!("{v:.2}"))
        .y_label_formatter(&|v| format!("{v:.ydec$}"))
        .light_line_style(WHITE)
        .draw()
        .map_err(|x| e(&x))?;
    if let Some((bytes, value)) = panel.base {
        let grey = RGBColor(120, 120, 120);
        let dashed = |from: (f64, f64), to: (f64, f64)| {
            DashedLineSeries::new([from, to], 6, 4, grey.stroke_width(1))
        };
        chart
            .draw_series(dashed((x_range.start, value), (x_range.end, value)))
            .map_err(|x| e(&x))?;
        chart
            .draw_series(dashed((mb(bytes), y_range.start), (mb(bytes), y_range.end)))
            .map_err(|x| e(&x))?;
        chart
            .draw_series(std::iter::once(Text::new(
                format!("unpruned: {value:.ydec$}, {:.2} MB", mb(bytes)),
                (x_range.start + xpad * 0.2, value + ypad * 0.15),
                ("sans-serif", 11).into_font().color(&grey),
            )))
            .map_err(|x| e(&x))?;
    }
    // Series, each joined in order of size.
    let mut names: Vec<String> = panel.points.iter().map(|p| p.series.clone()).collect();
    names.sort();
    names.dedup();
    for (k, name) in names.iter().enumerate() {
        let color = COLORS[k % COLORS.len()];
        let mut pts: Vec<(f64, f64)> = panel
            .points
            .iter()
            .filter(|p| &p.series == name)
            .map(|p| (mb(p.bytes), p.value))
            .collect();
        pts.sort_by(|a, b| a.0.total_cmp(&b.0));
        chart
            .draw_series(LineSeries::new(pts, color.stroke_width(2)))
            .map_err(|x| e(&x))?
            .label(name.as_str())
            .legend(move |(x, y)| PathElement::new([(x, y), (x + 16, y)], color.stroke_width(2)));
    }
    chart
        .configure_series_labels()
        .background_style(WHITE.mix(0.85))
        .border_style(BLACK.mix(0.3))
        .position(SeriesLabelPosition::LowerRight)
        .draw()
        .map_err(|x| e(&x))?;
    // Points and labels.
    let plot = chart.plotting_area();
    let to_px = |x: f64, y: f64| plot.map_coordinate(&(x, y));
    let (px_lo, px_hi) = (
        to_px(x_range.start, y_range.end),
        to_px(x_range.end, y_range.start),
    );
    let placed = place_labels(
        &panel
            .points
            .iter()
            .map(|p| (to_px(mb(p.bytes), p.value), p.label.len()))
            .collect::<Vec<_>>(),
        (px_lo, px_hi),
    );
    for (p, (dx, dy)) in panel.points.iter().zip(placed) {
        let k = names.iter().position(|n| n == &p.series).unwrap_or(0);
        let color = COLORS[k % COLORS.len()];
        let at = (mb(p.bytes), p.value);
        let far = dx.abs() > 12 || dy.abs() > 12;
        let element = EmptyElement::at(at)
            + Circle::new((0, 0), 4, color.filled())
            + Text::new(p.label.clone(), (dx, dy), ("sans-serif", 11));
        if far {
            let end = (dx, dy + 6);
            chart
                .draw_series(std::iter::once(
                    EmptyElement::at(at)
                        + PathElement::new([(0, 0), end], BLACK.mix(0.4).stroke_width(1)),
                ))
                .map_err(|x| e(&x))?;
        }
        chart
            .draw_series(std::iter::once(element))
            .map_err(|x| e(&x))?;
    }
    Ok(())
}

/// Pixel offsets (from each point) of labels `len` characters long: the first of a ring of
/// candidate positions, nearest first, whose box overlaps no label placed before it and no
/// point, and stays inside the plot; labels are placed from left to right.
fn place_labels(
    points: &[((i32, i32), usize)],
    bounds: ((i32, i32), (i32, i32)),
) -> Vec<(i32, i32)> {
    const CHAR_W: i32 = 6;
    const LINE_H: i32 = 13;
    let mut order: Vec<usize> = (0..points.len()).collect();
    order.sort_by_key(|&i| points[i].0);
    let mut boxes: Vec<(i32, i32, i32, i32)> = Vec::new();
    let mut out = vec![(6, -LINE_H); points.len()];
    let overlaps = |a: (i32, i32, i32, i32), b: (i32, i32, i32, i32)| {
        a.0 < b.2 && b.0 < a.2 && a.1 < b.3 && b.1 < a.3
    };
    for i in order {
        let ((x, y), len) = points[i];
        let w = CHAR_W * len as i32;
        let mut candidates = Vec::new();
        for ring in 0..8 {
            let r = ring * LINE_H;
            for (dx, dy) in [
                (6, -LINE_H - r),
                (6, 2 + r),
                (-w - 6, -LINE_H - r),
                (-w - 6, 2 + r),
                (6 + 2 * r, -LINE_H / 2),
                (-w - 6 - 2 * r, -LINE_H / 2),
            ] {
                candidates.push((dx, dy));
            }
        }
        let chosen = candidates
            .iter()
            .copied()
            .find(|&(dx, dy)| {
                let b = (x + dx, y + dy, x + dx + w, y + dy + LINE_H);
                let inside = b.0 >= bounds.0 .0
                    && b.2 <= bounds.1 .0 + 40
                    && b.1 >= bounds.0 .1
                    && b.3 <= bounds.1 .1;
                inside
                    && !boxes.iter().any(|&o| overlaps(o, b))
                    && !points
                        .iter()
                        .any(|&((px, py), _)| overlaps((px - 4, py - 4, px + 4, py + 4), b))
            })
            .unwrap_or((6, -LINE_H));
        boxes.push((
            x + chosen.0,
            y + chosen.1,
            x + chosen.0 + w,
            y + chosen.1 + LINE_H,
        ));
        out[i] = chosen;
    }
    out
}

/// A figure a sweep can plot against size (`--plot`).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Figure {
    /// Corpus BLEU of the decoder's translations (needs a language model and a reference).
    Bleu,
    /// Corpus chrF of the same translations.
    Chrf,
    /// Share of test tokens covered by the table.
    Coverage,
    /// Mean retained probability mass against the unpruned table.
    Mass,
    /// Mean divergence against the unpruned table (nats).
    Divergence,
    /// Share of reference n-grams reachable (needs a reference).
    Reachability,
}

impl Figure {
    /// Every figure, in the order of its name list.
    pub const ALL: [Figure; 6] = [
        Figure::Bleu,
        Figure::Chrf,
        Figure::Coverage,
        Figure::Mass,
        Figure::Divergence,
        Figure::Reachability,
    ];

    /// The name `--plot` takes.
    pub fn name(self) -> &'static str {
        match self {
            Figure::Bleu => "bleu",
            Figure::Chrf => "chrf",
            Figure::Coverage => "coverage",
            Figure::Mass => "mass",
            Figure::Divergence => "divergence",
            Figure::Reachability => "reachability",
        }
    }

    /// Parses a name of [`Figure::name`].
    ///
    /// # Errors
    /// [`Error::Invalid`] naming `--plot` for any other name.
    pub fn parse(name: &str) -> Result<Figure> {
        Figure::ALL
            .into_iter()
            .find(|f| f.name() == name.trim())
            .ok_or_else(|| {
                let names: Vec<&str> = Figure::ALL.iter().map(|f| f.name()).collect();
                Error::invalid(
                    "--plot",
                    format!("{name:?} is none of {}", names.join(", ")),
                )
            })
    }

    /// The figure for one table, when it was measured.
    fn of(self, r: &super::TableReport) -> Option<f64> {
        match self {
            Figure::Bleu => r.quality.as_ref().map(|q| q.bleu),
            Figure::Chrf => r.quality.as_ref().map(|q| q.chrf),
            Figure::Coverage => r.coverage.as_ref().map(|c| c.token_coverage),
            Figure::Mass => Some(r.agreement.retained_mass),
            Figure::Divergence => Some(r.agreement.divergence),
            Figure::Reachability => r.reachability.as_ref().map(|x| x.share),
        }
    }

    fn title(self) -> &'static str {
        match self {
            Figure::Bleu => "Size against BLEU",
            Figure::Chrf => "Size against chrF",
            Figure::Coverage => "Size against test coverage",
            Figure::Mass => "Size against retained mass",
            Figure::Divergence => "Size against divergence",
            Figure::Reachability => "Size against reachability",
        }
    }

    fn axis(self, column: &str) -> String {
        match self {
            Figure::Bleu => "BLEU (test set)".into(),
            Figure::Chrf => "chrF (test set)".into(),
            Figure::Coverage => "share of test tokens covered".into(),
            Figure::Mass => format!("mean retained mass of {column}"),
            Figure::Divergence => format!("mean divergence of {column} (nats)"),
            Figure::Reachability => "share of reference n-grams (1-4) reachable".into(),
        }
    }
}

/// What a sweep plots when not told: quality when it was measured, otherwise coverage and,
/// with a reference, reachability.
pub fn default_figures(report: &SweepReport) -> Vec<Figure> {
    if report.base.quality.is_some() {
        vec![Figure::Bleu, Figure::Chrf]
    } else if report.base.reachability.is_some() {
        vec![Figure::Coverage, Figure::Reachability]
    } else {
        vec![Figure::Coverage]
    }
}

/// Draws `report` as SVG: one panel per figure of `figures` (or [`default_figures`] when
/// empty), packed size in MB against the figure, the base as reference lines.
///
/// # Errors
/// [`Error::Invalid`] naming `--plot` when a figure was not measured in this sweep (BLEU
/// without a language model, reachability without a reference, ...).
pub fn plot_svg(report: &SweepReport, figures: &[Figure]) -> Result<String> {
    let figures = if figures.is_empty() {
        default_figures(report)
    } else {
        figures.to_vec()
    };
    let base_size = report.base.size.file_bytes;
    let mut panels = Vec::with_capacity(figures.len());
    for figure in figures {
        let Some(base) = figure.of(&report.base) else {
            return Err(Error::invalid(
                "--plot",
                format!(
                    "{} was not measured in this sweep{}",
                    figure.name(),
                    match figure {
                        Figure::Bleu | Figure::Chrf => " (it needs --lm and --reference)",
                        Figure::Reachability => " (it needs --reference)",
                        _ => "",
                    }
                ),
            ));
        };
        panels.push(Panel {
            title: figure.title().into(),
            y_label: figure.axis(&report.column),
            base: Some((base_size, base)),
            points: report
                .settings
                .iter()
                .map(|s| PlotPoint {
                    label: s.label.clone(),
                    series: series_of(&s.label),
                    bytes: s.figures.size.file_bytes,
                    value: figure.of(&s.figures).unwrap_or(f64::NAN),
                })
                .filter(|p| p.value.is_finite())
                .collect(),
        });
    }
    plot_panels(&panels)
}
