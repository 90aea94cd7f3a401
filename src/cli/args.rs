//! The arguments of every command, as plain data (clap derives the parser and the help).
//!
//! Options that several commands share are defined once, as groups flattened into each
//! command's arguments: [`ModelArgs`] (the model, from a file or flags), [`EfoldsArgs`] (a list
//! of N_*), [`DataArgs`] (the data file), [`OutArgs`] (an output file) and [`FigureArgs`] (the
//! figure files and width). The output format stays with each command: each has its own set
//! of formats. A flag sits in the help where
//! its group is flattened; where a command describes a shared flag in its own words it says so
//! with `mut_arg` on its struct, so the flag keeps one definition.

use clap::{Subcommand, ValueEnum};
use std::path::PathBuf;

/// `efold completions`.
#[derive(Debug, clap::Args)]
pub struct CompletionsArgs {
    /// The shell to write the completion script for.
    #[arg(value_enum)]
    pub(crate) shell: clap_complete::Shell,
}

/// `efold man`.
#[derive(Debug, clap::Args)]
pub struct ManArgs {
    /// One command's page (`scan`, `golden-write`) [default: efold's own page].
    #[arg(value_name = "COMMAND")]
    pub(crate) page: Option<String>,
    /// Write every page into this directory instead (efold.1 and efold-COMMAND.1, each
    /// atomically).
    #[arg(long, value_name = "DIR", conflicts_with = "page")]
    pub(crate) out: Option<std::path::PathBuf>,
}

/// `efold golden`.
#[derive(Debug, clap::Args)]
pub struct GoldenArgs {
    /// What to do.
    #[command(subcommand)]
    pub(crate) action: GoldenAction,
}

/// `efold golden write|check`.
#[derive(Debug, Subcommand)]
pub enum GoldenAction {
    /// Predict every model file under DIR and write NAME.predictions.json beside it (atomically).
    Write(GoldenWriteArgs),
    /// Recompute and report every prediction that moved beyond the tolerance; exit code 1 if any.
    Check(GoldenCheckArgs),
}

/// `efold golden write`.
#[derive(Debug, clap::Args)]
#[command(mut_arg("data", |a| a.help("A data file [default: the built-in one]")))]
pub struct GoldenWriteArgs {
    /// The directory of model files.
    pub(crate) dir: PathBuf,
    #[command(flatten)]
    pub(crate) data: DataArgs,
}

/// `efold golden check`.
#[derive(Debug, clap::Args)]
#[command(mut_arg("data", |a| a.help("A data file [default: the built-in one]")))]
pub struct GoldenCheckArgs {
    /// The directory of model files.
    pub(crate) dir: PathBuf,
    /// Relative tolerance.
    #[arg(long, default_value = "1e-8", allow_hyphen_values = true)]
    pub(crate) tolerance: f64,
    #[command(flatten)]
    pub(crate) data: DataArgs,
}

/// `efold watch`.
#[derive(Debug, clap::Args)]
pub struct WatchArgs {
    /// A model file, or a directory of them.
    pub(crate) path: PathBuf,
    /// Report changes beyond this relative size.
    #[arg(long, default_value = "1e-10", allow_hyphen_values = true)]
    pub(crate) tolerance: f64,
    /// Stop after this many rounds of changes (for scripts; default: run until interrupted).
    #[arg(long, value_name = "N", allow_negative_numbers = true)]
    pub(crate) exit_after: Option<usize>,
}

/// `efold fit`.
#[derive(Debug, clap::Args)]
pub struct FitArgs {
    #[command(flatten)]
    pub(crate) model: ModelArgs,
    /// A parameter to solve for (repeatable; at most as many as targets). Its value in the
    /// model (or --param) is the starting point. On a model of several fields also a start
    /// coordinate, start.FIELD.
    #[arg(long = "free", value_name = "NAME", required = true)]
    pub(crate) free: Vec<String>,
    /// A target, NAME=VALUE with NAME one of n_s, r, alpha_s, A_s (repeatable).
    #[arg(
        long = "target",
        value_name = "NAME=VALUE",
        required = true,
        allow_hyphen_values = true
    )]
    pub(crate) targets: Vec<String>,
    /// e-folds between the pivot's exit and the end of inflation.
    #[arg(long, default_value_t = crate::config::DEFAULT_N_STAR, allow_hyphen_values = true)]
    pub(crate) efolds: f64,
    #[command(flatten)]
    pub(crate) data: DataArgs,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub(crate) format: Format,
}

