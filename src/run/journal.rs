//! The journal: finished units appended one JSON line each, flushed as they
//! complete, in a staging folder beside the results folder. A run that stops
//! early (Ctrl-C, a crash, `kill -9`, a power cut) is resumed by running the
//! same command again: units already in the journal are not run twice.
//!
//! The first line is a header naming what the units depend on ([`RunKey`]:
//! tool version, suite SHA-256, task ids with their data SHA-256, and the shard
//! when the run is one share of a sharded run). A journal written for another
//! suite, other data, another tool version or another shard is refused with a
//! message naming what changed; `--force` (`discard_other`) sets it aside and
//! starts afresh.
//!
//! Torn tail: a process killed mid-write leaves a partial last line, and a
//! disk may leave garbage after it. Every line from the first one that is not
//! a whole unit record to the end of the file is dropped (and counted in
//! [`Journal::dropped`]), provided no whole record follows; a damaged line
//! *followed* by whole records is not a torn write but corruption, and is
//! refused. Each record is written with a single `write` call ending in a
//! newline, so a record is either whole or the torn tail.

use std::fs::{File, OpenOptions};
use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::Mutex;

use sha2::{Digest, Sha256};

use super::UnitOutcome;

pub const FILE_NAME: &str = "journal.jsonl";
const FORMAT: u32 = 2;

/// Everything the units of a run depend on besides the code: a journal is
/// resumed only under an equal key.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct RunKey {
    pub version: String,
    pub suite_sha256: String,
    /// (task id, data SHA-256) in suite order.
    pub tasks: Vec<(String, String)>,
    /// `K/N` for one shard of a sharded run.
    #[serde(default)]
    pub shard: Option<String>,
}

impl RunKey {
    /// SHA-256 over every field.
    pub fn fingerprint(&self) -> String {
        let mut h = Sha256::new();
        h.update(self.version.as_bytes());
        h.update(self.suite_sha256.as_bytes());
        for (id, sha) in &self.tasks {
            h.update(id.as_bytes());
            h.update(sha.as_bytes());
        }
        if let Some(s) = &self.shard {
            h.update(b"shard");
            h.update(s.as_bytes());
        }
        crate::suite::hex(&h.finalize())
    }

    /// What changed from `old` (the journal's key) to `self`, one phrase each.
    pub fn changes_from(&self, old: &RunKey) -> Vec<String> {
        let short = |s: &str| s.chars().take(12).collect::<String>();
        let mut out = Vec::new();
        if old.version != self.version {
            out.push(format!(
                "plumbline version {} → {}",
                old.version, self.version
            ));
        }
        if old.suite_sha256 != self.suite_sha256 {
            out.push(format!(
                "the suite file was edited (SHA-256 {}… → {}…)",
                short(&old.suite_sha256),
                short(&self.suite_sha256)
            ));
        }
        let ids = |k: &RunKey| k.tasks.iter().map(|t| t.0.clone()).collect::<Vec<_>>();
        if ids(old) != ids(self) {
            out.push(format!(
                "the tasks changed ({} → {})",
                ids(old).join(", "),
                ids(self).join(", ")
            ));
        } else {
            for ((id, a), (_, b)) in old.tasks.iter().zip(&self.tasks) {
                if a != b {
                    out.push(format!(
                        "the data of task `{id}` changed (SHA-256 {}… → {}…)",
                        short(a),
                        short(b)
                    ));
                }
            }
        }
        if old.shard != self.shard {
            let s = |x: &Option<String>| x.clone().unwrap_or_else(|| "none".into());
            out.push(format!(
                "the shard changed ({} → {})",
                s(&old.shard),
                s(&self.shard)
            ));
        }
        out
    }
}

#[derive(serde::Serialize, serde::Deserialize)]
struct Header {
    plumbline_journal: u32,
    fingerprint: String,
    #[serde(default)]
    key: Option<RunKey>,
}

pub struct Journal {
    path: PathBuf,
    file: Mutex<File>,
    /// Lines of a torn tail dropped when the journal was opened.
    pub dropped: usize,
}

fn header_line(key: &RunKey) -> Result<String, String> {
    let mut h = serde_json::to_string(&Header {
        plumbline_journal: FORMAT,
        fingerprint: key.fingerprint(),
        key: Some(key.clone()),
    })
    .map_err(|e| e.to_string())?;
    h.push('\n');
    Ok(h)
}

