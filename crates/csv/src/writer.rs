//! Writers: events back into quarry's long-form CSV, and per-event result
//! rows of any serde struct. Both write atomically (see `output`).

use std::path::Path;

use quarry_event::{Event, Lepton};
use quarry_lorentz::FourMomentum;
use serde::Serialize;

use crate::output::AtomicOutput;
use crate::CsvError;

/// Column order written by [`EventWriter`].
pub const EVENT_COLUMNS: [&str; 13] = [
    "event",
    "kind",
    "pt",
    "eta",
    "phi",
    "mass",
    "btag",
    "charge",
    "truth",
    "weight",
    "met_cov_xx",
    "met_cov_xy",
    "met_cov_yy",
];

/// Formats an `f64` so that parsing the text gives back the same bits:
/// plain decimal for ordinary magnitudes, exponent form for very large or
/// very small ones (Rust's `{}` and `{:e}` both print the shortest
/// round-tripping digits).
///
/// ```
/// use quarry_csv::format_f64;
/// assert_eq!(format_f64(45.25), "45.25");
/// assert_eq!(format_f64(1e-9), "1e-9");
/// let x = 0.1 + 0.2;
/// assert_eq!(format_f64(x).parse::<f64>().unwrap(), x);
/// ```
pub fn format_f64(x: f64) -> String {
    let a = x.abs();
    if a == 0.0 || (1e-5..1e16).contains(&a) {
        format!("{x}")
    } else {
        format!("{x:e}")
    }
}

/// Writes [`Event`]s as quarry long-form CSV (see `docs/csv-format.md`), one
/// row per object plus one `met` row per event (always written, so that an
/// event without objects survives a round trip). Objects are written with
/// `mass` (not `energy`); `weight` is repeated on every row.
///
/// The output appears under its final name only after
/// [`finish`](Self::finish); dropping the writer without finishing removes
/// the temporary file.
///
/// ```
/// use quarry_csv::{EventReader, EventWriter, ReadOptions, Record};
/// use quarry_event::{Event, Jet, Met};
/// use quarry_lorentz::FourMomentum;
/// let dir = tempfile::tempdir().unwrap();
/// let path = dir.path().join("toy.csv");
/// let mut e = Event::new(1);
/// e.jets.push(Jet::new(FourMomentum::from_pt_eta_phi_m(50.0, 0.5, 1.0, 5.0), 0.8));
/// e.met = Met::new(20.0, -5.0);
/// let mut w = EventWriter::create(&path).unwrap();
/// w.write(&e).unwrap();
/// w.finish().unwrap();
/// let text = std::fs::read_to_string(&path).unwrap();
/// assert!(text.starts_with("event,kind,pt,eta,phi,mass,"));
/// assert_eq!(text.lines().count(), 3); // header, jet, met
/// let mut r = EventReader::open(&path, ReadOptions::default()).unwrap();
/// match r.next().unwrap().unwrap() {
///     Record::Good(back) => assert!((back.jets[0].p4.pt() - 50.0).abs() < 1e-9),
///     Record::Bad(bad) => panic!("{bad}"),
/// }
/// ```
pub struct EventWriter {
    csv: csv::Writer<AtomicOutput>,
    name: String,
    fields: Vec<String>,
}

impl EventWriter {
    /// Creates the output: `-` is stdout, a `.gz` suffix gzips. Writes the
    /// header line.
    pub fn create(path: &Path) -> Result<EventWriter, CsvError> {
        let out = AtomicOutput::create(path)?;
        let name = out.name().to_string();
        let mut csv = csv::WriterBuilder::new()
            .has_headers(false)
            .from_writer(out);
        csv.write_record(EVENT_COLUMNS)
            .map_err(|e| csv_write_error(&name, e))?;
        Ok(EventWriter {
            csv,
            name,
            fields: vec![String::new(); EVENT_COLUMNS.len()],
        })
    }

