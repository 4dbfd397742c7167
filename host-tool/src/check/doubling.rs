//! Doubled code pairs: which pairs an exhaustive verification evaluates,
//! and how many pairs of the design range each one answers for.
//!
//! In an ideal tank every event of the transition (window open and close,
//! valley) is a function of the normalised load J = Io*Z0/Vin alone (for
//! the buck, boost and buck-boost cells alike), and the codes map to volts
//! and amperes linearly through zero: Vin = v*kv, Io = c*ki with c the
//! current code less the sensor's zero code. So the pair (2v, 2c) has the
//! same J as (v, c), and in f64 the same to the bit, since doubling is exact
//! in binary floating point (`(2a)*b = 2(a*b)`, `a/(2b) = (a/b)/2`). A table
//! indexed by the code ratio alone commands the same delay at both pairs
//! ([`timing_core::table::DelayTable::same_at_doubled_codes`]). Both pairs
//! therefore get the same window, the same aim, the same command and the
//! same verdict: checking (v, c) checks (2v, 2c), (4v, 4c), ... as well.
//!
//! A pair is *doubled* when its voltage row is derived (even, its half in
//! the range, both rows answered by the load grid) and its current offset c
//! is even, at least 2, with c/2 in the range; every other pair is
//! *evaluated*, and stands for itself and its doublings inside the range.
//! About a quarter of a full-scale design's pairs are doublings. The
//! weights add up to the pairs in the range, which verification asserts.
//!
//! Rows where the load grid does not answer (a Coss curve, losses,
//! tolerances, a cell the row's voltage cannot run) are never derived, so
//! every pair there is evaluated.

use timing_core::CodeRange;

use crate::model::design::Design;
use crate::model::exact::ExactModel;

/// A run of evaluated current codes of one row: `first`, `first + step`,
/// ... (`n` codes), each standing for `weight` pairs of the design range
/// (itself and its doublings).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Run {
    /// First current code.
    pub first: u16,
    /// Distance between codes: 1, or 2 in a derived row.
    pub step: u16,
    /// Number of codes.
    pub n: usize,
    /// Pairs each code's verdict stands for.
    pub weight: u64,
}

/// Which rows of a design are derived, and how many times each row's pairs
/// can be doubled within the range.
#[derive(Debug, Clone)]
pub struct Doubling {
    vin: CodeRange,
    io: CodeRange,
    io_zero: i32,
    /// Per row: its even current offsets are doublings.
    derived: Vec<bool>,
    /// Per row: how many doublings of its pairs stay in derived rows
    /// (row 2v, 4v, ... up to the range's top).
    up: Vec<u8>,
}

impl Doubling {
    /// The doublings of `design` under `model`, when `methods_double` (every
    /// method checked commands the same delay at doubled codes); `None`
    /// when no row is derived.
    #[must_use]
    pub fn plan(design: &Design, model: &ExactModel<'_>, methods_double: bool) -> Option<Self> {
        if !methods_double {
            return None;
        }
        let (v, io) = (design.vin_codes, design.io_codes);
        let by_load: Vec<bool> = (v.lo..=v.hi)
            .map(|cv| model.row_at_code(cv).answers_by_load())
            .collect();
        let at = |cv: u32| by_load[(cv - u32::from(v.lo)) as usize];
        let derived: Vec<bool> = (v.lo..=v.hi)
            .map(|cv| {
                let w = u32::from(cv);
                w % 2 == 0 && w / 2 >= u32::from(v.lo) && at(w) && at(w / 2)
            })
            .collect();
        if !derived.contains(&true) {
            return None;
        }
        Some(Self::with_rows(
            v,
            io,
            i32::from(design.io_zero_code),
            derived,
        ))
    }

    /// The plan over voltage codes `vin` and current codes `io` (sensor
    /// zero `io_zero`) with the derived rows `derived` (one a row).
    fn with_rows(vin: CodeRange, io: CodeRange, io_zero: i32, derived: Vec<bool>) -> Self {
        // From the top down: row v's pairs double into row 2v, then as far
        // as row 2v's own go.
        let mut up = vec![0u8; derived.len()];
        for k in (0..derived.len()).rev() {
            let w = 2 * (u32::from(vin.lo) + k as u32);
            if w <= u32::from(vin.hi) {
                let kw = (w - u32::from(vin.lo)) as usize;
                if derived[kw] {
                    up[k] = 1 + up[kw];
                }
            }
        }
        Self {
            vin,
            io,
            io_zero,
            derived,
            up,
        }
    }

    /// Pairs evaluated over the whole range (the rest are doublings).
    #[must_use]
    pub fn evaluated(&self) -> u64 {
        (self.vin.lo..=self.vin.hi)
            .map(|cv| self.runs(cv).iter().map(|r| r.n as u64).sum::<u64>())
            .sum()
    }

