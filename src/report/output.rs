//! Everything efold writes: standard output, and the files named by `--out`, `--svg` and the
//! golden files.
//!
//! - [`stdout`] is the one function that writes to standard output. A reader that went away (a
//!   closed pipe, `efold predict MODEL | head -c 10`) is [`WriteError::Closed`]: the command
//!   stops quietly with exit code 0, as a filter should. Any other failure (`> /dev/full`) is
//!   [`WriteError::Failed`], reported as `cannot write to standard output: ...` with exit code 2.
//! - [`OutputFile`] writes a named file. A regular file (or a path that does not exist yet) is
//!   written atomically: a temporary file beside it, then a rename, so a failure never leaves a
//!   half-written file nor the temporary one. A symbolic link is followed and its target written
//!   the same way, so the link stays. Anything else (a character device such as `/dev/null`, a
//!   FIFO) is written through, never replaced.
//! - [`same_destination`] tells whether two spellings name one file, so that a command writing
//!   two outputs can refuse to write both into one.

use std::io::Write as _;
use std::path::{Path, PathBuf};

/// Why a write to standard output failed.
#[derive(Debug)]
pub enum WriteError {
    /// The reader closed the pipe: stop quietly.
    Closed,
    /// Any other failure, in words.
    Failed(String),
}

/// Writes `text` to standard output and flushes it. The only function in efold that writes
/// there.
pub fn stdout(text: &str) -> Result<(), WriteError> {
    let mut out = std::io::stdout().lock();
    out.write_all(text.as_bytes())
        .and_then(|()| out.flush())
        .map_err(|e| match e.kind() {
            std::io::ErrorKind::BrokenPipe => WriteError::Closed,
            _ => WriteError::Failed(format!("cannot write to standard output: {e}")),
        })
}

/// Writes `text` to standard error, ignoring failure: a message that cannot be shown must not
/// turn into a panic.
pub fn stderr(text: &str) {
    let mut err = std::io::stderr().lock();
    let _ = err.write_all(text.as_bytes()).and_then(|()| err.flush());
}

/// Most symbolic links followed from one path before giving up (a loop of links).
const MAX_LINKS: usize = 40;

/// The path a write to `path` lands on: symbolic links followed (relative targets resolved
/// against the link's directory). The result may not exist yet.
pub fn resolve(path: &Path) -> std::io::Result<PathBuf> {
    let mut p = path.to_path_buf();
    for _ in 0..MAX_LINKS {
        match std::fs::symlink_metadata(&p) {
            Ok(m) if m.file_type().is_symlink() => {
                let target = std::fs::read_link(&p)?;
                p = match p.parent() {
                    Some(dir) if target.is_relative() => dir.join(target),
                    _ => target,
                };
            }
            _ => return Ok(p),
        }
    }
    Err(std::io::Error::other(format!(
        "more than {MAX_LINKS} symbolic links in a row (a loop?)"
    )))
}

/// Whether two paths name one destination, however they are spelt (`x`, `./x`, `dir/../x`,
/// a symbolic link to `x`), whether or not it exists yet.
pub fn same_destination(a: &Path, b: &Path) -> bool {
    fn identity(p: &Path) -> Option<PathBuf> {
        let p = resolve(p).ok()?;
        if let Ok(c) = std::fs::canonicalize(&p) {
            return Some(c);
        }
        let name = p.file_name()?;
        let dir = p
            .parent()
            .filter(|d| !d.as_os_str().is_empty())
            .unwrap_or(Path::new("."));
        Some(std::fs::canonicalize(dir).ok()?.join(name))
    }
    match (identity(a), identity(b)) {
        (Some(x), Some(y)) => x == y,
        _ => a == b,
    }
}

/// A file being written: into a temporary file renamed over the destination by
/// [`OutputFile::commit`], or straight into a device or FIFO. Dropped without a commit, the
/// temporary file is removed and the destination left as it was.
pub struct OutputFile {
    file: Option<std::fs::File>,
    /// (temporary, destination) when written atomically.
    rename: Option<(PathBuf, PathBuf)>,
}

