//! `basin`: starts sampled over the fields (and X), each run to the end of inflation; the
//! summary, the points, the figure.

use crate::analysis::basin::sample::{Plan, Range};
use crate::cli::args::{BasinArgs, BasinDirection, BasinVelocity, TableFormat};
use crate::cli::check::{check_efolds_values, shard_from_flag};
use crate::cli::files::{refuse_one_file, write_figure, write_output_file};
use crate::cli::load::{load_data, load_model_any};
use crate::cli::{check::check_efolds_count, Failure};
use crate::config::{BasinLimits, Config, MultiLimits, DEFAULT_N_STAR};
use crate::diag::{Diagnostic, Source, Span};
use crate::drivers::basin::{self, BasinJob, Directions, VelocityPlan, X_NAME};
use crate::drivers::scan::{Axis, Shard};
use crate::model::{Model, ModelSpec};
use crate::report::basin::Header;

const EXAMPLE: &str = "efold basin models/exponential-plateau.toml --sample phi=1:8:50";

/// An error under part of a flag's value (`start..end` of `value`), drawn with a caret.
fn flag_error(flag: &str, value: &str, part: (usize, usize), label: &str, message: String, hint: &str) -> Failure {
    let text = format!("{flag} {value}");
    let off = flag.len() + 1;
    let d = Diagnostic::new(message)
        .with_span(Span::new(off + part.0, off + part.1.max(part.0 + 1)), label)
        .with_hint(hint);
    Failure::input(d.render(Some(&Source::new("command line", &text))))
}

/// One axis in the grid syntax of `scan` (`NAME=LO:HI:COUNT[:log]`), parsed by its parser,
/// with the messages naming `flag`.
fn parse_axis(flag: &str, text: &str, name: &str, config: &Config) -> Result<Axis, Failure> {
    let mut spec = ModelSpec::inline("0", None);
    spec.set_param(name, "0");
    Axis::parse(text, &spec, 2, config.limits.max_axis_points).map_err(|e| {
        let d = e.diagnostic();
        let mut out = Diagnostic::new(d.message.replace("--vary", flag));
        for h in &d.hints {
            // --kinetic-ratio takes the range alone; --sample names its field.
            let example = if name == X_NAME {
                format!("{flag} 0.1:10:30")
            } else {
                format!("{flag} {name}=0.1:10:30")
            };
            out = out.with_hint(h.replace("--vary alpha=0.1:10:30:log", &example));
        }
        Failure::from(out)
    })
}

/// The sampled fields' axes: each a field of the model, at most once.
fn sample_axes(a: &BasinArgs, model: &Model, config: &Config) -> Result<Vec<(Axis, bool)>, Failure> {
    let fields = model.field_names();
    let mut out: Vec<(Axis, bool)> = Vec::new();
    for s in &a.sample {
        let name = s.split_once('=').map_or(s.as_str(), |(n, _)| n).trim();
        if !fields.iter().any(|f| f == name) {
            let len = s.find('=').unwrap_or(s.len());
            return Err(flag_error(
                "--sample",
                s,
                (0, len),
                "not a field",
                format!(
                    "`{name}` is not a field of the model (its fields: {})",
                    fields.join(", ")
                ),
                "write `--sample FIELD=LO:HI:COUNT` with one of the model's fields",
            ));
        }
        if out.iter().any(|(x, _)| x.name == name) {
            return Err(flag_error(
                "--sample",
                s,
                (0, name.len()),
                "sampled twice",
                format!("`{name}` is sampled twice"),
                "give --sample once per field",
            ));
        }
        if !s.contains('=') {
            return Err(Diagnostic::new(format!("`--sample {s}`: write FIELD=LO:HI:COUNT"))
                .with_hint("e.g. `--sample phi=1:8:50`, `:log` appended for a logarithmic grid")
                .into());
        }
        let axis = parse_axis("--sample", s, name, config)?;
        out.push((axis, s.trim_end().ends_with(":log")));
    }
    if model.n_fields() == 1 && out.is_empty() {
        return Err(Diagnostic::new("no field is sampled")
            .with_hint(format!("e.g. `{EXAMPLE}`"))
            .into());
    }
    Ok(out)
}

