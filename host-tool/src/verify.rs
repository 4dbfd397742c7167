//! Exhaustive verification: a runtime method (timing-core's table lookup or
//! one of its closed forms, the code the firmware runs) at every ADC code
//! pair of the design range against the exact f64 model. Rows of voltage
//! codes run in parallel on every core; the result does not depend on the
//! number of threads (rows are merged in order).

use serde::Serialize;
use timing_core::closed_form::{FastF32, FixedPoint, LibmF32};
use timing_core::table::{DelayTable, Entries};
use timing_core::AdcCode;

use crate::design::Design;
use crate::generate::ExactModel;

/// A runtime delay method: what the interrupt would command at a code pair.
pub trait DelayMethod: Sync {
    /// Method name as the CLI and the firmware print it.
    fn name(&self) -> &'static str;
    /// Commanded ticks, and the delay before rounding (ticks) for methods
    /// that compute one (the closed forms).
    fn eval(&self, vin: u16, io: u16) -> (u32, Option<f64>);
}

impl<E: Entries + Sync> DelayMethod for DelayTable<E> {
    fn name(&self) -> &'static str {
        "table"
    }
    fn eval(&self, vin: u16, io: u16) -> (u32, Option<f64>) {
        (
            self.delay(AdcCode::new(vin), AdcCode::new(io)).ticks.get(),
            None,
        )
    }
}

impl DelayMethod for FastF32 {
    fn name(&self) -> &'static str {
        "closed-form-f32"
    }
    fn eval(&self, vin: u16, io: u16) -> (u32, Option<f64>) {
        let (v, i) = (AdcCode::new(vin), AdcCode::new(io));
        let (raw, _) = self.raw_ticks(v, i);
        (self.delay(v, i).ticks.get(), Some(f64::from(raw)))
    }
}

impl DelayMethod for FixedPoint {
    fn name(&self) -> &'static str {
        "fixed-point"
    }
    fn eval(&self, vin: u16, io: u16) -> (u32, Option<f64>) {
        let (v, i) = (AdcCode::new(vin), AdcCode::new(io));
        let (raw, _) = self.raw_ticks_q8(v, i);
        (self.delay(v, i).ticks.get(), Some(f64::from(raw) / 256.0))
    }
}

impl DelayMethod for LibmF32 {
    fn name(&self) -> &'static str {
        "libm-f32"
    }
    fn eval(&self, vin: u16, io: u16) -> (u32, Option<f64>) {
        let (v, i) = (AdcCode::new(vin), AdcCode::new(io));
        let (raw, _) = self.raw_ticks(v, i);
        (self.delay(v, i).ticks.get(), Some(f64::from(raw)))
    }
}

/// What verification found.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct VerifyReport {
    /// The method checked (`table`, `closed-form-f32`, `fixed-point`, `libm-f32`).
    pub method: &'static str,
    /// Worst |commanded - exact| over all pairs, ticks (includes the
    /// rounding to whole ticks).
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
    /// Worst |delay before rounding - exact| over the pairs where the
    /// design's fallback does not override it, ticks: the approximation
    /// error of a closed-form method (`None` for tables, which hold whole
    /// entries).
    pub max_approximation_error_ticks: Option<f64>,
    /// Voltage and current codes of that worst approximation error.
    pub max_approximation_error_at: Option<(u16, u16)>,
    /// Code pairs checked: every pair of the design range, so always
    /// equal to `pairs_in_range` (a shorter count would be a failed check,
    /// not a smaller proof).
    pub points_checked: u64,
    /// Code pairs in the design range: voltage codes times current codes.
    pub pairs_in_range: u64,
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
    /// ZVS pairs whose window is a tick wide or more and whose commanded
    /// turn-on lies outside it: misses no rounding excuses.
    pub outside_window_wide: u64,
    /// Smallest margin of a commanded turn-on inside its window to the nearer
    /// edge, second (`None` when no turn-on is inside).
    pub min_margin_s: Option<f64>,
    /// ZVS pairs with a robust window a tick wide or more (the design's
    /// tolerances; 0 without a `[tolerance]` table).
    pub robust_points: u64,
    /// Of those, pairs whose commanded turn-on lies outside the robust
    /// window: some board within the tolerances may miss its window there.
    pub outside_robust_window: u64,
    /// The worst margin of a commanded turn-on to the nearer edge of its
    /// robust window over those pairs, second (negative: outside; `None`
    /// when there are none).
    pub min_robust_margin_s: Option<f64>,
    /// ZVS pairs where the tolerances leave no reliably hittable window
    /// (treated as ZVS-impossible: the fallback aim applies); 0 without a
    /// `[tolerance]` table.
    pub zvs_unreliable: u64,
    /// Largest normalised load J among the pairs whose turn-on missed the
    /// window (`None` when none did): how far above the ZVS boundary misses
    /// reach.
    pub outside_window_max_load: Option<f64>,
    /// Widest true window among the pairs whose turn-on missed it, ticks
    /// (`None` when none did): measured at each miss, not estimated.
    pub outside_window_max_width_ticks: Option<f64>,
    /// Largest delay the method commands, ticks (must fit the timer counter).
    pub max_commanded_ticks: u32,
    /// Voltage and current codes where it is commanded.
    pub max_commanded_at: (u16, u16),
    /// Pairs the model refused (should be 0).
    pub model_errors: u64,
    /// Threads the check ran on.
    pub threads: usize,
}