    /// Writes one event. Fails (writing nothing for this event) if any value
    /// is non-finite or a four-momentum has `m² < −1e−9·E²` (beyond rounding).
    pub fn write(&mut self, event: &Event) -> Result<(), CsvError> {
        let weight = finite(&self.name, event.id, "weight", event.weight)?;
        let mut rows: Vec<[String; 13]> =
            Vec::with_capacity(event.jets.len() + event.fat_jets.len() + event.n_leptons() + 1);
        let id = event.id.to_string();
        let weight = format_f64(weight);
        let blank = || -> [String; 13] { Default::default() };
        let object = |kind: &str, p4: &FourMomentum| -> Result<[String; 13], CsvError> {
            let (pt, eta, phi, m) = kinematics(&self.name, event.id, kind, p4)?;
            let mut r = blank();
            r[0] = id.clone();
            r[1] = kind.to_string();
            r[2] = format_f64(pt);
            r[3] = format_f64(eta);
            r[4] = format_f64(phi);
            r[5] = format_f64(m);
            r[9] = weight.clone();
            Ok(r)
        };
        for j in &event.jets {
            let mut r = object("jet", &j.p4)?;
            r[6] = format_f64(finite(&self.name, event.id, "btag", j.btag)?);
            r[8] = j.truth.map(|t| t.to_string()).unwrap_or_default();
            rows.push(r);
        }
        for j in &event.fat_jets {
            let mut r = object("fatjet", &j.p4)?;
            r[8] = j.truth.map(|t| t.to_string()).unwrap_or_default();
            rows.push(r);
        }
        let lepton = |kind: &str, l: &Lepton| -> Result<[String; 13], CsvError> {
            let mut r = object(kind, &l.p4)?;
            r[7] = match l.charge {
                0 => String::new(),
                c => c.to_string(),
            };
            r[8] = l.truth.map(|t| t.to_string()).unwrap_or_default();
            Ok(r)
        };
        for l in &event.electrons {
            rows.push(lepton("electron", l)?);
        }
        for l in &event.muons {
            rows.push(lepton("muon", l)?);
        }
        let met = &event.met;
        let (mpx, mpy) = (
            finite(&self.name, event.id, "met px", met.px)?,
            finite(&self.name, event.id, "met py", met.py)?,
        );
        let mut r = blank();
        r[0] = id.clone();
        r[1] = "met".to_string();
        r[2] = format_f64(mpx.hypot(mpy));
        r[4] = format_f64(met.phi());
        r[9] = weight.clone();
        if let Some(cov) = met.cov {
            for (k, v) in cov.iter().enumerate() {
                r[10 + k] = format_f64(finite(&self.name, event.id, "met covariance", *v)?);
            }
        }
        rows.push(r);
        for r in &rows {
            for (f, v) in self.fields.iter_mut().zip(r.iter()) {
                f.clone_from(v);
            }
            self.csv
                .write_record(&self.fields)
                .map_err(|e| csv_write_error(&self.name, e))?;
        }
        Ok(())
    }

    /// Flushes, closes and renames the output into place.
    pub fn finish(self) -> Result<(), CsvError> {
        finish_csv(self.csv, &self.name)
    }
}

/// pt, eta, phi and mass of an object to write. Writes eta 0 for pt = 0
/// (the direction is undefined and the reader bounds |eta|), and clamps a
/// rounding-level negative m² to mass 0.
fn kinematics(
    file: &str,
    event: u64,
    kind: &str,
    p4: &FourMomentum,
) -> Result<(f64, f64, f64, f64), CsvError> {
    if !p4.is_finite() {
        return Err(CsvError::Value {
            file: file.to_string(),
            event,
            message: format!("{kind} has a non-finite four-momentum {p4:?}"),
        });
    }
    let pt = p4.pt();
    let eta = if pt > 0.0 { p4.eta() } else { 0.0 };
    let m2 = p4.m2();
    let m = if m2 >= 0.0 {
        m2.sqrt()
    } else if m2 >= -1e-9 * p4.e() * p4.e() {
        0.0
    } else {
        return Err(CsvError::Value {
            file: file.to_string(),
            event,
            message: format!("{kind} has m² = {m2} < 0 (unphysical four-momentum {p4:?})"),
        });
    };
    Ok((pt, eta, p4.phi(), m))
}

