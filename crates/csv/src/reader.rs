//! The streaming event reader.

use std::collections::BTreeMap;
use std::f64::consts::PI;
use std::fmt;
use std::fs::File;
use std::io::{self, BufRead, BufReader, Cursor, Read};
use std::path::Path;
use std::sync::Arc;

use flate2::read::MultiGzDecoder;
use quarry_event::{Event, FatJet, Flavour, Jet, Lepton, Met, Truth};
use quarry_lorentz::FourMomentum;

use crate::seen::SeenIds;

use crate::{BadEvent, BadReason, CsvError, FieldError};

/// The display name used for `-` as an input.
pub const STDIN_NAME: &str = "<stdin>";

/// Largest |η| accepted for an object. Far outside any detector (trackers
/// reach |η| ≈ 2.5–4, forward calorimeters ≈ 5; common practice), but
/// `sinh(η)` stays well within `f64`, so truth-level objects still pass while
/// garbage such as a value in degrees is caught.
pub const MAX_ABS_ETA: f64 = 20.0;

/// Largest |φ| accepted \[rad\]: inputs may use (−π, π] or [0, 2π); anything
/// beyond 2π is most likely in degrees.
pub const MAX_ABS_PHI: f64 = 2.0 * PI;

/// Default limit on rows (objects, including the met row) in one event.
pub const DEFAULT_MAX_OBJECTS: usize = 1000;

/// Relative shortfall of `energy` below `|p|` tolerated as rounding in the
/// input text; such an object is read as massless (E = |p|).
pub const ENERGY_ROUNDING_TOLERANCE: f64 = 1e-6;

/// What the reader does after a bad event.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum ErrorPolicy {
    /// Yield the first bad event, then end iteration.
    #[default]
    Stop,
    /// Yield every bad event and go on; the [`ReadSummary`] counts them by
    /// reason.
    Skip,
}

/// Reader settings.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct ReadOptions {
    /// What to do after a bad event.
    pub policy: ErrorPolicy,
    /// An event with more rows than this becomes a [`BadEvent`] with reason
    /// [`BadReason::TooManyObjects`]; bounds the memory one event can take.
    pub max_objects_per_event: usize,
    /// What to do with header columns the format does not define.
    pub unknown_columns: UnknownColumns,
}

/// What the reader does with header columns the format does not define
/// (a misspelt `btagScore` would otherwise silently leave every jet
/// untagged).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum UnknownColumns {
    /// Ignore them and report them once in [`EventReader::warnings`].
    #[default]
    Warn,
    /// Refuse the file: opening it fails with a [`CsvError::Header`] that
    /// names the file, the header line and the columns.
    Error,
}

impl Default for ReadOptions {
    /// [`ErrorPolicy::Stop`], [`DEFAULT_MAX_OBJECTS`], [`UnknownColumns::Warn`].
    fn default() -> Self {
        ReadOptions {
            policy: ErrorPolicy::Stop,
            max_objects_per_event: DEFAULT_MAX_OBJECTS,
            unknown_columns: UnknownColumns::Warn,
        }
    }
}

impl ReadOptions {
    /// The same options with another policy.
    ///
    /// ```
    /// use quarry_csv::{ErrorPolicy, ReadOptions};
    /// assert_eq!(ReadOptions::default().with_policy(ErrorPolicy::Skip).policy, ErrorPolicy::Skip);
    /// ```
    pub fn with_policy(mut self, policy: ErrorPolicy) -> Self {
        self.policy = policy;
        self
    }
}

/// One event from the input: accepted, or rejected with its error.
#[derive(Clone, Debug, PartialEq)]
pub enum Record {
    /// A valid event.
    Good(Event),
    /// An event the reader rejected.
    Bad(BadEvent),
}

impl Record {
    /// The event id, if it parsed.
    ///
    /// ```
    /// let r = quarry_csv::Record::Good(quarry_event::Event::new(9));
    /// assert_eq!(r.id(), Some(9));
    /// ```
    pub fn id(&self) -> Option<u64> {
        match self {
            Record::Good(e) => Some(e.id),
            Record::Bad(b) => b.id,
        }
    }

    /// The good event, if it is one.
    ///
    /// ```
    /// let r = quarry_csv::Record::Good(quarry_event::Event::new(9));
    /// assert!(r.good().is_some());
    /// ```
    pub fn good(self) -> Option<Event> {
        match self {
            Record::Good(e) => Some(e),
            Record::Bad(_) => None,
        }
    }
}

/// Counts kept while reading.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct ReadSummary {
    /// Events (contiguous row blocks) yielded so far.
    pub events: u64,
    /// Good events among them.
    pub good: u64,
    /// Bad events among them.
    pub bad: u64,
    /// Bad events by reason.
    pub bad_by_reason: BTreeMap<BadReason, u64>,
    /// Rows read (excluding the header and comment lines).
    pub rows: u64,
    /// True if [`ErrorPolicy::Stop`] ended reading at a bad event.
    pub stopped_at_bad_event: bool,
    /// The fatal stream error's message, if one ended reading.
    pub fatal: Option<String>,
}

impl fmt::Display for ReadSummary {
    /// One line, e.g. `1000 events read: 998 good, 2 bad (not-finite: 1, split-event: 1)`.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "{} events read: {} good, {} bad",
            self.events, self.good, self.bad
        )?;
        if !self.bad_by_reason.is_empty() {
            let parts: Vec<String> = self
                .bad_by_reason
                .iter()
                .map(|(r, n)| format!("{r}: {n}"))
                .collect();
            write!(f, " ({})", parts.join(", "))?;
        }
        if self.stopped_at_bad_event {
            f.write_str("; stopped at the first bad event")?;
        }
        if let Some(fatal) = &self.fatal {
            write!(f, "; reading ended by error: {fatal}")?;
        }
        Ok(())
    }
}

/// Column positions found in the header.
#[derive(Clone, Debug)]
struct Columns {
    event: usize,
    kind: usize,
    pt: usize,
    eta: usize,
    phi: usize,
    mass: Option<usize>,
    energy: Option<usize>,
    btag: Option<usize>,
    charge: Option<usize>,
    truth: Option<usize>,
    weight: Option<usize>,
    cov: Option<[usize; 3]>,
    /// Header names, by position.
    names: Vec<String>,
}

const KNOWN_COLUMNS: [&str; 14] = [
    "event",
    "kind",
    "pt",
    "eta",
    "phi",
    "mass",
    "energy",
    "btag",
    "charge",
    "truth",
    "weight",
    "met_cov_xx",
    "met_cov_xy",
    "met_cov_yy",
];

