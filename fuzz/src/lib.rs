//! Shared checks for quarry's fuzz targets: each target feeds hostile input
//! to one stage and then asserts properties that must hold for *any* input,
//! not just "no panic".
//!
//! **Design decision:** the checks live in this small library (not in the
//! targets) so that the reader target and the pipeline target assert the
//! same invariants on the events they see.

use std::io::Cursor;

use quarry::csv::{CsvError, ErrorPolicy, EventReader, ReadOptions, ReadSummary, Record};

pub mod parquet_checks;
pub use parquet_checks::check_good_event;

/// Everything one pass of the reader produced.
pub struct ReadOutcome {
    /// `Err` if the header could not be read (no records then).
    pub opened: Result<(), String>,
    /// Records in order.
    pub records: Vec<Record>,
    /// The fatal stream error, if iteration ended with one.
    pub fatal: Option<String>,
    /// The reader's own counts.
    pub summary: ReadSummary,
}

/// Reads `bytes` to the end under `policy` with a row limit of
/// `max_objects`, checking the iterator protocol as it goes: at most one
/// `Err`, nothing after it, and `None` stays `None`.
pub fn read_all(bytes: &[u8], policy: ErrorPolicy, max_objects: usize) -> ReadOutcome {
    let options = ReadOptions {
        policy,
        max_objects_per_event: max_objects,
        ..ReadOptions::default()
    };
    let mut reader =
        match EventReader::from_reader(Cursor::new(bytes.to_vec()), "fuzz.csv", options) {
            Ok(r) => r,
            Err(e) => {
                check_fatal_message(&e);
                return ReadOutcome {
                    opened: Err(e.to_string()),
                    records: Vec::new(),
                    fatal: None,
                    summary: ReadSummary::default(),
                };
            }
        };
    let mut records = Vec::new();
    let mut fatal = None;
    for item in reader.by_ref() {
        assert!(
            fatal.is_none(),
            "the reader yielded an item after a fatal error"
        );
        match item {
            Ok(r) => records.push(r),
            Err(e) => {
                check_fatal_message(&e);
                fatal = Some(e.to_string());
            }
        }
    }
    assert!(reader.next().is_none(), "the reader resumed after None");
    ReadOutcome {
        opened: Ok(()),
        records,
        fatal,
        summary: reader.summary().clone(),
    }
}

fn check_fatal_message(e: &CsvError) {
    let text = e.to_string();
    assert!(
        text.starts_with("fuzz.csv"),
        "fatal error does not name the file: {text}"
    );
    assert!(!text.contains('\n'), "fatal error spans lines: {text:?}");
}

/// Checks a finished read: counts agree with the records, the error policy
/// was honoured, and every good event satisfies the format's guarantees.
pub fn check_outcome(out: &ReadOutcome, policy: ErrorPolicy, max_objects: usize) {
    let s = &out.summary;
    if out.opened.is_err() {
        return;
    }
    let good = out
        .records
        .iter()
        .filter(|r| matches!(r, Record::Good(_)))
        .count() as u64;
    let bad = out.records.len() as u64 - good;
    assert_eq!(s.events, out.records.len() as u64, "summary.events");
    assert_eq!((s.good, s.bad), (good, bad), "summary good/bad");
    assert_eq!(
        s.bad_by_reason.values().sum::<u64>(),
        bad,
        "bad_by_reason total"
    );
    assert_eq!(s.fatal, out.fatal, "summary.fatal");
    if policy == ErrorPolicy::Stop {
        // Stop: at most one bad event, and it is the last record.
        let first_bad = out.records.iter().position(|r| matches!(r, Record::Bad(_)));
        if let Some(i) = first_bad {
            assert_eq!(i + 1, out.records.len(), "Stop read past a bad event");
            assert!(s.stopped_at_bad_event || out.fatal.is_some());
        }
    }
    let mut last_line = 0;
    for r in &out.records {
        match r {
            Record::Good(e) => check_good_event(e, max_objects),
            Record::Bad(b) => {
                assert!(b.rows >= 1 || b.reason() == quarry::csv::BadReason::Truncated);
                assert!(
                    b.error.line >= b.first_line,
                    "error before the event's first line"
                );
                assert!(b.first_line > last_line, "records out of line order");
                last_line = b.first_line;
                let text = b.to_string();
                assert!(
                    text.contains("fuzz.csv:"),
                    "bad event message lacks file:line: {text}"
                );
                if let Some(id) = b.id {
                    assert_eq!(b.raw_id.trim().parse::<u64>().ok(), Some(id));
                }
            }
        }
    }
}

/// The contiguous blocks an independent, simple model of the format
/// expects, for inputs it can model (no quotes, no gzip magic, every line
/// short, valid UTF-8): data lines grouped by their trimmed `event` field
/// (located by name in the header). `None` when the input is outside the
/// model or has no usable `event` column.
pub fn model_block_count(bytes: &[u8]) -> Option<usize> {
    if bytes.starts_with(&[0x1f, 0x8b])
        || bytes.contains(&b'"')
        || std::str::from_utf8(bytes).is_err()
    {
        return None;
    }
    let parse = |f: &[u8]| {
        std::str::from_utf8(f)
            .ok()
            .and_then(|s| s.parse::<u64>().ok())
    };
    let mut event_col: Option<usize> = None;
    // The previous row's key: a parsed id, or the raw text of a bad one.
    let mut last: Option<Result<u64, &[u8]>> = None;
    let mut count = 0;
    for (n, line) in bytes.split(|&b| b == b'\n').enumerate() {
        let line = line.strip_suffix(b"\r").unwrap_or(line);
        let line = if n == 0 {
            line.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(line)
        } else {
            line
        };
        if line.len() > quarry::csv::MAX_LINE_BYTES {
            return None;
        }
        match line.iter().find(|b| !b.is_ascii_whitespace()) {
            None | Some(b'#') => continue,
            Some(_) => {}
        }
        let Some(col) = event_col else {
            let names: Vec<&[u8]> = line.split(|&b| b == b',').map(trim_blank).collect();
            event_col = Some(names.iter().position(|n| *n == b"event")?);
            continue;
        };
        let field = line
            .split(|&b| b == b',')
            .nth(col)
            .map(trim_blank)
            .unwrap_or(b"");
        let key = parse(field).ok_or(field);
        if last != Some(key) {
            count += 1;
        }
        last = Some(key);
    }
    event_col.map(|_| count)
}

