//! Opening a Parquet input and streaming its events, row groups decoded in
//! parallel, events in file order.

use std::collections::VecDeque;
use std::fs::File;
use std::io::Read;
use std::path::{Path, PathBuf};
use std::sync::mpsc::{sync_channel, Receiver};
use std::sync::Arc;

use arrow_schema::SchemaRef;
use bytes::Bytes;
use parquet::arrow::arrow_reader::{
    ArrowReaderMetadata, ParquetRecordBatchReader, ParquetRecordBatchReaderBuilder,
};
use parquet::arrow::ProjectionMask;
use parquet::file::reader::ChunkReader;

use crate::long::{Grouper, LongRow};
use crate::{jagged, long, ColumnMap, ParquetError, Record};

/// Parquet's magic bytes, at the start and the end of every file.
pub const MAGIC: &[u8; 4] = b"PAR1";

/// Whether the file at `path` starts with Parquet's magic bytes (how the
/// CLI tells Parquet from CSV, whatever the file's suffix).
pub fn is_parquet(path: &Path) -> std::io::Result<bool> {
    let mut head = [0u8; 4];
    let mut f = File::open(path)?;
    let mut n = 0;
    while n < 4 {
        match f.read(&mut head[n..])? {
            0 => break,
            k => n += k,
        }
    }
    Ok(n == 4 && &head == MAGIC)
}

/// The footer's metadata; a panic of the parquet crate on a corrupt footer
/// becomes an error.
fn load_metadata<T: ChunkReader>(input: &T) -> parquet::errors::Result<ArrowReaderMetadata> {
    std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
        ArrowReaderMetadata::load(input, Default::default())
    }))
    .unwrap_or_else(|panic| {
        Err(parquet::errors::ParquetError::General(format!(
            "corrupt footer: {}",
            panic_text(&*panic)
        )))
    })
}

/// A panic's message, for the error that replaces it.
fn panic_text(panic: &(dyn std::any::Any + Send)) -> String {
    let text = panic
        .downcast_ref::<&str>()
        .map(|s| s.to_string())
        .or_else(|| panic.downcast_ref::<String>().cloned())
        .unwrap_or_else(|| "the Parquet decoder failed".into());
    text.replace('\n', " ")
}

/// Which layout to read.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Layout {
    /// One row per event, list columns per object value, through a map.
    PerEvent(Box<ColumnMap>),
    /// quarry's long form (the CSV schema), one row per object.
    LongForm,
}

/// Reader settings.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct ReadOptions {
    /// An event with more objects becomes `bad_input` (`too-many-objects`),
    /// as in the CSV reader.
    pub max_objects_per_event: usize,
    /// Rows decoded at a time within a row group.
    pub batch_rows: usize,
    /// Row groups decoded at once, each on its own thread, ahead of the
    /// consumer. Memory is bounded by `decode_ahead × 3` batches, whatever
    /// the row groups' size.
    pub decode_ahead: usize,
}

impl Default for ReadOptions {
    /// The CSV reader's object limit, batches of 4096 rows, two row groups
    /// decoded at once (a 2-core machine's worth).
    fn default() -> Self {
        ReadOptions {
            max_objects_per_event: quarry_csv::DEFAULT_MAX_OBJECTS,
            batch_rows: 4096,
            decode_ahead: 2,
        }
    }
}

/// One batch decoded on a row group's thread.
enum Decoded {
    Events(Vec<Record>),
    Rows(Vec<LongRow>),
}

/// Where the file's bytes are: on disk (each row group's thread opens its
/// own handle) or in memory (shared, reference-counted).
enum Input {
    Path(PathBuf),
    Memory(Bytes),
}

/// What every row group's thread shares.
struct Source {
    input: Input,
    name: Arc<str>,
    metadata: ArrowReaderMetadata,
    mask: ProjectionMask,
    layout: Layout,
    starts: Vec<u64>,
    options: ReadOptions,
}

