//! Precomputed turn-on delay tables in fixed point, and their lookup.
//!
//! Every interval of the transition times w0 depends on the normalised load
//! J alone, and for all three cells J = Io*Z0/Vin (buck: V = Vin, I = Io;
//! boost and buck-boost: the Vout factors cancel). So the commanded delay is
//! a function of the ratio of the two ADC codes, which the [`RatioLayout`]
//! tabulates in one dimension; the [`GridLayout`] tabulates it over the raw
//! codes instead and needs no division. Both interpolate linearly (bilinearly
//! for the grid) in unsigned integer arithmetic, so a C compiler reproduces
//! the result bit for bit.
//!
//! [`DelayTable::new`] validates a table once: ranges, shifts, and that
//! every intermediate of the lookup fits 32 bits for every input code. The
//! lookup, [`DelayTable::delay`], then takes any pair of codes, clamps them
//! to the design range, and cannot fail or panic. Accuracy is the table's,
//! proven on the host by exhaustive verification against the exact model.

pub mod log2;

use crate::adc::{AdcCode, CodeRange};
use crate::Ticks;
use log2::log2_q15;

/// Offset of the log-domain index so it is never negative:
/// `lambda = log2_q15(vin) + LOG_OFFSET - log2_q15(io - zero)` (16 octaves).
pub const LOG_OFFSET: u32 = 16 << 15;

/// The log-domain index of a code pair, `2^15 * log2(vin/io) + LOG_OFFSET`
/// (see [`log2::log2_q15`]); `io` is already offset by the sensor zero.
#[inline]
#[must_use]
pub const fn log_ratio_index(vin: u32, io: u32) -> u32 {
    log2_q15(vin)
        .wrapping_add(LOG_OFFSET)
        .wrapping_sub(log2_q15(io))
}

/// Version of the `.bin` blob layout this build writes and reads
/// (see the `blob` module, feature `blob`).
/// Version 2 added [`Layout::LogVolt`], version 3 [`Layout::Margin`].
pub const FORMAT_VERSION: u16 = 3;

/// Table entries: commanded delay in ticks times `2^frac_bits`, one `u16`
/// per node.
pub trait Entries {
    /// Number of entries.
    fn count(&self) -> usize;
    /// Entry `i`; 0 past the end (never reached in a validated table).
    fn at(&self, i: usize) -> u16;
}

impl Entries for &[u16] {
    #[inline]
    fn count(&self) -> usize {
        self.len()
    }
    #[inline]
    fn at(&self, i: usize) -> u16 {
        self.get(i).copied().unwrap_or(0)
    }
}

/// Entries stored as little-endian byte pairs (as in a `.bin` blob in flash).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct LeBytes<'a>(pub &'a [u8]);

impl Entries for LeBytes<'_> {
    #[inline]
    fn count(&self) -> usize {
        self.0.len() >> 1
    }
    #[inline]
    fn at(&self, i: usize) -> u16 {
        let k = i.wrapping_mul(2);
        match (self.0.get(k), self.0.get(k.wrapping_add(1))) {
            (Some(&lo), Some(&hi)) => u16::from_le_bytes([lo, hi]),
            _ => 0,
        }
    }
}

/// What the sensed codes look like: the design range and the current
/// sensor's zero, shared by both layouts.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct Sensing {
    /// Input-voltage codes of the design range; others clamp to its edge.
    pub vin: CodeRange,
    /// Output-current codes of the design range; others clamp to its edge.
    pub io: CodeRange,
    /// Current code that reads 0 A (bidirectional sensors); `io.lo` must
    /// exceed it.
    pub io_zero: u16,
    /// ZVS test: the point is ZVS-capable (J >= 1) when
    /// `(io - io_zero) * zvs_io_mul >= vin * zvs_vin_mul`.
    pub zvs_io_mul: u16,
    /// See `zvs_io_mul`.
    pub zvs_vin_mul: u16,
}

/// One dimension, indexed by the code ratio
/// `q = (vin << ratio_shift) / (io - io_zero)`, proportional to 1/J.
/// Nodes sit at `q_lo + k * 2^step_shift`, k = 0..nodes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct RatioLayout {
    /// Left shift of the voltage code before the division.
    pub ratio_shift: u8,
    /// Ratio at node 0.
    pub q_lo: u32,
    /// Node spacing is `2^step_shift` in q.
    pub step_shift: u8,
    /// Number of nodes (at least 2).
    pub nodes: u16,
}

/// One dimension over the same code ratio q, log-spaced like a float:
/// node `(e - e_lo) * 2^mant_bits + mant` sits at `q = (2^mant_bits + mant) << (e - mant_bits)`
/// for the octave `2^e <= q < 2^(e+1)`, so every octave holds `2^mant_bits`
/// nodes and the relative node spacing is about `2^-mant_bits` everywhere:
/// fit for operating ranges spanning decades of Vin/Io.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct LogRatioLayout {
    /// Left shift of the voltage code before the division.
    pub ratio_shift: u8,
    /// Nodes per octave are `2^mant_bits`.
    pub mant_bits: u8,
    /// Octave of node 0 (`2^e_lo <= q`).
    pub e_lo: u8,
    /// Number of nodes (at least 2).
    pub nodes: u16,
}

