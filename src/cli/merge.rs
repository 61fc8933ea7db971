//! `quarry merge`: joins the shard outputs of a job array into the output
//! an unsharded run writes, after checking their manifests
//! (`quarry::merge`).

use std::io::{self, Write};
use std::path::PathBuf;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::{Instant, SystemTime};

use clap::Args;
use quarry::manifest::{self, FileStamp};
use quarry::merge::{MergeError, ShardSet};

use super::Failure;

pub const MERGE_HELP: &str = concat!(
    "Examples:\n",
    "  # after a 4-task array of `quarry reco … --shard K/4 -o parts/reco-K.csv`\n",
    "  quarry merge parts/reco-*.csv -o reco.csv\n",
    "  # only verify that the shards are complete and consistent\n",
    "  quarry merge --check parts/reco-*.csv\n\n",
    "Each shard output needs the manifest `quarry reco` wrote beside it\n",
    "(OUTPUT.manifest.json). The merge refuses, writing nothing, unless shards\n",
    "0..N-1 are each given exactly once, with the same quarry version, inputs,\n",
    "hypotheses and options, and every output is the file its manifest\n",
    "describes. Rows are copied in `ordinal` order with one event's rows kept\n",
    "together in -H order, so the result is byte for byte the unsharded run's\n",
    "output; memory holds one row per shard. A manifest for the merged output\n",
    "is written beside it.\n\n",
    "Exit codes:\n",
    "  0  merged (or, with --check, verified)\n",
    "  1  usage error (bad option, refused output path)\n",
    "  2  a shard output cannot be read\n",
    "  3  the merged output cannot be written\n",
    "  4  interrupted by SIGINT or SIGTERM: nothing is left under the output name\n",
    "  5  refused: shards missing, given twice, inconsistent, or not matching\n",
    "     their manifests; every problem is listed, nothing is written\n",
);

#[derive(Debug, Args)]
pub struct MergeArgs {
    /// Shard outputs of `quarry reco --shard K/N` (CSV, plain or gzip), in
    /// any order; each with its manifest beside it.
    #[arg(required = true, value_name = "SHARD")]
    pub shards: Vec<PathBuf>,

    /// Merged output (`.gz` suffix gzips). Written atomically, with its
    /// manifest beside it.
    #[arg(short, long, value_name = "FILE", required_unless_present = "check")]
    pub output: Option<PathBuf>,

    /// Only verify: check the manifests and read every shard through,
    /// writing nothing.
    #[arg(long, conflicts_with = "output")]
    pub check: bool,

    /// Print nothing on success.
    #[arg(short, long)]
    pub quiet: bool,
}

/// Passes bytes through until SIGINT or SIGTERM arrives, then fails every
/// write: the merge stops at its next row and the uncommitted output (a
/// hidden temporary file) is removed, as for `quarry reco` — which matters
/// when a batch system ends a merge job at its time limit.
struct StopOnSignal<W> {
    inner: W,
    stop: Arc<AtomicBool>,
}

impl<W: Write> Write for StopOnSignal<W> {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        if self.stop.load(Ordering::Relaxed) {
            // Not ErrorKind::Interrupted, which write_all would retry.
            return Err(io::Error::other(
                "interrupted by a signal (SIGINT or SIGTERM)",
            ));
        }
        self.inner.write(buf)
    }

    fn flush(&mut self) -> io::Result<()> {
        self.inner.flush()
    }
}

fn failure(e: MergeError) -> Failure {
    match e {
        MergeError::Refused(_) => Failure::Refused(e.to_string()),
        MergeError::Read { .. } => Failure::Input(e.to_string()),
        MergeError::Write(_) => Failure::Output(e.to_string()),
    }
}

pub fn run(args: &MergeArgs) -> Result<(), Failure> {
    let started = SystemTime::now();
    let clock = Instant::now();
    if let Some(out) = &args.output {
        if out.as_os_str() == "-" {
            return Err(Failure::Usage(
                "quarry merge writes a file (its manifest goes beside it); stdout is not supported"
                    .into(),
            ));
        }
        if args.shards.iter().any(|s| s == out) {
            return Err(Failure::Usage(format!(
                "{}: the merged output cannot be one of the shards",
                out.display()
            )));
        }
        super::reco::check_output(out)?;
        // Also through links and other spellings of a shard's path.
        super::protect::refuse_output_among_inputs(out, args.shards.iter().map(|p| p.as_path()))?;
    }
    // Merging is a byte-level concatenation of CSV shards; Parquet shards
    // are refused by content (any suffix) rather than misread as text.
    for shard in &args.shards {
        if quarry::parquet::is_parquet(shard).unwrap_or(false) {
            return Err(Failure::Refused(format!(
                "{}: a Parquet shard; quarry merge joins CSV shards only (write the shards \
                 with -o part-K.csv and merge those, or read the Parquet shards together \
                 with pyarrow/pandas: each shard's rows carry their `ordinal`)",
                shard.display()
            )));
        }
    }
    let set = ShardSet::check(&args.shards).map_err(failure)?;
    let n = set.shards().len();
    let Some(out) = &args.output else {
        let counts = set.merge_into(&mut std::io::sink()).map_err(failure)?;
        if !args.quiet {
            eprintln!(
                "quarry merge: {n} shard(s) complete and consistent: {} events, {} rows (checked in {:.3} s)",
                counts.events,
                counts.rows,
                clock.elapsed().as_secs_f64()
            );
        }
        return Ok(());
    };
    let interrupt = super::interrupt::Interrupt::install();
    let stop = interrupt.flag();
    let mut sink = StopOnSignal {
        inner: quarry::csv::AtomicOutput::create(out)
            .map_err(|e| Failure::Output(e.to_string()))?,
        stop: Arc::clone(&stop),
    };
    interrupt.watch_output(
        sink.inner.temp_path().map(|p| p.to_path_buf()),
        out.display().to_string(),
    );
    let counts = match set.merge_into(&mut sink) {
        Ok(counts) => counts,
        Err(_) if stop.load(Ordering::Relaxed) => {
            drop(sink);
            interrupt.finished();
            return Err(Failure::Interrupted(format!(
                "interrupted by a signal (SIGINT or SIGTERM); {} not written",
                out.display()
            )));
        }
        Err(e) => {
            drop(sink);
            interrupt.finished();
            return Err(failure(e));
        }
    };
    let sink = sink.inner;
    manifest::remove_stale(out)
        .map_err(|e| Failure::Output(format!("{}: {e}", manifest::manifest_path(out).display())))?;
    interrupt
        .commit(|| sink.commit())
        .map_err(|e| Failure::Output(e.to_string()))?;
    let stamp =
        FileStamp::of(out).map_err(|e| Failure::Output(format!("{}: {e}", out.display())))?;
    let m = set.merged_manifest(stamp, started, SystemTime::now());
    let written = m
        .write_beside(out)
        .map_err(|e| Failure::Output(e.to_string()))?;
    if !args.quiet {
        eprintln!(
            "quarry merge: {n} shard(s), {} events, {} rows -> {} (manifest {}), {:.3} s",
            counts.events,
            counts.rows,
            out.display(),
            written.display(),
            clock.elapsed().as_secs_f64()
        );
    }
    Ok(())
}
