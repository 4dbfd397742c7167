//! Writing a generated table for firmware: Rust source (`const` data for a
//! `no_std` crate), a C99 header with the same lookup, the `.bin` blob that
//! timing-core checks before use, and a CSV of the nodes for plotting.

use std::fmt::Write as _;

use timing_core::blob::{Header, Payload, CRC32, FORMAT_VERSION, MAGIC};
use timing_core::table::{Fallback, Layout};

use crate::check::verify::VerifyReport;
pub use crate::emit::c_header::c_header;
use crate::emit::summary::summary_lines;
use crate::generate::generated::Generated;
use crate::model::design::Design;
use crate::model::exact::ExactModel;

fn layout_rs(l: &Layout) -> String {
    match *l {
        Layout::Ratio(r) => format!(
            "Layout::Ratio(RatioLayout {{ ratio_shift: {}, q_lo: {}, step_shift: {}, nodes: {} }})",
            r.ratio_shift, r.q_lo, r.step_shift, r.nodes
        ),
        Layout::LogRatio(r) => format!(
            "Layout::LogRatio(LogRatioLayout {{ ratio_shift: {}, mant_bits: {}, e_lo: {}, nodes: {} }})",
            r.ratio_shift, r.mant_bits, r.e_lo, r.nodes
        ),
        Layout::LogUniform(r) => format!(
            "Layout::LogUniform(LogUniformLayout {{ lambda_lo: {}, step_shift: {}, nodes: {} }})",
            r.lambda_lo, r.step_shift, r.nodes
        ),
        Layout::RecipRatio(r) => format!(
            "Layout::RecipRatio(RecipRatioLayout {{ recip_shift: {}, post_shift: {}, q_lo: {}, step_shift: {}, nodes: {} }})",
            r.recip_shift, r.post_shift, r.q_lo, r.step_shift, r.nodes
        ),
        Layout::Grid(g) => format!(
            "Layout::Grid(GridLayout {{ vin_shift: {}, io_shift: {}, rows: {}, cols: {} }})",
            g.vin_shift, g.io_shift, g.rows, g.cols
        ),
        Layout::LogVolt(g) => format!(
            "Layout::LogVolt(LogVoltLayout {{ lambda_lo: {}, step_shift: {}, cols: {}, vin_shift: {}, rows: {} }})",
            g.lambda_lo, g.step_shift, g.cols, g.vin_shift, g.rows
        ),
        Layout::RatioVolt(g) => format!(
            "Layout::RatioVolt(RatioVoltLayout {{ ratio_shift: {}, q_lo: {}, step_shift: {}, cols: {}, vin_shift: {}, rows: {} }})",
            g.ratio_shift, g.q_lo, g.step_shift, g.cols, g.vin_shift, g.rows
        ),
        Layout::Margin(g) => format!(
            "Layout::Margin(MarginLayout {{ io_mul: {}, vin_mul: {}, offset: {}, step_shift: {}, cols: {}, vin_shift: {}, rows: {} }})",
            g.io_mul, g.vin_mul, g.offset, g.step_shift, g.cols, g.vin_shift, g.rows
        ),
    }
}