/// One dimension, uniform in the logarithm of the code ratio, computed
/// without division: `lambda = log2_q15(vin) - log2_q15(io - io_zero) + LOG_OFFSET`
/// ([`log_ratio_index`]); nodes at `lambda_lo + k * 2^step_shift`. The
/// division-free layout for cores without a divide instruction.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct LogUniformLayout {
    /// Index at node 0.
    pub lambda_lo: u32,
    /// Node spacing is `2^step_shift` in lambda (`2^15` is one octave).
    pub step_shift: u8,
    /// Number of nodes (at least 2).
    pub nodes: u16,
}

/// One dimension over the code ratio, like [`RatioLayout`], with the
/// division replaced by a reciprocal table for cores without a divide
/// instruction: after the `nodes` delay entries come one reciprocal per
/// current code of the design range, `R[c - io.lo] = round(2^recip_shift
/// / (c - io_zero))` (each at most 65535), and
/// `q = (vin * R) >> post_shift` stands in for the quotient
/// `(vin << (recip_shift - post_shift)) / (io - io_zero)`. Nodes sit at
/// `q_lo + k * 2^step_shift`. The fastest layout on a Cortex-M0; its flash
/// grows with the current range (two bytes per code).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct RecipRatioLayout {
    /// The reciprocals hold `2^recip_shift / (io - io_zero)`.
    pub recip_shift: u8,
    /// Right shift of `vin * R`.
    pub post_shift: u8,
    /// Ratio at node 0.
    pub q_lo: u32,
    /// Node spacing is `2^step_shift` in q.
    pub step_shift: u8,
    /// Number of delay nodes (at least 2).
    pub nodes: u16,
}

/// Two dimensions over the raw codes: node (r, c) at
/// `vin = vin.lo + r * 2^vin_shift`, `io = io.lo + c * 2^io_shift`, stored
/// row-major (`r * cols + c`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct GridLayout {
    /// Voltage node spacing, `2^vin_shift` codes.
    pub vin_shift: u8,
    /// Current node spacing, `2^io_shift` codes.
    pub io_shift: u8,
    /// Number of voltage nodes (rows, at least 2).
    pub rows: u16,
    /// Number of current nodes (columns, at least 2).
    pub cols: u16,
}

/// Two dimensions: the log-domain code ratio of [`LogUniformLayout`]
/// along the columns (no division) and the raw voltage code along the rows,
/// so a table can follow what the switch's voltage-dependent capacitance
/// adds to the delay at one Vin/Io ratio (the ZVS boundary moves with the
/// voltage). Node (r, k) sits at `vin = vin.lo + r * 2^vin_shift` and
/// `lambda = lambda_lo + k * 2^step_shift`, stored row-major
/// (`r * cols + k`). The lookup interpolates along lambda in the two rows
/// around the voltage (each rounded back to entry units, at most half a
/// unit of `2^-frac_bits` ticks), then linearly between them.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct LogVoltLayout {
    /// Index at column 0.
    pub lambda_lo: u32,
    /// Column spacing is `2^step_shift` in lambda (`2^15` is one octave).
    pub step_shift: u8,
    /// Number of columns (at least 2).
    pub cols: u16,
    /// Row spacing, `2^vin_shift` voltage codes.
    pub vin_shift: u8,
    /// Number of rows (at least 2).
    pub rows: u16,
}

/// Two dimensions, no division and no logarithm: along the columns the
/// current code's margin over a straight line through the ZVS boundary,
/// `d = (io - zero) * io_mul + offset - vin * vin_mul` (an affine function
/// of the two codes, so the boundary's kink lies on a column line at every
/// voltage the line passes through it), and along the rows the voltage
/// code. Node (r, k) sits at `vin = vin.lo + r * 2^vin_shift` and
/// `d = k * 2^step_shift`, stored row-major (`r * cols + k`). The lookup
/// interpolates along `d` in the two rows around the voltage (each rounded
/// back to entry units, at most half a unit of `2^-frac_bits` ticks), then
/// linearly between them, as [`LogVoltLayout`] does.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct MarginLayout {
    /// Weight of the current code (after the sensor zero) in `d`.
    pub io_mul: u16,
    /// Weight of the voltage code in `d` (the line's slope, current codes
    /// per voltage code, times `io_mul`; negative where the boundary
    /// current falls with the voltage).
    pub vin_mul: i16,
    /// Constant of `d`, so that `d >= 0` over the design range.
    pub offset: u32,
    /// Column spacing is `2^step_shift` in `d`.
    pub step_shift: u8,
    /// Number of columns (at least 2).
    pub cols: u16,
    /// Row spacing, `2^vin_shift` voltage codes.
    pub vin_shift: u8,
    /// Number of rows (at least 2).
    pub rows: u16,
}

impl MarginLayout {
    /// The column coordinate `d` of a code pair (`io` already offset by the
    /// sensor zero), in the lookup's wrapping arithmetic (exact for the
    /// design range of a validated table).
    #[inline(always)]
    #[must_use]
    pub const fn margin(&self, vin: u32, io: u32) -> u32 {
        io.wrapping_mul(self.io_mul as u32)
            .wrapping_add(self.offset)
            .wrapping_sub(vin.wrapping_mul(self.vin_mul as i32 as u32))
    }
}