/// `efold scan`.
#[derive(Debug, clap::Args)]
#[command(mut_arg("efolds", |a| a.help("N_* values, comma-separated [default: the model's setting, or 50,55,60]")))]
#[command(mut_arg("svg", |a| a.help("Write the n_s-r figure to this SVG file")))]
pub struct ScanArgs {
    #[command(flatten)]
    pub(crate) model: ModelArgs,
    /// A parameter to vary: NAME=LO:HI:COUNT, `:log` appended for a logarithmic grid, or NAME
    /// alone for the model file's `[scan]` range. Once or twice. A NAME the model does not
    /// declare is declared (it must appear in the model's expressions). On a model of several
    /// fields also a start coordinate, start.FIELD=LO:HI:COUNT.
    #[arg(long, value_name = "NAME=LO:HI:COUNT[:log]", required = true)]
    pub(crate) vary: Vec<String>,
    #[command(flatten)]
    pub(crate) efolds: EfoldsArgs,
    /// Points for a parameter given by name alone.
    #[arg(long, default_value_t = 20, allow_negative_numbers = true)]
    pub(crate) points: usize,
    /// Compute only the K-th of N slices of the grid (for job arrays); join with `efold merge`.
    /// `auto/N` takes K from the job array's task id (SLURM_ARRAY_TASK_ID, PBS_ARRAY_INDEX,
    /// PBS_ARRAYID, SGE_TASK_ID or LSB_JOBINDEX, counted from the array's first index).
    #[arg(long, value_name = "K/N|auto/N", allow_hyphen_values = true)]
    pub(crate) shard: Option<String>,
    /// Output format.
    #[arg(long, value_enum, default_value_t = ScanFormat::Csv)]
    pub(crate) format: ScanFormat,
    #[command(flatten)]
    pub(crate) out: OutArgs,
    #[command(flatten)]
    pub(crate) figure: FigureArgs,
    #[command(flatten)]
    pub(crate) threads: ThreadsArgs,
    #[command(flatten)]
    pub(crate) data: DataArgs,
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
#[command(mut_arg("out", |a| a.help("Write the merged table here (atomically) instead of standard output")))]
pub struct MergeArgs {
    /// The shard files (all CSV or all JSON).
    #[arg(required = true)]
    pub(crate) files: Vec<PathBuf>,
    #[command(flatten)]
    pub(crate) out: OutArgs,
}

/// `efold spectrum`.
#[derive(Debug, clap::Args)]
#[command(mut_arg("svg", |a| a.help("Write a figure of both spectra, with the slow-roll estimate, to this SVG file")))]
pub struct SpectrumArgs {
    #[command(flatten)]
    pub(crate) model: ModelArgs,
    /// e-folds between the pivot's exit and the end of inflation (eps_H = 1).
    #[arg(long, default_value_t = crate::config::DEFAULT_N_STAR, allow_hyphen_values = true)]
    pub(crate) efolds: f64,
    /// Smallest k, in Mpc^-1.
    #[arg(long, default_value = "1e-4", allow_hyphen_values = true)]
    pub(crate) k_min: f64,
    /// Largest k, in Mpc^-1 [default: 1e14, or less if modes would exit too near the end].
    #[arg(long, allow_hyphen_values = true)]
    pub(crate) k_max: Option<f64>,
    /// Number of k values, evenly spaced in ln k.
    #[arg(long, default_value_t = 60, allow_negative_numbers = true)]
    pub(crate) points: usize,
    /// Use this branch (1-based), as in `predict`.
    #[arg(long, value_name = "K", allow_negative_numbers = true)]
    pub(crate) branch: Option<usize>,
    /// Start the background at this field value instead of on the slow-roll attractor.
    #[arg(long, value_name = "PHI", allow_hyphen_values = true)]
    pub(crate) start_phi: Option<f64>,
    /// With --start-phi: the initial dphi/dN [default: the slow-roll attractor's].
    #[arg(long, value_name = "DPHI_DN", allow_hyphen_values = true)]
    pub(crate) start_velocity: Option<f64>,
    #[command(flatten)]
    pub(crate) threads: ThreadsArgs,
    #[command(flatten)]
    pub(crate) data: DataArgs,
    /// Output format.
    #[arg(long, value_enum, default_value_t = SpectrumFormat::Text)]
    pub(crate) format: SpectrumFormat,
    #[command(flatten)]
    pub(crate) figure: FigureArgs,
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
    /// Slow-roll delta-N on the exact background, without modes (models of several fields).
    DeltaN,
}

/// `efold predict`.
#[derive(Debug, clap::Args)]
#[command(mut_arg("data", |a| a.help("A data file of constraints and constants [default: the built-in data/planck2018-bk18.toml]")))]
#[command(mut_arg("svg", |a| a.help("Write a figure of V with the end of inflation and the pivot points to this SVG file")))]
pub struct PredictArgs {
    #[command(flatten)]
    pub(crate) model: ModelArgs,
    #[command(flatten)]
    pub(crate) efolds: EfoldsArgs,
    /// Use this branch (1-based, in ascending field position) [default: the one at larger field
    /// values that gives the e-folds].
    #[arg(long, value_name = "K", allow_negative_numbers = true)]
    pub(crate) branch: Option<usize>,
    /// Second-order slow-roll observables (Hubble-flow expansion).
    #[arg(long)]
    pub(crate) second_order: bool,
    /// How to compute the observables: the slow-roll formulas, the exact background and
    /// Mukhanov–Sasaki spectra (N_* then counts from eps_H = 1), or, for several fields, the
    /// slow-roll delta-N alone.
    #[arg(long, value_enum, default_value_t = Method::SlowRoll)]
    pub(crate) method: Method,
    /// With --method exact: start the background at this field value instead of on the
    /// slow-roll attractor well before the pivot.
    #[arg(long, value_name = "PHI", allow_hyphen_values = true)]
    pub(crate) start_phi: Option<f64>,
    /// With --start-phi: the initial dphi/dN [default: the slow-roll attractor's].
    #[arg(long, value_name = "DPHI_DN", allow_hyphen_values = true)]
    pub(crate) start_velocity: Option<f64>,
    /// Fix N_* from reheating: `instant` (radiation right after inflation).
    #[arg(long, value_name = "instant")]
    pub(crate) reheat: Option<String>,
    /// Equation of state during reheating (with --reheat-temp or --reheat-efolds).
    #[arg(long, value_name = "W", allow_hyphen_values = true)]
    pub(crate) reheat_w: Option<f64>,
    /// Reheating temperature in GeV.
    #[arg(long, value_name = "GEV", allow_hyphen_values = true)]
    pub(crate) reheat_temp: Option<f64>,
    /// e-folds of reheating.
    #[arg(long, value_name = "N", allow_hyphen_values = true)]
    pub(crate) reheat_efolds: Option<f64>,
    /// Relativistic degrees of freedom at reheating (with a reheating flag) [default: 106.75].
    #[arg(long, value_name = "G", allow_hyphen_values = true)]
    pub(crate) g_star: Option<f64>,
    #[command(flatten)]
    pub(crate) data: DataArgs,
    /// Output format.
    #[arg(long, value_enum, default_value_t = TableFormat::Text)]
    pub(crate) format: TableFormat,
    #[command(flatten)]
    pub(crate) figure: FigureArgs,
}

/// `efold basin`.
#[derive(Debug, clap::Args)]
#[command(mut_arg("svg", |a| a.help("Write the basin map and the n_s-r points of the inflating starts to this SVG file")))]
#[command(mut_arg("efolds", |a| a.help("N_* values at which n_s and r are given, comma-separated [default: 55]")))]
pub struct BasinArgs {
    #[command(flatten)]
    pub(crate) model: ModelArgs,
    /// A field to sample: FIELD=LO:HI:COUNT, `:log` appended for a logarithmic grid (with
    /// --random the count is not used). Repeatable, once per field at most; fields not sampled
    /// stay at the model's [start].
    #[arg(
        long,
        value_name = "FIELD=LO:HI:COUNT[:log]",
        required = true,
        allow_hyphen_values = true
    )]
    pub(crate) sample: Vec<String>,
    /// The velocity at every start: the slow-roll attractor's, or rest.
    #[arg(long, value_enum, default_value_t = BasinVelocity::Attractor, conflicts_with = "kinetic_ratio")]
    pub(crate) velocity: BasinVelocity,
    /// The velocity set by X = kinetic / potential energy at the start, sampled LO:HI:COUNT
    /// (`:log` appended for a logarithmic grid), along --direction.
    #[arg(long, value_name = "LO:HI:COUNT[:log]", allow_hyphen_values = true)]
    pub(crate) kinetic_ratio: Option<String>,
    /// With --kinetic-ratio: along minus the gradient (down), plus it (up), or each start both.
    #[arg(long, value_enum, default_value_t = BasinDirection::Down, requires = "kinetic_ratio")]
    pub(crate) direction: BasinDirection,
    /// N random starts, uniform in the sampled ranges, instead of the grid.
    #[arg(long, value_name = "N", allow_negative_numbers = true)]
    pub(crate) random: Option<usize>,
    /// The seed of --random.
    #[arg(long, default_value_t = 1, requires = "random", allow_negative_numbers = true)]
    pub(crate) seed: u64,
    /// e-folds a start must inflate for the outcome `enough`.
    #[arg(long, default_value_t = 60.0, allow_hyphen_values = true)]
    pub(crate) need: f64,
    #[command(flatten)]
    pub(crate) efolds: EfoldsArgs,
    /// Compute only the K-th of N slices of the starts (for job arrays); join with `efold basin-merge`.
    /// `auto/N` takes K from the job array's task id, as for `scan`.
    #[arg(long, value_name = "K/N|auto/N", allow_hyphen_values = true)]
    pub(crate) shard: Option<String>,
    /// Output format.
    #[arg(long, value_enum, default_value_t = TableFormat::Text)]
    pub(crate) format: TableFormat,
    #[command(flatten)]
    pub(crate) out: OutArgs,
    #[command(flatten)]
    pub(crate) figure: FigureArgs,
    #[command(flatten)]
    pub(crate) threads: ThreadsArgs,
    #[command(flatten)]
    pub(crate) data: DataArgs,
}