/// How rows are grouped into events: by parsed id, or by the raw text when
/// it does not parse (so a run of rows with the same bad id is one bad event).
#[derive(Clone, Debug, PartialEq, Eq)]
enum Key {
    Id(u64),
    Raw(Vec<u8>),
}

#[derive(Clone, Copy, PartialEq, Eq)]
enum Kind {
    Jet,
    FatJet,
    Electron,
    Muon,
    Met,
}

/// The event being assembled from its contiguous rows.
struct Block {
    key: Key,
    raw_id: String,
    first_line: u64,
    rows: u64,
    event: Event,
    error: Option<FieldError>,
    met_line: Option<u64>,
    weight: Option<(f64, u64)>,
}

/// What the reader needs to parse rows, shared with every [`RawEvent`].
#[derive(Debug)]
struct Parser {
    cols: Columns,
    name: String,
    options: ReadOptions,
}

/// One row kept by the grouping pass for parsing later, in file order.
enum Pending {
    /// A row to parse: its line number and where its text ends in
    /// [`RawEvent::text`].
    Row { line: u64, end: usize },
    /// A row that is not valid CSV (or too long).
    Syntax { line: u64, message: String },
    /// The input broke off after the rows before this.
    Truncated { line: u64 },
}

/// Bytes of row text a [`RawEvent`] keeps unparsed; beyond this the reader
/// parses what it holds at once, so one event's raw text stays bounded.
const RAW_TEXT_BUDGET: usize = 1 << 20;

/// One event's rows, grouped and checked for event-level errors (bad or
/// repeated id, CSV syntax) but not yet parsed: the output of
/// [`EventReader::next_raw`]. Parsing with [`RawEvent::parse`] needs no
/// reader, so raw events can be parsed on other threads, in any order,
/// while the reader goes on grouping; the record is the same as the
/// iterator would have yielded.
pub struct RawEvent {
    parser: Arc<Parser>,
    block: Block,
    text: Vec<u8>,
    pending: Vec<Pending>,
    /// Rows past the point where the event is certainly bad: only counted.
    extra_rows: u64,
}

impl fmt::Debug for RawEvent {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_struct("RawEvent")
            .field("id", &self.id())
            .field("first_line", &self.block.first_line)
            .finish_non_exhaustive()
    }
}

impl RawEvent {
    /// The event id, if the `event` field parsed.
    pub fn id(&self) -> Option<u64> {
        match self.block.key {
            Key::Id(id) => Some(id),
            Key::Raw(_) => None,
        }
    }

    /// Line of the event's first row.
    pub fn first_line(&self) -> u64 {
        self.block.first_line
    }

    /// Parses the rows into the event's [`Record`]: exactly the record that
    /// iterating the [`EventReader`] gives for this event.
    pub fn parse(mut self) -> Record {
        self.parse_pending();
        let parser = self.parser;
        let mut block = self.block;
        block.rows += self.extra_rows;
        match block.error.take() {
            None => {
                let mut event = block.event;
                event.weight = block.weight.map_or(1.0, |(w, _)| w);
                Record::Good(event)
            }
            Some(error) => {
                drop(parser);
                Record::Bad(BadEvent {
                    id: match block.key {
                        Key::Id(id) => Some(id),
                        Key::Raw(_) => None,
                    },
                    raw_id: block.raw_id,
                    first_line: block.first_line,
                    rows: block.rows,
                    error,
                })
            }
        }
    }

    /// Keeps one row of text for parsing later.
    fn push_row(&mut self, line: u64, text: &[u8]) {
        let max = self.parser.options.max_objects_per_event;
        if self.block.error.is_some() || self.pending.len() + self.block.rows as usize > max {
            // Row max+1 makes the event bad at the latest, so later rows
            // are only counted.
            self.extra_rows += 1;
            return;
        }
        self.text.extend_from_slice(text);
        self.pending.push(Pending::Row {
            line,
            end: self.text.len(),
        });
        if self.text.len() > RAW_TEXT_BUDGET {
            self.parse_pending();
        }
    }

    fn push_syntax(&mut self, line: u64, message: String) {
        let max = self.parser.options.max_objects_per_event;
        if self.block.error.is_some() || self.pending.len() + self.block.rows as usize > max {
            self.extra_rows += 1;
            return;
        }
        self.pending.push(Pending::Syntax { line, message });
    }

    /// Parses the rows kept so far into the block, in file order.
    fn parse_pending(&mut self) {
        let parser = &*self.parser;
        let block = &mut self.block;
        let mut row = Row {
            spans: Vec::with_capacity(parser.cols.names.len()),
            ..Row::default()
        };
        if block.event.jets.capacity() == 0 {
            // Most rows are jets: one allocation instead of a growth chain.
            block.event.jets.reserve(self.pending.len());
        }
        let mut start = 0;
        for p in self.pending.drain(..) {
            match p {
                Pending::Row { line, end } => {
                    let bytes = &self.text[start..end];
                    start = end;
                    if block.error.is_some() {
                        block.rows += 1;
                        continue;
                    }
                    match row.split(bytes) {
                        Ok(()) => add_row(parser, &row, bytes, line, block),
                        Err(message) => {
                            block.rows += 1;
                            block.error = Some(parser.row_error(
                                line,
                                BadReason::Syntax,
                                message.to_string(),
                            ));
                        }
                    }
                }
                Pending::Syntax { line, message } => {
                    block.rows += 1;
                    if block.error.is_none() {
                        block.error = Some(parser.row_error(line, BadReason::Syntax, message));
                    }
                }
                Pending::Truncated { line } => {
                    // The rows read so far may be incomplete: never pass
                    // them on as a good event.
                    if block.error.is_none() {
                        block.error = Some(parser.row_error(
                            line,
                            BadReason::Truncated,
                            "the input broke off while this event was being read".into(),
                        ));
                    }
                }
            }
        }
        self.text.clear();
    }
}

impl Parser {
    fn row_error(&self, line: u64, reason: BadReason, message: String) -> FieldError {
        FieldError {
            file: self.name.clone(),
            line,
            column: None,
            value: None,
            reason,
            message,
        }
    }
}

