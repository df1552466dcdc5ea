//! On-disk cache of score pools.
//!
//! Key: SHA-256 (FIPS 180-4, via the `sha2` crate) of a length-prefixed record
//! of the cache format version, the crate version, the dataset digest
//! ([`dataset_digest`]: column names, kinds, every feature value's bits and the
//! labels), the model spec and the protocol (as JSON of their serde form) and the
//! seed. Any change to any of them gives a new key, so a stale entry is never
//! read; entries of old versions are simply no longer looked up.
//!
//! File `<key hex>.pool` in the cache directory, little-endian binary:
//!
//! ```text
//! "PLPOOL01"                      8 bytes
//! key                             32 bytes (must equal the file name's key)
//! n, train_rows, pinned (0/1)     u64 each
//! description length, bytes       u64, UTF-8 JSON of the model description
//! n × (row u64, score f64, label u8, side u8)   side: 0 reservoir, 1 test, 2 unpinned
//! SHA-256 of all bytes above      32 bytes
//! ```
//!
//! Writes go to a temporary file in the same directory that is then renamed
//! over the target (atomic on POSIX file systems), so a reader never sees a
//! half-written file. A file that fails any check is reported as an error by
//! [`read`], which the caller treats as a miss and overwrites.

use std::fs;
use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

use sha2::{Digest, Sha256};

use super::protocol::{PoolInfo, Protocol};
use super::ModelSpec;
use crate::data::{Dataset, FeatureKind, ScorePool, Side};

const MAGIC: &[u8; 8] = b"PLPOOL01";
const FORMAT: u64 = 1;

/// Why a cache file could not be used or written.
#[derive(Debug, thiserror::Error)]
pub enum CacheError {
    // The I/O error is part of the message, not a `source`: shown once.
    #[error("{path}: {error}")]
    Io {
        path: PathBuf,
        error: std::io::Error,
    },
    #[error("{path}: {reason}")]
    Corrupt { path: PathBuf, reason: String },
}

fn feed(h: &mut Sha256, bytes: &[u8]) {
    h.update((bytes.len() as u64).to_le_bytes());
    h.update(bytes);
}

/// SHA-256 of a dataset's content (not its id).
pub fn dataset_digest(data: &Dataset) -> [u8; 32] {
    let mut h = Sha256::new();
    h.update((data.columns.len() as u64).to_le_bytes());
    for name in &data.names {
        feed(&mut h, name.as_bytes());
    }
    for kind in &data.kinds {
        match kind {
            FeatureKind::Numeric => h.update([0u8]),
            FeatureKind::Categorical { levels } => {
                h.update([1u8]);
                h.update((*levels as u64).to_le_bytes());
            }
        }
    }
    for col in &data.columns {
        h.update((col.len() as u64).to_le_bytes());
        for v in col {
            h.update(v.to_bits().to_le_bytes());
        }
    }
    h.update((data.labels.len() as u64).to_le_bytes());
    for &y in &data.labels {
        h.update([y as u8]);
    }
    h.finalize().into()
}

/// The cache key of a pool.
pub fn pool_key(data: &Dataset, model: &ModelSpec, protocol: &Protocol, seed: u64) -> [u8; 32] {
    let mut h = Sha256::new();
    h.update(MAGIC);
    h.update(FORMAT.to_le_bytes());
    feed(&mut h, env!("CARGO_PKG_VERSION").as_bytes());
    feed(&mut h, &dataset_digest(data));
    // Serialising plain enums of numbers and strings cannot fail.
    feed(&mut h, &serde_json::to_vec(model).unwrap_or_default());
    feed(&mut h, &serde_json::to_vec(protocol).unwrap_or_default());
    h.update(seed.to_le_bytes());
    h.finalize().into()
}

pub fn hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}

/// Path of a key's cache file in `dir`.
pub fn path(dir: &Path, key: &[u8; 32]) -> PathBuf {
    dir.join(format!("{}.pool", hex(key)))
}

fn encode(key: &[u8; 32], pool: &ScorePool, info: &PoolInfo) -> Vec<u8> {
    let desc = serde_json::to_vec(&info.model).unwrap_or_default();
    let n = pool.scores.len();
    let mut b = Vec::with_capacity(96 + desc.len() + n * 18);
    b.extend_from_slice(MAGIC);
    b.extend_from_slice(key);
    b.extend_from_slice(&(n as u64).to_le_bytes());
    b.extend_from_slice(&(info.train_rows as u64).to_le_bytes());
    b.extend_from_slice(&(pool.sides.is_some() as u64).to_le_bytes());
    b.extend_from_slice(&(desc.len() as u64).to_le_bytes());
    b.extend_from_slice(&desc);
    for i in 0..n {
        b.extend_from_slice(&(info.pool_rows[i] as u64).to_le_bytes());
        b.extend_from_slice(&pool.scores[i].to_le_bytes());
        b.push(pool.labels[i] as u8);
        b.push(match pool.sides.as_ref().map(|s| s[i]) {
            Some(Side::Reservoir) => 0,
            Some(Side::Test) => 1,
            None => 2,
        });
    }
    let sum: [u8; 32] = Sha256::digest(&b).into();
    b.extend_from_slice(&sum);
    b
}

