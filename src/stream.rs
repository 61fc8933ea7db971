//! Streaming event files through a [`Pipeline`](crate::Pipeline), as `quarry reco` does:
//! the reader side ([`RawEvents`]: files → events grouped but not parsed,
//! numbered by their position in the whole stream, marked with their
//! [`Shard`]), the worker side ([`outcome_of`]: parse, reconstruct, make
//! the rows and prepare them for a [`RowSink`]), and the order-preserving,
//! memory-bounded parallel map that joins them ([`ordered_chunked_map`]).
//!
//! The command line, the `pipeline` benchmark and the fuzz targets run this
//! same code. A Rust program streams a file into a CSV output like this:
//!
//! ```
//! use quarry::csv::{ErrorPolicy, ReadOptions};
//! use quarry::output::{CsvSink, RowSink};
//! use quarry::stream::{ordered_chunked_map, outcome_of, Outcome, RawEvents, DEFAULT_CHUNK};
//!
//! # let dir = tempfile::tempdir().unwrap();
//! # let input = dir.path().join("events.csv");
//! # let mut w = quarry::csv::EventWriter::create(&input).unwrap();
//! # for e in quarry::toy::Generator::new(quarry::toy::ToyConfig::top_pair(), 1).unwrap().take(50) {
//! #     w.write(&e).unwrap();
//! # }
//! # w.finish().unwrap();
//! # let output = dir.path().join("reco.csv");
//! let pipeline = quarry::Pipeline::builder().preset("ttbar-ljets").build().unwrap();
//! let inputs = [input];
//! let events = RawEvents::open(&inputs, ReadOptions::default());
//! let mut sink = CsvSink::create(&output).unwrap();
//! let mut rows = 0;
//! ordered_chunked_map(
//!     events.map(|r| r.map_err(|e| e.to_string())),
//!     DEFAULT_CHUNK,
//!     || pipeline.worker(),
//!     |worker, event| outcome_of::<CsvSink>(worker, ErrorPolicy::Skip, event),
//!     |outcome| match outcome {
//!         Outcome::Rows(r) => {
//!             rows += r.statuses.len();
//!             sink.write(r.prepared).map_err(|e| e.to_string())
//!         }
//!         Outcome::OtherShard => Ok(()),
//!         Outcome::Stop(message) => Err(message),
//!     },
//! )
//! .unwrap();
//! sink.finish().unwrap();
//! assert_eq!(rows, 50);
//! let text = std::fs::read_to_string(&output).unwrap();
//! assert_eq!(text.lines().count(), 1 + 50);
//! ```

use std::fmt;
use std::path::PathBuf;
use std::str::FromStr;

use quarry_csv::{
    BadReason, CsvError, ErrorPolicy, EventReader, RawEvent, ReadOptions, Record, SeenIds,
};
use rayon::prelude::*;

use crate::output::{Row, RowSink};
use crate::Worker;

/// One slice of an event stream for a batch job array: shard `index` of
/// `count` keeps the events whose **ordinal** (0-based position in the
/// whole input stream, across all input files, counting rejected events
/// too) satisfies `ordinal % count == index`.
///
/// Round-robin rather than contiguous blocks: it needs no total count up
/// front (inputs are streamed), and it spreads expensive events evenly.
/// Every event lands in exactly one shard.
///
/// Invariant: `index < count`, `count ≥ 1`.
///
/// ```
/// use quarry::stream::Shard;
/// let s: Shard = "1/3".parse().unwrap();
/// assert!(s.keeps(1) && s.keeps(4) && !s.keeps(3));
/// assert!("3/3".parse::<Shard>().is_err());
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Shard {
    index: u64,
    count: u64,
}

impl Shard {
    /// The whole stream as one shard.
    pub const ALL: Shard = Shard { index: 0, count: 1 };

    /// Shard `index` of `count`; `None` unless `index < count`.
    ///
    /// ```
    /// assert!(quarry::stream::Shard::new(0, 1).is_some());
    /// assert!(quarry::stream::Shard::new(2, 2).is_none());
    /// ```
    pub fn new(index: u64, count: u64) -> Option<Shard> {
        (index < count).then_some(Shard { index, count })
    }

    /// The 0-based shard number.
    pub fn index(&self) -> u64 {
        self.index
    }

    /// The number of shards.
    pub fn count(&self) -> u64 {
        self.count
    }

    /// Whether the event at stream position `ordinal` belongs to this shard.
    pub fn keeps(&self, ordinal: u64) -> bool {
        ordinal % self.count == self.index
    }
}

impl Default for Shard {
    fn default() -> Self {
        Shard::ALL
    }
}

impl fmt::Display for Shard {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}/{}", self.index, self.count)
    }
}