/// `efold basin-merge`.
#[derive(Debug, clap::Args)]
#[command(mut_arg("out", |a| a.help("Write the merged output here (atomically) instead of standard output")))]
pub struct BasinMergeArgs {
    /// The shard files (JSON or CSV) of one `efold basin --shard K/N` run.
    #[arg(required = true)]
    pub(crate) files: Vec<PathBuf>,
    #[command(flatten)]
    pub(crate) out: OutArgs,
}

/// The velocity of `efold basin --velocity`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum BasinVelocity {
    /// The slow-roll attractor's at the start.
    Attractor,
    /// At rest.
    Rest,
}

/// `efold basin --direction`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum BasinDirection {
    /// Along minus the gradient of V.
    Down,
    /// Along the gradient.
    Up,
    /// Each start twice, down then up.
    Both,
}

/// The model: a TOML file, or given inline; flags override the file.
#[derive(Debug, clap::Args)]
pub struct ModelArgs {
    /// A model file (TOML; see README for the format).
    #[arg(value_name = "MODEL.toml")]
    pub(crate) model: Option<PathBuf>,
    /// The potential V(FIELD).
    #[arg(long, value_name = "EXPR", allow_hyphen_values = true)]
    pub(crate) potential: Option<String>,
    /// The kinetic function K(FIELD) in L = 1/2 K (d FIELD)^2 - V [default: 1].
    #[arg(long, value_name = "EXPR", allow_hyphen_values = true)]
    pub(crate) kinetic: Option<String>,
    /// A parameter, NAME=VALUE (VALUE may be an expression such as 1/3). Repeatable.
    #[arg(long = "param", value_name = "NAME=VALUE")]
    pub(crate) params: Vec<String>,
    /// The field variable's name [default: phi].
    #[arg(long, value_name = "NAME")]
    pub(crate) field: Vec<String>,
    /// A metric component of a model of several fields (`--field` repeated): `x=EXPR` for
    /// G_xx, `x y=EXPR` for G_xy (missing off-diagonal entries are 0). Repeatable.
    #[arg(long, value_name = "FIELDS=EXPR", allow_hyphen_values = true, hide = true)]
    pub(crate) metric: Vec<String>,
    /// The start of a model of several fields: `x=VALUE` for each field. Repeatable.
    #[arg(long, value_name = "FIELD=VALUE", allow_hyphen_values = true, hide = true)]
    pub(crate) start: Vec<String>,
    /// The field interval to consider: two expressions; -inf and inf allowed.
    #[arg(long, num_args = 2, value_names = ["LO", "HI"], allow_hyphen_values = true)]
    pub(crate) range: Option<Vec<String>>,
}

