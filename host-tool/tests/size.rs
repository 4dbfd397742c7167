//! `zvs-timing size`: the Z0 interval against the sizing relation of the
//! resonant switch (DESIGN.md section 2: Vmax_in/Imin <= Z0 <=
//! (Vmax - Vmax_in)/Imax for the buck, with V and I the cell's voltage and
//! current; the boost and buck-boost cell quantities are the textbook PWM
//! switch mappings, Erickson and Maksimovic ch. 2 and 23, from memory), on
//! held-out ranges; the trade-offs where it is empty; the CLI's JSON.

#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)]

mod common;

use host_tool::analysis::size::{size, SizeInput};
use timing_core::Topology;

fn input(
    topology: Topology,
    vin: (f64, f64),
    io: (f64, f64),
    vout: Option<f64>,
    rating: f64,
) -> SizeInput {
    SizeInput {
        topology,
        vin_v: vin,
        io_a: io,
        vout_v: vout,
        vds_rating_v: rating,
        derating: 0.8,
        f0_hz: Some(1.0e6),
        fs_max_hz: None,
    }
}

fn close(a: f64, b: f64) -> bool {
    (a - b).abs() <= 1e-12 * b.abs().max(1.0)
}

#[test]
fn the_buck_interval_is_the_sizing_relation() {
    for (vin, io, rating) in [
        ((36.0, 60.0), (4.0, 8.0), 250.0),
        ((18.0, 32.0), (2.5, 6.0), 120.0),
        ((300.0, 400.0), (1.2, 2.0), 900.0),
    ] {
        let r = size(&input(Topology::Buck, vin, io, None, rating)).unwrap();
        let vmax = rating * 0.8;
        let lo = vin.1 / io.0;
        let hi = (vmax - vin.1) / io.1;
        assert!(close(r.zvs_z0_min_ohm, lo), "{} vs {lo}", r.zvs_z0_min_ohm);
        assert!(
            close(r.stress_z0_max_ohm, hi),
            "{} vs {hi}",
            r.stress_z0_max_ohm
        );
        assert_eq!(r.feasible, lo <= hi);
        if r.feasible {
            assert_eq!(r.z0_min_ohm, Some(r.zvs_z0_min_ohm));
            assert_eq!(r.z0_max_ohm, Some(r.stress_z0_max_ohm));
            // Every offered pair stays within the rating and has its Z0.
            for p in &r.pairs {
                assert!(p.peak_switch_voltage_v <= vmax * (1.0 + 1e-12));
                assert!(close((p.lr_h / p.cr_f).sqrt(), p.z0_ohm));
                assert!(close(
                    1.0 / (2.0 * std::f64::consts::PI * (p.lr_h * p.cr_f).sqrt()),
                    1.0e6
                ));
            }
        }
    }
}

#[test]
fn boost_and_buck_boost_use_the_cell_quantities() {
    let (vin, io, vout, rating) = ((18.0, 30.0), (0.5, 3.0), 48.0, 200.0);
    let vmax = rating * 0.8;
    // Boost: V = Vout, I = Iin = Io*Vout/Vin.
    let r = size(&input(Topology::Boost, vin, io, Some(vout), rating)).unwrap();
    let i = |v: f64, o: f64| o * vout / v;
    let lo = [(vin.0, io.0), (vin.1, io.0)]
        .iter()
        .map(|&(v, o)| vout / i(v, o))
        .fold(0.0, f64::max);
    let hi = (vmax - vout) / i(vin.0, io.1);
    assert!(
        close(r.zvs_z0_min_ohm, lo) && close(r.stress_z0_max_ohm, hi),
        "{r:?}"
    );
    // Buck-boost: V = Vin + Vout, I = Iin + Io = Io*(Vin + Vout)/Vin.
    let r = size(&input(Topology::BuckBoost, vin, io, Some(vout), rating)).unwrap();
    let v = |x: f64| x + vout;
    let i = |x: f64, o: f64| o * (x + vout) / x;
    let lo = vin.1 / io.0; // V/I = Vin/Io
    let hi = [(vin.0, io.1), (vin.1, io.1)]
        .iter()
        .map(|&(x, o)| (vmax - v(x)) / i(x, o))
        .fold(f64::INFINITY, f64::min);
    assert!(
        close(r.zvs_z0_min_ohm, lo) && close(r.stress_z0_max_ohm, hi),
        "{r:?}"
    );
}