fn trim_blank(mut f: &[u8]) -> &[u8] {
    while let [b' ' | b'\t', rest @ ..] = f {
        f = rest;
    }
    while let [rest @ .., b' ' | b'\t'] = f {
        f = rest;
    }
    f
}

/// Checks the reconstructions of one event: one per hypothesis in the
/// pipeline's order, and every number either finite or replaced by a typed
/// status (NaN never escapes silently).
pub fn check_reconstructions(
    pipeline: &quarry::Pipeline,
    event_id: u64,
    results: &[quarry::Reconstruction],
) {
    use quarry::fit::FitStatus;
    use quarry::Status;
    assert_eq!(
        results.len(),
        pipeline.hypotheses().len(),
        "one result per hypothesis"
    );
    for (r, h) in results.iter().zip(pipeline.hypotheses()) {
        assert_eq!(r.hypothesis.name(), h.name(), "hypothesis order");
        assert_eq!(r.event_id, event_id);
        assert!(Status::ALL.contains(&r.status));
        if r.status == Status::BadInput {
            assert!(r.vars.is_none() && r.best().is_none() && r.fit.is_none());
            assert!(!r.reason.is_empty(), "bad_input without a reason");
            continue;
        }
        assert!(r.weight.is_finite(), "weight {}", r.weight);
        let v = r.vars.as_ref().expect("a usable event has variables");
        for x in [v.ht, v.st] {
            assert!(x.is_finite() && x >= 0.0, "HT/ST {x} for event {event_id}");
        }
        for x in [v.lead_jet_pt, v.mll_z, r.st_unclaimed]
            .into_iter()
            .flatten()
        {
            assert!(x.is_finite(), "event variable {x} for event {event_id}");
        }
        let ranked = &r.search.ranked;
        for a in ranked {
            assert!(a.chi2().is_finite() && a.chi2() >= 0.0, "χ² {}", a.chi2());
        }
        assert!(
            ranked.windows(2).all(|w| w[0].chi2() <= w[1].chi2()),
            "ranking order"
        );
        match r.status {
            Status::Ok | Status::FitNotConverged => {
                let best = r.best().expect("ok status without an assignment");
                for (c, _) in r.hypothesis.composites().iter().enumerate() {
                    let m = best.composite_mass(c);
                    assert!(!m.is_nan(), "NaN composite mass in event {event_id}");
                }
                // Text columns never print NaN.
                assert!(!r.masses_text().contains("NaN"));
            }
            Status::BadInput => unreachable!(),
            _ => {
                assert!(r.best().is_none(), "{} with an assignment", r.status);
                assert!(r.fit.is_none());
            }
        }
        if pipeline.fits() && r.best().is_some() {
            assert!(r.fit.is_some(), "fit requested but absent");
        }
        if let Some(Ok(f)) = &r.fit {
            let failed = matches!(
                f.status,
                FitStatus::NumericalFailure | FitStatus::InvalidInput(_)
            );
            if failed {
                assert!(f.chi2 == f64::INFINITY && f.probability == 0.0);
            } else {
                assert!(f.chi2.is_finite() && f.chi2 >= 0.0, "fit χ² {}", f.chi2);
                assert!(
                    (0.0..=1.0).contains(&f.probability),
                    "fit prob {}",
                    f.probability
                );
            }
            for m in f.composite_masses() {
                assert!(m.is_finite(), "fit mass {m}");
            }
            let ok_fit = matches!(f.status, FitStatus::Converged | FitStatus::CovarianceFailed);
            assert_eq!(
                r.status == Status::Ok,
                ok_fit,
                "status vs fit status {:?}",
                f.status
            );
        }
    }
}

/// The pipelines the pipeline targets choose from (built once per process):
/// 0 = `ttbar-ljets` without the fit; 1 = `ttbar-ljets` and `bwbw-ljets`
/// with the fit; 2 = every preset, no selection, without the fit;
/// 3 = `tz-3l`, `bz-2l`, `twtw-ljets-boosted` with the fit, no selection.
pub fn pipelines() -> &'static [quarry::Pipeline] {
    use std::sync::OnceLock;
    static PIPELINES: OnceLock<Vec<quarry::Pipeline>> = OnceLock::new();
    PIPELINES.get_or_init(|| {
        let mut all = quarry::Pipeline::builder().no_selection();
        for name in quarry::assign::presets::names() {
            all = all.preset(name);
        }
        vec![
            quarry::Pipeline::builder()
                .preset("ttbar-ljets")
                .build()
                .unwrap(),
            quarry::Pipeline::builder()
                .preset("ttbar-ljets")
                .preset("bwbw-ljets")
                .fit(true)
                .build()
                .unwrap(),
            all.build().unwrap(),
            quarry::Pipeline::builder()
                .preset("tz-3l")
                .preset("bz-2l")
                .preset("twtw-ljets-boosted")
                .no_selection()
                .fit(true)
                .build()
                .unwrap(),
        ]
    })
}