/// Streaming reader of quarry long-form CSV events.
///
/// Iterating yields `Ok(Record)` for every contiguous block of rows that share
/// an `event` id — [`Record::Good`] or [`Record::Bad`] — and at most one
/// `Err(CsvError)` for a broken stream, after which it yields `None`. Memory
/// stays bounded by one row plus one event (at most
/// [`ReadOptions::max_objects_per_event`] objects), plus the set of event
/// ids seen, kept to reject an id that reappears later. That set stores runs
/// of consecutive ids: constant for files numbered in order, about 40 bytes
/// per event for arbitrary ids.
///
/// ```
/// use quarry_csv::{EventReader, ReadOptions, Record};
/// let text = "event,kind,pt,eta,phi,mass,btag\n\
///             1,jet,50,0.1,0.2,5,0.9\n\
///             1,met,30,,1.5,,\n\
///             2,jet,40,abc,0.2,5,0.1\n";
/// let opts = ReadOptions::default().with_policy(quarry_csv::ErrorPolicy::Skip);
/// let reader = EventReader::from_reader(text.as_bytes(), "events.csv", opts).unwrap();
/// let records: Vec<Record> = reader.map(Result::unwrap).collect();
/// assert!(matches!(&records[0], Record::Good(e) if e.jets.len() == 1));
/// match &records[1] {
///     Record::Bad(bad) => assert_eq!(bad.error.to_string(),
///         "events.csv:4: column 'eta': 'abc' is not a number"),
///     Record::Good(_) => unreachable!(),
/// }
/// ```
pub struct EventReader {
    lines: Lines,
    name: String,
    gz: bool,
    cols: Columns,
    options: ReadOptions,
    parser: Arc<Parser>,
    row: Row,
    current: Option<RawEvent>,
    seen: SeenIds,
    /// Whether `seen` holds ids of earlier inputs of the same stream.
    seen_earlier_inputs: bool,
    summary: ReadSummary,
    warnings: Vec<String>,
    fatal: Option<CsvError>,
    done: bool,
}

impl EventReader {
    /// Opens a file (`-` reads stdin). Gzip input is recognised by its magic
    /// bytes, whatever the name; a `.gz` name on plain text is read as plain
    /// text with a warning. Reads and checks the header.
    pub fn open(path: &Path, options: ReadOptions) -> Result<EventReader, CsvError> {
        if path.as_os_str() == "-" {
            return EventReader::from_reader(io::stdin(), STDIN_NAME, options);
        }
        let name = path.display().to_string();
        let file = File::open(path).map_err(|source| CsvError::Open {
            file: name.clone(),
            source,
        })?;
        let mut reader = EventReader::from_reader(file, &name, options)?;
        if !reader.gz && path.extension().is_some_and(|e| e == "gz") {
            reader.warnings.push(format!(
                "{name}: named .gz but not gzip data; read as plain text"
            ));
        }
        Ok(reader)
    }

