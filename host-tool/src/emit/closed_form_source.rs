//! Rust source for firmware that evaluates the delay in closed form instead
//! of (or beside) a table: the validated coefficients of timing-core's
//! three closed-form methods as `const` items (f32 values written as exact
//! bit patterns), with each method's exhaustive verification in the header.

use std::fmt::Write as _;

use timing_core::closed_form::{F32Parts, FastF32Parts, FixedPointParts, PieceLayout};
use timing_core::table::Fallback;
use timing_core::CodeRange;

use timing_core::closed_form::{FastF32, FixedPoint};

use crate::check::verify::{verify_all, DelayMethod, VerifyReport};
use crate::generate::pieces::{fit_design_pieces, PieceSet};
use crate::model::design::Design;

fn range(r: CodeRange) -> String {
    format!("CodeRange {{ lo: {}, hi: {} }}", r.lo, r.hi)
}

fn fallback(f: Fallback) -> String {
    match f {
        Fallback::Valley => "Fallback::Valley".to_owned(),
        Fallback::Fixed(t) => format!("Fallback::Fixed(Ticks::new({}))", t.get()),
    }
}

fn f32_lit(x: f32) -> String {
    format!("f32::from_bits({:#010x}) /* {x:e} */", x.to_bits())
}

fn f32_parts(p: &F32Parts) -> String {
    format!(
        "F32Parts {{\n    vin: {},\n    io: {},\n    io_zero: {},\n    kx: {},\n    ticks_per_rad: {},\n    lead_ticks: {},\n    position: {},\n    max_ticks: {},\n    fallback: {},\n}}",
        range(p.vin),
        range(p.io),
        p.io_zero,
        f32_lit(p.kx),
        f32_lit(p.ticks_per_rad),
        f32_lit(p.lead_ticks),
        f32_lit(p.position),
        p.max_ticks,
        fallback(p.fallback)
    )
}

fn list<T>(items: &[T], one: impl Fn(&T) -> String) -> String {
    items.iter().map(|x| format!("    {},\n", one(x))).collect()
}

/// The layout's bands and thresholds and the two methods' pieces and
/// parts, as `const` items.
fn piece_items(
    layout: &PieceLayout<'_>,
    fast: Option<&FastF32Parts<'_>>,
    fixed: Option<&FixedPointParts<'_>>,
) -> String {
    let mut s = String::new();
    let _ = writeln!(
        s,
        "/// Voltage bands of {} codes from code {}: where each band's pieces start, and its ZVS line.\npub const BANDS: [Band; {}] = [\n{}];\n",
        1u32 << layout.band_shift,
        layout.vin.lo,
        layout.bands.len(),
        list(layout.bands, |b| format!(
            "Band {{ first: {}, zvs_io_q8: {}, zvs_io_q16_per_code: {} }}",
            b.first, b.zvs_io_q8, b.zvs_io_q16_per_code
        ))
    );
    let _ = writeln!(
        s,
        "/// Each piece serves code ratios vin/(io - zero) below its entry / 2^{} (a band's last: every ratio).\npub const ENDS: [u32; {}] = [\n{}];\n",
        layout.ratio_bits,
        layout.ends.len(),
        list(layout.ends, |e| format!("{e:#010x}"))
    );
    let _ = writeln!(
        s,
        "/// Which piece serves each code pair.\npub const LAYOUT: PieceLayout<'static> = PieceLayout {{\n    vin: {},\n    io: {},\n    io_zero: {},\n    band_shift: {},\n    ratio_bits: {},\n    bands: &BANDS,\n    ends: &ENDS,\n}};\n",
        range(layout.vin),
        range(layout.io),
        layout.io_zero,
        layout.band_shift,
        layout.ratio_bits
    );
    if let Some(p) = fast {
        let _ = writeln!(
            s,
            "/// The f32 method's stand-ins, fitted to the exact model.\npub const F32_PIECES: [F32Piece; {}] = [\n{}];\n",
            p.pieces.len(),
            list(p.pieces, |q| format!(
                "F32Piece {{ kx: {}, ticks_per_rad: {}, offset_ticks: {}, ticks_per_vin_code: {} }}",
                f32_lit(q.kx),
                f32_lit(q.ticks_per_rad),
                f32_lit(q.offset_ticks),
                f32_lit(q.ticks_per_vin_code)
            ))
        );
        let _ = writeln!(
            s,
            "/// Coefficients of the fast f32 method.\npub const FAST_F32_PARTS: FastF32Parts<'static> = FastF32Parts {{\n    layout: LAYOUT,\n    pieces: &F32_PIECES,\n    position: {},\n    max_ticks: {},\n    fallback: {},\n}};\n",
            f32_lit(p.position),
            p.max_ticks,
            fallback(p.fallback)
        );
    }
    if let Some(p) = fixed {
        let _ = writeln!(
            s,
            "/// The integer method's stand-ins: the same, in integers.\npub const FIXED_PIECES: [FixedPiece; {}] = [\n{}];\n",
            p.pieces.len(),
            list(p.pieces, |q| format!(
                "FixedPiece {{ k_mant: {}, k_shift: {}, t_mant: {}, t_shift: {}, offset_q8: {}, q16_per_vin_code: {} }}",
                q.k_mant, q.k_shift, q.t_mant, q.t_shift, q.offset_q8, q.q16_per_vin_code
            ))
        );
        let _ = writeln!(
            s,
            "/// Coefficients of the integer method.\npub const FIXED_POINT_PARTS: FixedPointParts<'static> = FixedPointParts {{\n    layout: LAYOUT,\n    pieces: &FIXED_PIECES,\n    position_q15: {},\n    max_ticks: {},\n    fallback: {},\n}};\n",
            p.position_q15,
            p.max_ticks,
            fallback(p.fallback)
        );
    }
    s
}