/// Why a shard specification was rejected.
#[derive(Clone, Debug, PartialEq, Eq, thiserror::Error)]
#[error("shard must be K/N with 0 ≤ K < N (e.g. 0/8), got '{0}'")]
pub struct ShardParseError(pub String);

impl FromStr for Shard {
    type Err = ShardParseError;

    fn from_str(s: &str) -> Result<Shard, ShardParseError> {
        let err = || ShardParseError(s.to_string());
        let (k, n) = s.split_once('/').ok_or_else(err)?;
        let k: u64 = k.trim().parse().map_err(|_| err())?;
        let n: u64 = n.trim().parse().map_err(|_| err())?;
        Shard::new(k, n).ok_or_else(err)
    }
}

/// One event of a stream, grouped from its rows but not parsed (parsing
/// runs on the workers).
#[derive(Debug)]
pub struct NumberedEvent {
    /// 0-based position in the whole input stream (all files, every event,
    /// before sharding): the output's `ordinal` column.
    pub ordinal: u64,
    /// The event's rows.
    pub raw: RawEvent,
    /// Whether the event belongs to the stream's [`Shard`].
    pub kept: bool,
}

/// Every event of a list of inputs, one input after the other, as
/// [`NumberedEvent`]s.
///
/// Events of other shards pass too (marked `kept: false`), because under
/// the stop policy the first bad event in *any* shard stops the run, so
/// that every shard of a job array stops alike; [`outcome_of`] skips them
/// without parsing under the skip policy. An input that cannot be opened,
/// or a fatal read error, ends the stream with that error. The readers'
/// warnings (e.g. unknown columns) go to [`on_warning`](Self::on_warning)'s
/// callback, by default to standard error.
pub struct RawEvents<'a> {
    readers: Box<dyn Iterator<Item = Result<EventReader, CsvError>> + Send + 'a>,
    current: Option<EventReader>,
    shard: Shard,
    next_ordinal: u64,
    warned: usize,
    on_warning: Box<dyn FnMut(&str) + Send + 'a>,
    /// Ids of the inputs finished so far, handed to the next reader.
    seen: SeenIds,
    /// Whether a reader was opened (the next one continues its stream).
    opened_any: bool,
}

impl<'a> RawEvents<'a> {
    /// The events of these files (`-` is standard input, `.gz` is
    /// decompressed), each opened when the previous one ends.
    pub fn open(paths: &'a [PathBuf], options: ReadOptions) -> RawEvents<'a> {
        RawEvents::from_readers(paths.iter().map(move |p| EventReader::open(p, options)))
    }

    /// The events of readers opened by the caller (e.g. over memory).
    pub fn from_readers(
        readers: impl IntoIterator<Item = Result<EventReader, CsvError>, IntoIter: Send + 'a> + 'a,
    ) -> RawEvents<'a> {
        RawEvents {
            readers: Box::new(readers.into_iter()),
            current: None,
            shard: Shard::ALL,
            next_ordinal: 0,
            warned: 0,
            on_warning: Box::new(|w| eprintln!("quarry: warning: {w}")),
            seen: SeenIds::default(),
            opened_any: false,
        }
    }

    /// Marks the events of this shard as kept (default: all).
    pub fn shard(mut self, shard: Shard) -> Self {
        self.shard = shard;
        self
    }

    /// Where the readers' warnings go.
    pub fn on_warning(mut self, f: impl FnMut(&str) + Send + 'a) -> Self {
        self.on_warning = Box::new(f);
        self
    }

    fn flush_warnings(&mut self) {
        if let Some(r) = &self.current {
            for w in &r.warnings()[self.warned..] {
                (self.on_warning)(w);
            }
            self.warned = r.warnings().len();
        }
    }
}

impl Iterator for RawEvents<'_> {
    type Item = Result<NumberedEvent, CsvError>;

    fn next(&mut self) -> Option<Self::Item> {
        loop {
            if self.current.is_none() {
                match self.readers.next()? {
                    Ok(mut r) => {
                        if self.opened_any {
                            // The inputs are one stream: an id of an
                            // earlier input may not reappear.
                            r.continue_stream(std::mem::take(&mut self.seen));
                        }
                        self.opened_any = true;
                        self.current = Some(r);
                        self.warned = 0;
                        self.flush_warnings();
                    }
                    Err(e) => return Some(Err(e)),
                }
            }
            let reader = self.current.as_mut()?;
            match reader.next_raw() {
                None => {
                    let seen = reader.take_seen_ids();
                    self.flush_warnings();
                    self.seen = seen;
                    self.current = None;
                }
                Some(Err(e)) => return Some(Err(e)),
                Some(Ok(raw)) => {
                    let ordinal = self.next_ordinal;
                    self.next_ordinal += 1;
                    let kept = self.shard.keeps(ordinal);
                    return Some(Ok(NumberedEvent { ordinal, raw, kept }));
                }
            }
        }
    }
}

