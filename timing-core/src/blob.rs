//! The `.bin` form of a delay table: a postcard-encoded header (magic,
//! format version, design hash, payload length, CRC-32 of the payload)
//! followed by the postcard-encoded payload (sensing, layout, fixed-point
//! format, fallback, entries as little-endian `u16` bytes). [`open`] checks
//! it in `no_std`, without allocating, and borrows the entries from the blob.
//! It cannot panic whatever the bytes: the firmware example's link-time
//! proof (`PANIC_NEVER=1 embedded-example/qemu.sh`, its `blob` build) opens
//! bytes hidden from the optimiser, on both Cortex-M cores, and a fuzz
//! target feeds it arbitrary bytes (docs/fuzzing.md).

use serde::{Deserialize, Serialize};

use crate::table::{DelayTable, Fallback, Layout, LeBytes, Sensing, TableError};

/// First four bytes of every table blob.
pub const MAGIC: [u8; 4] = *b"ZVDT";

pub use crate::table::FORMAT_VERSION;

/// CRC-32 (ISO-HDLC, the zlib/PNG polynomial) used for payloads and design hashes.
pub const CRC32: crc::Crc<u32> = crc::Crc::<u32>::new(&crc::CRC_32_ISO_HDLC);

/// The blob header.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub struct Header {
    /// [`MAGIC`].
    pub magic: [u8; 4],
    /// [`FORMAT_VERSION`].
    pub format_version: u16,
    /// CRC-32 of the design the table was generated from.
    pub design_hash: u32,
    /// Payload length, bytes.
    pub payload_len: u32,
    /// CRC-32 of the payload bytes.
    pub payload_crc: u32,
}

/// The blob payload, borrowing its entries.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub struct Payload<'a> {
    /// Code ranges, sensor zero and ZVS test.
    pub sensing: Sensing,
    /// How the table is indexed.
    pub layout: Layout,
    /// Fractional bits of the entries.
    pub frac_bits: u8,
    /// Policy below the ZVS boundary.
    pub fallback: Fallback,
    /// Entries, little-endian `u16` pairs.
    #[serde(borrow)]
    pub entries: &'a [u8],
}

/// Check a blob and open its table: magic, version, length, payload CRC-32,
/// the design hash when `expected_design` is given, and the table's own
/// validation ([`DelayTable::new`]).
///
/// # Errors
/// The [`TableError`] naming the first check that failed.
pub fn open(
    blob: &[u8],
    expected_design: Option<u32>,
) -> Result<(Header, DelayTable<LeBytes<'_>>), TableError> {
    if blob.get(..4) != Some(&MAGIC[..]) {
        return Err(TableError::BadMagic);
    }
    // Every format version puts its number right after the magic (a
    // postcard varint): read it alone first, so that a blob from a newer
    // writer, whose header may differ, is refused as unsupported and named,
    // not as malformed.
    let (version, _): (u16, &[u8]) =
        postcard::take_from_bytes(blob.get(MAGIC.len()..).unwrap_or(&[]))
            .map_err(|_| TableError::Malformed)?;
    if version != FORMAT_VERSION {
        return Err(TableError::UnsupportedVersion { found: version });
    }
    let (header, rest): (Header, &[u8]) =
        postcard::take_from_bytes(blob).map_err(|_| TableError::Malformed)?;
    let len = usize::try_from(header.payload_len).map_err(|_| TableError::Truncated)?;
    let payload = rest.get(..len).ok_or(TableError::Truncated)?;
    let found = CRC32.checksum(payload);
    if found != header.payload_crc {
        return Err(TableError::CrcMismatch {
            expected: header.payload_crc,
            found,
        });
    }
    if let Some(expected) = expected_design {
        if expected != header.design_hash {
            return Err(TableError::DesignMismatch {
                expected,
                found: header.design_hash,
            });
        }
    }
    let p: Payload<'_> = postcard::from_bytes(payload).map_err(|_| TableError::Malformed)?;
    let table = DelayTable::new(
        p.sensing,
        p.layout,
        p.frac_bits,
        p.fallback,
        LeBytes(p.entries),
    )?;
    Ok((header, table))
}