/// Two dimensions: the code ratio `q = (vin << ratio_shift) / (io - zero)`
/// along the columns (one division: a single instruction on cores that
/// have one) and the raw voltage code along the rows. The dominant term of
/// the delay above the ZVS boundary, charging the switch node's charge at
/// the load current, is linear in `q` at each voltage. Node (r, k) sits at
/// `vin = vin.lo + r * 2^vin_shift` and `q = q_lo + k * 2^step_shift`,
/// stored row-major; interpolated as [`LogVoltLayout`].
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct RatioVoltLayout {
    /// Left shift of the voltage code before the division.
    pub ratio_shift: u8,
    /// Ratio at column 0.
    pub q_lo: u32,
    /// Column spacing is `2^step_shift` in `q`.
    pub step_shift: u8,
    /// Number of columns (at least 2).
    pub cols: u16,
    /// Row spacing, `2^vin_shift` voltage codes.
    pub vin_shift: u8,
    /// Number of rows (at least 2).
    pub rows: u16,
}

/// How a table is indexed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub enum Layout {
    /// 1-D over the code ratio (one division per lookup).
    Ratio(RatioLayout),
    /// 1-D over the code ratio, log-spaced (one division and a
    /// leading-zero count per lookup).
    LogRatio(LogRatioLayout),
    /// 1-D, uniform in log(code ratio), no division.
    LogUniform(LogUniformLayout),
    /// 2-D over the raw codes (no division).
    Grid(GridLayout),
    /// 1-D over the code ratio, the division done by a reciprocal table
    /// (no division, one multiplication).
    RecipRatio(RecipRatioLayout),
    /// 2-D: log(code ratio) by voltage code (no division).
    LogVolt(LogVoltLayout),
    /// 2-D: the current's margin over a line through the ZVS boundary by
    /// voltage code (no division, no logarithm).
    Margin(MarginLayout),
    /// 2-D: code ratio by voltage code (one division).
    RatioVolt(RatioVoltLayout),
}

/// What to command where ZVS is impossible (J < 1).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub enum Fallback {
    /// Turn on at the valley of the ring (the table's entries hold it).
    Valley,
    /// A fixed delay, ticks.
    Fixed(Ticks),
}

/// Why a table was refused.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum TableError {
    /// The layout is inconsistent; the text says how.
    Layout(&'static str),
    /// The number of entries does not match the layout.
    EntryCount {
        /// Entries the layout needs.
        expected: u32,
        /// Entries given.
        found: u32,
    },
    /// The blob does not start with the table magic.
    BadMagic,
    /// The blob's format version is not one this build reads.
    UnsupportedVersion {
        /// Version in the blob.
        found: u16,
    },
    /// The blob is shorter than its header says.
    Truncated,
    /// The payload's CRC-32 does not match the header: the blob is corrupt.
    CrcMismatch {
        /// CRC-32 the header records.
        expected: u32,
        /// CRC-32 of the payload as read.
        found: u32,
    },
    /// The blob was generated from a different design.
    DesignMismatch {
        /// Design hash the firmware expects.
        expected: u32,
        /// Design hash in the blob.
        found: u32,
    },
    /// The header or payload cannot be decoded.
    Malformed,
}

impl core::fmt::Display for TableError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match *self {
            TableError::Layout(why) => write!(f, "inconsistent table layout: {why}"),
            TableError::EntryCount { expected, found } => {
                write!(f, "table has {found} entries, its layout needs {expected}")
            }
            TableError::BadMagic => f.write_str("not a zvs-timing delay table (bad magic)"),
            TableError::UnsupportedVersion { found } => write!(
                f,
                "table format version {found} is not supported (this build reads version {}): {}",
                FORMAT_VERSION,
                if found > FORMAT_VERSION {
                    "the blob is newer than this reader; update the firmware's timing-core"
                } else {
                    "the blob is older than this reader; regenerate it with `zvs-timing table`"
                }
            ),
            TableError::Truncated => f.write_str("table blob is truncated"),
            TableError::CrcMismatch { expected, found } => write!(
                f,
                "table blob is corrupt: payload CRC-32 is {found:#010x}, header says {expected:#010x}"
            ),
            TableError::DesignMismatch { expected, found } => write!(
                f,
                "table was generated from another design: hash {found:#010x}, expected {expected:#010x}"
            ),
            TableError::Malformed => f.write_str("table blob cannot be decoded"),
        }
    }
}

impl core::error::Error for TableError {}

/// A lookup result: the delay to command and whether the point is
/// ZVS-capable by the table's test.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Lookup {
    /// Delay from the turn-off command, ticks.
    pub ticks: Ticks,
    /// `true` when J >= 1 (the delay aims into the ZVS window); `false`
    /// when the fallback applies.
    pub zvs: bool,
}

/// A validated delay table: layout, sensing, fixed-point format and entries.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct DelayTable<E> {
    sensing: Sensing,
    layout: Layout,
    frac_bits: u8,
    fallback: Fallback,
    entries: E,
}

/// Bits needed to hold `x` (0 for 0).
const fn bits(x: u32) -> u32 {
    32 - x.leading_zeros()
}

