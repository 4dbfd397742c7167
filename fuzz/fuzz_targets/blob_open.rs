//! `timing_core::blob::open` on any bytes, as a firmware reads a blob from
//! flash. Each input is opened twice: as given, and with its payload put
//! behind a header whose length and CRC-32 match it (the bytes after a
//! header that decodes, or all of them), so that mutated payloads pass the
//! checksum and reach the table's own validation.
//!
//! Contract checked: `open` returns an error or a table and does not panic;
//! an opened blob passed every check `open` documents (magic, version,
//! length, CRC-32, design hash); and the opened table's lookup, which
//! `DelayTable::new` documents as unable to fail or overflow for any code
//! pair, gives a delay between the smallest and the largest delay entry
//! (or the fixed fallback below the ZVS boundary), a ZVS flag that matches
//! the documented test, and the same delays through `delays_along_io`.

#![no_main]

use libfuzzer_sys::fuzz_target;
use timing_core::blob::{self, Header, CRC32, FORMAT_VERSION, MAGIC};
use timing_core::table::{DelayTable, Entries, Fallback, Layout, LeBytes, TableError};
use timing_core::AdcCode;

fuzz_target!(|data: &[u8]| {
    check(data);
    check(&with_matching_header(data));
});

/// `data`'s payload behind a header of the current version whose length
/// and CRC-32 are the payload's.
fn with_matching_header(data: &[u8]) -> Vec<u8> {
    let (design_hash, payload) = match postcard::take_from_bytes::<Header>(data) {
        Ok((h, rest)) if h.magic == MAGIC => (h.design_hash, rest),
        _ => (0, data),
    };
    let header = Header {
        magic: MAGIC,
        format_version: FORMAT_VERSION,
        design_hash,
        payload_len: u32::try_from(payload.len()).unwrap_or(u32::MAX),
        payload_crc: CRC32.checksum(payload),
    };
    let mut buf = [0u8; 32];
    let head = postcard::to_slice(&header, &mut buf).expect("a header fits 32 bytes");
    let mut out = head.to_vec();
    out.extend_from_slice(payload);
    out
}

fn check(bytes: &[u8]) {
    let (header, table) = match blob::open(bytes, None) {
        Ok(opened) => opened,
        Err(e) => {
            // Every refusal has a message.
            assert!(!e.to_string().is_empty());
            return;
        }
    };
    assert_eq!(header.magic, MAGIC);
    assert_eq!(header.format_version, FORMAT_VERSION);
    // Header, then `payload_len` bytes whose CRC-32 the header records.
    let (decoded, rest) = postcard::take_from_bytes::<Header>(bytes).expect("the header decodes");
    assert_eq!(decoded, header);
    let payload = rest
        .get(..header.payload_len as usize)
        .expect("payload_len bytes follow the header");
    assert_eq!(CRC32.checksum(payload), header.payload_crc);
    // Non-empty ranges, the current's above the sensor zero.
    let s = table.sensing();
    assert!(s.vin.lo <= s.vin.hi && s.io.lo <= s.io.hi, "{s:?}");
    assert!(s.io.lo > s.io_zero, "{s:?}");
    // The design hash is checked when asked for.
    assert!(blob::open(bytes, Some(header.design_hash)).is_ok());
    assert!(matches!(
        blob::open(bytes, Some(!header.design_hash)),
        Err(TableError::DesignMismatch { .. })
    ));
    lookups(&table, bytes);
}

/// Lookups at the range's corners, just outside them, the extreme codes
/// and codes taken from the input's last bytes.
fn lookups(table: &DelayTable<LeBytes<'_>>, bytes: &[u8]) {
    let s = *table.sensing();
    let entries = table.entries();
    // The delay entries (a reciprocal layout keeps its reciprocals after them).
    let nodes = match table.layout() {
        Layout::RecipRatio(r) => usize::from(r.nodes),
        _ => entries.count(),
    };
    let (lo, hi) = (0..nodes)
        .map(|i| entries.at(i))
        .fold((u16::MAX, 0), |(lo, hi), e| (lo.min(e), hi.max(e)));
    // Entries are delays times 2^frac_bits; the lookup rounds half up.
    let f = u32::from(table.frac_bits());
    let round = |e: u16| (u64::from(e) + ((1u64 << f) >> 1)) >> f;
    let (t_lo, t_hi) = (round(lo), round(hi));
    let tail = |k: usize| {
        let b = |i: usize| bytes.get(bytes.len().wrapping_sub(i)).copied().unwrap_or(0);
        u16::from_le_bytes([b(2 * k + 2), b(2 * k + 1)])
    };
    let near = |r: timing_core::CodeRange| {
        [
            r.lo,
            r.hi,
            r.lo.saturating_sub(1),
            r.hi.saturating_add(1),
            r.lo.wrapping_add(r.hi.wrapping_sub(r.lo) / 2),
        ]
    };
    let vins = near(s.vin)
        .into_iter()
        .chain([0, u16::MAX, tail(0), tail(2)]);
    for vin in vins {
        let ios: Vec<u16> = near(s.io)
            .into_iter()
            .chain([0, u16::MAX, s.io_zero, tail(1), tail(3)])
            .collect();
        for &io in &ios {
            let got = table.delay(AdcCode::new(vin), AdcCode::new(io));
            // The documented ZVS test on the clamped codes, without overflow.
            let v = u64::from(s.vin.clamp(AdcCode::new(vin)));
            let i = u64::from(s.io.clamp(AdcCode::new(io))) - u64::from(s.io_zero);
            let zvs = i * u64::from(s.zvs_io_mul) >= v * u64::from(s.zvs_vin_mul);
            assert_eq!(got.zvs, zvs, "ZVS flag at vin {vin}, io {io}");
            let t = u64::from(got.ticks.get());
            match table.fallback() {
                Fallback::Fixed(fixed) if !zvs => assert_eq!(got.ticks, fixed),
                _ => assert!(
                    (t_lo..=t_hi).contains(&t),
                    "delay {t} ticks at vin {vin}, io {io} outside the entries' {t_lo}..={t_hi}"
                ),
            }
        }
        // The same delays along the current codes, one call.
        let first = ios[0];
        let step = tail(4) | 1;
        let mut out = [timing_core::Ticks::ZERO; 8];
        table.delays_along_io(AdcCode::new(vin), AdcCode::new(first), step, &mut out);
        for (k, t) in out.iter().enumerate() {
            let io = first.wrapping_add((k as u16).wrapping_mul(step));
            assert_eq!(
                *t,
                table.delay(AdcCode::new(vin), AdcCode::new(io)).ticks,
                "delays_along_io at vin {vin}, io {io}"
            );
        }
    }
}
