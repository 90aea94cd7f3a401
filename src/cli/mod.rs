//! The command line: arguments as plain data (clap), then one function per command that returns
//! the text to print. The binary only calls [`main`]. Exit codes are chosen in one place,
//! [`Failure::code`]:
//!
//! | code | meaning |
//! |------|---------|
//! | 0 | success; also a closed standard output (the reader went away): efold stops quietly |
//! | 1 | `golden check`: predictions drifted beyond the tolerance |
//! | 2 | bad input (an expression, a flag, a file, a size beyond its limit, a value outside its
//! range), an output that cannot be written, or a numerical failure |

use crate::config::Config;
use crate::diag::Diagnostic;
use crate::language::compile::{compile, lower_into, ExprError};
use crate::language::ir::{Graph, Scope};
use crate::language::tape::MAX_ORDER;
use clap::{Parser, Subcommand, ValueEnum};
use std::fmt::Write as _;
use std::process::ExitCode;

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
    /// Solve for parameter values that reproduce target observables.
    Fit(FitArgs),
    /// Golden predictions for a directory of models: write them, or check that nothing drifted.
    Golden(GoldenArgs),
    /// Re-predict a model file or a directory whenever a file changes, and print what moved.
    Watch(WatchArgs),
}

/// `efold golden`.
#[derive(Debug, clap::Args)]
pub struct GoldenArgs {
    /// What to do.
    #[command(subcommand)]
    pub action: GoldenAction,
}

/// `efold golden write|check`.
#[derive(Debug, Subcommand)]
pub enum GoldenAction {
    /// Predict every model file under DIR and write NAME.predictions.json beside it (atomically).
    Write {
        /// The directory of model files.
        dir: std::path::PathBuf,
        /// A data file [default: the built-in one].
        #[arg(long, value_name = "FILE")]
        data: Option<std::path::PathBuf>,
    },
    /// Recompute and report every prediction that moved beyond the tolerance; exit code 1 if any.
    Check {
        /// The directory of model files.
        dir: std::path::PathBuf,
        /// Relative tolerance.
        #[arg(long, default_value = "1e-8", allow_hyphen_values = true)]
        tolerance: f64,
        /// A data file [default: the built-in one].
        #[arg(long, value_name = "FILE")]
        data: Option<std::path::PathBuf>,
    },
}

/// `efold watch`.
#[derive(Debug, clap::Args)]
pub struct WatchArgs {
    /// A model file, or a directory of them.
    pub path: std::path::PathBuf,
    /// Report changes beyond this relative size.
    #[arg(long, default_value = "1e-10", allow_hyphen_values = true)]
    pub tolerance: f64,
    /// Stop after this many rounds of changes (for scripts; default: run until interrupted).
    #[arg(long, value_name = "N", allow_negative_numbers = true)]
    pub exit_after: Option<usize>,
}

/// `efold fit`.
#[derive(Debug, clap::Args)]
pub struct FitArgs {
    #[command(flatten)]
    #[allow(missing_docs)]
    pub model: ModelArgs,
    /// A parameter to solve for (repeatable; at most as many as targets). Its value in the
    /// model (or --param) is the starting point.
    #[arg(long = "free", value_name = "NAME", required = true)]
    pub free: Vec<String>,
    /// A target, NAME=VALUE with NAME one of n_s, r, alpha_s, A_s (repeatable).
    #[arg(
        long = "target",
        value_name = "NAME=VALUE",
        required = true,
        allow_hyphen_values = true
    )]
    pub targets: Vec<String>,
    /// e-folds between the pivot's exit and the end of inflation.
    #[arg(long, default_value_t = 55.0, allow_hyphen_values = true)]
    pub efolds: f64,
    /// A data file of constraints and constants [default: the built-in one].
    #[arg(long, value_name = "FILE")]
    pub data: Option<std::path::PathBuf>,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
}

/// `efold scan`.
#[derive(Debug, clap::Args)]
pub struct ScanArgs {
    #[command(flatten)]
    #[allow(missing_docs)]
    pub model: ModelArgs,
    /// A parameter to vary: NAME=LO:HI:COUNT, `:log` appended for a logarithmic grid, or NAME
    /// alone for the model file's `[scan]` range. Once or twice.
    #[arg(long, value_name = "NAME=LO:HI:COUNT[:log]", required = true)]
    pub vary: Vec<String>,
    /// N_* values, comma-separated [default: the model's setting, or 50,55,60].
    #[arg(long, value_delimiter = ',', value_name = "N,N,...", allow_hyphen_values = true)]
    pub efolds: Vec<f64>,
    /// Points for a parameter given by name alone.
    #[arg(long, default_value_t = 20, allow_negative_numbers = true)]
    pub points: usize,
    /// Compute only the K-th of N slices of the grid (for job arrays); join with `efold merge`.
    #[arg(long, value_name = "K/N", allow_hyphen_values = true)]
    pub shard: Option<String>,
    /// Output format.
    #[arg(long, value_enum, default_value_t = ScanFormat::Csv)]
    pub format: ScanFormat,
    /// Write the table to this file (atomically) instead of standard output.
    #[arg(long, value_name = "FILE")]
    pub out: Option<std::path::PathBuf>,
    /// Write the n_s-r figure to this SVG file.
    #[arg(long, value_name = "FILE")]
    pub svg: Option<std::path::PathBuf>,
    /// Write the same figure as PDF, fonts embedded, to this file.
    #[arg(long, value_name = "FILE")]
    pub pdf: Option<std::path::PathBuf>,
    /// Figure width: single (8.6 cm), double (17.8 cm) or a number of centimetres.
    #[arg(long, value_name = "single|double|CM", default_value = "single", value_parser = crate::report::plot::parse_figure_width, allow_hyphen_values = true)]
    pub figure_width: f64,
    /// A data file of constraints and constants [default: the built-in one].
    #[arg(long, value_name = "FILE")]
    pub data: Option<std::path::PathBuf>,
}

/// Formats of a scan's table.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum ScanFormat {
    /// One row per point and N_*.
    Csv,
    /// An array of flat objects, one per point and N_*.
    Json,
}

/// `efold merge`.
#[derive(Debug, clap::Args)]
pub struct MergeArgs {
    /// The shard files (all CSV or all JSON).
    #[arg(required = true)]
    pub files: Vec<std::path::PathBuf>,
    /// Write the merged table here (atomically) instead of standard output.
    #[arg(long, value_name = "FILE")]
    pub out: Option<std::path::PathBuf>,
}

/// `efold spectrum`.
#[derive(Debug, clap::Args)]
pub struct SpectrumArgs {
    #[command(flatten)]
    #[allow(missing_docs)]
    pub model: ModelArgs,
    /// e-folds between the pivot's exit and the end of inflation (eps_H = 1).
    #[arg(long, default_value_t = 55.0, allow_hyphen_values = true)]
    pub efolds: f64,
    /// Smallest k, in Mpc^-1.
    #[arg(long, default_value = "1e-4", allow_hyphen_values = true)]
    pub k_min: f64,
    /// Largest k, in Mpc^-1 [default: 1e14, or less if modes would exit too near the end].
    #[arg(long, allow_hyphen_values = true)]
    pub k_max: Option<f64>,
    /// Number of k values, evenly spaced in ln k.
    #[arg(long, default_value_t = 60, allow_negative_numbers = true)]
    pub points: usize,
    /// Use this branch (1-based), as in `predict`.
    #[arg(long, value_name = "K", allow_negative_numbers = true)]
    pub branch: Option<usize>,
    /// Start the background at this field value instead of on the slow-roll attractor.
    #[arg(long, value_name = "PHI", allow_hyphen_values = true)]
    pub start_phi: Option<f64>,
    /// With --start-phi: the initial dphi/dN [default: the slow-roll attractor's].
    #[arg(long, value_name = "DPHI_DN", allow_hyphen_values = true)]
    pub start_velocity: Option<f64>,
    /// A data file of constraints and constants [default: the built-in one].
    #[arg(long, value_name = "FILE")]
    pub data: Option<std::path::PathBuf>,
    /// Output format.
    #[arg(long, value_enum, default_value_t = SpectrumFormat::Text)]
    pub format: SpectrumFormat,
    /// Write a figure of both spectra, with the slow-roll estimate, to this SVG file.
    #[arg(long, value_name = "FILE")]
    pub svg: Option<std::path::PathBuf>,
    /// Write the same figure as PDF, fonts embedded, to this file.
    #[arg(long, value_name = "FILE")]
    pub pdf: Option<std::path::PathBuf>,
    /// Figure width: single (8.6 cm), double (17.8 cm) or a number of centimetres.
    #[arg(long, value_name = "single|double|CM", default_value = "single", value_parser = crate::report::plot::parse_figure_width, allow_hyphen_values = true)]
    pub figure_width: f64,
}