/// Rust source: `const`/`static` data and a constructor for
/// `timing_core::table::DelayTable`, usable from a `no_std` crate.
#[must_use]
pub fn rust_source(design: &Design, g: &Generated, v: &VerifyReport) -> String {
    let mut s = summary_lines(design, g, v, "//");
    let _ = writeln!(s, "#[allow(unused_imports)]");
    let _ = writeln!(
        s,
        "use timing_core::table::{{DelayTable, Fallback, GridLayout, Layout, LogRatioLayout, LogUniformLayout, LogVoltLayout, MarginLayout, RatioLayout, RatioVoltLayout, RecipRatioLayout, Sensing, TableError}};"
    );
    let _ = writeln!(
        s,
        "#[allow(unused_imports)]\nuse timing_core::{{CodeRange, Ticks}};\n"
    );
    let _ = writeln!(
        s,
        "/// CRC-32 of the design file this table was generated from."
    );
    let _ = writeln!(s, "pub const DESIGN_HASH: u32 = {:#010x};", design.hash);
    let sn = &g.sensing;
    let _ = writeln!(s, "/// Code ranges, current-sensor zero and ZVS test.");
    let _ = writeln!(
        s,
        "pub const SENSING: Sensing = Sensing {{ vin: CodeRange {{ lo: {}, hi: {} }}, io: CodeRange {{ lo: {}, hi: {} }}, io_zero: {}, zvs_io_mul: {}, zvs_vin_mul: {} }};",
        sn.vin.lo, sn.vin.hi, sn.io.lo, sn.io.hi, sn.io_zero, sn.zvs_io_mul, sn.zvs_vin_mul
    );
    let _ = writeln!(s, "/// How the table is indexed.");
    let _ = writeln!(s, "pub const LAYOUT: Layout = {};", layout_rs(&g.layout));
    let _ = writeln!(s, "/// Entries hold ticks times 2^FRAC_BITS.");
    let _ = writeln!(s, "pub const FRAC_BITS: u8 = {};", g.frac_bits);
    let _ = writeln!(s, "/// Policy below the ZVS boundary.");
    let _ = writeln!(
        s,
        "pub const FALLBACK: Fallback = {};",
        match g.fallback {
            Fallback::Valley => "Fallback::Valley".to_owned(),
            Fallback::Fixed(t) => format!("Fallback::Fixed(Ticks::new({}))", t.get()),
        }
    );
    let _ = writeln!(s, "/// Table entries ({} bytes).", g.table_bytes());
    let _ = write!(s, "pub static ENTRIES: [u16; {}] = [", g.entries.len());
    crate::emit::summary::push_entries(&mut s, &g.entries, "");
    s.push_str("\n];\n\n");
    let _ = writeln!(
        s,
        "/// The table as a constant, validated at compile time: the interrupt's\n/// lookup sees every layout parameter as a constant and folds it."
    );
    let _ = writeln!(
        s,
        "pub const TABLE: DelayTable<&'static [u16]> =\n    match DelayTable::from_static(SENSING, LAYOUT, FRAC_BITS, FALLBACK, &ENTRIES) {{\n        Ok(t) => t,\n        Err(_) => panic!(\"generated table `{}` fails timing-core's validation\"),\n    }};\n",
        design.name
    );
    let _ = writeln!(
        s,
        "/// The validated table (validation runs once; call it at start-up)."
    );
    let _ = writeln!(
        s,
        "pub fn table() -> Result<DelayTable<&'static [u16]>, TableError> {{"
    );
    let _ = writeln!(
        s,
        "    DelayTable::new(SENSING, LAYOUT, FRAC_BITS, FALLBACK, &ENTRIES)"
    );
    let _ = writeln!(s, "}}");
    s
}

/// The `.bin` blob: postcard header (magic, version, design hash, payload
/// length and CRC-32) and postcard payload.
///
/// # Errors
/// postcard's serialisation error (not expected).
pub fn blob(design: &Design, g: &Generated) -> Result<Vec<u8>, postcard::Error> {
    blob_with_hash(design.hash, g)
}

/// [`blob`] for any table, with the design hash `hash` in its header.
///
/// # Errors
/// postcard's serialisation error (not expected).
pub fn blob_with_hash(hash: u32, g: &Generated) -> Result<Vec<u8>, postcard::Error> {
    let entry_bytes: Vec<u8> = g.entries.iter().flat_map(|e| e.to_le_bytes()).collect();
    let payload = postcard::to_allocvec(&Payload {
        sensing: g.sensing,
        layout: g.layout,
        frac_bits: g.frac_bits,
        fallback: g.fallback,
        entries: &entry_bytes,
    })?;
    let header = Header {
        magic: MAGIC,
        format_version: FORMAT_VERSION,
        design_hash: hash,
        payload_len: payload.len() as u32,
        payload_crc: CRC32.checksum(&payload),
    };
    let mut out = postcard::to_allocvec(&header)?;
    out.extend_from_slice(&payload);
    Ok(out)
}