impl Source {
    /// Row group `g`'s mapped columns, batch by batch.
    fn batches<T: ChunkReader + 'static>(
        &self,
        input: T,
        g: usize,
    ) -> parquet::errors::Result<ParquetRecordBatchReader> {
        ParquetRecordBatchReaderBuilder::new_with_metadata(input, self.metadata.clone())
            .with_projection(self.mask.clone())
            .with_row_groups(vec![g])
            .with_batch_size(self.options.batch_rows.max(1))
            .build()
    }

    /// Decodes row group `g` batch by batch into `tx` (until the receiver
    /// is dropped).
    fn decode(&self, g: usize, tx: std::sync::mpsc::SyncSender<Result<Decoded, ParquetError>>) {
        let context = format!("row group {g}");
        let decode_err = |e: &dyn std::fmt::Display| ParquetError::Decode {
            file: self.name.to_string(),
            context: context.clone(),
            message: e.to_string(),
        };
        let reader = match &self.input {
            Input::Path(path) => match File::open(path) {
                Ok(file) => self.batches(file, g),
                Err(source) => {
                    let _ = tx.send(Err(ParquetError::Io {
                        file: self.name.to_string(),
                        source,
                    }));
                    return;
                }
            },
            Input::Memory(bytes) => self.batches(bytes.clone(), g),
        };
        let reader = match reader {
            Ok(r) => r,
            Err(e) => {
                let _ = tx.send(Err(decode_err(&e)));
                return;
            }
        };
        let mut row = self.starts[g];
        for batch in reader {
            let item = match batch {
                Err(e) => Err(decode_err(&e)),
                Ok(batch) => {
                    let first = row;
                    row += batch.num_rows() as u64;
                    match &self.layout {
                        Layout::PerEvent(map) => jagged::decode_batch(
                            map,
                            &batch,
                            &self.name,
                            g,
                            first,
                            self.options.max_objects_per_event,
                        )
                        .map(Decoded::Events),
                        Layout::LongForm => Ok(Decoded::Rows(long::decode_batch(&batch, g, first))),
                    }
                }
            };
            let stop = item.is_err();
            if tx.send(item).is_err() || stop {
                return;
            }
        }
        let expected = self.starts.get(g + 1).copied().unwrap_or(row);
        if row != expected {
            let _ = tx.send(Err(decode_err(&format!(
                "decoded {} rows, the footer says {}",
                row - self.starts[g],
                expected - self.starts[g]
            ))));
        }
    }
}

/// Streaming reader of one Parquet file's events.
///
/// Iterating yields `Ok(Record)` for every event in file order —
/// [`Record::Good`] or [`Record::Bad`] — and at most one
/// `Err(ParquetError)` (a structural problem or a corrupt page), after
/// which it yields `None`.
///
/// Row groups are decoded on their own threads, up to
/// [`ReadOptions::decode_ahead`] at once, each in batches of
/// [`ReadOptions::batch_rows`] rows through a channel that holds two
/// batches: memory stays bounded whatever the size of the file or of its
/// row groups. Only the mapped columns are read.
pub struct ParquetReader {
    source: Arc<Source>,
    next_group: usize,
    pending: VecDeque<Receiver<Result<Decoded, ParquetError>>>,
    /// Rows received so far from the front row group of `pending`.
    received: u64,
    ready: VecDeque<Record>,
    grouper: Option<Grouper>,
    done: bool,
}

impl std::fmt::Debug for ParquetReader {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("ParquetReader")
            .field("file", &self.source.name)
            .field("next_group", &self.next_group)
            .finish_non_exhaustive()
    }
}

impl ParquetReader {
    /// Opens `path` and checks its schema against the layout. `layout`
    /// `None` means: the long form if the file has `event` and `kind`
    /// columns, else an error asking for a column map.
    pub fn open(
        path: &Path,
        layout: Option<Layout>,
        options: ReadOptions,
    ) -> Result<ParquetReader, ParquetError> {
        let name: Arc<str> = path.display().to_string().into();
        let io = |source| ParquetError::Io {
            file: name.to_string(),
            source,
        };
        if !is_parquet(path).map_err(io)? {
            return Err(ParquetError::NotParquet {
                file: name.to_string(),
            });
        }
        let file = File::open(path).map_err(io)?;
        let metadata = load_metadata(&file);
        Self::with_metadata(
            Input::Path(path.to_path_buf()),
            name,
            metadata,
            layout,
            options,
        )
    }

