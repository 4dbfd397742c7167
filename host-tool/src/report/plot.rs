//! Pictures of a design, as SVG (plotters): maps over the operating range
//! of the commanded delay (with the ZVS boundary and the valley region),
//! of the ZVS window's width and of the table's error against the exact
//! model, and one switching cycle at an operating point drawn like a scope
//! capture (switch voltage, inductor current, gate command, the window
//! shaded). Every number comes from timing-core (the transition, the
//! waveform, the table lookup).
//!
//! Over 500 lines: four pictures, each a short function over the same
//! axes, colours and map helpers.

use std::path::{Path, PathBuf};

use plotters::coord::Shift;
use plotters::prelude::*;
use timing_core::waveform::Waveform;
use timing_core::AdcCode;

use crate::generate::generated::Generated;
use crate::model::design::Design;
use crate::model::exact::ExactModel;

/// Size of every picture, pixels.
pub const SIZE: (u32, u32) = (900, 600);
/// Map resolution (cells along Vin and Io).
pub(crate) const NX: usize = 90;
/// See [`NX`].
pub(crate) const NY: usize = 60;

/// Trace colours of the cycle picture (tests look for them).
pub const VOLTAGE_COLOUR: RGBColor = RGBColor(31, 119, 180);
/// See [`VOLTAGE_COLOUR`].
pub const CURRENT_COLOUR: RGBColor = RGBColor(214, 39, 40);
/// See [`VOLTAGE_COLOUR`].
pub const GATE_COLOUR: RGBColor = RGBColor(44, 160, 44);
/// Shading of the ZVS window.
pub const WINDOW_COLOUR: RGBColor = RGBColor(200, 235, 200);
/// The valley region of the maps.
pub const VALLEY_COLOUR: RGBColor = RGBColor(190, 190, 190);

/// Why a picture could not be drawn.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum PlotError {
    /// Drawing failed (the plotting library's message).
    #[error("drawing: {0}")]
    Draw(String),
    /// timing-core refused a point.
    #[error(transparent)]
    Model(#[from] timing_core::Error),
    /// Table generation failed.
    #[error("{0}")]
    Generate(String),
    /// Writing a file failed.
    #[error("{path}: {message}")]
    Io {
        /// The file.
        path: String,
        /// The error.
        message: String,
    },
}

pub(crate) fn draw<E: std::fmt::Debug>(e: E) -> PlotError {
    PlotError::Draw(format!("{e:?}"))
}

/// The legend of `chart`'s labelled series at `at`, on a light box.
pub(crate) fn legend<'a, DB: DrawingBackend + 'a, CT: CoordTranslate>(
    chart: &mut ChartContext<'a, DB, CT>,
    at: SeriesLabelPosition,
) -> Result<(), PlotError> {
    chart
        .configure_series_labels()
        .position(at)
        .background_style(WHITE.mix(0.85))
        .border_style(BLACK)
        .draw()
        .map_err(draw)
}

/// A perceptually ordered colour scale (dark blue, teal, green, yellow) at
/// `f` in 0..=1.
#[must_use]
pub fn scale(f: f64) -> RGBColor {
    const STOPS: [(f64, (u8, u8, u8)); 5] = [
        (0.0, (68, 1, 84)),
        (0.25, (59, 82, 139)),
        (0.5, (33, 145, 140)),
        (0.75, (94, 201, 98)),
        (1.0, (253, 231, 37)),
    ];
    let f = if f.is_finite() {
        f.clamp(0.0, 1.0)
    } else {
        0.0
    };
    let k = STOPS.iter().rposition(|s| s.0 <= f).unwrap_or(0).min(3);
    let ((f0, a), (f1, b)) = (STOPS[k], STOPS[k + 1]);
    let t = (f - f0) / (f1 - f0);
    let mix = |x: u8, y: u8| (f64::from(x) + t * (f64::from(y) - f64::from(x))).round() as u8;
    RGBColor(mix(a.0, b.0), mix(a.1, b.1), mix(a.2, b.2))
}

/// Values of a map on its grid: `None` where the cell has none (valley).
pub(crate) struct Grid {
    /// The horizontal axis's range.
    pub(crate) vin: (f64, f64),
    /// The vertical axis's range.
    pub(crate) io: (f64, f64),
    /// Row-major from the bottom row, [`NX`] a row.
    pub(crate) values: Vec<Option<f64>>,
}

