//! Pictures of a half-bridge leg's edge, as SVG (plotters): a map of the
//! commanded dead time over the bus voltage and the current (grey where
//! the swing stops short), and the windows along the current at one bus
//! voltage (the nominal window, the robust one, and where the table turns
//! the incoming switch on). Every number comes from timing-core (the leg's
//! edge, the table's lookup) through the leg's model.

use std::path::{Path, PathBuf};

use plotters::prelude::*;
use timing_core::leg::Edge;
use timing_core::table::DelayTable;
use timing_core::AdcCode;

use crate::input::leg_design::{edge_index, edge_name, LegSpec};
use crate::model::leg_model::LegModel;
use crate::report::plot::{
    draw, legend, map, svg, Grid, MapLabels, PlotError, CURRENT_COLOUR, NX, NY, VOLTAGE_COLOUR,
    WINDOW_COLOUR,
};

/// Points along the current in the window picture.
const POINTS: usize = 400;

/// The codes of a reading (nearest), clamped to the ADC.
fn codes(spec: &LegSpec, vbus: f64, current: f64) -> (AdcCode, AdcCode) {
    let max = f64::from((1u32 << spec.adc_bits) - 1);
    let c = |x: f64| AdcCode::new(x.round().clamp(0.0, max) as u16);
    (
        c(vbus / spec.vbus_volts_per_code),
        c(current / spec.current_amps_per_code + f64::from(spec.current_zero_code)),
    )
}

/// Map of `table`'s dead time (steps) for `edge` over the design's bus and
/// current ranges; grey where the nominal swing stops short.
///
/// # Errors
/// [`PlotError`].
pub fn dead_time_map(
    spec: &LegSpec,
    edge: Edge,
    table: &DelayTable<&[u16]>,
) -> Result<String, PlotError> {
    let leg = spec.built.leg()?;
    let mut g = Grid {
        vin: spec.vbus_v,
        io: spec.current_a[edge_index(edge)],
        values: Vec::with_capacity(NX * NY),
    };
    for iy in 0..NY {
        for ix in 0..NX {
            let (v, i) = g.centre(ix, iy);
            let point = timing_core::leg::LegPoint::new(v, i, spec.built.far_v(v, 1.0))?;
            let zvs = leg.edge(edge, &point)?.turn_on.window().is_some();
            let (cv, ci) = codes(spec, v, i);
            g.values
                .push(zvs.then(|| f64::from(table.delay(cv, ci).ticks.get())));
        }
    }
    // The line: where the swing stops completing, per bus voltage (the
    // first map cell along the current whose swing completes, from the
    // short side), when it lies inside the range.
    let mut line = Vec::new();
    for ix in 0..NX {
        let col: Vec<bool> = (0..NY).map(|iy| g.values[iy * NX + ix].is_some()).collect();
        if let Some(k) = col.windows(2).position(|w| w[0] != w[1]) {
            line.push((
                g.centre(ix, k).0,
                0.5 * (g.centre(ix, k).1 + g.centre(ix, k + 1).1),
            ));
        }
    }
    let labels = MapLabels {
        x: "bus voltage Vbus (V)",
        y: "current out of the node at the instant (A)",
        line,
        line_label: "where the swing stops completing; grey: the fallback",
        // Away from the short side: the small currents of the edge's
        // direction (the top of the rising edge's map, the bottom of the
        // falling edge's).
        legend_at: match edge {
            Edge::Falling => SeriesLabelPosition::UpperRight,
            Edge::Rising => SeriesLabelPosition::LowerRight,
        },
    };
    svg(|a| {
        map(
            a,
            &labels,
            &g,
            &format!(
                "{}: {} edge's dead time (table)",
                spec.name,
                edge_name(edge)
            ),
            "steps",
        )
    })
}

