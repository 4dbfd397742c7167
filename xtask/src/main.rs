//! `cargo xtask <chore>`:
//!
//! - `thumb`: check timing-core for thumbv6m-none-eabi (Cortex-M0) and
//!   thumbv7em-none-eabihf (Cortex-M4F) with no features, each feature, and
//!   all features (`cargo check`: type and borrow checking, lints and
//!   const evaluation for the target; code generation and linking are
//!   exercised by the firmware example's builds for both cores in
//!   `methods`). Uses the rustup toolchain when it has the targets
//!   installed; otherwise Debian's `rustc-web`/`rust-web-src` route with
//!   `-Z build-std=core` (DESIGN.md section 5).
//! - `methods [--check]`: measure every runtime method on both cores (QEMU
//!   instruction counts, proof-build flash bytes, host proofs of the worst
//!   error) and rewrite the table of them in `docs/methods.md`, or check it.
//! - `demo-captures`: simulate the demo's bring-up captures in
//!   `tables/bringup/` (needs ngspice).
//! - `fuzz [--seconds N] [target...]`: run the fuzz targets of `fuzz/`
//!   under libFuzzer, N seconds each (default 15, the four in 60 s); fails
//!   on any crash (docs/fuzzing.md).

mod captures;
mod fuzz;
mod methods;

use std::path::Path;
use std::process::{Command, ExitCode};

const TARGETS: [&str; 2] = ["thumbv6m-none-eabi", "thumbv7em-none-eabihf"];
const FEATURE_SETS: [&[&str]; 6] = [
    &[],
    &["--features", "defmt"],
    &["--features", "serde"],
    &["--features", "blob"],
    &["--features", "micromath"],
    &["--all-features"],
];

fn rustup_has(target: &str) -> bool {
    Command::new("rustup")
        .args(["target", "list", "--installed"])
        .output()
        .is_ok_and(|o| {
            String::from_utf8_lossy(&o.stdout)
                .lines()
                .any(|l| l.trim() == target)
        })
}

fn thumb() -> Result<(), String> {
    let debian = Path::new("/usr/bin/rustc").exists() && Path::new("/usr/bin/cargo").exists();
    // Targets grouped by toolchain: one cargo invocation a feature set
    // checks every target of a toolchain, side by side on the cores.
    let (rustup, rest): (Vec<&str>, Vec<&str>) = TARGETS.iter().partition(|t| rustup_has(t));
    if !rest.is_empty() && !debian {
        return Err(format!(
            "no toolchain for {}: run `rustup target add ...` or, on Debian, \
             `apt-get install rustc-web cargo-web rust-web-src`",
            rest.join(" and ")
        ));
    }
    for (targets, route) in [(rustup, "rustup"), (rest, "debian")] {
        if targets.is_empty() {
            continue;
        }
        let base = || {
            if route == "rustup" {
                let mut c = Command::new(std::env::var("CARGO").unwrap_or_else(|_| "cargo".into()));
                c.args(["check", "--target-dir", "target/thumb-rustup"]);
                c
            } else {
                let mut c = Command::new("/usr/bin/cargo");
                c.env("RUSTC", "/usr/bin/rustc")
                    .env("RUSTC_BOOTSTRAP", "1")
                    .env_remove("RUSTUP_TOOLCHAIN")
                    .args([
                        "check",
                        "-Z",
                        "build-std=core",
                        "--target-dir",
                        "target/thumb",
                    ]);
                c
            }
        };
        for features in FEATURE_SETS {
            let mut c = base();
            c.args(["--quiet", "-p", "timing-core"]);
            for t in &targets {
                c.args(["--target", t]);
            }
            c.args(features);
            let shown = format!(
                "timing-core for {} {}",
                targets.join(" and "),
                features.join(" ")
            );
            eprintln!("xtask: checking {shown}");
            let status = c.status().map_err(|e| format!("{shown}: {e}"))?;
            if !status.success() {
                return Err(format!("{shown} failed ({status})"));
            }
        }
    }
    eprintln!(
        "xtask: timing-core checks on {} with every feature set",
        TARGETS.join(" and ")
    );
    Ok(())
}

fn main() -> ExitCode {
    let chore = std::env::args().nth(1).unwrap_or_default();
    let result = match chore.as_str() {
        "thumb" => thumb(),
        "methods" => {
            let check = std::env::args().nth(2).is_some_and(|a| a == "--check");
            let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("..");
            methods::methods(&root, check)
        }
        "demo-captures" => {
            captures::demo_captures(&Path::new(env!("CARGO_MANIFEST_DIR")).join(".."))
        }
        "fuzz" => fuzz::fuzz(
            &Path::new(env!("CARGO_MANIFEST_DIR")).join(".."),
            &std::env::args().skip(2).collect::<Vec<_>>(),
        ),
        _ => Err(format!(
            "unknown chore `{chore}`; chores: thumb, methods [--check], demo-captures, \
             fuzz [--seconds N] [target...]"
        )),
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("xtask: error: {e}");
            ExitCode::FAILURE
        }
    }
}
