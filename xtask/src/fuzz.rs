//! `cargo xtask fuzz [--seconds N] [target...]`: the fuzz harnesses of
//! `fuzz/` (docs/fuzzing.md) under libFuzzer, through cargo-fuzz (installed
//! with `cargo install --locked cargo-fuzz` when missing) on the stable
//! toolchain with `RUSTC_BOOTSTRAP=1`. Builds the targets (no sanitizer,
//! debug assertions on, so an arithmetic overflow panics), then runs each
//! for N seconds (default 15: the four in 60 s) from its seed corpus
//! `fuzz/corpus/<target>/`, writing what it adds to `fuzz/work/<target>/`
//! and its log to `fuzz/work/<target>.log` (both ignored by git). Fails on
//! the first crash, panic or timeout, with the log's end and the input
//! that libFuzzer wrote to `fuzz/artifacts/<target>/`.

use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::Instant;

/// Every fuzz target, in the order they run.
pub const TARGETS: [&str; 4] = ["blob_open", "design_file", "coss_csv", "units"];

/// Seconds per target by default: all four in 60 s.
const DEFAULT_SECONDS: u64 = 15;

/// A single input taking longer than this, seconds, fails the run.
const TIMEOUT_S: u64 = 30;

/// Build flags shared by `cargo fuzz build` and `cargo fuzz run` (the same
/// flags, so the run reuses the build): no sanitizer (the project's code
/// forbids `unsafe`), debug assertions.
const BUILD_FLAGS: [&str; 3] = ["--sanitizer", "none", "--debug-assertions"];

/// What one target's run did.
struct Ran {
    target: &'static str,
    runs: u64,
    seconds: f64,
    corpus: String,
}

/// `cargo` of the toolchain that runs xtask, with that toolchain's folder
/// first in `PATH` (cargo-fuzz calls `cargo` and `rustc` by name) and
/// `RUSTC_BOOTSTRAP=1` (libFuzzer's flags are unstable).
fn cargo(root: &Path) -> Command {
    let cargo = PathBuf::from(std::env::var("CARGO").unwrap_or_else(|_| "cargo".into()));
    let mut c = Command::new(&cargo);
    if let Some(dir) = cargo.parent().filter(|d| !d.as_os_str().is_empty()) {
        let path = std::env::var_os("PATH").unwrap_or_default();
        let mut dirs = vec![dir.to_path_buf()];
        dirs.extend(std::env::split_paths(&path));
        if let Ok(joined) = std::env::join_paths(dirs) {
            c.env("PATH", joined);
        }
    }
    c.env("RUSTC_BOOTSTRAP", "1").current_dir(root);
    c
}

fn run(mut c: Command, shown: &str) -> Result<(), String> {
    let status = c.status().map_err(|e| format!("{shown}: {e}"))?;
    if status.success() {
        Ok(())
    } else {
        Err(format!("{shown} failed ({status})"))
    }
}

/// `--seconds N` and target names.
fn parse_args(args: &[String]) -> Result<(u64, Vec<&'static str>), String> {
    let mut seconds = DEFAULT_SECONDS;
    let mut targets = Vec::new();
    let mut it = args.iter();
    while let Some(a) = it.next() {
        let value = if a == "--seconds" {
            Some(it.next().ok_or("--seconds needs a number")?.as_str())
        } else {
            a.strip_prefix("--seconds=")
        };
        if let Some(v) = value {
            seconds = v.parse().ok().filter(|&s| s > 0).ok_or_else(|| {
                format!("--seconds `{v}`: give a whole number of seconds, at least 1")
            })?;
        } else if let Some(&t) = TARGETS.iter().find(|&&t| t == a) {
            if !targets.contains(&t) {
                targets.push(t);
            }
        } else {
            return Err(format!(
                "fuzz: unknown argument `{a}`; usage: cargo xtask fuzz [--seconds N] [{}]",
                TARGETS.join("|")
            ));
        }
    }
    if targets.is_empty() {
        targets = TARGETS.to_vec();
    }
    Ok((seconds, targets))
}

/// Install cargo-fuzz when `cargo fuzz` is missing.
fn ensure_cargo_fuzz(root: &Path) -> Result<(), String> {
    let mut probe = cargo(root);
    probe
        .args(["fuzz", "--version"])
        .stdout(Stdio::null())
        .stderr(Stdio::null());
    if probe.status().is_ok_and(|s| s.success()) {
        return Ok(());
    }
    eprintln!("xtask: installing cargo-fuzz (cargo install --locked cargo-fuzz)");
    let mut c = cargo(root);
    c.args(["install", "--locked", "cargo-fuzz"]);
    run(c, "cargo install --locked cargo-fuzz")
}