/// One row of voltage codes.
#[derive(Debug, Clone, Default)]
struct Row {
    max_err: f64,
    worst_ci: u16,
    sum_sq: f64,
    approx: Option<(f64, u16)>,
    points: u64,
    zvs: u64,
    early: u64,
    late: u64,
    narrow: u64,
    wide_out: u64,
    min_margin: Option<f64>,
    robust: u64,
    robust_out: u64,
    robust_margin: Option<f64>,
    unreliable: u64,
    miss_load: Option<f64>,
    miss_width: Option<f64>,
    max_cmd: u32,
    max_cmd_ci: u16,
    model_errors: u64,
}

/// One row for every method: the exact model is evaluated once per pair.
fn check_row(
    design: &Design,
    model: &ExactModel<'_>,
    methods: &[&dyn DelayMethod],
    cv: u16,
) -> Vec<Row> {
    let i = design.io_codes;
    let mut rows = vec![
        Row {
            worst_ci: i.lo,
            max_cmd_ci: i.lo,
            ..Row::default()
        };
        methods.len()
    ];
    let clock = design.timer.clock_hz();
    let tick_s = 1.0 / clock;
    let lead = design.timer.lead_s();
    let row = model.row_at_code(cv);
    // What the checks read of the model, a chunk of the row at a time.
    const CHUNK: usize = 256;
    let mut seen = [None; CHUNK];
    let mut c = u32::from(i.lo);
    while c <= u32::from(i.hi) {
        let n = (u32::from(i.hi) - c + 1).min(CHUNK as u32) as usize;
        let first = c as u16;
        row.for_each(first, first + (n - 1) as u16, |ci, p| {
            if let Some(s) = seen.get_mut(usize::from(ci - first)) {
                // A model answer that is not a number is a refusal, never
                // a silent pass of the comparisons below.
                *s = p.ok().map(|p| Seen::of(&p)).filter(Seen::is_finite);
            }
        });
        // The ring's window, computed at most once a pair, where some
        // method needs it.
        let mut ring: Vec<(u16, Option<Seen>)> = Vec::new();
        for (m, r) in methods.iter().zip(rows.iter_mut()) {
            let mut acc = std::mem::take(r);
            for (&p, ci) in seen[..n].iter().zip(first..) {
                let got = m.eval(cv, ci);
                // A multiplication, not a division: this runs at every pair
                // (the two differ by an ulp, far inside the model's bound).
                let on = f64::from(got.0) * tick_s + lead;
                let mut p = p;
                // Where the model's grid answered and this method's turn-on
                // lies within the grid's bound of a decision (a window
                // edge, a window a tick wide), the ring decides; the aim
                // stays the model's.
                if let Some(q) = p {
                    if q.eps_ticks > 0.0 && undecided(&q, on, clock, tick_s) {
                        p = match ring.iter().find(|(c, _)| *c == ci) {
                            Some(&(_, p)) => p,
                            None => {
                                let p = model
                                    .ring_window(design.vin_of(cv), design.io_of(ci))
                                    .ok()
                                    .map(|w| Seen {
                                        window: w.map(|w| (w.open_s, w.close_s)),
                                        eps_ticks: 0.0,
                                        ..q
                                    });
                                ring.push((ci, p));
                                p
                            }
                        };
                    }
                }
                check_pair(design, got, on, cv, ci, p, &mut acc);
            }
            *r = acc;
        }
        c += n as u32;
    }
    rows
}