/// The axis of --kinetic-ratio, X >= 0 (and > 0 on a logarithmic axis).
fn ratio_axis(text: &str, config: &Config) -> Result<(Axis, bool), Failure> {
    let full = format!("{X_NAME}={text}");
    let axis = parse_axis("--kinetic-ratio", &full, X_NAME, config)?;
    if axis.values.iter().any(|&x| x.is_nan() || x < 0.0) {
        let end = text.find(':').unwrap_or(text.len());
        return Err(flag_error(
            "--kinetic-ratio",
            text,
            (0, end),
            "negative",
            format!("--kinetic-ratio {text}: X = kinetic / potential energy is at least 0"),
            "give X from 0 (rest) up, e.g. `--kinetic-ratio 1e-3:1e6:30:log`",
        ));
    }
    Ok((axis, text.trim_end().ends_with(":log")))
}

/// The sample text of a field as given.
fn sample_text(a: &BasinArgs, name: &str) -> String {
    a.sample
        .iter()
        .find(|s| s.split_once('=').is_some_and(|(n, _)| n.trim() == name))
        .cloned()
        .unwrap_or_default()
}

/// A model of several fields must be defined at the ends of every sampled range (the other
/// fields at the model's start): V and the metric finite, the metric positive definite.
fn check_ends_defined(a: &BasinArgs, axes: &[(Axis, bool)], model: &Model) -> Result<(), Failure> {
    use crate::analysis::multi::FieldSpace;
    let Some(mut space) = crate::analysis::multi::space::ModelFieldSpace::new(model) else {
        return Ok(());
    };
    let fields = model.field_names();
    let base = model.start().map_or_else(|| vec![0.0; fields.len()], <[f64]>::to_vec);
    let mut at = crate::analysis::multi::Local::zeros(fields.len());
    for (axis, _) in axes {
        let Some(j) = fields.iter().position(|f| *f == axis.name) else {
            continue;
        };
        for &end in [axis.values[0], *axis.values.last().expect("an axis has a value")].iter() {
            let mut phi = base.clone();
            phi[j] = end;
            if let Err(e) = space.local(&phi, &mut at) {
                let text = sample_text(a, &axis.name);
                let eq = text.find('=').map_or(0, |i| i + 1);
                return Err(flag_error(
                    "--sample",
                    &text,
                    (eq, text.len()),
                    "outside the domain",
                    format!(
                        "the sample of `{}` reaches {}, where the model is not defined: {}",
                        axis.name,
                        crate::report::numfmt::typed(end),
                        e.message
                    ),
                    "sample inside the domain (`efold inspect` shows it), the other fields at the model's [start]",
                ));
            }
        }
    }
    Ok(())
}

/// The sample ranges must lie inside the model's domain: one field, its interval; several,
/// where V and the metric are defined at the ends of each range.
fn check_in_domain(a: &BasinArgs, axes: &[(Axis, bool)], model: &Model) -> Result<(), Failure> {
    if model.n_fields() != 1 {
        return check_ends_defined(a, axes, model);
    }
    let iv = basin::domain_of(model)?;
    for (axis, _) in axes.iter().filter(|(x, _)| x.name != X_NAME) {
        let text = sample_text(a, &axis.name);
        if let Some(&bad) = axis.values.iter().find(|&&x| !iv.contains(x)) {
            let eq = text.find('=').map_or(0, |i| i + 1);
            return Err(flag_error(
                "--sample",
                &text,
                (eq, text.len()),
                "outside the domain",
                format!(
                    "the sample of `{}` reaches {}, outside the model's domain ({}, {})",
                    axis.name,
                    crate::report::numfmt::typed(bad),
                    crate::report::numfmt::number(iv.lo),
                    crate::report::numfmt::number(iv.hi)
                ),
                "sample inside the domain (`efold inspect` shows it)",
            ));
        }
    }
    Ok(())
}

