//! Run manifests: the small JSON file that `quarry reco` and `quarry merge`
//! write beside every file output, saying what produced it.
//!
//! A manifest records the quarry version, the inputs (path, size and a
//! cheap content fingerprint), the hypotheses (name, where it came from and
//! a digest of its canonical TOML), every option that can change the output,
//! the shard, the counts (events read, events processed, rows written, rows
//! by status), start and end time, wall time and host, and the output's own
//! size and fingerprint. [`crate::merge`] reads the manifests of a job
//! array's shards to prove they belong together before it merges them.
//!
//! **Design decision:** the manifest is renamed into place *after* the
//! output it describes, and any older manifest under its name is removed
//! before that output is committed. So a manifest exists only beside a
//! complete output, and since it records the output's size and fingerprint,
//! a manifest left over from an earlier run is caught instead of trusted.
//! The schema is documented in `docs/manifest.md`; its `format` field is
//! [`FORMAT`].

use std::collections::BTreeMap;
use std::fs::File;
use std::io::{self, Read, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};
use std::time::{SystemTime, UNIX_EPOCH};

use serde::{Deserialize, Serialize};

/// The `format` field of every manifest this version writes. A reader
/// refuses other values.
pub const FORMAT: &str = "quarry-manifest/1";

/// Bytes read from each end of a file for its fingerprint.
pub const FINGERPRINT_SPAN: u64 = 1 << 20;

/// The manifest written beside `output`: the output's path with
/// `.manifest.json` appended (`parts/reco-3.csv` →
/// `parts/reco-3.csv.manifest.json`).
///
/// ```
/// use std::path::Path;
/// assert_eq!(
///     quarry::manifest::manifest_path(Path::new("parts/reco-3.csv")),
///     Path::new("parts/reco-3.csv.manifest.json")
/// );
/// ```
pub fn manifest_path(output: &Path) -> PathBuf {
    let mut s = output.as_os_str().to_owned();
    s.push(".manifest.json");
    PathBuf::from(s)
}

/// One file as a manifest records it.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct FileStamp {
    /// The path as given on the command line (`-` for standard input).
    pub path: String,
    /// Size in bytes; `null` for standard input.
    pub size: Option<u64>,
    /// [`fingerprint`] of the file; `null` for standard input.
    pub fingerprint: Option<String>,
}

impl FileStamp {
    /// Stamps the file at `path` (`-` gives a stamp without size or
    /// fingerprint).
    pub fn of(path: &Path) -> io::Result<FileStamp> {
        let shown = path.display().to_string();
        if path.as_os_str() == "-" {
            return Ok(FileStamp {
                path: shown,
                size: None,
                fingerprint: None,
            });
        }
        let (size, fp) = fingerprint(path)?;
        Ok(FileStamp {
            path: shown,
            size: Some(size),
            fingerprint: Some(fp),
        })
    }
}

/// One hypothesis as a manifest records it.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct HypothesisStamp {
    /// The hypothesis name (the `hypothesis` column).
    pub name: String,
    /// What was given on the command line: a preset name or a file path.
    pub source: String,
    /// `fnv1a64:` and the hex FNV-1a 64 of the hypothesis's canonical TOML
    /// (`Hypothesis::to_toml`): the definition quarry actually used, so an
    /// edited file with the same name gives a different digest.
    pub toml_digest: String,
}

/// The shard a run processed.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct ShardStamp {
    /// 0-based shard number K.
    pub index: u64,
    /// Number of shards N (1 for an unsharded run or a merge).
    pub count: u64,
}

impl std::fmt::Display for ShardStamp {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{}/{}", self.index, self.count)
    }
}

/// One shard that a merge read.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct MergedShard {
    /// The shard output's path as given to the merge.
    pub path: String,
    /// Its shard number.
    pub index: u64,
    /// The host that ran it.
    pub host: String,
    /// Its wall time \[s\].
    pub wall_time_s: f64,
    /// Its rows.
    pub rows_written: u64,
}

