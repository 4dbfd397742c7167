//! `zvs-timing verify --table <name>.bin` checks the lookup over the blob's
//! entries decoded into a `u16` array (as firmware holds a table in a Rust
//! or C array). Firmware that keeps the blob itself in flash runs the same
//! lookup over the blob's bytes (`timing_core::table::LeBytes`). Here the
//! two agree at every code pair of the demo's range and around it, so the
//! verification covers both.

use timing_core::table::{DelayTable, Entries};
use timing_core::AdcCode;

#[test]
fn the_blobs_bytes_and_its_decoded_entries_give_the_same_delays() {
    let blob = std::fs::read(
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../tables/winch_aux.bin"),
    )
    .unwrap();
    let (_, bytes) = timing_core::blob::open(&blob, None).unwrap();
    let entries: Vec<u16> = (0..bytes.entries().count())
        .map(|k| bytes.entries().at(k))
        .collect();
    assert_eq!(entries.len() * 2, bytes.entries().0.len());
    // Each entry read from its two bytes, little-endian.
    for (k, e) in entries.iter().enumerate() {
        let b = &bytes.entries().0[2 * k..2 * k + 2];
        assert_eq!(*e, u16::from_le_bytes([b[0], b[1]]));
    }
    let words = DelayTable::new(
        *bytes.sensing(),
        *bytes.layout(),
        bytes.frac_bits(),
        bytes.fallback(),
        entries.as_slice(),
    )
    .unwrap();
    let s = bytes.sensing();
    let (mut pairs, mut zvs) = (0u64, 0u64);
    for v in s.vin.lo.saturating_sub(8)..=s.vin.hi.saturating_add(8) {
        for i in s.io.lo.saturating_sub(8)..=s.io.hi.saturating_add(8) {
            let (v, i) = (AdcCode::new(v), AdcCode::new(i));
            let a = bytes.delay(v, i);
            assert_eq!(a, words.delay(v, i), "codes ({}, {})", v.get(), i.get());
            pairs += 1;
            zvs += u64::from(a.zvs);
        }
    }
    println!("{pairs} code pairs, {zvs} with ZVS");
    assert!(zvs > 0 && zvs < pairs);
}