impl OutputFile {
    /// Opens `path` for writing, as the module docs describe.
    pub fn create(path: &Path) -> std::io::Result<OutputFile> {
        // What the path leads to, links followed by the system (so that `/dev/stdout` and
        // other links to devices or pipes are written through).
        let (found, target) = match std::fs::metadata(path) {
            Ok(m) if m.is_dir() => return Err(std::io::Error::other("it is a directory")),
            Ok(m) if !m.is_file() => {
                let file = std::fs::OpenOptions::new().write(true).open(path)?;
                return Ok(OutputFile {
                    file: Some(file),
                    rename: None,
                });
            }
            Ok(m) => (Some(m), std::fs::canonicalize(path)?),
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => (None, resolve(path)?),
            Err(e) => return Err(e),
        };
        let dir = target
            .parent()
            .filter(|p| !p.as_os_str().is_empty())
            .unwrap_or(Path::new("."));
        let name = target
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_else(|| "out".into());
        let tmp = dir.join(format!(".{name}.tmp{}", std::process::id()));
        let file = std::fs::OpenOptions::new()
            .write(true)
            .create(true)
            .truncate(true)
            .open(&tmp)?;
        let out = OutputFile {
            file: Some(file),
            rename: Some((tmp, target)),
        };
        // An existing file keeps its permissions.
        if let (Some(m), Some(f)) = (found, &out.file) {
            f.set_permissions(m.permissions())?;
        }
        Ok(out)
    }

    /// Appends `text`.
    pub fn write(&mut self, text: &str) -> std::io::Result<()> {
        self.write_bytes(text.as_bytes())
    }

    /// Writes bytes (a PDF) to the file.
    pub fn write_bytes(&mut self, bytes: &[u8]) -> std::io::Result<()> {
        match &mut self.file {
            Some(f) => f.write_all(bytes),
            None => Err(std::io::Error::other("the file is already closed")),
        }
    }

    /// Finishes the file: flushed to disk and renamed over the destination.
    pub fn commit(mut self) -> std::io::Result<()> {
        let file = self.file.take().expect("an open file until commit");
        match &self.rename {
            Some((tmp, target)) => {
                file.sync_all()?;
                drop(file);
                std::fs::rename(tmp, target)?;
                self.rename = None;
                Ok(())
            }
            None => {
                let mut file = file;
                file.flush()
            }
        }
    }
}

impl Drop for OutputFile {
    fn drop(&mut self) {
        self.file = None;
        if let Some((tmp, _)) = self.rename.take() {
            let _ = std::fs::remove_file(tmp);
        }
    }
}

/// Writes a whole file as [`OutputFile`] does: atomically for a regular file (the target of a
/// link), straight through for a device or a FIFO. On failure nothing is left behind.
pub fn write_file(path: &Path, contents: impl AsRef<[u8]>) -> std::io::Result<()> {
    let mut f = OutputFile::create(path)?;
    f.write_bytes(contents.as_ref())?;
    f.commit()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn temp_dir(tag: &str) -> PathBuf {
        let d = std::env::temp_dir().join(format!("efold-output-{tag}-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&d);
        std::fs::create_dir_all(&d).unwrap();
        d
    }

    fn entries(dir: &Path) -> Vec<String> {
        let mut v: Vec<String> = std::fs::read_dir(dir)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        v.sort();
        v
    }

    #[test]
    fn an_uncommitted_file_leaves_nothing_behind() {
        let d = temp_dir("drop");
        let path = d.join("x.csv");
        std::fs::write(&path, "old\n").unwrap();
        {
            let mut f = OutputFile::create(&path).unwrap();
            f.write("new, but the write fails before the end").unwrap();
            assert_eq!(entries(&d).len(), 2, "the temporary file exists while writing");
        }
        assert_eq!(entries(&d), vec!["x.csv".to_string()]);
        assert_eq!(std::fs::read_to_string(&path).unwrap(), "old\n");
        std::fs::remove_dir_all(&d).unwrap();
    }

    #[test]
    fn spellings_of_one_path() {
        let d = temp_dir("same");
        let a = d.join("x.svg");
        let b = d.join("sub").join("..").join("x.svg");
        std::fs::create_dir_all(d.join("sub")).unwrap();
        assert!(same_destination(&a, &b), "not yet existing");
        std::fs::write(&a, "").unwrap();
        std::os::unix::fs::symlink("x.svg", d.join("link.svg")).unwrap();
        assert!(same_destination(&a, &d.join("link.svg")));
        assert!(!same_destination(&a, &d.join("y.svg")));
        std::fs::remove_dir_all(&d).unwrap();
    }

    #[test]
    fn a_loop_of_links_is_an_error() {
        let d = temp_dir("loop");
        std::os::unix::fs::symlink("b", d.join("a")).unwrap();
        std::os::unix::fs::symlink("a", d.join("b")).unwrap();
        assert!(write_file(&d.join("a"), "x").is_err());
        std::fs::remove_dir_all(&d).unwrap();
    }
}