/// What a `quarry reco` or `quarry merge` run wrote, from what, and how.
/// Field by field in `docs/manifest.md`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Manifest {
    /// Always [`FORMAT`].
    pub format: String,
    /// The quarry version that wrote it.
    pub quarry_version: String,
    /// `reco` or `merge`.
    pub command: String,
    /// The output the manifest describes.
    pub output: FileStamp,
    /// The inputs, in the order read (the order defines the ordinals).
    pub inputs: Vec<FileStamp>,
    /// The hypotheses, in `-H` order (the order of one event's rows).
    pub hypotheses: Vec<HypothesisStamp>,
    /// Every option that can change the output, with defaults resolved.
    pub options: BTreeMap<String, serde_json::Value>,
    /// Settings that cannot change the output (threads, chunk size).
    pub run: BTreeMap<String, serde_json::Value>,
    /// The shard (0/1 for an unsharded run and for a merge).
    pub shard: ShardStamp,
    /// Events in the whole input stream (every shard reads them all).
    pub events_read: u64,
    /// Events of this shard, each with one row per hypothesis.
    pub events_processed: u64,
    /// Rows written (events processed × hypotheses).
    pub rows_written: u64,
    /// Rows per status name.
    pub rows_by_status: BTreeMap<String, u64>,
    /// Start, UTC, `YYYY-MM-DDThh:mm:ss.sssZ`.
    pub started: String,
    /// End, UTC, same form.
    pub ended: String,
    /// Wall time \[s\].
    pub wall_time_s: f64,
    /// Host name.
    pub host: String,
    /// For a merge: the shards it read, by shard number; empty otherwise.
    #[serde(default)]
    pub merged_from: Vec<MergedShard>,
}

/// Why a manifest could not be read or written.
#[derive(Debug, thiserror::Error)]
pub enum ManifestError {
    /// The file could not be read or written.
    #[error("{path}: {source}")]
    Io {
        /// The manifest's path.
        path: String,
        /// The I/O error.
        source: io::Error,
    },
    /// The file is not a manifest of this format.
    #[error("{path}: not a quarry manifest: {message}")]
    Invalid {
        /// The manifest's path.
        path: String,
        /// What is wrong.
        message: String,
    },
}

impl Manifest {
    /// Reads a manifest, refusing any other [`FORMAT`].
    pub fn read(path: &Path) -> Result<Manifest, ManifestError> {
        let shown = path.display().to_string();
        let text = std::fs::read(path).map_err(|source| ManifestError::Io {
            path: shown.clone(),
            source,
        })?;
        let m: Manifest = serde_json::from_slice(&text).map_err(|e| ManifestError::Invalid {
            path: shown.clone(),
            message: e.to_string(),
        })?;
        if m.format != FORMAT {
            return Err(ManifestError::Invalid {
                path: shown,
                message: format!("format '{}', expected '{FORMAT}'", m.format),
            });
        }
        Ok(m)
    }

    /// Writes the manifest beside `output` ([`manifest_path`]) through a
    /// temporary file renamed into place. Call it after the output was
    /// committed, and [`remove_stale`] before committing.
    pub fn write_beside(&self, output: &Path) -> Result<PathBuf, ManifestError> {
        let path = manifest_path(output);
        let shown = path.display().to_string();
        let io_err = |source| ManifestError::Io {
            path: shown.clone(),
            source,
        };
        let mut text = serde_json::to_vec_pretty(self).map_err(|e| ManifestError::Invalid {
            path: shown.clone(),
            message: e.to_string(),
        })?;
        text.push(b'\n');
        let mut out = quarry_csv::AtomicOutput::create(&path).map_err(|e| ManifestError::Io {
            path: shown.clone(),
            source: io::Error::other(e.to_string()),
        })?;
        out.write_all(&text).map_err(io_err)?;
        out.commit().map_err(|e| ManifestError::Io {
            path: shown.clone(),
            source: io::Error::other(e.to_string()),
        })?;
        Ok(path)
    }
}

/// Removes the manifest beside `output` if there is one, so that an output
/// about to be replaced is never described by its predecessor's manifest.
pub fn remove_stale(output: &Path) -> io::Result<()> {
    match std::fs::remove_file(manifest_path(output)) {
        Err(e) if e.kind() != io::ErrorKind::NotFound => Err(e),
        _ => Ok(()),
    }
}

