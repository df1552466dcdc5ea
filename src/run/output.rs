//! Writing a results folder atomically, one writer at a time, without ever
//! replacing a folder that is not ours.
//!
//! Every command that writes a folder (`run`, `run --shard`, `merge`,
//! `diagnose`) goes through [`prepare`], which returns a [`Target`]:
//!
//! - **Lock.** An exclusive lock file `.<name>.lock` beside the folder, made
//!   with `create_new` and holding the writer's process id. A second writer of
//!   the same folder is refused with the holder's id. A lock whose process is
//!   no longer alive (on Linux: no `/proc/<pid>`, or a zombie) is taken over
//!   with a note on standard error; where liveness cannot be checked a lock is
//!   taken as held. The lock is removed when the [`Target`] is dropped, on
//!   success and on every error path.
//! - **Guard.** An existing folder is replaced only with `--force`, and then
//!   only if it is empty or holds a `manifest.json` written by plumbline
//!   (`"tool": "plumbline"` with a `version`). Never the root, the home
//!   directory, the current directory or one of its parents, a symbolic link,
//!   or a folder that holds one of the command's inputs (suite file, score
//!   files, shard folders): see [`check_replace`].
//! - **Staging.** All files are written into a staging folder `.<name>.partial`
//!   beside the results folder (which also holds the journal while a run is
//!   going). Only when every file is complete is the staging folder renamed
//!   into place ([`Target::commit`]), so a results folder is either absent or
//!   whole, and an existing one is replaced only after the new one is complete.

use std::fs;
use std::io::{Read, Write};
use std::path::{Component, Path, PathBuf};

/// The file plumbline writes into every folder it produces.
pub const MANIFEST: &str = "manifest.json";

