//! The hardware binding: the only module a port to a real MCU rewrites.
//!
//! Here the "ADC" is a pair of result registers that the plant model writes,
//! and the "compare register" is a word the judge reads back. On a real
//! power-conversion MCU:
//! - `read_adc` reads the injected-conversion data registers of the Vin and
//!   Io channels, whose conversions the PWM timer triggers at the turn-off
//!   event (so the codes are fresh when the interrupt runs);
//! - `write_compare` writes the compare register of the advanced or
//!   high-resolution PWM timer that sets the next turn-on edge, counted
//!   from the turn-off event (preload enabled, so the value takes effect at
//!   the next period and never mid-transition);
//! - SysTick stands in for the PWM timer's turn-off (or period) interrupt.

use core::sync::atomic::{AtomicBool, AtomicU32, Ordering};

use timing_core::{AdcCode, Ticks};

static ADC_RESULT: AtomicU32 = AtomicU32::new(0);
static COMPARE: AtomicU32 = AtomicU32::new(0);
/// Where the methods that do not drive the PWM put their results (index =
/// method; 0 is unused, the table drives `COMPARE`).
static SHADOW: [AtomicU32; 5] = [const { AtomicU32::new(0) }; 5];

/// Latest Vin and Io conversions (the interrupt's input).
#[inline(always)]
pub fn read_adc() -> (AdcCode, AdcCode) {
    let w = ADC_RESULT.load(Ordering::Relaxed);
    (AdcCode::new(w as u16), AdcCode::new((w >> 16) as u16))
}

/// Next turn-on delay into the PWM compare register (the interrupt's output).
#[inline(always)]
pub fn write_compare(t: Ticks) {
    COMPARE.store(t.get(), Ordering::Relaxed);
}

/// A method's result beside the one that drives the PWM, for comparison.
#[inline(always)]
pub fn write_shadow(method: usize, t: Ticks) {
    if let Some(r) = SHADOW.get(method) {
        r.store(t.get(), Ordering::Relaxed);
    }
}

/// What method `method` last wrote with [`write_shadow`].
pub fn shadow(method: usize) -> Ticks {
    Ticks::new(SHADOW.get(method).map_or(0, |r| r.load(Ordering::Relaxed)))
}

/// Stand-in for the ADC hardware: the plant model posts its conversions.
pub fn post_conversions(vin: AdcCode, io: AdcCode) {
    ADC_RESULT.store(
        u32::from(vin.get()) | (u32::from(io.get()) << 16),
        Ordering::Relaxed,
    );
}

/// Stand-in for the PWM hardware: what the interrupt last commanded.
pub fn commanded() -> Ticks {
    Ticks::new(COMPARE.load(Ordering::Relaxed))
}

// The half-bridge leg's side. On a real MCU the bus voltage and the
// inductor current are injected conversions triggered at each switching
// edge (the current sampled at the instant, or computed from the
// commanded peak and valley in triangular mode), and the dead times go to
// the PWM's dead-time generator registers, one per edge.

static LEG_ADC: AtomicU32 = AtomicU32::new(0);
static LEG_CURRENTS: AtomicU32 = AtomicU32::new(0);
static DEAD_TIME: [AtomicU32; 2] = [const { AtomicU32::new(0) }; 2];

/// Latest bus-voltage conversion and the current at edge `edge`'s
/// switching instant (0: falling, 1: rising).
#[inline(always)]
pub fn read_leg_adc(edge: usize) -> (AdcCode, AdcCode) {
    let bus = LEG_ADC.load(Ordering::Relaxed) as u16;
    let w = LEG_CURRENTS.load(Ordering::Relaxed);
    let current = if edge == 0 {
        w as u16
    } else {
        (w >> 16) as u16
    };
    (AdcCode::new(bus), AdcCode::new(current))
}

/// Edge `edge`'s dead time into its generator register, steps.
#[inline(always)]
pub fn write_dead_time(edge: usize, t: Ticks) {
    if let Some(r) = DEAD_TIME.get(edge) {
        r.store(t.get(), Ordering::Relaxed);
    }
}

/// Stand-in for the ADC: the leg plant posts the bus and both edges' currents.
pub fn post_leg_conversions(bus: AdcCode, falling: AdcCode, rising: AdcCode) {
    LEG_ADC.store(u32::from(bus.get()), Ordering::Relaxed);
    LEG_CURRENTS.store(
        u32::from(falling.get()) | (u32::from(rising.get()) << 16),
        Ordering::Relaxed,
    );
}

/// Stand-in for the PWM: edge `edge`'s last dead time, steps.
pub fn dead_time(edge: usize) -> Ticks {
    Ticks::new(DEAD_TIME.get(edge).map_or(0, |r| r.load(Ordering::Relaxed)))
}

// The online trim's side. On a real MCU a comparator watches the switch
// node and a timer input-capture channel, armed at the turn-off event,
// latches the counter when the switch voltage falls below its threshold
// (a channel armed with its input already asserted, as a comparator stuck
// low leaves it, reports at once); the interrupt reads the latched count
// and whether the channel fired since the last read.

/// The capture of the last switching event: the count, or `NO_CAPTURE`.
static CAPTURE: AtomicU32 = AtomicU32::new(NO_CAPTURE);
const NO_CAPTURE: u32 = u32::MAX;

/// The last switching event's captured edge, ticks from the turn-off
/// event (`None`: the channel did not fire).
#[inline(always)]
pub fn read_capture() -> Option<Ticks> {
    let c = CAPTURE.load(Ordering::Relaxed);
    if c == NO_CAPTURE {
        None
    } else {
        Some(Ticks::new(c))
    }
}

/// Set with each switching event's capture and conversions, cleared by
/// the interrupt that serves them (the end-of-conversion flag).
static EVENT: AtomicBool = AtomicBool::new(false);

/// Stand-in for the capture channel: the plant posts what it latched, and
/// the event is pending.
pub fn post_capture(c: Option<Ticks>) {
    CAPTURE.store(
        c.map_or(NO_CAPTURE, |t| t.get().min(NO_CAPTURE - 1)),
        Ordering::Relaxed,
    );
    EVENT.store(true, Ordering::Release);
}

/// Whether a new event is pending, clearing it: the trim serves each
/// switching event once, however often the periodic interrupt comes (the
/// plant's exact model is slow on a core without an FPU). A load and a
/// store: ARMv6-M has no atomic swap, and only the interrupt clears it.
#[inline(always)]
pub fn take_event() -> bool {
    let pending = EVENT.load(Ordering::Acquire);
    if pending {
        EVENT.store(false, Ordering::Relaxed);
    }
    pending
}
