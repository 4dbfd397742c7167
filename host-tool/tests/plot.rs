//! `zvs-timing plot`: every SVG renders (resvg) and shows its data: the
//! maps' colour cells, the boundary and the valley region; the cycle's
//! traces and the shaded window at the places the model puts them.

#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)]

mod common;

use std::path::Path;

use host_tool::model::design::Design;
use host_tool::report::plot::{
    self, CURRENT_COLOUR, GATE_COLOUR, SIZE, VALLEY_COLOUR, VOLTAGE_COLOUR, WINDOW_COLOUR,
};
use plotters::style::RGBColor;
use resvg::{tiny_skia, usvg};

fn demo() -> Design {
    Design::load(&Path::new(env!("CARGO_MANIFEST_DIR")).join("../tables/winch_aux.toml")).unwrap()
}

/// Render an SVG to pixels.
fn render(svg: &str) -> tiny_skia::Pixmap {
    let tree = usvg::Tree::from_str(svg, &usvg::Options::default()).unwrap();
    let mut pix = tiny_skia::Pixmap::new(SIZE.0, SIZE.1).unwrap();
    pix.fill(tiny_skia::Color::WHITE);
    resvg::render(&tree, tiny_skia::Transform::default(), &mut pix.as_mut());
    if let Ok(dir) = std::env::var("ZVS_PLOT_DUMP") {
        let n = svg.len();
        let _ = pix.save_png(Path::new(&dir).join(format!("plot-{n}.png")));
    }
    pix
}

fn near(p: tiny_skia::PremultipliedColorU8, c: RGBColor, tol: i32) -> bool {
    (i32::from(p.red()) - i32::from(c.0)).abs() <= tol
        && (i32::from(p.green()) - i32::from(c.1)).abs() <= tol
        && (i32::from(p.blue()) - i32::from(c.2)).abs() <= tol
}

fn count(pix: &tiny_skia::Pixmap, c: RGBColor, tol: i32) -> usize {
    pix.pixels().iter().filter(|p| near(**p, c, tol)).count()
}

#[test]
fn maps_render_with_their_data() {
    let d = demo();
    for (name, svg) in [
        ("delay", plot::delay_map(&d).unwrap()),
        ("window", plot::window_map(&d).unwrap()),
        ("error", plot::error_map(&d).unwrap()),
    ] {
        let pix = render(&svg);
        // Colour-scale cells: many distinct colours that are not grey.
        let mut colours = std::collections::BTreeSet::new();
        let mut scale_pixels = 0;
        for p in pix.pixels() {
            let (r, g, b) = (p.red(), p.green(), p.blue());
            if !(r == g && g == b) {
                colours.insert((r, g, b));
                scale_pixels += 1;
            }
        }
        println!(
            "{name} map: {} colours, {scale_pixels} coloured pixels",
            colours.len()
        );
        assert!(colours.len() > 40, "{name}: {} colours", colours.len());
        assert!(scale_pixels > 100_000, "{name}: {scale_pixels}");
        // The valley region (below the ZVS boundary) is grey on the delay
        // and window maps; the boundary is a black line.
        if name != "error" {
            assert!(
                count(&pix, VALLEY_COLOUR, 2) > 20_000,
                "{name}: valley region missing"
            );
        }
        assert!(
            count(&pix, RGBColor(0, 0, 0), 40) > 500,
            "{name}: boundary line missing"
        );
    }
}

#[test]
fn the_cycle_shows_traces_and_the_window_where_the_model_puts_them() {
    let d = demo();
    let (vin, io) = plot::default_point(&d);
    let pix = render(&plot::cycle(&d, vin, io).unwrap());
    for (what, c, min) in [
        ("switch voltage", VOLTAGE_COLOUR, 800),
        ("inductor current", CURRENT_COLOUR, 800),
        ("gate command", GATE_COLOUR, 400),
        ("window shading", WINDOW_COLOUR, 5_000),
    ] {
        let n = count(&pix, c, 12);
        println!("{what}: {n} pixels");
        assert!(n >= min, "{what}: only {n} pixels");
    }
    // The shading sits where the model's window is: its columns span a
    // fraction of the plot width equal to the window's share of the time axis.
    // (Rows in the middle of the plot, clear of the legend's swatch.)
    let cols: Vec<u32> = (0..SIZE.0)
        .filter(|&x| {
            (SIZE.1 / 3..2 * SIZE.1 / 3).any(|y| near(pix.pixel(x, y).unwrap(), WINDOW_COLOUR, 6))
        })
        .collect();
    let t = timing_core::Transition::new(&d.tank, &d.cell(vin, io).unwrap()).unwrap();
    let w = t.window().unwrap();
    let ramp_end = w.ramp_end_s;
    let on = d
        .timer
        .turn_on_s(d.timer.command(&t, d.position).unwrap().ticks());
    let span = 1.25 * ramp_end.max(on) + 0.15 * ramp_end;
    let share = (w.close_s - w.open_s) / span;
    let width = f64::from(cols.last().unwrap() - cols.first().unwrap());
    // Plot area: picture width less the two label areas and margins.
    let plot_width = f64::from(SIZE.0) - 2.0 * 60.0 - 2.0 * 12.0;
    assert!(
        (width / plot_width - share).abs() < 0.02,
        "window shading {width} px of {plot_width}: {} vs {share}",
        width / plot_width
    );
}

