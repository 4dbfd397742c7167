//! The C99 header of a generated table: the entries as `const` data and a
//! `static inline` lookup in unsigned integer arithmetic, line for line the
//! lookup of timing-core's `DelayTable` (bit-exact with it; tested with
//! gcc at every code pair), with no floating point and, for the layouts
//! that need none, no division.

use std::fmt::Write as _;

use timing_core::table::{Fallback, Layout};

use crate::check::verify::VerifyReport;
use crate::emit::summary::summary_lines;
use crate::generate::generated::Generated;
use crate::model::design::Design;

/// C99 header: the table and `static inline uint16_t <name>_delay_ticks(uint16_t vin_code,
/// uint16_t io_code)`, bit-exact with timing-core's lookup; no floating point.
#[must_use]
pub fn c_header(design: &Design, g: &Generated, v: &VerifyReport) -> String {
    let n = &design.name;
    let up = n.to_ascii_uppercase();
    let sn = &g.sensing;
    let mut s = summary_lines(design, g, v, "//");
    let _ = writeln!(
        s,
        "#ifndef {up}_DELAY_TABLE_H\n#define {up}_DELAY_TABLE_H\n\n#include <stdint.h>\n"
    );
    let _ = writeln!(s, "#define {up}_DESIGN_HASH {:#010x}u", design.hash);
    let _ = writeln!(s, "#define {up}_TABLE_BYTES {}u\n", g.table_bytes());
    let _ = write!(
        s,
        "static const uint16_t {n}_entries[{}] = {{",
        g.entries.len()
    );
    crate::emit::summary::push_entries(&mut s, &g.entries, "u");
    s.push_str("\n};\n\n");
    if let Layout::LogUniform(_) | Layout::LogVolt(_) = g.layout {
        let _ = write!(s, "/* round(2^15 * log2(1 + k/64)), k = 0..64 */\nstatic const uint16_t {n}_log2_table_[65] = {{");
        for (k, e) in timing_core::table::log2::LOG2_Q15.iter().enumerate() {
            if k % 13 == 0 {
                s.push_str("\n   ");
            }
            let _ = write!(s, " {e}u,");
        }
        s.push_str("\n};\n\n");
        let _ = writeln!(
            s,
            "/* log2(c) in Q15, as timing-core's log2_q15 (0 for 0). */"
        );
        let _ = writeln!(s, "static inline uint32_t {n}_log2_q15_(uint32_t c) {{");
        let _ = writeln!(s, "    if (c == 0u) return 0u;");
        c_floor_log2(&mut s, "c");
        let _ = writeln!(s, "    uint32_t f = ((c << (31u - e)) >> 15) & 0xffffu;");
        let _ = writeln!(s, "    uint32_t k = f >> 10, r = f & 0x3ffu;");
        let _ = writeln!(
            s,
            "    uint32_t a = {n}_log2_table_[k], b = {n}_log2_table_[k + 1u];"
        );
        let _ = writeln!(
            s,
            "    return (e << 15) + a + (((b - a) * r + 512u) >> 10);\n}}\n"
        );
    }
    c_clamp_fn(&mut s, n);
    let _ = writeln!(
        s,
        "/* 1 when the point can reach ZVS (J >= 1), else 0 (fallback region). */"
    );
    let _ = writeln!(
        s,
        "static inline int {n}_zvs(uint16_t vin_code, uint16_t io_code) {{"
    );
    let _ = writeln!(
        s,
        "    uint32_t v = {n}_clamp_(vin_code, {}u, {}u);",
        sn.vin.lo, sn.vin.hi
    );
    let _ = writeln!(
        s,
        "    uint32_t i = {n}_clamp_(io_code, {}u, {}u) - {}u;",
        sn.io.lo, sn.io.hi, sn.io_zero
    );
    let _ = writeln!(
        s,
        "    return i * {}u >= v * {}u;\n}}\n",
        sn.zvs_io_mul, sn.zvs_vin_mul
    );
    let _ = writeln!(
        s,
        "/* Commanded turn-on delay in timer ticks from the turn-off command. */"
    );
    let _ = writeln!(
        s,
        "static inline uint16_t {n}_delay_ticks(uint16_t vin_code, uint16_t io_code) {{"
    );
    let _ = writeln!(
        s,
        "    uint32_t v = {n}_clamp_(vin_code, {}u, {}u);",
        sn.vin.lo, sn.vin.hi
    );
    let _ = writeln!(
        s,
        "    uint32_t i = {n}_clamp_(io_code, {}u, {}u) - {}u;",
        sn.io.lo, sn.io.hi, sn.io_zero
    );
    if let Fallback::Fixed(t) = g.fallback {
        let _ = writeln!(
            s,
            "    if (!(i * {}u >= v * {}u)) return (uint16_t){}u;",
            sn.zvs_io_mul,
            sn.zvs_vin_mul,
            t.get()
        );
    }
    let f = u32::from(g.frac_bits);
    match g.layout {
        Layout::Ratio(r) => {
            let _ = writeln!(s, "    uint32_t q = (v << {}u) / i;", r.ratio_shift);
            c_uniform_tail(&mut s, n, "q", r.q_lo, r.step_shift, r.nodes, f);
        }
        Layout::RecipRatio(r) => {
            let _ = writeln!(
                s,
                "    /* Reciprocal of the current code from the table's tail (no division). */"
            );
            let _ = writeln!(
                s,
                "    uint32_t q = (v * (uint32_t){n}_entries[{}u + i + {}u - {}u]) >> {}u;",
                r.nodes, sn.io_zero, sn.io.lo, r.post_shift
            );
            c_uniform_tail(&mut s, n, "q", r.q_lo, r.step_shift, r.nodes, f);
        }
        Layout::LogRatio(r) => {
            let m = u32::from(r.mant_bits);
            let _ = writeln!(s, "    uint32_t q = (v << {}u) / i;", r.ratio_shift);
            let _ = writeln!(
                s,
                "    /* Octave e = floor(log2(q)), portable C99 (no compiler builtins). */"
            );
            c_floor_log2(&mut s, "q");
            let _ = writeln!(s, "    uint32_t k, frac, sh;");
            let _ = writeln!(
                s,
                "    if (q == 0u || e < {}u) {{ k = 0u; frac = 0u; sh = {}u; }} else {{",
                r.e_lo,
                u32::from(r.e_lo) - m
            );
            let _ = writeln!(s, "        sh = e - {m}u;");
            let _ = writeln!(
                s,
                "        k = ((e - {}u) << {m}u) + ((q >> sh) - {}u);",
                r.e_lo,
                1u32 << m
            );
            let _ = writeln!(s, "        frac = q & ((1u << sh) - 1u);");
            let _ = writeln!(s, "    }}");
            let _ = writeln!(s, "    uint32_t one = 1u << sh;");
            let _ = writeln!(
                s,
                "    if (k > {}u) {{ k = {}u; frac = one; }}",
                r.nodes - 2,
                r.nodes - 2
            );
            let _ = writeln!(
                s,
                "    uint32_t y = (uint32_t){n}_entries[k] * (one - frac) + (uint32_t){n}_entries[k + 1u] * frac;"
            );
            let _ = writeln!(s, "    uint32_t total = sh + {f}u;");
            let _ = writeln!(
                s,
                "    return (uint16_t)((y + ((1u << total) >> 1)) >> total);"
            );
        }
        Layout::LogUniform(r) => {
            let _ = writeln!(
                s,
                "    uint32_t l = {n}_log2_q15_(v) + {}u - {n}_log2_q15_(i);",
                timing_core::table::LOG_OFFSET
            );
            c_uniform_tail(&mut s, n, "l", r.lambda_lo, r.step_shift, r.nodes, f);
        }
        Layout::Grid(gr) => {
            let (vs, is) = (u32::from(gr.vin_shift), u32::from(gr.io_shift));
            let _ = writeln!(
                s,
                "    uint32_t dv = v - {}u, di = i + {}u - {}u;",
                sn.vin.lo, sn.io_zero, sn.io.lo
            );
            let _ = writeln!(
                s,
                "    uint32_t r = dv >> {vs}u, fr = dv & {}u;",
                (1u32 << vs) - 1
            );
            let _ = writeln!(
                s,
                "    uint32_t c = di >> {is}u, fc = di & {}u;",
                (1u32 << is) - 1
            );
            let _ = writeln!(
                s,
                "    if (r > {}u) {{ r = {}u; fr = {}u; }}",
                gr.rows - 2,
                gr.rows - 2,
                1u32 << vs
            );
            let _ = writeln!(
                s,
                "    if (c > {}u) {{ c = {}u; fc = {}u; }}",
                gr.cols - 2,
                gr.cols - 2,
                1u32 << is
            );
            let _ = writeln!(s, "    uint32_t b = r * {}u + c;", gr.cols);
            let _ = writeln!(s, "    uint32_t wc = {}u - fc;", 1u32 << is);
            let _ = writeln!(
                s,
                "    uint32_t top = (uint32_t){n}_entries[b] * wc + (uint32_t){n}_entries[b + 1u] * fc;"
            );
            let _ = writeln!(
                s,
                "    uint32_t bot = (uint32_t){n}_entries[b + {c}u] * wc + (uint32_t){n}_entries[b + {c1}u] * fc;",
                c = gr.cols,
                c1 = u32::from(gr.cols) + 1
            );
            let _ = writeln!(
                s,
                "    uint32_t y = top * ({}u - fr) + bot * fr;",
                1u32 << vs
            );
            let total = vs + is + f;
            let half = (1u32 << total) >> 1;
            let _ = writeln!(s, "    return (uint16_t)((y + {half}u) >> {total}u);");
        }
        Layout::LogVolt(gr) => {
            let (st, vs) = (u32::from(gr.step_shift), u32::from(gr.vin_shift));
            let _ = writeln!(
                s,
                "    uint32_t l = {n}_log2_q15_(v) + {}u - {n}_log2_q15_(i);",
                timing_core::table::LOG_OFFSET
            );
            let _ = writeln!(
                s,
                "    uint32_t d = l > {lo}u ? l - {lo}u : 0u;",
                lo = gr.lambda_lo
            );
            c_rows_then_volts(&mut s, n, sn.vin.lo, (st, gr.cols), (vs, gr.rows), f);
        }
        Layout::RatioVolt(gr) => {
            let _ = writeln!(s, "    uint32_t q = (v << {}u) / i;", gr.ratio_shift);
            let _ = writeln!(
                s,
                "    uint32_t d = q > {lo}u ? q - {lo}u : 0u;",
                lo = gr.q_lo
            );
            c_rows_then_volts(
                &mut s,
                n,
                sn.vin.lo,
                (u32::from(gr.step_shift), gr.cols),
                (u32::from(gr.vin_shift), gr.rows),
                f,
            );
        }
        Layout::Margin(gr) => {
            // The wrapping arithmetic of timing-core's MarginLayout::margin
            // (exact over the range of a validated table).
            let _ = writeln!(
                s,
                "    uint32_t d = i * {}u + {}u - v * (uint32_t)({}L);",
                gr.io_mul, gr.offset, gr.vin_mul
            );
            c_rows_then_volts(
                &mut s,
                n,
                sn.vin.lo,
                (u32::from(gr.step_shift), gr.cols),
                (u32::from(gr.vin_shift), gr.rows),
                f,
            );
        }
    }
    let _ = writeln!(s, "}}\n\n#endif /* {up}_DELAY_TABLE_H */");
    s
}

