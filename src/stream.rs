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
use std::path::{Path, PathBuf};
use std::str::FromStr;

use quarry_csv::{
    BadReason, CsvError, ErrorPolicy, Event, EventReader, RawEvent, ReadOptions, Record, SeenIds,
};
use quarry_parquet::{
    is_parquet, ColumnMap, Layout, ParquetError, ParquetReader, ReadOptions as ParquetOptions,
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

/// One event as the reading side hands it to the workers.
// Not boxed: a CSV event would pay one more allocation on the reading
// thread, which is the CSV path's bottleneck.
#[allow(clippy::large_enum_variant)]
#[derive(Debug)]
pub enum RawInput {
    /// A CSV event's rows, grouped but not parsed (parsing runs on the
    /// workers).
    Csv(RawEvent),
    /// A Parquet event, already decoded on the Parquet reader's row-group
    /// threads: a good event or a bad one naming file, row group, row and
    /// column.
    Parquet(quarry_parquet::Record),
}

/// One event of a stream, numbered and marked with its shard.
#[derive(Debug)]
pub struct NumberedEvent {
    /// 0-based position in the whole input stream (all files, every event,
    /// before sharding): the output's `ordinal` column.
    pub ordinal: u64,
    /// The event as read.
    pub raw: RawInput,
    /// Whether the event belongs to the stream's [`Shard`].
    pub kept: bool,
}

/// One opened input: quarry's long-form CSV or a Parquet file.
// One per input file: its size does not matter.
#[allow(clippy::large_enum_variant)]
pub enum InputReader {
    /// A CSV input (plain, gzip or standard input).
    Csv(EventReader),
    /// A Parquet input (per-event columns through a column map, or the
    /// long form).
    Parquet(ParquetReader),
}

impl fmt::Debug for InputReader {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            InputReader::Csv(_) => f.write_str("InputReader::Csv"),
            InputReader::Parquet(r) => write!(f, "InputReader::Parquet({r:?})"),
        }
    }
}

