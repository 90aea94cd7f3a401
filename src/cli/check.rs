//! Checks of flag values before any work starts: each bad value is an error naming the flag,
//! the value and what is allowed.

use super::args::{Method, PredictArgs};
use super::Failure;
use crate::analysis::background::Settings;
use crate::analysis::reheating::Reheating;
use crate::config::{Config, MAX_REHEAT_EFOLDS, MIN_EFOLDS};
use crate::diag::{Diagnostic, Source, Span};
use crate::drivers::scan::{total_points, Axis, Shard, ShardError};
use crate::language::compile::lower_into;
use crate::language::ir::{format_number, Func, Graph, Scope};
use crate::language::tape::Tape;
use crate::model::{ConstantError, Model, ParamTable};
use crate::report::numfmt;

/// Splits `NAME=VALUE`.
pub(crate) fn split_binding<'a>(flag: &str, text: &'a str) -> Result<(&'a str, &'a str), Failure> {
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
pub(crate) fn is_reserved(name: &str) -> bool {
    name == "pi" || name == "pow" || Func::from_name(name).is_some()
}

/// A name given with `flag` (in its value `text`) that the expression language reserves is
/// refused, with a caret under it, as model files refuse it.
pub(crate) fn check_not_reserved(flag: &str, text: &str, name: &str) -> Result<(), Failure> {
    if !is_reserved(name) {
        return Ok(());
    }
    let start = text.find(name).unwrap_or(0);
    let d = Diagnostic::new(format!("`{flag} {text}`: `{name}` is a built-in name"))
        .with_span(Span::new(start, start + name.len()), "a built-in name")
        .with_hint("choose another name: the functions (exp, sqrt, ...), `pow` and `pi` are the language's own");
    Err(Failure::input(d.render(Some(&Source::new(flag, text)))))
}

/// `--field NAME`: a valid name that is not the language's own.
pub(crate) fn check_field_name(name: &str) -> Result<(), Failure> {
    let valid = name.chars().next().is_some_and(|c| c.is_ascii_alphabetic() || c == '_')
        && name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_');
    if !valid {
        let d = Diagnostic::new(format!("`--field {name}` is not a valid name"))
            .with_span(Span::new(0, name.len()), "not a name")
            .with_hint("names are letters, digits and _, starting with a letter or _");
        return Err(Failure::input(d.render(Some(&Source::new("--field", name)))));
    }
    check_not_reserved("--field", name, name)
}

/// A `--param NAME=...` given twice is refused (else the last would silently win).
pub(crate) fn check_params_once(flags: &[String]) -> Result<(), Failure> {
    check_keys_once("--param", flags, "a --param replaces the model file's value")
}

/// Each `KEY=VALUE` of a repeated flag (`--param`, `--metric`, `--start`) names its key once
/// (keys compared word by word, so `x y` and `x  y` are one metric entry); `replaces` says what
/// one flag does, for the hint.
pub(crate) fn check_keys_once(flag_name: &str, flags: &[String], replaces: &str) -> Result<(), Failure> {
    let name_of = |f: &str| {
        f.split_once('=')
            .map(|(n, _)| n.split_whitespace().collect::<Vec<_>>().join(" "))
    };
    for (i, flag) in flags.iter().enumerate() {
        let Some(name) = name_of(flag) else { continue };
        if let Some(first) = flags[..i].iter().find(|f| name_of(f).as_deref() == Some(name.as_str())) {
            let start = flag.find(name.as_str()).unwrap_or(0);
            let d = Diagnostic::new(format!("`{flag_name} {name}` is given twice"))
                .with_span(
                    Span::new(start, start + name.len()),
                    format!("given again here; the first was `{first}`"),
                )
                .with_hint(format!("give each {flag_name} once ({replaces})"));
            return Err(Failure::input(d.render(Some(&Source::new(flag_name, flag)))));
        }
    }
    Ok(())
}

/// Parameter names and values from `--param` flags, each value an expression of `pi` and the
/// parameters before it.
pub(crate) fn bind_params(flags: &[String], field: &str, config: &Config) -> Result<(Vec<String>, Vec<f64>), Failure> {
    let mut table = ParamTable::default();
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
pub(crate) fn constant_failure(e: ConstantError, origin: &str, text: &str, field: &str) -> Failure {
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
pub(crate) fn constant_expr(
    origin: &str,
    text: &str,
    scope: &Scope,
    params: &[f64],
    config: &Config,
) -> Result<f64, Failure> {
    let mut g = Graph::new(scope.clone());
    let (_, id) = lower_into(&mut g, origin, text, &config.limits)?;
    if g.is_varying(id) {
        return Err(Diagnostic::new(format!(
            "{origin}: the value `{}` depends on the field `{}`",
            text.trim(),
            scope.field()
        ))
        .with_hint("a value may use numbers, `pi` and the parameters")
        .into());
    }
    let tape = Tape::compile(&g, &[id]);
    let v = tape.evaluator(params).eval(0.0);
    if !v.is_finite() {
        return Err(Diagnostic::new(format!(
            "{origin}: `{}` is not a finite number ({})",
            text.trim(),
            numfmt::number(v)
        ))
        .into());
    }
    Ok(v)
}

/// Relativistic degrees of freedom at reheating when `--g-star` is not given: the Standard
/// Model's 106.75 above the electroweak scale (common practice).
pub(crate) const DEFAULT_G_STAR: f64 = 106.75;

/// A flag's value that is outside its valid range: the flag and value drawn with a caret under
/// the value, what the range is, and how to fix it.
pub(crate) fn bad_flag_value(flag: &str, value: &str, message: String, hint: &str) -> Failure {
    let text = format!("{flag} {value}");
    let d = Diagnostic::new(message)
        .with_span(Span::new(flag.len() + 1, text.len()), "not in the valid range")
        .with_hint(hint);
    Failure::input(d.render(Some(&Source::new("command line", &text))))
}

/// A number that must be finite and inside `ok`, described by `range` in the message.
pub(crate) fn check_range(
    flag: &str,
    v: f64,
    ok: impl Fn(f64) -> bool,
    range: &str,
    hint: &str,
) -> Result<(), Failure> {
    if v.is_finite() && ok(v) {
        return Ok(());
    }
    let shown = format_number(v);
    Err(bad_flag_value(flag, &shown, format!("{flag} {shown}: {range}"), hint))
}

/// `--tolerance` of `golden check` and `watch`: a finite relative tolerance, 0 or more.
pub(crate) fn check_tolerance(v: f64) -> Result<(), Failure> {
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
pub(crate) fn check_efolds_values(origin: &str, values: &[f64]) -> Result<(), Failure> {
    let Some(i) = values.iter().position(|v| !(v.is_finite() && *v >= MIN_EFOLDS)) else {
        return Ok(());
    };
    let shown: Vec<String> = values.iter().map(|v| format_number(*v)).collect();
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
    let d = d.with_span(Span::new(at, at + shown[i].len()), "not in the valid range");
    Err(Failure::input(d.render(Some(&Source::new("command line", &text)))))
}

/// `--start-phi` and `--start-velocity`: finite, the velocity only with a start, and (with the
/// model) a velocity that leaves H^2 > 0.
pub(crate) fn check_start(phi: Option<f64>, velocity: Option<f64>) -> Result<(), Failure> {
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
pub(crate) fn check_start_velocity(model: &Model, phi: f64, v: f64) -> Result<(), Failure> {
    let mut ev = model.evaluator();
    let pot = ev.eval(phi);
    let k = ev.output(model.layout().k());
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
pub(crate) fn check_predict_flags(a: &PredictArgs) -> Result<(), Failure> {
    check_efolds_values("--efolds", &a.efolds.efolds)?;
    let reheating = a.reheat.is_some() || a.reheat_w.is_some() || a.reheat_temp.is_some() || a.reheat_efolds.is_some();
    if reheating && !a.efolds.efolds.is_empty() {
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
pub(crate) fn min_exact_efolds(settings: &Settings) -> f64 {
    crate::api::min_exact_efolds(settings)
}

/// Whether N_* comes from `--efolds` or the model (not from reheating, which is checked
/// against the matching's own result).
pub(crate) fn opts_fix_n_star(a: &PredictArgs) -> bool {
    a.reheat.is_none() && a.reheat_w.is_none()
}

pub(crate) fn reheating_from(a: &PredictArgs) -> Result<Option<Reheating>, Failure> {
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

/// A count given on the command line, refused above its limit in `config::Limits`.
pub(crate) fn check_count(flag: &str, value: usize, limit: usize, field: &str) -> Result<(), Failure> {
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
pub(crate) fn check_vary_names(vary: &[String]) -> Result<(), Failure> {
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
pub(crate) fn check_grid_size(axes: &[Axis], config: &Config) -> Result<usize, Failure> {
    let limit = config.limits.max_scan_points;
    let counts: Vec<String> = axes.iter().map(|a| a.values.len().to_string()).collect();
    match total_points(axes) {
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
pub(crate) fn check_efolds_count(n_stars: &[f64], config: &Config) -> Result<(), Failure> {
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

/// `--threads N`: a whole number from 1 to `Limits::max_threads`.
pub(crate) fn check_threads(text: &str, config: &Config) -> Result<usize, Failure> {
    let max = config.limits.max_threads;
    match text.trim().parse::<usize>() {
        Ok(n) if (1..=max).contains(&n) => Ok(n),
        Ok(n) if n > max => Err(bad_flag_value(
            "--threads",
            text,
            format!("--threads {text}: at most {max} worker threads (config::Limits::max_threads)"),
            "give fewer, or leave --threads out to use one per core",
        )),
        _ => Err(bad_flag_value(
            "--threads",
            text,
            format!("--threads {text}: give a whole number of worker threads, 1 or more"),
            "e.g. `--threads 2`; without --threads efold uses one per core",
        )),
    }
}

/// The job-array variables `--shard auto/N` reads, each with the variable that holds the
/// array's first index, if its batch system sets one (else the first index is 1).
pub(crate) const ARRAY_TASK_VARS: [(&str, Option<&str>); 5] = [
    ("SLURM_ARRAY_TASK_ID", Some("SLURM_ARRAY_TASK_MIN")),
    ("PBS_ARRAY_INDEX", None),
    ("PBS_ARRAYID", None),
    ("SGE_TASK_ID", Some("SGE_TASK_FIRST")),
    ("LSB_JOBINDEX", None),
];

/// `--shard K/N`, or `--shard auto/N` with K read from the environment (`env`), and for
/// `auto` where K came from (`SLURM_ARRAY_TASK_ID=4, SLURM_ARRAY_TASK_MIN=1`).
///
/// The rule for `auto`: each variable of [`ARRAY_TASK_VARS`] that is set gives
/// K = id - first + 1, first being the array's first index where the batch system says it
/// and 1 otherwise; unset counts the same as empty, `SGE_TASK_ID=undefined` (a job that is not
/// an array task) and `LSB_JOBINDEX=0` (likewise). None set, a value that is not a whole
/// number, two variables giving different K, or K outside 1..N is an error.
pub(crate) fn parse_shard(
    text: &str,
    env: &dyn Fn(&str) -> Option<String>,
) -> Result<(Shard, Option<String>), Failure> {
    let Some(n_text) = text.trim().strip_prefix("auto/") else {
        return Shard::parse(text)
            .map(|s| (s, None))
            .map_err(|e| Failure::from(Diagnostic::new(e.to_string())));
    };
    let shown = format!("--shard {text}");
    let at = shown.find("auto").unwrap_or(0);
    let fail = |message: String, label: &str, hint: String| {
        let d = Diagnostic::new(message)
            .with_span(Span::new(at, at + 4), label)
            .with_hint(hint);
        Failure::input(d.render(Some(&Source::new("command line", &shown))))
    };
    let n = match n_text.trim().parse::<usize>() {
        Ok(n) if n >= 1 => n,
        _ => {
            return Err(Failure::from(Diagnostic::new(
                ShardError { text: text.to_string() }.to_string(),
            )))
        }
    };
    let set = |name: &str| {
        // what these systems set outside a job array counts as unset
        let outside =
            |v: &str| v.is_empty() || (name, v) == ("SGE_TASK_ID", "undefined") || (name, v) == ("LSB_JOBINDEX", "0");
        env(name).map(|v| v.trim().to_string()).filter(|v| !outside(v))
    };
    let mut found: Vec<(String, i128)> = Vec::new();
    for (id_var, first_var) in ARRAY_TASK_VARS {
        let Some(id) = set(id_var) else { continue };
        let whole = |var: &str, v: &str| {
            v.parse::<i128>().map_err(|_| {
                fail(
                    format!("--shard {text}: {var}={v} is not a whole number"),
                    "K from the environment",
                    "run inside a job array, or give the shard as K/N".to_string(),
                )
            })
        };
        let k_id = whole(id_var, &id)?;
        let (first, from) = match first_var.and_then(|f| set(f).map(|v| (f, v))) {
            Some((f, v)) => (whole(f, &v)?, format!("{id_var}={id}, {f}={v}")),
            None => (1, format!("{id_var}={id}")),
        };
        found.push((from, k_id - first + 1));
    }
    let Some((from, k)) = found.first().cloned() else {
        let names: Vec<&str> = ARRAY_TASK_VARS.iter().map(|(v, _)| *v).collect();
        return Err(fail(
            format!(
                "--shard {text}: no job-array task id in the environment (none of {} is set)",
                names.join(", ")
            ),
            "K from the environment",
            format!("run it as a task of a job array of {n} tasks, or give the shard as K/{n}"),
        ));
    };
    if let Some((other, k2)) = found.iter().find(|(_, k2)| *k2 != k) {
        return Err(fail(
            format!("--shard {text}: the job-array variables disagree: {from} gives shard {k}, {other} gives {k2}"),
            "K from the environment",
            format!("unset the variables of the other batch system, or give the shard as K/{n}"),
        ));
    }
    if k < 1 || k > n as i128 {
        return Err(fail(
            format!("--shard {text}: {from} gives shard {k}, outside 1..{n}"),
            "K from the environment",
            format!(
                "make the job array {n} tasks long, its task ids counted from its first, or give the shard as K/{n}"
            ),
        ));
    }
    let from = found.iter().map(|(f, _)| f.as_str()).collect::<Vec<_>>().join("; ");
    Ok((Shard { k: k as usize, n }, Some(from)))
}

/// [`parse_shard`] of the process's environment; for `auto`, says on stderr which K it took
/// and from where.
pub(crate) fn shard_from_flag(text: Option<&str>) -> Result<Option<Shard>, Failure> {
    let Some(text) = text else { return Ok(None) };
    let (shard, from) = parse_shard(text, &|name| std::env::var(name).ok())?;
    if let Some(from) = from {
        crate::report::output::stderr(&format!(
            "efold: --shard {text}: shard {}/{} (from {from})\n",
            shard.k, shard.n
        ));
    }
    Ok(Some(shard))
}
