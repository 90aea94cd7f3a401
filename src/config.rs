//! Limits and tolerances, in one place, with documented defaults.
//!
//! Every stage that can be driven by hostile or merely large input takes its limits from here, so
//! that a limit is changed in one spot and named in one error message.

/// Limits on the expression language.
#[derive(Debug, Clone, PartialEq)]
pub struct Limits {
    /// Maximum length of one expression, in bytes. Default 10 000.
    pub max_len: usize,
    /// Maximum nesting of parentheses and function calls. Default 64: far beyond any real model
    /// (the shipped ones stay under 8), and well within a 2 MiB thread stack.
    pub max_nesting: usize,
    /// Maximum height of the syntax tree (a chain `x+x+...` or `2^2^...` counts one level per
    /// operator). Default 512.
    pub max_depth: usize,
    /// Maximum size of a model or data file, in bytes. Default 1 MiB (1 048 576): the shipped
    /// files are under 2 KiB. At most this many bytes and one more are read, so a device such
    /// as `/dev/zero` or a huge file is an error, not an exhausted memory.
    pub max_file_bytes: usize,
    /// Most k values of `efold spectrum --points`. Default 10 000: each mode is a full
    /// Mukhanov–Sasaki integration (about 2 ms), so this is some 10 s on two cores and a table
    /// of a few MB, far finer than any figure needs.
    pub max_spectrum_points: usize,
    /// Most values of one scan axis (`--vary NAME=LO:HI:COUNT`, or `--points` with a name
    /// alone). Default 1 000 000: 8 MB of values, more than `max_scan_points` allows with two
    /// axes of useful size.
    pub max_axis_points: usize,
    /// Most points of a scan's grid, the product of its axes (checked without overflow).
    /// Default 10 000 000: at about 16 us a point on two cores, some 3 minutes per N_*; rows are
    /// streamed out in chunks, so memory stays bounded. Larger jobs are cut with `--shard`.
    pub max_scan_points: usize,
    /// Most rows of `efold inspect --table`. Default 100 000 (a few MB of text).
    pub max_table_rows: usize,
    /// Highest order of `efold compile --emit derivatives --order`. Default 8, the highest order
    /// of the Taylor jets (`tape::MAX_ORDER`) and of `eval --order`: printed symbolic derivatives
    /// grow quickly with the order.
    pub max_symbolic_order: usize,
    /// Most N_* values in one `--efolds` list or a model's `efolds` setting. Default 1000: every
    /// value is a full prediction per point, and a scan holds `scan::CHUNK_ROWS` rows at a time.
    pub max_efolds: usize,
    /// Largest file `efold merge` reads, in bytes. Default 1 GiB: merge holds its inputs in
    /// memory, and a device that never ends (`/dev/zero`) must not fill it. A larger scan is
    /// merged in parts, or written unsharded.
    pub max_shard_bytes: usize,
    /// Most worker threads `--threads` may ask for (`scan`, `spectrum`, `basin`). Default 256:
    /// far more than the cores of any one node, and each thread has its own stack.
    pub max_threads: usize,
}

impl Default for Limits {
    fn default() -> Self {
        Limits {
            max_len: 10_000,
            max_nesting: 64,
            max_depth: 512,
            max_file_bytes: 1 << 20,
            max_spectrum_points: 10_000,
            max_axis_points: 1_000_000,
            max_scan_points: 10_000_000,
            max_table_rows: 100_000,
            max_symbolic_order: 8,
            max_efolds: 1000,
            max_shard_bytes: 1 << 30,
            max_threads: 256,
        }
    }
}

/// Why [`Limits::read_file`] gave up.
#[derive(Debug)]
pub enum ReadError {
    /// The file could not be opened or read.
    Io(std::io::Error),
    /// The file is larger than the limit (in bytes).
    TooLarge(usize),
    /// The file is not UTF-8 text; the byte offset of the first bad byte.
    NotText(usize),
}

impl std::fmt::Display for ReadError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            ReadError::Io(e) => write!(f, "{e}"),
            ReadError::TooLarge(limit) => write!(f, "it is larger than the limit of {limit} bytes"),
            ReadError::NotText(at) => write!(f, "it is not UTF-8 text (byte {at})"),
        }
    }
}