/// C for `<n>_clamp_(c, lo, hi)`: a code moved to the nearest end of a
/// range.
pub(super) fn c_clamp_fn(s: &mut String, n: &str) {
    let _ = writeln!(s, "/* Clamp a code to the design range. */");
    let _ = writeln!(
        s,
        "static inline uint32_t {n}_clamp_(uint16_t c, uint16_t lo, uint16_t hi) {{"
    );
    let _ = writeln!(
        s,
        "    return (uint32_t)(c < lo ? lo : (c > hi ? hi : c));\n}}\n"
    );
}

/// C for the tail of the 2-D row layouts (log-volt and margin), from the
/// column coordinate `d` (`(shift, nodes)` of the columns and of the
/// rows): along `d` in the two rows around the voltage, each rounded to
/// entry units, then between the rows, as timing-core's lookup.
pub(super) fn c_rows_then_volts(
    s: &mut String,
    n: &str,
    vin_lo: u16,
    (st, cols): (u32, u16),
    (vs, rows): (u32, u16),
    f: u32,
) {
    c_cell_index(s, ("k", "fl"), "d", st, cols);
    let _ = writeln!(s, "    uint32_t dv = v - {vin_lo}u;");
    c_cell_index(s, ("r", "fr"), "dv", vs, rows);
    let _ = writeln!(s, "    uint32_t b = r * {cols}u + k;");
    let _ = writeln!(
        s,
        "    /* Along the columns in the two rows, each rounded to entry units. */"
    );
    let (one, h) = (1u32 << st, (1u32 << st) >> 1);
    for (y, at) in [("y0", 0u32), ("y1", u32::from(cols))] {
        let _ = writeln!(
            s,
            "    uint32_t {y} = ((uint32_t){n}_entries[b + {at}u] * ({one}u - fl) + (uint32_t){n}_entries[b + {at1}u] * fl + {h}u) >> {st}u;",
            at1 = at + 1
        );
    }
    let _ = writeln!(s, "    uint32_t y = y0 * ({}u - fr) + y1 * fr;", 1u32 << vs);
    let total = vs + f;
    let half = (1u32 << total) >> 1;
    let _ = writeln!(s, "    return (uint16_t)((y + {half}u) >> {total}u);");
}

