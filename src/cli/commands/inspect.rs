//! `inspect`: the canonical analysis of a model.

use crate::cli::*;
use crate::config::Config;

pub(crate) fn inspect_cmd(a: &InspectArgs, config: &Config) -> Result<String, Failure> {
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
