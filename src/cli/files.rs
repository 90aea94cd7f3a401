//! Output files: written atomically, figures beside tables, two outputs on one file refused.

use super::*;
use crate::diag::Diagnostic;

/// The error for a file that cannot be written.
pub(crate) fn cannot_write(path: &std::path::Path, e: std::io::Error) -> Failure {
    Diagnostic::new(format!("cannot write `{}`: {e}", path.display()))
        .with_hint("check that the directory exists and is writable, and that the disk has room")
        .into()
}

pub(crate) fn write_output_file(path: &std::path::Path, contents: &str) -> Result<(), Failure> {
    crate::report::output::write_file(path, contents).map_err(|e| cannot_write(path, e))
}

/// Refuses two outputs that are one file (whatever the spelling): `what` names them, `why`
/// says what would be lost.
pub(crate) fn refuse_one_file(
    a: &std::path::Path,
    b: &std::path::Path,
    what: String,
    why: &str,
    hint: &str,
) -> Result<(), Failure> {
    if crate::report::output::same_destination(a, b) {
        return Err(Diagnostic::new(format!("{what} are one file: {why}"))
            .with_hint(hint)
            .into());
    }
    Ok(())
}

/// Writes a figure as SVG and/or PDF, each atomically; the PDF is made in memory first, so a
/// failed conversion leaves no file.
pub(crate) fn write_figure(
    svg_path: &Option<std::path::PathBuf>,
    pdf_path: &Option<std::path::PathBuf>,
    svg: &str,
) -> Result<(), Failure> {
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
        let pdf = crate::report::plot::to_pdf(svg).map_err(|e| Failure::from(Diagnostic::new(e.to_string())))?;
        crate::report::output::write_file(path, pdf).map_err(|e| cannot_write(path, e))?;
    }
    Ok(())
}
