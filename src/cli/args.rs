//! The arguments of every command, as plain data (clap derives the parser and the help).

use clap::{Subcommand, ValueEnum};

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