/// Output formats of `spectrum`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum SpectrumFormat {
    /// Aligned text for people.
    Text,
    /// One JSON object.
    Json,
    /// A header and one row per k.
    Csv,
}

/// Output formats of `predict`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum TableFormat {
    /// Aligned text for people.
    Text,
    /// One JSON object.
    Json,
    /// A header and one row per N_*.
    Csv,
}

/// How `predict` computes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum Method {
    /// Potential slow roll (first order, or second with --second-order).
    SlowRoll,
    /// Exact background and Mukhanov–Sasaki modes.
    Exact,
}

/// `efold predict`.
#[derive(Debug, clap::Args)]
pub struct PredictArgs {
    #[command(flatten)]
    #[allow(missing_docs)]
    pub model: ModelArgs,
    /// e-folds between the pivot's exit and the end of inflation, comma-separated
    /// [default: the model's `efolds` setting, or 50,55,60].
    #[arg(long, value_delimiter = ',', value_name = "N,N,...", allow_hyphen_values = true)]
    pub efolds: Vec<f64>,
    /// Use this branch (1-based, in ascending field position) [default: the one at larger field
    /// values that gives the e-folds].
    #[arg(long, value_name = "K", allow_negative_numbers = true)]
    pub branch: Option<usize>,
    /// Second-order slow-roll observables (Hubble-flow expansion).
    #[arg(long)]
    pub second_order: bool,
    /// How to compute the observables: the slow-roll formulas, or the exact background and
    /// Mukhanov–Sasaki spectra (N_* then counts from eps_H = 1).
    #[arg(long, value_enum, default_value_t = Method::SlowRoll)]
    pub method: Method,
    /// With --method exact: start the background at this field value instead of on the
    /// slow-roll attractor well before the pivot.
    #[arg(long, value_name = "PHI", allow_hyphen_values = true)]
    pub start_phi: Option<f64>,
    /// With --start-phi: the initial dphi/dN [default: the slow-roll attractor's].
    #[arg(long, value_name = "DPHI_DN", allow_hyphen_values = true)]
    pub start_velocity: Option<f64>,
    /// Fix N_* from reheating: `instant` (radiation right after inflation).
    #[arg(long, value_name = "instant")]
    pub reheat: Option<String>,
    /// Equation of state during reheating (with --reheat-temp or --reheat-efolds).
    #[arg(long, value_name = "W", allow_hyphen_values = true)]
    pub reheat_w: Option<f64>,
    /// Reheating temperature in GeV.
    #[arg(long, value_name = "GEV", allow_hyphen_values = true)]
    pub reheat_temp: Option<f64>,
    /// e-folds of reheating.
    #[arg(long, value_name = "N", allow_hyphen_values = true)]
    pub reheat_efolds: Option<f64>,
    /// Relativistic degrees of freedom at reheating (with a reheating flag) [default: 106.75].
    #[arg(long, value_name = "G", allow_hyphen_values = true)]
    pub g_star: Option<f64>,
    /// A data file of constraints and constants [default: the built-in
    /// data/planck2018-bk18.toml].
    #[arg(long, value_name = "FILE")]
    pub data: Option<std::path::PathBuf>,
    /// Output format.
    #[arg(long, value_enum, default_value_t = TableFormat::Text)]
    pub format: TableFormat,
    /// Write a figure of V with the end of inflation and the pivot points to this SVG file.
    #[arg(long, value_name = "FILE")]
    pub svg: Option<std::path::PathBuf>,
    /// Write the same figure as PDF, fonts embedded, to this file.
    #[arg(long, value_name = "FILE")]
    pub pdf: Option<std::path::PathBuf>,
    /// Figure width: single (8.6 cm), double (17.8 cm) or a number of centimetres.
    #[arg(long, value_name = "single|double|CM", default_value = "single", value_parser = crate::report::plot::parse_figure_width, allow_hyphen_values = true)]
    pub figure_width: f64,
}

/// The model: a TOML file, or given inline; flags override the file.
#[derive(Debug, clap::Args)]
pub struct ModelArgs {
    /// A model file (TOML; see README for the format).
    #[arg(value_name = "MODEL.toml")]
    pub model: Option<std::path::PathBuf>,
    /// The potential V(FIELD).
    #[arg(long, value_name = "EXPR", allow_hyphen_values = true)]
    pub potential: Option<String>,
    /// The kinetic function K(FIELD) in L = 1/2 K (d FIELD)^2 - V [default: 1].
    #[arg(long, value_name = "EXPR", allow_hyphen_values = true)]
    pub kinetic: Option<String>,
    /// A parameter, NAME=VALUE (VALUE may be an expression such as 1/3). Repeatable.
    #[arg(long = "param", value_name = "NAME=VALUE")]
    pub params: Vec<String>,
    /// The field variable's name [default: phi].
    #[arg(long, value_name = "NAME")]
    pub field: Option<String>,
    /// The field interval to consider: two expressions; -inf and inf allowed.
    #[arg(long, num_args = 2, value_names = ["LO", "HI"], allow_hyphen_values = true)]
    pub range: Option<Vec<String>>,
}

/// `efold inspect`.
#[derive(Debug, clap::Args)]
pub struct InspectArgs {
    #[command(flatten)]
    #[allow(missing_docs)]
    pub model: ModelArgs,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
    /// Add a table of (phi, chi, V) with this many rows.
    #[arg(long, value_name = "ROWS", allow_negative_numbers = true)]
    pub table: Option<usize>,
    /// Write a figure of V against the field and against chi to this SVG file.
    #[arg(long, value_name = "FILE")]
    pub svg: Option<std::path::PathBuf>,
    /// Write the same figure as PDF, fonts embedded, to this file.
    #[arg(long, value_name = "FILE")]
    pub pdf: Option<std::path::PathBuf>,
    /// Figure width: single (8.6 cm), double (17.8 cm) or a number of centimetres.
    #[arg(long, value_name = "single|double|CM", default_value = "single", value_parser = crate::report::plot::parse_figure_width, allow_hyphen_values = true)]
    pub figure_width: f64,
}

/// Output formats.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum Format {
    /// Aligned text for people.
    Text,
    /// One JSON object.
    Json,
}

/// Flags naming the field and binding parameters for `eval`.
#[derive(Debug, clap::Args)]
pub struct ScopeArgs {
    /// A parameter, NAME=VALUE; VALUE may be an expression of `pi` and earlier parameters
    /// (`--param alpha=1/3`). Repeatable.
    #[arg(long = "param", value_name = "NAME=VALUE")]
    pub params: Vec<String>,
    /// The field variable's name [default: phi, or the name given to --at].
    #[arg(long, value_name = "NAME")]
    pub field: Option<String>,
}

/// `efold eval`.
#[derive(Debug, clap::Args)]
pub struct EvalArgs {
    /// The expression, e.g. '1 - tanh(phi/sqrt(6*alpha))^2' (a leading minus is part of it).
    #[arg(allow_hyphen_values = true)]
    pub expr: String,
    /// The point, FIELD=VALUE (VALUE may be an expression of the parameters).
    #[arg(long, value_name = "FIELD=VALUE", allow_hyphen_values = true)]
    pub at: String,
    /// Highest derivative to report (0 to 8).
    #[arg(long, default_value_t = 1, allow_negative_numbers = true)]
    pub order: usize,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
    #[command(flatten)]
    #[allow(missing_docs)]
    pub scope: ScopeArgs,
}

/// Stages `efold compile` can show.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum Emit {
    /// The syntax tree with spans.
    Ast,
    /// The normalised expression, printed back in the language.
    Ir,
    /// The compiled instructions.
    Tape,
    /// Symbolic derivatives d/dfield, up to --order.
    Derivatives,
}

/// `efold compile`.
#[derive(Debug, clap::Args)]
pub struct CompileArgs {
    /// The expression (a leading minus is part of it).
    #[arg(allow_hyphen_values = true)]
    pub expr: String,
    /// Stages to show (repeatable, or comma-separated) [default: all].
    #[arg(long, value_enum, value_delimiter = ',')]
    pub emit: Vec<Emit>,
    /// Highest symbolic derivative to show.
    #[arg(long, default_value_t = 2, allow_negative_numbers = true)]
    pub order: usize,
    /// A parameter, NAME=VALUE (repeatable). The views are symbolic, so the value is only
    /// checked; names used in EXPR but not given here are shown as parameters too.
    #[arg(long = "param", value_name = "NAME=VALUE")]
    pub params: Vec<String>,
    /// The field variable's name, the variable of the derivatives [default: phi].
    #[arg(long, value_name = "NAME")]
    pub field: Option<String>,
}

/// A command's failure: what to print on stderr, and the exit code.
#[derive(Debug, Clone, PartialEq)]
pub struct Failure {
    /// The rendered message, ending in a newline.
    pub message: String,
    /// The process exit code (see the module docs).
    pub code: u8,
}