/// FNV-1a, 64 bits, continued from `hash` over `bytes`. Offset basis and
/// prime are the published FNV parameters (Fowler, Noll and Vo; IETF draft
/// "The FNV Non-Cryptographic Hash Algorithm").
///
/// ```
/// use quarry::manifest::{fnv1a64, FNV_OFFSET};
/// assert_eq!(fnv1a64(FNV_OFFSET, b"a"), 0xaf63dc4c8601ec8c);
/// ```
pub fn fnv1a64(mut hash: u64, bytes: &[u8]) -> u64 {
    for &b in bytes {
        hash ^= u64::from(b);
        hash = hash.wrapping_mul(0x0000_0100_0000_01b3);
    }
    hash
}

/// FNV-1a 64 offset basis (the hash of no bytes).
pub const FNV_OFFSET: u64 = 0xcbf2_9ce4_8422_2325;

/// `fnv1a64:` and the hex digest of `bytes`.
pub fn digest(bytes: &[u8]) -> String {
    format!("fnv1a64:{:016x}", fnv1a64(FNV_OFFSET, bytes))
}

/// A cheap content fingerprint of a file and its size: FNV-1a 64 over the
/// size (8 bytes, little-endian), the first [`FINGERPRINT_SPAN`] bytes and
/// the last [`FINGERPRINT_SPAN`] bytes (the whole file when it is at most
/// twice that), as `fnv1a64-ends:HEX`. It reads at most 2 MiB whatever the
/// file's size: enough to tell a different, truncated, regenerated or
/// appended file from the one a shard read, not a cryptographic proof.
pub fn fingerprint(path: &Path) -> io::Result<(u64, String)> {
    let mut file = File::open(path)?;
    let size = file.metadata()?.len();
    let mut hash = fnv1a64(FNV_OFFSET, &size.to_le_bytes());
    let mut buf = Vec::with_capacity(FINGERPRINT_SPAN.min(size) as usize);
    if size <= 2 * FINGERPRINT_SPAN {
        file.read_to_end(&mut buf)?;
        hash = fnv1a64(hash, &buf);
    } else {
        (&mut file).take(FINGERPRINT_SPAN).read_to_end(&mut buf)?;
        hash = fnv1a64(hash, &buf);
        buf.clear();
        file.seek(SeekFrom::Start(size - FINGERPRINT_SPAN))?;
        file.take(FINGERPRINT_SPAN).read_to_end(&mut buf)?;
        hash = fnv1a64(hash, &buf);
    }
    Ok((size, format!("fnv1a64-ends:{hash:016x}")))
}

/// A point in time as `YYYY-MM-DDThh:mm:ss.sssZ` (UTC, proleptic
/// Gregorian calendar; times before 1970 print as 1970).
pub fn utc_text(t: SystemTime) -> String {
    let since = t.duration_since(UNIX_EPOCH).unwrap_or_default();
    let secs = since.as_secs();
    let (y, m, d) = civil_from_days((secs / 86_400) as i64);
    let s = secs % 86_400;
    format!(
        "{y:04}-{m:02}-{d:02}T{:02}:{:02}:{:02}.{:03}Z",
        s / 3600,
        s / 60 % 60,
        s % 60,
        since.subsec_millis()
    )
}

/// Year, month, day of the day `z` days after 1970-01-01 (the
/// days-to-civil algorithm published by H. Hinnant, "chrono-Compatible
/// Low-Level Date Algorithms").
fn civil_from_days(z: i64) -> (i64, u32, u32) {
    let z = z + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z.rem_euclid(146_097);
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = (doy - (153 * mp + 2) / 5 + 1) as u32;
    let m = if mp < 10 { mp + 3 } else { mp - 9 } as u32;
    let y = yoe + era * 400 + i64::from(m <= 2);
    (y, m, d)
}