fn finite(file: &str, event: u64, what: &str, x: f64) -> Result<f64, CsvError> {
    if x.is_finite() {
        Ok(x)
    } else {
        Err(CsvError::Value {
            file: file.to_string(),
            event,
            message: format!("{what} is {x}"),
        })
    }
}

fn csv_write_error(name: &str, e: csv::Error) -> CsvError {
    match e.into_kind() {
        csv::ErrorKind::Io(source) => CsvError::Write {
            file: name.to_string(),
            source,
        },
        other => CsvError::Value {
            file: name.to_string(),
            event: 0,
            message: format!("{other:?}"),
        },
    }
}

fn finish_csv(csv: csv::Writer<AtomicOutput>, name: &str) -> Result<(), CsvError> {
    let out = csv.into_inner().map_err(|e| CsvError::Write {
        file: name.to_string(),
        source: std::io::Error::new(e.error().kind(), e.error().to_string()),
    })?;
    out.commit()
}

/// Writes rows of any `serde::Serialize` struct as CSV, columns in the
/// struct's field order, header from the field names (written with the first
/// row: an output with no rows is an empty file). Same atomic behaviour as
/// [`EventWriter`]: `-` is stdout, `.gz` gzips, the file appears only on
/// [`finish`](Self::finish).
///
/// ```
/// #[derive(serde::Serialize)]
/// struct Row { event: u64, status: &'static str, m_top: f64 }
/// let dir = tempfile::tempdir().unwrap();
/// let path = dir.path().join("out.csv");
/// let mut w = quarry_csv::RowWriter::create(&path).unwrap();
/// w.write(&Row { event: 1, status: "ok", m_top: 172.5 }).unwrap();
/// assert!(!path.exists()); // not visible before finish
/// w.finish().unwrap();
/// let text = std::fs::read_to_string(&path).unwrap();
/// assert_eq!(text, "event,status,m_top\n1,ok,172.5\n");
/// ```
pub struct RowWriter<T: Serialize> {
    state: RowState,
    name: String,
    _row: std::marker::PhantomData<fn(&T)>,
}

/// Which of the two ways of writing a [`RowWriter`] is in use: they must
/// not be mixed, because each writes the header its own way.
enum RowState {
    /// Nothing written yet.
    Fresh(AtomicOutput),
    /// Rows serialized one by one ([`RowWriter::write`]); csv writes the
    /// header with the first row.
    Rows(Box<csv::Writer<AtomicOutput>>),
    /// Pre-encoded blocks ([`RowWriter::write_encoded`]), header written.
    Encoded(AtomicOutput),
    /// Transient, while switching state.
    Moving,
}

impl<T: Serialize> RowWriter<T> {
    /// Creates the output: `-` is stdout, a `.gz` suffix gzips.
    pub fn create(path: &Path) -> Result<RowWriter<T>, CsvError> {
        let out = AtomicOutput::create(path)?;
        let name = out.name().to_string();
        Ok(RowWriter {
            state: RowState::Fresh(out),
            name,
            _row: std::marker::PhantomData,
        })
    }

    /// Writes one row. Not to be mixed with
    /// [`write_encoded`](Self::write_encoded) on the same writer (an error).
    pub fn write(&mut self, row: &T) -> Result<(), CsvError> {
        if let RowState::Fresh(_) = self.state {
            if let RowState::Fresh(out) = std::mem::replace(&mut self.state, RowState::Moving) {
                self.state = RowState::Rows(Box::new(
                    csv::WriterBuilder::new().has_headers(true).from_writer(out),
                ));
            }
        }
        match &mut self.state {
            RowState::Rows(csv) => csv
                .serialize(row)
                .map_err(|e| csv_write_error(&self.name, e)),
            _ => Err(self.mixed()),
        }
    }