/// Each method's proof line (or why it is not available), those named in
/// `skip` left out.
///
/// # Errors
/// As [`method_proofs`].
pub(crate) fn proof_lines(
    s: &mut String,
    design: &Design,
    pieces: &PieceSet,
    done: Option<&[VerifyReport]>,
    skip: &[&str],
) -> Result<(), timing_core::Error> {
    for (name, proof) in method_proofs(design, pieces, done)? {
        if skip.contains(&name) {
            continue;
        }
        match proof {
            Ok(r) => proof_line(s, &r),
            Err(e) => {
                let _ = writeln!(s, "// {name}: not available for this design: {e}");
            }
        }
    }
    Ok(())
}

fn proof_line(s: &mut String, v: &VerifyReport) {
    let _ = writeln!(
        s,
        "// {}: approximation error at most {:.4} ticks before rounding; commanded error at most {:.3} ticks (RMS {:.3});",
        v.method,
        v.max_approximation_error_ticks.unwrap_or(f64::NAN),
        v.max_error_ticks,
        v.rms_error_ticks
    );
    let _ = writeln!(
        s,
        "//   {} of {} ZVS turn-ons outside the window ({} where it is a tick wide or more); {} of {} outside the robust window.",
        v.outside_window, v.zvs_points, v.outside_window_wide, v.outside_robust_window, v.robust_points
    );
}

