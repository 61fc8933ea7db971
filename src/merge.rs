//! Merging the shard outputs of a job array (`quarry reco --shard K/N`)
//! into the one output an unsharded run writes, byte for byte.
//!
//! [`ShardSet::check`] reads the [manifest] beside each
//! shard output and proves the set complete and consistent: shards
//! 0..N−1 each present exactly once, every output still the file its
//! manifest describes, the same quarry version, inputs, hypotheses and
//! options everywhere, and event counts that add up. Anything else is a
//! [`MergeError::Refused`] listing every problem found, before a byte is
//! written. [`ShardSet::merge_into`] then copies the rows in ordinal order.
//!
//! **Design decision:** rows are copied as raw CSV records, never parsed
//! into fields and re-encoded, and one event's rows are taken together from
//! the one shard that holds them (a k-way merge on the `ordinal` column,
//! which leads every record unquoted). So the rows of one event keep the
//! `-H` order, every byte is the shard's, and memory holds one record per
//! shard whatever the size of the job.

use std::cmp::Reverse;
use std::collections::{BTreeMap, BinaryHeap};
use std::fmt;
use std::fs::File;
use std::io::{self, BufRead, BufReader, Write};
use std::path::{Path, PathBuf};

use crate::manifest::{self, FileStamp, Manifest, MergedShard, ShardStamp};

/// One reason a set of shard outputs cannot be merged.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Problem {
    /// No readable manifest beside a shard output (its run failed, was
    /// stopped, or wrote to stdout).
    NoManifest {
        /// The shard output.
        path: String,
        /// Why the manifest could not be read.
        why: String,
    },
    /// The shard output is not the file its manifest describes (replaced,
    /// truncated, appended to, or missing).
    OutputChanged {
        /// The shard output.
        path: String,
        /// What differs.
        why: String,
    },
    /// Shard K of N is not among the inputs.
    Missing {
        /// K.
        index: u64,
        /// N.
        count: u64,
    },
    /// Shard K of N is given more than once.
    Duplicate {
        /// K.
        index: u64,
        /// N.
        count: u64,
        /// Every output claiming it.
        paths: Vec<String>,
    },
    /// A shard differs from the reference shard (the lowest-numbered one)
    /// in something that must be the same.
    Inconsistent {
        /// The shard output.
        path: String,
        /// Its shard, `K/N`.
        shard: String,
        /// The reference shard's output.
        reference: String,
        /// What differs and how.
        what: String,
    },
    /// A shard's rows contradict its manifest or the sharding rule.
    Corrupt {
        /// The shard output.
        path: String,
        /// 1-based line where the record starts (0: the whole file).
        line: u64,
        /// What is wrong.
        why: String,
    },
}

impl fmt::Display for Problem {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Problem::NoManifest { path, why } => write!(
                f,
                "{path}: no usable manifest ({why}); rerun that shard"
            ),
            Problem::OutputChanged { path, why } => write!(
                f,
                "{path}: the file is not the output its manifest describes ({why}); rerun that shard"
            ),
            Problem::Missing { index, count } => write!(f, "shard {index}/{count} is missing"),
            Problem::Duplicate {
                index,
                count,
                paths,
            } => write!(
                f,
                "shard {index}/{count} is given {} times: {}",
                paths.len(),
                paths.join(", ")
            ),
            Problem::Inconsistent {
                path,
                shard,
                reference,
                what,
            } => write!(f, "{path} (shard {shard}) differs from {reference} in {what}"),
            Problem::Corrupt { path, line, why } if *line > 0 => write!(f, "{path}:{line}: {why}"),
            Problem::Corrupt { path, why, .. } => write!(f, "{path}: {why}"),
        }
    }
}

/// Why a merge did not happen.
#[derive(Debug, thiserror::Error)]
pub enum MergeError {
    /// The shards cannot be merged; every problem found is listed.
    #[error("refusing to merge, {} problem(s):{}", .0.len(), list(.0))]
    Refused(Vec<Problem>),
    /// A shard output could not be read.
    #[error("{path}: {source}")]
    Read {
        /// The file.
        path: String,
        /// The I/O error.
        source: io::Error,
    },
    /// The merged output could not be written.
    #[error("{0}")]
    Write(String),
}

