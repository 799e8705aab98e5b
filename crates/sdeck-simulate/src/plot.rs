//! Fan charts of simulated quantile bands over time, one panel per state, as SVG.
//!
//! Bands 1–99% and 5–95% are shaded, the median is a solid line, and the closed-form mean,
//! where the caller knows it, is a dashed line. Text is drawn as SVG `<text>` elements:
//! no font file is read, so the chart renders on machines without system fonts.

use crate::report::{Bands, SimulationResult};
use plotters::coord::types::RangedCoordf64;
use plotters::coord::Shift;
use plotters::prelude::*;
use std::fmt;
use std::path::Path;

const PANEL_WIDTH: u32 = 820;
const PANEL_HEIGHT: u32 = 300;
/// A deep blue; bands are the same colour, lighter.
const BAND_COLOUR: RGBColor = RGBColor(31, 84, 160);
const CLOSED_FORM_COLOUR: RGBColor = RGBColor(200, 70, 30);

/// Why a chart could not be drawn or written.
#[derive(Clone, Debug, PartialEq)]
pub enum PlotError {
    /// The simulation recorded no bands (`band_times` was 0).
    NoBands,
    Drawing(String),
    Write {
        path: String,
        message: String,
    },
}

impl fmt::Display for PlotError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            PlotError::NoBands => write!(
                f,
                "the simulation recorded no quantile bands; run it with band times to draw a fan chart"
            ),
            PlotError::Drawing(message) => write!(f, "could not draw the fan chart: {message}"),
            PlotError::Write { path, message } => write!(f, "could not write {path}: {message}"),
        }
    }
}

impl std::error::Error for PlotError {}

fn drawing_error(error: impl fmt::Debug) -> PlotError {
    PlotError::Drawing(format!("{error:?}"))
}

/// Range of finite values, widened a little so bands do not touch the frame.
fn value_range<'a>(values: impl Iterator<Item = &'a f64>) -> (f64, f64) {
    let (low, high) = values
        .filter(|v| v.is_finite())
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), v| {
            (lo.min(*v), hi.max(*v))
        });
    if !low.is_finite() || !high.is_finite() {
        return (0.0, 1.0);
    }
    let span = high - low;
    let pad = if span > 0.0 {
        0.05 * span
    } else {
        0.05 * low.abs().max(1e-9)
    };
    (low - pad, high + pad)
}

/// A band between two quantile columns as a closed polygon, skipping non-finite points.
fn band_polygon(bands: &Bands, state: usize, lower: usize, upper: usize) -> Vec<(f64, f64)> {
    let Some(series) = bands.quantiles.get(state) else {
        return Vec::new();
    };
    let points: Vec<(f64, [f64; 5])> = bands
        .times
        .iter()
        .zip(series)
        .filter(|(_, q)| q[lower].is_finite() && q[upper].is_finite())
        .map(|(t, q)| (*t, *q))
        .collect();
    let mut polygon: Vec<(f64, f64)> = points.iter().map(|(t, q)| (*t, q[upper])).collect();
    polygon.extend(points.iter().rev().map(|(t, q)| (*t, q[lower])));
    polygon
}

/// Renders the fan chart to an SVG string. `closed_form_means[state][time]` are closed-form
/// means on the band grid (`bands.times`), `None` where unknown.
pub fn fan_chart_svg(
    result: &SimulationResult,
    closed_form_means: Option<&[Vec<Option<f64>>]>,
) -> Result<String, PlotError> {
    let bands = result.bands.as_ref().ok_or(PlotError::NoBands)?;
    let panels = result.states.len().max(1);
    let height = PANEL_HEIGHT * u32::try_from(panels).unwrap_or(u32::MAX / PANEL_HEIGHT);
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (PANEL_WIDTH, height)).into_drawing_area();
        root.fill(&WHITE).map_err(drawing_error)?;
        let areas = root.split_evenly((panels, 1));
        let end = bands
            .times
            .last()
            .copied()
            .unwrap_or(result.at)
            .max(f64::MIN_POSITIVE);
        for (index, area) in areas.iter().enumerate().take(result.states.len()) {
            let closed = closed_form_means.and_then(|means| means.get(index));
            draw_panel(area, result, bands, index, closed, end)?;
        }
        root.present().map_err(drawing_error)?;
    }
    Ok(svg)
}

/// A panel's chart: time against value, both on f64 axes.
type Chart<'a, 'b> = ChartContext<'a, SVGBackend<'b>, Cartesian2d<RangedCoordf64, RangedCoordf64>>;