/// What the checks read of the model at a pair.
#[derive(Debug, Clone, Copy)]
struct Seen {
    /// [`crate::generate::ExactPoint::ticks`].
    ticks: f64,
    /// [`crate::generate::ExactPoint::nominal_ticks`].
    nominal_ticks: f64,
    /// The window's open and close, second.
    window: Option<(f64, f64)>,
    /// The robust window's open and close, second.
    robust: Option<(f64, f64)>,
    /// [`crate::generate::ExactPoint::model_eps_ticks`].
    eps_ticks: f64,
}

impl Seen {
    #[inline(always)]
    fn of(p: &crate::generate::ExactPoint) -> Self {
        Self {
            ticks: p.ticks,
            nominal_ticks: p.nominal_ticks,
            window: p.window.map(|w| (w.open_s, w.close_s)),
            robust: p.robust.map(|w| (w.open_s, w.close_s)),
            eps_ticks: p.model_eps_ticks,
        }
    }
}

impl Seen {
    fn is_finite(&self) -> bool {
        let w = |w: Option<(f64, f64)>| w.is_none_or(|(a, b)| a.is_finite() && b.is_finite());
        self.ticks.is_finite()
            && self.nominal_ticks.is_finite()
            && self.eps_ticks.is_finite()
            && w(self.window)
            && w(self.robust)
    }
}

/// Whether a turn-on at `on` (second) is within the model's bound of a
/// decision at `p`: an edge of its window, or a window width of one tick.
fn undecided(p: &Seen, on: f64, clock: f64, tick_s: f64) -> bool {
    let eps = p.eps_ticks * tick_s;
    p.window.is_some_and(|(open, close)| {
        (on - open).abs() <= eps
            || (on - close).abs() <= eps
            || ((close - open) * clock - 1.0).abs() <= 2.0 * p.eps_ticks
    })
}

/// Add the pair (`cv`'s row, current code `ci`) to `r`: the method
/// commanded `got` (ticks, and the delay before rounding), the model said
/// `p`.
#[inline(always)]
fn check_pair(
    design: &Design,
    (got, raw): (u32, Option<f64>),
    on: f64,
    cv: u16,
    ci: u16,
    p: Option<Seen>,
    r: &mut Row,
) {
    let clock = design.timer.clock_hz();
    let z0 = design.tank.z0_ohm();
    {
        r.points += 1;
        let Some(p) = p else {
            r.model_errors += 1;
            return;
        };
        if got > r.max_cmd {
            r.max_cmd = got;
            r.max_cmd_ci = ci;
        }
        // The aim is the model's as computed (a preference, not a bound);
        // the windows carry the grid's bound where it answered, and the
        // closed forms' approximation error is reported as its upper
        // bound.
        let eps = p.eps_ticks;
        let err = (f64::from(got) - p.ticks).abs();
        r.sum_sq += err * err;
        if err > r.max_err {
            r.max_err = err;
            r.worst_ci = ci;
        }
        // The approximation error where the method's own delay is commanded
        // (everywhere with the valley fallback; inside the ZVS region with a
        // fixed one).
        let fixed = matches!(design.fallback, timing_core::table::Fallback::Fixed(_));
        if let Some(raw) = raw {
            if !fixed || p.window.is_some() {
                let e = (raw - p.nominal_ticks).abs() + eps;
                if r.approx.is_none_or(|(w, _)| e > w) {
                    r.approx = Some((e, ci));
                }
            }
        }
        if let Some((open_s, close_s)) = p.window {
            let width_s = close_s - open_s;
            r.zvs += 1;
            if width_s * clock < 1.0 {
                r.narrow += 1;
            }
            if on < open_s {
                r.early += 1;
            } else if on > close_s {
                r.late += 1;
            }
            match p.robust {
                Some((r_open, r_close)) => {
                    r.robust += 1;
                    let mg = (on - r_open).min(r_close - on);
                    if mg < 0.0 {
                        r.robust_out += 1;
                    }
                    r.robust_margin = Some(r.robust_margin.map_or(mg, |x: f64| x.min(mg)));
                }
                None if design.tolerance.is_some() => r.unreliable += 1,
                None => {}
            }
            if (on < open_s || on > close_s) && width_s * clock >= 1.0 {
                r.wide_out += 1;
            }
            if on < open_s || on > close_s {
                // J = Io*Z0/Vin for every cell.
                let j = design.io_of(ci) * z0 / design.vin_of(cv);
                r.miss_load = Some(r.miss_load.map_or(j, |x: f64| x.max(j)));
                let wt = width_s * clock;
                r.miss_width = Some(r.miss_width.map_or(wt, |x: f64| x.max(wt)));
            } else {
                let mg = (on - open_s).min(close_s - on) - eps / clock;
                r.min_margin = Some(r.min_margin.map_or(mg, |x: f64| x.min(mg)));
            }
        }
    }
}

