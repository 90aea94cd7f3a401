//! `inspect`: the canonical analysis of a model.

use crate::cli::args::{Format, InspectArgs};
use crate::cli::check::check_count;
use crate::cli::files::write_figure;
use crate::cli::load::load_model;
use crate::cli::Failure;
use crate::config::Config;
use crate::drivers::inspect::{figure, inspect, text};

/// `efold inspect`: the model in canonical variables, with its figure if asked for.
pub(crate) fn inspect_cmd(a: &InspectArgs, config: &Config) -> Result<String, Failure> {
    if let Some(rows) = a.table {
        check_count("--table", rows, config.limits.max_table_rows, "max_table_rows")?;
    }
    let model = load_model(&a.model, "efold inspect models/pole-order-2-quadratic.toml", config)?;
    let ins = inspect(&model, config, a.table)?;
    if a.figure.wanted() {
        let svg = figure(&model, &ins, &Default::default(), config, a.figure.figure_width)?;
        write_figure(&a.figure, &svg)?;
    }
    Ok(match a.format {
        Format::Json => format!("{}\n", serde_json::to_string_pretty(&ins).expect("serialisable report")),
        Format::Text => text(&ins),
    })
}