/// The plan: a grid of the axes, or --random samples of their ranges.
fn plan_of(a: &BasinArgs, axes: Vec<(Axis, bool)>, limits: &BasinLimits) -> Result<Plan, Failure> {
    let plan = match a.random {
        None => Plan::Grid(axes.into_iter().map(|(x, _)| x).collect()),
        Some(count) => Plan::Random {
            ranges: axes
                .into_iter()
                .map(|(x, log)| Range {
                    lo: x.values[0],
                    hi: *x.values.last().expect("an axis has a value"),
                    name: x.name,
                    log,
                })
                .collect(),
            count,
            seed: a.seed,
        },
    };
    match plan.len() {
        Some(n) if n <= limits.max_starts && n > 0 => Ok(plan),
        n => Err(Diagnostic::new(format!(
            "{} starts: give between 1 and {} (config::BasinLimits::max_starts)",
            n.map_or("too many".to_string(), |n| n.to_string()),
            limits.max_starts
        ))
        .with_hint("sample fewer points, or cut the run with --shard K/N")
        .into()),
    }
}

/// The N_* list (`--efolds`, default 55) and `--need`, checked.
fn n_stars_and_need(a: &BasinArgs, config: &Config) -> Result<Vec<f64>, Failure> {
    let n_stars = if a.efolds.efolds.is_empty() {
        vec![DEFAULT_N_STAR]
    } else {
        a.efolds.efolds.clone()
    };
    check_efolds_count(&n_stars, config)?;
    check_efolds_values("--efolds", &n_stars)?;
    crate::cli::check::check_range(
        "--need",
        a.need,
        |x| x >= 0.0,
        "give at least 0 e-folds",
        "e.g. `--need 60`",
    )?;
    Ok(n_stars)
}

/// The velocity of the starts; with --kinetic-ratio its axis joins the others.
fn velocity_plan(a: &BasinArgs, axes: &mut Vec<(Axis, bool)>, config: &Config) -> Result<VelocityPlan, Failure> {
    Ok(match (&a.kinetic_ratio, a.velocity) {
        (Some(text), _) => {
            axes.push(ratio_axis(text, config)?);
            VelocityPlan::Kinetic(match a.direction {
                BasinDirection::Down => Directions::Down,
                BasinDirection::Up => Directions::Up,
                BasinDirection::Both => Directions::Both,
            })
        }
        (None, BasinVelocity::Attractor) => VelocityPlan::Attractor,
        (None, BasinVelocity::Rest) => VelocityPlan::Rest,
    })
}

/// The table and a figure on one file are refused.
fn check_outputs(a: &BasinArgs) -> Result<(), Failure> {
    for fig in [&a.figure.svg, &a.figure.pdf] {
        if let (Some(out), Some(file)) = (&a.out.out, fig) {
            refuse_one_file(
                out,
                file,
                format!("--out `{}` and the figure `{}`", out.display(), file.display()),
                "the figure would overwrite the table",
                "give the table and the figure different files",
            )?;
        }
    }
    Ok(())
}