    /// Reads from any byte source; `name` is used in messages. Gzip is
    /// recognised by its magic bytes.
    pub fn from_reader<R: Read + Send + 'static>(
        reader: R,
        name: &str,
        options: ReadOptions,
    ) -> Result<EventReader, CsvError> {
        let (input, gz) = sniff_gzip(Box::new(reader), name)?;
        let mut lines = Lines {
            input: BufReader::with_capacity(1 << 16, input),
            buf: Vec::new(),
            line_no: 0,
        };
        let name = name.to_string();
        let mut header = Row::default();
        let line = loop {
            match lines.next_line() {
                Ok(None) => return Err(CsvError::Empty { file: name }),
                Ok(Some(false)) => {}
                Ok(Some(true)) if memchr::memchr(b'\r', &lines.buf).is_some() => {
                    // A CR-only file reads as one long line.
                    return Err(CsvError::LineEnds {
                        file: name,
                        line: lines.line_no,
                    });
                }
                Ok(Some(true)) => {
                    return Err(CsvError::Header {
                        file: name,
                        line: lines.line_no,
                        message: format!("line longer than {MAX_LINE_BYTES} bytes"),
                    })
                }
                Err(source) => return Err(read_error(&name, gz, lines.line_no + 1, source)),
            }
            if is_blank_or_comment(&lines.buf) {
                continue;
            }
            if memchr::memchr(b'\r', &lines.buf).is_some() {
                return Err(CsvError::LineEnds {
                    file: name,
                    line: lines.line_no,
                });
            }
            if let Err(message) = header.split(&lines.buf) {
                return Err(CsvError::Header {
                    file: name,
                    line: lines.line_no,
                    message: message.to_string(),
                });
            }
            break lines.line_no;
        };
        let (cols, unknown) =
            parse_header(&header, &lines.buf).map_err(|message| CsvError::Header {
                file: name.clone(),
                line,
                message,
            })?;
        let mut warnings = Vec::new();
        if !unknown.is_empty() {
            let listed = unknown
                .iter()
                .map(|c| format!("'{c}'"))
                .collect::<Vec<_>>()
                .join(", ");
            match options.unknown_columns {
                UnknownColumns::Warn => warnings.push(format!(
                    "{name}:{line}: ignoring unknown column(s) {listed}"
                )),
                UnknownColumns::Error => {
                    return Err(CsvError::Header {
                        file: name,
                        line,
                        message: format!(
                            "unknown column(s) {listed} (known columns: {})",
                            KNOWN_COLUMNS.join(", ")
                        ),
                    })
                }
            }
        }
        let parser = Arc::new(Parser {
            cols: cols.clone(),
            name: name.clone(),
            options,
        });
        Ok(EventReader {
            lines,
            name,
            gz,
            cols,
            options,
            parser,
            row: Row::default(),
            current: None,
            seen: SeenIds::default(),
            seen_earlier_inputs: false,
            summary: ReadSummary::default(),
            warnings,
            fatal: None,
            done: false,
        })
    }

    /// The input's name as used in messages.
    pub fn name(&self) -> &str {
        &self.name
    }

    /// Whether the input is gzip-compressed.
    pub fn is_gzip(&self) -> bool {
        self.gz
    }

    /// Warnings collected so far (unknown columns, header-only file, a `.gz`
    /// name on plain text). Each is reported once.
    pub fn warnings(&self) -> &[String] {
        &self.warnings
    }

    /// Counts so far; final once iteration has returned `None`.
    pub fn summary(&self) -> &ReadSummary {
        &self.summary
    }

    /// Continues a stream of several inputs: `seen` holds the ids of the
    /// inputs read before this one (from [`take_seen_ids`](Self::take_seen_ids)
    /// of the previous reader), so an id that reappears here is a
    /// `split-event` like one repeated within a file. Call before reading.
    pub fn continue_stream(&mut self, seen: SeenIds) {
        self.seen = seen;
        self.seen_earlier_inputs = true;
    }

    /// The ids seen so far (this input's and those given to
    /// [`continue_stream`](Self::continue_stream)), for the next input of
    /// the stream; leaves this reader's set empty.
    pub fn take_seen_ids(&mut self) -> SeenIds {
        std::mem::take(&mut self.seen)
    }

    /// Counts a parsed record and applies the error policy.
    fn account(&mut self, record: &Record) {
        match record {
            Record::Good(_) => self.summary.good += 1,
            Record::Bad(bad) => {
                self.summary.bad += 1;
                *self.summary.bad_by_reason.entry(bad.reason()).or_insert(0) += 1;
                if self.options.policy == ErrorPolicy::Stop {
                    self.summary.stopped_at_bad_event = true;
                    self.done = true;
                }
            }
        }
    }

    /// Hands out a grouped event and counts it.
    fn yield_raw(&mut self, raw: RawEvent) -> RawEvent {
        self.summary.events += 1;
        raw
    }

    fn start_block(&mut self, key: Key, raw_id: String, line: u64) -> RawEvent {
        let mut error = None;
        match &key {
            Key::Id(id) => {
                if !self.seen.insert(*id) {
                    let message = if self.seen_earlier_inputs {
                        "appeared earlier in this file or an earlier input: the inputs are one \
                         stream, in which the rows of one event must be contiguous"
                    } else {
                        "appeared earlier in the file: rows of one event must be contiguous"
                    };
                    error = Some(self.error(
                        line,
                        Some(self.cols.event),
                        Some(raw_id.clone()),
                        BadReason::SplitEvent,
                        message.into(),
                    ));
                }
            }
            Key::Raw(raw) => {
                let (value, message) = if raw.is_empty() {
                    (None, "is empty (expected an unsigned integer event id)")
                } else {
                    (Some(raw_id.clone()), "is not an unsigned integer event id")
                };
                error = Some(self.error(
                    line,
                    Some(self.cols.event),
                    value,
                    BadReason::BadEventId,
                    message.into(),
                ));
            }
        }
        RawEvent {
            parser: Arc::clone(&self.parser),
            block: Block {
                event: Event::new(match key {
                    Key::Id(id) => id,
                    Key::Raw(_) => 0,
                }),
                key,
                raw_id,
                first_line: line,
                rows: 0,
                error,
                met_line: None,
                weight: None,
            },
            // Sized for a typical event (~8 rows of ~90 bytes) so that
            // grouping rarely reallocates.
            text: Vec::with_capacity(1024),
            pending: Vec::with_capacity(16),
            extra_rows: 0,
        }
    }

    fn error(
        &self,
        line: u64,
        column: Option<usize>,
        value: Option<String>,
        reason: BadReason,
        message: String,
    ) -> FieldError {
        FieldError {
            file: self.name.clone(),
            line,
            column: column.map(|c| self.cols.names[c].clone()),
            value,
            reason,
            message,
        }
    }

    /// Groups the next event's rows without parsing them: the cheap,
    /// sequential half of reading. It finds where each event ends, checks
    /// the event id (unsigned integer, not seen before) and the CSV syntax,
    /// and keeps exact line numbers; [`RawEvent::parse`] does the rest,
    /// possibly on another thread. Returns `None` at the end of input, and
    /// after a broken stream its `Err` once, like the iterator.
    ///
    /// The error policy and the summary's good/bad counts belong to the
    /// iterator: a caller of `next_raw` sees every event and applies its
    /// own policy to the parsed records. Do not mix the two on one reader.
    ///
    /// ```
    /// use quarry_csv::{EventReader, ReadOptions, Record};
    /// let text = "event,kind,pt,eta,phi,mass\n7,jet,50,0.1,0.2,5\n7,met,30,,1.5,\n8,jet,x,0,0,0\n";
    /// let mut reader = EventReader::from_reader(text.as_bytes(), "e.csv", ReadOptions::default()).unwrap();
    /// let mut raw = Vec::new();
    /// while let Some(r) = reader.next_raw() {
    ///     raw.push(r.unwrap());
    /// }
    /// assert_eq!((raw[0].id(), raw[1].first_line()), (Some(7), 4));
    /// // Parsing may happen anywhere, e.g. on worker threads.
    /// let records: Vec<Record> = raw.into_iter().map(|r| r.parse()).collect();
    /// assert!(matches!(&records[0], Record::Good(e) if e.jets.len() == 1));
    /// assert!(matches!(&records[1], Record::Bad(b) if b.error.line == 4));
    /// ```
    pub fn next_raw(&mut self) -> Option<Result<RawEvent, CsvError>> {
        loop {
            if self.done {
                return self.fatal.take().map(Err);
            }
            let too_long = match self.lines.next_line() {
                Ok(Some(too_long)) => too_long,
                Ok(None) => {
                    self.done = true;
                    if let Some(b) = self.current.take() {
                        return Some(Ok(self.yield_raw(b)));
                    }
                    if self.summary.events == 0 {
                        self.warnings
                            .push(format!("{}: no events (header only)", self.name));
                    }
                    return None;
                }
                Err(source) => {
                    let line = self.lines.line_no + 1;
                    let fatal = read_error(&self.name, self.gz, line, source);
                    self.summary.fatal = Some(fatal.to_string());
                    self.fatal = Some(fatal);
                    self.done = true;
                    if let Some(mut b) = self.current.take() {
                        b.pending.push(Pending::Truncated { line });
                        return Some(Ok(self.yield_raw(b)));
                    }
                    continue;
                }
            };
            if is_blank_or_comment(&self.lines.buf) {
                continue;
            }
            let line = self.lines.line_no;
            self.summary.rows += 1;
            let buf = &self.lines.buf;
            // Only a line with quotes (or cut short) needs the full split
            // here; otherwise the event field is found by counting commas.
            let special = memchr::memchr2(b'"', b'\r', buf);
            if special.is_some_and(|i| memchr::memchr(b'\r', &buf[i..]).is_some()) {
                // A CR that does not end the line: CR line ends from here
                // on, which would join many rows into one. Stop rather than
                // lose the events in it.
                let fatal = CsvError::LineEnds {
                    file: self.name.clone(),
                    line,
                };
                self.summary.fatal = Some(fatal.to_string());
                self.fatal = Some(fatal);
                self.done = true;
                if let Some(mut b) = self.current.take() {
                    b.pending.push(Pending::Truncated { line });
                    return Some(Ok(self.yield_raw(b)));
                }
                continue;
            }
            let (field, syntax) = if too_long || special.is_some() {
                let syntax = self.row.split(buf).err().map(str::to_string);
                let syntax = if too_long {
                    Some(format!("line longer than {MAX_LINE_BYTES} bytes"))
                } else {
                    syntax
                };
                (self.row.get(buf, self.cols.event), syntax)
            } else {
                (plain_field(buf, self.cols.event), None)
            };
            let key = key_of(field);
            let same = self.current.as_ref().is_some_and(|b| b.block.key == key);
            let raw_id = (!same).then(|| {
                field
                    .map(|b| String::from_utf8_lossy(b).into_owned())
                    .unwrap_or_default()
            });
            let finished = if same { None } else { self.current.take() };
            if let Some(raw_id) = raw_id {
                let block = self.start_block(key, raw_id, line);
                self.current = Some(block);
            }
            let current = self.current.as_mut().expect("a block is open");
            match syntax {
                Some(message) => current.push_syntax(line, message),
                None => current.push_row(line, &self.lines.buf),
            }
            if let Some(b) = finished {
                return Some(Ok(self.yield_raw(b)));
            }
        }
    }
}