/// Check `method` against the exact model of `design` at every code pair
/// in the design range, on all cores; `progress` is called with the
/// fraction done (0..1) now and then.
pub fn verify(
    design: &Design,
    method: &dyn DelayMethod,
    progress: Option<&mut dyn FnMut(f64)>,
) -> VerifyReport {
    let mut all = verify_all(design, &[method], progress);
    all.swap_remove(0)
}

/// [`verify`] for several methods in one pass over the code pairs (the
/// exact model, the expensive part with a Coss curve, runs once per pair).
/// Reports in the order of `methods`.
pub fn verify_all(
    design: &Design,
    methods: &[&dyn DelayMethod],
    progress: Option<&mut dyn FnMut(f64)>,
) -> Vec<VerifyReport> {
    if methods.is_empty() {
        return Vec::new();
    }
    verify_rows(design, &ExactModel::new(design), methods, progress, &|_| {})
}

/// [`verify_all`] against a given model of the design (generation passes
/// its own, which keeps every reading's robust window and aim).
pub fn verify_all_with(
    design: &Design,
    model: &ExactModel<'_>,
    methods: &[&dyn DelayMethod],
) -> Vec<VerifyReport> {
    if methods.is_empty() {
        return Vec::new();
    }
    verify_rows(design, model, methods, None, &|_| {})
}

/// [`verify_all`] with `each_row` called in the worker before each row of
/// voltage codes (tests inject a fault there: a panicking worker must fail
/// the verification, never shorten it).
fn verify_rows(
    design: &Design,
    model: &ExactModel<'_>,
    methods: &[&dyn DelayMethod],
    progress: Option<&mut dyn FnMut(f64)>,
    each_row: &(dyn Fn(u16) + Sync),
) -> Vec<VerifyReport> {
    let v = design.vin_codes;
    let rows = crate::par::map_rows_with_progress(
        v.len() as usize,
        |k| {
            let cv = v.lo + k as u16;
            each_row(cv);
            check_row(design, model, methods, cv)
        },
        progress,
    );
    let threads = crate::par::threads();
    methods
        .iter()
        .enumerate()
        .map(|(m, method)| merge(design, method.name(), &rows, m, threads))
        .collect()
}

