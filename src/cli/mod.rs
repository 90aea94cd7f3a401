//! The command line: arguments as plain data (clap), then one function per command that returns
//! the text to print. The binary only calls [`main`].
//!
//! Exit codes. This table is their one description; the codes are chosen by the constructors
//! of [`Failure`] (`Failure::input`, `Failure::drifted`, [`Failure::quiet`]) and by clap
//! for the arguments it refuses:
//!
//! | code | meaning |
//! |------|---------|
//! | 0 | success; `--help` and `--version`; a closed standard output (the reader went away): efold stops quietly, nothing on stderr |
//! | 1 | `golden check` only: a model's predictions drifted beyond the tolerance, a model that has golden predictions now fails to predict, or a model has no readable golden file; the report on stderr lists every model |
//! | 2 | every other failure, with a diagnosis on stderr: a malformed or unknown flag (clap's own message), bad input (an expression, a model or data file, a flag value outside its range, a size beyond its limit, `merge` inputs that are not one set of shards), an output that cannot be written, and an analysis that fails (no end of inflation, too few e-folds, K <= 0 or a pole in the range, a mode that does not freeze, a numerical failure, ...) |
//!
//! The layout: `args` holds every command's arguments (shared groups flattened in),
//! `check` the checks of flag values that run before any work, `load` the one loading layer
//! (a model from a file or flags, the data set, the N_* list), `files` the output files, and
//! `commands` one module a command, each a function from its arguments to the text to print.

use crate::analysis::error::AnalysisError;
use crate::config::Config;
use crate::diag::Diagnostic;
use crate::language::compile::ExprError;
use crate::model::ModelError;
use crate::report::output::WriteError;
use clap::{Parser, Subcommand};
use std::process::ExitCode;

mod args;
mod check;
mod commands;
mod files;
mod load;

pub use args::{
    BasinArgs, BasinDirection, BasinMergeArgs, BasinVelocity, CompileArgs, CompletionsArgs, DataArgs, EfoldsArgs, Emit,
    EvalArgs, FigureArgs, FitArgs, Format, GoldenAction, GoldenArgs, GoldenCheckArgs, GoldenWriteArgs, InspectArgs,
    ManArgs, MergeArgs, Method, ModelArgs, OutArgs, PredictArgs, ScanArgs, ScanFormat, ScopeArgs, SpectrumArgs,
    SpectrumFormat, TableFormat, ThreadsArgs, WatchArgs,
};

/// efold: from a potential and a kinetic function to inflationary predictions.
#[derive(Debug, Parser)]
#[command(name = "efold", version, about, long_about = None)]
pub struct Args {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// The commands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Evaluate an expression and its derivatives with respect to the field at one point.
    Eval(EvalArgs),
    /// Show what the compiler makes of an expression: syntax tree, IR, tape, derivatives.
    Compile(CompileArgs),
    /// Analyse a model in canonical variables: domain, poles of K, plateaus, asymptotics.
    Inspect(InspectArgs),
    /// Predict n_s, r, the running and the scales of a model, and judge them against data.
    Predict(PredictArgs),
    /// The exact scalar and tensor power spectra, P_zeta(k) and P_t(k), from the
    /// Mukhanov–Sasaki equation.
    Spectrum(SpectrumArgs),
    /// Predictions over a grid of one or two parameters and N_*, in parallel.
    Scan(ScanArgs),
    /// Join the shards of a scan into the table an unsharded run writes.
    Merge(MergeArgs),
    /// Basins of initial conditions: from many starts (field values and velocities), how many
    /// e-folds, which outcome and which n_s and r.
    Basin(BasinArgs),
    /// Join the JSON or CSV shards of a basin run into the output an unsharded run writes.
    BasinMerge(BasinMergeArgs),
    /// Solve for parameter values that reproduce target observables.
    Fit(FitArgs),
    /// Golden predictions for a directory of models: write them, or check that nothing drifted.
    Golden(GoldenArgs),
    /// Re-predict a model file or a directory whenever a file changes, and print what moved.
    Watch(WatchArgs),
    /// Write the completion script for a shell (bash, zsh, fish, elvish, powershell).
    Completions(CompletionsArgs),
    /// Write the manual pages (roff): efold's own or one command's to standard output, or
    /// every page into a directory with --out.
    Man(ManArgs),
}

/// A command's failure: what to print on stderr, and the exit code.
#[derive(Debug, Clone, PartialEq)]
pub struct Failure {
    /// The rendered message, ending in a newline.
    pub message: String,
    /// The process exit code (see the module docs).
    pub code: u8,
}

impl std::fmt::Display for Failure {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.message)
    }
}

impl Failure {
    /// `golden check` found drift (or a model that now fails, or no golden file): exit
    /// code 1.
    pub(crate) fn drifted(message: String) -> Failure {
        Failure { message, code: 1 }
    }

    /// Bad input, an output that cannot be written, or a failed analysis: exit code 2.
    pub(crate) fn input(message: String) -> Failure {
        Failure { message, code: 2 }
    }

    /// The reader of standard output went away: stop quietly, exit code 0.
    pub fn quiet() -> Failure {
        Failure {
            message: String::new(),
            code: 0,
        }
    }

    /// The exit code.
    pub fn code(&self) -> u8 {
        self.code
    }
}

impl From<ExprError> for Failure {
    fn from(e: ExprError) -> Failure {
        Failure::input(e.render())
    }
}

impl From<ModelError> for Failure {
    fn from(e: ModelError) -> Failure {
        Failure::input(e.render())
    }
}