impl Failure {
    /// Predictions drifted from their golden values: exit code 1.
    pub fn drifted(message: String) -> Failure {
        Failure { message, code: 1 }
    }

    /// Bad input or a numerical failure: exit code 2.
    pub fn input(message: String) -> Failure {
        Failure { message, code: 2 }
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

impl From<crate::model::ModelError> for Failure {
    fn from(e: crate::model::ModelError) -> Failure {
        Failure::input(e.render())
    }
}

impl From<crate::analysis::single::canonical::AnalysisError> for Failure {
    fn from(e: crate::analysis::single::canonical::AnalysisError) -> Failure {
        Failure::input(e.diagnostic().render(None))
    }
}

impl From<Diagnostic> for Failure {
    fn from(d: Diagnostic) -> Failure {
        Failure::input(d.render(None))
    }
}

impl From<crate::report::output::WriteError> for Failure {
    fn from(e: crate::report::output::WriteError) -> Failure {
        match e {
            // The reader went away: stop quietly, as a filter does.
            crate::report::output::WriteError::Closed => Failure {
                message: String::new(),
                code: 0,
            },
            crate::report::output::WriteError::Failed(m) => Diagnostic::new(m)
                .with_hint("check the disk or device standard output goes to")
                .into(),
        }
    }
}

/// Writes `text` to standard output (through [`crate::report::output::stdout`], the one writer): a
/// closed pipe becomes a quiet stop with exit code 0, any other failure an error, exit code 2.
pub fn print_out(text: &str) -> Result<(), Failure> {
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
        Command::Eval(a) => eval(a, &config),
        Command::Compile(a) => compile_view(a, &config),
        Command::Inspect(a) => inspect_cmd(a, &config),
        Command::Predict(a) => predict_cmd(a, &config),
        Command::Spectrum(a) => spectrum_cmd(a, &config),
        Command::Scan(a) => scan_cmd(a, &config),
        Command::Merge(a) => merge_cmd(a, &config),
        Command::Fit(a) => fit_cmd(a, &config),
        Command::Golden(a) => golden_cmd(a, &config),
        Command::Watch(a) => watch_cmd(a, &config),
    }
}

/// Splits `NAME=VALUE`.
fn split_binding<'a>(flag: &str, text: &'a str) -> Result<(&'a str, &'a str), Failure> {
    let bad = || {
        Failure::from(
            Diagnostic::new(format!("`{flag} {text}` is not of the form NAME=VALUE"))
                .with_hint(format!("write it as `{flag} alpha=1/3`")),
        )
    };
    let (name, value) = text.split_once('=').ok_or_else(bad)?;
    let name = name.trim();
    let valid = name.chars().next().is_some_and(|c| c.is_ascii_alphabetic() || c == '_')
        && name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_');
    if !valid {
        return Err(bad());
    }
    check_not_reserved(flag, text, name)?;
    Ok((name, value))
}

/// Whether a name is the language's own: a function, `pow` or `pi`.
fn is_reserved(name: &str) -> bool {
    name == "pi" || name == "pow" || crate::language::ir::Func::from_name(name).is_some()
}

/// A name given with `flag` (in its value `text`) that the expression language reserves is
/// refused, with a caret under it, as model files refuse it.
fn check_not_reserved(flag: &str, text: &str, name: &str) -> Result<(), Failure> {
    if !is_reserved(name) {
        return Ok(());
    }
    let start = text.find(name).unwrap_or(0);
    let d = Diagnostic::new(format!("`{flag} {text}`: `{name}` is a built-in name"))
        .with_span(crate::diag::Span::new(start, start + name.len()), "a built-in name")
        .with_hint("choose another name: the functions (exp, sqrt, ...), `pow` and `pi` are the language's own");
    Err(Failure::input(d.render(Some(&crate::diag::Source::new(flag, text)))))
}

/// `--field NAME`: a valid name that is not the language's own.
fn check_field_name(name: &str) -> Result<(), Failure> {
    let valid = name.chars().next().is_some_and(|c| c.is_ascii_alphabetic() || c == '_')
        && name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_');
    if !valid {
        let d = Diagnostic::new(format!("`--field {name}` is not a valid name"))
            .with_span(crate::diag::Span::new(0, name.len()), "not a name")
            .with_hint("names are letters, digits and _, starting with a letter or _");
        return Err(Failure::input(
            d.render(Some(&crate::diag::Source::new("--field", name))),
        ));
    }
    check_not_reserved("--field", name, name)
}

/// A `--param NAME=...` given twice is refused (else the last would silently win).
fn check_params_once(flags: &[String]) -> Result<(), Failure> {
    let name_of = |f: &str| f.split_once('=').map(|(n, _)| n.trim().to_string());
    for (i, flag) in flags.iter().enumerate() {
        let Some(name) = name_of(flag) else { continue };
        if let Some(first) = flags[..i].iter().find(|f| name_of(f).as_deref() == Some(name.as_str())) {
            let start = flag.find(name.as_str()).unwrap_or(0);
            let d = Diagnostic::new(format!("`--param {name}` is given twice"))
                .with_span(
                    crate::diag::Span::new(start, start + name.len()),
                    format!("given again here; the first was `{first}`"),
                )
                .with_hint("give each --param once (a --param replaces the model file's value)");
            return Err(Failure::input(
                d.render(Some(&crate::diag::Source::new("--param", flag))),
            ));
        }
    }
    Ok(())
}

/// Parameter names and values from `--param` flags, each value an expression of `pi` and the
/// parameters before it.
pub fn bind_params(flags: &[String], field: &str, config: &Config) -> Result<(Vec<String>, Vec<f64>), Failure> {
    let mut table = crate::model::ParamTable::default();
    for flag in flags {
        split_binding("--param", flag)?;
    }
    check_params_once(flags)?;
    for flag in flags {
        let (name, text) = split_binding("--param", flag)?;
        if table.contains(name) {
            return Err(Diagnostic::new(format!("parameter `{name}` is given twice"))
                .with_hint("give each --param once")
                .into());
        }
        let origin = format!("--param {name}");
        let v = table
            .evaluate(field, &origin, text, &config.limits)
            .map_err(|e| constant_failure(e, &origin, text, field))?;
        table.push(name, v);
    }
    Ok(table.into_parts())
}

/// The messages of [`constant_expr`] for a value evaluated by a parameter table.
fn constant_failure(e: crate::model::ConstantError, origin: &str, text: &str, field: &str) -> Failure {
    use crate::model::ConstantError;
    match e {
        ConstantError::Expr(e) => e.into(),
        ConstantError::Varying => Diagnostic::new(format!(
            "{origin}: the value `{}` depends on the field `{field}`",
            text.trim()
        ))
        .with_hint("a value may use numbers, `pi` and the parameters")
        .into(),
        ConstantError::NotFinite(v) => {
            Diagnostic::new(format!("{origin}: `{}` is not a finite number ({v})", text.trim())).into()
        }
    }
}

/// Evaluates an expression that must not depend on the field.
fn constant_expr(origin: &str, text: &str, scope: &Scope, params: &[f64], config: &Config) -> Result<f64, Failure> {
    let mut g = Graph::new(scope.clone());
    let (_, id) = lower_into(&mut g, origin, text, &config.limits)?;
    if g.is_varying(id) {
        return Err(Diagnostic::new(format!(
            "{origin}: the value `{}` depends on the field `{}`",
            text.trim(),
            scope.field
        ))
        .with_hint("a value may use numbers, `pi` and the parameters")
        .into());
    }
    let tape = crate::language::tape::Tape::compile(&g, &[id]);
    let v = tape.evaluator(params).eval(0.0);
    if !v.is_finite() {
        return Err(Diagnostic::new(format!(
            "{origin}: `{}` is not a finite number ({})",
            text.trim(),
            crate::report::numfmt::number(v)
        ))
        .into());
    }
    Ok(v)
}

/// Significant digits of `eval`'s text output (a value checked by hand wants more than a table).
const EVAL_DIGITS: usize = 10;

