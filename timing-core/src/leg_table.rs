//! A half-bridge leg's dead-time tables: one a switching edge, the
//! commanded dead time in the dead-time generator's steps over the bus
//! voltage's ADC code and the current's (raw codes: a bidirectional
//! sensor's zero lies anywhere in the range, and a current of the wrong
//! sign is one more part of the range).
//!
//! The lookup is [`crate::table`]'s margin layout over the raw codes: the
//! column coordinate `d = (current - lo + 1)*io_mul + offset - bus*vin_mul`
//! (`lo` the range's first current code; `vin_mul = 0` makes the columns
//! plain current codes, a slope slants them along the line where the swing
//! stops completing), interpolated along `d` in the two rows around the bus
//! code, then between them, in unsigned integers: a C compiler reproduces
//! it bit for bit and the interrupt needs no division. What the
//! table holds where the swing stops short (the extremum or the least dead
//! time) is in its entries; there is no separate test. Accuracy is the
//! table's, proven on the host at every code pair (`zvs-timing verify`).

use crate::adc::{AdcCode, CodeRange};
use crate::table::{DelayTable, Entries, Fallback, Layout, MarginLayout, Sensing, TableError};
use crate::Ticks;

/// The dead-time table of one switching edge of a leg.
///
/// ```
/// # fn main() -> Result<(), timing_core::table::TableError> {
/// use timing_core::leg_table::EdgeTable;
/// use timing_core::table::MarginLayout;
/// use timing_core::{AdcCode, CodeRange};
/// // Bus codes 2000..2064, current codes 1000..1063 (zero at 2048: the
/// // rising edge's negative currents); columns 64 codes apart from d = 0
/// // (one code below the range), rows 64 bus codes apart.
/// static ENTRIES: [u16; 6] = [40 << 4, 20 << 4, 10 << 4, 44 << 4, 22 << 4, 11 << 4];
/// let columns = MarginLayout {
///     io_mul: 1, vin_mul: 0, offset: 0, step_shift: 6, cols: 3, vin_shift: 6, rows: 2,
/// };
/// let t = EdgeTable::from_static(
///     CodeRange { lo: 2000, hi: 2064 },
///     CodeRange { lo: 1000, hi: 1063 },
///     columns,
///     4,
///     &ENTRIES,
/// )?;
/// assert_eq!(t.dead_time(AdcCode::new(2000), AdcCode::new(999)).get(), 40);
/// // Halfway between the first two columns: between 40 and 20 steps.
/// assert_eq!(t.dead_time(AdcCode::new(2000), AdcCode::new(1031)).get(), 30);
/// // The next row: 44 steps.
/// assert_eq!(t.dead_time(AdcCode::new(2064), AdcCode::new(999)).get(), 44);
/// # Ok(()) }
/// ```
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct EdgeTable<E> {
    table: DelayTable<E>,
}

/// The sensing description of an edge table: the bus codes along the
/// rows, the current codes counted from one below the range's first
/// (`current.lo - 1` takes the place of a sensor zero), no ZVS test.
#[must_use]
pub const fn edge_sensing(bus: CodeRange, current: CodeRange) -> Sensing {
    Sensing {
        vin: bus,
        io: current,
        io_zero: current.lo.wrapping_sub(1),
        zvs_io_mul: 0,
        zvs_vin_mul: 0,
    }
}

impl EdgeTable<&'static [u16]> {
    /// [`EdgeTable::new`] for entries in a `static`, in `const` context
    /// (validated at compile time in generated firmware sources).
    ///
    /// # Errors
    /// As [`EdgeTable::new`].
    pub const fn from_static(
        bus: CodeRange,
        current: CodeRange,
        columns: MarginLayout,
        frac_bits: u8,
        entries: &'static [u16],
    ) -> Result<Self, TableError> {
        match DelayTable::from_static(
            edge_sensing(bus, current),
            Layout::Margin(columns),
            frac_bits,
            Fallback::Valley,
            entries,
        ) {
            Ok(table) => Ok(Self { table }),
            Err(e) => Err(e),
        }
    }
}

impl<E: Entries> EdgeTable<E> {
    /// Validate and build an edge table: bus codes `bus` (code 0
    /// excluded), raw current codes `current` (code 0 excluded), the
    /// columns over them, entries of `frac_bits` fractional bits (steps
    /// times `2^frac_bits`, row-major over the bus).
    ///
    /// # Errors
    /// [`TableError::Layout`] or [`TableError::EntryCount`], as
    /// [`DelayTable::new`] for the margin layout (a current range starting
    /// at code 0 among them).
    pub fn new(
        bus: CodeRange,
        current: CodeRange,
        columns: MarginLayout,
        frac_bits: u8,
        entries: E,
    ) -> Result<Self, TableError> {
        DelayTable::new(
            edge_sensing(bus, current),
            Layout::Margin(columns),
            frac_bits,
            Fallback::Valley,
            entries,
        )
        .map(|table| Self { table })
    }

    /// The dead time to command, in the generator's steps, at bus code
    /// `bus` and current code `current` (each clamped to the table's
    /// range). Integer-only, no division; cannot fail or panic. Always
    /// inlined, as [`DelayTable::delay`].
    #[inline(always)]
    pub fn dead_time(&self, bus: AdcCode, current: AdcCode) -> Ticks {
        self.table.delay(bus, current).ticks
    }

    /// The table as [`crate::table`] holds it (layout, ranges, entries).
    #[must_use]
    pub fn table(&self) -> &DelayTable<E> {
        &self.table
    }
}