    /// The runs of voltage code `cv`'s row, in increasing current code.
    #[must_use]
    pub fn runs(&self, cv: u16) -> Vec<Run> {
        let k = usize::from(cv.wrapping_sub(self.vin.lo));
        let (derived, up) = (
            self.derived.get(k).copied().unwrap_or(false),
            self.up.get(k).copied().unwrap_or(0),
        );
        let (lo, hi, z) = (i32::from(self.io.lo), i32::from(self.io.hi), self.io_zero);
        // The doublings of a derived row start at offset c_copy (even):
        // every code below is evaluated, then the odd offsets.
        let mut spans = Vec::with_capacity(2);
        if derived {
            let c_copy = 2.max(2 * (lo - z));
            spans.push((lo, hi.min(z + c_copy - 1), 1));
            spans.push(((z + c_copy + 1).max(lo), hi, 2));
        } else {
            spans.push((lo, hi, 1));
        }
        // The weight of offset c (>= 1) is 1 + min(up, kc) with kc the
        // doublings that stay at or below the top code; it changes at
        // c = (span >> k) + 1 and below c = 1 (no doubling of c <= 0).
        let span = hi - z;
        let weight = |c: i32| -> u64 {
            if c < 1 {
                return 1;
            }
            let mut kc = 0u32;
            while kc < u32::from(up) && (i64::from(c) << (kc + 1)) <= i64::from(span) {
                kc += 1;
            }
            1 + u64::from(kc)
        };
        let mut cuts: Vec<i32> = vec![z + 1];
        cuts.extend((1..=u32::from(up)).map(|k| z + (span >> k.min(31)) + 1));
        cuts.sort_unstable();
        let mut runs = Vec::new();
        for (a, b, step) in spans {
            let mut first = a;
            while first <= b {
                // The run goes to the last code before the next cut.
                let end = cuts
                    .iter()
                    .find(|&&c| c > first)
                    .map_or(b, |&c| (c - 1).min(b));
                let n = ((end - first) / step + 1) as usize;
                runs.push(Run {
                    first: first as u16,
                    step: step as u16,
                    n,
                    weight: weight(first - z),
                });
                first += n as i32 * step;
            }
        }
        runs
    }
}

/// The single run of a row where nothing is doubled: every current code,
/// weight 1.
#[must_use]
pub fn whole_row(io: CodeRange) -> Run {
    Run {
        first: io.lo,
        step: 1,
        n: io.len() as usize,
        weight: 1,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Every pair of the range, counted through the runs' weights, from
    /// the pairs themselves: a doubled pair's halves lead to exactly one
    /// evaluated pair, whose weight counts it.
    fn brute(d: &Doubling) -> Vec<Vec<u64>> {
        let (v, io, z) = (d.vin, d.io, d.io_zero);
        let cols = io.len() as usize;
        let mut w = vec![vec![0u64; cols]; v.len() as usize];
        for cv in v.lo..=v.hi {
            for ci in io.lo..=io.hi {
                // Halve while the pair is a doubling.
                let (mut a, mut c) = (i32::from(cv), i32::from(ci) - z);
                loop {
                    let row = (a - i32::from(v.lo)) as usize;
                    let doubled =
                        d.derived[row] && c % 2 == 0 && c >= 2 && z + c / 2 >= i32::from(io.lo);
                    if !doubled {
                        break;
                    }
                    (a, c) = (a / 2, c / 2);
                }
                w[(a - i32::from(v.lo)) as usize][(z + c - i32::from(io.lo)) as usize] += 1;
            }
        }
        w
    }

    fn from_runs(d: &Doubling) -> Vec<Vec<u64>> {
        let (v, io) = (d.vin, d.io);
        let mut w = vec![vec![0u64; io.len() as usize]; v.len() as usize];
        for cv in v.lo..=v.hi {
            let mut last = None;
            for r in d.runs(cv) {
                for k in 0..r.n {
                    let ci = r.first + r.step * k as u16;
                    assert!(last < Some(ci), "increasing codes");
                    last = Some(ci);
                    w[usize::from(cv - v.lo)][usize::from(ci - io.lo)] = r.weight;
                }
            }
        }
        w
    }

    fn plan(v: (u16, u16), io: (u16, u16), z: i32, derived: impl Fn(u16) -> bool) -> Doubling {
        let derived = (v.0..=v.1)
            .map(|cv| cv % 2 == 0 && cv / 2 >= v.0 && derived(cv))
            .collect();
        let range = |(lo, hi)| CodeRange { lo, hi };
        Doubling::with_rows(range(v), range(io), z, derived)
    }

    #[test]
    fn the_weights_are_the_pairs_each_evaluated_pair_stands_for() {
        // Ranges with and without a sensor zero, starting below, at and
        // above it, with rows that break the chain of derived rows.
        for (v, io, z) in [
            ((4, 300), (2, 301), 0),
            ((1, 257), (1, 129), 0),
            ((37, 400), (90, 390), 60),
            ((10, 200), (0, 160), 40),
            ((3, 64), (50, 64), 50),
        ] {
            for gap in [0u16, 7, 12] {
                let d = plan(v, io, z, |cv| gap == 0 || cv % gap != 0);
                let (want, got) = (brute(&d), from_runs(&d));
                assert_eq!(got, want, "rows {v:?}, codes {io:?}, zero {z}, gap {gap}");
                let total: u64 = want.iter().flatten().sum();
                assert_eq!(total, u64::from(d.vin.len()) * u64::from(d.io.len()));
                let evaluated = want.iter().flatten().filter(|&&w| w > 0).count() as u64;
                assert_eq!(d.evaluated(), evaluated);
            }
        }
    }
}
