//! `quarry reco`: stream events through the pipeline, write one row per
//! event per hypothesis, in input order.

use std::path::PathBuf;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;

use quarry::assign::{BtagPolicy, SearchConfig};
use quarry::csv::{BadReason, ErrorPolicy, EventReader, RawEvent, ReadOptions, Record, RowWriter};
use quarry::event::Selection;
use quarry::output::Row;
use quarry::stream::{ordered_chunked_map, Shard};
use quarry::{Pipeline, Reconstruction};

use super::args::{BtagMode, OnBad, RecoArgs};
use super::summary::{progress_bar, Summary};
use super::Failure;

/// A rayon pool with `threads` workers (all cores when `None`).
pub fn thread_pool(threads: Option<usize>) -> Result<rayon::ThreadPool, Failure> {
    if threads == Some(0) {
        return Err(Failure::Usage("--threads must be at least 1".into()));
    }
    let mut b = rayon::ThreadPoolBuilder::new();
    if let Some(n) = threads {
        b = b.num_threads(n);
    }
    b.build()
        .map_err(|e| Failure::Usage(format!("cannot start {threads:?} threads: {e}")))
}

/// Builds the pipeline the options describe.
pub fn pipeline(args: &RecoArgs) -> Result<Pipeline, Failure> {
    let btag = args
        .btag_threshold
        .unwrap_or(Selection::default().btag_threshold);
    if !(0.0..=1.0).contains(&btag) {
        return Err(Failure::Usage(format!(
            "--btag-threshold {btag} must be within [0, 1]"
        )));
    }
    if !(1..=quarry::assign::MAX_K_BEST).contains(&args.best) {
        return Err(Failure::Usage(format!(
            "--best {} must be between 1 and {}",
            args.best,
            quarry::assign::MAX_K_BEST
        )));
    }
    if args.btag_mode == BtagMode::Weighted
        && !(args.mistag_rate > 0.0
            && args.mistag_rate < args.btag_efficiency
            && args.btag_efficiency < 1.0)
    {
        return Err(Failure::Usage(format!(
            "--btag-efficiency {} and --mistag-rate {} must satisfy 0 < mistag rate < efficiency < 1",
            args.btag_efficiency, args.mistag_rate
        )));
    }
    let selection = if args.no_selection {
        Selection {
            btag_threshold: btag,
            ..Selection::keep_all()
        }
    } else {
        Selection {
            btag_threshold: btag,
            ..Selection::default()
        }
    };
    let mut b = Pipeline::builder()
        .fit(args.fit)
        .selection(selection)
        .search_config(SearchConfig {
            btag: match args.btag_mode {
                BtagMode::Threshold => BtagPolicy::Threshold(btag),
                BtagMode::Weighted => BtagPolicy::Weighted {
                    b_efficiency: args.btag_efficiency,
                    light_mistag: args.mistag_rate,
                },
                BtagMode::Ignore => BtagPolicy::Ignore,
            },
            k_best: args.best,
            max_jets_override: args.max_jets,
            ..SearchConfig::default()
        });
    for h in &args.hypotheses {
        b = b.hypothesis_arg(h);
    }
    b.build().map_err(|e| Failure::Usage(e.to_string()))
}

/// Every input, one after the other, as `(ordinal, raw event, kept)`:
/// events grouped but not parsed, so that parsing runs on the workers.
/// `kept` says whether the event belongs to this shard; events of other
/// shards pass too (unparsed under the skip policy) because under the stop
/// policy the first bad event in any shard stops the run, so that every
/// shard of a job array stops alike.
struct Records<'a> {
    inputs: std::slice::Iter<'a, PathBuf>,
    current: Option<EventReader>,
    options: ReadOptions,
    shard: Shard,
    next_ordinal: u64,
    warned: usize,
    quiet: bool,
}

impl Records<'_> {
    fn flush_warnings(&mut self) {
        if let Some(r) = &self.current {
            for w in &r.warnings()[self.warned..] {
                if !self.quiet {
                    eprintln!("quarry: warning: {w}");
                }
            }
            self.warned = r.warnings().len();
        }
    }
}