/// Node index, interpolation weight and step shift of `q` in a log-spaced
/// table with octaves from `e_lo` and `2^m` nodes per octave:
/// `(index, q mod step, log2 step)`. Requires `q >= 2^e_lo >= 2^m` (a
/// validated table guarantees it for every code pair); smaller q give node 0.
#[inline]
#[must_use]
pub const fn log_index(q: u32, e_lo: u32, m: u32) -> (u32, u32, u32) {
    let e = 31u32.wrapping_sub(q.leading_zeros());
    if q == 0 || e < e_lo {
        return (0, 0, e_lo.wrapping_sub(m));
    }
    let sh = e.wrapping_sub(m);
    let mant = q.wrapping_shr(sh).wrapping_sub(1u32.wrapping_shl(m));
    let idx = e.wrapping_sub(e_lo).wrapping_shl(m).wrapping_add(mant);
    (idx, q & 1u32.wrapping_shl(sh).wrapping_sub(1), sh)
}

/// Smallest and largest code ratio `q = (vin << shift)/(io - zero)` of the
/// design range, refusing a shift that overflows 32 bits.
///
/// # Errors
/// [`TableError::Layout`] when `vin << shift` overflows.
pub const fn ratio_bounds(s: &Sensing, shift: u8) -> Result<(u32, u32), TableError> {
    if bits(s.vin.hi as u32) + shift as u32 > 32 {
        return Err(TableError::Layout("vin << ratio_shift overflows 32 bits"));
    }
    let q_min =
        match ((s.vin.lo as u32) << shift).checked_div(s.io.hi.wrapping_sub(s.io_zero) as u32) {
            Some(q) => q,
            None => 0,
        };
    let q_max =
        match ((s.vin.hi as u32) << shift).checked_div(s.io.lo.wrapping_sub(s.io_zero) as u32) {
            Some(q) => q,
            None => u32::MAX,
        };
    Ok((q_min, q_max))
}