/// C for `uint32_t e = floor(log2(var))` by the five-step binary search of
/// timing-core's `floor_log2` (portable C99, no compiler builtins).
pub(super) fn c_floor_log2(s: &mut String, var: &str) {
    let _ = writeln!(s, "    uint32_t e = 0u, t = {var};");
    for (limit, shift) in [(65536u32, 16u32), (256, 8), (16, 4), (4, 2)] {
        let _ = writeln!(
            s,
            "    if (t >= {limit}u) {{ t >>= {shift}; e += {shift}u; }}"
        );
    }
    let _ = writeln!(s, "    if (t >= 2u) {{ e += 1u; }}");
}

/// C for interpolation on uniform nodes, as timing-core's `uniform`: index
/// variable `var`, node 0 at `lo`, nodes `2^step` apart, `f` fractional bits.
pub(super) fn c_uniform_tail(
    s: &mut String,
    n: &str,
    var: &str,
    lo: u32,
    step: u8,
    nodes: u16,
    f: u32,
) {
    let st = u32::from(step);
    let _ = writeln!(s, "    uint32_t d = {var} > {lo}u ? {var} - {lo}u : 0u;");
    let _ = writeln!(
        s,
        "    uint32_t k = d >> {st}u, frac = d & {}u;",
        (1u32 << st) - 1
    );
    let _ = writeln!(
        s,
        "    if (k > {0}u) {{ k = {0}u; frac = {1}u; }}",
        nodes - 2,
        1u32 << st
    );
    let _ = writeln!(
        s,
        "    uint32_t y = (uint32_t){n}_entries[k] * ({}u - frac) + (uint32_t){n}_entries[k + 1u] * frac;",
        1u32 << st
    );
    let total = st + f;
    let half = (1u32 << total) >> 1;
    let _ = writeln!(s, "    return (uint16_t)((y + {half}u) >> {total}u);");
}

/// C lines that split the offset `d` (nodes `2^shift` apart, `nodes` of
/// them) into the cell index and the fraction named by `names`, the last
/// cell taking everything beyond it with a full fraction (as timing-core's
/// lookup clamps).
pub(super) fn c_cell_index(s: &mut String, names: (&str, &str), d: &str, shift: u32, nodes: u16) {
    let (k, f) = names;
    let _ = writeln!(
        s,
        "    uint32_t {k} = {d} >> {shift}u, {f} = {d} & {}u;",
        (1u32 << shift) - 1
    );
    let _ = writeln!(
        s,
        "    if ({k} > {last}u) {{ {k} = {last}u; {f} = {one}u; }}",
        last = nodes - 2,
        one = 1u32 << shift
    );
}