/// The `col`-th comma-separated field of a line without quotes, trimmed of
/// spaces and tabs as [`Row::split`] does.
fn plain_field(line: &[u8], col: usize) -> Option<&[u8]> {
    line.split(|&b| b == b',').nth(col).map(trim_blanks)
}

fn trim_blanks(mut field: &[u8]) -> &[u8] {
    while let [b' ' | b'\t', rest @ ..] = field {
        field = rest;
    }
    while let [rest @ .., b' ' | b'\t'] = field {
        field = rest;
    }
    field
}

/// The grouping key of a row from its `event` field.
fn key_of(field: Option<&[u8]>) -> Key {
    match field {
        None => Key::Raw(Vec::new()),
        Some(b) => match std::str::from_utf8(b)
            .ok()
            .and_then(|s| s.parse::<u64>().ok())
        {
            Some(id) => Key::Id(id),
            None => Key::Raw(b.to_vec()),
        },
    }
}

impl Iterator for EventReader {
    type Item = Result<Record, CsvError>;

    fn next(&mut self) -> Option<Self::Item> {
        match self.next_raw()? {
            Err(e) => Some(Err(e)),
            Ok(raw) => {
                let record = raw.parse();
                self.account(&record);
                Some(Ok(record))
            }
        }
    }
}

/// Checks the header: required columns present once, cov columns all or
/// none. Returns the columns and the unknown names.
fn parse_header(header: &Row, line: &[u8]) -> Result<(Columns, Vec<String>), String> {
    let mut names = Vec::with_capacity(header.len());
    for (i, raw) in header.fields(line).enumerate() {
        let mut name = std::str::from_utf8(raw)
            .map_err(|_| format!("column {} name is not valid UTF-8", i + 1))?;
        if i == 0 {
            name = name.trim_start_matches('\u{feff}');
        }
        names.push(name.to_string());
    }
    let find = |want: &str| -> Result<Option<usize>, String> {
        let mut hits = names.iter().enumerate().filter(|(_, n)| *n == want);
        let first = hits.next().map(|(i, _)| i);
        if let Some((j, _)) = hits.next() {
            return Err(format!(
                "column '{want}' appears twice (columns {} and {})",
                first.unwrap_or(0) + 1,
                j + 1
            ));
        }
        Ok(first)
    };
    let required = |want: &str| -> Result<usize, String> {
        find(want)?.ok_or_else(|| {
            format!(
                "missing required column '{want}' (required: event, kind, pt, eta, phi, and mass or energy)"
            )
        })
    };
    let event = required("event")?;
    let kind = required("kind")?;
    let pt = required("pt")?;
    let eta = required("eta")?;
    let phi = required("phi")?;
    let mass = find("mass")?;
    let energy = find("energy")?;
    if mass.is_none() && energy.is_none() {
        return Err("missing column 'mass' or 'energy' (at least one is required)".into());
    }
    let cov_cols = [
        find("met_cov_xx")?,
        find("met_cov_xy")?,
        find("met_cov_yy")?,
    ];
    let cov = match cov_cols {
        [Some(a), Some(b), Some(c)] => Some([a, b, c]),
        [None, None, None] => None,
        _ => {
            return Err(
                "MET covariance needs all three columns met_cov_xx, met_cov_xy, met_cov_yy".into(),
            )
        }
    };
    let cols = Columns {
        event,
        kind,
        pt,
        eta,
        phi,
        mass,
        energy,
        btag: find("btag")?,
        charge: find("charge")?,
        truth: find("truth")?,
        weight: find("weight")?,
        cov,
        names: names.clone(),
    };
    let unknown = names
        .into_iter()
        .filter(|n| !KNOWN_COLUMNS.contains(&n.as_str()))
        .collect();
    Ok((cols, unknown))
}

/// Parses one row into the block, recording the first error found. Rows of
/// a block that already has an error are only counted.
fn add_row(parser: &Parser, row: &Row, bytes: &[u8], line: u64, block: &mut Block) {
    block.rows += 1;
    if block.error.is_some() {
        return;
    }
    // One UTF-8 check for the whole line: fields of an unquoted valid line
    // are then `str` slices at ASCII comma positions, with no per-field
    // check. Other lines take the per-field path, which names the column.
    let text = if row.copied {
        None
    } else {
        std::str::from_utf8(bytes).ok()
    };
    let ctx = RowCtx {
        cols: &parser.cols,
        name: &parser.name,
        row,
        bytes,
        text,
        line,
    };
    if let Err(e) = parse_row(&ctx, &parser.options, block) {
        block.error = Some(e);
    }
}

struct RowCtx<'a> {
    cols: &'a Columns,
    name: &'a str,
    row: &'a Row,
    /// The line's bytes.
    bytes: &'a [u8],
    /// The line as text, when it is valid UTF-8 and has no quoted field.
    text: Option<&'a str>,
    line: u64,
}