/// A list of N_* (`predict`, `scan`); empty when not given, and then the model's setting or
/// [`crate::config::DEFAULT_N_STARS`] applies.
#[derive(Debug, clap::Args)]
pub struct EfoldsArgs {
    /// e-folds between the pivot's exit and the end of inflation, comma-separated
    /// [default: the model's `efolds` setting, or 50,55,60].
    #[arg(long, value_delimiter = ',', value_name = "N,N,...", allow_hyphen_values = true)]
    pub(crate) efolds: Vec<f64>,
}

/// The worker threads of a parallel command (`scan`, `spectrum`, `basin`).
#[derive(Debug, clap::Args)]
pub struct ThreadsArgs {
    /// Run on N worker threads, N >= 1; the output does not depend on N [default: one per core].
    #[arg(long, value_name = "N", allow_hyphen_values = true)]
    pub(crate) threads: Option<String>,
}

/// The data file of constraints and constants.
#[derive(Debug, clap::Args)]
pub struct DataArgs {
    /// A data file of constraints and constants [default: the built-in one].
    #[arg(long, value_name = "FILE")]
    pub(crate) data: Option<PathBuf>,
}

/// A file to write a command's table to instead of standard output.
#[derive(Debug, clap::Args)]
pub struct OutArgs {
    /// Write the table to this file (atomically) instead of standard output.
    #[arg(long, value_name = "FILE")]
    pub(crate) out: Option<PathBuf>,
}