/// The validation of [`DelayTable::new`], usable in `const` items.
const fn check(
    sensing: &Sensing,
    layout: &Layout,
    frac_bits: u8,
    count: usize,
) -> Result<(), TableError> {
    let s = sensing;
    if s.vin.is_empty() || s.io.is_empty() {
        return Err(TableError::Layout("empty code range"));
    }
    if s.io.lo <= s.io_zero {
        return Err(TableError::Layout(
            "current range must lie above the sensor zero",
        ));
    }
    if s.vin.lo == 0 {
        return Err(TableError::Layout("voltage range must exclude code 0"));
    }
    let expected = match *layout {
        Layout::Ratio(r) => {
            if r.nodes < 2 || r.step_shift > 15 {
                return Err(TableError::Layout(
                    "ratio table needs 2+ nodes and step_shift <= 15",
                ));
            }
            let (q_min, q_max) = match ratio_bounds(s, r.ratio_shift) {
                Ok(b) => b,
                Err(e) => return Err(e),
            };
            let span = ((r.nodes - 1) as u32) << r.step_shift;
            if r.q_lo > q_min || (r.q_lo as u64) + (span as u64) < (q_max as u64) {
                return Err(TableError::Layout(
                    "ratio nodes do not cover the design range",
                ));
            }
            // y = a*(2^s - f) + b*f <= 65535 * 2^s < 2^32; rounding adds < 2^(s+F).
            if (r.step_shift as u32) + (frac_bits as u32) > 16 {
                return Err(TableError::Layout(
                    "step_shift + frac_bits must be at most 16",
                ));
            }
            r.nodes as u32
        }
        Layout::LogRatio(r) => {
            let m = r.mant_bits as u32;
            if r.nodes < 2 || m > 12 {
                return Err(TableError::Layout(
                    "log-ratio table needs 2+ nodes and mant_bits <= 12",
                ));
            }
            let (q_min, q_max) = match ratio_bounds(s, r.ratio_shift) {
                Ok(b) => b,
                Err(e) => return Err(e),
            };
            // Node 0 at or below q_min, whose octave holds 2^m nodes.
            if q_min == 0 || bits(q_min) - 1 < (r.e_lo as u32) || (r.e_lo as u32) < m {
                return Err(TableError::Layout(
                    "log-ratio octaves do not start at the design range",
                ));
            }
            let e_max = bits(q_max) - 1;
            // y = a*(2^sh - f) + b*f <= 65535 * 2^sh and the rounding adds
            // 2^(sh + F - 1) <= 2^(sh + 14): below 2^32 for sh = e - m <= 15.
            if e_max.saturating_sub(m) > 15 {
                return Err(TableError::Layout(
                    "log-ratio octave step too coarse for 32 bits",
                ));
            }
            let top = log_index(q_max, r.e_lo as u32, m).0;
            if top.saturating_add(2) > (r.nodes as u32) {
                return Err(TableError::Layout(
                    "log-ratio nodes do not cover the design range",
                ));
            }
            r.nodes as u32
        }
        Layout::LogUniform(r) => {
            if r.nodes < 2 || r.step_shift > 15 || (r.step_shift as u32) + (frac_bits as u32) > 16 {
                return Err(TableError::Layout(
                    "log-uniform table needs 2+ nodes and step_shift + frac_bits <= 16",
                ));
            }
            // log2_q15 is non-decreasing, so the corners bound lambda.
            let l_min = log_ratio_index(s.vin.lo as u32, (s.io.hi - s.io_zero) as u32);
            let l_max = log_ratio_index(s.vin.hi as u32, (s.io.lo - s.io_zero) as u32);
            let span = ((r.nodes - 1) as u32) << r.step_shift;
            if r.lambda_lo > l_min || (r.lambda_lo as u64) + (span as u64) < (l_max as u64) {
                return Err(TableError::Layout(
                    "log-uniform nodes do not cover the design range",
                ));
            }
            r.nodes as u32
        }
        Layout::Grid(g) => {
            if g.rows < 2 || g.cols < 2 {
                return Err(TableError::Layout("grid needs 2+ rows and columns"));
            }
            // y <= 65535 * 2^(vs + is) < 2^32, plus rounding.
            if (g.vin_shift as u32) + (g.io_shift as u32) + (frac_bits as u32) > 16 {
                return Err(TableError::Layout(
                    "vin_shift + io_shift + frac_bits must be at most 16",
                ));
            }
            let cover_v = ((g.rows - 1) as u32) << g.vin_shift;
            let cover_i = ((g.cols - 1) as u32) << g.io_shift;
            if cover_v < ((s.vin.hi - s.vin.lo) as u32) || cover_i < ((s.io.hi - s.io.lo) as u32) {
                return Err(TableError::Layout(
                    "grid nodes do not cover the design range",
                ));
            }
            (g.rows as u32) * (g.cols as u32)
        }
        Layout::RecipRatio(r) => {
            // q = (vin * R) >> post_shift < 2^32 for 16-bit codes and entries;
            // the interpolation bound is the ratio layout's.
            if r.nodes < 2
                || r.step_shift > 15
                || (r.step_shift as u32) + (frac_bits as u32) > 16
                || r.post_shift > 31
                || r.recip_shift > 31
            {
                return Err(TableError::Layout(
                    "reciprocal-ratio table needs 2+ nodes, step_shift + frac_bits <= 16 and shifts <= 31",
                ));
            }
            (r.nodes as u32) + s.io.len()
        }
        Layout::LogVolt(g) => {
            // Each row's interpolation: <= 65535 * 2^step + 2^(step - 1);
            // between rows <= 65535 * 2^vs plus the final rounding.
            if g.cols < 2
                || g.rows < 2
                || g.step_shift > 15
                || (g.vin_shift as u32) + (frac_bits as u32) > 16
            {
                return Err(TableError::Layout(
                    "log-volt table needs 2+ rows and columns, step_shift <= 15 and vin_shift + frac_bits <= 16",
                ));
            }
            let l_min = log_ratio_index(s.vin.lo as u32, (s.io.hi - s.io_zero) as u32);
            let l_max = log_ratio_index(s.vin.hi as u32, (s.io.lo - s.io_zero) as u32);
            let span = ((g.cols - 1) as u32) << g.step_shift;
            let cover_v = ((g.rows - 1) as u32) << g.vin_shift;
            if g.lambda_lo > l_min
                || (g.lambda_lo as u64) + (span as u64) < (l_max as u64)
                || cover_v < ((s.vin.hi - s.vin.lo) as u32)
            {
                return Err(TableError::Layout(
                    "log-volt nodes do not cover the design range",
                ));
            }
            (g.rows as u32) * (g.cols as u32)
        }
        Layout::RatioVolt(g) => {
            if g.cols < 2
                || g.rows < 2
                || g.step_shift > 15
                || (g.vin_shift as u32) + (frac_bits as u32) > 16
            {
                return Err(TableError::Layout(
                    "ratio-volt table needs 2+ rows and columns, step_shift <= 15 and vin_shift + frac_bits <= 16",
                ));
            }
            let (q_min, q_max) = match ratio_bounds(s, g.ratio_shift) {
                Ok(b) => b,
                Err(e) => return Err(e),
            };
            let span = ((g.cols - 1) as u64) << g.step_shift;
            let cover_v = ((g.rows - 1) as u32) << g.vin_shift;
            if g.q_lo > q_min
                || (g.q_lo as u64) + span < (q_max as u64)
                || cover_v < ((s.vin.hi - s.vin.lo) as u32)
            {
                return Err(TableError::Layout(
                    "ratio-volt nodes do not cover the design range",
                ));
            }
            (g.rows as u32) * (g.cols as u32)
        }
        Layout::Margin(g) => {
            // Rows as for log-volt; d is affine in the codes, so its
            // extremes over the range lie at the corners, each computed
            // exactly in 64 bits and required to fit 32.
            if g.cols < 2
                || g.rows < 2
                || g.step_shift > 15
                || (g.vin_shift as u32) + (frac_bits as u32) > 16
            {
                return Err(TableError::Layout(
                    "margin table needs 2+ rows and columns, step_shift <= 15 and vin_shift + frac_bits <= 16",
                ));
            }
            let (lo, hi) = margin_bounds(s, &g);
            let span = ((g.cols - 1) as i64) << g.step_shift;
            let cover_v = ((g.rows - 1) as u32) << g.vin_shift;
            if lo < 0
                || hi > span
                || hi > u32::MAX as i64
                || cover_v < ((s.vin.hi - s.vin.lo) as u32)
            {
                return Err(TableError::Layout(
                    "margin nodes do not cover the design range, or d leaves 0..2^32",
                ));
            }
            (g.rows as u32) * (g.cols as u32)
        }
    };
    if frac_bits > 15 {
        return Err(TableError::Layout("frac_bits must be at most 15"));
    }
    let found = if count > u32::MAX as usize {
        u32::MAX
    } else {
        count as u32
    };
    if found != expected {
        return Err(TableError::EntryCount { expected, found });
    }
    Ok(())
}

