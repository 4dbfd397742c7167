//! Rust source for firmware that evaluates the delay in closed form instead
//! of (or beside) a table: the validated coefficients of timing-core's
//! three closed-form methods as `const` items (f32 values written as exact
//! bit patterns), with each method's exhaustive verification in the header.

use std::fmt::Write as _;

use timing_core::closed_form::{Band, F32Parts, FixedPointParts, Piece, PiecewiseParts};
use timing_core::table::Fallback;
use timing_core::CodeRange;

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

fn piece(p: &Piece) -> String {
    format!(
        "    Piece {{\n        y_end: {},\n        kx: {},\n        ticks_per_rad: {},\n        offset_ticks: {},\n        ticks_per_vin_code: {},\n    }},",
        f32_lit(p.y_end),
        f32_lit(p.kx),
        f32_lit(p.ticks_per_rad),
        f32_lit(p.offset_ticks),
        f32_lit(p.ticks_per_vin_code),
    )
}

fn band(b: &Band) -> String {
    format!(
        "    Band {{\n        first: {},\n        zvs_y: {},\n        zvs_y_per_code: {},\n    }},",
        b.first,
        f32_lit(b.zvs_y),
        f32_lit(b.zvs_y_per_code),
    )
}

/// The pieces, the bands and the parts that borrow them, as `const` items.
fn piecewise_items(p: &PiecewiseParts<'_>) -> String {
    let mut s = String::new();
    let _ = writeln!(
        s,
        "/// The f32 method's pieces: ideal-cell stand-ins fitted to the exact model, band after band.\npub const PIECES: [Piece; {}] = [",
        p.pieces.len()
    );
    for q in p.pieces {
        let _ = writeln!(s, "{}", piece(q));
    }
    let _ = writeln!(
        s,
        "];\n\n/// The f32 method's voltage bands ({} codes each) and their ZVS tests.\npub const BANDS: [Band; {}] = [",
        1u32 << p.band_shift,
        p.bands.len()
    );
    for b in p.bands {
        let _ = writeln!(s, "{}", band(b));
    }
    let _ = writeln!(
        s,
        "];\n\n/// Coefficients of the fast f32 method.\npub const PIECEWISE_PARTS: PiecewiseParts<'static> = PiecewiseParts {{\n    vin: {},\n    io: {},\n    io_zero: {},\n    band_shift: {},\n    bands: &BANDS,\n    pieces: &PIECES,\n    position: {},\n    max_ticks: {},\n    fallback: {},\n}};\n",
        range(p.vin),
        range(p.io),
        p.io_zero,
        p.band_shift,
        f32_lit(p.position),
        p.max_ticks,
        fallback(p.fallback)
    );
    s
}

fn fixed_parts(p: &FixedPointParts) -> String {
    format!(
        "FixedPointParts {{\n    vin: {},\n    io: {},\n    io_zero: {},\n    k_mant: {},\n    k_shift: {},\n    t_mant: {},\n    t_shift: {},\n    position_q15: {},\n    lead_q8: {},\n    max_ticks: {},\n    fallback: {},\n}}",
        range(p.vin),
        range(p.io),
        p.io_zero,
        p.k_mant,
        p.k_shift,
        p.t_mant,
        p.t_shift,
        p.position_q15,
        p.lead_q8,
        p.max_ticks,
        fallback(p.fallback)
    )
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
    let fixed = cf.fixed_point();
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
    // One pass over the code pairs for all three methods.
    let named: [(&str, Result<&dyn DelayMethod, &timing_core::Error>); 3] = [
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
    let mut reports = if missing.is_empty() {
        Vec::new()
    } else {
        verify_all(design, &missing, None)
    }
    .into_iter();
    for (name, m) in &named {
        match m {
            Ok(_) => {
                if let Some(r) = known(name) {
                    proof_line(&mut s, r);
                } else if let Some(r) = reports.next() {
                    proof_line(&mut s, &r);
                }
            }
            Err(e) => {
                let _ = writeln!(s, "// {name}: not available for this design: {e}");
            }
        }
    }
    let _ = writeln!(
        s,
        "// CAUTION: verify every delay at reduced voltage with a scope before full-voltage operation."
    );
    let _ = writeln!(
        s,
        "#[allow(unused_imports)]\nuse timing_core::closed_form::{{Band, F32Parts, FastF32, FixedPoint, FixedPointParts, LibmF32, Piece, PiecewiseParts}};\n#[allow(unused_imports)]\nuse timing_core::table::Fallback;\n#[allow(unused_imports)]\nuse timing_core::{{CodeRange, Ticks}};\n"
    );
    if let Ok(m) = &fast {
        s.push_str(&piecewise_items(m.parts()));
    }
    if let Ok(m) = &libm {
        let _ = writeln!(
            s,
            "/// Coefficients of the libm f32 baseline (the ideal cell's stand-in).\npub const F32_PARTS: {};\n",
            f32_parts(m.parts()).replacen("F32Parts {", "F32Parts = F32Parts {", 1)
        );
    }
    if let Ok(m) = &fixed {
        let _ = writeln!(
            s,
            "/// Coefficients of the integer method.\npub const FIXED_POINT_PARTS: {};\n",
            fixed_parts(m.parts()).replacen(
                "FixedPointParts {",
                "FixedPointParts = FixedPointParts {",
                1
            )
        );
    }
    for (ok, name, ty, parts) in [
        (
            fast.is_ok(),
            "FAST_F32",
            "FastF32<'static>",
            "PIECEWISE_PARTS",
        ),
        (
            fixed.is_ok(),
            "FIXED_POINT",
            "FixedPoint",
            "FIXED_POINT_PARTS",
        ),
        (libm.is_ok(), "LIBM_F32", "LibmF32", "F32_PARTS"),
    ] {
        if !ok {
            continue;
        }
        let _ = writeln!(
            s,
            "/// The validated method (validated at compile time).\npub const {name}: {ty} = match {ty}::from_parts({parts}) {{\n    Ok(m) => m,\n    Err(_) => panic!(\"generated coefficients of `{}` fail timing-core's validation\"),\n}};\n",
            design.name
        );
    }
    Ok(s)
}
