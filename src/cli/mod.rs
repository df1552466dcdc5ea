//! Commands for using a chosen method in production: `fit` (one method on a
//! score file → map file) and `apply` (map file + score file → calibrated
//! probabilities), and `diagnose` (the calibration metrics of one score file
//! with bootstrap intervals). Each command has its clap arguments and a `run` function
//! that tests call directly.

pub mod apply;
pub mod diagnose;
pub mod fit;

use std::fs::File;
use std::io::{self, Write};
use std::path::{Path, PathBuf};

use anyhow::{Context, Result};

/// A file written through a temporary file beside its target (`.NAME.partial`)
/// and renamed into place by [`AtomicFile::commit`]; dropped uncommitted, the
/// temporary file is removed, so a failed command leaves nothing behind.
pub struct AtomicFile {
    tmp: PathBuf,
    target: PathBuf,
    file: Option<File>,
}

impl AtomicFile {
    pub fn create(target: &Path) -> Result<AtomicFile> {
        let name = target
            .file_name()
            .with_context(|| format!("{}: not a file name", target.display()))?;
        let dir = match target.parent() {
            Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
            _ => PathBuf::from("."),
        };
        let tmp = dir.join(format!(".{}.partial", name.to_string_lossy()));
        let file =
            File::create(&tmp).with_context(|| format!("{}: cannot create", tmp.display()))?;
        Ok(AtomicFile {
            tmp,
            target: target.to_path_buf(),
            file: Some(file),
        })
    }

    /// A handle to write through (the same open file).
    pub fn writer(&self) -> Result<File> {
        let f = self.file.as_ref().context("file already committed")?;
        f.try_clone()
            .with_context(|| format!("{}: cannot open for writing", self.tmp.display()))
    }

    /// Flush to disk and rename into place.
    pub fn commit(mut self) -> Result<()> {
        if let Some(f) = self.file.take() {
            f.sync_all()
                .with_context(|| format!("{}: cannot write", self.tmp.display()))?;
        }
        std::fs::rename(&self.tmp, &self.target)
            .with_context(|| format!("{}: cannot move into place", self.target.display()))?;
        Ok(())
    }
}

impl Drop for AtomicFile {
    fn drop(&mut self) {
        if self.file.take().is_some() {
            let _ = std::fs::remove_file(&self.tmp);
        }
    }
}

/// Write a whole file atomically.
pub fn write_atomic(target: &Path, bytes: &[u8]) -> Result<()> {
    let f = AtomicFile::create(target)?;
    f.writer()?
        .write_all(bytes)
        .with_context(|| format!("{}: cannot write", target.display()))?;
    f.commit()
}

/// Standard output, buffered, for `--out -`.
pub fn stdout() -> io::BufWriter<io::Stdout> {
    io::BufWriter::with_capacity(1 << 16, io::stdout())
}