fn list(problems: &[Problem]) -> String {
    problems
        .iter()
        .map(|p| format!("\n  {p}"))
        .collect::<String>()
}

/// One shard output with its manifest.
#[derive(Clone, Debug)]
pub struct ShardOutput {
    /// The output's path as given.
    pub path: PathBuf,
    /// Its manifest.
    pub manifest: Manifest,
}

/// A complete, consistent set of shard outputs, ordered by shard number.
///
/// Invariant: `shards[k].manifest.shard == k/N` for every k in 0..N, and
/// every manifest agrees with `shards[0]`'s on version, inputs,
/// hypotheses, options and events read.
#[derive(Clone, Debug)]
pub struct ShardSet {
    shards: Vec<ShardOutput>,
}

/// What a merge copied.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct MergeCounts {
    /// Events (distinct ordinals) copied.
    pub events: u64,
    /// Rows copied (the header not counted).
    pub rows: u64,
}

impl ShardSet {
    /// Reads the manifests beside `paths` and checks that they form one
    /// complete, consistent job: see the module docs. Also fails with
    /// `Refused` when `paths` is empty.
    pub fn check(paths: &[PathBuf]) -> Result<ShardSet, MergeError> {
        let mut problems = Vec::new();
        let mut found: Vec<ShardOutput> = Vec::new();
        for path in paths {
            let shown = path.display().to_string();
            let m = match Manifest::read(&manifest::manifest_path(path)) {
                Ok(m) => m,
                Err(e) => {
                    problems.push(Problem::NoManifest {
                        path: shown,
                        why: e.to_string(),
                    });
                    continue;
                }
            };
            if let Some(why) = output_differs(path, &m.output) {
                problems.push(Problem::OutputChanged { path: shown, why });
                continue;
            }
            found.push(ShardOutput {
                path: path.clone(),
                manifest: m,
            });
        }
        if paths.is_empty() {
            problems.push(Problem::Corrupt {
                path: "(none)".into(),
                line: 0,
                why: "no shard outputs given".into(),
            });
        }
        found.sort_by_key(|s| s.manifest.shard.index);
        if let Some(reference) = found.first().cloned() {
            let count = reference.manifest.shard.count;
            for s in &found[1..] {
                problems.extend(differences(&reference, s));
            }
            let mut by_index: BTreeMap<u64, Vec<String>> = BTreeMap::new();
            for s in found.iter().filter(|s| s.manifest.shard.count == count) {
                by_index
                    .entry(s.manifest.shard.index)
                    .or_default()
                    .push(s.path.display().to_string());
            }
            for index in 0..count {
                match by_index.get(&index) {
                    None => problems.push(Problem::Missing { index, count }),
                    Some(p) if p.len() > 1 => problems.push(Problem::Duplicate {
                        index,
                        count,
                        paths: p.clone(),
                    }),
                    Some(_) => {}
                }
            }
            for s in &found {
                let m = &s.manifest;
                let expected = events_in_shard(m.events_read, m.shard);
                if m.events_processed != expected
                    || m.rows_written != m.events_processed * m.hypotheses.len() as u64
                {
                    problems.push(Problem::Corrupt {
                        path: s.path.display().to_string(),
                        line: 0,
                        why: format!(
                            "its manifest counts {} events and {} rows; shard {}/{} of a stream of {} events holds {expected} events, {} rows with {} hypotheses",
                            m.events_processed,
                            m.rows_written,
                            m.shard.index,
                            m.shard.count,
                            m.events_read,
                            expected * m.hypotheses.len() as u64,
                            m.hypotheses.len()
                        ),
                    });
                }
            }
        }
        if problems.is_empty() {
            Ok(ShardSet { shards: found })
        } else {
            Err(MergeError::Refused(problems))
        }
    }

    /// The shards, by shard number.
    pub fn shards(&self) -> &[ShardOutput] {
        &self.shards
    }

