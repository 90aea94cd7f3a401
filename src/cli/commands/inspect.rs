//! `inspect`: the canonical analysis of a model; for a model of several fields, its geometry at
//! the start, the poles along each field and the background's trajectory.

use crate::cli::args::{Format, InspectArgs};
use crate::cli::check::check_count;
use crate::cli::files::write_figure;
use crate::cli::load::{load_model_any, n_stars_of};
use crate::cli::Failure;
use crate::config::Config;
use crate::diag::{closest, Diagnostic, Source, Span};
use crate::drivers::inspect::{figure, inspect, text};
use crate::drivers::inspect_multi::{inspect_multi, MultiInspectError};
use crate::drivers::plane::plane_figure;
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
    if let Some(plane) = &a.plane {
        return Err(Diagnostic::new(format!(
            "--plane {plane} chooses two fields of a model of several fields; the model `{}` has one field",
            model.spec.name
        ))
        .with_hint("leave out --plane: the figure of one field draws V against the field and against chi")
        .into());
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
    let refused = [(a.table.is_some(), "--table")];
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
    if a.plane.is_some() && !a.figure.wanted() {
        return Err(
            Diagnostic::new("--plane chooses the plane of the figure, and no figure is asked for")
                .with_hint("add --svg FILE (or --pdf FILE), or leave out --plane")
                .into(),
        );
    }
    let plane = plane_fields(a.plane.as_deref(), model.field_names())?;
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
    if a.figure.wanted() {
        let (n_stars, _) = n_stars_of(&[], &model.spec);
        let data = plane_figure(model, plane, &n_stars)?;
        write_figure(&a.figure, &inspect_multi::figure(&data, a.figure.figure_width))?;
    }
    Ok(match a.format {
        Format::Json => format!(
            "{}\n",
            serde_json::to_string_pretty(&inspect_multi::json(&ins)).expect("serialisable report")
        ),
        Format::Text => inspect_multi::text(&ins),
    })
}

/// The fields of `--plane X,Y` (indices), or the first two; an unknown name (with the closest
/// field named), a repeated one or not two names are errors with a caret under the name.
fn plane_fields(flag: Option<&str>, fields: &[String]) -> Result<[usize; 2], Failure> {
    let Some(text) = flag else {
        return Ok([0, 1]);
    };
    let fail = |d: Diagnostic| Failure::input(d.render(Some(&Source::new("--plane", text))));
    let parts: Vec<&str> = text.split(',').collect();
    if parts.len() != 2 {
        return Err(fail(
            Diagnostic::new(format!(
                "`--plane {text}` names {} field{}; it takes two",
                parts.len(),
                if parts.len() == 1 { "" } else { "s" }
            ))
            .with_span(Span::new(0, text.len()), "two field names, separated by a comma")
            .with_hint(format!("write e.g. `--plane {},{}`", fields[0], fields[1])),
        ));
    }
    let mut at = [0; 2];
    let mut offset = 0;
    for (k, part) in parts.iter().enumerate() {
        let name = part.trim();
        let start = offset + part.find(name).unwrap_or(0);
        let span = Span::new(start, start + name.len().max(1));
        offset += part.len() + 1;
        let Some(i) = fields.iter().position(|f| f == name) else {
            // one- and two-letter names are all close to each other: no guess among them
            let guess = closest(name, fields.iter().map(String::as_str)).filter(|_| name.len() > 2);
            let hint = match guess {
                Some(c) => format!("did you mean `{c}`? the fields are {}", fields.join(", ")),
                None => format!("the fields are {}", fields.join(", ")),
            };
            return Err(fail(
                Diagnostic::new(format!("`--plane {text}`: `{name}` is not a field of the model"))
                    .with_span(span, "not a field")
                    .with_hint(hint),
            ));
        };
        if k == 1 && i == at[0] {
            return Err(fail(
                Diagnostic::new(format!("`--plane {text}` names `{name}` twice"))
                    .with_span(span, "the same field again")
                    .with_hint("the plane needs two different fields"),
            ));
        }
        at[k] = i;
    }
    Ok(at)
}