impl RowCtx<'_> {
    fn err(&self, col: usize, value: &str, reason: BadReason, message: &str) -> FieldError {
        FieldError {
            file: self.name.to_string(),
            line: self.line,
            column: Some(self.cols.names[col].clone()),
            value: if value.is_empty() {
                None
            } else {
                Some(value.to_string())
            },
            reason,
            message: message.to_string(),
        }
    }

    fn row_err(&self, reason: BadReason, message: String) -> FieldError {
        FieldError {
            file: self.name.to_string(),
            line: self.line,
            column: None,
            value: None,
            reason,
            message,
        }
    }

    /// The field's text ("" when the column is absent from the header).
    fn text(&self, col: Option<usize>) -> Result<&str, FieldError> {
        let Some(c) = col else { return Ok("") };
        if let (Some(text), Some(&(a, b))) = (self.text, self.row.spans.get(c)) {
            if let Some(field) = text.get(a..b) {
                return Ok(field);
            }
        }
        let bytes = self.row.get(self.bytes, c).unwrap_or(b"");
        std::str::from_utf8(bytes).map_err(|_| {
            self.err(
                c,
                &String::from_utf8_lossy(bytes),
                BadReason::BadUtf8,
                "is not valid UTF-8",
            )
        })
    }

    /// An optional finite number: `None` when empty or the column is absent.
    fn number(&self, col: Option<usize>) -> Result<Option<f64>, FieldError> {
        let text = self.text(col)?;
        if text.is_empty() {
            return Ok(None);
        }
        let c = col.expect("non-empty text has a column");
        match text.parse::<f64>() {
            Err(_) => Err(self.err(c, text, BadReason::NotANumber, "is not a number")),
            Ok(x) if !x.is_finite() => {
                Err(self.err(c, text, BadReason::NotFinite, "is not a finite number"))
            }
            Ok(x) => Ok(Some(x)),
        }
    }

    /// A required finite number.
    fn required(&self, col: usize, what: &str) -> Result<f64, FieldError> {
        self.number(Some(col))?.ok_or_else(|| {
            self.err(
                col,
                "",
                BadReason::MissingValue,
                &format!("is empty (expected {what})"),
            )
        })
    }

    fn at_least_zero(&self, col: usize, x: f64, text_unit: &str) -> Result<f64, FieldError> {
        if x < 0.0 {
            Err(self.err(
                col,
                &format_value(x),
                BadReason::OutOfRange,
                &format!("is negative (expected {text_unit} ≥ 0)"),
            ))
        } else {
            Ok(x)
        }
    }
}

fn format_value(x: f64) -> String {
    crate::format_f64(x)
}