fn eval(a: &EvalArgs, config: &Config) -> Result<String, Failure> {
    if a.order > MAX_ORDER {
        return Err(Diagnostic::new(format!(
            "--order {} is above the highest supported, {MAX_ORDER}",
            a.order
        ))
        .with_hint(format!("use --order 0 to {MAX_ORDER}"))
        .into());
    }
    let (at_name, at_text) = split_binding("--at", &a.at)?;
    if let Some(f) = &a.scope.field {
        check_field_name(f)?;
    }
    let field = a.scope.field.clone().unwrap_or_else(|| at_name.to_string());
    if at_name != field {
        return Err(
            Diagnostic::new(format!("--at names `{at_name}`, but the field is `{field}`"))
                .with_hint(format!("write `--at {field}=VALUE`, or `--field {at_name}`"))
                .into(),
        );
    }
    let (names, values) = bind_params(&a.scope.params, &field, config)?;
    let refs: Vec<&str> = names.iter().map(String::as_str).collect();
    if refs.contains(&field.as_str()) {
        return Err(Diagnostic::new(format!("`{field}` is both the field and a parameter"))
            .with_hint("rename the parameter")
            .into());
    }
    let scope = Scope::new(&field, &refs);
    let x = constant_expr("--at", at_text, &scope, &values, config)?;
    let c = compile(&[("expression", &a.expr)], &scope, &config.limits)?;
    let mut ev = c.tape.evaluator(&values);
    let derivs = ev.derivatives(x, a.order);
    let mut warnings = Vec::new();
    if c.tape.has_abs() && a.order > 0 {
        warnings.push(
            "`abs` is not differentiable where its argument is zero; derivatives there are undefined".to_string(),
        );
    }
    if let Some((k, v)) = derivs.iter().enumerate().find(|(_, v)| !v.is_finite()) {
        let what = if k == 0 {
            "the value".to_string()
        } else {
            format!("derivative {k}")
        };
        let mut d = Diagnostic::new(format!(
            "{what} of the expression is {} at {field} = {}",
            crate::report::numfmt::number(*v),
            crate::report::numfmt::typed(x)
        ));
        if let Some((id, bad)) = c.graph.first_non_finite(c.roots[0], x, &values) {
            d = d.with_hint(format!("`{}` is {bad} there", c.graph.print(id)));
        } else if c.tape.has_abs() {
            d = d.with_hint("`abs` has no derivative where its argument is zero");
        }
        return Err(d
            .with_hint("check the domain of log, sqrt, asin, acos, acosh, atanh, powers, and divisions by zero")
            .into());
    }
    Ok(match a.format {
        Format::Json => {
            let params: serde_json::Map<String, serde_json::Value> = names
                .iter()
                .cloned()
                .zip(values.iter().map(|v| serde_json::json!(v)))
                .collect();
            let obj = serde_json::json!({
                "expression": a.expr,
                "field": field,
                "at": x,
                "params": params,
                "value": derivs[0],
                "derivatives": &derivs[1..],
                "warnings": warnings,
            });
            format!(
                "{}\n",
                serde_json::to_string_pretty(&obj).expect("json of plain numbers")
            )
        }
        Format::Text => {
            let mut out = String::new();
            for w in &warnings {
                let _ = writeln!(out, "warning: {w}");
            }
            let _ = writeln!(out, "at {field} = {}", crate::report::numfmt::typed(x));
            // The value and its derivatives are one column: one style, decimal points aligned.
            let cells = crate::report::numfmt::row(&derivs, EVAL_DIGITS);
            for (k, v) in cells.iter().enumerate() {
                let label = match k {
                    0 => "value".to_string(),
                    _ => format!("d^{k}/d{field}^{k}"),
                };
                let _ = writeln!(out, "  {label:<16} {v:>24}");
            }
            out
        }
    })
}

/// The names of `expr` that are neither the field, a declared parameter, a constant nor a
/// function: `compile` shows them as symbolic parameters. A syntax error is left to `compile`.
fn undeclared_names(expr: &str, field: &str, declared: &[String], config: &Config) -> Vec<String> {
    let Ok(ast) = crate::language::syntax::parse(expr, &config.limits) else {
        return Vec::new();
    };
    ast.names()
        .into_iter()
        .filter(|n| {
            *n != field
                && !declared.iter().any(|d| d == n)
                && !crate::language::ir::CONSTANTS.iter().any(|(c, _)| c == n)
                && crate::language::ir::Func::from_name(n).is_none()
                && *n != "pow"
        })
        .map(str::to_string)
        .collect()
}

fn compile_view(a: &CompileArgs, config: &Config) -> Result<String, Failure> {
    if let Some(f) = &a.field {
        check_field_name(f)?;
    }
    let field = a.field.clone().unwrap_or_else(|| "phi".to_string());
    check_count(
        "--order",
        a.order,
        config.limits.max_symbolic_order,
        "max_symbolic_order",
    )?;
    let (mut names, _) = bind_params(&a.params, &field, config)?;
    let symbolic = undeclared_names(&a.expr, &field, &names, config);
    names.extend(symbolic.iter().cloned());
    let refs: Vec<&str> = names.iter().map(String::as_str).collect();
    let scope = Scope::new(&field, &refs);
    let mut c = compile(&[("expression", &a.expr)], &scope, &config.limits)?;
    let emit = if a.emit.is_empty() {
        vec![Emit::Ast, Emit::Ir, Emit::Tape, Emit::Derivatives]
    } else {
        a.emit.clone()
    };
    let mut out = String::new();
    if !symbolic.is_empty() {
        let list: Vec<String> = symbolic.iter().map(|n| format!("`{n}`")).collect();
        let (verb, what) = if symbolic.len() == 1 {
            ("is", "a symbolic parameter")
        } else {
            ("are", "symbolic parameters")
        };
        let _ = writeln!(
            out,
            "note: {} {verb} not declared, shown as {what}; `efold eval` needs values (`--param {}=VALUE`)",
            list.join(", "),
            symbolic[0]
        );
    }
    for e in emit {
        match e {
            Emit::Ast => {
                let _ = write!(out, "== syntax tree\n{}", c.asts[0].tree());
            }
            Emit::Ir => {
                let _ = writeln!(
                    out,
                    "== IR ({} distinct nodes)\n{}",
                    c.graph.reachable(&c.roots).len(),
                    c.graph.print(c.roots[0])
                );
            }
            Emit::Tape => {
                let _ = write!(out, "== tape\n{}", c.tape);
            }
            Emit::Derivatives => {
                let _ = writeln!(out, "== derivatives");
                let mut d = c.roots[0];
                for k in 1..=a.order {
                    d = c.graph.derivative(d);
                    let _ = writeln!(out, "d^{k}/d{field}^{k} = {}", c.graph.print(d));
                }
            }
        }
    }
    Ok(out)
}

/// Builds the model from a file and/or the inline flags (flags override the file).
/// `example` is the command line suggested when no model is given, e.g.
/// `efold predict models/pole-order-2-quadratic.toml`.
pub fn load_model(a: &ModelArgs, example: &str, config: &Config) -> Result<crate::model::Model, Failure> {
    use crate::model::{ModelSpec, Text};
    let mut spec = match (&a.model, &a.potential) {
        (Some(path), _) => ModelSpec::load(path)?,
        (None, Some(v)) => ModelSpec::inline(v, None),
        (None, None) => {
            return Err(Diagnostic::new("no model given")
                .with_hint(format!("give a model file, e.g. `{example}`"))
                .with_hint("or the model inline: `--potential 'phi^2/2' [--kinetic EXPR] [--param NAME=VALUE]`")
                .into())
        }
    };
    if a.model.is_some() {
        if let Some(v) = &a.potential {
            spec.potential = Text::inline("--potential", v);
        }
    }
    if let Some(k) = &a.kinetic {
        spec.kinetic = Text::inline("--kinetic", k);
    }
    if let Some(f) = &a.field {
        check_field_name(f)?;
        spec.field = f.clone();
    }
    for p in &a.params {
        split_binding("--param", p)?;
    }
    check_params_once(&a.params)?;
    for p in &a.params {
        let (name, value) = split_binding("--param", p)?;
        spec.set_param(name, value);
    }
    if let Some(r) = &a.range {
        spec.range = Some((Text::inline("--range LO", &r[0]), Text::inline("--range HI", &r[1])));
    }
    Ok(crate::model::Model::build(&spec, config)?)
}

/// The error for a file that cannot be written.
fn cannot_write(path: &std::path::Path, e: std::io::Error) -> Failure {
    Diagnostic::new(format!("cannot write `{}`: {e}", path.display()))
        .with_hint("check that the directory exists and is writable, and that the disk has room")
        .into()
}

fn write_output_file(path: &std::path::Path, contents: &str) -> Result<(), Failure> {
    crate::report::output::write_file(path, contents).map_err(|e| cannot_write(path, e))
}

/// Refuses two outputs that are one file (whatever the spelling): `what` names them, `why`
/// says what would be lost.
fn refuse_one_file(
    a: &std::path::Path,
    b: &std::path::Path,
    what: String,
    why: &str,
    hint: &str,
) -> Result<(), Failure> {
    if crate::report::output::same_destination(a, b) {
        return Err(Diagnostic::new(format!("{what} are one file: {why}"))
            .with_hint(hint)
            .into());
    }
    Ok(())
}