    /// Copies the header once and every shard's rows in ordinal order to
    /// `out`, checking as it goes that each shard's records carry its own
    /// ordinals in increasing order and as many rows as its manifest says.
    /// On `Err`, `out` holds a partial merge: write to an
    /// [`AtomicOutput`](quarry_csv::AtomicOutput) and drop it.
    pub fn merge_into<W: Write>(&self, out: &mut W) -> Result<MergeCounts, MergeError> {
        let mut streams = Vec::with_capacity(self.shards.len());
        for s in &self.shards {
            streams.push(ShardStream::open(s)?);
        }
        // Every shard's header must be the same bytes (empty shards have none).
        let mut header: Option<(usize, Vec<u8>)> = None;
        let mut problems = Vec::new();
        for (i, s) in streams.iter_mut().enumerate() {
            if !s.advance()? {
                continue;
            }
            match &header {
                None => header = Some((i, s.record.clone())),
                Some((j, h)) if *h != s.record => problems.push(Problem::Inconsistent {
                    path: s.path.clone(),
                    shard: s.shard.to_string(),
                    reference: self.shards[*j].path.display().to_string(),
                    what: "the column header and the quarry output schema".into(),
                }),
                Some(_) => {}
            }
            s.rows = 0;
        }
        if !problems.is_empty() {
            return Err(MergeError::Refused(problems));
        }
        let Some((_, header)) = header else {
            // No shard has a row: an unsharded run writes an empty file too.
            for s in &mut streams {
                s.finish()?;
            }
            return Ok(MergeCounts { events: 0, rows: 0 });
        };
        let werr = |e: io::Error| MergeError::Write(e.to_string());
        out.write_all(&header).map_err(werr)?;
        let mut heap = BinaryHeap::with_capacity(streams.len());
        for (i, s) in streams.iter_mut().enumerate() {
            if s.advance()? {
                let ordinal = s.ordinal()?;
                s.start_event(ordinal)?;
                heap.push(Reverse((ordinal, i)));
            }
        }
        let mut counts = MergeCounts { events: 0, rows: 0 };
        while let Some(Reverse((ordinal, i))) = heap.pop() {
            let s = &mut streams[i];
            counts.events += 1;
            loop {
                out.write_all(&s.record).map_err(werr)?;
                counts.rows += 1;
                if !s.advance()? {
                    break;
                }
                let next = s.ordinal()?;
                if next != ordinal {
                    s.start_event(next)?;
                    heap.push(Reverse((next, i)));
                    break;
                }
            }
        }
        for s in &mut streams {
            s.finish()?;
        }
        Ok(counts)
    }

    /// The manifest of the merged output: the shards' version, inputs,
    /// hypotheses and options, their counts summed, shard 0/1, and the
    /// shards listed under `merged_from`. `started`/`ended`/`wall_time_s`
    /// and `run` describe the merge itself.
    pub fn merged_manifest(
        &self,
        output: FileStamp,
        started: std::time::SystemTime,
        ended: std::time::SystemTime,
    ) -> Manifest {
        let first = &self.shards[0].manifest;
        let mut rows_by_status: BTreeMap<String, u64> = BTreeMap::new();
        for s in &self.shards {
            for (k, v) in &s.manifest.rows_by_status {
                *rows_by_status.entry(k.clone()).or_default() += v;
            }
        }
        Manifest {
            format: manifest::FORMAT.to_string(),
            quarry_version: env!("CARGO_PKG_VERSION").to_string(),
            command: "merge".to_string(),
            output,
            inputs: first.inputs.clone(),
            hypotheses: first.hypotheses.clone(),
            options: first.options.clone(),
            run: BTreeMap::new(),
            shard: ShardStamp { index: 0, count: 1 },
            events_read: first.events_read,
            events_processed: self
                .shards
                .iter()
                .map(|s| s.manifest.events_processed)
                .sum(),
            rows_written: self.shards.iter().map(|s| s.manifest.rows_written).sum(),
            rows_by_status,
            started: manifest::utc_text(started),
            ended: manifest::utc_text(ended),
            wall_time_s: ended
                .duration_since(started)
                .unwrap_or_default()
                .as_secs_f64(),
            host: manifest::host_name(),
            merged_from: self
                .shards
                .iter()
                .map(|s| MergedShard {
                    path: s.path.display().to_string(),
                    index: s.manifest.shard.index,
                    host: s.manifest.host.clone(),
                    wall_time_s: s.manifest.wall_time_s,
                    rows_written: s.manifest.rows_written,
                })
                .collect(),
        }
    }
}

