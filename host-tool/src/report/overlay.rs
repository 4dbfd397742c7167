//! The picture of a bring-up fit, one per capture (SVG, plotters): the
//! capture's samples and the fitted model's trace over them, the span the
//! fit used marked, and the residual (samples less model) below with the
//! capture's noise as a band.

use plotters::prelude::*;

use super::plot::{draw, legend, svg, PlotError, VOLTAGE_COLOUR};
use crate::analysis::fit_capture::span::Span;
use crate::input::capture::Capture;

/// Colour of the capture's samples.
pub const SAMPLE_COLOUR: RGBColor = RGBColor(90, 90, 90);
/// Colour of the residual.
pub const RESIDUAL_COLOUR: RGBColor = RGBColor(214, 39, 40);
/// Shading outside the span the fit used.
const UNUSED_COLOUR: RGBColor = RGBColor(238, 238, 238);

/// The overlay of `model` (volt at the capture's times, NaN where the
/// model does not follow the circuit) on `capture`, `span` the samples
/// fitted, `title` above.
///
/// # Errors
/// [`PlotError::Draw`].
pub fn overlay(
    capture: &Capture,
    model: &[f64],
    span: &Span,
    title: &str,
) -> Result<String, PlotError> {
    let ns = |t: f64| t * 1e9;
    let t = &capture.time_s;
    let (t0, t1) = (
        t.first().copied().unwrap_or(0.0),
        t.last().copied().unwrap_or(1e-9),
    );
    let (lo, hi) = capture
        .switch_v
        .iter()
        .chain(model.iter().filter(|m| m.is_finite()))
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &x| {
            (a.min(x), b.max(x))
        });
    let pad = 0.05 * (hi - lo).max(1e-9);
    let residual: Vec<(f64, f64)> = t
        .iter()
        .zip(&capture.switch_v)
        .zip(model)
        .filter(|(_, m)| m.is_finite())
        .map(|((&x, &v), &m)| (ns(x), v - m))
        .collect();
    let r_max = residual
        .iter()
        .map(|(_, r)| r.abs())
        .fold(3.0 * capture.noise_v, f64::max)
        * 1.1;
    let used = (
        t.get(span.first).copied().unwrap_or(t0),
        t.get(span.ring_end.saturating_sub(1))
            .copied()
            .unwrap_or(t1),
    );
    svg(|root| {
        root.fill(&WHITE).map_err(draw)?;
        let root = root.titled(title, ("sans-serif", 17)).map_err(draw)?;
        let (_, height) = root.dim_in_pixel();
        let (upper, lower) = root.split_vertically(height * 7 / 10);
        let mut chart = ChartBuilder::on(&upper)
            .margin(12)
            .x_label_area_size(20)
            .y_label_area_size(60)
            .build_cartesian_2d(ns(t0)..ns(t1), (lo - pad)..(hi + pad))
            .map_err(draw)?;
        chart
            .configure_mesh()
            .y_desc("switch voltage (V)")
            .light_line_style(RGBColor(235, 235, 235))
            .draw()
            .map_err(draw)?;
        for (a, b) in [(t0, used.0), (used.1, t1)] {
            if b > a {
                chart
                    .draw_series(std::iter::once(Rectangle::new(
                        [(ns(a), lo - pad), (ns(b), hi + pad)],
                        UNUSED_COLOUR.filled(),
                    )))
                    .map_err(draw)?;
            }
        }
        chart
            .draw_series(
                t.iter()
                    .zip(&capture.switch_v)
                    .map(|(&x, &v)| Circle::new((ns(x), v), 1, SAMPLE_COLOUR.filled())),
            )
            .map_err(draw)?
            .label("capture")
            .legend(|(x, y)| Circle::new((x + 10, y), 3, SAMPLE_COLOUR.filled()));
        // The model's trace, broken where it does not follow the circuit.
        let mut runs: Vec<Vec<(f64, f64)>> = vec![Vec::new()];
        for (&x, &m) in t.iter().zip(model) {
            match (m.is_finite(), runs.last_mut()) {
                (true, Some(run)) => run.push((ns(x), m)),
                (false, Some(run)) if !run.is_empty() => runs.push(Vec::new()),
                _ => {}
            }
        }
        let mut first = true;
        for run in runs.into_iter().filter(|r| !r.is_empty()) {
            let s = chart
                .draw_series(LineSeries::new(run, VOLTAGE_COLOUR.stroke_width(2)))
                .map_err(draw)?;
            if first {
                s.label("fitted model").legend(|(x, y)| {
                    PathElement::new(vec![(x, y), (x + 20, y)], VOLTAGE_COLOUR.stroke_width(2))
                });
                first = false;
            }
        }
        legend(&mut chart, SeriesLabelPosition::UpperRight)?;
        let mut res = ChartBuilder::on(&lower)
            .margin(12)
            .margin_top(0)
            .x_label_area_size(45)
            .y_label_area_size(60)
            .build_cartesian_2d(ns(t0)..ns(t1), -r_max..r_max)
            .map_err(draw)?;
        res.configure_mesh()
            .x_desc("time from the turn-off command (ns)")
            .y_desc("residual (V)")
            .y_labels(5)
            .light_line_style(RGBColor(235, 235, 235))
            .draw()
            .map_err(draw)?;
        let band = 2.0 * capture.noise_v;
        res.draw_series(std::iter::once(Rectangle::new(
            [(ns(t0), -band), (ns(t1), band)],
            RGBColor(225, 235, 250).filled(),
        )))
        .map_err(draw)?;
        res.draw_series(
            residual
                .iter()
                .map(|&(x, r)| Circle::new((x, r), 1, RESIDUAL_COLOUR.filled())),
        )
        .map_err(draw)?;
        Ok(())
    })
}