/// Writes a figure as SVG and/or PDF, each atomically; the PDF is made in memory first, so a
/// failed conversion leaves no file.
fn write_figure(
    svg_path: &Option<std::path::PathBuf>,
    pdf_path: &Option<std::path::PathBuf>,
    svg: &str,
) -> Result<(), Failure> {
    if let (Some(s), Some(p)) = (svg_path, pdf_path) {
        refuse_one_file(
            s,
            p,
            format!("--svg `{}` and --pdf `{}`", s.display(), p.display()),
            "one figure would overwrite the other",
            "give the SVG and the PDF different files",
        )?;
    }
    if let Some(path) = svg_path {
        write_output_file(path, svg)?;
    }
    if let Some(path) = pdf_path {
        let pdf = crate::report::plot::to_pdf(svg).map_err(|e| Failure::from(Diagnostic::new(e)))?;
        crate::report::output::write_file(path, pdf).map_err(|e| cannot_write(path, e))?;
    }
    Ok(())
}

fn inspect_cmd(a: &InspectArgs, config: &Config) -> Result<String, Failure> {
    if let Some(rows) = a.table {
        check_count("--table", rows, config.limits.max_table_rows, "max_table_rows")?;
    }
    let model = load_model(&a.model, "efold inspect models/pole-order-2-quadratic.toml", config)?;
    let ins = crate::drivers::inspect::inspect(&model, config, a.table)?;
    if a.svg.is_some() || a.pdf.is_some() {
        let svg = crate::drivers::inspect::figure(&model, &ins, &Default::default(), config, a.figure_width)?;
        write_figure(&a.svg, &a.pdf, &svg)?;
    }
    Ok(match a.format {
        Format::Json => format!("{}\n", serde_json::to_string_pretty(&ins).expect("serialisable report")),
        Format::Text => crate::drivers::inspect::text(&ins),
    })
}

/// Relativistic degrees of freedom at reheating when `--g-star` is not given: the Standard
/// Model's 106.75 above the electroweak scale (common practice).
const DEFAULT_G_STAR: f64 = 106.75;

/// A flag's value that is outside its valid range: the flag and value drawn with a caret under
/// the value, what the range is, and how to fix it.
fn bad_flag_value(flag: &str, value: &str, message: String, hint: &str) -> Failure {
    let text = format!("{flag} {value}");
    let d = Diagnostic::new(message)
        .with_span(
            crate::diag::Span::new(flag.len() + 1, text.len()),
            "not in the valid range",
        )
        .with_hint(hint);
    Failure::input(d.render(Some(&crate::diag::Source::new("command line", &text))))
}

/// A number that must be finite and inside `ok`, described by `range` in the message.
fn check_range(flag: &str, v: f64, ok: impl Fn(f64) -> bool, range: &str, hint: &str) -> Result<(), Failure> {
    if v.is_finite() && ok(v) {
        return Ok(());
    }
    let shown = crate::language::ir::format_number(v);
    Err(bad_flag_value(flag, &shown, format!("{flag} {shown}: {range}"), hint))
}

/// `--tolerance` of `golden check` and `watch`: a finite relative tolerance, 0 or more.
fn check_tolerance(v: f64) -> Result<(), Failure> {
    check_range(
        "--tolerance",
        v,
        |v| v >= 0.0,
        "a relative tolerance must be a finite number, 0 or more",
        "give e.g. --tolerance 1e-8 (0 asks for identical values)",
    )
}

/// A list of N_* (from `origin`: `--efolds`, or the model's `efolds` setting): each finite and
/// at least `config::MIN_EFOLDS`.
fn check_efolds_values(origin: &str, values: &[f64]) -> Result<(), Failure> {
    use crate::config::MIN_EFOLDS;
    let Some(i) = values.iter().position(|v| !(v.is_finite() && *v >= MIN_EFOLDS)) else {
        return Ok(());
    };
    let shown: Vec<String> = values.iter().map(|v| crate::language::ir::format_number(*v)).collect();
    let start = shown[..i].iter().map(|s| s.len() + 1).sum::<usize>();
    let d = Diagnostic::new(format!(
        "N_* = {} in {origin}: the e-folds before the end of inflation must be a finite number, {MIN_EFOLDS} or more",
        shown[i]
    ))
    .with_hint("the pivot usually leaves the horizon 50 to 60 e-folds before the end: --efolds 50,55,60");
    if !origin.starts_with("--") {
        return Err(d.into());
    }
    let text = format!("{origin} {}", shown.join(","));
    let at = origin.len() + 1 + start;
    let d = d.with_span(
        crate::diag::Span::new(at, at + shown[i].len()),
        "not in the valid range",
    );
    Err(Failure::input(
        d.render(Some(&crate::diag::Source::new("command line", &text))),
    ))
}

/// `--start-phi` and `--start-velocity`: finite, the velocity only with a start, and (with the
/// model) a velocity that leaves H^2 > 0.
fn check_start(phi: Option<f64>, velocity: Option<f64>) -> Result<(), Failure> {
    if let Some(p) = phi {
        check_range(
            "--start-phi",
            p,
            |_| true,
            "the start must be a finite field value",
            "give the field value to start the background at",
        )?;
    }
    if let Some(v) = velocity {
        if phi.is_none() {
            return Err(
                Diagnostic::new("--start-velocity is given without --start-phi, and would be ignored")
                    .with_hint("give --start-phi PHI with it, or leave both out to start on the slow-roll attractor")
                    .into(),
            );
        }
        check_range(
            "--start-velocity",
            v,
            |_| true,
            "the initial dphi/dN must be a finite number",
            "leave it out to take the slow-roll attractor's",
        )?;
    }
    Ok(())
}

/// The Friedmann equation in e-folds, H^2 = V / (3 - K (dphi/dN)^2 / 2) (M_p = 1; common
/// practice), needs K (dphi/dN)^2 < 6 where V > 0: a faster start has no real H.
fn check_start_velocity(model: &crate::model::Model, phi: f64, v: f64) -> Result<(), Failure> {
    let mut ev = model.evaluator();
    let pot = ev.eval(phi);
    let k = ev.output(1);
    if !(pot.is_finite() && k.is_finite() && pot > 0.0 && k > 0.0) {
        return Ok(()); // a start outside the model's domain is the exact route's own error
    }
    if k * v * v < 6.0 {
        return Ok(());
    }
    let max = (6.0 / k).sqrt();
    Err(bad_flag_value(
        "--start-velocity",
        &v.to_string(),
        format!(
            "--start-velocity {v} at {} = {phi} makes H^2 = V / (3 - K (dphi/dN)^2 / 2) <= 0: no real expansion rate",
            model.field()
        ),
        &format!("at this start |dphi/dN| must be below sqrt(6/K) = {max:.6e}"),
    ))
}

/// The flags of `predict` that make no sense alone, or together, or with these values.
fn check_predict_flags(a: &PredictArgs) -> Result<(), Failure> {
    check_efolds_values("--efolds", &a.efolds)?;
    let reheating = a.reheat.is_some() || a.reheat_w.is_some() || a.reheat_temp.is_some() || a.reheat_efolds.is_some();
    if reheating && !a.efolds.is_empty() {
        return Err(
            Diagnostic::new("--efolds is given together with reheating flags, which fix N_* themselves")
                .with_hint("leave out --efolds to have N_* from reheating, or the reheating flags to give N_*")
                .into(),
        );
    }
    if a.g_star.is_some() && !reheating {
        return Err(
            Diagnostic::new("--g-star is given without a reheating flag, and would be ignored")
                .with_hint("add `--reheat instant` or `--reheat-w W` with `--reheat-temp GEV` or `--reheat-efolds N`")
                .into(),
        );
    }
    if let Some(g) = a.g_star {
        check_range(
            "--g-star",
            g,
            |g| g > 0.0,
            "the relativistic degrees of freedom must be a finite number above 0",
            "the Standard Model above the electroweak scale has 106.75",
        )?;
    }
    if let Some(w) = a.reheat_w {
        check_range(
            "--reheat-w",
            w,
            |w| w > -1.0 / 3.0 && w <= 1.0,
            "the equation of state during reheating must lie in (-1/3, 1]: above -1/3, or it would still be inflation, and at most 1, the stiffest causal matter",
            "w = 0 is matter-like oscillation about a quadratic minimum, 1/3 radiation",
        )?;
    }
    if let Some(t) = a.reheat_temp {
        check_range(
            "--reheat-temp",
            t,
            |t| t > 0.0,
            "the reheating temperature must be a finite number of GeV above 0",
            "give e.g. --reheat-temp 1e9",
        )?;
    }
    if let Some(n) = a.reheat_efolds {
        use crate::config::MAX_REHEAT_EFOLDS;
        check_range(
            "--reheat-efolds",
            n,
            |n| (0.0..=MAX_REHEAT_EFOLDS).contains(&n),
            &format!("the e-folds of reheating must lie in [0, {MAX_REHEAT_EFOLDS}]: more would end reheating below the temperature of nucleosynthesis"),
            "give e.g. --reheat-efolds 10",
        )?;
    }
    if a.method != Method::Exact && (a.start_phi.is_some() || a.start_velocity.is_some()) {
        return Err(Diagnostic::new(
            "--start-phi and --start-velocity start the exact background, and would be ignored by slow roll",
        )
        .with_hint("add --method exact, or leave them out")
        .into());
    }
    check_start(a.start_phi, a.start_velocity)
}

