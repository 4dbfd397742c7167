//! Scope captures: a ring sampled as a scope samples it (1 GS/s, 8-bit
//! vertical quantisation over a chosen range, white noise; the waveform of
//! the ideal cell from timing-core's closed forms, the gate left off after
//! the turn-off as in a single-pulse test, common practice, no source) is
//! read back with its metadata lines, header and named columns; a capture
//! that holds no usable ring is refused with the reason.

use host_tool::input::capture::{self, Column, Columns};
use timing_core::waveform::Waveform;
use timing_core::{CellPoint, Tank, Transition};

/// A seeded uniform in [-1, 1).
fn lcg(seed: &mut u64) -> f64 {
    *seed = seed
        .wrapping_mul(6364136223846793005)
        .wrapping_add(1442695040888963407);
    ((*seed >> 11) as f64 / (1u64 << 53) as f64) * 2.0 - 1.0
}

/// A capture of the 1 uH / 6.8 nF cell at 48 V, 6 A: `n` samples from
/// -100 ns at `rate` samples per second, quantised to 8 bits over
/// `range` volts, with white noise of `noise_v` peak.
fn scope(n: usize, rate: f64, range: (f64, f64), noise_v: f64) -> String {
    scope_delayed(n, rate, range, noise_v, 0.0)
}

/// [`scope`] with the switch turning off `delay_s` after time zero (the
/// gate driver's turn-off delay).
fn scope_delayed(n: usize, rate: f64, range: (f64, f64), noise_v: f64, delay_s: f64) -> String {
    let tank = Tank::new(1e-6, 6.8e-9).unwrap();
    let cell = CellPoint::new(48.0, 6.0).unwrap();
    // The gate stays off well past the capture.
    let w = Waveform::new(&tank, &cell, 1.0).unwrap();
    let mut seed = 7u64;
    let step = (range.1 - range.0) / 255.0;
    let mut s = String::from(
        "Model,DemoScope 1000\nFirmware,1.0\nSample interval,1e-09\n# exported by hand\nTime,CH1,CH2\n",
    );
    for k in 0..n {
        let t = -100e-9 + k as f64 / rate;
        let x = w.at(t - delay_s);
        let v = x.switch_voltage_v + noise_v * lcg(&mut seed);
        let code = ((v - range.0) / step).round().clamp(0.0, 255.0);
        s += &format!("{t:e},{},{}\n", range.0 + code * step, x.inductor_current_a);
    }
    s
}

fn named() -> Columns {
    Columns {
        time: Column::Name("time".into()),
        switch_v: Column::Name("CH1".into()),
        inductor_a: Some(Column::Index(2)),
        gate: None,
    }
}

#[test]
fn a_scope_capture_reads_back_with_its_noise() {
    let text = scope(1100, 1e9, (-10.0, 140.0), 0.4);
    let c = capture::parse(&text, "cap.csv", &named()).unwrap();
    assert_eq!(c.time_s.len(), 1100);
    assert!((c.time_s[0] + 100e-9).abs() < 1e-15);
    let peak = c.switch_v.iter().copied().fold(f64::MIN, f64::max);
    // Peak switch voltage V*(1 + 1/J)? No: V*(1 + J') with the textbook's
    // J = I*Z0/V = 6*12.13/48 = 1.516 above the boundary, the voltage
    // peaks at V*(1 + ...) only below it; above, the swing tops out where
    // the current reverses: at most V*(1 + J) = 120.8 V (Erickson and
    // Maksimovic, ch. 23, peak stress).
    assert!(peak > 48.0 && peak <= 48.0 * (1.0 + 1.516) + 1.0, "{peak}");
    // Noise: 0.4 V peak uniform is 0.23 V RMS; one 8-bit step of 0.59 V
    // adds 0.17 V RMS of quantisation. The estimate sees both, roughly.
    assert!(c.noise_v > 0.05 && c.noise_v < 0.6, "{}", c.noise_v);
    assert_eq!(c.inductor_a.as_ref().map(Vec::len), Some(1100));
}

#[test]
fn unusable_captures_are_refused_with_the_reason() {
    let good = scope(1100, 1e9, (-10.0, 140.0), 0.4);
    let cases: Vec<(String, &str)> = vec![
        // Two rows swapped: time runs back.
        (
            {
                let mut l: Vec<&str> = good.lines().collect();
                l.swap(10, 11);
                l.join("\n")
            },
            "time must increase",
        ),
        (scope(30, 1e9, (-10.0, 140.0), 0.4), "too few"),
        // The vertical range tops out at 60 V: the ring is clipped.
        (scope(1100, 1e9, (-10.0, 60.0), 0.4), "clipped"),
        // Noise of 60 V on a 96 V ring.
        (scope(1100, 1e9, (-100.0, 250.0), 60.0), "noise"),
        // A flat line.
        (
            "Time,CH1,CH2\n".to_owned()
                + &(0..200)
                    .map(|k| format!("{k}e-9,5,0\n"))
                    .collect::<String>(),
            "flat",
        ),
        ("just,words\nno,numbers\n".to_owned(), "no rows of numbers"),
        (
            good.replace("Time,CH1,CH2", "Time,CH9,CH2"),
            "no column named `CH1`",
        ),
    ];
    for (text, reason) in cases {
        let e = match capture::parse(&text, "cap.csv", &named()) {
            Err(e) => e,
            Ok(c) => panic!("accepted (noise {} V) where `{reason}` was due", c.noise_v),
        };
        println!("{e}");
        assert!(
            e.to_string().contains(reason),
            "`{e}` should say `{reason}`"
        );
        assert!(e.to_string().starts_with("cap.csv"), "{e}");
    }
}

