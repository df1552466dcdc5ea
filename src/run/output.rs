//! Writing the results folder atomically.
//!
//! All files are written into a staging folder `.<name>.partial` beside the
//! results folder (which also holds the journal while the run is going). Only
//! when every file is complete is the staging folder renamed into place, so a
//! results folder is either absent or whole. An existing results folder is only
//! replaced with `--force`, and then only after the new one is complete.

use std::fs;
use std::io::Write;
use std::path::{Path, PathBuf};

#[derive(Debug, thiserror::Error)]
pub enum OutputError {
    #[error("{0} already exists; pass --force to replace it (or --out to write elsewhere)")]
    Exists(String),
    #[error("{path}: {source}")]
    Io {
        path: String,
        source: std::io::Error,
    },
}

fn io(path: &Path, source: std::io::Error) -> OutputError {
    OutputError::Io {
        path: path.display().to_string(),
        source,
    }
}

/// The staging folder for a results folder.
pub fn staging_dir(out: &Path) -> PathBuf {
    let name = out
        .file_name()
        .map(|n| n.to_string_lossy().to_string())
        .unwrap_or_else(|| "results".into());
    out.with_file_name(format!(".{name}.partial"))
}

/// Check that `out` may be written and create its staging folder.
pub fn prepare(out: &Path, force: bool) -> Result<PathBuf, OutputError> {
    if out.exists() && !force {
        return Err(OutputError::Exists(out.display().to_string()));
    }
    let staging = staging_dir(out);
    fs::create_dir_all(&staging).map_err(|e| io(&staging, e))?;
    Ok(staging)
}

/// Write one file atomically inside a folder (temp file, then rename).
pub fn write_file(dir: &Path, name: &str, bytes: &[u8]) -> Result<(), OutputError> {
    let tmp = dir.join(format!("{name}.tmp"));
    let path = dir.join(name);
    if let Some(parent) = path.parent() {
        fs::create_dir_all(parent).map_err(|e| io(parent, e))?;
    }
    let mut f = fs::File::create(&tmp).map_err(|e| io(&tmp, e))?;
    f.write_all(bytes).map_err(|e| io(&tmp, e))?;
    f.sync_all().map_err(|e| io(&tmp, e))?;
    fs::rename(&tmp, &path).map_err(|e| io(&path, e))?;
    Ok(())
}

/// Move a complete staging folder into place, replacing `out` if it exists.
pub fn commit(staging: &Path, out: &Path) -> Result<(), OutputError> {
    let journal = staging.join(super::journal::FILE_NAME);
    if journal.exists() {
        fs::remove_file(&journal).map_err(|e| io(&journal, e))?;
    }
    if out.exists() {
        let name = out
            .file_name()
            .map(|n| n.to_string_lossy().to_string())
            .unwrap_or_default();
        let old = out.with_file_name(format!(".{name}.old"));
        if old.exists() {
            fs::remove_dir_all(&old).map_err(|e| io(&old, e))?;
        }
        fs::rename(out, &old).map_err(|e| io(out, e))?;
        fs::rename(staging, out).map_err(|e| io(out, e))?;
        fs::remove_dir_all(&old).map_err(|e| io(&old, e))?;
    } else {
        fs::rename(staging, out).map_err(|e| io(out, e))?;
    }
    Ok(())
}