/// What a map's axes and line say: the axis descriptions, and a line
/// across the map (the ZVS boundary) with its legend.
pub(crate) struct MapLabels<'a> {
    /// Horizontal axis.
    pub(crate) x: &'a str,
    /// Vertical axis.
    pub(crate) y: &'a str,
    /// The line's points.
    pub(crate) line: Vec<(f64, f64)>,
    /// Its legend.
    pub(crate) line_label: &'a str,
    /// Where the legend sits (away from the line).
    pub(crate) legend_at: SeriesLabelPosition,
}

/// The cell's labels over `design`'s range.
fn cell_labels(design: &Design) -> Result<MapLabels<'static>, PlotError> {
    Ok(MapLabels {
        x: "input voltage Vin (V)",
        y: "output current Io (A)",
        line: boundary(design)?,
        line_label: "ZVS boundary (J = 1); grey below: valley fallback",
        legend_at: SeriesLabelPosition::UpperLeft,
    })
}

impl Grid {
    fn cell_bounds(&self, ix: usize, iy: usize) -> ((f64, f64), (f64, f64)) {
        let dx = (self.vin.1 - self.vin.0) / NX as f64;
        let dy = (self.io.1 - self.io.0) / NY as f64;
        let x = self.vin.0 + dx * ix as f64;
        let y = self.io.0 + dy * iy as f64;
        ((x, y), (x + dx, y + dy))
    }

    pub(crate) fn centre(&self, ix: usize, iy: usize) -> (f64, f64) {
        let ((x0, y0), (x1, y1)) = self.cell_bounds(ix, iy);
        ((x0 + x1) / 2.0, (y0 + y1) / 2.0)
    }
}

/// The ZVS boundary over the design's input range: (Vin, Io at J = 1).
fn boundary(design: &Design) -> Result<Vec<(f64, f64)>, PlotError> {
    (0..=NX)
        .map(|k| {
            let vin = design.vin_v.0 + (design.vin_v.1 - design.vin_v.0) * k as f64 / NX as f64;
            let io = crate::analysis::size::zvs_boundary_current_a(
                design.topology,
                design.vout_v,
                design.tank.z0_ohm(),
                vin,
                design.io_a,
            )?;
            Ok((vin, io))
        })
        .collect()
}

/// Draw a map of `grid` with a colour bar titled `unit`.
pub(crate) fn map(
    area: &DrawingArea<SVGBackend<'_>, Shift>,
    labels: &MapLabels<'_>,
    grid: &Grid,
    title: &str,
    unit: &str,
) -> Result<(), PlotError> {
    area.fill(&WHITE).map_err(draw)?;
    let (plot, bar) = area.split_horizontally(SIZE.0 - 130);
    let (lo, hi) = grid
        .values
        .iter()
        .flatten()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &v| {
            (a.min(v), b.max(v))
        });
    let (lo, hi) = if lo.is_finite() && hi > lo {
        (lo, hi)
    } else {
        (0.0, 1.0)
    };
    let mut chart = ChartBuilder::on(&plot)
        .caption(title, ("sans-serif", 20))
        .margin(12)
        .x_label_area_size(45)
        .y_label_area_size(60)
        .build_cartesian_2d(grid.vin.0..grid.vin.1, grid.io.0..grid.io.1)
        .map_err(draw)?;
    let mut cells = Vec::with_capacity(NX * NY);
    for iy in 0..NY {
        for ix in 0..NX {
            let (a, b) = grid.cell_bounds(ix, iy);
            let colour = match grid.values[iy * NX + ix] {
                Some(v) => scale((v - lo) / (hi - lo)),
                None => VALLEY_COLOUR,
            };
            cells.push(Rectangle::new([a, b], colour.filled()));
        }
    }
    chart.draw_series(cells).map_err(draw)?;
    // A light grid over the map, the major lines only.
    chart
        .configure_mesh()
        .bold_line_style(WHITE.mix(0.35))
        .light_line_style(TRANSPARENT)
        .x_desc(labels.x)
        .y_desc(labels.y)
        .label_style(("sans-serif", 14))
        .draw()
        .map_err(draw)?;
    chart
        .draw_series(LineSeries::new(labels.line.clone(), BLACK.stroke_width(2)))
        .map_err(draw)?
        .label(labels.line_label)
        .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], BLACK.stroke_width(2)));
    legend(&mut chart, labels.legend_at.clone())?;
    // Colour bar.
    let mut bar_chart = ChartBuilder::on(&bar)
        .margin_top(45)
        .margin_bottom(57)
        .margin_right(10)
        .y_label_area_size(70)
        .caption(unit, ("sans-serif", 16))
        .build_cartesian_2d(0.0..1.0, lo..hi)
        .map_err(draw)?;
    bar_chart
        .configure_mesh()
        .disable_mesh()
        .disable_x_axis()
        .y_label_style(("sans-serif", 15))
        .draw()
        .map_err(draw)?;
    let n = 100;
    bar_chart
        .draw_series((0..n).map(|k| {
            let a = lo + (hi - lo) * k as f64 / n as f64;
            let b = lo + (hi - lo) * (k + 1) as f64 / n as f64;
            Rectangle::new(
                [(0.0, a), (1.0, b)],
                scale((k as f64 + 0.5) / n as f64).filled(),
            )
        }))
        .map_err(draw)?;
    Ok(())
}