/// The fewest N_* the exact route takes: aH must grow by ln(1/k_stop) + 2 TILT_STEP + 1 after
/// the pivot, so that the highest mode of the five-point stencil, k = k_* exp(2 TILT_STEP),
/// freezes (k/aH = k_stop) with the one e-fold of the freeze check before the end; and 4 e-folds
/// more, because aH grows at the rate 1 - eps_H, which falls to 0 over the last e-folds (with
/// the defaults 14.31; every shipped model integrates at that N_*, the quartic monomial not
/// below 13).
fn min_exact_efolds(settings: &crate::analysis::exact::Settings) -> f64 {
    (1.0 / settings.k_stop).ln() + 2.0 * crate::analysis::exact::TILT_STEP + 1.0 + 4.0
}

/// Whether N_* comes from `--efolds` or the model (not from reheating, which is checked
/// against the matching's own result).
fn opts_fix_n_star(a: &PredictArgs) -> bool {
    a.reheat.is_none() && a.reheat_w.is_none()
}

fn reheating_from(a: &PredictArgs) -> Result<Option<crate::analysis::reheating::Reheating>, Failure> {
    use crate::analysis::reheating::Reheating;
    let g_star = a.g_star.unwrap_or(DEFAULT_G_STAR);
    match (&a.reheat, a.reheat_w, a.reheat_temp, a.reheat_efolds) {
        (None, None, None, None) => Ok(None),
        (Some(s), None, None, None) if s == "instant" => Ok(Some(Reheating::Instant { g_star })),
        (None, Some(w), Some(t), None) => Ok(Some(Reheating::Temperature {
            w,
            t_reh_gev: t,
            g_star,
        })),
        (None, Some(w), None, Some(n)) => Ok(Some(Reheating::Efolds { w, n_reh: n, g_star })),
        _ => Err(Diagnostic::new("incomplete or conflicting reheating flags")
            .with_hint("`--reheat instant`, or `--reheat-w W` with one of `--reheat-temp GEV` and `--reheat-efolds N`")
            .into()),
    }
}

fn predict_cmd(a: &PredictArgs, config: &Config) -> Result<String, Failure> {
    check_efolds_count(&a.efolds, config)?;
    check_predict_flags(a)?;
    let model = load_model(&a.model, "efold predict models/pole-order-2-quadratic.toml", config)?;
    if let (Some(phi), Some(v)) = (a.start_phi, a.start_velocity) {
        check_start_velocity(&model, phi, v)?;
    }
    let data = match &a.data {
        Some(p) => crate::data::DataSet::load(p).map_err(Failure::input)?,
        None => crate::data::DataSet::builtin(),
    };
    let n_stars = if !a.efolds.is_empty() {
        a.efolds.clone()
    } else {
        model.spec.efolds.clone().unwrap_or_else(|| vec![50.0, 55.0, 60.0])
    };
    check_efolds_count(&n_stars, config)?;
    if a.efolds.is_empty() {
        check_efolds_values("the model's `efolds` setting", &n_stars)?;
    }
    let exact = (a.method == Method::Exact).then(|| crate::analysis::exact::Settings {
        start: a.start_phi.map(|p| (p, a.start_velocity)),
        ..Default::default()
    });
    if let Some(settings) = &exact {
        let min = min_exact_efolds(settings);
        if let Some(n) = n_stars.iter().find(|n| **n < min).filter(|_| opts_fix_n_star(a)) {
            return Err(Diagnostic::new(format!(
                "N_* = {n} is too few for --method exact: it needs N_* of at least {:.2}",
                (min * 100.0).ceil() / 100.0
            ))
            .with_hint(format!(
                "the modes around the pivot must leave the horizon and freeze (k/aH = {:e}) before the end: give --efolds {:.0} or more, or use slow roll",
                settings.k_stop,
                min.ceil()
            ))
            .into());
        }
    }
    let opts = crate::drivers::predict::Options {
        n_stars,
        branch: a.branch,
        second_order: a.second_order,
        reheating: reheating_from(a)?,
        data,
        exact,
    };
    let mut rep = crate::drivers::predict::predict(&model, &opts, config)?;
    if a.method == Method::SlowRoll {
        let limit = crate::config::SLOW_ROLL_WARN_EFOLDS;
        if let Some(p) = rep.predictions.iter().find(|p| p.n_star < limit) {
            rep.warnings.push(format!(
                "N_* = {} is below {limit}: slow roll is unreliable so close to the end of inflation (try --method exact)",
                p.n_star
            ));
        }
    }
    if a.svg.is_some() || a.pdf.is_some() {
        let ins = crate::drivers::inspect::inspect(&model, config, None)?;
        let mut marks = crate::drivers::inspect::FigureMarks::default();
        if let Some(p) = rep.predictions.first() {
            marks.points.push((p.phi_end, "end".to_string()));
        }
        for p in &rep.predictions {
            marks
                .points
                .push((p.phi_star, format!("$N$ = {}", crate::report::numfmt::typed(p.n_star))));
        }
        let svg = crate::drivers::inspect::figure(&model, &ins, &marks, config, a.figure_width)?;
        write_figure(&a.svg, &a.pdf, &svg)?;
    }
    Ok(match a.format {
        TableFormat::Json => format!("{}\n", serde_json::to_string_pretty(&rep).expect("serialisable report")),
        TableFormat::Csv => crate::drivers::predict::csv(&rep),
        TableFormat::Text => crate::drivers::predict::text(&rep),
    })
}

fn spectrum_cmd(a: &SpectrumArgs, config: &Config) -> Result<String, Failure> {
    check_count(
        "--points",
        a.points,
        config.limits.max_spectrum_points,
        "max_spectrum_points",
    )?;
    check_efolds_values("--efolds", &[a.efolds])?;
    check_start(a.start_phi, a.start_velocity)?;
    let model = load_model(&a.model, "efold spectrum models/pole-order-2-quadratic.toml", config)?;
    if let (Some(phi), Some(v)) = (a.start_phi, a.start_velocity) {
        check_start_velocity(&model, phi, v)?;
    }
    let data = match &a.data {
        Some(p) => crate::data::DataSet::load(p).map_err(Failure::input)?,
        None => crate::data::DataSet::builtin(),
    };
    let settings = crate::analysis::exact::Settings {
        start: a.start_phi.map(|p| (p, a.start_velocity)),
        ..Default::default()
    };
    check_count(
        "--points",
        a.points,
        config.limits.max_spectrum_points,
        "max_spectrum_points",
    )?;
    let k_star = data.pivot.k_mpc;
    // The largest k must still freeze before the end: N_* - ln(k/k_*) > ln(1/k_stop) + 1.
    let k_limit = k_star * (a.efolds - (1.0 / settings.k_stop).ln() - 1.5).exp();
    let k_max = a.k_max.unwrap_or_else(|| k_limit.min(1e14));
    if !(a.k_min > 0.0 && k_max > a.k_min && a.points >= 2 && a.efolds > 0.0) {
        return Err(Diagnostic::new("the k range is empty or the point count below 2")
            .with_hint("give 0 < --k-min < --k-max and --points 2 or more")
            .into());
    }
    if k_max > k_limit {
        return Err(Diagnostic::new(format!(
            "--k-max {} Mpc^-1 exits too close to the end of inflation to freeze (at most {} for N_* = {})",
            crate::report::numfmt::typed(k_max),
            crate::report::numfmt::number(k_limit),
            crate::report::numfmt::typed(a.efolds)
        ))
        .with_hint("lower --k-max, or raise --efolds")
        .into());
    }
    let needed = a.efolds + (k_star / a.k_min).ln().max(0.0) + settings.k_start.ln() + 4.0;
    let mut phi_at = |n: f64| -> Result<f64, crate::analysis::single::canonical::AnalysisError> {
        let opts = crate::drivers::predict::Options {
            n_stars: vec![n],
            branch: a.branch,
            data: data.clone(),
            ..Default::default()
        };
        Ok(crate::drivers::predict::predict(&model, &opts, config)?.predictions[0].phi_star)
    };
    let (_, run) = crate::analysis::exact::start_with_room(&model, needed, &settings, &mut phi_at)?;
    let n = a.points;
    let ks: Vec<f64> = (0..n)
        .map(|i| (a.k_min.ln() + (k_max.ln() - a.k_min.ln()) * i as f64 / (n - 1) as f64).exp())
        .collect();
    let sp = crate::analysis::exact::spectrum(&model, &run, a.efolds, &ks, data.a_s(), k_star, &settings)?;
    if a.svg.is_some() || a.pdf.is_some() {
        write_figure(
            &a.svg,
            &a.pdf,
            &crate::analysis::exact::figure(&sp, &model.spec.name, a.figure_width),
        )?;
    }
    Ok(match a.format {
        SpectrumFormat::Json => {
            let obj = serde_json::json!({
                "model": crate::drivers::inspect::ModelSummary::of(&model),
                "spectrum": sp,
            });
            format!("{}\n", serde_json::to_string_pretty(&obj).expect("serialisable"))
        }
        SpectrumFormat::Csv => crate::analysis::exact::csv(&sp),
        SpectrumFormat::Text => crate::analysis::exact::text(&sp, &model.spec.name),
    })
}