/// Why an existing journal cannot be resumed under `key`, if it cannot.
fn refusal(first: &[u8], key: &RunKey) -> Option<String> {
    let Ok(h) = serde_json::from_slice::<Header>(first) else {
        return Some("its first line is not a plumbline journal header".into());
    };
    if h.fingerprint == key.fingerprint() {
        return None;
    }
    match h.key {
        Some(old) => {
            let c = key.changes_from(&old);
            Some(if c.is_empty() {
                "it was written under another fingerprint".into()
            } else {
                c.join("; ")
            })
        }
        None => Some(format!(
            "it was written by an older plumbline (journal format {})",
            h.plumbline_journal
        )),
    }
}

impl Journal {
    /// Open (or create) the journal in `dir`; returns the units already done.
    ///
    /// A journal written under another [`RunKey`] is an error naming what
    /// changed, unless `discard_other` is set, when it is replaced by an
    /// empty one.
    pub fn open(
        dir: &Path,
        key: &RunKey,
        discard_other: bool,
    ) -> Result<(Journal, Vec<UnitOutcome>), String> {
        let path = dir.join(FILE_NAME);
        let mut done = Vec::new();
        let mut dropped = 0;
        let mut reuse = false;
        if path.exists() {
            let bytes = std::fs::read(&path).map_err(|e| format!("{}: {e}", path.display()))?;
            let mut lines: Vec<&[u8]> = bytes.split(|&b| b == b'\n').collect();
            if lines.last().is_some_and(|l| l.is_empty()) {
                lines.pop();
            }
            match lines.first().map(|first| refusal(first, key)) {
                // An empty file: nothing to resume, nothing to refuse.
                None => {}
                Some(None) => reuse = true,
                Some(Some(why)) if !discard_other => {
                    return Err(format!(
                        "{} belongs to an interrupted run that cannot be resumed: {why}. \
                         Rerun with --force to discard it and start over (or delete {})",
                        path.display(),
                        dir.display()
                    ))
                }
                Some(Some(_)) => {}
            }
            if reuse {
                let records = &lines[1..];
                let parsed: Vec<Option<UnitOutcome>> = records
                    .iter()
                    .map(|l| serde_json::from_slice::<UnitOutcome>(l).ok())
                    .collect();
                let whole = parsed.iter().take_while(|p| p.is_some()).count();
                if let Some(k) = parsed[whole..].iter().position(|p| p.is_some()) {
                    return Err(format!(
                        "{}: line {} is damaged but line {} after it is whole: the journal is \
                         corrupt, not torn. Rerun with --force to discard it and start over",
                        path.display(),
                        whole + 2,
                        whole + k + 2
                    ));
                }
                dropped = records.len() - whole;
                done = parsed.into_iter().take(whole).flatten().collect();
            }
        }
        // (Re)write the journal: the header and the whole records, so appends
        // start on a clean line.
        let tmp = dir.join(format!("{FILE_NAME}.tmp"));
        let mut text = header_line(key)?;
        for u in &done {
            text.push_str(&serde_json::to_string(u).map_err(|e| e.to_string())?);
            text.push('\n');
        }
        let mut f = File::create(&tmp).map_err(|e| format!("{}: {e}", tmp.display()))?;
        f.write_all(text.as_bytes())
            .and_then(|_| f.sync_all())
            .map_err(|e| format!("{}: {e}", tmp.display()))?;
        std::fs::rename(&tmp, &path).map_err(|e| format!("{}: {e}", path.display()))?;
        let file = OpenOptions::new()
            .append(true)
            .open(&path)
            .map_err(|e| format!("{}: {e}", path.display()))?;
        Ok((
            Journal {
                path,
                file: Mutex::new(file),
                dropped,
            },
            done,
        ))
    }

    /// Append one finished unit (one `write` of the whole line) and flush it
    /// to the operating system.
    pub fn append(&self, u: &UnitOutcome) -> Result<(), String> {
        let mut line = serde_json::to_string(u).map_err(|e| e.to_string())?;
        line.push('\n');
        let mut f = self
            .file
            .lock()
            .map_err(|_| "journal lock poisoned".to_string())?;
        f.write_all(line.as_bytes())
            .and_then(|_| f.flush())
            .map_err(|e| format!("{}: {e}", self.path.display()))
    }
}
