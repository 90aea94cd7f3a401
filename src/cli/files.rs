//! Output files: written atomically, figures beside tables, two outputs on one file refused.

use super::args::FigureArgs;
use super::Failure;
use crate::diag::Diagnostic;
use crate::report::output::{same_destination, write_file};
use crate::report::plot::to_pdf;
use std::path::Path;

/// The error for a file that cannot be written.
pub(crate) fn cannot_write(path: &Path, e: std::io::Error) -> Failure {
    Diagnostic::new(format!("cannot write `{}`: {e}", path.display()))
        .with_hint("check that the directory exists and is writable, and that the disk has room")
        .into()
}

/// Writes a whole file atomically (see [`write_file`]).
pub(crate) fn write_output_file(path: &Path, contents: &str) -> Result<(), Failure> {
    write_file(path, contents).map_err(|e| cannot_write(path, e))
}

/// Refuses two outputs that are one file (whatever the spelling): `what` names them, `why`
/// says what would be lost.
pub(crate) fn refuse_one_file(a: &Path, b: &Path, what: String, why: &str, hint: &str) -> Result<(), Failure> {
    if same_destination(a, b) {
        return Err(Diagnostic::new(format!("{what} are one file: {why}"))
            .with_hint(hint)
            .into());
    }
    Ok(())
}

/// Writes a figure as SVG and/or PDF, each atomically; the PDF is made in memory first, so a
/// failed conversion leaves no file.
pub(crate) fn write_figure(figure: &FigureArgs, svg: &str) -> Result<(), Failure> {
    let (svg_path, pdf_path) = (&figure.svg, &figure.pdf);
    if let (Some(s), Some(p)) = (svg_path, pdf_path) {
        refuse_one_file(
            s,
            p,
            format!("--svg `{}` and --pdf `{}`", s.display(), p.display()),
            "one figure would overwrite the other",
            "give the SVG and the PDF different files",
        )?;
    }
    if let Some(path) = svg_path {
        write_output_file(path, svg)?;
    }
    if let Some(path) = pdf_path {
        let pdf = to_pdf(svg).map_err(|e| Failure::from(Diagnostic::new(e.to_string())))?;
        write_file(path, pdf).map_err(|e| cannot_write(path, e))?;
    }
    Ok(())
}
