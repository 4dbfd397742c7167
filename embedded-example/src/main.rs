//! zvs-timing firmware example: the next turn-on delay computed in a
//! periodic interrupt from the latest Vin and Io conversions with
//! timing-core's table lookup, judged cycle by cycle against the exact
//! window of the true operating point. Runs under QEMU (mps2-an386 for the
//! Cortex-M4F build, mps2-an385 for the ARMv6-M build); logs with defmt.
//!
//! CAUTION: a real converter runs at lethal voltages; bring it up at reduced
//! voltage and check every delay with a scope.

#![no_std]
#![no_main]
// The panic-free proof build compiles only the interrupt's path; the
// scenario's items are unused there.
#![cfg_attr(feature = "panic-never", allow(unused))]

mod hw;
mod plant;

use core::sync::atomic::{AtomicBool, AtomicU32, Ordering};

use cortex_m::peripheral::syst::SystClkSource;
use cortex_m::peripheral::SYST;
use cortex_m_rt::{entry, exception};
// The defmt logger (semihosting). Left out of the panic-free proof build:
// its I/O path has panics of its own, and the proof is about the interrupt.
#[cfg(not(feature = "panic-never"))]
use defmt_semihosting as _;
use timing_core::table::{DelayTable, Entries};
use timing_core::{CellPoint, Tank, Timer, Topology, Transition};

/// The table generated at build time by build.rs from tables/winch_aux.toml.
mod built {
    include!(concat!(env!("OUT_DIR"), "/winch_aux_table.rs"));
}

/// The same table as a `.bin` blob placed in flash, checked at start-up.
static BLOB: &[u8] = include_bytes!(concat!(env!("OUT_DIR"), "/winch_aux.bin"));

#[cfg(all(feature = "panic-never", feature = "log"))]
compile_error!(
    "build the panic-free proof without logging: --no-default-features --features panic-never"
);
#[cfg(not(any(feature = "panic-never", feature = "log")))]
compile_error!("the scenario run logs with defmt: enable the `log` feature (default)");

/// SysTick reload: the stand-in switching period (long enough for the judge
/// in the main loop to finish between interrupts).
const PERIOD_TICKS: u32 = 1 << 20;
/// Cycles in the run.
const CYCLES: u32 = 2400;
/// Under `-icount shift=8` every instruction advances virtual time 256 ns
/// and the mps2 SysTick counts at 25 MHz: 6.4 ticks per instruction, i.e.
/// 32 ticks per 5 instructions.
const TICKS_PER_5_INSTR: u32 = 32;

static FIRED: AtomicBool = AtomicBool::new(false);
static COST: AtomicU32 = AtomicU32::new(0);

/// The interrupt's compute path: read, look up, write. Inlined, so with
/// the build-time table (all `const`) the layout and fallback fold into the
/// code.
#[inline(always)]
fn compute<E: Entries>(t: &DelayTable<E>) {
    let (vin, io) = hw::read_adc();
    hw::write_compare(t.delay(vin, io).ticks);
}

#[cfg(not(feature = "panic-never"))]
#[exception]
fn SysTick() {
    // The const build-time table: validated at compile time, its layout
    // folds into the code.
    let start = SYST::get_current();
    compute(&built::TABLE);
    let end = SYST::get_current();
    COST.store(start.wrapping_sub(end) & 0x00ff_ffff, Ordering::Relaxed);
    FIRED.store(true, Ordering::Release);
}

/// SysTick ticks around 32 `nop`s (the known sequence that checks the
/// conversion from ticks to instructions).
#[inline(never)]
fn known_measurement() -> u32 {
    let start = SYST::get_current();
    for _ in 0..4 {
        cortex_m::asm::nop();
        cortex_m::asm::nop();
        cortex_m::asm::nop();
        cortex_m::asm::nop();
        cortex_m::asm::nop();
        cortex_m::asm::nop();
        cortex_m::asm::nop();
        cortex_m::asm::nop();
    }
    let end = SYST::get_current();
    start.wrapping_sub(end) & 0x00ff_ffff
}

