//! `inspect`: the canonical analysis of a model; for a model of several fields, its geometry at
//! the start, the poles along each field and the background's trajectory.

use crate::cli::args::{Format, InspectArgs};
use crate::cli::check::check_count;
use crate::cli::files::write_figure;
use crate::cli::load::load_model_any;
use crate::cli::Failure;
use crate::config::Config;
use crate::diag::Diagnostic;
use crate::drivers::inspect::{figure, inspect, text};
use crate::drivers::inspect_multi::{inspect_multi, MultiInspectError};
use crate::model::Model;
use crate::report::inspect_multi;

/// `efold inspect`: the model in canonical variables, with its figure if asked for.
pub(crate) fn inspect_cmd(a: &InspectArgs, config: &Config) -> Result<String, Failure> {
    if let Some(rows) = a.table {
        check_count("--table", rows, config.limits.max_table_rows, "max_table_rows")?;
    }
    let model = load_model_any(&a.model, "efold inspect models/pole-order-2-quadratic.toml", config)?;
    if model.n_fields() > 1 {
        return inspect_several_fields(a, &model, config);
    }
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

/// `efold inspect` on a model of several fields: the table of (phi, chi, V) and the figure are
/// of one field and refused.
fn inspect_several_fields(a: &InspectArgs, model: &Model, config: &Config) -> Result<String, Failure> {
    let refused = [(a.table.is_some(), "--table"), (a.figure.wanted(), "--svg / --pdf")];
    if let Some((_, flag)) = refused.iter().find(|(given, _)| *given) {
        return Err(Diagnostic::new(format!(
            "{flag} is not available for models of several fields; the model `{}` has {} fields",
            model.spec.name,
            model.n_fields()
        ))
        .with_hint(format!(
            "leave out {flag}: `efold inspect` on several fields reports the start point, the poles along each field and the trajectory"
        ))
        .into());
    }
    let ins = match inspect_multi(model, config) {
        Some(Ok(ins)) => ins,
        Some(Err(MultiInspectError::Analysis(e))) => return Err(e.into()),
        Some(Err(MultiInspectError::Model(e))) => return Err(e.into()),
        None => {
            return Err(Diagnostic::new(format!(
                "the model `{}` compiled without its field-space geometry",
                model.spec.name
            ))
            .with_hint("write the model with `fields = [...]`, a [metric] table and a [start] table")
            .into())
        }
    };
    Ok(match a.format {
        Format::Json => format!(
            "{}\n",
            serde_json::to_string_pretty(&inspect_multi::json(&ins)).expect("serialisable report")
        ),
        Format::Text => inspect_multi::text(&ins),
    })
}