#[derive(Debug, thiserror::Error)]
pub enum OutputError {
    #[error("{0} already exists; pass --force to replace it (or --out to write elsewhere)")]
    Exists(String),
    #[error("{path}: refusing to replace this folder with --force: {reason}")]
    Refused { path: String, reason: String },
    #[error("{path} is being written by another plumbline process (PID {pid}, lock file {lock}); wait for it to finish or write elsewhere with --out")]
    Locked {
        path: String,
        pid: u32,
        lock: String,
    },
    #[error("{path}: the lock file {lock} exists but names no process; if no plumbline process is writing this folder, delete the lock file and retry")]
    BadLock { path: String, lock: String },
    #[error("{0}: an output folder path must end in a folder name (not `.`, `..` or `/`)")]
    NoName(String),
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

/// The last component of `out`, when it is a plain name.
fn folder_name(out: &Path) -> Option<String> {
    match out.components().next_back() {
        Some(Component::Normal(n)) => Some(n.to_string_lossy().to_string()),
        _ => None,
    }
}

/// A file beside `out` named `.<name><suffix>`.
fn beside(out: &Path, suffix: &str) -> PathBuf {
    let name = folder_name(out).unwrap_or_else(|| "results".into());
    out.with_file_name(format!(".{name}{suffix}"))
}

/// The staging folder for a results folder.
pub fn staging_dir(out: &Path) -> PathBuf {
    beside(out, ".partial")
}

/// The lock file of a results folder.
pub fn lock_path(out: &Path) -> PathBuf {
    beside(out, ".lock")
}

/// Whether `dir` holds a `manifest.json` written by plumbline: a JSON object
/// with `"tool": "plumbline"` and a string `version` (every manifest plumbline
/// writes has both).
pub fn is_results_folder(dir: &Path) -> bool {
    let Ok(f) = fs::File::open(dir.join(MANIFEST)) else {
        return false;
    };
    // A manifest is a few kilobytes; do not read a huge foreign file whole.
    let mut bytes = Vec::new();
    if f.take(64 << 20).read_to_end(&mut bytes).is_err() {
        return false;
    }
    let Ok(v) = serde_json::from_slice::<serde_json::Value>(&bytes) else {
        return false;
    };
    v.get("tool").and_then(|t| t.as_str()) == Some("plumbline")
        && v.get("version").is_some_and(|x| x.is_string())
}

fn home_dir() -> Option<PathBuf> {
    ["HOME", "USERPROFILE"]
        .iter()
        .filter_map(std::env::var_os)
        .find(|h| !h.is_empty())
        .map(PathBuf::from)
}

/// Why the existing `out` must not be replaced by `--force`, or `None` when
/// it may be: it is a folder, not a symbolic link, not the root, the home
/// directory, the current directory or a parent of it, holds none of
/// `inputs`, and is empty or a plumbline results folder.
pub fn check_replace(out: &Path, inputs: &[&Path]) -> Result<Option<String>, OutputError> {
    let meta = fs::symlink_metadata(out).map_err(|e| io(out, e))?;
    if meta.file_type().is_symlink() {
        return Ok(Some(
            "it is a symbolic link; remove the link yourself or choose another --out".into(),
        ));
    }
    if !meta.is_dir() {
        return Ok(Some(
            "it is a file, not a results folder; choose another --out".into(),
        ));
    }
    let real = out.canonicalize().map_err(|e| io(out, e))?;
    if real.parent().is_none() {
        return Ok(Some(
            "it is the root of the file system; choose a new folder with --out".into(),
        ));
    }
    if home_dir()
        .and_then(|h| h.canonicalize().ok())
        .is_some_and(|h| h == real)
    {
        return Ok(Some(
            "it is the home directory; choose a new folder with --out".into(),
        ));
    }
    if let Ok(cwd) = std::env::current_dir().and_then(|c| c.canonicalize()) {
        if cwd == real {
            return Ok(Some(
                "it is the current directory; choose a new folder with --out".into(),
            ));
        }
        if cwd.starts_with(&real) {
            return Ok(Some(
                "it contains the current directory; choose a new folder with --out".into(),
            ));
        }
    }
    for input in inputs {
        if let Ok(p) = input.canonicalize() {
            if p.starts_with(&real) {
                return Ok(Some(format!(
                    "it holds {}, an input of this command; choose another --out",
                    input.display()
                )));
            }
        }
    }
    let empty = fs::read_dir(&real)
        .map_err(|e| io(out, e))?
        .next()
        .is_none();
    if empty || is_results_folder(&real) {
        return Ok(None);
    }
    Ok(Some(format!(
        "it is not a plumbline results folder (no {MANIFEST} written by plumbline) and not empty; \
         choose a new folder with --out, or move its files away yourself"
    )))
}

/// Whether a process with this id is running. On Linux: `/proc/<pid>` exists
/// and is not a zombie. Elsewhere it cannot be told, so every process counts
/// as alive (a lock is then never taken over, only reported).
pub fn pid_alive(pid: u32) -> bool {
    if cfg!(target_os = "linux") {
        let proc = Path::new("/proc");
        if !proc.join("self").exists() {
            return true;
        }
        match fs::read_to_string(proc.join(pid.to_string()).join("stat")) {
            // `pid (command) S ...`: the state follows the last `)`.
            Ok(stat) => !matches!(
                stat.rsplit_once(')')
                    .and_then(|(_, rest)| rest.trim_start().chars().next()),
                Some('Z' | 'X')
            ),
            Err(_) => proc.join(pid.to_string()).exists(),
        }
    } else {
        true
    }
}

/// An exclusive lock on one output folder; removed on drop.
#[derive(Debug)]
pub struct Lock {
    path: PathBuf,
    token: String,
}

impl Lock {
    /// Take the lock of `out`, taking over a stale one (with a note on
    /// standard error).
    pub fn acquire(out: &Path) -> Result<Lock, OutputError> {
        let path = lock_path(out);
        if let Some(parent) = path.parent().filter(|p| !p.as_os_str().is_empty()) {
            fs::create_dir_all(parent).map_err(|e| io(parent, e))?;
        }
        let token = format!("{}\n", std::process::id());
        let shown = || (out.display().to_string(), path.display().to_string());
        // A few rounds: another process may take over the same stale lock.
        for _ in 0..4 {
            match fs::OpenOptions::new()
                .write(true)
                .create_new(true)
                .open(&path)
            {
                Ok(mut f) => {
                    let done = f.write_all(token.as_bytes()).and_then(|_| f.sync_all());
                    let lock = Lock {
                        path: path.clone(),
                        token: token.clone(),
                    };
                    done.map_err(|e| io(&path, e))?;
                    return Ok(lock);
                }
                Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => {}
                Err(e) => return Err(io(&path, e)),
            }
            let held = match fs::read_to_string(&path) {
                Ok(t) => t,
                Err(e) if e.kind() == std::io::ErrorKind::NotFound => continue,
                Err(e) => return Err(io(&path, e)),
            };
            let Ok(pid) = held.trim().parse::<u32>() else {
                let (path, lock) = shown();
                return Err(OutputError::BadLock { path, lock });
            };
            if pid_alive(pid) {
                let (path, lock) = shown();
                return Err(OutputError::Locked { path, pid, lock });
            }
            if take_over(&path, &held).map_err(|e| io(&path, e))? {
                eprintln!(
                    "note: {}: took over the lock {} left by process {pid}, which is no longer running",
                    out.display(),
                    path.display()
                );
            }
        }
        Err(io(
            &path,
            std::io::Error::other("could not take the lock: other processes keep taking it"),
        ))
    }
}

/// Remove a stale lock whose text is `stale`, unless another process has
/// replaced it meanwhile (then it is put back). Renaming first makes the
/// removal safe against a process that takes the lock at the same moment.
fn take_over(path: &Path, stale: &str) -> std::io::Result<bool> {
    let grave = path.with_file_name(format!(
        "{}.stale-{}",
        path.file_name().unwrap_or_default().to_string_lossy(),
        std::process::id()
    ));
    match fs::rename(path, &grave) {
        Ok(()) => {}
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(false),
        Err(e) => return Err(e),
    }
    if fs::read_to_string(&grave)? == stale {
        fs::remove_file(&grave)?;
        Ok(true)
    } else {
        // A fresh lock of another writer: give it back.
        let _ = fs::hard_link(&grave, path);
        let _ = fs::remove_file(&grave);
        Ok(false)
    }
}

impl Drop for Lock {
    fn drop(&mut self) {
        // Only our own lock: never one another process took over.
        if fs::read_to_string(&self.path).is_ok_and(|t| t == self.token) {
            let _ = fs::remove_file(&self.path);
        }
    }
}

/// An output folder being written: lock held, staging folder created.
#[derive(Debug)]
pub struct Target {
    out: PathBuf,
    staging: PathBuf,
    keep_staging: bool,
    committed: bool,
    _lock: Lock,
}

/// Lock `out`, check that it may be written (it does not exist, or `force`
/// and [`check_replace`] allows it), and create its staging folder.
/// `inputs` are the command's input files and folders, which `out` must not
/// hold. With `resumable` the staging folder is kept when the target is
/// dropped uncommitted (a run's journal resumes from it); otherwise it is
/// removed.
pub fn prepare(
    out: &Path,
    force: bool,
    inputs: &[&Path],
    resumable: bool,
) -> Result<Target, OutputError> {
    if folder_name(out).is_none() {
        return Err(OutputError::NoName(out.display().to_string()));
    }
    let lock = Lock::acquire(out)?;
    if fs::symlink_metadata(out).is_ok() {
        if !force {
            return Err(OutputError::Exists(out.display().to_string()));
        }
        if let Some(reason) = check_replace(out, inputs)? {
            return Err(OutputError::Refused {
                path: out.display().to_string(),
                reason,
            });
        }
    }
    let staging = staging_dir(out);
    fs::create_dir_all(&staging).map_err(|e| io(&staging, e))?;
    Ok(Target {
        out: out.to_path_buf(),
        staging,
        keep_staging: resumable,
        committed: false,
        _lock: lock,
    })
}

impl Target {
    /// The folder to write into.
    pub fn staging(&self) -> &Path {
        &self.staging
    }