impl From<AnalysisError> for Failure {
    fn from(e: AnalysisError) -> Failure {
        Failure::input(e.diagnostic().render(None))
    }
}

impl From<crate::data::DataError> for Failure {
    fn from(e: crate::data::DataError) -> Failure {
        Failure::input(e.render())
    }
}

impl From<Diagnostic> for Failure {
    fn from(d: Diagnostic) -> Failure {
        Failure::input(d.render(None))
    }
}

impl From<WriteError> for Failure {
    fn from(e: WriteError) -> Failure {
        match e {
            // The reader went away: stop quietly, as a filter does.
            WriteError::Closed => Failure::quiet(),
            WriteError::Failed(m) => Diagnostic::new(m)
                .with_hint("check the disk or device standard output goes to")
                .into(),
        }
    }
}

/// Writes `text` to standard output (through [`crate::report::output::stdout`], the one writer): a
/// closed pipe becomes a quiet stop with exit code 0, any other failure an error, exit code 2.
pub(crate) fn print_out(text: &str) -> Result<(), Failure> {
    crate::report::output::stdout(text).map_err(Failure::from)
}

/// Runs the binary: parses the arguments, runs the command, prints, returns the exit code.
pub fn main() -> ExitCode {
    let args = Args::parse();
    match run(&args).and_then(|out| print_out(&out)) {
        Ok(()) => ExitCode::SUCCESS,
        Err(f) => {
            if !f.message.is_empty() {
                crate::report::output::stderr(&format!("efold: {}", f.message));
            }
            ExitCode::from(f.code())
        }
    }
}

/// Runs one command; returns what it prints on stdout (`scan` writes its table itself, as it
/// streams, and returns nothing).
pub fn run(args: &Args) -> Result<String, Failure> {
    let config = Config::default();
    match &args.command {
        Command::Eval(a) => commands::eval::eval(a, &config),
        Command::Compile(a) => commands::eval::compile_view(a, &config),
        Command::Inspect(a) => commands::inspect::inspect_cmd(a, &config),
        Command::Predict(a) => commands::predict::predict_cmd(a, &config),
        Command::Spectrum(a) => in_pool(&a.threads, &config, || commands::spectrum::spectrum_cmd(a, &config)),
        Command::Scan(a) => in_pool(&a.threads, &config, || commands::scan::scan_cmd(a, &config)),
        Command::Merge(a) => commands::scan::merge_cmd(a, &config),
        Command::Basin(a) => in_pool(&a.threads, &config, || commands::basin::basin_cmd(a, &config)),
        Command::BasinMerge(a) => commands::basin::merge_cmd(a, &config),
        Command::Fit(a) => commands::fit::fit_cmd(a, &config),
        Command::Golden(a) => commands::golden::golden_cmd(a, &config),
        Command::Watch(a) => commands::watch::watch_cmd(a, &config),
        Command::Completions(a) => commands::docs::completions_cmd(a),
        Command::Man(a) => commands::docs::man_cmd(a),
    }
}

/// Runs `f` on `--threads N` worker threads (a pool of its own), or on rayon's global pool
/// (one thread per core) without the flag. N is checked first: a whole number from 1 to
/// `Limits::max_threads`.
fn in_pool(
    t: &ThreadsArgs,
    config: &Config,
    f: impl FnOnce() -> Result<String, Failure> + Send,
) -> Result<String, Failure> {
    let Some(text) = &t.threads else {
        return f();
    };
    let n = check::check_threads(text, config)?;
    let pool = rayon::ThreadPoolBuilder::new().num_threads(n).build().map_err(|e| {
        Failure::from(
            Diagnostic::new(format!("cannot start {n} worker threads: {e}"))
                .with_hint("give fewer with --threads, or leave it out to use one per core"),
        )
    })?;
    pool.install(f)
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::CommandFactory;

    /// clap's own consistency checks over every command: each `mut_arg` names a flag its
    /// groups define, no flag is defined twice in one command, defaults parse.
    #[test]
    fn the_argument_definitions_are_consistent() {
        Args::command().debug_assert();
    }

    /// A shared flag is one definition: the same help wherever it is flattened, unless the
    /// command words it for itself.
    #[test]
    fn shared_flags_read_the_same_in_every_command() {
        let cmd = Args::command();
        let help = |sub: &str, flag: &str| -> String {
            let c = cmd.find_subcommand(sub).unwrap_or_else(|| panic!("no command {sub}"));
            let a = c.get_arguments().find(|a| a.get_id() == flag);
            a.and_then(|a| a.get_help())
                .map(|h| h.to_string())
                .unwrap_or_else(|| panic!("{sub} has no --{flag}"))
        };
        for flag in ["pdf", "figure_width"] {
            for sub in ["predict", "spectrum", "scan"] {
                assert_eq!(help(sub, flag), help("inspect", flag), "--{flag} of {sub}");
            }
        }
        for flag in ["potential", "kinetic", "params", "field", "range"] {
            for sub in ["predict", "spectrum", "scan", "fit"] {
                assert_eq!(help(sub, flag), help("inspect", flag), "--{flag} of {sub}");
            }
        }
        assert_eq!(help("spectrum", "data"), help("fit", "data"));
        assert_eq!(help("scan", "data"), help("fit", "data"));
        // the commands that word a shared flag for themselves
        assert_ne!(help("predict", "svg"), help("inspect", "svg"));
        assert_ne!(help("predict", "data"), help("fit", "data"));
        assert_ne!(help("scan", "efolds"), help("predict", "efolds"));
    }
}