impl Limits {
    /// Reads a text file of at most `max_file_bytes` bytes, reading no more than one byte past
    /// the limit whatever the file is.
    pub fn read_file(&self, path: &std::path::Path) -> Result<String, ReadError> {
        use std::io::Read;
        let file = std::fs::File::open(path).map_err(ReadError::Io)?;
        let mut bytes = Vec::new();
        file.take(self.max_file_bytes as u64 + 1)
            .read_to_end(&mut bytes)
            .map_err(ReadError::Io)?;
        if bytes.len() > self.max_file_bytes {
            return Err(ReadError::TooLarge(self.max_file_bytes));
        }
        String::from_utf8(bytes).map_err(|e| ReadError::NotText(e.utf8_error().valid_up_to()))
    }
}

/// Everything configurable, grouped by stage.
#[derive(Debug, Clone, PartialEq)]
pub struct Config {
    /// Limits on the expression language.
    pub limits: Limits,
    /// Quadrature tolerance for the canonical map and e-fold integrals (default: relative
    /// 1e-12, at most 2000 subintervals).
    pub quad: crate::numerics::quad::Tolerance,
    /// When an e-fold integral cannot reach `quad.rel` because its integrand's own rounding is
    /// larger (close to a pole of K, 1 - phi^2/(6 alpha) keeps only a few digits), its result
    /// is still used if the estimated relative error is below this. Default 1e-9.
    pub quad_accept: f64,
    /// Beyond `quad_accept`, an e-fold or canonical-distance integral held back by its
    /// integrand's rounding is still used if its estimated relative error is below this, and
    /// the report says so with the accuracy reached (a pivot within a hair of a pole of K, where
    /// K itself keeps only a few digits). Default 1e-6.
    pub quad_rounding_limit: f64,
}

impl Default for Config {
    fn default() -> Self {
        Config {
            limits: Limits::default(),
            quad: crate::numerics::quad::Tolerance::default(),
            quad_accept: 1e-9,
            quad_rounding_limit: 1e-6,
        }
    }
}

/// The largest `--reheat-efolds`. Default 100: even with w just above -1/3, the slowest dilution
/// (rho ~ a^-2), 100 e-folds of reheating take the density from the end of inflation at the GUT
/// scale, (1e16 GeV)^4, below that of nucleosynthesis, (a few MeV)^4 (common practice: reheating
/// must end above a few MeV), so larger values have no physical history behind them.
pub const MAX_REHEAT_EFOLDS: f64 = 100.0;

/// The smallest N_* efold accepts (`--efolds`, a model's `efolds`): below one e-fold the pivot
/// leaves the horizon after inflation has practically ended.
pub const MIN_EFOLDS: f64 = 1.0;

/// A mode of a multi-field spectrum must cross the horizon (k = aH) at least this many
/// e-folds before the end of inflation: outside the horizon its growing solution takes over
/// like e^(-2N) against the decaying one, so after 5 e-folds the decaying part is below 1e-4
/// of its share at crossing (common practice: modes freeze a few e-folds after crossing).
pub const MULTI_SPECTRUM_FREEZE_EFOLDS: f64 = 5.0;

/// Below this N_* a slow-roll prediction carries a warning: so close to the end of inflation
/// the slow-roll parameters are no longer small (common practice: the CMB pivot lies some
/// 50-60 e-folds before the end).
pub const SLOW_ROLL_WARN_EFOLDS: f64 = 20.0;

/// The frame of the couplings of several fields ([`crate::analysis::multi::couplings`]): a
/// coordinate direction whose Gram–Schmidt remainder against the frame so far is below this
/// fraction of its own length is skipped as dependent. Default 1e-8 (well above rounding, far
/// below any direction that matters).
pub const FRAME_GRAM_SCHMIDT_CUT: f64 = 1e-8;

/// How far a grid value of `scan --vary` or `basin --sample` may move to the shortest decimal
/// near it, in units in the last place of the computed value (and never more than a quarter of
/// the distance to its neighbours, so that the grid keeps its order). The computed value is
/// within about an ulp of the exact grid point, so 4 leaves room for that and no more: the
/// value printed is the value used. Default 4.
pub const GRID_SNAP_ULPS: f64 = 4.0;

/// The N_* values predicted when neither `--efolds` nor the model's `efolds` setting gives
/// them: 50, 55 and 60 (common practice: the CMB pivot leaves the horizon some 50-60 e-folds
/// before the end of inflation, depending on reheating).
pub const DEFAULT_N_STARS: [f64; 3] = [50.0, 55.0, 60.0];