/// `efold basin`: every check first, then the starts, the summary and the outputs.
pub(crate) fn basin_cmd(a: &BasinArgs, config: &Config) -> Result<String, Failure> {
    let model = load_model_any(&a.model, EXAMPLE, config)?;
    let n_stars = n_stars_and_need(a, config)?;
    let limits = BasinLimits::default();
    let mut axes = sample_axes(a, &model, config)?;
    check_in_domain(a, &axes, &model)?;
    let velocity = velocity_plan(a, &mut axes, config)?;
    let plan = plan_of(a, axes, &limits)?;
    let shard = shard_from_flag(a.shard.as_deref())?;
    check_outputs(a)?;
    let data = load_data(&a.data, config)?;
    use std::io::IsTerminal;
    let job = BasinJob {
        model: &model,
        plan: &plan,
        velocity,
        need: a.need,
        n_stars: &n_stars,
        limits: &limits,
        multi: MultiLimits {
            bg_rtol: limits.delta_n_rtol,
            ..MultiLimits::default()
        },
        shard,
        progress: std::io::stderr().is_terminal(),
    };
    let points = basin::run(&job)?;
    basin::check_all(&points, &limits)?;
    let header = header(a, &job);
    let summary = basin::summarise(&points, &header.fields, &n_stars, a.random.is_some());
    let table = match a.format {
        TableFormat::Text => crate::report::basin::text(&header, &summary),
        TableFormat::Json => crate::report::basin::json(&header, &summary, &points),
        TableFormat::Csv => crate::report::basin::csv_table(&header, &points),
    };
    if a.figure.wanted() {
        let svg = crate::report::basin::figure(&header, &plan, &points, &data, a.figure.figure_width);
        write_figure(&a.figure, &svg)?;
    }
    match &a.out.out {
        Some(path) => {
            write_output_file(path, &table)?;
            Ok(String::new())
        }
        None => Ok(table),
    }
}

/// What the reports say about the run besides its points.
fn header(a: &BasinArgs, job: &BasinJob<'_>) -> Header {
    Header {
        model: job.model.spec.name.clone(),
        fields: job.model.field_names().to_vec(),
        need: a.need,
        n_stars: job.n_stars.to_vec(),
        velocity: match job.velocity {
            VelocityPlan::Attractor => "attractor",
            VelocityPlan::Rest => "rest",
            VelocityPlan::Kinetic(_) => "kinetic",
        }
        .to_string(),
        sampling: if a.random.is_some() { "random" } else { "grid" }.to_string(),
        seed: a.random.map(|_| a.seed),
        definition: definition(a),
        shard: job.shard.map(|s| shard_provenance(job, s)),
    }
}

/// The samples and the velocity as given, which with the other keys define a run (shards of
/// one run share it).
fn definition(a: &BasinArgs) -> String {
    let mut parts: Vec<String> = a.sample.iter().map(|s| format!("--sample {s}")).collect();
    match &a.kinetic_ratio {
        Some(k) => parts.push(format!("--kinetic-ratio {k} --direction {:?}", a.direction).to_lowercase()),
        None => parts.push(format!("--velocity {:?}", a.velocity).to_lowercase()),
    }
    if let Some(n) = a.random {
        parts.push(format!("--random {n}"));
    }
    parts.join(" ")
}

/// `efold basin-merge`: the JSON shards of one run joined into the unsharded output.
pub(crate) fn merge_cmd(a: &crate::cli::args::BasinMergeArgs, config: &Config) -> Result<String, Failure> {
    let mut texts = Vec::new();
    for f in &a.files {
        let t = crate::cli::load::read_bounded(f, config.limits.max_shard_bytes)?;
        texts.push((f.display().to_string(), t));
    }
    let merged = crate::report::basin::merge(&texts).map_err(|e| {
        Failure::from(Diagnostic::new(e.to_string()).with_hint(
            "give every file of one `efold basin --shard K/N` run (all JSON or all CSV), K = 1..N, each once",
        ))
    })?;
    match &a.out.out {
        Some(path) => {
            write_output_file(path, &merged)?;
            Ok(String::new())
        }
        None => Ok(merged),
    }
}

/// What a shard's JSON records to be merged: its slice and the whole run's size.
fn shard_provenance(job: &BasinJob<'_>, s: Shard) -> serde_json::Value {
    let total = job.total().unwrap_or(0);
    let r = s.range(total);
    serde_json::json!({ "shard": s.k, "shards": s.n, "points": [r.start, r.end], "total": total })
}