#[test]
fn the_command_writes_four_pictures() {
    let dir = std::env::temp_dir().join(format!("zvs-plot-{}", std::process::id()));
    common::run(
        common::zvs_timing()
            .args(["plot", "tables/winch_aux.toml", "--out"])
            .arg(&dir),
    )
    .ok();
    for f in [
        "delay_map.svg",
        "window_map.svg",
        "error_map.svg",
        "cycle.svg",
    ] {
        let text = std::fs::read_to_string(dir.join(f)).unwrap();
        assert!(text.starts_with("<svg"), "{f}");
    }
    let out = common::run(
        common::zvs_timing()
            .arg("plot")
            .arg(Path::new(env!("CARGO_MANIFEST_DIR")).join("../tables/winch_aux.toml"))
            .args(["--out", "/tmp/unused", "--vin", "48"]),
    );
    assert_eq!(out.code, 2);
}

#[test]
fn the_readme_pictures_are_fresh() {
    // docs/ holds the README's map and transition of the demo design,
    // generated by `zvs-timing plot tables/winch_aux.toml --out docs`.
    let d = demo();
    let docs = Path::new(env!("CARGO_MANIFEST_DIR")).join("../docs");
    let (vin, io) = plot::default_point(&d);
    for (file, fresh) in [
        ("delay_map.svg", plot::delay_map(&d).unwrap()),
        ("cycle.svg", plot::cycle(&d, vin, io).unwrap()),
    ] {
        let committed = std::fs::read_to_string(docs.join(file)).unwrap();
        assert!(
            committed == fresh,
            "docs/{file} is stale: regenerate with `cargo run --release -p host-tool -- plot tables/winch_aux.toml --out docs` (then remove window_map.svg and error_map.svg)"
        );
    }
}

#[test]
fn the_cycle_says_valley_below_the_boundary_and_draws_the_gate_in_its_own_lane() {
    let d = demo();
    // 40 V, 2 A is below the demo's boundary (about 3.3 A at 40 V).
    let below = plot::cycle(&d, 40.0, 2.0).unwrap();
    assert!(below.contains("no ZVS: valley turn-on"), "title");
    let above = plot::cycle(&d, 48.0, 6.0).unwrap();
    assert!(above.contains("ZVS turn-on after"), "title");
    // The gate lane: its own axis, labelled off/on, under the waveforms.
    for svg in [&below, &above] {
        assert!(
            svg.contains(">\ngate\n<") && svg.contains(">\non\n<") && svg.contains(">\noff\n<")
        );
    }
}

/// A half-bridge leg's pictures: each edge's dead-time map shows its colour
/// cells (and the rising edge's the grey of the swings that stop short),
/// and each window picture the shaded window and the table's turn-on.
#[test]
fn leg_pictures_show_their_data() {
    use host_tool::input::leg_design::{edge_name, LegSpec, EDGES};
    use timing_core::table::Entries;
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("../tables");
    let spec = LegSpec::load(&dir.join("lantern_leg.toml")).unwrap();
    let mut entries = Vec::new();
    let mut heads = Vec::new();
    for edge in EDGES {
        let bytes =
            std::fs::read(dir.join(format!("lantern_leg_{}.bin", edge_name(edge)))).unwrap();
        let (_, t) = timing_core::blob::open(&bytes, Some(spec.hash)).unwrap();
        entries.push(
            (0..t.entries().count())
                .map(|k| t.entries().at(k))
                .collect::<Vec<u16>>(),
        );
        heads.push((edge, *t.sensing(), *t.layout(), t.frac_bits(), t.fallback()));
    }
    let tables: Vec<_> = heads
        .iter()
        .zip(&entries)
        .map(|(h, e)| {
            (
                h.0,
                timing_core::table::DelayTable::new(h.1, h.2, h.3, h.4, e.as_slice()).unwrap(),
            )
        })
        .collect();
    let out = std::env::temp_dir().join(format!("zvs-timing-leg-plots-{}", std::process::id()));
    let files = host_tool::report::leg_plot::write_leg_plots(&spec, &out, &tables, None).unwrap();
    assert_eq!(files.len(), 4);
    for f in &files {
        let svg = std::fs::read_to_string(f).unwrap();
        let pix = render(&svg);
        let count = |c: RGBColor| pix.pixels().iter().filter(|p| near(**p, c, 3)).count();
        let name = f.file_name().unwrap().to_str().unwrap();
        if name.ends_with("_windows.svg") {
            assert!(
                count(WINDOW_COLOUR) > 20_000,
                "{name}: the window's shading"
            );
            assert!(count(CURRENT_COLOUR) > 300, "{name}: the table's turn-on");
            assert!(svg.contains("robust window"));
        } else {
            // Colour cells of the map, and grey where the swing stops short
            // (the rising edge's small currents only).
            let grey = count(VALLEY_COLOUR);
            if name.contains("rising") {
                assert!(grey > 2_000, "{name}: the short swings' grey ({grey})");
            } else {
                assert!(grey < 200, "{name}: every falling swing completes ({grey})");
            }
            assert!(svg.contains("steps"));
        }
    }
    let _ = std::fs::remove_dir_all(&out);
}