/// One CSV row per table node: where it sits and the delay it holds.
#[must_use]
pub fn csv(design: &Design, g: &Generated) -> String {
    let model = ExactModel::new(design);
    let scale_f = f64::from(1u32 << g.frac_bits);
    let mut s = String::new();
    let one_d = |s: &mut String, shift: u8, node_q: &dyn Fn(u32) -> f64| {
        s.push_str("node,q,normalized_load,vin_over_io_ohm,exact_ticks,entry,entry_ticks\n");
        let nodes = match g.layout {
            Layout::RecipRatio(r) => usize::from(r.nodes),
            _ => g.entries.len(),
        };
        for (k, e) in g.entries.iter().take(nodes).enumerate() {
            let q = node_q(k as u32);
            let j = crate::generate::load_at_ratio(design, shift, q);
            let exact = model.at_load(j).map_or(f64::NAN, |p| p.ticks);
            let _ = writeln!(
                s,
                "{k},{q},{j:.6},{:.6},{exact:.4},{e},{:.4}",
                design.tank.z0_ohm() / j,
                f64::from(*e) / scale_f
            );
        }
    };
    match g.layout {
        Layout::Ratio(r) => one_d(&mut s, r.ratio_shift, &|k| {
            f64::from(r.q_lo) + f64::from(k) * f64::from(1u32 << r.step_shift)
        }),
        Layout::LogUniform(r) => one_d(&mut s, 0, &|k| {
            let lambda = f64::from(r.lambda_lo) + f64::from(k) * f64::from(1u32 << r.step_shift);
            2f64.powf((lambda - f64::from(timing_core::table::LOG_OFFSET)) / 32768.0)
        }),
        Layout::RecipRatio(r) => one_d(&mut s, r.recip_shift - r.post_shift, &|k| {
            f64::from(r.q_lo) + f64::from(k) * f64::from(1u32 << r.step_shift)
        }),
        Layout::LogRatio(r) => one_d(&mut s, r.ratio_shift, &|k| {
            crate::generate::log_node_q(k, u32::from(r.e_lo), u32::from(r.mant_bits))
        }),
        Layout::LogVolt(gr) => {
            s.push_str(
                "row,col,vin_code,vin_v,vin_over_io_codes,io_a,exact_ticks,entry,entry_ticks\n",
            );
            for r in 0..u32::from(gr.rows) {
                for c in 0..u32::from(gr.cols) {
                    let cv = u32::from(g.sensing.vin.lo) + (r << gr.vin_shift);
                    let lambda =
                        f64::from(gr.lambda_lo) + f64::from(c) * f64::from(1u32 << gr.step_shift);
                    let ratio =
                        2f64.powf((lambda - f64::from(timing_core::table::LOG_OFFSET)) / 32768.0);
                    let vin = f64::from(cv) * design.vin_volts_per_code;
                    let io = f64::from(cv) / ratio * design.io_amps_per_code;
                    let exact = model.at(vin, io).map_or(f64::NAN, |p| p.ticks);
                    let e = g.entries[(r * u32::from(gr.cols) + c) as usize];
                    let _ = writeln!(
                        s,
                        "{r},{c},{cv},{vin:.4},{ratio:.6},{io:.5},{exact:.4},{e},{:.4}",
                        f64::from(e) / scale_f
                    );
                }
            }
        }
        Layout::RatioVolt(_) | Layout::Margin(_) => {
            s.push_str("row,col,vin_code,io_code,vin_v,io_a,exact_ticks,entry,entry_ticks\n");
            let (rows, cols) = match g.layout {
                Layout::RatioVolt(gr) => (gr.rows, gr.cols),
                Layout::Margin(gr) => (gr.rows, gr.cols),
                _ => (0, 0),
            };
            for r in 0..u32::from(rows) {
                for c in 0..u32::from(cols) {
                    let Some((cv, i)) = crate::generate::row_node(&g.sensing, &g.layout, r, c)
                    else {
                        continue;
                    };
                    let ci = i + f64::from(g.sensing.io_zero);
                    let vin = cv * design.vin_volts_per_code;
                    let io = i * design.io_amps_per_code;
                    let exact = model.at(vin, io).map_or(f64::NAN, |p| p.ticks);
                    let e = g.entries[(r * u32::from(cols) + c) as usize];
                    let _ = writeln!(
                        s,
                        "{r},{c},{cv},{ci:.2},{vin:.4},{io:.5},{exact:.4},{e},{:.4}",
                        f64::from(e) / scale_f
                    );
                }
            }
        }
        Layout::Grid(gr) => {
            s.push_str("row,col,vin_code,io_code,vin_v,io_a,exact_ticks,entry,entry_ticks\n");
            for r in 0..u32::from(gr.rows) {
                for c in 0..u32::from(gr.cols) {
                    let cv = u32::from(g.sensing.vin.lo) + (r << gr.vin_shift);
                    let ci = u32::from(g.sensing.io.lo) + (c << gr.io_shift);
                    let vin = f64::from(cv) * design.vin_volts_per_code;
                    let io =
                        (f64::from(ci) - f64::from(g.sensing.io_zero)) * design.io_amps_per_code;
                    let exact = model.at(vin, io).map_or(f64::NAN, |p| p.ticks);
                    let e = g.entries[(r * u32::from(gr.cols) + c) as usize];
                    let _ = writeln!(
                        s,
                        "{r},{c},{cv},{ci},{vin:.4},{io:.5},{exact:.4},{e},{:.4}",
                        f64::from(e) / scale_f
                    );
                }
            }
        }
    }
    s
}