/// The one N_* of the commands that take a single value (`fit`, `spectrum`) when `--efolds` is
/// not given: 55, the middle of [`DEFAULT_N_STARS`].
pub const DEFAULT_N_STAR: f64 = 55.0;

/// The smallest relative tolerance with which `golden check` and `watch` compare the
/// predictions of a model of several fields (a smaller `--tolerance` is raised to it). Default
/// 1e-6: the exact multi-field route integrates the background to 1e-12 and the modes to 1e-11
/// (relative), and n_s and alpha_s come from five-point stencils in ln k of step 0.05, which
/// magnify the modes' error some hundredfold; 1e-6 leaves room for a change of step sizes or
/// evaluation order without hiding a change of the model or its physics.
pub const MULTI_GOLDEN_TOLERANCE: f64 = 1e-6;

/// The solver of `efold fit` on a model of several fields, where each evaluation is a whole
/// multi-field prediction (a tenth of a second to some seconds), with its defaults.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MultiFitSettings {
    /// Stop when every scaled residual (n_s, alpha_s in units of 1e-3; r, A_s as logarithms)
    /// is below this. Default 1e-4: n_s to 1e-7 and r to 1e-4 of itself, above the exact
    /// route's own scatter (see [`MULTI_GOLDEN_TOLERANCE`]) so that the solver does not chase
    /// rounding.
    pub tol: f64,
    /// Most predictions one fit makes (trial points and finite differences together). Default
    /// 40: with one free parameter a Levenberg–Marquardt iteration costs three, so some dozen
    /// iterations.
    pub max_evaluations: usize,
    /// Step of the central differences in each fitted variable (the logarithm of a positive
    /// one, else relative to its size, at least 1e-3 of it). Default 1e-4: the change of n_s it
    /// makes is some thousand times the route's scatter.
    pub step: f64,
}

impl Default for MultiFitSettings {
    fn default() -> Self {
        MultiFitSettings {
            tol: 1e-4,
            max_evaluations: 40,
            step: 1e-4,
        }
    }
}

/// Limits and tolerances of the multi-field analyses ([`crate::analysis::multi`]), with their
/// defaults.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MultiLimits {
    /// Most fields. Default 16: the mode matrix has 4 n^2 real components, and a prediction
    /// with delta-N runs 4 n^2 backgrounds, so 16 fields are already some thousand times the
    /// work of two.
    pub max_fields: usize,
    /// Cap on the e-folds of one background run. Default 10 000: no model of the trade needs
    /// more, and a trajectory that has not ended by then is reported as never ending.
    pub max_efolds: f64,
    /// Relative tolerance of the background integration. Default 1e-12 (absolute 1e-3 times
    /// it), as the multi-field reference calculation uses.
    pub bg_rtol: f64,
    /// Relative tolerance of the mode integrations. Default 1e-13: the five modes of a tilt's
    /// stencil are integrated as one state, so their errors no longer repeat from one k to
    /// the next and cancel in the differences as those of separate runs at the same k/aH
    /// did; at 1e-13 n_s stays within some 1e-11 of its value at half the tolerances.
    pub mode_rtol: f64,
    /// Largest step of the background in e-folds, which is also the spacing of its
    /// checkpoints at most. Default 0.05.
    pub bg_step: f64,
    /// Largest step of the runs that keep no checkpoints (the delta-N runs and the modes), in
    /// e-folds. Default 4: outside the horizon the solutions are smooth over several e-folds.
    pub free_step: f64,
    /// Modes start when k/aH falls to this (deep inside the horizon). Default 100.
    pub k_start: f64,
    /// Step of the five-point stencils for the tilts, in ln k. Default 0.05.
    pub tilt_step: f64,
    /// Field distance of the first delta-N step (the second is half of it). Default 0.02.
    pub delta_n_step: f64,
    /// Turn rate eta_perp/H below which the trajectory counts as running along one direction
    /// (a stage). Default 0.03: a third of the largest turn of the reference turning models.
    pub stage_turn: f64,
    /// Shortest stage reported, in e-folds. Default 1.
    pub stage_min_efolds: f64,
    /// `efold predict` computes the slow-roll delta-N beside the exact route for models of at
    /// most this many fields. Default 3: delta-N takes 4 n^2 + 1 background runs per N_*, so
    /// seven fields spend minutes in it with the compiled geometry.
    pub delta_n_max_fields: usize,
}

