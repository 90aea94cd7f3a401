//! The `efold` binary: all logic lives in the library; see `efold::cli`.
fn main() -> std::process::ExitCode {
    efold::cli::main()
}