/// The smallest and largest exact `d` of a margin layout over the design
/// range (`d` is affine in the codes: its extremes lie at the corners).
const fn margin_bounds(s: &Sensing, g: &MarginLayout) -> (i64, i64) {
    let (v0, v1) = (s.vin.lo as i64, s.vin.hi as i64);
    let (i0, i1) = ((s.io.lo - s.io_zero) as i64, (s.io.hi - s.io_zero) as i64);
    let (a, b, c) = (g.io_mul as i64, g.vin_mul as i64, g.offset as i64);
    // Smallest: the least current with the voltage that subtracts most.
    let lo = i0 * a + c - if b > 0 { v1 * b } else { v0 * b };
    let hi = i1 * a + c - if b > 0 { v0 * b } else { v1 * b };
    (lo, hi)
}

/// The cell and the fraction into it of offset `d` along an axis whose
/// `nodes` nodes lie `2^shift` apart: `(d >> shift, d mod 2^shift)`, and
/// past the last cell the last one with a full fraction (so the lookup
/// clamps to the far node). Wrapping operations that cannot wrap for the
/// shifts [`DelayTable::new`] accepts.
#[inline(always)]
const fn cell(d: u32, shift: u32, nodes: u16) -> (u32, u32) {
    let one = 1u32.wrapping_shl(shift);
    let last = (nodes as u32).wrapping_sub(2);
    let k = d.wrapping_shr(shift);
    if k > last {
        (last, one)
    } else {
        (k, d & one.wrapping_sub(1))
    }
}

impl DelayTable<&'static [u16]> {
    /// [`DelayTable::new`] for entries in a `static`, in `const` context:
    /// generated firmware sources build their table as a `const` item, so
    /// validation runs at compile time and the interrupt's lookup sees
    /// every layout parameter as a constant.
    ///
    /// # Errors
    /// As [`DelayTable::new`].
    pub const fn from_static(
        sensing: Sensing,
        layout: Layout,
        frac_bits: u8,
        fallback: Fallback,
        entries: &'static [u16],
    ) -> Result<Self, TableError> {
        match check(&sensing, &layout, frac_bits, entries.len()) {
            Ok(()) => Ok(Self {
                sensing,
                layout,
                frac_bits,
                fallback,
                entries,
            }),
            Err(e) => Err(e),
        }
    }
}

impl<E: Entries> DelayTable<E> {
    /// Validate and build a table.
    ///
    /// Checks that the ranges are non-empty, the current range lies above
    /// the sensor zero, the nodes cover the whole range, the entry count
    /// matches, and that no intermediate of [`DelayTable::delay`] can
    /// exceed 32 bits for any code (interval bounds on the shifts and the
    /// 16-bit entries).
    ///
    /// # Errors
    /// [`TableError::Layout`] or [`TableError::EntryCount`].
    pub fn new(
        sensing: Sensing,
        layout: Layout,
        frac_bits: u8,
        fallback: Fallback,
        entries: E,
    ) -> Result<Self, TableError> {
        match check(&sensing, &layout, frac_bits, entries.count()) {
            Ok(()) => Ok(Self {
                sensing,
                layout,
                frac_bits,
                fallback,
                entries,
            }),
            Err(e) => Err(e),
        }
    }

    /// The sensing description (ranges, zero, ZVS test).
    #[must_use]
    pub fn sensing(&self) -> &Sensing {
        &self.sensing
    }

    /// The layout.
    #[must_use]
    pub fn layout(&self) -> &Layout {
        &self.layout
    }

    /// Fractional bits of the entries.
    #[must_use]
    pub fn frac_bits(&self) -> u8 {
        self.frac_bits
    }

    /// The fallback policy below the ZVS boundary.
    #[must_use]
    pub fn fallback(&self) -> Fallback {
        self.fallback
    }

    /// The entries.
    #[must_use]
    pub fn entries(&self) -> &E {
        &self.entries
    }

    /// Table size in bytes (entries only).
    #[must_use]
    pub fn entry_bytes(&self) -> usize {
        self.entries.count().wrapping_mul(2)
    }

    /// Linear interpolation on uniform nodes `2^step` apart, `d` from node 0:
    /// `(a*(2^s - f) + b*f, s)`.
    #[inline]
    fn uniform(&self, d: u32, step: u8, nodes: u16) -> (u32, u32) {
        let s = u32::from(step);
        let frac = d & 1u32.wrapping_shl(s).wrapping_sub(1);
        self.interpolate(d.wrapping_shr(s), frac, s, nodes)
    }