    fn mixed(&self) -> CsvError {
        CsvError::Write {
            file: self.name.clone(),
            source: std::io::Error::new(
                std::io::ErrorKind::InvalidInput,
                "RowWriter: write and write_encoded cannot be mixed on one output",
            ),
        }
    }

    /// The hidden temporary file the rows go to until
    /// [`finish`](Self::finish) renames it into place; `None` for stdout.
    /// A program that must end at once (a second signal, a watchdog) can
    /// remove it, since no destructor runs on `std::process::exit`.
    pub fn temp_path(&self) -> Option<&Path> {
        match &self.state {
            RowState::Fresh(out) | RowState::Encoded(out) => out.temp_path(),
            RowState::Rows(csv) => csv.get_ref().temp_path(),
            RowState::Moving => None,
        }
    }

    /// Flushes, closes and renames the output into place.
    pub fn finish(self) -> Result<(), CsvError> {
        match self.state {
            RowState::Fresh(out) | RowState::Encoded(out) => out.commit(),
            RowState::Rows(csv) => finish_csv(*csv, &self.name),
            RowState::Moving => Err(self.mixed()),
        }
    }
}

impl<T: Serialize + Default> RowWriter<T> {
    /// Writes rows that [`encode_rows`] already turned into CSV text
    /// (typically on worker threads, so that formatting runs in parallel
    /// and the writer only copies bytes). The header, taken from
    /// `T::default()`'s field names, is written before the first non-empty
    /// block, so the file is byte for byte what [`write`](Self::write)
    /// would give for the same rows. Not to be mixed with `write` on the
    /// same writer (an error).
    ///
    /// ```
    /// #[derive(Default, serde::Serialize)]
    /// struct Row { event: u64, m_top: f64 }
    /// let dir = tempfile::tempdir().unwrap();
    /// let path = dir.path().join("out.csv");
    /// let block = quarry_csv::encode_rows(&[Row { event: 1, m_top: 172.5 }]).unwrap();
    /// let mut w = quarry_csv::RowWriter::<Row>::create(&path).unwrap();
    /// w.write_encoded(&block).unwrap();
    /// w.write_encoded(&[]).unwrap();
    /// w.finish().unwrap();
    /// assert_eq!(std::fs::read_to_string(&path).unwrap(), "event,m_top\n1,172.5\n");
    /// ```
    pub fn write_encoded(&mut self, block: &[u8]) -> Result<(), CsvError> {
        use std::io::Write;
        if block.is_empty() {
            return Ok(());
        }
        if let RowState::Fresh(_) = self.state {
            // csv writes the header with the first serialized row: take it
            // from a default row, so that it is the same bytes.
            let mut both = csv::WriterBuilder::new()
                .has_headers(true)
                .from_writer(Vec::new());
            both.serialize(T::default())
                .map_err(|e| csv_write_error(&self.name, e))?;
            let both = both.into_inner().map_err(|e| CsvError::Write {
                file: self.name.clone(),
                source: std::io::Error::new(e.error().kind(), e.error().to_string()),
            })?;
            let record = encode_rows(&[T::default()])?;
            let header = &both[..both.len() - record.len()];
            if let RowState::Fresh(mut out) = std::mem::replace(&mut self.state, RowState::Moving) {
                out.write_all(header).map_err(|source| CsvError::Write {
                    file: self.name.clone(),
                    source,
                })?;
                self.state = RowState::Encoded(out);
            }
        }
        match &mut self.state {
            RowState::Encoded(out) => out.write_all(block).map_err(|source| CsvError::Write {
                file: self.name.clone(),
                source,
            }),
            _ => Err(self.mixed()),
        }
    }
}