    /// Reads a Parquet file held in memory, as [`ParquetReader::open`]
    /// reads one on disk (for tests, fuzzing, and callers that fetched the
    /// bytes themselves). `name` stands for the file in every message.
    /// `bytes::Bytes` is cheap to clone: each row group's thread shares it.
    ///
    /// ```
    /// let err = quarry_parquet::ParquetReader::from_bytes(
    ///     bytes::Bytes::from_static(b"event,kind\n"),
    ///     "upload.csv",
    ///     None,
    ///     Default::default(),
    /// )
    /// .unwrap_err();
    /// assert!(err.to_string().starts_with("upload.csv: not a Parquet file"));
    /// ```
    pub fn from_bytes(
        bytes: Bytes,
        name: &str,
        layout: Option<Layout>,
        options: ReadOptions,
    ) -> Result<ParquetReader, ParquetError> {
        if !bytes.starts_with(MAGIC) {
            return Err(ParquetError::NotParquet {
                file: name.to_string(),
            });
        }
        let metadata = load_metadata(&bytes);
        Self::with_metadata(Input::Memory(bytes), name.into(), metadata, layout, options)
    }

    /// The shared part of opening: the footer, the layout, the schema check.
    fn with_metadata(
        input: Input,
        name: Arc<str>,
        metadata: parquet::errors::Result<ArrowReaderMetadata>,
        layout: Option<Layout>,
        options: ReadOptions,
    ) -> Result<ParquetReader, ParquetError> {
        let metadata = metadata.map_err(|e| ParquetError::Decode {
            file: name.to_string(),
            context: "footer".into(),
            message: e.to_string(),
        })?;
        let schema = metadata.schema().clone();
        let layout = match layout {
            Some(l) => l,
            None if long::is_long_form(&schema) => Layout::LongForm,
            None => {
                return Err(ParquetError::Schema {
                    file: name.to_string(),
                    message: format!(
                        "one row per event: reading it needs a column map (--columns nanoaod, or a TOML file; `quarry columns template {name}` prints one from this file's columns); the long form would need columns 'event' and 'kind'"
                    ),
                })
            }
        };
        let names = match &layout {
            Layout::PerEvent(map) => jagged::check_schema(map, &schema, &name)?,
            Layout::LongForm => long::check_schema(&schema, &name)?,
        };
        let roots: Vec<usize> = names
            .iter()
            .filter_map(|n| schema.index_of(n).ok())
            .collect();
        let mask = ProjectionMask::roots(metadata.parquet_schema(), roots);
        let mut starts = vec![0u64];
        for rg in metadata.metadata().row_groups() {
            let last = *starts.last().expect("non-empty");
            starts.push(last.saturating_add(u64::try_from(rg.num_rows()).unwrap_or(0)));
        }
        let grouper = (layout == Layout::LongForm)
            .then(|| Grouper::new(Arc::clone(&name), &schema, options.max_objects_per_event));
        Ok(ParquetReader {
            source: Arc::new(Source {
                input,
                name,
                metadata,
                mask,
                layout,
                starts,
                options,
            }),
            next_group: 0,
            pending: VecDeque::new(),
            received: 0,
            ready: VecDeque::new(),
            grouper,
            done: false,
        })
    }

    /// The file's name as given.
    pub fn name(&self) -> &str {
        &self.source.name
    }

    /// The file's Arrow schema.
    pub fn schema(&self) -> SchemaRef {
        self.source.metadata.schema().clone()
    }

    /// Rows in the file (events for the per-event layout, objects for the
    /// long form).
    pub fn num_rows(&self) -> u64 {
        *self.source.starts.last().expect("non-empty")
    }