/// The report of method number `m` from the rows.
fn merge(
    design: &Design,
    name: &'static str,
    rows: &[Vec<Row>],
    m: usize,
    threads: usize,
) -> VerifyReport {
    let (v, i) = (design.vin_codes, design.io_codes);
    let mut r = VerifyReport {
        method: name,
        max_error_ticks: 0.0,
        rms_error_ticks: 0.0,
        worst_vin_code: v.lo,
        worst_io_code: i.lo,
        worst_vin_v: 0.0,
        worst_io_a: 0.0,
        max_approximation_error_ticks: None,
        max_approximation_error_at: None,
        points_checked: 0,
        pairs_in_range: u64::from(v.len()) * u64::from(i.len()),
        zvs_points: 0,
        outside_window: 0,
        early: 0,
        late: 0,
        narrower_than_a_tick: 0,
        outside_window_wide: 0,
        min_margin_s: None,
        robust_points: 0,
        outside_robust_window: 0,
        min_robust_margin_s: None,
        zvs_unreliable: 0,
        outside_window_max_load: None,
        outside_window_max_width_ticks: None,
        max_commanded_ticks: 0,
        max_commanded_at: (v.lo, i.lo),
        model_errors: 0,
        threads,
    };
    let mut sum_sq = 0.0f64;
    let empty = Row::default();
    for (k, per_method) in rows.iter().enumerate() {
        let row = per_method.get(m).unwrap_or(&empty);
        let cv = v.lo + k as u16;
        r.points_checked += row.points;
        sum_sq += row.sum_sq;
        if row.max_err > r.max_error_ticks {
            r.max_error_ticks = row.max_err;
            r.worst_vin_code = cv;
            r.worst_io_code = row.worst_ci;
        }
        if let Some((e, ci)) = row.approx {
            if r.max_approximation_error_ticks.is_none_or(|w| e > w) {
                r.max_approximation_error_ticks = Some(e);
                r.max_approximation_error_at = Some((cv, ci));
            }
        }
        if row.max_cmd > r.max_commanded_ticks {
            r.max_commanded_ticks = row.max_cmd;
            r.max_commanded_at = (cv, row.max_cmd_ci);
        }
        r.zvs_points += row.zvs;
        r.early += row.early;
        r.late += row.late;
        r.narrower_than_a_tick += row.narrow;
        r.outside_window_wide += row.wide_out;
        r.model_errors += row.model_errors;
        if let Some(m) = row.min_margin {
            r.min_margin_s = Some(r.min_margin_s.map_or(m, |x| x.min(m)));
        }
        r.robust_points += row.robust;
        r.outside_robust_window += row.robust_out;
        r.zvs_unreliable += row.unreliable;
        if let Some(m) = row.robust_margin {
            r.min_robust_margin_s = Some(r.min_robust_margin_s.map_or(m, |x| x.min(m)));
        }
        if let Some(j) = row.miss_load {
            r.outside_window_max_load = Some(r.outside_window_max_load.map_or(j, |x| x.max(j)));
        }
        if let Some(w) = row.miss_width {
            r.outside_window_max_width_ticks =
                Some(r.outside_window_max_width_ticks.map_or(w, |x| x.max(w)));
        }
    }
    r.outside_window = r.early + r.late;
    r.rms_error_ticks = (sum_sq / r.points_checked.max(1) as f64).sqrt();
    r.worst_vin_v = design.vin_of(r.worst_vin_code);
    r.worst_io_a = design.io_of(r.worst_io_code);
    r
}

#[cfg(test)]
mod tests {
    use super::*;

    fn small() -> Design {
        Design::parse(
            r#"
name = "t"
topology = "buck"
lr = "1u"
cr = "6.8n"
vin = [30, 40]
io = [1, 4]
vout = 12
[adc]
bits = 12
vin_volts_per_code = 0.0161
io_amps_per_code = 0.00488
io_zero_code = 0
[timer]
clock_hz = "170M"
counter_bits = 16
driver_delay = "25n"
"#,
            "small",
        )
        .unwrap()
    }

    #[test]
    fn every_pair_of_the_range_is_checked() {
        let d = small();
        let cf = d.closed_form().unwrap().fast_f32().unwrap();
        let r = verify(&d, &cf, None);
        assert_eq!(
            r.points_checked,
            u64::from(d.vin_codes.len()) * u64::from(d.io_codes.len())
        );
        assert_eq!(r.points_checked, r.pairs_in_range);
    }

    #[test]
    fn a_panicking_worker_fails_the_verification() {
        let d = small();
        let cf = d.closed_form().unwrap().fast_f32().unwrap();
        let bad = d.vin_codes.lo + 7;
        let r = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
            verify_rows(&d, &ExactModel::new(&d), &[&cf], None, &|cv| {
                assert_ne!(cv, bad, "injected fault");
            })
        }));
        assert!(r.is_err(), "a worker's panic must reach the caller");
        let mut ticks = 0;
        let mut p = |_: f64| ticks += 1;
        let r = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
            verify_rows(&d, &ExactModel::new(&d), &[&cf], Some(&mut p), &|cv| {
                assert_ne!(cv, bad, "injected fault");
            })
        }));
        assert!(r.is_err(), "also with a progress bar");
    }
}