    /// Between nodes `k` and `k + 1`, `2^sh` apart, at `frac` past node `k`
    /// (past the last interval: its far end): `(a*(2^sh - f) + b*f, sh)`.
    #[inline]
    fn interpolate(&self, k: u32, frac: u32, sh: u32, nodes: u16) -> (u32, u32) {
        let last = u32::from(nodes).wrapping_sub(2);
        let one = 1u32.wrapping_shl(sh);
        let (mut k, mut frac) = (k, frac);
        if k > last {
            k = last;
            frac = one;
        }
        let a = u32::from(self.entries.at(k as usize));
        let b = u32::from(self.entries.at(k.wrapping_add(1) as usize));
        (
            a.wrapping_mul(one.wrapping_sub(frac))
                .wrapping_add(b.wrapping_mul(frac)),
            sh,
        )
    }

    /// The 2-D interpolation of [`LogVoltLayout`] and [`MarginLayout`]:
    /// along the column coordinate `d` (nodes `2^st` apart) in the two rows
    /// around voltage code `v` (rows `2^vs` codes apart), each rounded back
    /// to entry units, then linearly between the rows: `(y, vs)`.
    #[inline(always)]
    fn rows_then_volts(&self, d: u32, st: u8, cols: u16, v: u32, vs: u8, rows: u16) -> (u32, u32) {
        let st = u32::from(st);
        let one = 1u32.wrapping_shl(st);
        let (k, fl) = cell(d, st, cols);
        let vs = u32::from(vs);
        let one_v = 1u32.wrapping_shl(vs);
        let dv = v.wrapping_sub(u32::from(self.sensing.vin.lo));
        let (r, fr) = cell(dv, vs, rows);
        let cols = u32::from(cols);
        let base = r.wrapping_mul(cols).wrapping_add(k);
        let e = |k: u32| u32::from(self.entries.at(k as usize));
        let half = one >> 1;
        let along = |b: u32| {
            e(b).wrapping_mul(one.wrapping_sub(fl))
                .wrapping_add(e(b.wrapping_add(1)).wrapping_mul(fl))
                .wrapping_add(half)
                .wrapping_shr(st)
        };
        let (y0, y1) = (along(base), along(base.wrapping_add(cols)));
        let y = y0
            .wrapping_mul(one_v.wrapping_sub(fr))
            .wrapping_add(y1.wrapping_mul(fr));
        (y, vs)
    }

    /// The delay for the sensed codes: clamps both codes to the design
    /// range, applies the fallback where J < 1, and otherwise interpolates
    /// the table. Integer-only; no division in the grid layout, one 32-bit
    /// division in the ratio layout; cannot panic (all arithmetic is proven
    /// in range by [`DelayTable::new`] and written with wrapping operations
    /// that therefore never wrap). Always inlined: with a `const` table
    /// every layout parameter folds into the caller's code.
    #[inline(always)]
    pub fn delay(&self, vin: AdcCode, io: AdcCode) -> Lookup {
        self.lookup(vin, io)
    }

    /// [`DelayTable::delay`]'s commanded ticks at voltage code `vin` and
    /// the current codes `io_first`, `io_first + io_step`, ..., one a slot
    /// of `out` (codes past 65535 wrap around): the same code as `delay`,
    /// inlined into one loop, so a host checking every code pair of a
    /// design runs what the firmware runs at a fraction of the calls (the
    /// parts that depend on `vin` alone can be computed once). Cannot
    /// panic.
    pub fn delays_along_io(
        &self,
        vin: AdcCode,
        io_first: AdcCode,
        io_step: u16,
        out: &mut [Ticks],
    ) {
        // One loop a layout: the layout is matched once, outside the loop,
        // and what depends on `vin` alone can leave the loop.
        let (f, s) = (io_first, io_step);
        match self.layout {
            l @ Layout::Ratio(_) => self.run_along_io(l, vin, f, s, out),
            l @ Layout::LogRatio(_) => self.run_along_io(l, vin, f, s, out),
            l @ Layout::LogUniform(_) => self.run_along_io(l, vin, f, s, out),
            l @ Layout::Grid(_) => self.run_along_io(l, vin, f, s, out),
            l @ Layout::RecipRatio(_) => self.run_along_io(l, vin, f, s, out),
            l @ Layout::LogVolt(_) => self.run_along_io(l, vin, f, s, out),
            l @ Layout::Margin(_) => self.run_along_io(l, vin, f, s, out),
            l @ Layout::RatioVolt(_) => self.run_along_io(l, vin, f, s, out),
        }
    }

    /// [`DelayTable::delays_along_io`] with the table's layout `layout`.
    #[inline(always)]
    fn run_along_io(
        &self,
        layout: Layout,
        vin: AdcCode,
        io_first: AdcCode,
        io_step: u16,
        out: &mut [Ticks],
    ) {
        let mut io = io_first.get();
        for o in out.iter_mut() {
            *o = self.lookup_in(layout, vin, AdcCode::new(io)).ticks;
            io = io.wrapping_add(io_step);
        }
    }

    /// Whether the delay at codes (`2v`, `z + 2c`) equals the delay at
    /// (`v`, `z + c`) for every `c >= 1` where both pairs lie in the design
    /// range (`z` the current sensor's zero code): true for the layouts
    /// indexed by the code ratio alone (ratio, log-ratio, log-uniform),
    /// whose lookups are unchanged by doubling both codes through exact
    /// integer identities: `floor(2a / 2b) = floor(a / b)`;
    /// `log2_q15(2c) = log2_q15(c) + 2^15` to the bit (the mantissa's bits
    /// are the same); the ZVS test compares two products that both double;
    /// validation keeps every intermediate within 32 bits at both pairs.
    /// A verifier then checks each such pair once for all its doublings.
    #[must_use]
    pub const fn same_at_doubled_codes(&self) -> bool {
        matches!(
            self.layout,
            Layout::Ratio(_) | Layout::LogRatio(_) | Layout::LogUniform(_)
        )
    }