impl Default for MultiLimits {
    fn default() -> Self {
        MultiLimits {
            max_fields: 16,
            max_efolds: 10_000.0,
            bg_rtol: 1e-12,
            mode_rtol: 1e-13,
            bg_step: 0.05,
            free_step: 4.0,
            k_start: 100.0,
            tilt_step: 0.05,
            delta_n_step: 0.02,
            stage_turn: 0.03,
            stage_min_efolds: 1.0,
            delta_n_max_fields: 3,
        }
    }
}

/// Limits and tolerances of `efold basin` ([`crate::analysis::basin`]), with their defaults.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BasinLimits {
    /// Cap on the e-folds of one start's run. Default 5000: a plateau start from rest that
    /// inflates longer than this is reported as never ending (stuck on the plateau).
    pub cap_efolds: f64,
    /// After eps_H rises through 1, the run goes on this many e-folds to see whether inflation
    /// restarts. Default 1: the oscillation about a minimum speeds up as e^(3N/2) in e-folds,
    /// so each further e-fold of settling costs more steps than the one before.
    pub settle_efolds: f64,
    /// A dip of eps_H below 1 after an end counts as inflation restarting only if it lasts this
    /// many e-folds; shorter ones are the turning points of oscillations about a minimum.
    /// Default 1 (the first oscillation after the end keeps eps_H < 1 for well under an
    /// e-fold in the shipped models).
    pub restart_efolds: f64,
    /// Relative tolerance of the background integration per step. Default 1e-8 (absolute
    /// 1e-11). The slow-roll attractor pulls errors back onto it, so the run's N is far more
    /// accurate than the step's tolerance: on 10 000 starts from rest on the exponential
    /// plateau, n_total moves by at most 1.2e-9 e-folds, n_s by 7e-13, r by 4e-11 of itself
    /// and the end point by 8e-10 from the values at 1e-10, with 2.4 times fewer instructions
    /// (with `settle_rtol`).
    pub rtol: f64,
    /// Relative tolerance of the runs after a candidate end (the settling window and the probe
    /// of a restart). Default 1e-6: those runs only tell whether eps_H stays below 1 for
    /// `restart_efolds` and where the field heads for its minimum, and N_total and the pivots
    /// lie before them; the oscillations cost a third of a start's steps at `rtol`. A restart
    /// goes on at `rtol` from the state so reached.
    pub settle_rtol: f64,
    /// Largest step in e-folds. Default 2: slow roll is smooth over many e-folds, and the
    /// step control shortens the steps of kinetic domination and oscillations.
    pub h_max: f64,
    /// Most starts of one run (grid or `--random`). Default 10 000 000.
    pub max_starts: usize,
    /// Relative tolerance of the background runs of delta-N at a pivot (several fields).
    /// Default 1e-9: N changes by some 1e-7 in a run of 60 e-folds, which moves the first
    /// derivatives N_a (steps of 0.02 in field distance) by about 1e-5 of themselves, far
    /// below what n_s and r resolve, at a fraction of the cost of
    /// [`MultiLimits::bg_rtol`]'s 1e-12.
    pub delta_n_rtol: f64,
}

impl Default for BasinLimits {
    fn default() -> Self {
        BasinLimits {
            cap_efolds: 5000.0,
            settle_efolds: 1.0,
            restart_efolds: 1.0,
            rtol: 1e-8,
            settle_rtol: 1e-6,
            h_max: 2.0,
            max_starts: 10_000_000,
            delta_n_rtol: 1e-9,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn files_beyond_the_limit_are_refused_without_reading_them_whole() {
        let dir = std::env::temp_dir().join(format!("efold-limit-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let path = dir.join("f.toml");
        let limits = Limits {
            max_file_bytes: 8,
            ..Limits::default()
        };
        std::fs::write(&path, "12345678").unwrap();
        assert_eq!(limits.read_file(&path).unwrap(), "12345678");
        std::fs::write(&path, "123456789").unwrap();
        assert!(matches!(limits.read_file(&path), Err(ReadError::TooLarge(8))));
        std::fs::write(&path, b"ab\xffcd").unwrap();
        assert!(matches!(limits.read_file(&path), Err(ReadError::NotText(2))));
        // An endless device stops at the limit.
        if std::path::Path::new("/dev/zero").exists() {
            let r = Limits::default().read_file(std::path::Path::new("/dev/zero"));
            assert!(matches!(r, Err(ReadError::TooLarge(1_048_576))));
        }
        std::fs::remove_dir_all(&dir).ok();
    }
}