/// Events of a stream of `read` events that shard K/N holds: the ordinals
/// o < read with o mod N = K.
fn events_in_shard(read: u64, shard: ShardStamp) -> u64 {
    if read > shard.index && shard.count > 0 {
        (read - shard.index).div_ceil(shard.count)
    } else {
        0
    }
}

/// Why the file at `path` is not the output `stamp` describes, if it is not.
fn output_differs(path: &Path, stamp: &FileStamp) -> Option<String> {
    match manifest::fingerprint(path) {
        Err(e) => Some(format!("cannot read it: {e}")),
        Ok((size, _)) if Some(size) != stamp.size => Some(format!(
            "{size} bytes, the manifest says {}",
            stamp.size.map_or("none".to_string(), |s| s.to_string())
        )),
        Ok((_, fp)) if Some(&fp) != stamp.fingerprint.as_ref() => {
            Some("same size, different content fingerprint".to_string())
        }
        Ok(_) => None,
    }
}

/// What differs between the reference shard and `s`, as problems.
fn differences(reference: &ShardOutput, s: &ShardOutput) -> Vec<Problem> {
    let (a, b) = (&reference.manifest, &s.manifest);
    let mut what = Vec::new();
    if a.quarry_version != b.quarry_version {
        what.push(format!(
            "quarry version ({} vs {})",
            b.quarry_version, a.quarry_version
        ));
    }
    if a.command != b.command {
        what.push(format!("command ({} vs {})", b.command, a.command));
    }
    if a.shard.count != b.shard.count {
        what.push(format!(
            "shard count ({} vs {})",
            b.shard.count, a.shard.count
        ));
    }
    if a.inputs != b.inputs {
        what.push(format!(
            "inputs ({} vs {})",
            inputs_text(&b.inputs),
            inputs_text(&a.inputs)
        ));
    }
    if a.hypotheses != b.hypotheses {
        let text = |m: &Manifest| {
            m.hypotheses
                .iter()
                .map(|h| format!("{} {}", h.name, h.toml_digest))
                .collect::<Vec<_>>()
                .join(", ")
        };
        what.push(format!("hypotheses ({} vs {})", text(b), text(a)));
    }
    let keys: std::collections::BTreeSet<&String> =
        a.options.keys().chain(b.options.keys()).collect();
    for k in keys {
        let (va, vb) = (a.options.get(k), b.options.get(k));
        if va != vb {
            let show = |v: Option<&serde_json::Value>| v.map_or("unset".into(), |v| v.to_string());
            what.push(format!("option {k} ({} vs {})", show(vb), show(va)));
        }
    }
    if a.events_read != b.events_read {
        what.push(format!(
            "events read ({} vs {})",
            b.events_read, a.events_read
        ));
    }
    what.into_iter()
        .map(|w| Problem::Inconsistent {
            path: s.path.display().to_string(),
            shard: format!("{}/{}", b.shard.index, b.shard.count),
            reference: reference.path.display().to_string(),
            what: w,
        })
        .collect()
}

fn inputs_text(inputs: &[FileStamp]) -> String {
    inputs
        .iter()
        .map(|i| {
            format!(
                "{} {} bytes {}",
                i.path,
                i.size.map_or("?".to_string(), |s| s.to_string()),
                i.fingerprint.as_deref().unwrap_or("?")
            )
        })
        .collect::<Vec<_>>()
        .join("; ")
}

/// One shard output read record by record.
struct ShardStream {
    path: String,
    reader: Box<dyn BufRead>,
    shard: manifest::ShardStamp,
    /// The current record's bytes, terminator included.
    record: Vec<u8>,
    /// 1-based line where `record` starts.
    line: u64,
    next_line: u64,
    /// Rows read so far (after the header).
    rows: u64,
    events: u64,
    last: Option<u64>,
    expected_rows: u64,
    expected_events: u64,
}

