//! The C99 closed forms (`<name>_closed_form.h`) against timing-core's
//! Rust code, compiled with gcc (`-std=c99 -Wall -Wextra -Werror
//! -pedantic`): bit for bit at every code pair of the demo and of the
//! held-out boost (with a fixed fallback too), a margin of codes around
//! each range included (clamping), and the trim step for step over a long
//! run of captures that visits every branch (learning, the envelope,
//! missing, implausible and noisy captures, freezing and recovery,
//! saturation). The reference is the Rust code itself, whose accuracy the
//! exhaustive proofs of tests/closed_form.rs establish against the exact
//! model; here the claim is identity, so every difference fails.
//!
//! The compiler flags that break the f32 method's bit-exactness are
//! measured too: contraction into fused multiply-adds (`-mfma
//! -ffp-contract=fast`, GCC's default in its gnu modes) changes results at
//! some code pairs, `-ffast-math` is refused by the header, and the
//! optimisation level (`-O0`, `-Os`, `-O3`) changes nothing.

#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)]

use std::path::{Path, PathBuf};
use std::process::Command;

use cross_checks::{repo, require_program};
use host_tool::emit::closed_form_c::closed_form_c_with;
use host_tool::generate::pieces::fit_design_pieces;
use host_tool::model::design::Design;
use timing_core::closed_form::{FastF32, FixedPoint};
use timing_core::trim::{Freeze, Trim, TrimConfig, TrimStatus};
use timing_core::{AdcCode, Ticks};