/// The windows of `edge` along the current at bus `vbus_v` volt, ns after
/// the outgoing switch turns off: the nominal window shaded, the robust
/// window's edges, and the table's turn-on instant.
///
/// # Errors
/// [`PlotError`].
pub fn window_picture(
    spec: &LegSpec,
    edge: Edge,
    table: &DelayTable<&[u16]>,
    vbus_v: f64,
) -> Result<String, PlotError> {
    let (i0, i1) = spec.current_a[edge_index(edge)];
    let model = LegModel::over(spec, edge, (vbus_v, vbus_v), (i0, i1))?;
    let timer = spec.timer.edge_timer(edge);
    let ns = |steps: f64| (steps / timer.clock_hz() + timer.lead_s()) * 1e9;
    let mut rows = Vec::with_capacity(POINTS);
    for k in 0..POINTS {
        let i = i0 + (i1 - i0) * k as f64 / (POINTS - 1) as f64;
        let p = model.at(vbus_v, i)?;
        let (cv, ci) = codes(spec, vbus_v, i);
        let on = ns(f64::from(table.delay(cv, ci).ticks.get()));
        rows.push((
            i,
            p.nominal.map(|w| (ns(w.0), ns(w.1))),
            p.robust.map(|w| (ns(w.0), ns(w.1))),
            on,
        ));
    }
    let top = rows
        .iter()
        .map(|r| r.1.map_or(r.3, |w| w.1.max(r.3)))
        .fold(1.0f64, f64::max)
        * 1.08;
    svg(|area| {
        area.fill(&WHITE).map_err(draw)?;
        let mut chart = ChartBuilder::on(area)
            .caption(
                format!(
                    "{}: {} edge at Vbus = {vbus_v} V (turn-on after the outgoing switch turns off)",
                    spec.name,
                    edge_name(edge)
                ),
                ("sans-serif", 18),
            )
            .margin(12)
            .x_label_area_size(45)
            .y_label_area_size(60)
            .build_cartesian_2d(i0..i1, 0.0..top)
            .map_err(draw)?;
        chart
            .configure_mesh()
            .x_desc("current out of the node at the instant (A)")
            .y_desc("time (ns)")
            .label_style(("sans-serif", 14))
            .draw()
            .map_err(draw)?;
        let step = (i1 - i0) / (POINTS - 1) as f64;
        chart
            .draw_series(rows.iter().filter_map(|r| {
                r.1.map(|w| {
                    Rectangle::new(
                        [(r.0 - step / 2.0, w.0), (r.0 + step / 2.0, w.1)],
                        WINDOW_COLOUR.filled(),
                    )
                })
            }))
            .map_err(draw)?
            .label("nominal ZVS window")
            .legend(|(x, y)| Rectangle::new([(x, y - 5), (x + 20, y + 5)], WINDOW_COLOUR.filled()));
        for (which, name) in [(0usize, "robust window (the tolerances)"), (1, "")] {
            let pts: Vec<(f64, f64)> = rows
                .iter()
                .filter_map(|r| r.2.map(|w| (r.0, if which == 0 { w.0 } else { w.1 })))
                .collect();
            let s = chart
                .draw_series(
                    pts.into_iter()
                        .map(|p| Circle::new(p, 1, VOLTAGE_COLOUR.filled())),
                )
                .map_err(draw)?;
            if !name.is_empty() {
                s.label(name)
                    .legend(|(x, y)| Circle::new((x + 10, y), 3, VOLTAGE_COLOUR.filled()));
            }
        }
        chart
            .draw_series(LineSeries::new(
                rows.iter().map(|r| (r.0, r.3)),
                CURRENT_COLOUR.stroke_width(2),
            ))
            .map_err(draw)?
            .label("the table's turn-on")
            .legend(|(x, y)| {
                PathElement::new(vec![(x, y), (x + 20, y)], CURRENT_COLOUR.stroke_width(2))
            });
        // Where the windows are early: the large currents of the edge.
        legend(
            &mut chart,
            match edge {
                Edge::Falling => SeriesLabelPosition::UpperRight,
                Edge::Rising => SeriesLabelPosition::UpperLeft,
            },
        )
    })
}

/// Write both pictures of each edge whose table is given into `dir`:
/// `<name>_<edge>_dead_time_map.svg` and `<name>_<edge>_windows.svg` (at
/// `vbus_v`, default mid-range); the paths written.
///
/// # Errors
/// [`PlotError`].
pub fn write_leg_plots(
    spec: &LegSpec,
    dir: &Path,
    tables: &[(Edge, DelayTable<&[u16]>)],
    vbus_v: Option<f64>,
) -> Result<Vec<PathBuf>, PlotError> {
    std::fs::create_dir_all(dir).map_err(|e| PlotError::Io {
        path: dir.display().to_string(),
        message: e.to_string(),
    })?;
    let v = vbus_v.unwrap_or(0.5 * (spec.vbus_v.0 + spec.vbus_v.1));
    let mut written = Vec::new();
    for (edge, table) in tables {
        let e = edge_name(*edge);
        for (name, text) in [
            (
                format!("{}_{e}_dead_time_map.svg", spec.name),
                dead_time_map(spec, *edge, table)?,
            ),
            (
                format!("{}_{e}_windows.svg", spec.name),
                window_picture(spec, *edge, table, v)?,
            ),
        ] {
            let path = dir.join(name);
            std::fs::write(&path, text).map_err(|err| PlotError::Io {
                path: path.display().to_string(),
                message: err.to_string(),
            })?;
            written.push(path);
        }
    }
    Ok(written)
}