/// Turns rows into CSV records (no header) in memory, exactly as
/// [`RowWriter::write`] would write them; the block goes to
/// [`RowWriter::write_encoded`]. Lets worker threads format rows in
/// parallel.
///
/// ```
/// #[derive(serde::Serialize)]
/// struct Row { event: u64, status: &'static str }
/// let block = quarry_csv::encode_rows(&[Row { event: 1, status: "a,b" }]).unwrap();
/// assert_eq!(block, b"1,\"a,b\"\n");
/// ```
pub fn encode_rows<T: Serialize>(rows: &[T]) -> Result<Vec<u8>, CsvError> {
    let mut csv = csv::WriterBuilder::new()
        .has_headers(false)
        .buffer_capacity(4096)
        .from_writer(Vec::new());
    for row in rows {
        csv.serialize(row)
            .map_err(|e| csv_write_error("<memory>", e))?;
    }
    csv.into_inner().map_err(|e| CsvError::Write {
        file: "<memory>".to_string(),
        source: std::io::Error::new(e.error().kind(), e.error().to_string()),
    })
}

/// Builds one CSV record in memory field by field, byte for byte as the
/// csv crate's serde serializer behind [`RowWriter::write`] and
/// [`encode_rows`] writes it: a field is quoted only when it holds `,`,
/// `"`, CR or LF (quotes doubled inside), floats take ryu's shortest
/// round-tripping form, `None` is an empty field. For hot row types that
/// format themselves without serde's per-field dispatch; the result goes
/// to [`RowWriter::write_encoded`].
///
/// ```
/// let mut out = Vec::new();
/// let mut r = quarry_csv::RecordText::new(&mut out);
/// r.uint(Some(7));
/// r.text("a,b");
/// r.float(Some(172.5));
/// r.float(None);
/// r.end();
/// assert_eq!(out, b"7,\"a,b\",172.5,\n");
/// ```
pub struct RecordText<'a> {
    out: &'a mut Vec<u8>,
    start: usize,
    fields: usize,
}

impl<'a> RecordText<'a> {
    /// Starts a record at the end of `out`.
    pub fn new(out: &'a mut Vec<u8>) -> RecordText<'a> {
        let start = out.len();
        RecordText {
            out,
            start,
            fields: 0,
        }
    }

    fn delimit(&mut self) {
        if self.fields > 0 {
            self.out.push(b',');
        }
        self.fields += 1;
    }

    /// A text field, quoted if it needs to be.
    pub fn text(&mut self, s: &str) {
        self.delimit();
        let bytes = s.as_bytes();
        if bytes
            .iter()
            .any(|&b| matches!(b, b',' | b'"' | b'\n' | b'\r'))
        {
            self.out.push(b'"');
            for &b in bytes {
                if b == b'"' {
                    self.out.push(b'"');
                }
                self.out.push(b);
            }
            self.out.push(b'"');
        } else {
            self.out.extend_from_slice(bytes);
        }
    }

    /// A float field (empty for `None`).
    pub fn float(&mut self, x: Option<f64>) {
        self.delimit();
        if let Some(x) = x {
            self.out
                .extend_from_slice(ryu::Buffer::new().format(x).as_bytes());
        }
    }

    /// An unsigned integer field (empty for `None`).
    pub fn uint(&mut self, x: Option<u64>) {
        self.delimit();
        if let Some(mut x) = x {
            let mut digits = [0u8; 20];
            let mut i = digits.len();
            loop {
                i -= 1;
                digits[i] = b'0' + (x % 10) as u8;
                x /= 10;
                if x == 0 {
                    break;
                }
            }
            self.out.extend_from_slice(&digits[i..]);
        }
    }

    /// Ends the record with its terminator.
    pub fn end(self) {
        // csv quotes a record made of one empty field, so that it is not
        // read back as an empty line.
        if self.fields == 1 && self.out.len() == self.start {
            self.out.extend_from_slice(b"\"\"");
        }
        self.out.push(b'\n');
    }
}