    /// Row groups in the file.
    pub fn num_row_groups(&self) -> usize {
        self.source.starts.len() - 1
    }

    /// Whether `decoded` would take the front row group past the footer's
    /// row count (a corrupt file): its rows are then not yielded.
    fn overruns(&self, decoded: &Decoded) -> bool {
        let g = self.next_group - self.pending.len();
        let rows = match decoded {
            Decoded::Events(e) => e.len(),
            Decoded::Rows(r) => r.len(),
        } as u64;
        self.received + rows > self.source.starts[g + 1] - self.source.starts[g]
    }

    /// Starts decoding row groups until `decode_ahead` are in flight.
    fn spawn_ahead(&mut self) {
        while self.pending.len() < self.source.options.decode_ahead.max(1)
            && self.next_group < self.num_row_groups()
        {
            let (tx, rx) = sync_channel(2);
            let source = Arc::clone(&self.source);
            let g = self.next_group;
            std::thread::spawn(move || {
                // The parquet crate (60.1) panics on some corrupt pages
                // (negative column offsets, a missing dictionary, short
                // buffers; found by fuzzing): such a panic ends this row
                // group with an error naming it, never the process.
                let guard = tx.clone();
                let decoded =
                    std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| source.decode(g, tx)));
                if let Err(panic) = decoded {
                    let _ = guard.send(Err(ParquetError::Decode {
                        file: source.name.to_string(),
                        context: format!("row group {g}"),
                        message: format!("corrupt data: {}", panic_text(&*panic)),
                    }));
                }
            });
            self.pending.push_back(rx);
            self.next_group += 1;
        }
    }
}

impl Iterator for ParquetReader {
    type Item = Result<Record, ParquetError>;

    fn next(&mut self) -> Option<Self::Item> {
        loop {
            if let Some(r) = self.ready.pop_front() {
                return Some(Ok(r));
            }
            if self.done {
                return None;
            }
            self.spawn_ahead();
            let Some(front) = self.pending.front() else {
                self.done = true;
                return self.grouper.as_mut().and_then(Grouper::finish).map(Ok);
            };
            match front.recv() {
                // The row group's thread finished and dropped its sender;
                // if it stopped short of the footer's row count without
                // saying why (a panic in a decoder), that is an error: no
                // event may vanish silently.
                Err(_) => {
                    self.pending.pop_front();
                    let g = self.next_group - self.pending.len() - 1;
                    let expected = self.source.starts[g + 1] - self.source.starts[g];
                    let received = std::mem::take(&mut self.received);
                    if received < expected {
                        self.done = true;
                        self.pending.clear();
                        return Some(Err(ParquetError::Decode {
                            file: self.source.name.to_string(),
                            context: format!("row group {g}"),
                            message: format!(
                                "decoding stopped after {received} of the footer's {expected} rows"
                            ),
                        }));
                    }
                }
                Ok(Err(e)) => {
                    self.done = true;
                    self.pending.clear();
                    return Some(Err(e));
                }
                Ok(Ok(decoded)) if self.overruns(&decoded) => {
                    let g = self.next_group - self.pending.len();
                    self.done = true;
                    self.pending.clear();
                    return Some(Err(ParquetError::Decode {
                        file: self.source.name.to_string(),
                        context: format!("row group {g}"),
                        message: format!(
                            "the pages hold more rows than the footer's {}",
                            self.source.starts[g + 1] - self.source.starts[g]
                        ),
                    }));
                }
                Ok(Ok(Decoded::Events(events))) => {
                    self.received += events.len() as u64;
                    self.ready.extend(events);
                }
                Ok(Ok(Decoded::Rows(rows))) => {
                    self.received += rows.len() as u64;
                    let grouper = self.grouper.as_mut().expect("long form has a grouper");
                    for row in rows {
                        if let Some(r) = grouper.push(row) {
                            self.ready.push_back(r);
                        }
                    }
                }
            }
        }
    }
}