    /// Move the complete staging folder into place, replacing the checked
    /// folder if it exists; the lock is released afterwards.
    pub fn commit(mut self) -> Result<(), OutputError> {
        let (staging, out) = (&self.staging, &self.out);
        let journal = staging.join(super::journal::FILE_NAME);
        if journal.exists() {
            fs::remove_file(&journal).map_err(|e| io(&journal, e))?;
        }
        if fs::symlink_metadata(out).is_ok() {
            let old = beside(out, ".old");
            if old.exists() {
                fs::remove_dir_all(&old).map_err(|e| io(&old, e))?;
            }
            fs::rename(out, &old).map_err(|e| io(out, e))?;
            fs::rename(staging, out).map_err(|e| io(out, e))?;
            fs::remove_dir_all(&old).map_err(|e| io(&old, e))?;
        } else {
            fs::rename(staging, out).map_err(|e| io(out, e))?;
        }
        self.committed = true;
        Ok(())
    }
}

impl Drop for Target {
    fn drop(&mut self) {
        if self.committed {
            return;
        }
        if self.keep_staging {
            // Only an empty one (a run stopped before its first unit).
            let _ = fs::remove_dir(&self.staging);
        } else {
            let _ = fs::remove_dir_all(&self.staging);
        }
    }
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

#[cfg(test)]
mod tests {
    use super::*;