/// The panel of state `index`: its 1–99% and 5–95% bands, median, closed-form mean (where
/// `closed_means` gives one on the band grid) and legend, over [0, end].
fn draw_panel(
    area: &DrawingArea<SVGBackend, Shift>,
    result: &SimulationResult,
    bands: &Bands,
    index: usize,
    closed_means: Option<&Vec<Option<f64>>>,
    end: f64,
) -> Result<(), PlotError> {
    let state = &result.states[index];
    let series = bands.quantiles.get(index).map(Vec::as_slice).unwrap_or(&[]);
    let closed: Vec<(f64, f64)> = closed_means
        .map(|means| {
            bands
                .times
                .iter()
                .zip(means)
                .filter_map(|(t, m)| m.filter(|v| v.is_finite()).map(|v| (*t, v)))
                .collect()
        })
        .unwrap_or_default();
    let (low, high) = value_range(
        series
            .iter()
            .flat_map(|q| q.iter())
            .chain(closed.iter().map(|(_, m)| m)),
    );
    let caption = format!("{}: quantile bands over {} paths", state.name, bands.paths);
    let mut chart = ChartBuilder::on(area)
        .caption(caption, ("sans-serif", 16))
        .margin(12)
        .x_label_area_size(32)
        .y_label_area_size(70)
        .build_cartesian_2d(0.0..end, low..high)
        .map_err(drawing_error)?;
    chart
        .configure_mesh()
        .x_desc(format!("t ({})", result.clock_unit))
        .light_line_style(WHITE)
        .draw()
        .map_err(drawing_error)?;
    draw_bands(&mut chart, bands, index)?;
    draw_lines(&mut chart, bands, series, closed)?;
    chart
        .configure_series_labels()
        .background_style(WHITE.mix(0.85))
        .border_style(BLACK.mix(0.3))
        .position(SeriesLabelPosition::UpperLeft)
        .draw()
        .map_err(drawing_error)
}

/// The 1–99% and 5–95% band polygons of state `index`.
fn draw_bands(chart: &mut Chart, bands: &Bands, index: usize) -> Result<(), PlotError> {
    for (lower, upper, opacity, label) in [(0, 4, 0.18, "1–99%"), (1, 3, 0.32, "5–95%")] {
        let polygon = band_polygon(bands, index, lower, upper);
        if polygon.len() >= 3 {
            chart
                .draw_series(std::iter::once(Polygon::new(
                    polygon,
                    BAND_COLOUR.mix(opacity).filled(),
                )))
                .map_err(drawing_error)?
                .label(label)
                .legend(move |(x, y)| {
                    Rectangle::new(
                        [(x, y - 5), (x + 16, y + 5)],
                        BAND_COLOUR.mix(opacity).filled(),
                    )
                });
        }
    }
    Ok(())
}

/// The median of `series` and, if any, the dashed closed-form mean.
fn draw_lines(
    chart: &mut Chart,
    bands: &Bands,
    series: &[[f64; 5]],
    closed: Vec<(f64, f64)>,
) -> Result<(), PlotError> {
    let median: Vec<(f64, f64)> = bands
        .times
        .iter()
        .zip(series)
        .filter(|(_, q)| q[2].is_finite())
        .map(|(t, q)| (*t, q[2]))
        .collect();
    chart
        .draw_series(LineSeries::new(median, BAND_COLOUR.stroke_width(2)))
        .map_err(drawing_error)?
        .label("median")
        .legend(|(x, y)| PathElement::new([(x, y), (x + 16, y)], BAND_COLOUR.stroke_width(2)));
    if !closed.is_empty() {
        chart
            .draw_series(DashedLineSeries::new(
                closed,
                6,
                4,
                CLOSED_FORM_COLOUR.stroke_width(2),
            ))
            .map_err(drawing_error)?
            .label("closed-form mean")
            .legend(|(x, y)| {
                PathElement::new([(x, y), (x + 16, y)], CLOSED_FORM_COLOUR.stroke_width(2))
            });
    }
    Ok(())
}

/// Writes the fan chart to `path` (see [`fan_chart_svg`]).
pub fn write_fan_chart(
    path: &Path,
    result: &SimulationResult,
    closed_form_means: Option<&[Vec<Option<f64>>]>,
) -> Result<(), PlotError> {
    let svg = fan_chart_svg(result, closed_form_means)?;
    std::fs::write(path, svg).map_err(|e| PlotError::Write {
        path: path.display().to_string(),
        message: e.to_string(),
    })
}
