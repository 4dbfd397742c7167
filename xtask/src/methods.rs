//! `cargo xtask methods [--check]`: the table of runtime methods x cores in
//! `docs/methods.md`, produced by measurement.
//!
//! - instructions: the firmware example under QEMU with a deterministic
//!   instruction count (`embedded-example/qemu.sh <core>`, ISR-COST lines);
//! - flash bytes: the panic-free proof builds, one per method
//!   (`PANIC_NEVER=1 embedded-example/qemu.sh <core>`, FLASH lines);
//! - worst errors: exhaustive verification on the host of the code each
//!   core runs (the table in the layout that core's build asks for; the
//!   closed forms, whose arithmetic is the same on both cores) against the
//!   exact model at every code pair of the demo design.
//!
//! Without `--check` the section of `docs/methods.md` between the markers
//! is rewritten; with it, the command fails when the measured table differs
//! from the page's.

use std::collections::BTreeMap;
use std::path::Path;
use std::process::Command;

use host_tool::check::verify::{verify, VerifyReport};
use host_tool::model::design::Design;

const BEGIN: &str = "<!-- methods-table:begin (cargo xtask methods) -->";
const END: &str = "<!-- methods-table:end -->";
const METHODS: [&str; 5] = [
    "table",
    "closed-form-f32",
    "fixed-point",
    "libm-f32",
    "micromath-f32",
];
const CORES: [(&str, &str); 2] = [
    ("cortex-m4f", "thumbv7em-none-eabihf"),
    ("cortex-m0", "thumbv6m-none-eabi"),
];

/// `key=value` fields of the first word-prefixed line kind, per (target, method).
fn fields(out: &str, kind: &str) -> BTreeMap<(String, String), BTreeMap<String, String>> {
    let mut m = BTreeMap::new();
    for line in out.lines() {
        let Some(rest) = line.trim().strip_prefix(kind) else {
            continue;
        };
        let kv: BTreeMap<String, String> = rest
            .split_whitespace()
            .filter_map(|w| w.split_once('='))
            .map(|(k, v)| (k.to_owned(), v.to_owned()))
            .collect();
        if let (Some(t), Some(me)) = (kv.get("target"), kv.get("method")) {
            m.insert((t.clone(), me.clone()), kv.clone());
        }
    }
    m
}

fn run(script: &Path, core: &str, panic_never: bool) -> Result<String, String> {
    let mut c = Command::new("bash");
    c.arg(script).arg(core);
    if panic_never {
        c.env("PANIC_NEVER", "1");
    } else {
        c.env_remove("PANIC_NEVER");
    }
    eprintln!(
        "xtask: running {}{} {core}",
        if panic_never { "PANIC_NEVER=1 " } else { "" },
        script.display()
    );
    let out = c
        .output()
        .map_err(|e| format!("{}: {e}", script.display()))?;
    let text = String::from_utf8_lossy(&out.stdout).into_owned();
    if !out.status.success() {
        return Err(format!(
            "{} {core} failed:\n{text}\n{}",
            script.display(),
            String::from_utf8_lossy(&out.stderr)
        ));
    }
    Ok(text)
}

/// The host proofs: per core for the table, once for the closed forms.
fn proofs(design_path: &Path) -> Result<BTreeMap<(String, String), VerifyReport>, String> {
    let design = Design::load(design_path).map_err(|e| e.to_string())?;
    let cf = design.closed_form().map_err(|e| e.to_string())?;
    let mut out = BTreeMap::new();
    for (core, triple) in CORES {
        let mut d = design.clone();
        d.layout = host_tool::emit::export::firmware_layout(triple);
        let g = host_tool::generate::generate(&d).map_err(|e| e.to_string())?;
        out.insert((core.to_owned(), "table".to_owned()), g.verification);
    }
    let pieces =
        host_tool::generate::pieces::fit_design_pieces(&design).map_err(|e| e.to_string())?;
    let fast = verify(
        &design,
        &pieces.fast_f32().map_err(|e| e.to_string())?,
        None,
    );
    let fixed = verify(
        &design,
        &pieces.fixed_point().map_err(|e| e.to_string())?,
        None,
    );
    let libm = verify(&design, &cf.libm_f32().map_err(|e| e.to_string())?, None);
    let micromath = verify(
        &design,
        &cf.micromath_f32().map_err(|e| e.to_string())?,
        None,
    );
    for (core, _) in CORES {
        for r in [&fast, &fixed, &libm, &micromath] {
            out.insert((core.to_owned(), r.method.to_owned()), r.clone());
        }
    }
    Ok(out)
}

