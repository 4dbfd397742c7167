//! Shared pieces of the cross-checks: operating points drawn at random
//! (seeded, so every run checks the same ones), tolerance checks, and the
//! rule for outside programs (must run in CI, loud notice elsewhere).

#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)]

use rand::rngs::StdRng;
use rand::{Rng, SeedableRng};
use timing_core::Topology;

/// An operating point of a converter, at converter level and cell level.
#[derive(Debug, Clone, Copy)]
pub struct Scenario {
    /// Converter.
    pub topology: Topology,
    /// Lr, henry.
    pub lr_h: f64,
    /// Cr, farad.
    pub cr_f: f64,
    /// Vin, volt.
    pub vin_v: f64,
    /// Vout (magnitude), volt.
    pub vout_v: f64,
    /// Io, ampere.
    pub io_a: f64,
    /// The current of the converter's big inductor, ampere: buck Io, boost
    /// Iin, buck-boost Iin + Io, from the lossless power balance
    /// Vin*Iin = Vout*Io (textbook relation; Erickson and Maksimovic ch. 2, from memory).
    pub inductor_current_a: f64,
    /// The switch clamp voltage V, volt: buck Vin, boost Vout, buck-boost Vin + Vout.
    pub clamp_voltage_v: f64,
}

fn log_uniform(rng: &mut StdRng, lo: f64, hi: f64) -> f64 {
    rng.random_range(lo.ln()..hi.ln()).exp()
}

impl Scenario {
    /// A random scenario with normalised load in `j_range` (excluding the
    /// neighbourhood of J = 1, where the window is a point).
    pub fn random(rng: &mut StdRng, topology: Topology, j_range: std::ops::Range<f64>) -> Self {
        let lr_h = log_uniform(rng, 200e-9, 20e-6);
        let cr_f = log_uniform(rng, 470e-12, 47e-9);
        let z0 = (lr_h / cr_f).sqrt();
        let j = rng.random_range(j_range);
        let (vin_v, vout_v) = match topology {
            Topology::Boost => {
                let vout = log_uniform(rng, 24.0, 400.0);
                (vout * rng.random_range(0.2..0.9), vout)
            }
            Topology::BuckBoost => (log_uniform(rng, 12.0, 200.0), log_uniform(rng, 5.0, 200.0)),
            _ => {
                let vin = log_uniform(rng, 12.0, 400.0);
                (vin, vin * rng.random_range(0.1..0.9))
            }
        };
        let clamp_voltage_v = match topology {
            Topology::Boost => vout_v,
            Topology::BuckBoost => vin_v + vout_v,
            _ => vin_v,
        };
        let inductor_current_a = j * clamp_voltage_v / z0;
        // Back to the output current through the power balance.
        let io_a = match topology {
            Topology::Boost => inductor_current_a * vin_v / vout_v,
            Topology::BuckBoost => inductor_current_a * vin_v / (vin_v + vout_v),
            _ => inductor_current_a,
        };
        Self {
            topology,
            lr_h,
            cr_f,
            vin_v,
            vout_v,
            io_a,
            inductor_current_a,
            clamp_voltage_v,
        }
    }

    /// Resonant angular frequency 1/sqrt(Lr*Cr), rad/s.
    #[must_use]
    pub fn w0(&self) -> f64 {
        1.0 / (self.lr_h * self.cr_f).sqrt()
    }

    /// The scenarios the cross-checks run: for each cell, ZVS points and
    /// light-load (valley) points, from a fixed seed.
    #[must_use]
    pub fn standard_set(seed: u64, zvs_per_cell: usize, valley_per_cell: usize) -> Vec<Scenario> {
        let mut rng = StdRng::seed_from_u64(seed);
        let mut out = Vec::new();
        for topology in [Topology::Buck, Topology::Boost, Topology::BuckBoost] {
            for _ in 0..zvs_per_cell {
                out.push(Scenario::random(&mut rng, topology, 1.01..15.0));
            }
            for _ in 0..valley_per_cell {
                out.push(Scenario::random(&mut rng, topology, 0.15..0.9));
            }
        }
        out
    }
}

/// `|got - want| <= rel*|want| + abs`, or a panic naming the check.
/// Returns the relative error `|got - want|/|want|` for reporting.
pub fn assert_close(
    what: &str,
    got: f64,
    want: f64,
    rel: f64,
    abs: f64,
    ctx: &dyn std::fmt::Debug,
) -> f64 {
    let err = (got - want).abs();
    let tol = rel * want.abs() + abs;
    assert!(
        err <= tol,
        "{what}: got {got:e}, reference {want:e}, error {err:e} > tolerance {tol:e}\n  at {ctx:?}"
    );
    if want == 0.0 {
        err
    } else {
        err / want.abs()
    }
}

/// Whether the outside program `name` can be used. In CI (`CI` set) a
/// missing program fails the test; elsewhere it prints a loud notice of what
/// was not checked and how to install the program, and the caller skips.
#[must_use]
pub fn require_program(name: &str, available: bool, install: &str) -> bool {
    if available {
        return true;
    }
    if std::env::var_os("CI").is_some() {
        panic!("{name} is required in CI but was not found; .ci/run must install it ({install})");
    }
    eprintln!(
        "\n!!!!!!!!\n!!! NOT CHECKED: {name} is not installed, so this cross-check did not run.\n!!! Install it with `{install}` and run the tests again.\n!!!!!!!!\n"
    );
    false
}

/// The repository's root (the cross-checks crate sits one level below it).
#[must_use]
pub fn repo() -> std::path::PathBuf {
    std::path::PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("..")
}

/// The demo design with its Coss curve and loop resistance replaced by the
/// constant 6.8 nF of an ideal tank (the same Lr, range, sensing and timer)
/// and without its `[tolerance]` table: for checks of the closed-form
/// methods, which model the ideal cell and aim at the nominal window.
#[must_use]
pub fn ideal_demo() -> host_tool::model::design::Design {
    let mut text =
        std::fs::read_to_string(repo().join("tables/winch_aux.toml")).unwrap_or_default();
    if let Some(k) = text.find("[tolerance]") {
        text.truncate(k);
    }
    let ideal = text
        .replace("coss = \"winch_aux_coss.csv\"\n", "")
        .replace("r_tank = \"80m\"", "")
        .replace("cr = \"5.6n\"", "cr = \"6.8n\"")
        .replace("max_error_ticks = 2.5", "max_error_ticks = 1.0");
    match host_tool::model::design::Design::parse(&ideal, "winch_aux_ideal.toml") {
        Ok(d) if d.real.is_ideal() => d,
        other => panic!("the ideal demo variant does not parse as an ideal tank: {other:?}"),
    }
}

/// A design written for these tests only (not the demo): a boost from a
/// 24 V nominal input to 48 V, bidirectional 10-bit current sensing (zero
/// at mid-scale), a 100 MHz timer and a slow isolated driver. Tests derive
/// their variants from it by replacing lines.
pub const HELD_OUT_BOOST: &str = r#"
name = "held_out_boost"
topology = "boost"
lr = "2.2uH"
cr = 3.3e-9
vin = [18, 30]
io = [0.3, 4]
vout = 48
[adc]
bits = 10
vin_volts_per_code = 0.04
io_amps_per_code = 0.01
io_zero_code = 512
[timer]
clock_hz = "100MHz"
counter_bits = 16
driver_delay = "60ns"
driver_delay_off = "20ns"
position = 0.4
[table]
max_error_ticks = 1.0
"#;