impl Iterator for Records<'_> {
    type Item = Result<(u64, RawEvent, bool), Failure>;

    fn next(&mut self) -> Option<Self::Item> {
        loop {
            if self.current.is_none() {
                let path = self.inputs.next()?;
                match EventReader::open(path, self.options) {
                    Ok(r) => {
                        self.current = Some(r);
                        self.warned = 0;
                        self.flush_warnings();
                    }
                    Err(e) => return Some(Err(Failure::Input(e.to_string()))),
                }
            }
            let reader = self.current.as_mut()?;
            match reader.next_raw() {
                None => {
                    self.flush_warnings();
                    self.current = None;
                }
                Some(Err(e)) => return Some(Err(Failure::Input(e.to_string()))),
                Some(Ok(raw)) => {
                    let ordinal = self.next_ordinal;
                    self.next_ordinal += 1;
                    return Some(Ok((ordinal, raw, self.shard.keeps(ordinal))));
                }
            }
        }
    }
}

/// What a worker makes of one raw event.
enum Outcome {
    /// The event's rows already formatted as CSV text (formatting runs on
    /// the workers; the writing thread only copies bytes), each row's
    /// status, and the reader's reason if the event was rejected.
    Rows(Vec<u8>, Vec<&'static str>, Option<BadReason>),
    /// Another shard's event that needs no output.
    OtherShard,
    /// The run ends with this failure: a bad event under the stop policy.
    Stop(Failure),
}

/// Parses a raw event (on a worker thread), reconstructs it and formats
/// its rows.
fn outcome_of(
    worker: &mut quarry::Worker<'_>,
    pipeline: &Pipeline,
    policy: ErrorPolicy,
    (ordinal, raw, kept): (u64, RawEvent, bool),
) -> Outcome {
    if !kept && policy == ErrorPolicy::Skip {
        return Outcome::OtherShard;
    }
    let record = raw.parse();
    if let (Record::Bad(bad), ErrorPolicy::Stop) = (&record, policy) {
        let id = match bad.id {
            Some(id) => format!("event {id}"),
            None => format!("event '{}'", bad.raw_id),
        };
        return Outcome::Stop(Failure::Input(format!(
            "{} ({id}; stopped at the first bad event, use --on-bad skip to go on)",
            bad.error
        )));
    }
    if !kept {
        return Outcome::OtherShard;
    }
    let (rows, bad) = rows_of(worker, pipeline, ordinal, record);
    let mut bytes = Vec::with_capacity(256 * rows.len());
    for row in &rows {
        row.write_csv(&mut bytes);
    }
    Outcome::Rows(bytes, rows.iter().map(|r| r.status).collect(), bad)
}

/// The rows of one record, and the reader's reason if it was rejected.
fn rows_of(
    worker: &mut quarry::Worker<'_>,
    pipeline: &Pipeline,
    ordinal: u64,
    record: Record,
) -> (Vec<Row>, Option<BadReason>) {
    match record {
        Record::Good(event) => {
            let recs: Vec<Reconstruction> = worker.reconstruct(event);
            let rows = recs
                .iter()
                .map(|r| Row::from_reconstruction(ordinal, r))
                .collect();
            (rows, None)
        }
        Record::Bad(bad) => {
            let reason = bad.error.to_string();
            let rows = pipeline
                .hypotheses()
                .iter()
                .map(|h| Row::bad_input(ordinal, bad.id, h.name(), &reason))
                .collect();
            (rows, Some(bad.reason()))
        }
    }
}

/// Refuses an output that exists but is not a regular file (a device such
/// as /dev/null, a pipe): outputs are written to a temporary file and
/// renamed over the target, which would replace the device itself.
pub fn check_output(path: &std::path::Path) -> Result<(), Failure> {
    if path.as_os_str() == "-" {
        return Ok(());
    }
    match std::fs::metadata(path) {
        Ok(m) if !m.is_file() => Err(Failure::Usage(format!(
            "{}: output exists and is not a regular file; write to stdout with `-o -` and redirect instead",
            path.display()
        ))),
        _ => Ok(()),
    }
}

/// Turns SIGINT and SIGTERM (what batch systems send before killing a job)
/// into a flag the writing loop checks after every event, so an interrupted
/// run drops its writer and removes its temporary file instead of leaving it
/// behind. A second signal ends the process at once, for a run blocked on
/// its input. Without a handler (it could not be installed) the default
/// action still ends the run, leaving only the hidden temporary file.
fn stop_on_signal() -> Arc<AtomicBool> {
    let flag = Arc::new(AtomicBool::new(false));
    let seen = Arc::clone(&flag);
    let _ = ctrlc::set_handler(move || {
        if seen.swap(true, Ordering::Relaxed) {
            std::process::exit(i32::from(Failure::INTERRUPTED));
        }
    });
    flag
}

pub fn run(args: &RecoArgs) -> Result<(), Failure> {
    let stdin_uses = args.inputs.iter().filter(|p| p.as_os_str() == "-").count();
    if stdin_uses > 1 {
        return Err(Failure::Usage(
            "standard input ('-') can be read only once".into(),
        ));
    }
    if args.chunk_size == 0 {
        return Err(Failure::Usage("--chunk-size must be at least 1".into()));
    }
    check_output(&args.output)?;
    let pipeline = pipeline(args)?;
    let pool = thread_pool(args.threads)?;
    let policy = match args.on_bad {
        OnBad::Skip => ErrorPolicy::Skip,
        OnBad::Stop => ErrorPolicy::Stop,
    };
    let mut records = Records {
        inputs: args.inputs.iter(),
        current: None,
        options: ReadOptions::default().with_policy(policy),
        shard: args.shard.unwrap_or_default(),
        next_ordinal: 0,
        warned: 0,
        quiet: args.quiet,
    };
    let interrupted = stop_on_signal();
    let mut read = 0u64;
    let mut writer: RowWriter<Row> =
        RowWriter::create(&args.output).map_err(|e| Failure::Output(e.to_string()))?;
    let mut summary = Summary::start();
    let started = std::time::SystemTime::now();
    let bar = progress_bar(!args.no_progress && !args.quiet);
    let result = pool.install(|| {
        ordered_chunked_map(
            &mut records,
            args.chunk_size,
            || pipeline.worker(),
            |worker, item| outcome_of(worker, &pipeline, policy, item),
            |outcome| {
                if interrupted.load(Ordering::Relaxed) {
                    return Err(Failure::Interrupted(
                        "interrupted by a signal (SIGINT or SIGTERM)".into(),
                    ));
                }
                read += 1;
                let (bytes, statuses, bad) = match outcome {
                    Outcome::Rows(bytes, statuses, bad) => (bytes, statuses, bad),
                    Outcome::OtherShard => return Ok(()),
                    Outcome::Stop(failure) => {
                        summary.stopped = true;
                        return Err(failure);
                    }
                };
                summary.processed += 1;
                if let Some(reason) = bad {
                    *summary.bad_by_reason.entry(reason.as_str()).or_default() += 1;
                }
                writer
                    .write_encoded(&bytes)
                    .map_err(|e| Failure::Output(e.to_string()))?;
                for status in statuses {
                    *summary.by_status.entry(status).or_default() += 1;
                    summary.rows += 1;
                }
                bar.inc(1);
                Ok(())
            },
        )
    });
    bar.finish_and_clear();
    summary.read = read;
    let names: Vec<String> = pipeline
        .hypotheses()
        .iter()
        .map(|h| h.name().to_string())
        .collect();
    let shard = args.shard.map(|s| s.to_string());
    match result {
        Ok(()) => {
            // The manifest beside a file output appears after the output and
            // describes it; an older one goes first (quarry::manifest).
            let to_file = args.output.as_os_str() != "-";
            if to_file {
                quarry::manifest::remove_stale(&args.output)
                    .map_err(|e| Failure::Output(format!("{}: {e}", args.output.display())))?;
            }
            writer
                .finish()
                .map_err(|e| Failure::Output(e.to_string()))?;
            if to_file {
                let threads = pool.current_num_threads();
                super::reco_manifest::manifest(args, &pipeline, &summary, started, threads)?
                    .write_beside(&args.output)
                    .map_err(|e| Failure::Output(e.to_string()))?;
            }
            if !args.quiet {
                eprint!(
                    "{}",
                    summary.render(&names, shard.clone(), pool.current_num_threads())
                );
            }
            Ok(())
        }
        Err(failure) => {
            // The output is not committed: a file output leaves nothing
            // under its name (stdout already has the rows before the error).
            drop(writer);
            if !args.quiet {
                eprint!(
                    "{}",
                    summary.render(&names, shard.clone(), pool.current_num_threads())
                );
                if args.output.as_os_str() != "-" {
                    eprintln!("  {} not written", args.output.display());
                }
            }
            Err(failure)
        }
    }
}
