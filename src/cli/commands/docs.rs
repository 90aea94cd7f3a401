//! `completions` and `man`: shell completion scripts and manual pages, generated from the clap
//! definitions of [`crate::cli::Args`], so that they list exactly the commands and options the
//! parser takes.

use crate::cli::args::{CompletionsArgs, ManArgs};
use crate::cli::files::write_output_file;
use crate::cli::{Args, Failure};
use crate::diag::Diagnostic;
use clap::CommandFactory;

/// The name the scripts and pages complete and describe.
const BIN: &str = "efold";

/// `efold completions SHELL`: the completion script on standard output.
pub(crate) fn completions_cmd(a: &CompletionsArgs) -> Result<String, Failure> {
    let mut cmd = Args::command();
    let mut out: Vec<u8> = Vec::new();
    clap_complete::generate(a.shell, &mut cmd, BIN, &mut out);
    String::from_utf8(out).map_err(|_| Failure::from(Diagnostic::new("the completion script is not UTF-8")))
}

/// Every manual page: `efold.1`, then `efold-COMMAND.1` for each command (and
/// `efold-golden-write.1` for the commands of a command), as (file name, roff).
pub(crate) fn man_pages() -> Vec<(String, String)> {
    fn collect(cmd: &clap::Command, out: &mut Vec<(String, String)>) {
        let man = clap_mangen::Man::new(cmd.clone())
            .source(format!("{BIN} {}", env!("CARGO_PKG_VERSION")))
            .manual("efold manual");
        let mut roff: Vec<u8> = Vec::new();
        // Rendering into memory cannot fail.
        man.render(&mut roff).expect("rendering into memory");
        out.push((man.get_filename(), String::from_utf8_lossy(&roff).into_owned()));
        for sub in cmd.get_subcommands().filter(|s| !s.is_hide_set()) {
            collect(sub, out);
        }
    }
    let mut cmd = Args::command().disable_help_subcommand(true);
    // Building names each command's page after its parents (`efold-golden-write`).
    cmd.build();
    let mut out = Vec::new();
    collect(&cmd, &mut out);
    out
}

/// `efold man [PAGE] [--out DIR]`: one page on standard output (efold's own, or a command's),
/// or every page written into DIR, each file atomically.
pub(crate) fn man_cmd(a: &ManArgs) -> Result<String, Failure> {
    let pages = man_pages();
    let Some(dir) = &a.out else {
        let wanted = match &a.page {
            None => format!("{BIN}.1"),
            Some(p) => format!("{BIN}-{}.1", p.split_whitespace().collect::<Vec<_>>().join("-")),
        };
        return match pages.into_iter().find(|(name, _)| *name == wanted) {
            Some((_, roff)) => Ok(roff),
            None => {
                let names: Vec<String> = man_pages()
                    .into_iter()
                    .skip(1)
                    .map(|(n, _)| n.trim_start_matches("efold-").trim_end_matches(".1").to_string())
                    .collect();
                Err(
                    Diagnostic::new(format!("no manual page `{}`", a.page.as_deref().unwrap_or_default()))
                        .with_hint(format!("the pages: {}", names.join(", ")))
                        .with_hint("or leave the page out for efold's own")
                        .into(),
                )
            }
        };
    };
    if !dir.is_dir() {
        return Err(Diagnostic::new(format!("--out {}: not a directory", dir.display()))
            .with_hint("give an existing directory, e.g. `mkdir -p man/man1 && efold man --out man/man1`")
            .into());
    }
    for (name, roff) in &pages {
        write_output_file(&dir.join(name), roff)?;
    }
    Ok(String::new())
}