fn scratch(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("zvs-timing-cf-c-{}-{name}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn gcc_available() -> bool {
    require_program(
        "gcc",
        Command::new("gcc").arg("--version").output().is_ok(),
        "apt-get install gcc",
    )
}

/// Compile `main.c` in `dir` with `flags`; the compiler's result.
fn compile(dir: &Path, flags: &[&str], exe: &str) -> std::process::Output {
    Command::new("gcc")
        .args(flags)
        .arg("-o")
        .arg(dir.join(exe))
        .arg(dir.join("main.c"))
        .output()
        .unwrap()
}

const STRICT: [&str; 6] = [
    "-std=c99",
    "-Wall",
    "-Wextra",
    "-Werror",
    "-pedantic",
    "-O2",
];

/// The held-out boost with a trim of other settings than the demo's.
fn held_out_boost_trim() -> String {
    format!(
        "{}[trim]\ncomparator_delay = \"45n\"\ncomparator_threshold = 3\ngain = 3\nenvelope = \"80n\"\n\
         noise = \"20n\"\nwindow = 32\nmissing_limit = 5\nimplausible_limit = 6\nnoisy_limit = 7\n\
         regions = [4, 8]\n",
        cross_checks::HELD_OUT_BOOST
    )
}

/// The held-out boost with a fixed fallback and its aim further in.
fn held_out_boost_fixed() -> String {
    cross_checks::HELD_OUT_BOOST
        .replace("name = \"held_out_boost\"", "name = \"held_out_fixed\"")
        .replace("position = 0.4", "position = 0.6")
        .replace(
            "max_error_ticks = 1.0",
            "max_error_ticks = 1.0\nfallback = \"fixed\"\nfallback_ticks = 90",
        )
}

/// Every code pair of the range widened by `pad` codes each way (within
/// the ADC), voltage code outermost.
fn pairs(d: &Design, pad: u16) -> (std::ops::RangeInclusive<u16>, std::ops::RangeInclusive<u16>) {
    let max = ((1u32 << d.adc_bits) - 1) as u16;
    let widen = |lo: u16, hi: u16| lo.saturating_sub(pad)..=hi.saturating_add(pad).min(max);
    (
        widen(d.vin_codes.lo, d.vin_codes.hi),
        widen(d.io_codes.lo, d.io_codes.hi),
    )
}

/// The harness for the code pairs: per pair, the f32 method's raw delay
/// (bits) and command, the integer method's raw Q8 delay and command (the
/// ZVS flag in bit 31), and with a trim the region and the predicted
/// crossing for a feed-forward of 200 ticks.
fn code_harness(n: &str, d: &Design, trim: bool) -> String {
    let (v, i) = pairs(d, 8);
    let mut body = format!(
        "      {{ int z; float raw = {n}_cf_f32_raw_ticks(v, i, &z); {n}_cf_lookup_t l = {n}_cf_f32_delay(v, i);\n        \
         memcpy(&rec[0], &raw, 4); rec[1] = l.ticks | ((uint32_t)l.zvs << 31) | ((uint32_t)z << 30); }}\n\
         \x20     {{ int z; int32_t raw = {n}_cf_fixed_raw_q8(v, i, &z); {n}_cf_lookup_t l = {n}_cf_fixed_delay(v, i);\n        \
         rec[2] = (uint32_t)raw; rec[3] = l.ticks | ((uint32_t)l.zvs << 31) | ((uint32_t)z << 30); }}\n"
    );
    if trim {
        body.push_str(&format!(
            "      rec[4] = {n}_trim_region(v, i); rec[5] = {n}_trim_predicted(rec[4], 200u);\n"
        ));
    }
    format!(
        "#include <stdio.h>\n#include <string.h>\n#include \"cf.h\"\n\
         int main(void) {{\n  uint32_t v, i, rec[6];\n  \
         for (v = {}u; v <= {}u; v++) {{\n    for (i = {}u; i <= {}u; i++) {{\n      \
         memset(rec, 0, sizeof rec);\n{body}      \
         if (fwrite(rec, sizeof rec, 1, stdout) != 1) return 1;\n    }}\n  }}\n  return 0;\n}}\n",
        v.start(),
        v.end(),
        i.start(),
        i.end()
    )
}

/// Run `exe` and return its output words.
fn run_words(exe: &Path, stdin: Option<&Path>) -> Vec<u32> {
    let mut cmd = Command::new(exe);
    if let Some(p) = stdin {
        cmd.stdin(std::fs::File::open(p).unwrap());
    }
    let out = cmd.output().unwrap();
    assert!(out.status.success(), "{} failed", exe.display());
    out.stdout
        .chunks_exact(4)
        .map(|c| u32::from_le_bytes([c[0], c[1], c[2], c[3]]))
        .collect()
}

/// Differences between the C records and the Rust methods, by word
/// (f32 raw, f32 command, fixed raw, fixed command, region, predicted),
/// with the first pair that differs in each.
fn compare_codes(
    d: &Design,
    words: &[u32],
    fast: Option<&FastF32<'_>>,
    fixed: Option<&FixedPoint<'_>>,
    trim: Option<(&timing_core::trim::Regions, &[u16])>,
) -> [(u64, Option<(u16, u16)>); 6] {
    let (vr, ir) = pairs(d, 8);
    let mut diff = [(0u64, None); 6];
    let mut recs = words.chunks_exact(6);
    let mut n = 0usize;
    for v in vr {
        for i in ir.clone() {
            let rec = recs
                .next()
                .expect("the harness wrote a record for every pair");
            let (cv, ci) = (AdcCode::new(v), AdcCode::new(i));
            let mut want = [rec[0], rec[1], rec[2], rec[3], rec[4], rec[5]];
            if let Some(m) = fast {
                let (raw, zvs) = m.raw_ticks(cv, ci);
                let l = m.delay(cv, ci);
                want[0] = raw.to_bits();
                want[1] = l.ticks.get() | (u32::from(l.zvs) << 31) | (u32::from(zvs) << 30);
            }
            if let Some(m) = fixed {
                let (raw, zvs) = m.raw_ticks_q8(cv, ci);
                let l = m.delay(cv, ci);
                want[2] = raw as u32;
                want[3] = l.ticks.get() | (u32::from(l.zvs) << 31) | (u32::from(zvs) << 30);
            }
            if let Some((regions, margins)) = trim {
                let r = regions.index(cv, ci);
                want[4] = r as u32;
                want[5] = 200u32.saturating_sub(u32::from(margins.get(r).copied().unwrap_or(0)));
            }
            for k in 0..6 {
                if want[k] != rec[k] {
                    diff[k].0 += 1;
                    diff[k].1.get_or_insert((v, i));
                }
            }
            n += 1;
        }
    }
    assert!(recs.next().is_none(), "{}: more records than pairs", d.name);
    assert!(n > 0);
    diff
}

/// One trim cycle's input, as the C harness reads it.
#[derive(Clone, Copy)]
struct Step {
    region: u32,
    predicted: u32,
    capture: Option<u32>,
    feed_forward: u32,
}

/// A long, deterministic run of cycles that visits every branch: plausible
/// captures around an offset that wanders (learning, the envelope),
/// bursts of missing, implausible and noisy captures (each freezing the
/// trim) with quiet stretches after them (recovery), regions past the
/// slots (masked), and extreme counts (wrap-around and saturation).
fn steps(offset_ticks: u32, count: usize) -> Vec<Step> {
    let mut seed = 0x2545_f491u32;
    let mut next = move || {
        seed ^= seed << 13;
        seed ^= seed >> 17;
        seed ^= seed << 5;
        seed
    };
    let mut out = Vec::with_capacity(count);
    for k in 0..count {
        let phase = (k / 600) % 8;
        let r = next();
        let region = if r % 97 == 0 { r >> 8 } else { r % 40 };
        let predicted = 30 + next() % 200;
        let wander = ((k / 1500) % 7) as u32;
        let quiet = (predicted + offset_ticks + wander + next() % 2).saturating_sub(4);
        let capture = match phase {
            // A burst of lost captures.
            2 if next() % 3 != 0 => None,
            // Edges far from the prediction.
            4 if next() % 2 == 0 => Some(predicted.wrapping_add(next() % 4000)),
            // Ringing: edges a few to twenty ticks off.
            6 if next() % 2 == 0 => Some(quiet + 3 + next() % 18),
            _ => Some(quiet),
        };
        let (predicted, capture) = match next() % 499 {
            0 => (u32::MAX - 3, Some(2)),
            1 => (5, Some(u32::MAX)),
            _ => (predicted, capture),
        };
        let feed_forward = match next() % 331 {
            0 => u32::MAX,
            1 => 0,
            _ => predicted.saturating_add(6 + next() % 10),
        };
        out.push(Step {
            region,
            predicted,
            capture,
            feed_forward,
        });
    }
    out
}

const TRIM_HARNESS_BODY: &str = "  uint32_t in[5], out[5];\n  \
    while (fread(in, sizeof in, 1, stdin) == 1) {\n    \
    NAME_trim_update(&t, in[0], in[1], (int)in[2], in[3]);\n    \
    out[0] = NAME_trim_apply(&t, in[0], in[4], in[1]);\n    \
    out[1] = t.over;\n    out[2] = t.counts;\n    \
    out[3] = (uint32_t)t.region[in[0] & (NAME_UP_TRIM_REGION_SLOTS - 1u)][0];\n    \
    out[4] = (uint32_t)NAME_trim_is_learning(&t);\n    \
    if (fwrite(out, sizeof out, 1, stdout) != 1) return 1;\n  }\n  return 0;\n}\n";

/// The Rust trim over `steps`: per step the command, the frozen state
/// (as the C `over` word's bits), the fault counts, the region's
/// correction (1/256 tick) and whether it learns.
fn rust_trim<const R: usize, const H: usize>(cfg: &TrimConfig, steps: &[Step]) -> Vec<[u32; 5]> {
    let mut t: Trim<R, H> = Trim::new();
    steps
        .iter()
        .map(|s| {
            let region = s.region as usize;
            t.update(
                cfg,
                region,
                Ticks::new(s.predicted),
                s.capture.map(Ticks::new),
            );
            let cmd = t.apply(
                cfg,
                region,
                Ticks::new(s.feed_forward),
                Ticks::new(s.predicted),
            );
            let frozen = match t.status() {
                TrimStatus::Learning => 0,
                TrimStatus::Frozen(Freeze::NoCapture) => 1,
                TrimStatus::Frozen(Freeze::Implausible) => 2,
                TrimStatus::Frozen(_) => 3,
            };
            let [a, b, c] = t.fault_counts();
            let counts = u32::from(a) | u32::from(b) << 8 | u32::from(c) << 16;
            let correction = (t.correction_ticks(region & (R - 1)) * 256.0) as i32;
            [
                cmd.get(),
                frozen,
                counts,
                correction as u32,
                u32::from(t.is_learning()),
            ]
        })
        .collect()
}

/// The C `over` word as the Rust status (the first limit reached, in the
/// order missing, implausible, noisy).
fn c_frozen(over: u32) -> u32 {
    if over == 0 {
        0
    } else if over & (1 << 7) != 0 {
        1
    } else if over & (1 << 15) != 0 {
        2
    } else {
        3
    }
}

/// Compare the C trim with the Rust one over a long run; returns the
/// cycles compared and how many of them were frozen.
fn check_trim(dir: &Path, header_name: &str, design: &Design) -> (usize, usize) {
    let spec = design.trim.as_ref().expect("a design with a [trim]");
    let up = header_name.to_ascii_uppercase();
    let main = format!(
        "#include <stdio.h>\n#include \"cf.h\"\nint main(void) {{\n  static {header_name}_trim_t t;\n  \
         {header_name}_trim_init(&t);\n{}",
        TRIM_HARNESS_BODY
            .replace("NAME_UP", &up)
            .replace("NAME", header_name)
    );
    std::fs::write(dir.join("main.c"), main).unwrap();
    let cc = compile(dir, &STRICT, "trim");
    assert!(
        cc.status.success(),
        "gcc failed:\n{}",
        String::from_utf8_lossy(&cc.stderr)
    );
    let offset = spec.config.integers().comparator_whole.unsigned_abs() + 2;
    let steps = steps(offset, 60_000);
    let mut input = Vec::with_capacity(steps.len() * 20);
    for s in &steps {
        for w in [
            s.region,
            s.predicted,
            u32::from(s.capture.is_some()),
            s.capture.unwrap_or(0),
            s.feed_forward,
        ] {
            input.extend_from_slice(&w.to_le_bytes());
        }
    }
    std::fs::write(dir.join("steps.bin"), input).unwrap();
    let c = run_words(&dir.join("trim"), Some(&dir.join("steps.bin")));
    let slots = spec.regions.count().next_power_of_two();
    let rust = match (slots, spec.window) {
        (128, 64) => rust_trim::<128, 64>(&spec.config, &steps),
        (32, 32) => rust_trim::<32, 32>(&spec.config, &steps),
        (s, w) => panic!("add Trim<{s}, {w}> to this test"),
    };
    assert_eq!(c.len(), rust.len() * 5, "one record a step");
    let mut frozen = 0;
    for (k, (cw, want)) in c.chunks_exact(5).zip(&rust).enumerate() {
        let got = [cw[0], c_frozen(cw[1]), cw[2] & 0x00ff_ffff, cw[3], cw[4]];
        assert_eq!(
            got, *want,
            "{}: C and Rust trims differ at step {k} (command, frozen, counts, correction, learning)",
            design.name
        );
        frozen += usize::from(want[1] != 0);
    }
    // The run visits every branch: each kind of freeze, and corrections
    // learnt both ways.
    for kind in 1..=3 {
        assert!(
            rust.iter().any(|w| w[1] == kind),
            "freeze {kind} never seen"
        );
    }
    assert!(rust.iter().any(|w| (w[3] as i32) > 0) && rust.iter().any(|w| (w[3] as i32) < 0));
    (rust.len(), frozen)
}

#[test]
fn c_closed_forms_and_trim_match_rust_bit_for_bit() {
    if !gcc_available() {
        return;
    }
    let demo = Design::load(&repo().join("tables/winch_aux.toml")).unwrap();
    let designs = [
        demo,
        Design::parse(&held_out_boost_trim(), "held_out_boost.toml").unwrap(),
        Design::parse(&held_out_boost_fixed(), "held_out_fixed.toml").unwrap(),
    ];
    for d in &designs {
        let dir = scratch(&d.name);
        let pieces = fit_design_pieces(d).unwrap();
        let header = closed_form_c_with(d, &pieces, None).unwrap();
        std::fs::write(dir.join("cf.h"), &header).unwrap();
        let fast = pieces.fast_f32().ok();
        let fixed = pieces.fixed_point().ok();
        assert!(
            fast.is_some() && fixed.is_some(),
            "{}: both methods serve the design",
            d.name
        );
        let plan = d.trim.as_ref().map(|t| {
            (
                t,
                host_tool::model::trim_margin::TrimPlan::new(d, t).unwrap(),
            )
        });
        let margins = plan.as_ref().map(|(_, p)| p.margin_whole_ticks());
        let trim = plan
            .as_ref()
            .zip(margins.as_deref())
            .map(|((t, _), m)| (&t.regions, m));
        std::fs::write(dir.join("main.c"), code_harness(&d.name, d, trim.is_some())).unwrap();
        let cc = compile(&dir, &STRICT, "codes");
        assert!(
            cc.status.success(),
            "{}: gcc {} failed:\n{}",
            d.name,
            STRICT.join(" "),
            String::from_utf8_lossy(&cc.stderr)
        );
        let words = run_words(&dir.join("codes"), None);
        let diff = compare_codes(d, &words, fast.as_ref(), fixed.as_ref(), trim);
        let (vr, ir) = pairs(d, 8);
        let n = (vr.len() * ir.len()) as u64;
        println!(
            "{}: C and Rust agree at {n} code pairs (f32 raw, f32 command, fixed raw, fixed command, trim region, prediction): differences {:?}",
            d.name,
            diff.map(|x| x.0)
        );
        for (k, what) in [
            "f32 raw delay",
            "f32 command",
            "fixed raw delay",
            "fixed command",
            "trim region",
            "trim prediction",
        ]
        .iter()
        .enumerate()
        {
            assert_eq!(
                diff[k].0, 0,
                "{}: the C {what} differs from Rust at {} pairs, first at (vin, io) codes {:?}",
                d.name, diff[k].0, diff[k].1
            );
        }
        if d.trim.is_some() {
            let (cycles, frozen) = check_trim(&dir, &d.name, d);
            println!(
                "{}: C and Rust trims agree over {cycles} cycles ({frozen} of them frozen)",
                d.name
            );
            assert!(frozen > 1000 && frozen < cycles - 1000, "{frozen}");
        }
        let _ = std::fs::remove_dir_all(dir);
    }
}

#[test]
fn compiler_flags_that_break_the_f32_method_are_measured() {
    if !gcc_available() {
        return;
    }
    let d = Design::load(&repo().join("tables/winch_aux.toml")).unwrap();
    let dir = scratch("flags");
    let pieces = fit_design_pieces(&d).unwrap();
    let header = closed_form_c_with(&d, &pieces, None).unwrap();
    std::fs::write(dir.join("cf.h"), &header).unwrap();
    std::fs::write(dir.join("main.c"), code_harness(&d.name, &d, false)).unwrap();
    // -ffast-math is refused by the header itself.
    let fast_math = compile(&dir, &["-std=c99", "-O2", "-ffast-math"], "fast_math");
    assert!(!fast_math.status.success());
    assert!(
        String::from_utf8_lossy(&fast_math.stderr).contains("-ffast-math"),
        "{}",
        String::from_utf8_lossy(&fast_math.stderr)
    );
    let fast = pieces.fast_f32().unwrap();
    let fixed = pieces.fixed_point().unwrap();
    // Other optimisation levels change nothing.
    for level in ["-O0", "-Os", "-O3"] {
        let mut flags = STRICT;
        flags[5] = level;
        let cc = compile(&dir, &flags, "level");
        assert!(
            cc.status.success(),
            "{}",
            String::from_utf8_lossy(&cc.stderr)
        );
        let words = run_words(&dir.join("level"), None);
        let diff = compare_codes(&d, &words, Some(&fast), Some(&fixed), None);
        assert_eq!(diff.map(|x| x.0), [0; 6], "{level}");
    }
    // Contraction into fused multiply-adds, where the host has them.
    let cpu = std::fs::read_to_string("/proc/cpuinfo").unwrap_or_default();
    if !cpu.split_whitespace().any(|f| f == "fma") {
        eprintln!("NOT CHECKED: this CPU has no fused multiply-add; the -ffp-contract=fast figure was not measured");
        return;
    }
    let fma = compile(
        &dir,
        &["-std=gnu99", "-O2", "-mfma", "-ffp-contract=fast"],
        "fma",
    );
    assert!(
        fma.status.success(),
        "{}",
        String::from_utf8_lossy(&fma.stderr)
    );
    let words = run_words(&dir.join("fma"), None);
    let diff = compare_codes(&d, &words, Some(&fast), Some(&fixed), None);
    let (vr, ir) = pairs(&d, 8);
    println!(
        "{}: compiled with -std=gnu99 -O2 -mfma -ffp-contract=fast: the f32 raw delay differs at {} of {} pairs and the command at {}; the integer method at {} and {}",
        d.name,
        diff[0].0,
        vr.len() * ir.len(),
        diff[1].0,
        diff[2].0,
        diff[3].0
    );
    // Contraction changes the f32 rounding; the integers cannot change.
    assert!(
        diff[0].0 > 0,
        "fused multiply-adds left every f32 result alone"
    );
    assert_eq!((diff[2].0, diff[3].0), (0, 0));
    let _ = std::fs::remove_dir_all(dir);
}
