//! The closed-form methods against the exact model, exhaustively over the
//! code pairs of the demo design and of held-out designs (other cells, an
//! offset current sensor, a driver whose turn-off delay exceeds its
//! turn-on delay, a fine high-resolution timer), through the same
//! verification the `verify --method` command runs.
//!
//! The exact model is timing-core's f64 transition, itself checked against
//! ngspice and an ODE solver (tests/ngspice.rs, tests/ode.rs). The bounds
//! are this project's claims for the approximations (timing-core's
//! `approx` module states each one's own bound).

#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)]

use host_tool::check::verify::{verify, DelayMethod};
use host_tool::generate::pieces::fit_design_pieces;
use host_tool::model::design::Design;

/// The shared held-out boost (bipolar current sensor, 10-bit ADCs) with
/// the driver's delays swapped: turn-off longer than turn-on, so the net
/// lead is negative.
fn held_out_boost() -> String {
    cross_checks::HELD_OUT_BOOST
        .replace("driver_delay = \"60ns\"", "driver_delay = \"20ns\"")
        .replace("driver_delay_off = \"20ns\"", "driver_delay_off = \"60ns\"")
}

/// A buck-boost cell on a fine timer: 2 GHz counting (a high-resolution
/// PWM unit), so one tick is 0.5 ns and every angle error weighs more.
const HELD_OUT_FINE: &str = r#"
name = "held_out_fine"
topology = "buck-boost"
lr = "680n"
cr = "10n"
vin = [20, 40]
io = [2, 12]
vout = 24
[adc]
bits = 12
vin_volts_per_code = 0.0125
io_amps_per_code = 0.005
[timer]
clock_hz = "2G"
counter_bits = 16
driver_delay = "12n"
position = 0.5
[table]
max_error_ticks = 1.0
"#;

struct Claim {
    design: Design,
    /// Largest approximation error before rounding, ticks: f32 fast, fixed point.
    approx: [f64; 2],
}

fn claims() -> Vec<Claim> {
    assert!(held_out_boost().contains("driver_delay_off = \"60ns\""));
    vec![
        Claim {
            design: cross_checks::ideal_demo(),
            approx: [0.001, 0.02],
        },
        Claim {
            design: Design::parse(&held_out_boost(), "boost.toml").unwrap(),
            approx: [0.001, 0.02],
        },
        Claim {
            design: Design::parse(HELD_OUT_FINE, "fine.toml").unwrap(),
            approx: [0.02, 0.15],
        },
    ]
}

#[test]
fn closed_forms_meet_their_bounds_at_every_code_pair() {
    for c in claims() {
        let d = &c.design;
        let cf = d.closed_form().unwrap();
        // The fast method on the ideal cell's one stand-in: the
        // approximations' own accuracy.
        let fast = verify(d, &cf.fast_f32().unwrap(), None);
        let fixed = verify(d, &cf.fixed_point().unwrap(), None);
        let libm = verify(d, &cf.libm_f32().unwrap(), None);
        for (r, bound) in [(&fast, c.approx[0]), (&fixed, c.approx[1]), (&libm, 0.01)] {
            let approx = r.max_approximation_error_ticks.unwrap();
            println!(
                "{}: {}: approximation {:.4} ticks (bound {bound}), commanded {:.3} ticks, {} of {} ZVS pairs outside the window, {} pairs",
                d.name, r.method, approx, r.max_error_ticks, r.outside_window, r.zvs_points, r.points_checked
            );
            assert_eq!(r.model_errors, 0);
            assert!(approx <= bound, "{}: {}: {approx}", d.name, r.method);
            // Rounding to whole ticks adds at most half a tick; moving a
            // rounded tick into the window (libm) at most one.
            assert!(
                r.max_error_ticks <= 1.0 + approx,
                "{}: {}",
                d.name,
                r.method
            );
        }
        // The libm baseline misses the window only where it is narrower
        // than a tick (no tick inside to move to).
        if let Some(j) = libm.outside_window_max_load {
            let width = timing_core::normalized::clamp_angle(j) * cf.ticks_per_rad();
            assert!(
                width < 1.0,
                "{}: a miss where the window is {width} ticks wide",
                d.name
            );
        }
    }
}

