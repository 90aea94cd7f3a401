//! `scan` and `merge`: predictions over a parameter grid, streamed, and shards joined.

use crate::cli::args::{MergeArgs, ScanArgs, ScanFormat};
use crate::cli::check::{check_efolds_count, check_grid_size, check_vary_names, shard_from_flag};
use crate::cli::files::{cannot_write, refuse_one_file, write_figure, write_output_file};
use crate::cli::load::{check_varied_used, checked_n_stars, declare_varied, load_data, load_spec, read_bounded};
use crate::cli::{print_out, Failure};
use crate::config::Config;
use crate::data::DataSet;
use crate::diag::Diagnostic;
use crate::drivers::scan::{
    definition_id, figure, merge, run_chunks, Axis, Provenance, ScanJob, ScanRow, Shard, Table,
};
use crate::drivers::scan_multi::{self, MultiScanJob};
use crate::model::{Model, ModelSpec};
use crate::report::output::{stderr, OutputFile};
use crate::report::scan_multi::{csv_rows as multi_csv_rows, json_row as multi_json_row};

/// What a scan runs over: the model, the axes, the N_* list and the data, and the slice.
struct Grid {
    spec: ModelSpec,
    axes: Vec<Axis>,
    n_stars: Vec<f64>,
    data: DataSet,
    shard: Option<Shard>,
    total: usize,
}

/// `efold scan`: every check first, then the grid streamed to standard output or `--out`.
pub(crate) fn scan_cmd(a: &ScanArgs, config: &Config) -> Result<String, Failure> {
    check_efolds_count(&a.efolds.efolds, config)?;
    // Compile once up front: a bad model is one error, not one per point.
    let mut spec = load_spec(
        &a.model,
        "efold scan models/pole-order-2-quadratic.toml --vary alpha=0.1:10:30:log",
        config,
    )?;
    declare_varied(&mut spec, &a.vary, config)?;
    let model = Model::build(&spec, config)?;
    check_varied_used("--vary", &a.vary, &model.spec, config)?;
    if model.n_fields() > 1 {
        return scan_several_fields(a, &model, config);
    }
    let spec = model.spec.clone();
    let data = load_data(&a.data, config)?;
    let axes = parse_axes(a, &spec, config)?;
    let total = check_grid_size(&axes, config)?;
    let shard = shard_from_flag(a.shard.as_deref())?;
    let n_stars = checked_n_stars(&a.efolds.efolds, &spec, config)?;
    check_out_and_figure(a)?;
    let grid = Grid {
        spec,
        axes,
        n_stars,
        data,
        shard,
        total,
    };
    run_grid(a, &grid, config)?;
    Ok(String::new())
}

/// The axes of `--vary`: once or twice, two different names, each within
/// `Limits::max_axis_points`.
fn parse_axes(a: &ScanArgs, spec: &ModelSpec, config: &Config) -> Result<Vec<Axis>, Failure> {
    if a.vary.len() > 2 {
        return Err(Diagnostic::new("at most two parameters can be varied at once")
            .with_hint("give --vary once or twice")
            .into());
    }
    check_vary_names(&a.vary)?;
    let limit = config.limits.max_axis_points;
    a.vary
        .iter()
        .map(|v| Axis::parse(v, spec, a.points, limit))
        .collect::<Result<Vec<_>, _>>()
        .map_err(|e| Failure::from(e.diagnostic()))
}