/// SysTick ticks of an empty measurement (two reads back to back).
#[inline(never)]
fn empty_measurement() -> u32 {
    let start = SYST::get_current();
    let end = SYST::get_current();
    start.wrapping_sub(end) & 0x00ff_ffff
}

fn exit(ok: bool) -> ! {
    cortex_m_semihosting::debug::exit(if ok {
        cortex_m_semihosting::debug::EXIT_SUCCESS
    } else {
        cortex_m_semihosting::debug::EXIT_FAILURE
    });
    loop {
        cortex_m::asm::wfi();
    }
}

/// The panic-free proof build: the table's validation and the interrupt's
/// compute path (read, look up, write) over a sweep of code pairs, with
/// the table hidden from the optimiser (`black_box`) as it is in the
/// interrupt, which takes it from a static. If anything reachable here
/// could panic, the link fails. (The blob reader's postcard decoding is
/// outside the proof: it runs once at start-up, before the interrupt.)
#[cfg(feature = "panic-never")]
#[entry]
fn main() -> ! {
    let Ok(built) = built::table() else {
        exit(false)
    };
    let table = core::hint::black_box(built);
    let mut acc = 0u32;
    for v in (0..=u16::MAX).step_by(257) {
        for i in (0..=u16::MAX).step_by(263) {
            hw::post_conversions(
                timing_core::AdcCode::new(core::hint::black_box(v)),
                timing_core::AdcCode::new(i),
            );
            compute(&table);
            acc = acc.wrapping_add(hw::commanded().get());
        }
    }
    exit(core::hint::black_box(acc) != 0)
}

