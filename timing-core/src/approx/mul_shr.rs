//! `floor(a * b / 2^s)` for a 32-bit `a` and a 16-bit `b` (or exactly
//! 2^16, as a normalised reciprocal may be) with 32-bit multiplies only
//! (ARMv6-M has no 32x32->64 multiply instruction).

/// `floor(a * b / 2^s)`, exact, for `b <= 2^16`, `s <= 16` and a result
/// below 2^32 (the caller's bounds; beyond them the result wraps). Two
/// multiplications.
#[inline]
#[must_use]
pub const fn mul_shr(a: u32, b: u32, s: u32) -> u32 {
    let hi = (a >> 16).wrapping_mul(b);
    let lo = (a & 0xffff).wrapping_mul(b);
    hi.wrapping_shl(16u32.wrapping_sub(s))
        .wrapping_add(lo.wrapping_shr(s))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn matches_wide_multiplication() {
        let mut seed = 0x1234_5678u32;
        for _ in 0..200_000 {
            seed = seed.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
            let a = seed;
            seed = seed.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
            let b = if seed & 0xff == 0 {
                1 << 16
            } else {
                seed >> 16
            };
            for s in [16u32, 12, 8, 1] {
                let exact = (u64::from(a) * u64::from(b)) >> s;
                if exact < 1 << 32 {
                    assert_eq!(u64::from(mul_shr(a, b, s)), exact, "a={a} b={b} s={s}");
                }
            }
        }
    }
}