    /// The body of [`DelayTable::delay`] (see there).
    #[inline(always)]
    fn lookup(&self, vin: AdcCode, io: AdcCode) -> Lookup {
        self.lookup_in(self.layout, vin, io)
    }

    /// [`DelayTable::lookup`] with the table's layout `layout`.
    #[inline(always)]
    fn lookup_in(&self, layout: Layout, vin: AdcCode, io: AdcCode) -> Lookup {
        let s = &self.sensing;
        let v = u32::from(s.vin.clamp(vin));
        let i = u32::from(s.io.clamp(io).wrapping_sub(s.io_zero));
        let zvs =
            i.wrapping_mul(u32::from(s.zvs_io_mul)) >= v.wrapping_mul(u32::from(s.zvs_vin_mul));
        if !zvs {
            if let Fallback::Fixed(t) = self.fallback {
                return Lookup { ticks: t, zvs };
            }
        }
        let f = u32::from(self.frac_bits);
        let (y, shift) = match layout {
            Layout::Ratio(r) => {
                let q = v
                    .wrapping_shl(u32::from(r.ratio_shift))
                    .checked_div(i)
                    .unwrap_or(u32::MAX);
                self.uniform(q.saturating_sub(r.q_lo), r.step_shift, r.nodes)
            }
            Layout::RecipRatio(r) => {
                // The clamped current code's offset into the reciprocals.
                let k = i
                    .wrapping_add(u32::from(s.io_zero))
                    .wrapping_sub(u32::from(s.io.lo));
                let recip = u32::from(
                    self.entries
                        .at(usize::from(r.nodes).wrapping_add(k as usize)),
                );
                let q = v.wrapping_mul(recip).wrapping_shr(u32::from(r.post_shift));
                self.uniform(q.saturating_sub(r.q_lo), r.step_shift, r.nodes)
            }
            Layout::LogUniform(r) => {
                let l = log_ratio_index(v, i);
                self.uniform(l.saturating_sub(r.lambda_lo), r.step_shift, r.nodes)
            }
            Layout::LogRatio(r) => {
                let q = v
                    .wrapping_shl(u32::from(r.ratio_shift))
                    .checked_div(i)
                    .unwrap_or(u32::MAX);
                let (k, frac, sh) = log_index(q, u32::from(r.e_lo), u32::from(r.mant_bits));
                self.interpolate(k, frac, sh, r.nodes)
            }
            Layout::Grid(g) => {
                let (vs, is) = (u32::from(g.vin_shift), u32::from(g.io_shift));
                let dv = v.wrapping_sub(u32::from(s.vin.lo));
                let di = i
                    .wrapping_add(u32::from(s.io_zero))
                    .wrapping_sub(u32::from(s.io.lo));
                let (one_v, one_i) = (1u32.wrapping_shl(vs), 1u32.wrapping_shl(is));
                let (r, fr) = cell(dv, vs, g.rows);
                let (c, fc) = cell(di, is, g.cols);
                let cols = u32::from(g.cols);
                let base = r.wrapping_mul(cols).wrapping_add(c);
                let e = |k: u32| u32::from(self.entries.at(k as usize));
                let (e00, e01) = (e(base), e(base.wrapping_add(1)));
                let (e10, e11) = (
                    e(base.wrapping_add(cols)),
                    e(base.wrapping_add(cols).wrapping_add(1)),
                );
                let wc = one_i.wrapping_sub(fc);
                let top = e00.wrapping_mul(wc).wrapping_add(e01.wrapping_mul(fc));
                let bot = e10.wrapping_mul(wc).wrapping_add(e11.wrapping_mul(fc));
                let y = top
                    .wrapping_mul(one_v.wrapping_sub(fr))
                    .wrapping_add(bot.wrapping_mul(fr));
                (y, vs.wrapping_add(is))
            }
            Layout::LogVolt(g) => {
                let d = log_ratio_index(v, i).saturating_sub(g.lambda_lo);
                self.rows_then_volts(d, g.step_shift, g.cols, v, g.vin_shift, g.rows)
            }
            Layout::RatioVolt(g) => {
                let q = v
                    .wrapping_shl(u32::from(g.ratio_shift))
                    .checked_div(i)
                    .unwrap_or(u32::MAX);
                let d = q.saturating_sub(g.q_lo);
                self.rows_then_volts(d, g.step_shift, g.cols, v, g.vin_shift, g.rows)
            }
            Layout::Margin(g) => {
                let d = g.margin(v, i);
                self.rows_then_volts(d, g.step_shift, g.cols, v, g.vin_shift, g.rows)
            }
        };
        let total = shift.wrapping_add(f);
        let half = 1u32.wrapping_shl(total) >> 1;
        Lookup {
            ticks: Ticks::new(y.wrapping_add(half).wrapping_shr(total)),
            zvs,
        }
    }
}
