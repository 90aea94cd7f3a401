//! `scan` and `merge`: predictions over a parameter grid, streamed, and shards joined.

use crate::cli::*;
use crate::config::Config;
use crate::diag::Diagnostic;

pub(crate) fn scan_cmd(a: &ScanArgs, config: &Config) -> Result<String, Failure> {
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
    let axes = scan_axes(a, &spec, config)?;
    let total = check_grid_size(&axes, config)?;
    let shard = a
        .shard
        .as_deref()
        .map(crate::drivers::scan::Shard::parse)
        .transpose()
        .map_err(|e| Failure::from(Diagnostic::new(e.to_string())))?;
    let n_stars = scan_efolds(a, &spec, config)?;
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
    let job = crate::drivers::scan::ScanJob {
        spec: &spec,
        axes: &axes,
        n_stars: &n_stars,
        data: &data,
        shard,
        config,
        progress,
    };
    crate::drivers::scan::run_chunks(&job, &mut |rows| {
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

/// The grid's axes from `--vary` (at most two), each checked against the model and the limit.
fn scan_axes(
    a: &ScanArgs,
    spec: &crate::model::ModelSpec,
    config: &Config,
) -> Result<Vec<crate::drivers::scan::Axis>, Failure> {
    if a.vary.len() > 2 {
        return Err(Diagnostic::new("at most two parameters can be varied at once")
            .with_hint("give --vary once or twice")
            .into());
    }
    check_vary_names(&a.vary)?;
    let limit = config.limits.max_axis_points;
    a.vary
        .iter()
        .map(|v| crate::drivers::scan::Axis::parse(v, spec, a.points, limit))
        .collect::<Result<Vec<_>, _>>()
        .map_err(|e| Failure::from(e.diagnostic()))
}

/// The N_* values of a scan: `--efolds`, or the model's `efolds` setting, or 50, 55, 60.
fn scan_efolds(a: &ScanArgs, spec: &crate::model::ModelSpec, config: &Config) -> Result<Vec<f64>, Failure> {
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
    Ok(n_stars)
}

pub(crate) fn merge_cmd(a: &MergeArgs, config: &Config) -> Result<String, Failure> {
    let mut texts = Vec::new();
    for f in &a.files {
        let t = read_bounded(f, config.limits.max_shard_bytes)?;
        texts.push((f.display().to_string(), t));
    }
    let merged = crate::drivers::scan::merge(&texts).map_err(|e| {
        Failure::from(
            Diagnostic::new(e.to_string())
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
