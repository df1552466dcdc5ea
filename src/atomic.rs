//! Files written whole or not at all, and scratch output removed on an
//! interrupt: [`AtomicFile`] (a staging file beside the target, renamed into
//! place on commit) for the single files of `fit`, `apply` and `diagnose`, and
//! [`remove_on_interrupt`] for scratch folders such as the rerun of `verify`.
//! [`guard_signals`] installs the one signal thread that cleans up both.

use std::ffi::{OsStr, OsString};
use std::fs::File;
use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::{Mutex, MutexGuard};

use anyhow::{bail, Context, Result};

/// A file written through a staging file beside its target and renamed into
/// place by [`AtomicFile::commit`]; dropped uncommitted, the staging file is
/// removed, so a failed command leaves nothing behind. An interrupt (SIGINT,
/// SIGTERM, SIGHUP) removes it too ([`guard_signals`]); after a SIGKILL or a
/// power cut the next run for the same target reuses (truncates) the same
/// staging name, so at most one stale staging file per target can exist.
///
/// The staging name is `.NAME.partial`, shortened for long names to
/// `.PREFIX~HASH.partial` ([`staging_name`]) so that every name the file
/// system accepts as a target also works as a staging name. Messages name the
/// target, never the staging file.
pub struct AtomicFile {
    tmp: PathBuf,
    target: PathBuf,
    file: Option<File>,
}

/// Longest target name (bytes) staged as `.NAME.partial`; longer names are
/// cut to this many bytes and marked with a hash of the whole name. 255 bytes
/// is the usual file-name limit; `.`, `~`, 16 hex digits and `.partial` fit
/// beside 200 bytes.
const STAGING_PREFIX_MAX: usize = 200;

/// The staging file name for a target file name (see [`AtomicFile`]).
pub fn staging_name(name: &OsStr) -> OsString {
    let bytes = name.as_encoded_bytes();
    if bytes.len() <= STAGING_PREFIX_MAX {
        let mut s = OsString::from(".");
        s.push(name);
        s.push(".partial");
        return s;
    }
    use sha2::Digest;
    let digest = sha2::Sha256::digest(bytes);
    let hash: String = digest[..8].iter().map(|b| format!("{b:02x}")).collect();
    // Cut on a character boundary when the name is text; an arbitrary byte
    // name is cut at any byte.
    let prefix = match name.to_str() {
        Some(text) => {
            let mut cut = STAGING_PREFIX_MAX;
            while !text.is_char_boundary(cut) {
                cut -= 1;
            }
            OsString::from(&text[..cut])
        }
        None => os_from_bytes(&bytes[..STAGING_PREFIX_MAX]),
    };
    let mut s = OsString::from(".");
    s.push(prefix);
    s.push(format!("~{hash}.partial"));
    s
}

#[cfg(unix)]
fn os_from_bytes(b: &[u8]) -> OsString {
    use std::os::unix::ffi::OsStrExt;
    OsStr::from_bytes(b).to_os_string()
}

#[cfg(not(unix))]
fn os_from_bytes(b: &[u8]) -> OsString {
    OsString::from(String::from_utf8_lossy(b).into_owned())
}

impl AtomicFile {
    pub fn create(target: &Path) -> Result<AtomicFile> {
        guard_signals();
        let shown = target.display();
        if target.is_dir() {
            bail!("{shown}: is a directory; give a file name to write");
        }
        let name = target
            .file_name()
            .with_context(|| format!("{shown}: not a file name"))?;
        let dir = match target.parent() {
            Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
            _ => PathBuf::from("."),
        };
        let tmp = dir.join(staging_name(name));
        // Registered before it exists, so an interrupt during the creation
        // still removes it.
        staged().push(tmp.clone());
        let file = match File::create(&tmp) {
            Ok(f) => f,
            Err(e) => {
                unstage(&tmp);
                return Err(e).with_context(|| format!("{shown}: cannot create"));
            }
        };
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
            .with_context(|| format!("{}: cannot open for writing", self.target.display()))
    }

    /// Flush to disk and rename into place.
    pub fn commit(mut self) -> Result<()> {
        if let Some(f) = self.file.as_ref() {
            f.sync_all()
                .with_context(|| format!("{}: cannot write", self.target.display()))?;
        }
        // The rename happens under the lock the signal thread takes, so an
        // interrupt either removes the staging file before it or finds it
        // gone (renamed) after it.
        let mut staged = staged();
        std::fs::rename(&self.tmp, &self.target)
            .with_context(|| format!("{}: cannot move into place", self.target.display()))?;
        self.file = None;
        staged.retain(|p| p != &self.tmp);
        Ok(())
    }
}