    fn manifest(dir: &Path, text: &str) {
        fs::create_dir_all(dir).unwrap();
        fs::write(dir.join(MANIFEST), text).unwrap();
    }

    #[test]
    fn only_a_plumbline_manifest_marks_a_results_folder() {
        let t = tempfile::tempdir().unwrap();
        let d = t.path().join("r");
        assert!(!is_results_folder(&d));
        manifest(&d, r#"{"tool": "plumbline", "version": "0.1.0"}"#);
        assert!(is_results_folder(&d));
        manifest(&d, r#"{"tool": "other", "version": "0.1.0"}"#);
        assert!(!is_results_folder(&d));
        manifest(&d, r#"{"tool": "plumbline"}"#);
        assert!(!is_results_folder(&d));
        manifest(&d, "not json");
        assert!(!is_results_folder(&d));
    }

    #[test]
    fn force_replaces_only_empty_or_results_folders() {
        let t = tempfile::tempdir().unwrap();
        let empty = t.path().join("empty");
        fs::create_dir(&empty).unwrap();
        assert_eq!(check_replace(&empty, &[]).unwrap(), None);
        let ours = t.path().join("ours");
        manifest(&ours, r#"{"tool": "plumbline", "version": "0.1.0"}"#);
        fs::write(ours.join("units.csv.gz"), b"x").unwrap();
        assert_eq!(check_replace(&ours, &[]).unwrap(), None);
        let docs = t.path().join("docs");
        fs::create_dir(&docs).unwrap();
        fs::write(docs.join("notes.txt"), b"mine").unwrap();
        let why = check_replace(&docs, &[]).unwrap().unwrap();
        assert!(why.contains("not a plumbline results folder"), "{why}");
        let file = t.path().join("file");
        fs::write(&file, b"x").unwrap();
        assert!(check_replace(&file, &[]).unwrap().unwrap().contains("file"));
    }

    #[test]
    fn force_never_replaces_a_folder_holding_an_input() {
        let t = tempfile::tempdir().unwrap();
        let ours = t.path().join("ours");
        manifest(&ours, r#"{"tool": "plumbline", "version": "0.1.0"}"#);
        let suite = ours.join("deep").join("s.toml");
        fs::create_dir_all(suite.parent().unwrap()).unwrap();
        fs::write(&suite, b"name = 'x'").unwrap();
        let why = check_replace(&ours, &[&suite]).unwrap().unwrap();
        assert!(why.contains("s.toml"), "{why}");
        // An input elsewhere does not matter.
        let other = t.path().join("other.toml");
        fs::write(&other, b"").unwrap();
        assert_eq!(check_replace(&ours, &[&other]).unwrap(), None);
    }

    #[test]
    fn force_never_replaces_the_root() {
        let why = check_replace(Path::new("/"), &[]).unwrap().unwrap();
        assert!(why.contains("root"), "{why}");
    }

    #[cfg(unix)]
    #[test]
    fn force_never_replaces_a_symbolic_link() {
        let t = tempfile::tempdir().unwrap();
        let ours = t.path().join("ours");
        manifest(&ours, r#"{"tool": "plumbline", "version": "0.1.0"}"#);
        let link = t.path().join("link");
        std::os::unix::fs::symlink(&ours, &link).unwrap();
        let why = check_replace(&link, &[]).unwrap().unwrap();
        assert!(why.contains("symbolic link"), "{why}");
    }

    #[test]
    fn prepare_needs_a_folder_name() {
        for p in [".", "..", "a/..", "/"] {
            let e = prepare(Path::new(p), true, &[], false).unwrap_err();
            assert!(matches!(e, OutputError::NoName(_)), "{p}: {e}");
        }
    }

    #[test]
    fn a_held_lock_refuses_a_second_writer_and_is_released_on_drop() {
        let t = tempfile::tempdir().unwrap();
        let out = t.path().join("r");
        let first = prepare(&out, false, &[], false).unwrap();
        let lock = lock_path(&out);
        assert_eq!(
            fs::read_to_string(&lock).unwrap().trim(),
            std::process::id().to_string()
        );
        match prepare(&out, true, &[], false).unwrap_err() {
            OutputError::Locked { pid, .. } => assert_eq!(pid, std::process::id()),
            e => panic!("expected a lock refusal, got {e}"),
        }
        // The refused writer did not remove the holder's lock or staging.
        assert!(lock.exists());
        assert!(first.staging().is_dir());
        drop(first);
        assert!(!lock.exists());
        assert!(!staging_dir(&out).exists());
        assert!(!out.exists());
    }

    #[cfg(target_os = "linux")]
    #[test]
    fn a_stale_lock_is_taken_over() {
        let t = tempfile::tempdir().unwrap();
        let out = t.path().join("r");
        // Above the kernel's largest process id (2^22): never alive.
        fs::write(lock_path(&out), "4194305\n").unwrap();
        assert!(!pid_alive(4_194_305));
        let target = prepare(&out, false, &[], false).unwrap();
        assert_eq!(
            fs::read_to_string(lock_path(&out)).unwrap().trim(),
            std::process::id().to_string()
        );
        write_file(target.staging(), "a.txt", b"a").unwrap();
        target.commit().unwrap();
        assert_eq!(fs::read(out.join("a.txt")).unwrap(), b"a");
        assert!(!lock_path(&out).exists());
    }

    #[test]
    fn a_lock_without_a_process_id_is_reported() {
        let t = tempfile::tempdir().unwrap();
        let out = t.path().join("r");
        fs::write(lock_path(&out), "").unwrap();
        let e = prepare(&out, false, &[], false).unwrap_err();
        assert!(matches!(e, OutputError::BadLock { .. }), "{e}");
        assert!(lock_path(&out).exists());
    }

    #[test]
    fn commit_replaces_a_results_folder_and_keeps_a_resumable_staging() {
        let t = tempfile::tempdir().unwrap();
        let out = t.path().join("r");
        manifest(&out, r#"{"tool": "plumbline", "version": "0.1.0"}"#);
        fs::write(out.join("old.txt"), b"old").unwrap();
        assert!(matches!(
            prepare(&out, false, &[], true).unwrap_err(),
            OutputError::Exists(_)
        ));
        // An uncommitted resumable target keeps a staging folder with files.
        let target = prepare(&out, true, &[], true).unwrap();
        write_file(target.staging(), "half.txt", b"h").unwrap();
        drop(target);
        assert!(staging_dir(&out).join("half.txt").exists());
        let target = prepare(&out, true, &[], true).unwrap();
        write_file(
            target.staging(),
            MANIFEST,
            br#"{"tool":"plumbline","version":"x"}"#,
        )
        .unwrap();
        target.commit().unwrap();
        assert!(!out.join("old.txt").exists());
        assert!(out.join("half.txt").exists());
        assert!(!staging_dir(&out).exists());
        assert!(!beside(&out, ".old").exists());
    }

    #[test]
    fn pid_of_this_process_is_alive() {
        assert!(pid_alive(std::process::id()));
    }
}