/// The value after `key` on `line` (up to the next space).
fn field<'a>(line: &'a str, key: &str) -> Option<&'a str> {
    let at = line.find(key)? + key.len();
    line[at..].split_whitespace().next()
}

/// Run one target; its log is `fuzz/work/<target>.log`.
fn fuzz_one(root: &Path, target: &'static str, seconds: u64) -> Result<Ran, String> {
    let work = root.join("fuzz/work");
    let grown = work.join(target);
    std::fs::create_dir_all(&grown).map_err(|e| format!("{}: {e}", grown.display()))?;
    let log_path = work.join(format!("{target}.log"));
    let log_shown = format!("fuzz/work/{target}.log");
    let log =
        std::fs::File::create(&log_path).map_err(|e| format!("{}: {e}", log_path.display()))?;
    let log_err = log
        .try_clone()
        .map_err(|e| format!("{}: {e}", log_path.display()))?;
    let mut c = cargo(root);
    c.args(["fuzz", "run"])
        .args(BUILD_FLAGS)
        .arg(target)
        // New inputs go to the first folder; the seeds are read from the second.
        .arg(format!("fuzz/work/{target}"))
        .arg(format!("fuzz/corpus/{target}"))
        .arg("--")
        .arg(format!("-max_total_time={seconds}"))
        .arg(format!("-timeout={TIMEOUT_S}"))
        .stdout(log)
        .stderr(log_err);
    let started = Instant::now();
    let status = c
        .status()
        .map_err(|e| format!("cargo fuzz run {target}: {e}"))?;
    let elapsed = started.elapsed().as_secs_f64();
    let text = std::fs::read_to_string(&log_path).unwrap_or_default();
    if !status.success() {
        let lines: Vec<&str> = text.lines().collect();
        let tail = lines[lines.len().saturating_sub(60)..].join("\n");
        eprintln!("{tail}");
        return Err(format!(
            "fuzz target {target} failed ({status}) after {elapsed:.0} s: the input is in \
             fuzz/artifacts/{target}/, the log in {log_shown}"
        ));
    }
    // libFuzzer's closing lines: `#N DONE cov: .. corp: files/size ..` and
    // `Done N runs in S second(s)`.
    let runs = text
        .lines()
        .rev()
        .find_map(|l| {
            l.strip_prefix("Done ")?
                .split_whitespace()
                .next()?
                .parse()
                .ok()
        })
        .ok_or_else(|| format!("{target}: no `Done N runs` in {log_shown}"))?;
    let corpus = text
        .lines()
        .rev()
        .find(|l| l.contains("DONE "))
        .and_then(|l| field(l, "corp: "))
        .unwrap_or("?")
        .to_owned();
    Ok(Ran {
        target,
        runs,
        seconds: elapsed,
        corpus,
    })
}

pub fn fuzz(root: &Path, args: &[String]) -> Result<(), String> {
    let (seconds, targets) = parse_args(args)?;
    println!(
        "xtask: fuzz targets to run: {} ({seconds} s each)",
        targets.join(", ")
    );
    ensure_cargo_fuzz(root)?;
    let started = Instant::now();
    let mut c = cargo(root);
    c.args(["fuzz", "build"]).args(BUILD_FLAGS);
    if targets.len() == 1 {
        c.arg(targets[0]);
    }
    run(c, "cargo fuzz build")?;
    eprintln!(
        "xtask: fuzz targets built in {:.0} s",
        started.elapsed().as_secs_f64()
    );
    let mut done = Vec::new();
    for &t in &targets {
        let ran = fuzz_one(root, t, seconds)?;
        println!(
            "xtask: fuzz {:<12} {:>11} executions in {:>4.0} s, corpus {} (inputs/bytes), no crash",
            ran.target, ran.runs, ran.seconds, ran.corpus
        );
        done.push(ran);
    }
    let total: u64 = done.iter().map(|r| r.runs).sum();
    println!(
        "xtask: fuzzed {} for {seconds} s each: {total} executions, no crash",
        targets.join(", ")
    );
    Ok(())
}