/// A closed-form method's name and its proof, or why timing-core refuses
/// it for the design.
pub(crate) type MethodProof = (&'static str, Result<VerifyReport, timing_core::Error>);

/// Each closed-form method's proof at every code pair of `design`
/// (`closed-form-f32`, `fixed-point`, `libm-f32`, in that order), or why
/// timing-core refuses it for this design: the reports in `done` where
/// they are, the others verified here in one pass over the code pairs.
///
/// # Errors
/// timing-core's refusal of the design's code scaling.
pub(crate) fn method_proofs(
    design: &Design,
    pieces: &PieceSet,
    done: Option<&[VerifyReport]>,
) -> Result<Vec<MethodProof>, timing_core::Error> {
    let cf = design.closed_form()?;
    let fast = pieces.fast_f32();
    let fixed = pieces.fixed_point();
    let libm = cf.libm_f32();
    let named: [(&'static str, Result<&dyn DelayMethod, &timing_core::Error>); 3] = [
        (
            "closed-form-f32",
            fast.as_ref().map(|m| m as &dyn DelayMethod),
        ),
        ("fixed-point", fixed.as_ref().map(|m| m as &dyn DelayMethod)),
        ("libm-f32", libm.as_ref().map(|m| m as &dyn DelayMethod)),
    ];
    let known = |name: &str| done.and_then(|d| d.iter().find(|r| r.method == name));
    let missing: Vec<&dyn DelayMethod> = named
        .iter()
        .filter(|(name, _)| known(name).is_none())
        .filter_map(|(_, m)| m.as_ref().ok().copied())
        .collect();
    let fresh = verify_all(design, &missing, None);
    let report = |name: &str| known(name).or_else(|| fresh.iter().find(|r| r.method == name));
    // A method timing-core accepts always has its report (verify_all gives
    // one a method, named as the method).
    Ok(named
        .iter()
        .filter_map(|(name, m)| match m {
            Ok(_) => report(name).map(|r| (*name, Ok(r.clone()))),
            Err(e) => Some((*name, Err(**e))),
        })
        .collect())
}

/// The closed-form methods of `design`, each verified at every code pair,
/// as Rust source (`<name>_closed_form.rs`). A method timing-core refuses
/// for this design (e.g. the fixed-point one beyond its range of J) is left
/// out with a comment that says why.
///
/// # Errors
/// timing-core's refusal of the design's code scaling.
pub fn closed_form_source(design: &Design) -> Result<String, timing_core::Error> {
    let pieces = fit_design_pieces(design)?;
    closed_form_source_with(design, &pieces, None)
}

/// [`closed_form_source`] with the fast method's fitted pieces and the
/// methods' verification reports already made (by the pass that verified
/// the table, [`crate::generate::Outcome`]); a method whose report is
/// missing is verified here.
///
/// # Errors
/// As [`closed_form_source`].
pub fn closed_form_source_with(
    design: &Design,
    pieces: &PieceSet,
    done: Option<&[VerifyReport]>,
) -> Result<String, timing_core::Error> {
    let cf = design.closed_form()?;
    let fast = pieces.fast_f32();
    let fixed = pieces.fixed_point();
    let libm = cf.libm_f32();
    let mut s = String::new();
    let _ = writeln!(
        s,
        "// Generated by zvs-timing from design `{}` (design hash {:#010x}). Do not edit:\n// regenerate with `zvs-timing table <design>.toml --out <dir>`.",
        design.name, design.hash
    );
    let _ = writeln!(
        s,
        "// timing-core's closed-form methods for this design, verified against the exact model at all\n// {} code pairs (codes outside vin {}..={} / io {}..={} clamp to the range edge):",
        u64::from(design.vin_codes.len()) * u64::from(design.io_codes.len()),
        design.vin_codes.lo,
        design.vin_codes.hi,
        design.io_codes.lo,
        design.io_codes.hi
    );
    proof_lines(&mut s, design, pieces, done, &[])?;
    let _ = writeln!(
        s,
        "// CAUTION: verify every delay at reduced voltage with a scope before full-voltage operation."
    );
    let _ = writeln!(
        s,
        "#[allow(unused_imports)]\nuse timing_core::closed_form::{{Band, F32Parts, F32Piece, FastF32, FastF32Parts, FixedPiece, FixedPoint, FixedPointParts, LibmF32, PieceLayout}};\n#[allow(unused_imports)]\nuse timing_core::table::Fallback;\n#[allow(unused_imports)]\nuse timing_core::{{CodeRange, Ticks}};\n"
    );
    if fast.is_ok() || fixed.is_ok() {
        s.push_str(&piece_items(
            &pieces.layout(),
            fast.as_ref().ok().map(FastF32::parts),
            fixed.as_ref().ok().map(FixedPoint::parts),
        ));
    }
    if let Ok(m) = &libm {
        let _ = writeln!(
            s,
            "/// Coefficients of the libm f32 baseline (the ideal cell's stand-in).\npub const F32_PARTS: {};\n",
            f32_parts(m.parts()).replacen("F32Parts {", "F32Parts = F32Parts {", 1)
        );
    }
    for (ok, name, ty, parts) in [
        (
            fast.is_ok(),
            "FAST_F32",
            "FastF32<'static>",
            "FAST_F32_PARTS",
        ),
        (
            fixed.is_ok(),
            "FIXED_POINT",
            "FixedPoint<'static>",
            "FIXED_POINT_PARTS",
        ),
        (libm.is_ok(), "LIBM_F32", "LibmF32", "F32_PARTS"),
    ] {
        if !ok {
            continue;
        }
        let path = ty.split('<').next().unwrap_or(ty);
        let _ = writeln!(
            s,
            "/// The validated method (validated at compile time).\npub const {name}: {ty} = match {path}::from_parts({parts}) {{\n    Ok(m) => m,\n    Err(_) => panic!(\"generated coefficients of `{}` fail timing-core's validation\"),\n}};\n",
            design.name
        );
    }
    Ok(s)
}
