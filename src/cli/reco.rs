//! `quarry reco`: stream events through the pipeline, write one row per
//! event per hypothesis, in input order.

use std::path::PathBuf;

use quarry::assign::{BtagPolicy, SearchBudget, SearchConfig, SearchConfigError};
use quarry::csv::{ErrorPolicy, ReadOptions, UnknownColumns};
use quarry::event::Selection;
use quarry::output::{is_parquet_output, CsvSink, ParquetSink, RowSink};
use quarry::stream::{
    ordered_chunked_map, outcome_of, InputOptions, NumberedEvent, Outcome, RawEvents,
};
use quarry::{Pipeline, PipelineError};

use super::args::{BtagMode, OnBad, RecoArgs, UnknownColumnsArg};
use super::interrupt::Interrupt;
use super::protect::{in_range, refuse_output_among_inputs, MAX_CHUNK, MAX_THREADS};
use super::summary::{progress_bar, Summary};
use super::Failure;

/// A rayon pool with `threads` workers (all cores when `None`).
pub fn thread_pool(threads: Option<usize>) -> Result<rayon::ThreadPool, Failure> {
    if let Some(n) = threads {
        in_range("--threads", n, 1, MAX_THREADS)?;
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
        .btag_threshold(btag)
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
            budget: search_budget(args)?,
            ..SearchConfig::default()
        });
    for h in &args.hypotheses {
        b = b.hypothesis_arg(h);
    }
    b.build().map_err(|e| match e {
        // The library names its own field; the user typed an option.
        PipelineError::Search {
            name,
            source: SearchConfigError::BadLeadingJets { value, needed },
        } => Failure::Usage(format!(
            "--max-jets {value} is out of range for hypothesis '{name}': it must be between \
             {needed} (the jets it always uses) and {}",
            quarry::assign::MAX_JETS
        )),
        e => Failure::Usage(e.to_string()),
    })
}

/// The largest `--max-assignments`: far beyond what a search can score in
/// a day (about 10^8 per second of one core), while a typo such as an
/// extra digit group is still caught.
pub const MAX_ASSIGNMENTS_LIMIT: u64 = 1_000_000_000_000_000;

/// The largest `--max-search-seconds`: one day.
pub const MAX_SEARCH_SECONDS: f64 = 86_400.0;