/// An input that cannot be opened, or a fatal read error: it ends the
/// stream (exit code 2 in the CLI). Bad *events* are not errors; they
/// become `bad_input` rows.
#[derive(Debug, thiserror::Error)]
pub enum InputError {
    /// From the CSV reader.
    #[error(transparent)]
    Csv(#[from] CsvError),
    /// From the Parquet reader: not Parquet, a missing or mistyped mapped
    /// column, a list whose length disagrees with its count, a corrupt page.
    #[error(transparent)]
    Parquet(#[from] ParquetError),
}

/// How inputs are read: the CSV reader's options (its object limit also
/// applies to Parquet events) and the column map for Parquet files with
/// one row per event.
#[derive(Clone, Debug, Default)]
pub struct InputOptions {
    /// The CSV reader's options.
    pub csv: ReadOptions,
    /// The column map for per-event Parquet inputs; Parquet files in the
    /// long form (columns `event` and `kind`) are read without one.
    pub columns: Option<ColumnMap>,
}

impl From<ReadOptions> for InputOptions {
    fn from(csv: ReadOptions) -> InputOptions {
        InputOptions { csv, columns: None }
    }
}

/// Opens one input, choosing the reader by content: a file that starts
/// with Parquet's magic bytes `PAR1` is Parquet whatever its suffix;
/// anything else (and `-`, standard input) is CSV, gzip-compressed when
/// it starts with the gzip magic bytes.
///
/// A Parquet file in the long form is read as such; any other Parquet file
/// needs `options.columns`.
///
/// ```
/// use quarry::stream::{open_input, InputError, InputOptions};
/// let dir = tempfile::tempdir().unwrap();
/// let path = dir.path().join("events.csv");
/// std::fs::write(&path, "PAR1 but not Parquet").unwrap();
/// // Starts with the magic bytes: read as Parquet, and refused as such.
/// let err = open_input(&path, &InputOptions::default()).unwrap_err();
/// assert!(matches!(err, InputError::Parquet(_)), "{err}");
/// ```
pub fn open_input(path: &Path, options: &InputOptions) -> Result<InputReader, InputError> {
    let parquet = path.as_os_str() != "-" && is_parquet(path).unwrap_or(false);
    if !parquet {
        return Ok(InputReader::Csv(EventReader::open(path, options.csv)?));
    }
    let parquet_options = ParquetOptions {
        max_objects_per_event: options.csv.max_objects_per_event,
        ..ParquetOptions::default()
    };
    let reader = match &options.columns {
        None => ParquetReader::open(path, None, parquet_options)?,
        // The long form needs no map, even when one is given for the
        // per-event inputs beside it.
        Some(map) => match ParquetReader::open(path, None, parquet_options) {
            Ok(long_form) => long_form,
            Err(_) => ParquetReader::open(
                path,
                Some(Layout::PerEvent(Box::new(map.clone()))),
                parquet_options,
            )?,
        },
    };
    Ok(InputReader::Parquet(reader))
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
    readers: Box<dyn Iterator<Item = Result<InputReader, InputError>> + Send + 'a>,
    current: Option<InputReader>,
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
    /// decompressed, Parquet is recognised by its magic bytes), each opened
    /// when the previous one ends. Parquet files with one row per event
    /// need a column map: see [`open_with`](Self::open_with).
    pub fn open(paths: &'a [PathBuf], options: ReadOptions) -> RawEvents<'a> {
        RawEvents::open_with(paths, options.into())
    }

    /// The events of these files, read with `options` (see [`open_input`]).
    pub fn open_with(paths: &'a [PathBuf], options: InputOptions) -> RawEvents<'a> {
        RawEvents::from_inputs(paths.iter().map(move |p| open_input(p, &options)))
    }

    /// The events of CSV readers opened by the caller (e.g. over memory).
    pub fn from_readers(
        readers: impl IntoIterator<Item = Result<EventReader, CsvError>, IntoIter: Send + 'a> + 'a,
    ) -> RawEvents<'a> {
        RawEvents::from_inputs(
            readers
                .into_iter()
                .map(|r| r.map(InputReader::Csv).map_err(InputError::from)),
        )
    }

    /// The events of CSV or Parquet readers opened by the caller.
    pub fn from_inputs(
        readers: impl IntoIterator<Item = Result<InputReader, InputError>, IntoIter: Send + 'a> + 'a,
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
        if let Some(InputReader::Csv(r)) = &self.current {
            for w in &r.warnings()[self.warned..] {
                (self.on_warning)(w);
            }
            self.warned = r.warnings().len();
        }
    }
}

impl Iterator for RawEvents<'_> {
    type Item = Result<NumberedEvent, InputError>;

    fn next(&mut self) -> Option<Self::Item> {
        loop {
            if self.current.is_none() {
                match self.readers.next()? {
                    Ok(mut r) => {
                        if let (true, InputReader::Csv(r)) = (self.opened_any, &mut r) {
                            // The inputs are one stream: an id of an
                            // earlier CSV input may not reappear. (Parquet
                            // inputs check their own ids; they pass the
                            // CSV inputs' ids on unchanged.)
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
            let next = match self.current.as_mut()? {
                InputReader::Csv(r) => r
                    .next_raw()
                    .map(|x| x.map(RawInput::Csv).map_err(InputError::from)),
                InputReader::Parquet(r) => r
                    .next()
                    .map(|x| x.map(RawInput::Parquet).map_err(InputError::from)),
            };
            match next {
                None => {
                    if let Some(InputReader::Csv(r)) = self.current.as_mut() {
                        self.seen = r.take_seen_ids();
                    }
                    self.flush_warnings();
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
    let parsed = match raw {
        RawInput::Csv(raw) => parsed_csv(raw.parse()),
        RawInput::Parquet(record) => parsed_parquet(record),
    };
    if let (Err(bad), ErrorPolicy::Stop) = (&parsed, policy) {
        return Outcome::Stop(format!(
            "{} ({}; stopped at the first bad event, use --on-bad skip to go on)",
            bad.message, bad.shown_id
        ));
    }
    if !kept {
        return Outcome::OtherShard;
    }
    let (rows, bad) = rows_of_parsed(worker, ordinal, parsed);
    Outcome::Rows(EventRows {
        prepared: S::prepare(&rows),
        statuses: rows.iter().map(|r| r.status).collect(),
        bad,
    })
}

/// A rejected event, whichever reader rejected it.
struct BadInput {
    id: Option<u64>,
    /// `event 7`, or the id as written when it did not parse.
    shown_id: String,
    /// The reader's message naming file, place and column.
    message: String,
    reason: BadReason,
}

/// An event as the workers see it once parsed.
type Parsed = Result<Event, BadInput>;

fn parsed_csv(record: Record) -> Parsed {
    match record {
        Record::Good(e) => Ok(e),
        Record::Bad(bad) => Err(BadInput {
            id: bad.id,
            shown_id: match bad.id {
                Some(id) => format!("event {id}"),
                None => format!("event '{}'", bad.raw_id),
            },
            message: bad.error.to_string(),
            reason: bad.reason(),
        }),
    }
}

fn parsed_parquet(record: quarry_parquet::Record) -> Parsed {
    match record {
        quarry_parquet::Record::Good(e) => Ok(e),
        quarry_parquet::Record::Bad(bad) => Err(BadInput {
            id: bad.id,
            shown_id: match bad.id {
                Some(id) => format!("event {id}"),
                None => "event id unreadable".to_string(),
            },
            message: bad.to_string(),
            reason: bad.reason,
        }),
    }
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
    rows_of_parsed(worker, ordinal, parsed_csv(record))
}

fn rows_of_parsed(
    worker: &mut Worker<'_>,
    ordinal: u64,
    parsed: Parsed,
) -> (Vec<Row>, Option<BadReason>) {
    match parsed {
        Ok(event) => {
            let rows = worker
                .reconstruct(event)
                .iter()
                .map(|r| Row::from_reconstruction(ordinal, r))
                .collect();
            (rows, None)
        }
        Err(bad) => {
            let rows = worker
                .pipeline()
                .hypotheses()
                .iter()
                .map(|h| Row::bad_input(ordinal, bad.id, h.name(), &bad.message))
                .collect();
            (rows, Some(bad.reason))
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