/// This machine's host name (Linux's `/proc/sys/kernel/hostname`, else the
/// `HOSTNAME` variable, else `unknown`).
pub fn host_name() -> String {
    std::fs::read_to_string("/proc/sys/kernel/hostname")
        .ok()
        .map(|s| s.trim().to_string())
        .filter(|s| !s.is_empty())
        .or_else(|| std::env::var("HOSTNAME").ok().filter(|s| !s.is_empty()))
        .unwrap_or_else(|| "unknown".to_string())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Test vectors of FNV-1a 64 as published with the algorithm (Fowler,
    /// Noll, Vo; from memory, and recomputed here by an independent Python
    /// implementation: `cbf29ce484222325 af63dc4c8601ec8c 85944171f73967e8`).
    #[test]
    fn fnv1a64_matches_the_published_vectors() {
        assert_eq!(fnv1a64(FNV_OFFSET, b""), 0xcbf29ce484222325);
        assert_eq!(fnv1a64(FNV_OFFSET, b"a"), 0xaf63dc4c8601ec8c);
        assert_eq!(fnv1a64(FNV_OFFSET, b"foobar"), 0x85944171f73967e8);
        // Continuing a hash equals hashing the concatenation.
        assert_eq!(
            fnv1a64(fnv1a64(FNV_OFFSET, b"foo"), b"bar"),
            0x85944171f73967e8
        );
    }

    /// Python's `datetime.fromtimestamp(t, tz=timezone.utc)` gives
    /// 2000-03-01 00:00:00 for 951868800 and 2026-12-04 16:00:00.25 for
    /// 1796400000.25 (run when writing this test).
    #[test]
    fn utc_text_matches_python_datetime() {
        let at = |s: f64| UNIX_EPOCH + std::time::Duration::from_secs_f64(s);
        assert_eq!(utc_text(at(951_868_800.0)), "2000-03-01T00:00:00.000Z");
        assert_eq!(utc_text(at(1_796_400_000.25)), "2026-12-04T16:00:00.250Z");
        assert_eq!(utc_text(UNIX_EPOCH), "1970-01-01T00:00:00.000Z");
        // 2024-02-29 (a leap day): 1709164800 per `date -u -d 2024-02-29 +%s`.
        assert_eq!(utc_text(at(1_709_164_800.0)), "2024-02-29T00:00:00.000Z");
    }

    #[test]
    fn fingerprint_sees_a_change_at_either_end_and_in_the_size() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("f");
        let big: Vec<u8> = (0..3 * FINGERPRINT_SPAN).map(|i| (i % 251) as u8).collect();
        std::fs::write(&p, &big).unwrap();
        let (size, base) = fingerprint(&p).unwrap();
        assert_eq!(size, big.len() as u64);
        let changed = |at: usize| {
            let mut b = big.clone();
            b[at] ^= 1;
            std::fs::write(&p, &b).unwrap();
            fingerprint(&p).unwrap().1
        };
        assert_ne!(changed(0), base);
        assert_ne!(changed(big.len() - 1), base);
        // The middle is not read: the fingerprint is cheap, not complete.
        assert_eq!(changed(big.len() / 2), base);
        std::fs::write(&p, &big[..big.len() - 1]).unwrap();
        assert_ne!(fingerprint(&p).unwrap().1, base);
    }

    #[test]
    fn a_manifest_round_trips_and_other_formats_are_refused() {
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("o.csv");
        std::fs::write(&out, "x\n").unwrap();
        let m = Manifest {
            format: FORMAT.into(),
            quarry_version: "0.1.0".into(),
            command: "reco".into(),
            output: FileStamp::of(&out).unwrap(),
            inputs: vec![FileStamp::of(Path::new("-")).unwrap()],
            hypotheses: vec![],
            options: BTreeMap::from([("fit".to_string(), serde_json::Value::Bool(true))]),
            run: BTreeMap::new(),
            shard: ShardStamp { index: 0, count: 1 },
            events_read: 1,
            events_processed: 1,
            rows_written: 1,
            rows_by_status: BTreeMap::from([("ok".to_string(), 1)]),
            started: utc_text(SystemTime::now()),
            ended: utc_text(SystemTime::now()),
            wall_time_s: 0.5,
            host: host_name(),
            merged_from: vec![],
        };
        let path = m.write_beside(&out).unwrap();
        assert_eq!(path, manifest_path(&out));
        assert_eq!(Manifest::read(&path).unwrap(), m);
        let text = std::fs::read_to_string(&path).unwrap();
        std::fs::write(&path, text.replace(FORMAT, "other/9")).unwrap();
        let err = Manifest::read(&path).unwrap_err().to_string();
        assert!(err.contains("other/9"), "{err}");
        remove_stale(&out).unwrap();
        assert!(!path.exists());
        remove_stale(&out).unwrap();
    }
}
