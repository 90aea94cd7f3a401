//! Running the real binary from the integration tests.

use std::process::Command;

/// What a run of the binary left.
pub struct Run {
    /// The exit code.
    pub code: i32,
    /// Standard output.
    pub stdout: String,
    /// Standard error.
    pub stderr: String,
}

/// Runs `efold` with these arguments.
pub fn efold(args: &[&str]) -> Run {
    let out = Command::new(env!("CARGO_BIN_EXE_efold"))
        .args(args)
        .output()
        .expect("the efold binary runs");
    Run {
        code: out.status.code().unwrap_or(-1),
        stdout: String::from_utf8(out.stdout).expect("utf-8 output"),
        stderr: String::from_utf8(out.stderr).expect("utf-8 errors"),
    }
}