/// The table and a figure on one file are refused.
fn check_out_and_figure(a: &ScanArgs) -> Result<(), Failure> {
    for fig in [&a.figure.svg, &a.figure.pdf] {
        let (Some(out), Some(svg)) = (&a.out.out, fig) else {
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
    Ok(())
}

/// Runs the grid, streaming the table chunk by chunk (to `--out`, committed at the end, or to
/// standard output), then writes the figure if asked for.
fn run_grid(a: &ScanArgs, g: &Grid, config: &Config) -> Result<(), Failure> {
    use std::io::IsTerminal;
    let provenance = g.shard.map(|s| {
        let range = s.range(g.total);
        Provenance {
            scan: definition_id(&g.spec, &g.axes, &g.n_stars, &g.data),
            shard: s.k,
            shards: s.n,
            points: [range.start, range.end],
            total: g.total,
            efolds: g.n_stars.clone(),
            fields: None,
        }
    });
    let names: Vec<String> = g.axes.iter().map(|x| x.name.clone()).collect();
    let mut table = Table::new(a.format == ScanFormat::Json, provenance);
    let out = &a.out.out;
    let mut file = match out {
        Some(path) => Some(OutputFile::create(path).map_err(|e| cannot_write(path, e))?),
        None => None,
    };
    let mut emit = |text: &str| -> Result<(), Failure> {
        match (&mut file, out) {
            (Some(f), Some(path)) => f.write(text).map_err(|e| cannot_write(path, e)),
            _ => print_out(text),
        }
    };
    emit(&table.start(&names))?;
    let (mut rows_done, mut failed) = (0usize, 0usize);
    // The figure needs every row; the table alone is streamed chunk by chunk.
    let mut kept: Vec<ScanRow> = Vec::new();
    let progress = std::io::stderr().is_terminal();
    let job = ScanJob {
        spec: &g.spec,
        axes: &g.axes,
        n_stars: &g.n_stars,
        data: &g.data,
        shard: g.shard,
        config,
        progress,
    };
    run_chunks(&job, &mut |rows| {
        rows_done += rows.len();
        failed += rows.iter().filter(|r| r.result.is_err()).count();
        if a.figure.wanted() {
            kept.extend_from_slice(rows);
        }
        emit(&table.rows(rows))
    })?;
    emit(&table.end())?;
    if failed > 0 {
        stderr(&format!(
            "efold: warning: {failed} of {rows_done} rows failed; they keep their row with the error\n"
        ));
    }
    if a.figure.wanted() {
        let svg = figure(&g.spec.name, &g.axes, &kept, &g.data, a.figure.figure_width);
        write_figure(&a.figure, &svg)?;
    }
    if let (Some(f), Some(path)) = (file, out) {
        f.commit().map_err(|e| cannot_write(path, e))?;
    }
    Ok(())
}

/// `efold scan` on a model of several fields: the axes over parameters and start coordinates
/// (`start.FIELD`), then the grid of multi-field predictions streamed as for one field. The
/// n_s–r figure is drawn for one field only.
fn scan_several_fields(a: &ScanArgs, model: &Model, config: &Config) -> Result<String, Failure> {
    if a.figure.wanted() {
        return Err(Diagnostic::new(format!(
            "--svg / --pdf: the scan figure is drawn for models of one field; the model `{}` has {} fields",
            model.spec.name,
            model.n_fields()
        ))
        .with_hint("leave out the figure and plot the table's n_s and r columns")
        .into());
    }
    let data = load_data(&a.data, config)?;
    if a.vary.len() > 2 {
        return Err(Diagnostic::new("at most two parameters can be varied at once")
            .with_hint("give --vary once or twice")
            .into());
    }
    check_vary_names(&a.vary)?;
    let axes = a
        .vary
        .iter()
        .map(|v| scan_multi::parse_axis(v, model, a.points, config.limits.max_axis_points))
        .collect::<Result<Vec<_>, _>>()
        .map_err(|e| Failure::input(e.render()))?;
    let total = check_grid_size(&axes, config)?;
    let shard = shard_from_flag(a.shard.as_deref())?;
    let n_stars = checked_n_stars(&a.efolds.efolds, &model.spec, config)?;
    let grid = Grid {
        spec: model.spec.clone(),
        axes,
        n_stars,
        data,
        shard,
        total,
    };
    run_multi_grid(a, model, &grid, config)?;
    Ok(String::new())
}

/// [`run_grid`] for a model of several fields (no figure).
fn run_multi_grid(a: &ScanArgs, model: &Model, g: &Grid, config: &Config) -> Result<(), Failure> {
    use std::io::IsTerminal;
    let provenance = g.shard.map(|s| {
        let range = s.range(g.total);
        Provenance {
            scan: scan_multi::definition_id(model, &g.axes, &g.n_stars, &g.data),
            shard: s.k,
            shards: s.n,
            points: [range.start, range.end],
            total: g.total,
            efolds: g.n_stars.clone(),
            fields: Some(model.field_names().to_vec()),
        }
    });
    let job = MultiScanJob {
        model,
        axes: &g.axes,
        n_stars: &g.n_stars,
        shard: g.shard,
        config,
        progress: std::io::stderr().is_terminal(),
    };
    let header = job.header();
    let predict_cols: Vec<String> = header[1 + g.axes.len()..header.len() - 1].to_vec();
    let json = a.format == ScanFormat::Json;
    let mut table = Table::new(json, provenance);
    let out = &a.out.out;
    let mut file = match out {
        Some(path) => Some(OutputFile::create(path).map_err(|e| cannot_write(path, e))?),
        None => None,
    };
    let mut emit = |text: &str| -> Result<(), Failure> {
        match (&mut file, out) {
            (Some(f), Some(path)) => f.write(text).map_err(|e| cannot_write(path, e)),
            _ => print_out(text),
        }
    };
    emit(&table.start_with_header(&header.join(",")))?;
    let (mut rows_done, mut failed) = (0usize, 0usize);
    scan_multi::run_chunks(&job, &mut |rows| {
        rows_done += rows.len();
        failed += rows.iter().filter(|r| r.result.is_err()).count();
        let text = if json {
            let rows: Vec<_> = rows.iter().map(|r| multi_json_row(r, &predict_cols)).collect();
            table.json_rows(&rows)
        } else {
            table.csv_lines(multi_csv_rows(rows, predict_cols.len()), rows.len())
        };
        emit(&text)
    })?;
    emit(&table.end())?;
    if failed > 0 {
        stderr(&format!(
            "efold: warning: {failed} of {rows_done} rows failed; they keep their row with the error\n"
        ));
    }
    if let (Some(f), Some(path)) = (file, out) {
        f.commit().map_err(|e| cannot_write(path, e))?;
    }
    Ok(())
}

/// `efold merge`: the shards of one scan joined into the unsharded table.
pub(crate) fn merge_cmd(a: &MergeArgs, config: &Config) -> Result<String, Failure> {
    let mut texts = Vec::new();
    for f in &a.files {
        let t = read_bounded(f, config.limits.max_shard_bytes)?;
        texts.push((f.display().to_string(), t));
    }
    let merged = merge(&texts).map_err(|e| {
        Failure::from(
            Diagnostic::new(e.to_string())
                .with_hint("give every file of one `efold scan --shard K/N` run, K = 1..N, each once, as written"),
        )
    })?;
    match &a.out.out {
        Some(path) => {
            write_output_file(path, &merged)?;
            Ok(String::new())
        }
        None => Ok(merged),
    }
}