/// A figure: SVG and/or PDF files and the width.
#[derive(Debug, clap::Args)]
pub struct FigureArgs {
    /// Write the figure to this SVG file.
    #[arg(long, value_name = "FILE")]
    pub(crate) svg: Option<PathBuf>,
    /// Write the same figure as PDF, fonts embedded, to this file.
    #[arg(long, value_name = "FILE")]
    pub(crate) pdf: Option<PathBuf>,
    /// Figure width: single (8.6 cm), double (17.8 cm) or a number of centimetres.
    #[arg(long, value_name = "single|double|CM", default_value = "single", value_parser = crate::report::plot::parse_figure_width, allow_hyphen_values = true)]
    pub(crate) figure_width: f64,
}

impl FigureArgs {
    /// Whether a figure is asked for.
    pub(crate) fn wanted(&self) -> bool {
        self.svg.is_some() || self.pdf.is_some()
    }
}

/// `efold inspect`.
#[derive(Debug, clap::Args)]
#[command(mut_arg("svg", |a| a.help("Write a figure of V against the field and against chi to this SVG file (several fields: V over a plane of two fields, with the trajectory)")))]
pub struct InspectArgs {
    #[command(flatten)]
    pub(crate) model: ModelArgs,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub(crate) format: Format,
    /// Add a table of (phi, chi, V) with this many rows.
    #[arg(long, value_name = "ROWS", allow_negative_numbers = true)]
    pub(crate) table: Option<usize>,
    /// With --svg or --pdf on a model of several fields: the two fields of the figure's plane,
    /// the others held at their start values [default: the first two fields].
    #[arg(long, value_name = "X,Y")]
    pub(crate) plane: Option<String>,
    #[command(flatten)]
    pub(crate) figure: FigureArgs,
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
    pub(crate) params: Vec<String>,
    /// The field variable's name [default: phi, or the name given to --at].
    #[arg(long, value_name = "NAME")]
    pub(crate) field: Option<String>,
}

/// `efold eval`.
#[derive(Debug, clap::Args)]
pub struct EvalArgs {
    /// The expression, e.g. '1 - tanh(phi/sqrt(6*alpha))^2' (a leading minus is part of it).
    #[arg(allow_hyphen_values = true)]
    pub(crate) expr: String,
    /// The point, FIELD=VALUE (VALUE may be an expression of the parameters).
    #[arg(long, value_name = "FIELD=VALUE", allow_hyphen_values = true)]
    pub(crate) at: String,
    /// Highest derivative to report (0 to 8).
    #[arg(long, default_value_t = 1, allow_negative_numbers = true)]
    pub(crate) order: usize,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub(crate) format: Format,
    #[command(flatten)]
    pub(crate) scope: ScopeArgs,
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
    pub(crate) expr: String,
    /// Stages to show (repeatable, or comma-separated) [default: all].
    #[arg(long, value_enum, value_delimiter = ',')]
    pub(crate) emit: Vec<Emit>,
    /// Highest symbolic derivative to show.
    #[arg(long, default_value_t = 2, allow_negative_numbers = true)]
    pub(crate) order: usize,
    /// A parameter, NAME=VALUE (repeatable). The views are symbolic, so the value is only
    /// checked; names used in EXPR but not given here are shown as parameters too.
    #[arg(long = "param", value_name = "NAME=VALUE")]
    pub(crate) params: Vec<String>,
    /// The field variable's name, the variable of the derivatives [default: phi].
    #[arg(long, value_name = "NAME")]
    pub(crate) field: Option<String>,
}
