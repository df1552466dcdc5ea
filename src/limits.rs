//! Size limits on what plumbline reads, so a hostile or mistaken input (an
//! endless stream such as `/dev/zero`, a gzip bomb, a suite that is really a
//! disk image) is refused with a located message instead of filling memory.
//!
//! Each limit has a default and an environment variable that overrides it
//! (a whole number of bytes, e.g. `PLUMBLINE_MAX_LINE_BYTES=4194304`):
//!
//! | limit | variable | default | why this default |
//! |---|---|---|---|
//! | one line or record of a CSV score file | `PLUMBLINE_MAX_LINE_BYTES` | 1 MiB | a score-file row is a few numbers and ids, well under 1 KiB; 1 MiB leaves room for wide files with hundreds of columns |
//! | decompressed text of one gzip score file | `PLUMBLINE_MAX_DECOMPRESSED_BYTES` | 16 GiB | about 400 million rows of 40 bytes, beyond the largest score file a calibration comparison reads into memory; larger inputs can be uncompressed CSV or Parquet |
//! | one row group of a Parquet score file, uncompressed (as its metadata states) | `PLUMBLINE_MAX_ROW_GROUP_BYTES` | 4 GiB | a row group is decoded whole; writers default to 64–128 MiB or a million rows (pyarrow), and four score columns of a million rows are about 32 MB |
//! | a suite file | `PLUMBLINE_MAX_SUITE_BYTES` | 64 MiB | a suite of 100,000 methods is about 5 MB |
//! | a map file | `PLUMBLINE_MAX_MAP_BYTES` | 256 MiB | the largest fitted state (an isotonic map with a breakpoint per distinct score of a multi-million-row sample) is tens of MB of JSON |
//!
//! A value that is not a whole number above 0 is an error naming the variable.

/// One limit: its environment variable and default.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Limit {
    pub var: &'static str,
    pub default: u64,
    /// What is limited, for messages ("a line", "a suite file", …).
    pub what: &'static str,
}

pub const MAX_LINE: Limit = Limit {
    var: "PLUMBLINE_MAX_LINE_BYTES",
    default: 1 << 20,
    what: "a line or record of a score file",
};

pub const MAX_DECOMPRESSED: Limit = Limit {
    var: "PLUMBLINE_MAX_DECOMPRESSED_BYTES",
    default: 16 << 30,
    what: "the decompressed text of a gzip score file",
};

pub const MAX_ROW_GROUP: Limit = Limit {
    var: "PLUMBLINE_MAX_ROW_GROUP_BYTES",
    default: 4 << 30,
    what: "one uncompressed row group of a Parquet score file",
};

pub const MAX_SUITE: Limit = Limit {
    var: "PLUMBLINE_MAX_SUITE_BYTES",
    default: 64 << 20,
    what: "a suite file",
};

pub const MAX_MAP: Limit = Limit {
    var: "PLUMBLINE_MAX_MAP_BYTES",
    default: 256 << 20,
    what: "a map file",
};

impl Limit {
    /// The limit in force: the environment variable when set, else the default.
    pub fn get(&self) -> Result<u64, String> {
        match std::env::var_os(self.var) {
            None => Ok(self.default),
            Some(v) => {
                let s = v.to_string_lossy();
                match s.trim().parse::<u64>() {
                    Ok(n) if n > 0 => Ok(n),
                    _ => Err(format!(
                        "{}={}: expected a whole number of bytes above 0 (the limit on {}; default {})",
                        self.var,
                        quoted_prefix(s.as_bytes(), 40),
                        self.what,
                        self.default
                    )),
                }
            }
        }
    }

    /// How a message names the limit and its override.
    pub fn describe(&self, value: u64) -> String {
        format!("{} (raise it with {})", human(value), self.var)
    }
}

/// A byte count for messages: exact bytes, with MiB or GiB when round.
pub fn human(n: u64) -> String {
    if n >= 1 << 30 && n % (1 << 30) == 0 {
        format!("{} GiB", n >> 30)
    } else if n >= 1 << 20 && n % (1 << 20) == 0 {
        format!("{} MiB", n >> 20)
    } else {
        format!("{n} bytes")
    }
}

/// At most `max` characters of possibly hostile bytes for a message, in
/// backticks: non-UTF-8 bytes replaced, control characters escaped, and `…`
/// when cut.
pub fn quoted_prefix(bytes: &[u8], max: usize) -> String {
    let text = String::from_utf8_lossy(bytes);
    let n = text.chars().count();
    let mut out = String::from("`");
    out.extend(text.chars().take(max).flat_map(|c| {
        let e: Vec<char> = if c.is_control() {
            c.escape_debug().collect()
        } else {
            vec![c]
        };
        e
    }));
    if n > max {
        out.push('…');
    }
    out.push('`');
    out
}

/// Read a whole file of at most `limit` bytes. The size on disk is checked
/// before reading, and the read itself stops one byte past the limit, so
/// neither a huge file nor an endless one (a FIFO, `/dev/zero`) is read
/// into memory. `Err` is the message (without the file name).
pub fn read_bounded(path: &std::path::Path, limit: &Limit) -> Result<Vec<u8>, String> {
    use std::io::Read;
    let max = limit.get()?;
    let f = std::fs::File::open(path).map_err(|e| e.to_string())?;
    let too_big = |size: String| {
        format!(
            "{} is larger than the limit on {} of {}",
            size,
            limit.what,
            limit.describe(max)
        )
    };
    if let Ok(m) = f.metadata() {
        if m.is_file() && m.len() > max {
            return Err(too_big(format!("the file ({})", human(m.len()))));
        }
        if m.is_dir() {
            return Err("is a directory".into());
        }
    }
    let mut bytes = Vec::new();
    f.take(max.saturating_add(1))
        .read_to_end(&mut bytes)
        .map_err(|e| e.to_string())?;
    if bytes.len() as u64 > max {
        return Err(too_big("the input".into()));
    }
    Ok(bytes)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn prefixes_are_short_and_escaped() {
        assert_eq!(quoted_prefix(b"ab", 5), "`ab`");
        assert_eq!(quoted_prefix(b"abcdef", 3), "`abc…`");
        assert_eq!(quoted_prefix(b"a\tb\x00", 10), "`a\\tb\\0`");
        assert_eq!(quoted_prefix(&[0xff, b'x'], 10), "`\u{fffd}x`");
        assert_eq!(quoted_prefix(b"\"q\"", 10), "`\"q\"`");
    }

    #[test]
    fn sizes_read_plainly() {
        assert_eq!(human(1 << 20), "1 MiB");
        assert_eq!(human(16 << 30), "16 GiB");
        assert_eq!(human(1000), "1000 bytes");
    }

    #[test]
    fn bounded_read_refuses_large_and_endless_inputs() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("x");
        std::fs::write(&p, vec![b'a'; 100]).unwrap();
        let small = Limit {
            var: "PLUMBLINE_TEST_LIMIT_NOT_SET",
            default: 10,
            what: "a test file",
        };
        let e = read_bounded(&p, &small).unwrap_err();
        assert!(e.contains("100 bytes") && e.contains("a test file"), "{e}");
        let big = Limit {
            default: 100,
            ..small
        };
        assert_eq!(read_bounded(&p, &big).unwrap().len(), 100);
        // An endless device: refused after reading one byte past the limit.
        if std::path::Path::new("/dev/zero").exists() {
            let e = read_bounded(std::path::Path::new("/dev/zero"), &small).unwrap_err();
            assert!(e.contains("the input"), "{e}");
        }
        assert!(read_bounded(dir.path(), &small)
            .unwrap_err()
            .contains("directory"));
    }
}