fn table_text(root: &Path) -> Result<String, String> {
    let script = root.join("embedded-example/qemu.sh");
    let design = root.join("tables/winch_aux.toml");
    let mut cost = BTreeMap::new();
    let mut flash = BTreeMap::new();
    let mut run_stats = BTreeMap::new();
    for (core, _) in CORES {
        let text = run(&script, core, false)?;
        cost.extend(fields(&text, "ISR-COST"));
        run_stats.extend(fields(&text, "METHOD-RUN"));
        flash.extend(fields(&run(&script, core, true)?, "FLASH"));
    }
    let proven = proofs(&design)?;
    let get = |m: &BTreeMap<(String, String), BTreeMap<String, String>>,
               core: &str,
               me: &str,
               k: &str| {
        m.get(&(core.to_owned(), me.to_owned()))
            .and_then(|f| f.get(k))
            .cloned()
            .ok_or_else(|| format!("no {k} for {me} on {core} in the firmware output"))
    };
    let mut s = String::new();
    s.push_str("| method | core | instructions per interrupt (min-max) | flash bytes | worst error, ticks | approximation error before rounding, ticks | ZVS pairs outside the window (of them, a tick wide or more) | widest window missed, ticks | outside the robust window |\n");
    s.push_str("|---|---|---|---|---|---|---|---|---|\n");
    for me in METHODS {
        for (core, _) in CORES {
            let p = proven
                .get(&(core.to_owned(), me.to_owned()))
                .ok_or_else(|| format!("no proof for {me} on {core}"))?;
            let early = get(&run_stats, core, me, "early")?;
            let late = get(&run_stats, core, me, "late")?;
            if early != "0" || late != "0" {
                return Err(format!(
                    "{me} on {core} turned on outside the window in the run ({early} early, {late} late)"
                ));
            }
            let widest = p
                .outside_window_max_width_ticks
                .map_or_else(|| "-".to_owned(), |w| format!("{w:.2}"));
            s.push_str(&format!(
                "| `{me}` | {core} | {}-{} | {} | {:.3} | {} | {} of {} ({}) | {widest} | {} of {} |\n",
                get(&cost, core, me, "instructions_min")?,
                get(&cost, core, me, "instructions_max")?,
                get(&flash, core, me, "bytes")?,
                p.max_error_ticks,
                p.max_approximation_error_ticks
                    .map_or_else(|| "(whole-tick entries)".to_owned(), |e| format!("{e:.4}")),
                p.outside_window,
                p.zvs_points,
                p.outside_window_wide,
                p.outside_robust_window,
                p.robust_points,
            ));
        }
    }
    let points = proven.values().next().map_or(0, |p| p.points_checked);
    s.push_str(&format!(
        "\nWorst errors are proven on the host at all {points} code pairs of the demo design \
         against the exact model (the numerical ring over the demo's Coss curve and loop \
         resistance), for the code each core runs (the table in the layout its \
         build asks for: `ratio-volt` on the Cortex-M4F, whose division is one instruction, \
         and `margin` on the Cortex-M0, which has none and trades flash for instructions), \
         and against the design's aim: inside the robust window of its `[tolerance]` table \
         where one a tick wide exists, and the continuous minimax aim elsewhere. The table and \
         the two fast closed forms are fitted to each code pair's interval (every command \
         inside the robust window where one a tick wide exists and inside the nominal window \
         where that is a tick wide), so their pairs outside the window all have windows \
         narrower than a tick. The closed forms do it with pieces: ideal-cell stand-ins, each \
         with its own `kx`, ticks per radian, offset and voltage slope, over runs of the code \
         ratio (the same pieces in f32 and in integers); `libm-f32` is the ideal cell with \
         one constant-capacitance stand-in, the baseline, which does not follow the curve \
         (about 4 ticks near the boundary), and `micromath-f32` the same formula with \
         `micromath`'s `asin` and `sqrt`. Instructions are counted by QEMU over the \
         scenario's 2400 interrupts (`-icount`), flash is text and read-only data added by \
         the method (its own proof build less an empty one). Regenerate with \
         `cargo xtask methods`.\n"
    ));
    Ok(s)
}

/// The page that holds the methods table.
const PAGE: &str = "docs/methods.md";

/// Rewrite (or with `check`, compare) the section of [`PAGE`].
pub fn methods(root: &Path, check: bool) -> Result<(), String> {
    let page_path = root.join(PAGE);
    let page = std::fs::read_to_string(&page_path).map_err(|e| format!("{PAGE}: {e}"))?;
    let (Some(a), Some(b)) = (page.find(BEGIN), page.find(END)) else {
        return Err(format!("{PAGE} lacks the markers `{BEGIN}` and `{END}`"));
    };
    let table = table_text(root)?;
    print!("{table}");
    let fresh = format!("{}{BEGIN}\n{table}{}", &page[..a], &page[b..]);
    if check {
        if fresh != page {
            return Err(format!(
                "{PAGE}'s methods table differs from the measurement above; run `cargo xtask methods` and commit"
            ));
        }
        eprintln!("xtask: {PAGE}'s methods table matches the measurement");
    } else {
        std::fs::write(&page_path, fresh).map_err(|e| format!("{PAGE}: {e}"))?;
        eprintln!("xtask: {PAGE}'s methods table rewritten");
    }
    Ok(())
}