/// The rows of one event, prepared for a sink on the worker thread.
#[derive(Debug)]
pub struct EventRows<P> {
    /// The rows in the sink's prepared form (e.g. CSV text).
    pub prepared: P,
    /// Each row's status name, in row order.
    pub statuses: Vec<&'static str>,
    /// The reader's reason, if the event was rejected.
    pub bad: Option<BadReason>,
}

/// What a worker makes of one [`NumberedEvent`].
#[derive(Debug)]
pub enum Outcome<P> {
    /// The event's rows.
    Rows(EventRows<P>),
    /// Another shard's event: no output.
    OtherShard,
    /// A bad event under the stop policy: the run ends with this message
    /// (the reader's `file:line: column …` error and the event).
    Stop(String),
}

/// Parses one event (on a worker thread), reconstructs it under every
/// hypothesis of the worker's pipeline, and prepares its rows for the sink
/// `S`. Events of other shards are not parsed under the skip policy; under
/// the stop policy they are, so that a bad event stops every shard alike.
pub fn outcome_of<S: RowSink>(
    worker: &mut Worker<'_>,
    policy: ErrorPolicy,
    event: NumberedEvent,
) -> Outcome<S::Prepared> {
    let NumberedEvent { ordinal, raw, kept } = event;
    if !kept && policy == ErrorPolicy::Skip {
        return Outcome::OtherShard;
    }
    let record = raw.parse();
    if let (Record::Bad(bad), ErrorPolicy::Stop) = (&record, policy) {
        let id = match bad.id {
            Some(id) => format!("event {id}"),
            None => format!("event '{}'", bad.raw_id),
        };
        return Outcome::Stop(format!(
            "{} ({id}; stopped at the first bad event, use --on-bad skip to go on)",
            bad.error
        ));
    }
    if !kept {
        return Outcome::OtherShard;
    }
    let (rows, bad) = rows_of(worker, ordinal, record);
    Outcome::Rows(EventRows {
        prepared: S::prepare(&rows),
        statuses: rows.iter().map(|r| r.status).collect(),
        bad,
    })
}

/// The rows of one parsed record, one per hypothesis of the worker's
/// pipeline, and the reader's reason if it was rejected (then every row is
/// `bad_input` with the reader's message, and the event id when it parsed).
///
/// ```
/// use quarry::csv::{EventReader, ReadOptions, Record};
/// let text = "event,kind,pt,eta,phi,mass\n7,jet,x,0,0,5\n";
/// let mut reader = EventReader::from_reader(std::io::Cursor::new(text), "a.csv",
///     ReadOptions::default()).unwrap();
/// let record = reader.next().unwrap().unwrap();
/// assert!(matches!(record, Record::Bad(_)));
/// let pipeline = quarry::Pipeline::builder().preset("ttbar-ljets").preset("bz-2l").build().unwrap();
/// let (rows, bad) = quarry::stream::rows_of(&mut pipeline.worker(), 0, record);
/// assert!(bad.is_some());
/// assert_eq!(rows.len(), 2);
/// assert!(rows.iter().all(|r| r.status == "bad_input" && r.event == Some(7)));
/// assert!(rows[0].reason.starts_with("a.csv:2:"), "{}", rows[0].reason);
/// ```
pub fn rows_of(
    worker: &mut Worker<'_>,
    ordinal: u64,
    record: Record,
) -> (Vec<Row>, Option<BadReason>) {
    match record {
        Record::Good(event) => {
            let rows = worker
                .reconstruct(event)
                .iter()
                .map(|r| Row::from_reconstruction(ordinal, r))
                .collect();
            (rows, None)
        }
        Record::Bad(bad) => {
            let reason = bad.error.to_string();
            let rows = worker
                .pipeline()
                .hypotheses()
                .iter()
                .map(|h| Row::bad_input(ordinal, bad.id, h.name(), &reason))
                .collect();
            (rows, Some(bad.reason()))
        }
    }
}

/// Events per parallel chunk of a `quarry reco` run unless `--chunk-size`
/// says otherwise.
///
/// Small on purpose: one chunk's raw text, events and result rows (~300 KB
/// at 256 top-pair events) stay in the cores' caches between the reader and
/// the workers. Measured on 2 cores over 1.5 M toy top-pair events
/// (1.09 GB): 256 gave 341-352 k events/s and 19 MB peak memory, 4096 gave
/// 308 k events/s and 62 MB; below 128 the per-chunk hand-over starts to
/// cost.
pub const DEFAULT_CHUNK: usize = 256;