impl ShardStream {
    fn open(s: &ShardOutput) -> Result<ShardStream, MergeError> {
        let path = s.path.display().to_string();
        let rerr = |source| MergeError::Read {
            path: path.clone(),
            source,
        };
        let mut file = BufReader::with_capacity(1 << 16, File::open(&s.path).map_err(rerr)?);
        let gz = file.fill_buf().map_err(rerr)?.starts_with(&[0x1f, 0x8b]);
        let reader: Box<dyn BufRead> = if gz {
            Box::new(BufReader::with_capacity(
                1 << 16,
                flate2::bufread::MultiGzDecoder::new(file),
            ))
        } else {
            Box::new(file)
        };
        Ok(ShardStream {
            path,
            reader,
            shard: s.manifest.shard,
            record: Vec::with_capacity(1024),
            line: 0,
            next_line: 1,
            rows: 0,
            events: 0,
            last: None,
            expected_rows: s.manifest.rows_written,
            expected_events: s.manifest.events_processed,
        })
    }

    fn corrupt(&self, why: String) -> MergeError {
        MergeError::Refused(vec![Problem::Corrupt {
            path: self.path.clone(),
            line: self.line,
            why,
        }])
    }

    /// Reads the next CSV record (a quoted field may span lines: the record
    /// ends at the first newline outside quotes). `false` at the end.
    fn advance(&mut self) -> Result<bool, MergeError> {
        self.record.clear();
        self.line = self.next_line;
        let mut quotes = 0usize;
        loop {
            let start = self.record.len();
            let n = self
                .reader
                .read_until(b'\n', &mut self.record)
                .map_err(|source| MergeError::Read {
                    path: self.path.clone(),
                    source,
                })?;
            if n == 0 {
                if self.record.is_empty() {
                    return Ok(false);
                }
                return Err(self.corrupt("the file ends inside a record".into()));
            }
            self.next_line += 1;
            quotes += self.record[start..].iter().filter(|&&b| b == b'"').count();
            if quotes % 2 == 0 && self.record.ends_with(b"\n") {
                self.rows += 1;
                return Ok(true);
            }
        }
    }

    /// The current record's ordinal, checked against the sharding rule.
    fn ordinal(&self) -> Result<u64, MergeError> {
        let end = self
            .record
            .iter()
            .position(|&b| b == b',')
            .unwrap_or(self.record.len());
        let text = std::str::from_utf8(&self.record[..end]).unwrap_or("");
        let Ok(ordinal) = text.parse::<u64>() else {
            return Err(self.corrupt(format!(
                "the first field '{}' is not an ordinal",
                String::from_utf8_lossy(&self.record[..end.min(40)])
            )));
        };
        if ordinal % self.shard.count != self.shard.index {
            return Err(self.corrupt(format!(
                "ordinal {ordinal} does not belong to shard {}",
                self.shard
            )));
        }
        Ok(ordinal)
    }

    /// Notes that the current record starts the event `ordinal`, which must
    /// come after this shard's previous event.
    fn start_event(&mut self, ordinal: u64) -> Result<(), MergeError> {
        if let Some(last) = self.last.filter(|&l| ordinal <= l) {
            return Err(self.corrupt(format!(
                "ordinal {ordinal} after {last}: rows out of input order or one event's rows split"
            )));
        }
        self.last = Some(ordinal);
        self.events += 1;
        Ok(())
    }

    /// Checks the counts against the manifest once the stream is read.
    fn finish(&mut self) -> Result<(), MergeError> {
        if self.rows != self.expected_rows || self.events != self.expected_events {
            self.line = 0;
            return Err(self.corrupt(format!(
                "{} events in {} rows, the manifest says {} events in {} rows",
                self.events, self.rows, self.expected_events, self.expected_rows
            )));
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn events_in_shard_counts_the_round_robin_share() {
        let s = |index, count| ShardStamp { index, count };
        // 10 events over 3 shards: ordinals 0,3,6,9 | 1,4,7 | 2,5,8.
        assert_eq!(events_in_shard(10, s(0, 3)), 4);
        assert_eq!(events_in_shard(10, s(1, 3)), 3);
        assert_eq!(events_in_shard(10, s(2, 3)), 3);
        assert_eq!(events_in_shard(2, s(5, 7)), 0);
        assert_eq!(events_in_shard(0, s(0, 1)), 0);
        for read in 0..30 {
            let total: u64 = (0..7).map(|k| events_in_shard(read, s(k, 7))).sum();
            assert_eq!(total, read);
        }
    }
}