fn load_data(path: &Option<std::path::PathBuf>) -> Result<crate::data::DataSet, Failure> {
    match path {
        Some(p) => crate::data::DataSet::load(p).map_err(Failure::input),
        None => Ok(crate::data::DataSet::builtin()),
    }
}

fn scan_cmd(a: &ScanArgs, config: &Config) -> Result<String, Failure> {
    use std::io::IsTerminal;
    check_efolds_count(&a.efolds, config)?;
    // Compile once up front: a bad model is one error, not one per point.
    let model = load_model(
        &a.model,
        "efold scan models/pole-order-2-quadratic.toml --vary alpha=0.1:10:30:log",
        config,
    )?;
    let spec = model.spec.clone();
    let data = load_data(&a.data)?;
    if a.vary.len() > 2 {
        return Err(Diagnostic::new("at most two parameters can be varied at once")
            .with_hint("give --vary once or twice")
            .into());
    }
    check_vary_names(&a.vary)?;
    let limit = config.limits.max_axis_points;
    let axes = a
        .vary
        .iter()
        .map(|v| crate::drivers::scan::Axis::parse(v, &spec, a.points, limit))
        .collect::<Result<Vec<_>, _>>()
        .map_err(|e| {
            let hint = if e.contains("max_axis_points") {
                "give this parameter fewer values"
            } else {
                "write `--vary alpha=0.1:10:30:log`"
            };
            Failure::from(Diagnostic::new(e).with_hint(hint))
        })?;
    let total = check_grid_size(&axes, config)?;
    let shard = a
        .shard
        .as_deref()
        .map(crate::drivers::scan::Shard::parse)
        .transpose()
        .map_err(|e| Failure::from(Diagnostic::new(e)))?;
    let n_stars = if a.efolds.is_empty() {
        spec.efolds.clone().unwrap_or_else(|| vec![50.0, 55.0, 60.0])
    } else {
        a.efolds.clone()
    };
    check_efolds_count(&n_stars, config)?;
    if a.efolds.is_empty() {
        check_efolds_values("the model's `efolds` setting", &n_stars)?;
    } else {
        check_efolds_values("--efolds", &n_stars)?;
    }
    for fig in [&a.svg, &a.pdf] {
        let (Some(out), Some(svg)) = (&a.out, fig) else {
            continue;
        };
        refuse_one_file(
            out,
            svg,
            format!("--out `{}` and the figure `{}`", out.display(), svg.display()),
            "the figure would overwrite the table",
            "give the table and the figure different files",
        )?;
    }
    let provenance = shard.map(|s| {
        let range = s.range(total);
        crate::drivers::scan::Provenance {
            scan: crate::drivers::scan::definition_id(&spec, &axes, &n_stars, &data),
            shard: s.k,
            shards: s.n,
            points: [range.start, range.end],
            total,
            efolds: n_stars.clone(),
        }
    });
    let names: Vec<String> = axes.iter().map(|x| x.name.clone()).collect();
    let mut table = crate::drivers::scan::Table::new(a.format == ScanFormat::Json, provenance);
    let mut file = match &a.out {
        Some(path) => Some(crate::report::output::OutputFile::create(path).map_err(|e| cannot_write(path, e))?),
        None => None,
    };
    let mut emit = |text: &str| -> Result<(), Failure> {
        match (&mut file, &a.out) {
            (Some(f), Some(path)) => f.write(text).map_err(|e| cannot_write(path, e)),
            _ => print_out(text),
        }
    };
    emit(&table.start(&names))?;
    let (mut rows_done, mut failed) = (0usize, 0usize);
    // The figure needs every row; the table alone is streamed chunk by chunk.
    let mut kept: Vec<crate::drivers::scan::ScanRow> = Vec::new();
    let progress = std::io::stderr().is_terminal();
    crate::drivers::scan::run_chunks(&spec, &axes, &n_stars, &data, shard, config, progress, &mut |rows| {
        rows_done += rows.len();
        failed += rows.iter().filter(|r| r.result.is_err()).count();
        if a.svg.is_some() || a.pdf.is_some() {
            kept.extend_from_slice(rows);
        }
        emit(&table.rows(rows))
    })?;
    emit(&table.end())?;
    if failed > 0 {
        crate::report::output::stderr(&format!(
            "efold: warning: {failed} of {rows_done} rows failed; they keep their row with the error\n"
        ));
    }
    if a.svg.is_some() || a.pdf.is_some() {
        write_figure(
            &a.svg,
            &a.pdf,
            &crate::drivers::scan::figure(&spec.name, &axes, &kept, &data, a.figure_width),
        )?;
    }
    if let (Some(f), Some(path)) = (file, &a.out) {
        f.commit().map_err(|e| cannot_write(path, e))?;
    }
    Ok(String::new())
}

/// A count given on the command line, refused above its limit in `config::Limits`.
fn check_count(flag: &str, value: usize, limit: usize, field: &str) -> Result<(), Failure> {
    if value > limit {
        return Err(Diagnostic::new(format!(
            "`{flag} {value}` is above the limit, {limit} (config::Limits::{field})"
        ))
        .with_hint(format!("give {flag} {limit} or less"))
        .into());
    }
    Ok(())
}

/// A parameter varied twice would make a grid of repeated points.
fn check_vary_names(vary: &[String]) -> Result<(), Failure> {
    let names: Vec<&str> = vary
        .iter()
        .map(|v| v.split_once('=').map_or(v.as_str(), |(n, _)| n).trim())
        .collect();
    if names.len() == 2 && names[0] == names[1] {
        return Err(Diagnostic::new(format!("`--vary {}` is given twice", names[0]))
            .with_hint("vary each parameter once; to vary two, give two different names")
            .into());
    }
    Ok(())
}

/// The grid's point count, refused above `Limits::max_scan_points` (and when the product of the
/// axes overflows).
fn check_grid_size(axes: &[crate::drivers::scan::Axis], config: &Config) -> Result<usize, Failure> {
    let limit = config.limits.max_scan_points;
    let counts: Vec<String> = axes.iter().map(|a| a.values.len().to_string()).collect();
    match crate::drivers::scan::total_points(axes) {
        Some(n) if n <= limit => Ok(n),
        n => Err(Diagnostic::new(format!(
            "the grid has {} points ({}); at most {limit} (config::Limits::max_scan_points)",
            n.map_or("too many".to_string(), |n| n.to_string()),
            counts.join(" x ")
        ))
        .with_hint("use fewer values per parameter, or cut the scan with --shard K/N and several runs")
        .into()),
    }
}

/// A list of N_* longer than `Limits::max_efolds` is refused.
fn check_efolds_count(n_stars: &[f64], config: &Config) -> Result<(), Failure> {
    let limit = config.limits.max_efolds;
    if n_stars.len() > limit {
        return Err(Diagnostic::new(format!(
            "{} N_* values given; at most {limit} (config::Limits::max_efolds)",
            n_stars.len()
        ))
        .with_hint("give fewer values to --efolds")
        .into());
    }
    Ok(())
}

/// Reads a whole text file of at most `limit` bytes (`Limits::max_shard_bytes`), stopping at
/// `limit + 1` bytes so that an endless device cannot fill the memory.
fn read_bounded(path: &std::path::Path, limit: usize) -> Result<String, Failure> {
    use std::io::Read as _;
    let cannot = |e: std::io::Error| {
        Failure::from(
            Diagnostic::new(format!("cannot read `{}`: {e}", path.display()))
                .with_hint("give the shard files written by `efold scan --shard K/N`"),
        )
    };
    let file = std::fs::File::open(path).map_err(cannot)?;
    let mut bytes = Vec::new();
    file.take(limit as u64 + 1).read_to_end(&mut bytes).map_err(cannot)?;
    if bytes.len() > limit {
        return Err(Diagnostic::new(format!(
            "`{}` is larger than {limit} bytes (config::Limits::max_shard_bytes)",
            path.display()
        ))
        .with_hint("merge fewer, smaller shards at a time, or run the scan unsharded")
        .into());
    }
    String::from_utf8(bytes).map_err(|_| {
        Diagnostic::new(format!(
            "`{}` is not text (not UTF-8): not a scan shard",
            path.display()
        ))
        .with_hint("give the shard files written by `efold scan --shard K/N`")
        .into()
    })
}