/// A switch's Coss curve for the held-out designs below (an invented
/// 100 V-class part, not any real one's data), written where the design
/// files point.
fn held_out_dir() -> std::path::PathBuf {
    let dir = std::env::temp_dir().join(format!("zvs-held-out-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    std::fs::write(
        dir.join("sw_coss.csv"),
        "volts,farads\n0,1800p\n2,1500p\n5,1100p\n10,700p\n20,420p\n30,300p\n40,250p\n60,200p\n80,180p\n100,170p\n",
    )
    .unwrap();
    dir
}

/// The held-out boost with a Coss curve, a lossy loop and tolerances.
fn held_out_boost_coss() -> String {
    cross_checks::HELD_OUT_BOOST
        .replace("name = \"held_out_boost\"", "name = \"held_out_boost_coss\"")
        .replace(
        "cr = 3.3e-9\n",
        "cr = \"2.7n\"\ncoss = \"sw_coss.csv\"\nr_tank = \"120m\"\n",
    ) + "fallback = \"valley\"\n[tolerance]\nlr = \"4%\"\ncr = \"6%\"\nvin_gain = \"1%\"\nio_gain = \"2%\"\nvin_offset_codes = 1\nio_offset_codes = 2\nnoise_codes = 1\njitter = \"2n\"\n"
}

/// A buck over a nearly 4:1 input range (the Coss curve moves the ZVS
/// boundary by more than a single voltage band can follow), with a fixed
/// fallback and an offset current sensor.
const HELD_OUT_WIDE_BUCK: &str = r#"
name = "held_out_wide_buck"
topology = "buck"
lr = "680n"
cr = "3.3n"
coss = "sw_coss.csv"
r_tank = "60m"
vin = [20, 75]
io = [2, 15]
vout = 5
[adc]
bits = 12
vin_volts_per_code = 0.044
io_amps_per_code = 0.0122
io_zero_code = 100
[timer]
clock_hz = "200M"
counter_bits = 16
driver_delay = "40n"
position = 0.3
[table]
max_error_ticks = 1.0
fallback = "fixed"
fallback_ticks = 30
[tolerance]
lr = "5%"
cr = "5%"
vin_gain = "1%"
io_gain = "1.5%"
vin_offset_codes = 2
io_offset_codes = 4
noise_codes = 2
jitter = "1n"
"#;

#[test]
fn fitted_pieces_keep_inside_every_window_a_tick_wide() {
    // The shipped closed-form-f32: pieces fitted to each design's exact
    // model (Coss curve, losses, tolerance box), proven at every code
    // pair: within half a tick of the design's aim before rounding, no
    // turn-on outside a window a tick wide, none outside a robust window.
    let dir = held_out_dir();
    let designs = [
        Design::load(&cross_checks::repo().join("tables/winch_aux.toml")).unwrap(),
        cross_checks::ideal_demo(),
        Design::parse(&held_out_boost(), "boost.toml").unwrap(),
        Design::parse(HELD_OUT_FINE, "fine.toml").unwrap(),
        Design::parse(
            &held_out_boost_coss(),
            dir.join("boost_coss.toml").to_str().unwrap(),
        )
        .unwrap(),
        Design::parse(
            HELD_OUT_WIDE_BUCK,
            dir.join("wide_buck.toml").to_str().unwrap(),
        )
        .unwrap(),
    ];
    for d in &designs {
        let pieces = fit_design_pieces(d).unwrap();
        let fast = pieces.fast_f32().unwrap();
        let fixed = pieces.fixed_point().unwrap();
        for m in [&fast as &dyn DelayMethod, &fixed] {
            let r = verify(d, m, None);
            let approx = r.max_approximation_error_ticks.unwrap();
            println!(
                "{}: {}: {} pieces in {} bands: approximation {approx:.4} ticks, commanded {:.3} ticks, {} of {} ZVS pairs outside the window ({} a tick wide), {} of {} outside the robust window",
                d.name, r.method, pieces.len(), pieces.bands(), r.max_error_ticks, r.outside_window, r.zvs_points,
                r.outside_window_wide, r.outside_robust_window, r.robust_points
            );
            assert_eq!(r.points_checked, r.pairs_in_range, "{}", d.name);
            assert!(approx <= 0.5, "{}: {}: {approx}", d.name, r.method);
            assert_eq!(r.outside_window_wide, 0, "{}: {}", d.name, r.method);
            assert_eq!(r.outside_robust_window, 0, "{}: {}", d.name, r.method);
            // With a fixed fallback the aim jumps at the ZVS boundary, where
            // the windows are narrower than a tick: a reading the band's
            // ZVS test puts on the other side of it gets the other side's
            // delay.
            if d.fallback == timing_core::table::Fallback::Valley {
                assert!(
                    r.max_error_ticks <= d.max_error_ticks,
                    "{}: {}",
                    d.name,
                    r.method
                );
            }
        }
    }
    let _ = std::fs::remove_dir_all(dir);
}

#[test]
fn the_demo_closed_form_f32_is_within_half_a_tick() {
    // The issue's proof obligation: closed-form-f32 against the f64 model,
    // exhaustively over the demo design's ADC code pairs (with the ideal
    // tank the closed forms model).
    let d = cross_checks::ideal_demo();
    let r = verify(&d, &d.closed_form().unwrap().fast_f32().unwrap(), None);
    assert_eq!(
        r.points_checked,
        u64::from(d.vin_codes.len()) * u64::from(d.io_codes.len())
    );
    assert!(r.max_approximation_error_ticks.unwrap() <= 0.5);
}