/// Paths of the files [`write_all`] wrote.
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize)]
pub struct Written {
    /// Rust source.
    pub rs: std::path::PathBuf,
    /// C header.
    pub h: std::path::PathBuf,
    /// Binary blob.
    pub bin: std::path::PathBuf,
    /// Node CSV.
    pub csv: std::path::PathBuf,
    /// Rust source of the closed-form methods' coefficients.
    pub closed_form_rs: std::path::PathBuf,
    /// C99 header of the closed-form methods (and the trim).
    pub closed_form_h: std::path::PathBuf,
}

/// Write `<dir>/<name>.{rs,h,bin,csv}` and `<dir>/<name>_closed_form.{rs,h}`,
/// creating `dir`.
///
/// # Errors
/// I/O errors, and postcard's (not expected).
pub fn write_all(
    dir: &std::path::Path,
    design: &Design,
    g: &Generated,
    v: &VerifyReport,
) -> std::io::Result<Written> {
    write_with(dir, design, g, v, None, None)
}

/// [`write_all`] for a generation's outcome: its closed-form reports,
/// made in the table's verification pass, are not made again.
///
/// # Errors
/// As [`write_all`].
pub fn write_outcome(
    dir: &std::path::Path,
    design: &Design,
    out: &crate::generate::Outcome,
) -> std::io::Result<Written> {
    write_with(
        dir,
        design,
        &out.table,
        &out.verification,
        Some(&out.closed_forms),
        out.pieces.as_ref(),
    )
}

fn write_with(
    dir: &std::path::Path,
    design: &Design,
    g: &Generated,
    v: &VerifyReport,
    closed_forms: Option<&[VerifyReport]>,
    pieces: Option<&crate::generate::pieces::PieceSet>,
) -> std::io::Result<Written> {
    std::fs::create_dir_all(dir)?;
    let base = dir.join(&design.name);
    let w = Written {
        closed_form_rs: dir.join(format!("{}_closed_form.rs", design.name)),
        closed_form_h: dir.join(format!("{}_closed_form.h", design.name)),
        rs: base.with_extension("rs"),
        h: base.with_extension("h"),
        bin: base.with_extension("bin"),
        csv: base.with_extension("csv"),
    };
    std::fs::write(&w.rs, rust_source(design, g, v))?;
    std::fs::write(&w.h, c_header(design, g, v))?;
    std::fs::write(&w.bin, blob(design, g).map_err(std::io::Error::other)?)?;
    std::fs::write(&w.csv, csv(design, g))?;
    let fitted;
    let pieces = match pieces {
        Some(p) => p,
        None => {
            fitted = crate::generate::pieces::fit_design_pieces(design)
                .map_err(std::io::Error::other)?;
            &fitted
        }
    };
    // Each method proven once, for both sources.
    let proven: Vec<VerifyReport>;
    let closed_forms = match closed_forms {
        Some(c) => c,
        None => {
            proven = crate::emit::closed_form_source::method_proofs(design, pieces, None)
                .map_err(std::io::Error::other)?
                .into_iter()
                .filter_map(|(_, r)| r.ok())
                .collect();
            &proven
        }
    };
    let closed = crate::emit::closed_form_source::closed_form_source_with(
        design,
        pieces,
        Some(closed_forms),
    );
    std::fs::write(&w.closed_form_rs, closed.map_err(std::io::Error::other)?)?;
    let header = crate::emit::closed_form_c::closed_form_c_with(design, pieces, Some(closed_forms));
    std::fs::write(&w.closed_form_h, header.map_err(std::io::Error::other)?)?;
    Ok(w)
}