impl Drop for AtomicFile {
    fn drop(&mut self) {
        if self.file.take().is_some() {
            let _ = std::fs::remove_file(&self.tmp);
            unstage(&self.tmp);
        }
    }
}

/// Staging files of this process not yet committed or removed, and scratch
/// files and folders registered with [`remove_on_interrupt`].
static STAGED: Mutex<Vec<PathBuf>> = Mutex::new(Vec::new());

/// Remove `path` (a file, or a folder with everything below it) if the
/// process is interrupted (SIGINT, SIGTERM, SIGHUP) before
/// [`forget_on_interrupt`] is called for it. For scratch output that must not
/// outlive its command, such as the rerun folder of `verify`.
pub fn remove_on_interrupt(path: &Path) {
    guard_signals();
    staged().push(path.to_path_buf());
}

/// Stop removing `path` on an interrupt (it was removed or kept on purpose).
pub fn forget_on_interrupt(path: &Path) {
    unstage(path);
}

/// Remove a registered path: a folder with everything below it (a few
/// rounds, as worker threads may still be adding files to it), else a file.
fn remove_registered(p: &Path) {
    match std::fs::symlink_metadata(p) {
        Ok(m) if m.is_dir() => {
            for _ in 0..5 {
                if std::fs::remove_dir_all(p).is_ok() || !p.exists() {
                    break;
                }
            }
        }
        Ok(_) => {
            let _ = std::fs::remove_file(p);
        }
        Err(_) => {}
    }
}

fn staged() -> MutexGuard<'static, Vec<PathBuf>> {
    STAGED
        .lock()
        .unwrap_or_else(|poisoned| poisoned.into_inner())
}

fn unstage(tmp: &Path) {
    staged().retain(|p| p != tmp);
}

/// Handle the signals a writing command must not die of silently (once per
/// process; every [`AtomicFile`] calls it):
/// - SIGINT, SIGTERM, SIGHUP remove the uncommitted staging files (and the
///   paths of [`remove_on_interrupt`]), then end the process as the signal
///   would have (the parent sees the same signal);
/// - SIGXFSZ (a file-size limit) is caught and dropped, so the write that
///   crosses the limit fails with "File too large" and the command reports it
///   and cleans up instead of being killed with its staging file left behind.
pub fn guard_signals() {
    #[cfg(unix)]
    {
        static ONCE: std::sync::Once = std::sync::Once::new();
        ONCE.call_once(|| {
            use signal_hook::consts::{SIGHUP, SIGINT, SIGTERM, SIGXFSZ};
            let Ok(mut signals) =
                signal_hook::iterator::Signals::new([SIGINT, SIGTERM, SIGHUP, SIGXFSZ])
            else {
                return;
            };
            let spawned = std::thread::Builder::new()
                .name("signals".into())
                .spawn(move || {
                    for sig in signals.forever() {
                        if sig == SIGXFSZ {
                            continue;
                        }
                        // The lock is kept: no commit renames after this.
                        let staged = staged();
                        for p in staged.iter() {
                            remove_registered(p);
                        }
                        let _ = signal_hook::low_level::emulate_default_handler(sig);
                        std::process::exit(128 + sig);
                    }
                });
            drop(spawned);
        });
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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn staging_names_fit_the_name_limit_and_stay_distinct() {
        assert_eq!(
            staging_name(OsStr::new("out.csv.gz")),
            OsStr::new(".out.csv.gz.partial")
        );
        let long_a = format!("{}a.csv", "x".repeat(250));
        let long_b = format!("{}b.csv", "x".repeat(250));
        let (a, b) = (
            staging_name(OsStr::new(&long_a)),
            staging_name(OsStr::new(&long_b)),
        );
        assert!(a.len() <= 255 && b.len() <= 255, "{}", a.len());
        assert_ne!(a, b, "same prefix, different names");
        assert_eq!(a, staging_name(OsStr::new(&long_a)), "the same every run");
        let a = a.to_str().unwrap();
        assert!(a.starts_with(".xxx") && a.ends_with(".partial"), "{a}");
        // A multi-byte character across the cut is not split.
        let wide = "é".repeat(120);
        let s = staging_name(OsStr::new(&wide));
        assert!(s.to_str().is_some() && s.len() <= 255);
    }
}