struct Reader<'a> {
    b: &'a [u8],
    at: usize,
}

impl<'a> Reader<'a> {
    fn take(&mut self, k: usize) -> Result<&'a [u8], String> {
        if self.b.len() - self.at < k {
            return Err("truncated".into());
        }
        let s = &self.b[self.at..self.at + k];
        self.at += k;
        Ok(s)
    }
    fn u64(&mut self) -> Result<u64, String> {
        let s = self.take(8)?;
        Ok(u64::from_le_bytes(s.try_into().map_err(|_| "truncated")?))
    }
}

fn decode(key: &[u8; 32], b: &[u8]) -> Result<(ScorePool, PoolInfo), String> {
    if b.len() < MAGIC.len() + 32 + 32 + 32 {
        return Err("truncated".into());
    }
    let (body, sum) = b.split_at(b.len() - 32);
    let want: [u8; 32] = Sha256::digest(body).into();
    if want.as_slice() != sum {
        return Err("checksum mismatch".into());
    }
    let mut r = Reader { b: body, at: 0 };
    if r.take(8)? != MAGIC {
        return Err("not a pool cache file".into());
    }
    if r.take(32)? != key {
        return Err("key mismatch".into());
    }
    let n = r.u64()? as usize;
    let train_rows = r.u64()? as usize;
    let pinned = r.u64()? == 1;
    let dlen = r.u64()? as usize;
    if dlen > body.len() {
        return Err("truncated".into());
    }
    let model: serde_json::Value =
        serde_json::from_slice(r.take(dlen)?).map_err(|e| format!("description: {e}"))?;
    if body.len() - r.at != n.checked_mul(18).ok_or("bad length")? {
        return Err("row count does not match the file length".into());
    }
    let mut rows = Vec::with_capacity(n);
    let mut scores = Vec::with_capacity(n);
    let mut labels = Vec::with_capacity(n);
    let mut sides = Vec::with_capacity(n);
    for _ in 0..n {
        rows.push(r.u64()? as usize);
        let s = f64::from_bits(r.u64()?);
        if !(0.0..=1.0).contains(&s) {
            return Err(format!("score {s} outside [0, 1]"));
        }
        scores.push(s);
        let t = r.take(2)?;
        labels.push(match t[0] {
            0 => false,
            1 => true,
            v => return Err(format!("label byte {v}")),
        });
        sides.push(match (t[1], pinned) {
            (0, true) => Side::Reservoir,
            (1, true) => Side::Test,
            (2, false) => Side::Test, // placeholder, dropped below
            (v, _) => return Err(format!("side byte {v}")),
        });
    }
    let pool = ScorePool {
        scores,
        labels,
        sides: pinned.then_some(sides),
    };
    let info = PoolInfo {
        train_rows,
        pool_rows: rows,
        model,
        fit_seconds: 0.0,
        score_seconds: 0.0,
        cache_hit: true,
        cache_note: None,
    };
    Ok((pool, info))
}

/// Read a pool: `Ok(None)` when there is no file, `Err` when the file exists
/// but cannot be used.
pub fn read(dir: &Path, key: &[u8; 32]) -> Result<Option<(ScorePool, PoolInfo)>, CacheError> {
    let p = path(dir, key);
    let bytes = match fs::read(&p) {
        Ok(b) => b,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(None),
        Err(error) => return Err(CacheError::Io { path: p, error }),
    };
    decode(key, &bytes)
        .map(Some)
        .map_err(|reason| CacheError::Corrupt { path: p, reason })
}

/// Write a pool atomically (temporary file in `dir`, then rename).
pub fn write(
    dir: &Path,
    key: &[u8; 32],
    pool: &ScorePool,
    info: &PoolInfo,
) -> Result<(), CacheError> {
    let io = |path: &Path| {
        let path = path.to_path_buf();
        move |error| CacheError::Io { path, error }
    };
    fs::create_dir_all(dir).map_err(io(dir))?;
    let target = path(dir, key);
    static WRITES: AtomicU64 = AtomicU64::new(0);
    let tmp = dir.join(format!(
        ".{}.{}.{}.tmp",
        hex(&key[..8]),
        std::process::id(),
        WRITES.fetch_add(1, Ordering::Relaxed)
    ));
    let bytes = encode(key, pool, info);
    let result = (|| {
        let mut f = fs::File::create(&tmp)?;
        f.write_all(&bytes)?;
        f.sync_all()?;
        fs::rename(&tmp, &target)
    })();
    if let Err(error) = result {
        let _ = fs::remove_file(&tmp);
        return Err(CacheError::Io {
            path: target,
            error,
        });
    }
    Ok(())
}
