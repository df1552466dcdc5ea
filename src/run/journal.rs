//! The journal: finished units appended one JSON line each, flushed as they
//! complete, in a staging folder beside the results folder. A run that stops
//! early (Ctrl-C, a crash, a power cut) is resumed by running the same command
//! again: units already in the journal are not run twice. The first line holds
//! a fingerprint of the plan; a journal written for another suite, other data
//! or another tool version is set aside and the run starts afresh.

use std::fs::{File, OpenOptions};
use std::io::{BufRead, BufReader, Write};
use std::path::{Path, PathBuf};
use std::sync::Mutex;

use super::UnitOutcome;

pub const FILE_NAME: &str = "journal.jsonl";

#[derive(serde::Serialize, serde::Deserialize)]
struct Header {
    plumbline_journal: u32,
    fingerprint: String,
}

pub struct Journal {
    path: PathBuf,
    file: Mutex<File>,
}

impl Journal {
    /// Open (or create) the journal in `dir`; returns the units already done.
    pub fn open(dir: &Path, fingerprint: &str) -> Result<(Journal, Vec<UnitOutcome>), String> {
        let path = dir.join(FILE_NAME);
        let mut done = Vec::new();
        let mut reuse = false;
        if path.exists() {
            let f = File::open(&path).map_err(|e| format!("{}: {e}", path.display()))?;
            let mut lines = BufReader::new(f).lines();
            if let Some(Ok(first)) = lines.next() {
                if let Ok(h) = serde_json::from_str::<Header>(&first) {
                    reuse = h.fingerprint == fingerprint;
                }
            }
            if reuse {
                for line in lines {
                    let Ok(line) = line else { break };
                    // A torn last line (the process died mid-write) is simply dropped.
                    match serde_json::from_str::<UnitOutcome>(&line) {
                        Ok(u) => done.push(u),
                        Err(_) => break,
                    }
                }
            }
        }
        if !reuse {
            let mut f = File::create(&path).map_err(|e| format!("{}: {e}", path.display()))?;
            let h = serde_json::to_string(&Header {
                plumbline_journal: 1,
                fingerprint: fingerprint.to_string(),
            })
            .map_err(|e| e.to_string())?;
            writeln!(f, "{h}").map_err(|e| format!("{}: {e}", path.display()))?;
            f.sync_all()
                .map_err(|e| format!("{}: {e}", path.display()))?;
        } else {
            // Rewrite the journal without a torn tail so appends start clean.
            let tmp = dir.join(format!("{FILE_NAME}.tmp"));
            let mut f = File::create(&tmp).map_err(|e| format!("{}: {e}", tmp.display()))?;
            let h = serde_json::to_string(&Header {
                plumbline_journal: 1,
                fingerprint: fingerprint.to_string(),
            })
            .map_err(|e| e.to_string())?;
            writeln!(f, "{h}").map_err(|e| e.to_string())?;
            for u in &done {
                writeln!(
                    f,
                    "{}",
                    serde_json::to_string(u).map_err(|e| e.to_string())?
                )
                .map_err(|e| e.to_string())?;
            }
            f.sync_all().map_err(|e| e.to_string())?;
            std::fs::rename(&tmp, &path).map_err(|e| format!("{}: {e}", path.display()))?;
        }
        let file = OpenOptions::new()
            .append(true)
            .open(&path)
            .map_err(|e| format!("{}: {e}", path.display()))?;
        Ok((
            Journal {
                path,
                file: Mutex::new(file),
            },
            done,
        ))
    }

    /// Append one finished unit and flush it to the operating system.
    pub fn append(&self, u: &UnitOutcome) -> Result<(), String> {
        let line = serde_json::to_string(u).map_err(|e| e.to_string())?;
        let mut f = self
            .file
            .lock()
            .map_err(|_| "journal lock poisoned".to_string())?;
        writeln!(f, "{line}")
            .and_then(|_| f.flush())
            .map_err(|e| format!("{}: {e}", self.path.display()))
    }
}
