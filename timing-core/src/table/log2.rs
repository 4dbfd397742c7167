//! Fixed-point base-2 logarithm of an integer, for the division-free table
//! index: `log2(vin_code) - log2(io_code)` stands in for the code ratio.
//!
//! Method: the exponent by a binary search for the leading one, the mantissa's
//! `log2(1 + f)` from a 65-entry table (`LOG2_Q15`, round(2^15 * log2(1 + k/64)))
//! with linear interpolation. Error bound: the interpolation error of
//! `log2(1 + f)` on segments of 1/64 is at most (1/64)^2/8 * 1/ln(2) = 4.4e-5, and
//! the Q15 rounding of the table and of the interpolation adds at most
//! 2^-15 = 3.1e-5: [`LOG2_Q15_MAX_ERROR`] = 8e-5 (in units of log2), which
//! the `log2_q15_against_libm` test checks at every 16-bit input.

/// round(2^15 * log2(1 + k/64)) for k = 0..=64.
pub const LOG2_Q15: [u16; 65] = [
    0, 733, 1455, 2166, 2866, 3556, 4236, 4907, 5568, 6220, 6863, 7498, 8124, 8742, 9352, 9954,
    10549, 11136, 11716, 12289, 12855, 13415, 13968, 14514, 15055, 15589, 16117, 16639, 17156,
    17667, 18173, 18673, 19168, 19658, 20143, 20623, 21098, 21568, 22034, 22495, 22952, 23404,
    23852, 24296, 24736, 25172, 25604, 26031, 26455, 26876, 27292, 27705, 28114, 28520, 28922,
    29321, 29717, 30109, 30498, 30884, 31267, 31647, 32024, 32397, 32768,
];

/// Largest error of [`log2_q15`] against the exact log2, in units of log2
/// (i.e. of a factor 2): 8e-5, a relative error of the argument of 5.5e-5.
pub const LOG2_Q15_MAX_ERROR: f64 = 8.0e-5;

/// log2(c) in Q15 fixed point (`log2(c) * 2^15`, so 0 for 1 and 15 << 15
/// for 32768), within [`LOG2_Q15_MAX_ERROR`]; 0 for 0. Integer-only, no
/// division; never panics.
#[inline]
#[must_use]
pub const fn log2_q15(c: u32) -> u32 {
    if c == 0 {
        return 0;
    }
    let e = floor_log2(c);
    // Normalise so bit 31 is the leading one; the next 16 bits are the
    // mantissa fraction f in Q16.
    let f = (c.wrapping_shl(31u32.wrapping_sub(e)) >> 15) & 0xffff;
    let k = (f >> 10) as usize;
    let r = f & 0x3ff;
    let a = table_at(k);
    let b = table_at(k.wrapping_add(1));
    // b >= a (log2 is increasing); every term stays below 2^20.
    (e << 15)
        .wrapping_add(a)
        .wrapping_add(b.wrapping_sub(a).wrapping_mul(r).wrapping_add(512) >> 10)
}

/// floor(log2(b)) for each byte value b (0 for 0). Built at compile time
/// (an index out of range would be a compile error, not a run-time panic).
/// Public for code generators (the C export).
#[allow(clippy::indexing_slicing)]
pub const LOG2_BYTE: [u8; 256] = {
    let mut t = [0u8; 256];
    let mut b = 2;
    while b < 256 {
        t[b] = t[b / 2] + 1;
        b += 1;
    }
    t
};

/// floor(log2(b)) for `b < 256` by one table read (0 for 0; only the low
/// eight bits of `b` are looked at).
#[inline]
#[must_use]
pub const fn floor_log2_byte(b: u32) -> u32 {
    // The mask makes the bound visible to the compiler.
    #[allow(clippy::indexing_slicing)]
    let e = LOG2_BYTE[(b & 0xff) as usize];
    e as u32
}

/// floor(log2(t)) for t >= 1 (0 for 0): two halving steps and a 256-byte
/// table, a handful of instructions on every core, where a leading-zero
/// count is a library call on ARMv6-M. The C export computes the same value
/// by a binary search.
#[inline]
#[must_use]
pub const fn floor_log2(t: u32) -> u32 {
    let (t, e) = if t >= 1 << 16 { (t >> 16, 16) } else { (t, 0) };
    let (t, e) = if t >= 1 << 8 { (t >> 8, e + 8) } else { (t, e) };
    e + floor_log2_byte(t)
}

/// [`floor_log2`] of the low 16 bits of `t` (a 16-bit code needs one
/// halving step fewer).
#[inline]
#[must_use]
pub const fn floor_log2_16(t: u32) -> u32 {
    let t = t & 0xffff;
    if t >= 1 << 8 {
        8 + floor_log2_byte(t >> 8)
    } else {
        floor_log2_byte(t)
    }
}

#[inline]
const fn table_at(k: usize) -> u32 {
    match LOG2_Q15.split_at_checked(k) {
        Some((_, [v, ..])) => *v as u32,
        _ => 32768,
    }
}