#[test]
fn an_empty_interval_comes_with_its_trade_offs() {
    // 36-60 V, 1-8 A, a 150 V switch at 80 %: ZVS wants Z0 >= 60 ohm, the
    // rating allows at most 7.5 ohm.
    let r = size(&input(
        Topology::Buck,
        (36.0, 60.0),
        (1.0, 8.0),
        None,
        150.0,
    ))
    .unwrap();
    assert!(!r.feasible);
    assert_eq!((r.z0_min_ohm, r.z0_max_ohm), (None, None));
    // Lightest ZVS load with the largest allowed Z0: Vin_max / Z0_max.
    assert!((r.lightest_zvs_load_a.unwrap() - 60.0 / 7.5).abs() < 1e-6);
    // Rating for the whole range with Z0 = 60 ohm: (60 + 8*60) / 0.8.
    assert!((r.rating_needed_v.unwrap() - (60.0 + 8.0 * 60.0) / 0.8).abs() < 1e-9);
    let (a, b) = r.valley_load_range_a.unwrap();
    assert!((a - 1.0).abs() < 1e-12 && (b - 8.0).abs() < 1e-6);
    assert!(r.trade_offs.len() >= 2, "{:?}", r.trade_offs);
    assert!(
        r.trade_offs.iter().any(|t| t.contains("675 V")),
        "{:?}",
        r.trade_offs
    );
    // A wider rating leaves part of the range to the valley.
    let r = size(&input(
        Topology::Buck,
        (36.0, 60.0),
        (1.0, 8.0),
        None,
        400.0,
    ))
    .unwrap();
    let (_, b) = r.valley_load_range_a.unwrap();
    let z = (320.0 - 60.0) / 8.0;
    assert!((b - 60.0 / z).abs() < 1e-6, "{b}");
    assert!(r.trade_offs[0].contains("valley"), "{:?}", r.trade_offs);
}

fn zvs_timing(args: &[&str]) -> common::Run {
    common::zvs(args)
}

#[test]
fn the_cli_reports_the_interval_in_json_and_refuses_bad_input() {
    let out = zvs_timing(&[
        "size",
        "--vin",
        "36:60",
        "--io",
        "4:8",
        "--vds-rating",
        "250",
        "--vout",
        "12",
        "--fs-max",
        "1M",
        "--json",
    ]);
    let j = out.json();
    assert!((j["z0_min_ohm"].as_f64().unwrap() - 15.0).abs() < 1e-9);
    assert!((j["z0_max_ohm"].as_f64().unwrap() - 17.5).abs() < 1e-9);
    assert!(j["caution"].as_str().unwrap().contains("reduced voltage"));
    let out = zvs_timing(&[
        "size",
        "--vin",
        "36:60",
        "--io",
        "1:8",
        "--vds-rating",
        "150",
        "--json",
    ]);
    let j: serde_json::Value = serde_json::from_str(&out.stdout).unwrap();
    assert!(j["z0_min_ohm"].is_null() && j["z0_max_ohm"].is_null());
    let out = zvs_timing(&["size", "--vin", "60", "--io", "1:8", "--vds-rating", "150"]);
    assert_eq!(out.code, 2);
    assert!(out.stderr.contains("--vin"));
    let out = zvs_timing(&[
        "size",
        "--vin",
        "36:60",
        "--io",
        "1:8",
        "--vds-rating",
        "150",
        "--derating",
        "1.5",
    ]);
    assert_eq!(out.code, 2);
    assert!(out.stderr.contains("--derating"));
}

#[test]
fn an_interval_of_zero_width_offers_one_pair() {
    // Z0 >= 60 V / 4 A = 15 ohm for ZVS; Z0 <= (180 V - 60 V) / 8 A = 15 ohm
    // within the rating: one impedance, so one Lr/Cr pair, not three equal
    // rows.
    let r = size(&SizeInput {
        derating: 1.0,
        ..input(Topology::Buck, (36.0, 60.0), (4.0, 8.0), Some(12.0), 180.0)
    })
    .unwrap();
    assert_eq!(r.z0_min_ohm, Some(15.0));
    assert_eq!(r.z0_max_ohm, Some(15.0));
    assert_eq!(r.pairs.len(), 1, "{:?}", r.pairs);
}