/// The search budget `--max-assignments` and `--max-search-seconds` set,
/// checked for range.
fn search_budget(args: &RecoArgs) -> Result<SearchBudget, Failure> {
    if !(1..=MAX_ASSIGNMENTS_LIMIT).contains(&args.max_assignments) {
        return Err(Failure::Usage(format!(
            "--max-assignments {} is out of range: it must be between 1 and {MAX_ASSIGNMENTS_LIMIT}",
            args.max_assignments
        )));
    }
    let max_time = match args.max_search_seconds {
        None => None,
        Some(s) if (0.001..=MAX_SEARCH_SECONDS).contains(&s) => {
            Some(std::time::Duration::from_secs_f64(s))
        }
        Some(s) => {
            return Err(Failure::Usage(format!(
                "--max-search-seconds {s} is out of range: it must be between 0.001 and {MAX_SEARCH_SECONDS}"
            )))
        }
    };
    Ok(SearchBudget {
        max_assignments: Some(args.max_assignments),
        max_time,
    })
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

pub fn run(args: &RecoArgs) -> Result<(), Failure> {
    let stdin_uses = args.inputs.iter().filter(|p| p.as_os_str() == "-").count();
    if stdin_uses > 1 {
        return Err(Failure::Usage(
            "standard input ('-') can be read only once".into(),
        ));
    }
    in_range("--chunk-size", args.chunk_size, 1, MAX_CHUNK)?;
    check_output(&args.output)?;
    refuse_output_among_inputs(&args.output, args.inputs.iter().map(PathBuf::as_path))?;
    let pipeline = pipeline(args)?;
    let pool = thread_pool(args.threads)?;
    let policy = match args.on_bad {
        OnBad::Skip => ErrorPolicy::Skip,
        OnBad::Stop => ErrorPolicy::Stop,
    };
    let options = ReadOptions {
        unknown_columns: match args.unknown_columns {
            UnknownColumnsArg::Warn => UnknownColumns::Warn,
            UnknownColumnsArg::Error => UnknownColumns::Error,
        },
        ..ReadOptions::default().with_policy(policy)
    };
    let columns = match &args.columns {
        None => None,
        Some(name_or_path) => Some(
            quarry::parquet::ColumnMap::load(name_or_path)
                .map_err(|e| Failure::Usage(format!("--columns: {e}")))?,
        ),
    };
    let input_options = InputOptions {
        csv: options,
        columns,
    };
    // Reader warnings (an unknown column, a file without events) mean the
    // input may be misread: --quiet does not hide them.
    let records = RawEvents::open_with(&args.inputs, input_options)
        .shard(args.shard.unwrap_or_default())
        .on_warning(|w| eprintln!("quarry: warning: {w}"))
        .map(|r| r.map_err(|e| Failure::Input(e.to_string())));
    let interrupt = Interrupt::install();
    let output_error = |e: &dyn std::fmt::Display| Failure::Output(e.to_string());
    if is_parquet_output(&args.output) {
        let writer = ParquetSink::create(&args.output).map_err(|e| output_error(&e))?;
        let temp = writer.temp_path().to_path_buf();
        interrupt.watch_output(Some(temp), args.output.display().to_string());
        stream_into(args, &pipeline, &pool, policy, records, &interrupt, writer)
    } else {
        let writer = CsvSink::create(&args.output).map_err(|e| output_error(&e))?;
        interrupt.watch_output(
            writer.temp_path().map(PathBuf::from),
            args.output.display().to_string(),
        );
        stream_into(args, &pipeline, &pool, policy, records, &interrupt, writer)
    }
}

/// Streams `records` through the pipeline into `writer` (either output
/// format) and commits it: the part of `quarry reco` after the options.
fn stream_into<S>(
    args: &RecoArgs,
    pipeline: &Pipeline,
    pool: &rayon::ThreadPool,
    policy: ErrorPolicy,
    records: impl Iterator<Item = Result<NumberedEvent, Failure>> + Send,
    interrupt: &Interrupt,
    mut writer: S,
) -> Result<(), Failure>
where
    S: RowSink + Send,
    S::Error: std::fmt::Display,
{
    // The first signal also stops a search in progress: each worker's
    // searchers watch the flag (the status of that event is `cancelled`,
    // never written, because the run then stops).
    let cancel = interrupt.flag();
    let mut read = 0u64;
    let mut summary = Summary::start();
    let started = std::time::SystemTime::now();
    let bar = progress_bar(!args.no_progress && !args.quiet);
    let result = pool.install(|| {
        ordered_chunked_map(
            records,
            args.chunk_size,
            || {
                let mut worker = pipeline.worker();
                worker.set_cancel(Some(std::sync::Arc::clone(&cancel)));
                worker
            },
            |worker, item| outcome_of::<S>(worker, policy, item),
            |outcome| {
                if interrupt.is_set() {
                    return Err(Failure::Interrupted(
                        "interrupted by a signal (SIGINT or SIGTERM)".into(),
                    ));
                }
                read += 1;
                let rows = match outcome {
                    Outcome::Rows(rows) => rows,
                    Outcome::OtherShard => return Ok(()),
                    Outcome::Stop(message) => {
                        summary.stopped = true;
                        return Err(Failure::Input(message));
                    }
                };
                summary.processed += 1;
                if let Some(reason) = rows.bad {
                    *summary.bad_by_reason.entry(reason.as_str()).or_default() += 1;
                }
                writer
                    .write(rows.prepared)
                    .map_err(|e| Failure::Output(e.to_string()))?;
                for status in rows.statuses {
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
            interrupt
                .commit(|| writer.finish())
                .map_err(|e| Failure::Output(e.to_string()))?;
            if to_file {
                let threads = pool.current_num_threads();
                super::reco_manifest::manifest(args, pipeline, &summary, started, threads)?
                    .write_beside(&args.output)
                    .map_err(|e| Failure::Output(e.to_string()))?;
            }
            if !args.quiet {
                eprint!(
                    "{}",
                    summary.render(&names, shard.clone(), pool.current_num_threads())
                );
            }
            no_events_check(&summary, &args.output, args.shard.is_some())
        }
        Err(failure) => {
            // The output is not committed: a file output leaves nothing
            // under its name (stdout already has the rows before the error).
            drop(writer);
            interrupt.finished();
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

/// A run that read no usable event fails with its own exit code
/// ([`Failure::NO_EVENTS`]) although its output is written: the inputs
/// held no event, or every event this run processed was rejected. Under
/// `--shard` only the first counts: a shard cannot tell whether the other
/// shards' events are readable (it does not parse them), and one shard of
/// a job array whose few events are all bad must not fail the array.
fn no_events_check(
    summary: &Summary,
    output: &std::path::Path,
    sharded: bool,
) -> Result<(), Failure> {
    let bad: u64 = summary.bad_by_reason.values().sum();
    let written = if output.as_os_str() == "-" {
        String::new()
    } else {
        format!(
            " ({} written with every event accounted for)",
            output.display()
        )
    };
    if summary.read == 0 {
        Err(Failure::NoEvents("the inputs hold no event".into()))
    } else if !sharded && summary.processed > 0 && bad == summary.processed {
        Err(Failure::NoEvents(format!(
            "no event could be read: all {bad} events are bad_input{written}"
        )))
    } else {
        Ok(())
    }
}
