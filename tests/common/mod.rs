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
    run(Command::new(env!("CARGO_BIN_EXE_efold")).args(args))
}

/// Runs `efold` in `dir`, so that file names in messages are the relative ones given.
#[allow(dead_code)]
pub fn efold_in(dir: &std::path::Path, args: &[&str]) -> Run {
    run(Command::new(env!("CARGO_BIN_EXE_efold")).args(args).current_dir(dir))
}

fn run(cmd: &mut Command) -> Run {
    let out = cmd.output().expect("the efold binary runs");
    Run {
        code: out.status.code().unwrap_or(-1),
        stdout: String::from_utf8(out.stdout).expect("utf-8 output"),
        stderr: String::from_utf8(out.stderr).expect("utf-8 errors"),
    }
}