fn parse_row(ctx: &RowCtx<'_>, options: &ReadOptions, block: &mut Block) -> Result<(), FieldError> {
    let cols = ctx.cols;
    if ctx.row.len() != cols.names.len() {
        return Err(ctx.row_err(
            BadReason::FieldCount,
            format!(
                "row has {} fields, the header has {}",
                ctx.row.len(),
                cols.names.len()
            ),
        ));
    }
    if block.rows > options.max_objects_per_event as u64 {
        return Err(ctx.row_err(
            BadReason::TooManyObjects,
            format!(
                "event has more than {} rows (the max_objects_per_event limit)",
                options.max_objects_per_event
            ),
        ));
    }
    let kind_text = ctx.text(Some(cols.kind))?;
    let kind = match kind_text {
        "jet" => Kind::Jet,
        "fatjet" => Kind::FatJet,
        "electron" => Kind::Electron,
        "muon" => Kind::Muon,
        "met" => Kind::Met,
        "" => {
            return Err(ctx.err(
                cols.kind,
                "",
                BadReason::MissingValue,
                "is empty (expected jet, fatjet, electron, muon or met)",
            ))
        }
        other => {
            return Err(ctx.err(
                cols.kind,
                other,
                BadReason::UnknownKind,
                "is not a known kind (expected jet, fatjet, electron, muon or met)",
            ))
        }
    };
    if let Some(w) = ctx.number(cols.weight)? {
        match block.weight {
            None => block.weight = Some((w, ctx.line)),
            Some((first, first_line)) if first != w => {
                return Err(ctx.err(
                    cols.weight.expect("weight parsed"),
                    &format_value(w),
                    BadReason::InconsistentWeight,
                    &format!(
                        "differs from this event's weight {} on line {first_line} (weight must be equal on all rows that give it)",
                        format_value(first)
                    ),
                ));
            }
            Some(_) => {}
        }
    }
    let pt = ctx.required(cols.pt, "pt in GeV")?;
    let pt = ctx.at_least_zero(cols.pt, pt, "pt")?;
    let phi = ctx.required(cols.phi, "phi in radians")?;
    if phi.abs() > MAX_ABS_PHI {
        return Err(ctx.err(
            cols.phi,
            &format_value(phi),
            BadReason::OutOfRange,
            "is outside [-2π, 2π] (phi is in radians)",
        ));
    }
    if kind == Kind::Met {
        if let Some(first) = block.met_line {
            return Err(ctx.row_err(
                BadReason::DuplicateMet,
                format!("second met row in this event (the first is on line {first})"),
            ));
        }
        block.met_line = Some(ctx.line);
        // eta, mass, energy do not apply to MET: ignored, but a non-empty
        // value must still be a number, so that garbage is not hidden.
        ctx.number(Some(cols.eta))?;
        ctx.number(cols.mass)?;
        ctx.number(cols.energy)?;
        let cov = match cols.cov {
            None => None,
            Some([ixx, ixy, iyy]) => {
                match (
                    ctx.number(Some(ixx))?,
                    ctx.number(Some(ixy))?,
                    ctx.number(Some(iyy))?,
                ) {
                    (None, None, None) => None,
                    (Some(xx), Some(xy), Some(yy)) => {
                        // Positive semi-definite 2×2: non-negative diagonal
                        // and determinant, the latter up to rounding.
                        if xx < 0.0 || yy < 0.0 || xy * xy > xx * yy * (1.0 + 1e-9) {
                            return Err(ctx.row_err(
                                BadReason::BadCovariance,
                                format!(
                                    "MET covariance [xx={}, xy={}, yy={}] is not positive semi-definite (need xx ≥ 0, yy ≥ 0, xy² ≤ xx·yy)",
                                    format_value(xx), format_value(xy), format_value(yy)
                                ),
                            ));
                        }
                        Some([xx, xy, yy])
                    }
                    _ => return Err(ctx.row_err(
                        BadReason::BadCovariance,
                        "MET covariance needs all of met_cov_xx, met_cov_xy, met_cov_yy, or none"
                            .into(),
                    )),
                }
            }
        };
        let (s, c) = phi.sin_cos();
        block.event.met = Met {
            px: pt * c,
            py: pt * s,
            cov,
        };
        return Ok(());
    }
    let eta = ctx.required(cols.eta, "eta")?;
    if eta.abs() > MAX_ABS_ETA {
        return Err(ctx.err(
            cols.eta,
            &format_value(eta),
            BadReason::OutOfRange,
            &format!("is outside [-{MAX_ABS_ETA}, {MAX_ABS_ETA}]"),
        ));
    }
    let p4 = if let Some(m) = ctx.number(cols.mass)? {
        // mass wins when both mass and energy are given; energy is then
        // only checked to be a number.
        ctx.number(cols.energy)?;
        let m = ctx.at_least_zero(cols.mass.expect("mass parsed"), m, "mass")?;
        FourMomentum::from_pt_eta_phi_m(pt, eta, phi, m)
    } else if let Some(e) = ctx.number(cols.energy)? {
        let ie = cols.energy.expect("energy parsed");
        let e = ctx.at_least_zero(ie, e, "energy")?;
        let p = pt * eta.cosh();
        let e = if e >= p {
            e
        } else if e >= p * (1.0 - ENERGY_ROUNDING_TOLERANCE) {
            p
        } else {
            return Err(ctx.err(
                ie,
                &format_value(e),
                BadReason::OutOfRange,
                &format!(
                    "is below the momentum |p| = {} GeV (energy must be ≥ |p|)",
                    format_value(p)
                ),
            ));
        };
        FourMomentum::from_pt_eta_phi_e(pt, eta, phi, e)
    } else {
        return Err(ctx.row_err(
            BadReason::MissingValue,
            format!("{kind_text} row needs a value in 'mass' or 'energy'"),
        ));
    };
    // Each value is finite, but together they may overflow f64 (a mass of
    // 1e200 squares to +inf; pt = 1e300 at η = 20 gives pz = +inf): such a
    // row must not become a good event carrying an infinite momentum.
    if ![p4.px(), p4.py(), p4.pz(), p4.e()]
        .iter()
        .all(|x| x.is_finite())
    {
        return Err(ctx.row_err(
            BadReason::NotFinite,
            format!(
                "{kind_text} four-momentum overflows (px, py, pz, E) = ({}, {}, {}, {}): values too large",
                format_value(p4.px()),
                format_value(p4.py()),
                format_value(p4.pz()),
                format_value(p4.e())
            ),
        ));
    }
    let truth = {
        let text = ctx.text(cols.truth)?;
        if text.is_empty() {
            None
        } else {
            Some(Truth::new(text).map_err(|_| {
                ctx.err(
                    cols.truth.expect("truth parsed"),
                    text,
                    BadReason::BadTruth,
                    "is not a truth label (1–23 printable ASCII characters, no commas or spaces)",
                )
            })?)
        }
    };
    let event = &mut block.event;
    match kind {
        Kind::Jet => {
            let btag = match ctx.number(cols.btag)? {
                None => 0.0,
                Some(b) if (0.0..=1.0).contains(&b) => b,
                Some(b) => {
                    return Err(ctx.err(
                        cols.btag.expect("btag parsed"),
                        &format_value(b),
                        BadReason::OutOfRange,
                        "is outside [0, 1] (expected a b-tag score or 0/1)",
                    ))
                }
            };
            let index = event.jets.len() as u32;
            event.jets.push(Jet {
                p4,
                btag,
                truth,
                index,
            });
        }
        Kind::FatJet => {
            let index = event.fat_jets.len() as u32;
            event.fat_jets.push(FatJet { p4, truth, index });
        }
        Kind::Electron | Kind::Muon => {
            let charge = match ctx.number(cols.charge)? {
                None => 0,
                Some(c) if c.to_bits() == 1.0f64.to_bits() => 1,
                Some(c) if c.to_bits() == (-1.0f64).to_bits() => -1,
                Some(c) => {
                    return Err(ctx.err(
                        cols.charge.expect("charge parsed"),
                        &format_value(c),
                        BadReason::OutOfRange,
                        "is not a charge of -1 or +1",
                    ))
                }
            };
            let (list, flavour) = if kind == Kind::Electron {
                (&mut event.electrons, Flavour::Electron)
            } else {
                (&mut event.muons, Flavour::Muon)
            };
            let index = list.len() as u32;
            list.push(Lepton {
                p4,
                flavour,
                charge,
                truth,
                index,
            });
        }
        Kind::Met => unreachable!("handled above"),
    }
    Ok(())
}

/// Peeks at the first two bytes; wraps the stream in a gzip decoder when
/// they are the gzip magic bytes.
fn sniff_gzip(
    mut input: Box<dyn Read + Send>,
    name: &str,
) -> Result<(Box<dyn Read + Send>, bool), CsvError> {
    let mut magic = [0u8; 2];
    let mut n = 0;
    while n < 2 {
        match input.read(&mut magic[n..]) {
            Ok(0) => break,
            Ok(k) => n += k,
            Err(e) if e.kind() == io::ErrorKind::Interrupted => {}
            Err(source) => {
                return Err(CsvError::Read {
                    file: name.to_string(),
                    line: 1,
                    hint: "",
                    source,
                })
            }
        }
    }
    let head = Cursor::new(magic[..n].to_vec()).chain(input);
    if n == 2 && magic == [0x1f, 0x8b] {
        Ok((Box::new(MultiGzDecoder::new(BufReader::new(head))), true))
    } else {
        Ok((Box::new(head), false))
    }
}

fn read_error(name: &str, gz: bool, line: u64, source: io::Error) -> CsvError {
    CsvError::Read {
        file: name.to_string(),
        line,
        hint: if gz {
            " (truncated or corrupt gzip stream)"
        } else {
            ""
        },
        source,
    }
}

/// Longest line accepted; a longer one becomes a bad event (its rest is
/// skipped without being stored), so one line cannot take unbounded memory.
pub const MAX_LINE_BYTES: usize = 1 << 20;

/// Physical lines of the input, counted exactly. quarry reads lines itself
/// (rather than through the `csv` crate's record reader) so that every error
/// names the true line number with LF or CRLF ends, blank lines and comment
/// lines alike; the format has no multi-line fields.
struct Lines {
    input: BufReader<Box<dyn Read + Send>>,
    buf: Vec<u8>,
    line_no: u64,
}