fn merge_cmd(a: &MergeArgs, config: &Config) -> Result<String, Failure> {
    let mut texts = Vec::new();
    for f in &a.files {
        let t = read_bounded(f, config.limits.max_shard_bytes)?;
        texts.push((f.display().to_string(), t));
    }
    let merged = crate::drivers::scan::merge(&texts).map_err(|e| {
        Failure::from(
            Diagnostic::new(e)
                .with_hint("give every file of one `efold scan --shard K/N` run, K = 1..N, each once, as written"),
        )
    })?;
    match &a.out {
        Some(path) => {
            write_output_file(path, &merged)?;
            Ok(String::new())
        }
        None => Ok(merged),
    }
}

fn fit_cmd(a: &FitArgs, config: &Config) -> Result<String, Failure> {
    check_efolds_values("--efolds", &[a.efolds])?;
    let model = load_model(
        &a.model,
        "efold fit models/pole-order-2-quadratic.toml --free alpha --target r=0.01",
        config,
    )?;
    let data = load_data(&a.data)?;
    let targets = a
        .targets
        .iter()
        .map(|t| crate::drivers::fit::Target::parse(t))
        .collect::<Result<Vec<_>, _>>()
        .map_err(|e| Failure::from(Diagnostic::new(e)))?;
    let f = crate::drivers::fit::fit(
        &model.spec,
        &a.free,
        &targets,
        a.efolds,
        &data,
        config,
        &Default::default(),
    )?;
    Ok(match a.format {
        Format::Json => format!("{}\n", serde_json::to_string_pretty(&f).expect("serialisable")),
        Format::Text => crate::drivers::fit::text(&f),
    })
}

fn golden_cmd(a: &GoldenArgs, config: &Config) -> Result<String, Failure> {
    use crate::drivers::golden::{diff, golden_path, model_files, predict_file};
    use std::fmt::Write as _;
    let (dir, data) = match &a.action {
        GoldenAction::Write { dir, data } | GoldenAction::Check { dir, data, .. } => (dir, data),
    };
    if let GoldenAction::Check { tolerance, .. } = &a.action {
        check_tolerance(*tolerance)?;
    }
    let base = crate::drivers::predict::Options {
        data: load_data(data)?,
        ..Default::default()
    };
    let files = model_files(dir).map_err(|e| Failure::from(Diagnostic::new(e)))?;
    if files.is_empty() {
        return Err(Diagnostic::new(format!("no model files (*.toml) under `{}`", dir.display())).into());
    }
    let mut out = String::new();
    match &a.action {
        GoldenAction::Write { .. } => {
            for f in &files {
                let rep =
                    predict_file(f, &base, config).map_err(|e| Failure::input(format!("{}: {e}", f.display())))?;
                let text = format!("{}\n", serde_json::to_string_pretty(&rep).expect("serialisable"));
                write_output_file(&golden_path(f), &text)?;
                let _ = writeln!(out, "wrote {}", golden_path(f).display());
            }
            Ok(out)
        }
        GoldenAction::Check { tolerance, .. } => {
            let mut drifted = 0;
            for f in &files {
                let g = golden_path(f);
                let old = match std::fs::read_to_string(&g) {
                    Ok(t) => serde_json::from_str::<serde_json::Value>(&t).ok(),
                    Err(_) => None,
                };
                let Some(old) = old else {
                    drifted += 1;
                    let _ = writeln!(
                        out,
                        "{}: no readable golden file {} (run `efold golden write`)",
                        f.display(),
                        g.display()
                    );
                    continue;
                };
                match predict_file(f, &base, config) {
                    Err(e) => {
                        drifted += 1;
                        let _ = writeln!(out, "{}: now fails to predict:\n{e}", f.display());
                    }
                    Ok(rep) => {
                        let new = serde_json::to_value(&rep).expect("serialisable");
                        let d = diff(&old, &new, *tolerance);
                        if d.is_empty() {
                            let _ = writeln!(out, "{}: unchanged", f.display());
                        } else {
                            drifted += 1;
                            let _ = writeln!(out, "{}: {} value(s) drifted", f.display(), d.drifts.len());
                            for line in d.lines() {
                                let _ = writeln!(out, "{line}");
                            }
                        }
                    }
                }
            }
            if drifted > 0 {
                return Err(Failure::drifted(format!(
                    "{drifted} of {} model(s) drifted beyond {}\n{out}",
                    files.len(),
                    crate::report::numfmt::typed(*tolerance)
                )));
            }
            Ok(out)
        }
    }
}

fn watch_cmd(a: &WatchArgs, config: &Config) -> Result<String, Failure> {
    use crate::drivers::golden::{diff, model_files, predict_file};
    use notify::{RecursiveMode, Watcher};
    check_tolerance(a.tolerance)?;
    let base = crate::drivers::predict::Options::default();
    let files = || -> Result<Vec<std::path::PathBuf>, Failure> {
        if a.path.is_dir() {
            model_files(&a.path).map_err(|e| Failure::from(Diagnostic::new(e)))
        } else {
            Ok(vec![a.path.clone()])
        }
    };
    let mut last: std::collections::BTreeMap<std::path::PathBuf, Result<serde_json::Value, String>> =
        Default::default();
    let round = |last: &mut std::collections::BTreeMap<_, _>, first: bool| -> Result<(), Failure> {
        for f in files()? {
            let now = predict_file(&f, &base, config).map(|r| serde_json::to_value(&r).expect("serialisable"));
            let line = match (last.get(&f), &now) {
                (_, Err(e)) => format!("{}: fails to predict\n{e}", f.display()),
                (Some(Ok(old)), Ok(new)) => {
                    let d = diff(old, new, a.tolerance);
                    if d.is_empty() {
                        if first {
                            format!("{}: predicted", f.display())
                        } else {
                            continue;
                        }
                    } else {
                        let mut s = format!("{}: {} value(s) changed", f.display(), d.drifts.len());
                        for line in d.lines() {
                            s.push('\n');
                            s.push_str(&line);
                        }
                        s
                    }
                }
                (_, Ok(new)) => {
                    let p = &new["predictions"];
                    let summary: Vec<String> = p
                        .as_array()
                        .into_iter()
                        .flatten()
                        .map(|x| {
                            format!(
                                "N_* = {}: n_s = {}, r = {}",
                                crate::report::numfmt::typed(x["n_star"].as_f64().unwrap_or(f64::NAN)),
                                crate::report::numfmt::number(x["n_s"].as_f64().unwrap_or(f64::NAN)),
                                crate::report::numfmt::number(x["r"].as_f64().unwrap_or(f64::NAN))
                            )
                        })
                        .collect();
                    format!("{}: {}", f.display(), summary.join("; "))
                }
            };
            print_out(&format!("{line}\n"))?;
            last.insert(f, now);
        }
        Ok(())
    };
    round(&mut last, true)?;
    let (tx, rx) = std::sync::mpsc::channel();
    let mut watcher = notify::recommended_watcher(move |ev: notify::Result<notify::Event>| {
        let _ = tx.send(ev);
    })
    .map_err(|e| Failure::from(Diagnostic::new(format!("cannot watch `{}`: {e}", a.path.display()))))?;
    watcher
        .watch(&a.path, RecursiveMode::Recursive)
        .map_err(|e| Failure::from(Diagnostic::new(format!("cannot watch `{}`: {e}", a.path.display()))))?;
    print_out(&format!("watching {} (interrupt to stop)\n", a.path.display()))?;
    let mut rounds = 0;
    while let Ok(ev) = rx.recv() {
        let relevant = ev
            .map(|e| e.paths.iter().any(|p| p.extension().is_some_and(|x| x == "toml")))
            .unwrap_or(false);
        if !relevant {
            continue;
        }
        // let a burst of events (an editor's save) settle
        std::thread::sleep(std::time::Duration::from_millis(150));
        while rx.try_recv().is_ok() {}
        round(&mut last, false)?;
        rounds += 1;
        if a.exit_after.is_some_and(|n| rounds >= n) {
            break;
        }
    }
    Ok(String::new())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn merge_reads_at_most_its_limit() {
        let path = std::env::temp_dir().join(format!("efold-bounded-{}.csv", std::process::id()));
        std::fs::write(&path, "0123456789").unwrap();
        assert_eq!(read_bounded(&path, 10).unwrap(), "0123456789");
        let err = read_bounded(&path, 9).unwrap_err();
        assert_eq!(err.code, 2);
        assert!(err.message.contains("larger than 9 bytes"), "{}", err.message);
        std::fs::remove_file(&path).unwrap();
        // an endless device stops at the limit
        if std::path::Path::new("/dev/zero").exists() {
            let err = read_bounded(std::path::Path::new("/dev/zero"), 1 << 16).unwrap_err();
            assert!(err.message.contains("max_shard_bytes"), "{}", err.message);
        }
    }
}
