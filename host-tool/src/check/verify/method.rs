//! The runtime methods a verification checks, behind one trait: the table
//! lookup and the closed forms, evaluated as the firmware evaluates them.

use timing_core::closed_form::{FastF32, FixedPoint, LibmF32, MicromathF32};
use timing_core::table::{DelayTable, Entries};
use timing_core::{AdcCode, Ticks};

/// A runtime delay method: what the interrupt would command at a code pair.
pub trait DelayMethod: Sync {
    /// Method name as the CLI and the firmware print it.
    fn name(&self) -> &'static str;
    /// Commanded ticks, and the delay before rounding (ticks) for methods
    /// that compute one (the closed forms).
    fn eval(&self, vin: u16, io: u16) -> (u32, Option<f64>);

    /// Whether [`DelayMethod::eval`] commands the same delay at codes
    /// (`2v`, `z + 2c`) as at (`v`, `z + c`) wherever both pairs are in the
    /// design range (see [`crate::check::doubling`]). Only when this holds by
    /// construction; `false` unless a method says otherwise.
    fn same_at_doubled_codes(&self) -> bool {
        false
    }

    /// [`DelayMethod::eval`] at voltage code `vin` and the current codes
    /// `first`, `first + step`, ... (one a slot of `ticks`), into `ticks`
    /// and `raw`; returns whether the method computes a delay before
    /// rounding (then `raw` holds it; else `raw` is left alone). The same
    /// answers as `eval`, one dynamic call a run instead of one a pair
    /// (this default is compiled for each method, so `eval` is inlined
    /// into its loop).
    fn eval_run(
        &self,
        vin: u16,
        first: u16,
        step: u16,
        ticks: &mut [Ticks],
        raw: &mut [f64],
    ) -> bool {
        let mut has_raw = false;
        for (k, (t, r)) in ticks.iter_mut().zip(raw.iter_mut()).enumerate() {
            let (got, x) = self.eval(vin, first.wrapping_add(step.wrapping_mul(k as u16)));
            *t = Ticks::new(got);
            if let Some(x) = x {
                *r = x;
                has_raw = true;
            }
        }
        has_raw
    }
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
    fn same_at_doubled_codes(&self) -> bool {
        DelayTable::same_at_doubled_codes(self)
    }
    fn eval_run(
        &self,
        vin: u16,
        first: u16,
        step: u16,
        ticks: &mut [Ticks],
        _raw: &mut [f64],
    ) -> bool {
        self.delays_along_io(AdcCode::new(vin), AdcCode::new(first), step, ticks);
        false
    }
}

impl DelayMethod for FastF32<'_> {
    fn name(&self) -> &'static str {
        "closed-form-f32"
    }
    fn eval(&self, vin: u16, io: u16) -> (u32, Option<f64>) {
        let (v, i) = (AdcCode::new(vin), AdcCode::new(io));
        let (raw, _) = self.raw_ticks(v, i);
        (self.delay(v, i).ticks.get(), Some(f64::from(raw)))
    }
}

impl DelayMethod for FixedPoint<'_> {
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

impl DelayMethod for MicromathF32 {
    fn name(&self) -> &'static str {
        "micromath-f32"
    }
    fn eval(&self, vin: u16, io: u16) -> (u32, Option<f64>) {
        let (v, i) = (AdcCode::new(vin), AdcCode::new(io));
        let (raw, _) = self.raw_ticks(v, i);
        (self.delay(v, i).ticks.get(), Some(f64::from(raw)))
    }
}
