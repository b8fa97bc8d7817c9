//! Files the command writes (firmware constants, plots): never half-written, never over
//! the scenario or its edge list, never through a symbolic link unless told so.

use crate::run::CliError;
use std::fs::{self, File, OpenOptions};
use std::io::Write;
use std::path::{Path, PathBuf};

/// What a write must not touch, and whether a symbolic link may be written through.
pub struct WritePolicy {
    /// Files that are inputs of this run (the scenario, its edge list), canonical paths.
    protected: Vec<PathBuf>,
    /// Write through a symbolic link (to its target) instead of refusing.
    pub force: bool,
}

impl WritePolicy {
    /// Protect `inputs` (those that exist); `force` allows writing through symbolic links.
    pub fn new<'a>(inputs: impl IntoIterator<Item = &'a Path>, force: bool) -> WritePolicy {
        WritePolicy {
            protected: inputs
                .into_iter()
                .filter_map(|p| fs::canonicalize(p).ok())
                .collect(),
            force,
        }
    }

    /// The file a write to `path` would replace, after the checks: not a symbolic link
    /// (unless forced, then its target), not a directory or special file, not an input.
    fn target(&self, path: &Path) -> Result<PathBuf, CliError> {
        let refuse = |message: String| CliError::Output {
            file: path.to_path_buf(),
            message,
        };
        let mut target = path.to_path_buf();
        if let Ok(meta) = fs::symlink_metadata(path) {
            if meta.file_type().is_symlink() {
                if !self.force {
                    return Err(refuse(
                        "it is a symbolic link; pass --force to write to the file it points to"
                            .to_owned(),
                    ));
                }
                target = fs::canonicalize(path)
                    .map_err(|e| refuse(format!("cannot follow the symbolic link: {e}")))?;
            }
        }
        if let Ok(meta) = fs::metadata(&target) {
            if !meta.is_file() {
                return Err(refuse(
                    "it exists and is not a regular file (a directory, device or pipe)".to_owned(),
                ));
            }
            let canonical = fs::canonicalize(&target).map_err(|e| refuse(e.to_string()))?;
            if self.protected.contains(&canonical) {
                return Err(refuse(
                    "it is an input of this run (the scenario or its edge list)".to_owned(),
                ));
            }
        }
        Ok(target)
    }

    /// Write `bytes` to `path`: to a temporary file in the same directory first, then
    /// renamed into place, so a reader sees the old file or the new one, never a part.
    pub fn write(&self, path: &Path, bytes: &[u8]) -> Result<(), CliError> {
        self.write_with(path, |temp| {
            let mut f = OpenOptions::new().write(true).truncate(true).open(temp)?;
            f.write_all(bytes)?;
            f.sync_all()
        })
    }

    /// As [`WritePolicy::write`], with `render` writing the temporary file (given its
    /// path; the file exists, empty, created by this process).
    pub fn write_with(
        &self,
        path: &Path,
        render: impl FnOnce(&Path) -> std::io::Result<()>,
    ) -> Result<(), CliError> {
        let target = self.target(path)?;
        let fail = |message: String| CliError::Output {
            file: path.to_path_buf(),
            message,
        };
        let dir = match target.parent() {
            Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
            _ => PathBuf::from("."),
        };
        let name = target
            .file_name()
            .ok_or_else(|| fail("not a file name".to_owned()))?
            .to_string_lossy()
            .into_owned();
        let temp = dir.join(format!(".{name}.{}.partial", std::process::id()));
        let written = (|| -> std::io::Result<()> {
            let _: File = OpenOptions::new()
                .write(true)
                .create_new(true)
                .open(&temp)?;
            render(&temp)?;
            fs::rename(&temp, &target)
        })();
        written.map_err(|e| {
            let _ = fs::remove_file(&temp);
            fail(e.to_string())
        })
    }

    /// Make sure files can be written in `dir` (created if missing) before a long run,
    /// by creating and removing a probe file there.
    pub fn check_dir(&self, dir: &Path) -> Result<(), CliError> {
        let fail = |message: String| CliError::Output {
            file: dir.to_path_buf(),
            message,
        };
        if let Ok(meta) = fs::symlink_metadata(dir) {
            if meta.file_type().is_symlink() && !self.force {
                return Err(fail(
                    "it is a symbolic link; pass --force to write in the folder it points to"
                        .to_owned(),
                ));
            }
        }
        fs::create_dir_all(dir).map_err(|e| fail(e.to_string()))?;
        let probe = dir.join(format!(".entrain-probe.{}", std::process::id()));
        OpenOptions::new()
            .write(true)
            .create_new(true)
            .open(&probe)
            .map_err(|e| fail(format!("cannot create files there: {e}")))?;
        fs::remove_file(&probe).map_err(|e| fail(e.to_string()))
    }
}

/// `text` with every control character except newline and tab shown as an escape
/// (`\u{1b}`), so a name or an echoed value cannot clear the screen, recolour it or ring
/// the bell.
pub fn terminal_safe(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        if c.is_control() && c != '\n' && c != '\t' {
            out.push_str(&c.escape_unicode().to_string());
        } else {
            out.push(c);
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn control_characters_are_escaped_and_text_kept() {
        assert_eq!(
            terminal_safe("bridge\u{1b}[2J\u{7}\nnext\tcol é"),
            "bridge\\u{1b}[2J\\u{7}\nnext\tcol é"
        );
        assert_eq!(terminal_safe("\u{9b}31m"), "\\u{9b}31m");
    }
}