impl Lines {
    /// Reads the next line into `buf` without its line end. `Ok(None)` at
    /// the end of input; `Ok(Some(true))` if the line was longer than
    /// [`MAX_LINE_BYTES`] (`buf` then holds its start).
    fn next_line(&mut self) -> io::Result<Option<bool>> {
        self.buf.clear();
        // fill_buf + memchr rather than `read_until`: the reader thread is
        // the serial part of a run, and std's byte search was its largest
        // cost.
        let mut seen_any = false;
        let mut too_long = false;
        loop {
            let avail = match self.input.fill_buf() {
                Ok(a) => a,
                Err(e) if e.kind() == io::ErrorKind::Interrupted => continue,
                Err(e) => return Err(e),
            };
            if avail.is_empty() {
                break;
            }
            seen_any = true;
            let (chunk, used, done) = match memchr::memchr(b'\n', avail) {
                Some(i) => (&avail[..i], i + 1, true),
                None => (avail, avail.len(), false),
            };
            let room = (MAX_LINE_BYTES + 1).saturating_sub(self.buf.len());
            if chunk.len() > room {
                too_long = true;
            }
            self.buf.extend_from_slice(&chunk[..chunk.len().min(room)]);
            self.input.consume(used);
            if done {
                break;
            }
        }
        if !seen_any {
            return Ok(None);
        }
        self.line_no += 1;
        if too_long || self.buf.len() > MAX_LINE_BYTES {
            too_long = true;
            self.buf.truncate(MAX_LINE_BYTES);
        }
        if self.buf.last() == Some(&b'\r') {
            self.buf.pop();
        }
        if self.line_no == 1 && self.buf.starts_with(b"\xEF\xBB\xBF") {
            // A UTF-8 byte-order mark, as some spreadsheet programs write.
            self.buf.drain(..3);
        }
        Ok(Some(too_long))
    }
}

/// The high bit of each byte of `word` that equals `byte`, exactly (no
/// false positives from borrows: the low seven bits are added separately).
#[inline(always)]
fn bytes_equal_to(word: u64, byte: u8) -> u64 {
    const LOW7: u64 = 0x7F7F_7F7F_7F7F_7F7F;
    let x = word ^ (u64::from(byte) * 0x0101_0101_0101_0101);
    !(((x & LOW7) + LOW7) | x | LOW7)
}

fn is_blank_or_comment(line: &[u8]) -> bool {
    match line.iter().find(|b| !b.is_ascii_whitespace()) {
        None => true,
        Some(&b) => b == b'#',
    }
}

/// One line split into fields: byte ranges into the line itself, or, when
/// the line has a quoted field, into an unquoted copy.
#[derive(Default)]
struct Row {
    /// Unquoted field contents, used only when `copied`.
    bytes: Vec<u8>,
    /// `(start, end)` of each field in the line (or in `bytes`).
    spans: Vec<(usize, usize)>,
    /// Whether the spans index `bytes` rather than the line.
    copied: bool,
}

impl Row {
    /// Splits a line: fields separated by commas, surrounding spaces and
    /// tabs trimmed; a field may be double-quoted (`""` inside quotes is one
    /// quote). On a syntax error the fields read so far are kept.
    fn split(&mut self, line: &[u8]) -> Result<(), &'static str> {
        self.bytes.clear();
        self.spans.clear();
        let blank = |b: u8| b == b' ' || b == b'\t';
        let n = line.len();
        // The common case, a line without quotes: one pass that only
        // records field boundaries, no copy.
        self.copied = false;
        let trimmed = |mut a: usize, mut b: usize| {
            while a < b && blank(line[a]) {
                a += 1;
            }
            while b > a && blank(line[b - 1]) {
                b -= 1;
            }
            (a, b)
        };
        // Eight bytes at a time (fields are ~10 bytes, too short for
        // memchr's per-call setup): the split was the reader's largest
        // single cost when done byte by byte.
        let mut start = 0;
        let mut quoted = false;
        let mut base = 0;
        while base < n {
            let word = match line.get(base..base + 8) {
                Some(eight) => u64::from_le_bytes(eight.try_into().unwrap_or([b' '; 8])),
                None => {
                    let mut tail = [b' '; 8];
                    tail[..n - base].copy_from_slice(&line[base..]);
                    u64::from_le_bytes(tail)
                }
            };
            if bytes_equal_to(word, b'"') != 0 {
                quoted = true;
                break;
            }
            let mut commas = bytes_equal_to(word, b',');
            while commas != 0 {
                let i = base + (commas.trailing_zeros() / 8) as usize;
                commas &= commas - 1;
                self.spans.push(trimmed(start, i));
                start = i + 1;
            }
            base += 8;
        }
        if !quoted {
            self.spans.push(trimmed(start, n));
            return Ok(());
        }
        self.spans.clear();
        self.copied = true;
        let mut i = 0;
        loop {
            let field_start = self.bytes.len();
            while i < n && blank(line[i]) {
                i += 1;
            }
            if i < n && line[i] == b'"' {
                i += 1;
                loop {
                    if i >= n {
                        return Err("unterminated quoted field");
                    }
                    if line[i] == b'"' {
                        if i + 1 < n && line[i + 1] == b'"' {
                            self.bytes.push(b'"');
                            i += 2;
                        } else {
                            i += 1;
                            break;
                        }
                    } else {
                        self.bytes.push(line[i]);
                        i += 1;
                    }
                }
                while i < n && blank(line[i]) {
                    i += 1;
                }
                if i < n && line[i] != b',' {
                    return Err("text after the closing quote of a field");
                }
            } else {
                let start = i;
                while i < n && line[i] != b',' {
                    i += 1;
                }
                let mut end = i;
                while end > start && blank(line[end - 1]) {
                    end -= 1;
                }
                self.bytes.extend_from_slice(&line[start..end]);
            }
            self.spans.push((field_start, self.bytes.len()));
            if i >= n {
                return Ok(());
            }
            i += 1;
        }
    }

    fn len(&self) -> usize {
        self.spans.len()
    }

    /// Field `i` of `line` (the line last split).
    fn get<'a>(&'a self, line: &'a [u8], i: usize) -> Option<&'a [u8]> {
        let &(a, b) = self.spans.get(i)?;
        Some(if self.copied {
            &self.bytes[a..b]
        } else {
            &line[a..b]
        })
    }

    fn fields<'a>(&'a self, line: &'a [u8]) -> impl Iterator<Item = &'a [u8]> {
        (0..self.len()).filter_map(move |i| self.get(line, i))
    }
}
