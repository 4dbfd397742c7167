//! Exhaustive verification: the table lookup (timing-core's, the code the
//! firmware runs) at every ADC code pair of the design range against the
//! exact f64 model.

use serde::Serialize;
use timing_core::table::{DelayTable, Entries};
use timing_core::AdcCode;

use crate::design::Design;
use crate::generate::ExactModel;

/// What verification found.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct VerifyReport {
    /// Worst |table - exact| over all pairs, ticks.
    pub max_error_ticks: f64,
    /// RMS error over all pairs, ticks.
    pub rms_error_ticks: f64,
    /// Voltage code of the worst pair.
    pub worst_vin_code: u16,
    /// Current code of the worst pair.
    pub worst_io_code: u16,
    /// Input voltage of the worst pair, volt.
    pub worst_vin_v: f64,
    /// Output current of the worst pair, ampere.
    pub worst_io_a: f64,
    /// Code pairs checked.
    pub points_checked: u64,
    /// Pairs where ZVS is possible.
    pub zvs_points: u64,
    /// ZVS pairs whose commanded turn-on falls outside the true window.
    pub outside_window: u64,
    /// Of those, before the window opens.
    pub early: u64,
    /// Of those, after it closes.
    pub late: u64,
    /// ZVS pairs whose window is narrower than one tick (no tick can hit it).
    pub narrower_than_a_tick: u64,
    /// Smallest margin of a commanded turn-on inside its window to the nearer
    /// edge, second (`None` when no turn-on is inside).
    pub min_margin_s: Option<f64>,
    /// Largest normalised load J among the pairs whose turn-on missed the
    /// window (`None` when none did): how far above the ZVS boundary misses
    /// reach.
    pub outside_window_max_load: Option<f64>,
    /// Largest delay the table commands, ticks (must fit the timer counter).
    pub max_commanded_ticks: u32,
    /// Voltage and current codes where it is commanded.
    pub max_commanded_at: (u16, u16),
    /// Pairs the model refused (should be 0).
    pub model_errors: u64,
}

/// Check `table` against the exact model of `design` at every code pair in
/// the design range; `progress` is called with the fraction done (0..1)
/// after each voltage code.
pub fn verify<E: Entries>(
    design: &Design,
    table: &DelayTable<E>,
    mut progress: Option<&mut dyn FnMut(f64)>,
) -> VerifyReport {
    let model = ExactModel::new(design);
    let clock = design.timer.clock_hz();
    let lead = design.timer.lead_s();
    let (v, i) = (design.vin_codes, design.io_codes);
    let mut r = VerifyReport {
        max_error_ticks: 0.0,
        rms_error_ticks: 0.0,
        worst_vin_code: v.lo,
        worst_io_code: i.lo,
        worst_vin_v: 0.0,
        worst_io_a: 0.0,
        points_checked: 0,
        zvs_points: 0,
        outside_window: 0,
        early: 0,
        late: 0,
        narrower_than_a_tick: 0,
        min_margin_s: None,
        outside_window_max_load: None,
        max_commanded_ticks: 0,
        max_commanded_at: (v.lo, i.lo),
        model_errors: 0,
    };
    let z0 = design.tank.z0_ohm();
    let mut sum_sq = 0.0f64;
    for cv in v.lo..=v.hi {
        for ci in i.lo..=i.hi {
            r.points_checked += 1;
            let Ok(p) = model.at_codes(cv, ci) else {
                r.model_errors += 1;
                continue;
            };
            let got = table.delay(AdcCode::new(cv), AdcCode::new(ci)).ticks.get();
            if got > r.max_commanded_ticks {
                r.max_commanded_ticks = got;
                r.max_commanded_at = (cv, ci);
            }
            let err = (f64::from(got) - p.ticks).abs();
            sum_sq += err * err;
            if err > r.max_error_ticks {
                r.max_error_ticks = err;
                r.worst_vin_code = cv;
                r.worst_io_code = ci;
            }
            if let Some(w) = p.window {
                r.zvs_points += 1;
                if w.width_s() * clock < 1.0 {
                    r.narrower_than_a_tick += 1;
                }
                let on = f64::from(got) / clock + lead;
                let missed = on < w.open_s || on > w.close_s;
                if on < w.open_s {
                    r.early += 1;
                } else if on > w.close_s {
                    r.late += 1;
                }
                if missed {
                    // J = Io*Z0/Vin for every cell.
                    let j = design.io_of(ci) * z0 / design.vin_of(cv);
                    r.outside_window_max_load =
                        Some(r.outside_window_max_load.map_or(j, |x: f64| x.max(j)));
                } else {
                    let m = (on - w.open_s).min(w.close_s - on);
                    r.min_margin_s = Some(r.min_margin_s.map_or(m, |x: f64| x.min(m)));
                }
            }
        }
        if let Some(f) = progress.as_mut() {
            f(f64::from(cv - v.lo + 1) / f64::from(v.len()));
        }
    }
    r.outside_window = r.early + r.late;
    r.rms_error_ticks = (sum_sq / r.points_checked.max(1) as f64).sqrt();
    r.worst_vin_v = design.vin_of(r.worst_vin_code);
    r.worst_io_a = design.io_of(r.worst_io_code);
    r
}
