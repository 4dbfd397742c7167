//! What the integration tests share: running the `zvs-timing` binary as a
//! user does, and reading what it printed.

#![allow(dead_code, clippy::unwrap_used, clippy::expect_used, clippy::panic)]

use std::path::{Path, PathBuf};
use std::process::Command;

/// The repository's root (where `tables/` is).
pub fn root() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("..")
}

/// The `zvs-timing` binary, to be given its arguments, run from the
/// repository's root.
pub fn zvs_timing() -> Command {
    let mut c = Command::new(env!("CARGO_BIN_EXE_zvs-timing"));
    c.current_dir(root());
    c
}

/// What a run printed and how it ended.
pub struct Run {
    /// Exit status (-1 when killed by a signal).
    pub code: i32,
    /// Standard output.
    pub stdout: String,
    /// Standard error.
    pub stderr: String,
}

impl Run {
    /// The run, after asserting it succeeded (its stderr in the message).
    #[track_caller]
    pub fn ok(self) -> Self {
        assert_eq!(self.code, 0, "zvs-timing failed:\n{}", self.stderr);
        self
    }

    /// Standard output as JSON, after asserting the run succeeded.
    #[track_caller]
    pub fn json(self) -> serde_json::Value {
        let out = self.ok().stdout;
        serde_json::from_str(&out).unwrap_or_else(|e| panic!("not JSON ({e}):\n{out}"))
    }
}

/// Run `command` to its end.
#[track_caller]
pub fn run(command: &mut Command) -> Run {
    let out = command.output().expect("zvs-timing runs");
    Run {
        code: out.status.code().unwrap_or(-1),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

/// `zvs-timing args...` run to its end.
#[track_caller]
pub fn zvs(args: &[&str]) -> Run {
    run(zvs_timing().args(args))
}
