//! The manifest of a `quarry reco` run (`quarry::manifest`): which options
//! of the command line it records, and how.

use std::collections::BTreeMap;
use std::time::SystemTime;

use clap::ValueEnum;
use quarry::manifest::{self, FileStamp, HypothesisStamp, Manifest, ShardStamp};
use quarry::Pipeline;
use serde_json::{json, Value};

use super::args::RecoArgs;
use super::summary::Summary;
use super::Failure;

fn name_of<T: ValueEnum>(v: &T) -> Value {
    v.to_possible_value()
        .map_or(Value::Null, |p| Value::from(p.get_name()))
}

/// The options that can change the output, with defaults resolved, and the
/// run settings that cannot (threads, chunk size). `RecoArgs` is taken
/// apart field by field so that a new option fails to compile here until
/// it is sorted into one of the two.
fn options(args: &RecoArgs, threads: usize) -> (BTreeMap<String, Value>, BTreeMap<String, Value>) {
    let RecoArgs {
        inputs: _,     // the manifest's `inputs`
        hypotheses: _, // the manifest's `hypotheses`
        output: _,     // the manifest's `output`
        shard: _,      // the manifest's `shard`
        columns,
        fit,
        threads: _,
        on_bad,
        chunk_size,
        no_selection,
        btag_threshold,
        btag_mode,
        btag_efficiency,
        mistag_rate,
        best,
        max_jets,
        max_assignments,
        max_search_seconds,
        unknown_columns,
        no_progress: _,
        quiet: _,
    } = args;
    let btag_threshold =
        btag_threshold.unwrap_or(quarry::event::Selection::default().btag_threshold);
    let options = BTreeMap::from([
        ("fit".to_string(), json!(fit)),
        (
            "selection".to_string(),
            json!(if *no_selection { "none" } else { "default" }),
        ),
        ("btag_threshold".to_string(), json!(btag_threshold)),
        ("btag_mode".to_string(), name_of(btag_mode)),
        ("btag_efficiency".to_string(), json!(btag_efficiency)),
        ("mistag_rate".to_string(), json!(mistag_rate)),
        ("best".to_string(), json!(best)),
        ("max_jets".to_string(), json!(max_jets)),
        ("on_bad".to_string(), name_of(on_bad)),
        ("max_assignments".to_string(), json!(max_assignments)),
        ("max_search_seconds".to_string(), json!(max_search_seconds)),
        ("unknown_columns".to_string(), name_of(unknown_columns)),
        ("columns".to_string(), columns_stamp(columns.as_deref())),
    ]);
    let run = BTreeMap::from([
        ("threads".to_string(), json!(threads)),
        ("chunk_size".to_string(), json!(chunk_size)),
    ]);
    (options, run)
}

/// The column map as given (`--columns`: a shipped name or a file) and
/// the digest of its TOML text, so that an edited map file under the same
/// name shows; `null` without one.
fn columns_stamp(columns: Option<&str>) -> Value {
    let Some(given) = columns else {
        return Value::Null;
    };
    let text = quarry::parquet::SHIPPED_MAPS
        .iter()
        .find(|(name, _, _)| *name == given)
        .map(|(_, _, toml)| toml.as_bytes().to_vec())
        .or_else(|| std::fs::read(given).ok())
        .unwrap_or_default();
    json!({ "source": given, "toml_digest": manifest::digest(&text) })
}

/// The manifest of a completed run whose output `args.output` was just
/// committed.
pub fn manifest(
    args: &RecoArgs,
    pipeline: &Pipeline,
    summary: &Summary,
    started: SystemTime,
    threads: usize,
) -> Result<Manifest, Failure> {
    let stamp = |p: &std::path::Path| {
        FileStamp::of(p).map_err(|e| Failure::Output(format!("{}: {e}", p.display())))
    };
    let inputs = args
        .inputs
        .iter()
        .map(|p| stamp(p))
        .collect::<Result<Vec<_>, _>>()?;
    let hypotheses = pipeline
        .hypotheses()
        .iter()
        .zip(&args.hypotheses)
        .map(|(h, source)| HypothesisStamp {
            name: h.name().to_string(),
            source: source.clone(),
            toml_digest: manifest::digest(h.to_toml().as_bytes()),
        })
        .collect();
    let (options, run) = options(args, threads);
    let shard = args.shard.unwrap_or_default();
    let ended = SystemTime::now();
    Ok(Manifest {
        format: manifest::FORMAT.to_string(),
        quarry_version: env!("CARGO_PKG_VERSION").to_string(),
        command: "reco".to_string(),
        output: stamp(&args.output)?,
        inputs,
        hypotheses,
        options,
        run,
        shard: ShardStamp {
            index: shard.index(),
            count: shard.count(),
        },
        events_read: summary.read,
        events_processed: summary.processed,
        rows_written: summary.rows,
        rows_by_status: summary
            .by_status
            .iter()
            .map(|(k, v)| (k.to_string(), *v))
            .collect(),
        started: manifest::utc_text(started),
        ended: manifest::utc_text(ended),
        wall_time_s: summary.elapsed().as_secs_f64(),
        host: manifest::host_name(),
        merged_from: Vec::new(),
    })
}