/// The design of the captured cell: 1 uH, 6.8 nF, a buck at 48 V, 6 A.
fn design(extra: &str) -> host_tool::model::design::Design {
    host_tool::model::design::Design::parse(
        &format!(
            "name = \"cap\"\nlr = \"1u\"\ncr = \"6.8n\"\nvin = [40, 56]\nio = [1, 8]\nvout = 12\n{extra}\
             [adc]\nbits = 12\nvin_volts_per_code = 0.0161\nio_amps_per_code = 0.00488\n\
             [timer]\nclock_hz = \"170M\"\n"
        ),
        "cap.toml",
    )
    .unwrap()
}

#[test]
fn the_true_tank_predicts_the_capture_to_its_noise_and_a_wrong_one_does_not() {
    use host_tool::analysis::fit_capture::{model_trace, residual_rms, TankGuess};
    let d = design("");
    let c = capture::parse(
        &scope_delayed(1100, 1e9, (-10.0, 140.0), 0.4, 30e-9),
        "cap.csv",
        &named(),
    )
    .unwrap();
    let truth = TankGuess {
        delay_off_s: 30e-9,
        ..TankGuess::of(&d)
    };
    let rms = |g: &TankGuess| {
        let p = model_trace(&d, g, 48.0, 6.0, &c.time_s).unwrap();
        residual_rms(&c, &p)
    };
    let (at_truth, n) = rms(&truth);
    println!(
        "true tank: residual {at_truth:.3} V RMS over {n} samples (noise {:.3} V)",
        c.noise_v
    );
    assert!(
        n > 500,
        "the ring is followed over most of the capture: {n}"
    );
    // Quantisation (0.59 V steps: 0.17 V RMS) and the noise (0.23 V RMS).
    assert!(at_truth < 0.4, "{at_truth}");
    for (what, g) in [
        (
            "Lr +5 %",
            TankGuess {
                lr_h: 1.05e-6,
                ..truth
            },
        ),
        (
            "C -5 %",
            TankGuess {
                cr_f: 6.8e-9 * 0.95,
                ..truth
            },
        ),
        (
            "delay 20 ns",
            TankGuess {
                delay_off_s: 20e-9,
                ..truth
            },
        ),
    ] {
        let (r, _) = rms(&g);
        println!("{what}: residual {r:.3} V RMS");
        assert!(r > 3.0 * at_truth, "{what}: {r} against {at_truth}");
    }
    // The model (the numerical ring for every tank) follows the closed
    // forms' waveform of the lossless cell (Erickson and Maksimovic,
    // ch. 23) wherever it follows the circuit, and after the window closes
    // the free ring from (0 V, 0 A), V*(1 - cos(w0*t)) (the series LC's
    // step response, textbook), within a tenth of a per cent of the 96 V
    // swing (its waveform between steps is an interpolant), far below one
    // step of the 8-bit scope (0.59 V).
    let tank = Tank::new(1e-6, 6.8e-9).unwrap();
    let cell = CellPoint::new(48.0, 6.0).unwrap();
    let w = Waveform::new(&tank, &cell, 1.0).unwrap();
    let close = Transition::new(&tank, &cell)
        .unwrap()
        .window()
        .unwrap()
        .close_s;
    let model = model_trace(&d, &truth, 48.0, 6.0, &c.time_s).unwrap();
    let (mut worst, mut followed, mut after_close) = (0.0f64, 0usize, 0usize);
    for (&t, m) in c.time_s.iter().zip(&model) {
        let s = t - 30e-9;
        let want = if s <= close {
            w.at(s).switch_voltage_v
        } else {
            after_close += 1;
            48.0 * (1.0 - (tank.w0_rad_s() * (s - close)).cos())
        };
        if m.is_finite() {
            worst = worst.max((m - want).abs());
            followed += 1;
        }
    }
    println!(
        "the model against the closed forms: within {worst:.2e} V at {followed} samples ({after_close} after the window closes)"
    );
    assert!(
        followed > 1000 && after_close > 300 && worst < 0.1,
        "{worst} V at {followed}"
    );
}