/// Why a firmware build's table could not be made.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum FirmwareError {
    /// The design file is unreadable, malformed or invalid.
    #[error(transparent)]
    Design(#[from] crate::input::design::DesignError),
    /// No table meets the design's budget, or the model refused it.
    #[error("{path}: {source}")]
    Generate {
        /// The design file.
        path: String,
        /// Generation's error.
        source: crate::generate::GenerateError,
    },
    /// The blob could not be encoded.
    #[error("blob: {0}")]
    Blob(#[from] postcard::Error),
}

/// For a firmware crate's `build.rs`: read the design file at `path`,
/// generate and verify its table, and return the Rust source to write into
/// `OUT_DIR` (the same text `zvs-timing table` writes as `<name>.rs`).
///
/// # Errors
/// [`FirmwareError`].
pub fn rust_source_for_design_file(path: &std::path::Path) -> Result<String, FirmwareError> {
    firmware_table(path, None).map(|(source, _)| source)
}

/// The table layout a firmware build for the target triple `target` asks
/// for, the one with the fewest instructions per lookup on its core (both
/// follow the voltage as well as the current, which a Coss curve needs to
/// stay within a tick):
/// - `ratio-volt` where the core divides in one instruction (ARMv7-M and
///   later): the division linearises the charging term, so the table stays
///   small;
/// - `margin` on ARMv6-M, which has no divide instruction (a library call of
///   about a hundred instructions) and no leading-zero count: no division
///   and no logarithm, at the price of more flash (uniform current columns
///   must follow the charging term's 1/Io curvature at the lowest current).
#[must_use]
pub fn firmware_layout(target: &str) -> crate::input::design::LayoutChoice {
    if target.starts_with("thumbv6m") {
        crate::input::design::LayoutChoice::Margin
    } else {
        crate::input::design::LayoutChoice::RatioVolt
    }
}

/// The Rust source and the `.bin` blob of the table for the design file at
/// `path`, with the layout choice overridden by `layout` when given (a
/// firmware build picks the layout that is fastest on its core). For
/// build scripts.
///
/// # Errors
/// [`FirmwareError`].
pub fn firmware_table(
    path: &std::path::Path,
    layout: Option<crate::input::design::LayoutChoice>,
) -> Result<(String, Vec<u8>), FirmwareError> {
    let mut design = Design::load(path)?;
    if let Some(l) = layout {
        design.layout = l;
    }
    let out = crate::generate::generate(&design).map_err(|source| FirmwareError::Generate {
        path: path.display().to_string(),
        source,
    })?;
    let bin = blob(&design, &out.table)?;
    Ok((rust_source(&design, &out.table, &out.verification), bin))
}

/// Rust source of the design's tank as built (Lr, the fixed capacitance,
/// the Coss curve and the loop resistance) as `f32` constants, for a
/// reference model on the target (`timing_core::ring::RingCell` over
/// `timing_core::coss::SwitchCapacitance`): the firmware example's judge.
#[must_use]
pub fn model_source(design: &Design) -> String {
    let r = &design.real;
    let mut s = String::new();
    let _ = writeln!(
        s,
        "// Generated by zvs-timing from design `{}` (design hash {:#010x}). Do not edit.",
        design.name, design.hash
    );
    let _ = writeln!(s, "// Model: {}.", design.model_summary());
    let _ = writeln!(
        s,
        "/// Resonant inductance, henry.\npub const LR_H: f32 = {:e};",
        r.lr_h
    );
    let _ = writeln!(
        s,
        "/// Fixed capacitance across the switch, farad.\npub const CR_FIXED_F: f32 = {:e};",
        r.cr_fixed_f
    );
    let _ = writeln!(
        s,
        "/// Series resistance of the resonant loop, ohm.\npub const R_TANK_OHM: f32 = {:e};",
        r.r_tank_ohm
    );
    let _ = writeln!(
        s,
        "/// The MOSFET's Coss curve (volt, farad).\npub static COSS: [timing_core::coss::CossPoint<f32>; {}] = [",
        r.coss.len()
    );
    for p in &r.coss {
        let _ = writeln!(
            s,
            "    timing_core::coss::CossPoint {{ volts: {:e}, farads: {:e} }},",
            p.volts, p.farads
        );
    }
    s.push_str("];\n");
    s
}