/// Maps `items` through `work` in parallel, `chunk` items at a time, and
/// hands every result to `sink` **in input order**, whatever the number of
/// threads.
///
/// Reading overlaps with work: a separate thread pulls `items` (e.g. parses
/// CSV) into the next chunk while the current chunk is processed on the
/// rayon pool the caller runs in and its results are handed to `sink` on
/// the calling thread. At most three chunks exist at once (being read,
/// queued, being processed), so memory stays bounded on endless streams.
///
/// `init` makes per-thread state for `work` (e.g. a [`crate::Worker`]); it
/// may be called several times per chunk, so it should be cheap relative to
/// a chunk's work.
///
/// `items` yields `Result`s: the first `Err` stops reading; the results of
/// the items before it are still delivered, then the error is returned.
/// An error from `sink` stops the run (reading stops at the end of the
/// chunk being read) and is returned.
///
/// ```
/// use quarry::stream::ordered_chunked_map;
/// let mut out = Vec::new();
/// let items = (0..10).map(Ok::<_, String>);
/// ordered_chunked_map(items, 3, || (), |_, x: u32| x * x, |y| { out.push(y); Ok(()) }).unwrap();
/// assert_eq!(out, [0, 1, 4, 9, 16, 25, 36, 49, 64, 81]);
/// ```
pub fn ordered_chunked_map<T, R, E, St, I, N, W, S>(
    items: I,
    chunk: usize,
    init: N,
    work: W,
    mut sink: S,
) -> Result<(), E>
where
    I: IntoIterator<Item = Result<T, E>>,
    I::IntoIter: Send,
    T: Send,
    R: Send,
    E: Send,
    N: Fn() -> St + Sync,
    W: Fn(&mut St, T) -> R + Sync,
    S: FnMut(R) -> Result<(), E>,
{
    let chunk = chunk.max(1);
    let items = items.into_iter();
    std::thread::scope(|scope| {
        // One chunk may wait in the channel while the reader fills the next.
        let (tx, rx) = std::sync::mpsc::sync_channel::<(Vec<T>, Option<E>)>(1);
        scope.spawn(move || {
            let mut items = items;
            loop {
                let mut buffer = Vec::with_capacity(chunk);
                let mut failure = None;
                while buffer.len() < chunk {
                    match items.next() {
                        Some(Ok(t)) => buffer.push(t),
                        Some(Err(e)) => {
                            failure = Some(e);
                            break;
                        }
                        None => break,
                    }
                }
                let last = failure.is_some() || buffer.len() < chunk;
                if buffer.is_empty() && failure.is_none() {
                    return;
                }
                // A closed channel means the consumer stopped: stop reading.
                if tx.send((buffer, failure)).is_err() || last {
                    return;
                }
            }
        });
        let mut results: Vec<R> = Vec::with_capacity(chunk);
        for (mut buffer, failure) in rx {
            // `collect_into_vec` keeps input order and reuses the allocation.
            buffer
                .par_drain(..)
                .map_init(&init, &work)
                .collect_into_vec(&mut results);
            for r in results.drain(..) {
                sink(r)?;
            }
            if let Some(e) = failure {
                return Err(e);
            }
        }
        Ok(())
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shards_partition_the_stream() {
        let shards: Vec<Shard> = (0..4).map(|k| Shard::new(k, 4).unwrap()).collect();
        for ordinal in 0..100u64 {
            assert_eq!(shards.iter().filter(|s| s.keeps(ordinal)).count(), 1);
        }
        assert!(Shard::ALL.keeps(12345));
    }

    #[test]
    fn shard_parsing() {
        assert_eq!("2/5".parse::<Shard>().unwrap(), Shard::new(2, 5).unwrap());
        assert_eq!("2/5".parse::<Shard>().unwrap().to_string(), "2/5");
        for bad in ["", "1", "5/5", "0/0", "-1/3", "a/b", "1/2/3"] {
            assert!(bad.parse::<Shard>().is_err(), "{bad}");
        }
    }

    #[test]
    fn order_is_kept_and_errors_flush_earlier_results() {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(2)
            .build()
            .unwrap();
        let mut out = Vec::new();
        let items = (0..20).map(|i| if i == 13 { Err(i) } else { Ok(i) });
        let r = pool.install(|| {
            ordered_chunked_map(
                items,
                4,
                || (),
                |_, x: i32| x * 10,
                |y| {
                    out.push(y);
                    Ok(())
                },
            )
        });
        assert_eq!(r, Err(13));
        assert_eq!(out, (0..13).map(|x| x * 10).collect::<Vec<_>>());
    }

    #[test]
    fn sink_errors_stop_the_run() {
        let mut seen = 0;
        let r = ordered_chunked_map(
            (0..100).map(Ok::<i32, String>),
            8,
            || (),
            |_, x| x,
            |y| {
                seen += 1;
                if y == 5 {
                    Err("full".to_string())
                } else {
                    Ok(())
                }
            },
        );
        assert_eq!(r, Err("full".into()));
        assert_eq!(seen, 6);
    }
}