fn grid_of(
    design: &Design,
    f: impl Fn(f64, f64) -> Result<Option<f64>, PlotError>,
) -> Result<Grid, PlotError> {
    let mut g = Grid {
        vin: design.vin_v,
        io: design.io_a,
        values: Vec::with_capacity(NX * NY),
    };
    for iy in 0..NY {
        for ix in 0..NX {
            let (vin, io) = g.centre(ix, iy);
            let v = f(vin, io)?;
            g.values.push(v);
        }
    }
    Ok(g)
}

pub(crate) fn svg(
    draw_fn: impl FnOnce(&DrawingArea<SVGBackend<'_>, Shift>) -> Result<(), PlotError>,
) -> Result<String, PlotError> {
    let mut s = String::new();
    {
        let root = SVGBackend::with_string(&mut s, SIZE).into_drawing_area();
        draw_fn(&root)?;
        root.present().map_err(draw)?;
    }
    Ok(s)
}

/// Map of the commanded delay (ticks) over the operating range; the valley
/// region, below the ZVS boundary, in grey.
///
/// # Errors
/// [`PlotError`].
pub fn delay_map(design: &Design) -> Result<String, PlotError> {
    let model = ExactModel::new(design);
    let g = grid_of(design, |vin, io| {
        let p = model.at(vin, io)?;
        Ok(p.window.map(|_| p.ticks))
    })?;
    svg(|a| {
        map(
            a,
            &cell_labels(design)?,
            &g,
            &format!("{}: commanded turn-on delay", design.name),
            "ticks",
        )
    })
}

/// Map of the ZVS window's width (ticks).
///
/// # Errors
/// [`PlotError`].
pub fn window_map(design: &Design) -> Result<String, PlotError> {
    let model = ExactModel::new(design);
    let clock = design.timer.clock_hz();
    let g = grid_of(design, |vin, io| {
        Ok(model.at(vin, io)?.window.map(|w| w.width_s() * clock))
    })?;
    svg(|a| {
        map(
            a,
            &cell_labels(design)?,
            &g,
            &format!("{}: ZVS window width", design.name),
            "ticks",
        )
    })
}

/// Map of the generated table's error against the exact model (ticks),
/// the largest over the ADC code pairs in each cell (every pair of the
/// design range is evaluated, as `verify` does).
///
/// # Errors
/// [`PlotError`].
pub fn error_map(design: &Design) -> Result<String, PlotError> {
    let out = crate::generate::generate(design).map_err(|e| PlotError::Generate(e.to_string()))?;
    error_map_of(design, &out.table)
}

/// [`error_map`] of a table already made (`zvs-timing plot --table`: read
/// from its blob, not generated again).
///
/// # Errors
/// [`PlotError`].
pub fn error_map_of(design: &Design, generated: &Generated) -> Result<String, PlotError> {
    let table = generated
        .table()
        .map_err(|e| PlotError::Generate(e.to_string()))?;
    let model = ExactModel::new(design);
    let (v, i) = (design.vin_codes, design.io_codes);
    let span =
        |x: f64, (a, b): (f64, f64), n: usize| (((x - a) / (b - a) * n as f64) as usize).min(n - 1);
    // A row of voltage codes at a time, on all cores: each row's worst per
    // picture cell, merged.
    let rows = crate::par::map_rows(v.len() as usize, |k| {
        let cv = v.lo + k as u16;
        let row = model.row_at_code(cv);
        let mut worst = vec![None::<f64>; NX * NY];
        for ci in i.lo..=i.hi {
            let Ok(p) = row.at_code(ci) else {
                continue;
            };
            let got = f64::from(table.delay(AdcCode::new(cv), AdcCode::new(ci)).ticks.get());
            let e = (got - p.ticks).abs();
            let k = span(design.io_of(ci), design.io_a, NY) * NX
                + span(design.vin_of(cv), design.vin_v, NX);
            worst[k] = Some(worst[k].map_or(e, |w: f64| w.max(e)));
        }
        worst
    });
    let mut worst = vec![None::<f64>; NX * NY];
    for row in rows {
        for (w, r) in worst.iter_mut().zip(row) {
            if let Some(e) = r {
                *w = Some(w.map_or(e, |x: f64| x.max(e)));
            }
        }
    }
    let g = Grid {
        vin: design.vin_v,
        io: design.io_a,
        values: worst,
    };
    svg(|a| {
        map(
            a,
            &cell_labels(design)?,
            &g,
            &format!(
                "{}: table error against the exact model ({} layout, {} bytes)",
                design.name,
                generated.layout_name(),
                generated.table_bytes()
            ),
            "ticks",
        )
    })
}

/// The default operating point of the cycle picture: the middle input
/// voltage and the load at J = 1.5 (clamped to the design's range).
#[must_use]
pub fn default_point(design: &Design) -> (f64, f64) {
    let vin = (design.vin_v.0 + design.vin_v.1) / 2.0;
    let io = crate::analysis::size::zvs_boundary_current_a(
        design.topology,
        design.vout_v,
        design.tank.z0_ohm(),
        vin,
        design.io_a,
    )
    .map_or(design.io_a.1, |b| {
        (1.5 * b).clamp(design.io_a.0, design.io_a.1)
    });
    (vin, io)
}

/// One switching transition at (`vin_v`, `io_a`) with the design's
/// commanded turn-on: switch voltage and inductor current against time,
/// the gate command, and the ZVS window shaded.
///
/// # Errors
/// [`PlotError`].
pub fn cycle(design: &Design, vin_v: f64, io_a: f64) -> Result<String, PlotError> {
    let cell = design.cell(vin_v, io_a)?;
    let solver = ExactModel::new(design).solver();
    let t = solver.transition(&cell)?;
    let ticks = match (t.turn_on.window(), design.fallback) {
        (None, timing_core::table::Fallback::Fixed(n)) => n,
        _ => design
            .timer
            .command_for(&t.turn_on, design.position)?
            .ticks(),
    };
    let on = design.timer.turn_on_s(ticks);
    let ramp_end = t.turn_on.ramp_end_s();
    let (t0, t1) = (-0.15 * ramp_end, 1.25 * ramp_end.max(on));
    let n = 1200;
    let times: Vec<f64> = (0..=n)
        .map(|k| t0 + (t1 - t0) * f64::from(k) / f64::from(n))
        .collect();
    // The closed-form waveform of the ideal cell, or the ring's.
    let samples: Vec<timing_core::waveform::WaveSample<f64>> = match solver {
        crate::tank::real_tank::CellSolver::Ideal(tank) => {
            let w = Waveform::new(&tank, &cell, on)?;
            times.iter().map(|&s| w.at(s)).collect()
        }
        crate::tank::real_tank::CellSolver::Ring(ring) => {
            let mut out = vec![
                timing_core::waveform::WaveSample {
                    switch_voltage_v: f64::NAN,
                    inductor_current_a: f64::NAN,
                    gate_on: false,
                };
                times.len()
            ];
            ring.waveform(&cell, on, &times, &mut out)?;
            out
        }
    };
    let points = |f: fn(&timing_core::waveform::WaveSample<f64>) -> f64| {
        times
            .iter()
            .zip(&samples)
            .map(move |(&s, w)| (s * 1e9, f(w)))
            .filter(|p| p.1.is_finite())
            .collect::<Vec<_>>()
    };
    let ns = |s: f64| s * 1e9;
    let v_peak = t.peak_switch_voltage_v;
    let v_top = 1.3 * v_peak;
    let i_max = cell.i_amp() * 1.3;
    let turn_on = if t.turn_on.window().is_some() {
        format!("ZVS turn-on after {} ticks", ticks.get())
    } else {
        format!("no ZVS: valley turn-on after {} ticks", ticks.get())
    };
    svg(|root| {
        root.fill(&WHITE).map_err(draw)?;
        let root = root
            .titled(
                &format!(
                    "{}: one transition at Vin = {vin_v:.1} V, Io = {io_a:.2} A (J = {:.3}), {turn_on}",
                    design.name,
                    design.tank.normalized_load(&cell),
                ),
                ("sans-serif", 18),
            )
            .map_err(draw)?;
        // The waveforms above, the gate command in its own lane below.
        let (_, height) = root.dim_in_pixel();
        let (upper, lane) = root.split_vertically(height * 4 / 5);
        let mut chart = ChartBuilder::on(&upper)
            .margin(12)
            .x_label_area_size(20)
            .y_label_area_size(60)
            .right_y_label_area_size(60)
            .build_cartesian_2d(ns(t0)..ns(t1), -0.05 * v_top..v_top)
            .map_err(draw)?
            .set_secondary_coord(ns(t0)..ns(t1), -i_max..i_max);
        chart
            .configure_mesh()
            .y_desc("switch voltage (V)")
            .light_line_style(RGBColor(235, 235, 235))
            .draw()
            .map_err(draw)?;
        chart
            .configure_secondary_axes()
            .y_desc("inductor current (A)")
            .draw()
            .map_err(draw)?;
        if let Some(win) = t.turn_on.window() {
            chart
                .draw_series(std::iter::once(Rectangle::new(
                    [(ns(win.open_s), -0.05 * v_top), (ns(win.close_s), v_top)],
                    WINDOW_COLOUR.filled(),
                )))
                .map_err(draw)?
                .label("ZVS window")
                .legend(|(x, y)| {
                    Rectangle::new([(x, y - 5), (x + 20, y + 5)], WINDOW_COLOUR.filled())
                });
        }
        chart
            .draw_series(LineSeries::new(
                points(|w| w.switch_voltage_v),
                VOLTAGE_COLOUR.stroke_width(2),
            ))
            .map_err(draw)?
            .label("switch voltage")
            .legend(|(x, y)| {
                PathElement::new(vec![(x, y), (x + 20, y)], VOLTAGE_COLOUR.stroke_width(2))
            });
        chart
            .draw_secondary_series(LineSeries::new(
                points(|w| w.inductor_current_a),
                CURRENT_COLOUR.stroke_width(2),
            ))
            .map_err(draw)?
            .label("inductor current")
            .legend(|(x, y)| {
                PathElement::new(vec![(x, y), (x + 20, y)], CURRENT_COLOUR.stroke_width(2))
            });
        legend(&mut chart, SeriesLabelPosition::UpperRight)?;
        // The gate command: off (0) or on (1), on the same time axis.
        let mut gate = ChartBuilder::on(&lane)
            .margin(12)
            .margin_top(0)
            .x_label_area_size(45)
            .y_label_area_size(60)
            .right_y_label_area_size(60)
            .build_cartesian_2d(ns(t0)..ns(t1), -0.2..1.2)
            .map_err(draw)?;
        gate.configure_mesh()
            .x_desc("time from gate turn-off (ns)")
            .y_desc("gate")
            .y_labels(2)
            .y_label_formatter(&|v| if *v > 0.5 { "on".into() } else { "off".into() })
            .label_style(("sans-serif", 13))
            .axis_desc_style(("sans-serif", 15))
            .light_line_style(RGBColor(235, 235, 235))
            .draw()
            .map_err(draw)?;
        gate.draw_series(LineSeries::new(
            times
                .iter()
                .zip(&samples)
                .map(|(&s, w)| (ns(s), if w.gate_on { 1.0 } else { 0.0 })),
            GATE_COLOUR.stroke_width(2),
        ))
        .map_err(draw)?;
        Ok(())
    })
}

/// Write `delay_map.svg`, `window_map.svg`, `error_map.svg` and `cycle.svg`
/// of `design` into `dir` (created), the cycle at `point` or
/// [`default_point`].
///
/// # Errors
/// [`PlotError`].
pub fn write_all(
    design: &Design,
    dir: &Path,
    point: Option<(f64, f64)>,
) -> Result<Vec<PathBuf>, PlotError> {
    write_all_with(design, dir, point, None)
}

/// [`write_all`] with the table of the error map given (`None`: generated).
///
/// # Errors
/// [`PlotError`].
pub fn write_all_with(
    design: &Design,
    dir: &Path,
    point: Option<(f64, f64)>,
    table: Option<&Generated>,
) -> Result<Vec<PathBuf>, PlotError> {
    std::fs::create_dir_all(dir).map_err(|e| PlotError::Io {
        path: dir.display().to_string(),
        message: e.to_string(),
    })?;
    let (vin, io) = point.unwrap_or_else(|| default_point(design));
    let files = [
        ("delay_map.svg", delay_map(design)?),
        ("window_map.svg", window_map(design)?),
        (
            "error_map.svg",
            match table {
                Some(g) => error_map_of(design, g)?,
                None => error_map(design)?,
            },
        ),
        ("cycle.svg", cycle(design, vin, io)?),
    ];
    let mut written = Vec::new();
    for (name, text) in files {
        let path = dir.join(name);
        std::fs::write(&path, text).map_err(|e| PlotError::Io {
            path: path.display().to_string(),
            message: e.to_string(),
        })?;
        written.push(path);
    }
    Ok(written)
}