#[cfg(not(feature = "panic-never"))]
#[entry]
fn main() -> ! {
    let target = if cfg!(target_arch = "arm") && cfg!(target_abi = "eabihf") {
        "cortex-m4f"
    } else {
        "cortex-m0"
    };
    let Some(mut core) = cortex_m::Peripherals::take() else {
        exit(false)
    };

    // Tables: the build-time one, and the blob in flash checked before use.
    if let Err(e) = built::table() {
        defmt::error!("build-time table refused: {}", e);
        exit(false)
    }
    let table = match timing_core::blob::open(BLOB, Some(built::DESIGN_HASH)) {
        Ok((_, t)) => {
            defmt::info!(
                "table blob accepted: {=usize} bytes, CRC-32 and design hash match",
                BLOB.len()
            );
            Some(t)
        }
        Err(e) => {
            defmt::warn!(
                "table blob refused ({}): falling back to the build-time table",
                e
            );
            None
        }
    };
    // The refusal path, exercised on a corrupted copy in RAM.
    let mut corrupt = [0u8; 8192];
    let n = BLOB.len().min(corrupt.len());
    corrupt[..n].copy_from_slice(&BLOB[..n]);
    corrupt[n - 3] ^= 0x10;
    match timing_core::blob::open(&corrupt[..n], Some(built::DESIGN_HASH)) {
        Ok(_) => {
            defmt::error!("a corrupted blob was accepted");
            exit(false)
        }
        Err(e) => defmt::info!("corrupted copy refused as it should be: {}", e),
    }
    let Some(flash_table) = table else {
        exit(false)
    };
    // The interrupt runs the build-time table (u16 entries, constants the
    // compiler folds); the flash blob's table is checked against it every cycle.

    // The exact model of the demo design, for the judge (f32).
    // (The same tank and timer as tables/winch_aux.toml.)
    let (Ok(tank), Ok(timer)) = (
        Tank::new(1.0e-6_f32, 6.8e-9),
        Timer::new(170.0e6_f32, 16, 25.0e-9, 0.0),
    ) else {
        exit(false)
    };

    core.SYST.set_clock_source(SystClkSource::Core);
    core.SYST.set_reload(PERIOD_TICKS - 1);
    core.SYST.clear_current();
    core.SYST.enable_counter();
    // Calibrate with the counter running and the interrupt still off.
    let empty = empty_measurement();
    let known = known_measurement().saturating_sub(empty);
    core.SYST.enable_interrupt();

    let mut plant = plant::Plant::new(CYCLES);
    let (mut zvs, mut valley, mut early, mut late, mut mismatch) = (0u32, 0u32, 0u32, 0u32, 0u32);
    let (mut cost_min, mut cost_max) = (u32::MAX, 0u32);
    for cycle in 0..CYCLES {
        let s = plant.sample(cycle);
        hw::post_conversions(
            timing_core::AdcCode::new(s.vin_code),
            timing_core::AdcCode::new(s.io_code),
        );
        FIRED.store(false, Ordering::Release);
        while !FIRED.load(Ordering::Acquire) {
            cortex_m::asm::wfi();
        }
        let ticks = hw::commanded();
        let cost = COST.load(Ordering::Relaxed).saturating_sub(empty);
        cost_min = cost_min.min(cost);
        cost_max = cost_max.max(cost);
        // Both tables must agree on every cycle.
        let b = flash_table.delay(
            timing_core::AdcCode::new(s.vin_code),
            timing_core::AdcCode::new(s.io_code),
        );
        if b.ticks != ticks {
            mismatch += 1;
        }
        // Judge against the true operating point.
        let Ok(cell) = CellPoint::from_converter(Topology::Buck, s.vin_v, 12.0, s.io_a) else {
            exit(false)
        };
        let Ok(t) = Transition::new(&tank, &cell) else {
            exit(false)
        };
        let on = timer.turn_on_s(ticks);
        match t.window() {
            Some(w) => {
                if on < w.open_s {
                    early += 1;
                    defmt::warn!(
                        "cycle {=u32}: early by {=f32} ns (Vin {=f32} V, Io {=f32} A)",
                        cycle,
                        (w.open_s - on) * 1e9,
                        s.vin_v,
                        s.io_a
                    );
                } else if on > w.close_s {
                    late += 1;
                    defmt::warn!(
                        "cycle {=u32}: late by {=f32} ns (Vin {=f32} V, Io {=f32} A)",
                        cycle,
                        (on - w.close_s) * 1e9,
                        s.vin_v,
                        s.io_a
                    );
                } else {
                    zvs += 1;
                }
            }
            None => valley += 1,
        }
        if cycle % 400 == 0 {
            defmt::info!(
                "cycle {=u32}: Vin {=f32} V, Io {=f32} A, J {=f32}, delay {=u32} ticks, ZVS {=bool}",
                cycle,
                s.vin_v,
                s.io_a,
                t.normalized_load(),
                ticks.get(),
                t.is_zvs()
            );
        }
    }
    core.SYST.disable_interrupt();
    // Instructions = ticks * 5 / 32 (6.4 ticks per instruction).
    let to_instr = |t: u32| (t * 5 + TICKS_PER_5_INSTR / 2) / TICKS_PER_5_INSTR;
    defmt::info!(
        "ZVS-SUMMARY target={=str} cycles={=u32} zvs={=u32} valley={=u32} early={=u32} late={=u32}",
        target,
        CYCLES,
        zvs,
        valley,
        early,
        late
    );
    defmt::info!(
        "ISR-COST target={=str} method=table instructions_min={=u32} instructions_max={=u32}",
        target,
        to_instr(cost_min),
        to_instr(cost_max)
    );
    defmt::info!(
        "TABLES-AGREE target={=str} mismatches={=u32}",
        target,
        mismatch
    );
    // The known sequence is 40 instructions of loop (4 passes of 8 nops,
    // a subtract and a branch) plus one or two of set-up between the two
    // counter reads (see the disassembly); the empty measurement is taken
    // off.
    defmt::info!(
        "CALIBRATION target={=str} empty_ticks={=u32} known_sequence_instructions={=u32}",
        target,
        empty,
        to_instr(known)
    );
    exit(early == 0 && late == 0 && mismatch == 0 && zvs > 0 && valley > 0)
}

#[cfg(not(feature = "panic-never"))]
#[panic_handler]
fn panic(_: &core::panic::PanicInfo) -> ! {
    defmt::error!("panic");
    exit(false)
}

#[cfg(feature = "panic-never")]
#[panic_handler]
fn panic(_: &core::panic::PanicInfo) -> ! {
    extern "Rust" {
        // Deliberately undefined: any panic path left in the binary fails to link.
        fn zvs_timing_panic_is_reachable() -> !;
    }
    unsafe { zvs_timing_panic_is_reachable() }
}
