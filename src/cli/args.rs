//! Command-line arguments (clap derive).

use std::path::PathBuf;

use clap::{Args, Parser, Subcommand, ValueEnum};
use quarry::stream::Shard;

/// The exit-code table, shown in `--help` and docs/cli.md (a macro so that
/// `concat!` can splice it into help texts).
macro_rules! exit_codes_help {
    () => {
        "Exit codes:
  0  success (events rejected under --on-bad skip still count as success:
     they appear in the output with status bad_input)
  1  usage or configuration error (bad option, unknown preset, invalid
     hypothesis file, bad generator settings)
  2  input error: an input cannot be opened or read, has no usable header,
     or (under --on-bad stop) holds a bad event
  3  output error: the output cannot be created or written
  4  interrupted by SIGINT or SIGTERM (reco): the run stops within about
     a second and nothing is left under the output name
  5  merge refused the shards (missing, duplicated or from another run)
  6  no event could be read (reco): the inputs hold no event, or every
     event is bad_input; the output is still written
"
    };
}

#[derive(Debug, Parser)]
#[command(
    name = "quarry",
    version,
    about = "Event reconstruction for heavy-quark searches and top-quark measurements",
    long_about = "quarry reads collision events (jets with b-tag scores, leptons, MET, \
                  large-radius jets), picks which jet came from which parton under one or \
                  more decay hypotheses, optionally refines them with a constrained \
                  kinematic fit, and writes one result row per event and hypothesis.",
    after_help = concat!(
        "Example:\n",
        "  quarry generate --process ttbar --events 1000 --seed 7 -o ttbar.csv.gz\n",
        "  quarry reco ttbar.csv.gz --hypothesis ttbar-ljets -o ttbar-reco.csv\n\n",
        exit_codes_help!()
    )
)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Command,
}

#[derive(Debug, Subcommand)]
pub enum Command {
    /// Reconstruct events: assignment search, optional fit, event variables.
    #[command(after_help = RECO_HELP)]
    Reco(RecoArgs),
    /// List or print the built-in hypotheses (presets).
    #[command(subcommand, after_help = PRESETS_HELP)]
    Presets(PresetsCommand),
    /// Write toy events (fictional 14 TeV run) with truth labels as CSV.
    #[command(after_help = GENERATE_HELP)]
    Generate(GenerateArgs),
    /// Evaluate reconstruction output on simulation: right-assignment
    /// fractions, mass resolution, plots.
    #[command(after_help = EVAL_HELP)]
    Eval(EvalArgs),
    /// Merge the shard outputs of a job array into the unsharded run's
    /// output, after checking their manifests.
    #[command(after_help = super::merge::MERGE_HELP)]
    Merge(super::merge::MergeArgs),
    /// Column maps for Parquet inputs with one row per event: list or print
    /// the shipped ones, or draft one from a file's columns.
    #[command(subcommand, after_help = COLUMNS_HELP)]
    Columns(ColumnsCommand),
}

const COLUMNS_HELP: &str = concat!(
    "Examples:\n",
    "  quarry columns list\n",
    "  quarry columns show nanoaod > my-map.toml\n",
    "  # draft a map from a file's own column names, then check and edit it\n",
    "  quarry columns template events.parquet > my-map.toml\n",
    "  quarry reco events.parquet --columns my-map.toml -o out.csv\n\n",
    "Map keys and layouts: docs/parquet.md.\n",
);

#[derive(Debug, Subcommand)]
pub enum ColumnsCommand {
    /// Print every shipped map's name and a one-line description.
    List,
    /// Print a shipped map as TOML, to copy and edit.
    Show {
        /// Shipped map name.
        name: String,
    },
    /// Print a draft map for a Parquet file, guessed from its schema: every
    /// guess is marked for checking, every key the drafter could not fill
    /// is left commented out.
    Template {
        /// The Parquet file.
        #[arg(value_name = "FILE")]
        file: PathBuf,
    },
}

const PRESETS_HELP: &str = concat!(
    "Examples:\n",
    "  quarry presets list\n",
    "  # start your own hypothesis from a preset\n",
    "  quarry presets show ttbar-ljets > my-hypothesis.toml\n",
    "  quarry reco events.csv -H my-hypothesis.toml\n",
);

const EVAL_HELP: &str = concat!(
    "Examples:\n",
    "  quarry eval -s T1000@1000=t1000-reco.csv -s ttbar=tt-reco.csv -o summary.csv --plots plots/\n",
    "  # Markdown table of right-assignment fraction and mass resolution\n",
    "  quarry eval -s T600@600=a.csv -s T1000@1000=b.csv -o /dev/null --table -\n\n",
    "Inputs are `quarry reco` outputs (CSV, plain or gzip; columns found by name). A sample\n",
    "with @MASS is signal generated at that mass [GeV]; without, background.\n",
    "Metric definitions: docs/eval.md.\n\n",
    exit_codes_help!(),
);

#[derive(Debug, Args)]
pub struct EvalArgs {
    /// A sample: NAME[@MASS]=FILE (reconstruction output; MASS in GeV marks
    /// signal). Repeat for several.
    #[arg(
        short,
        long = "sample",
        value_name = "NAME[@MASS]=FILE",
        required = true
    )]
    pub samples: Vec<quarry::eval::SampleSpec>,

    /// Mass column: `auto` chooses per hypothesis the candidate (fit_mass,
    /// mass_avg, mass_a, mass_b) that closes best on the signal samples
    /// (smallest √(peak shift² + (σ/m)²)); the table shows every
    /// candidate's closure. Or a column name such as mass_a.
    #[arg(long, default_value = "auto", value_name = "auto|COLUMN")]
    pub mass_column: quarry::eval::MassColumn,

    /// Logarithmic y axis on the mass plots.
    #[arg(long)]
    pub log_y: bool,

    /// Summary CSV (`-` = stdout).
    #[arg(short, long, default_value = "-", value_name = "FILE")]
    pub output: PathBuf,

    /// Also write the Markdown table of signal samples (`-` = stdout).
    #[arg(long, value_name = "FILE")]
    pub table: Option<PathBuf>,

    /// Write SVG plots to this directory: mass_<hyp>.svg, chi2_<hyp>.svg,
    /// fit_prob_<hyp>.svg (with --fit output), right_fraction.svg.
    #[arg(long, value_name = "DIR")]
    pub plots: Option<PathBuf>,

    /// Do not list what was written on stderr.
    #[arg(short, long)]
    pub quiet: bool,
}

const RECO_HELP: &str = concat!(
    "Examples:\n",
    "  # top-pair reconstruction of a gzipped file, 2 threads, to out.csv\n",
    "  quarry reco events.csv.gz --hypothesis ttbar-ljets --threads 2 -o out.csv\n",
    "  # two hypotheses plus the kinematic fit; read stdin, write stdout\n",
    "  zcat events.csv.gz | quarry reco - -H ttbar-ljets -H my-hypothesis.toml --fit\n",
    "  # shard 3 of 10 of a large input (batch job array)\n",
    "  quarry reco big.csv.gz -H ttbar-ljets --shard 3/10 -o part-3.csv\n",
    "  # b-tag scores as χ² terms instead of a cut; keep and fit 5 assignments\n",
    "  quarry reco signal.csv -H bwbw-ljets --btag-mode weighted --best 5 --fit\n",
    "  # NanoAOD-style Parquet (one row per event), results as Parquet\n",
    "  quarry reco events.parquet --columns nanoaod -H ttbar-ljets -o out.parquet\n\n",
    "Output: one row per input event per hypothesis, in input order, whatever\n",
    "--threads is. Columns are listed in docs/cli.md.\n\n",
    exit_codes_help!(),
);

const GENERATE_HELP: &str = concat!(
    "Examples:\n",
    "  quarry generate --process ttbar --events 10000 --seed 1 -o ttbar.csv.gz\n",
    "  quarry generate --process vlq-t --mass 1400 --decay bW -n 500 -o signal.csv\n\n",
    "The same seed always gives the same file.\n\n",
    exit_codes_help!(),
);

/// What to do with an event the reader rejects.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum OnBad {
    /// Keep going: the event gets rows with status bad_input and the reason.
    Skip,
    /// End the run at the first bad event (exit code 2).
    Stop,
}

/// What to do with input columns quarry does not know.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum UnknownColumnsArg {
    /// Read the file, ignore the column, and warn (even under --quiet).
    Warn,
    /// Stop before reading any event (exit code 2).
    Error,
}

/// How the search uses b-tag scores (see `quarry::assign::BtagPolicy`).
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum BtagMode {
    /// Roles marked b take only jets above --btag-threshold, roles marked
    /// light only jets at or below it; no χ² term.
    Threshold,
    /// Every jet may fill every jet role; the χ² gains −2 ln of the
    /// tag/mistag probability (from --btag-efficiency and --mistag-rate).
    Weighted,
    /// Ignore b-tag scores in the search.
    Ignore,
}

#[derive(Debug, Args)]
pub struct RecoArgs {
    /// Input event files: quarry CSV (optionally .gz; `-` reads stdin) or
    /// Parquet, told apart by content (a Parquet file starts with `PAR1`),
    /// not by suffix.
    #[arg(required = true, value_name = "INPUT")]
    pub inputs: Vec<PathBuf>,

    /// Column map for Parquet inputs with one row per event: a shipped map
    /// (`nanoaod`; see `quarry columns list`) or a TOML file. Parquet in
    /// quarry's long form needs none.
    #[arg(long, value_name = "NAME|FILE")]
    pub columns: Option<String>,

    /// Hypothesis: a preset name (see `quarry presets list`) or a TOML file.
    /// Repeat for several; rows of one event follow the order given.
    #[arg(
        short = 'H',
        long = "hypothesis",
        value_name = "NAME|FILE",
        default_value = "ttbar-ljets"
    )]
    pub hypotheses: Vec<String>,

    /// Also run the constrained kinematic fit on each of the --best
    /// assignments the search keeps, and report the one whose fit has the
    /// smallest χ² (the fit columns and the masses are that fit's).
    #[arg(long)]
    pub fit: bool,

    /// Output file (`-` = stdout; `.gz` suffix gzips; `.parquet` or `.pq`
    /// suffix writes typed Parquet with the same columns). Written
    /// atomically.
    #[arg(short, long, default_value = "-", value_name = "FILE")]
    pub output: PathBuf,

    /// Worker threads, 1-1024 (default: all cores).
    #[arg(short = 'j', long, value_name = "N")]
    pub threads: Option<usize>,

    /// Process only shard K of N (0-based): events whose position in the
    /// input stream modulo N equals K.
    #[arg(long, value_name = "K/N")]
    pub shard: Option<Shard>,

    /// Policy for events the reader rejects.
    #[arg(long, value_enum, default_value = "skip")]
    pub on_bad: OnBad,

    /// Events per parallel chunk, 1-65536 (bounds memory: three chunks are
    /// held at once).
    #[arg(long, default_value_t = quarry::stream::DEFAULT_CHUNK, value_name = "N")]
    pub chunk_size: usize,

    /// Treat inputs as already selected: apply no object thresholds.
    #[arg(long)]
    pub no_selection: bool,

    /// b-tag working point: a jet with score above it counts as b-tagged
    /// (the selection's b-jet count, and the search's b and light roles in
    /// `--btag-mode threshold`).
    #[arg(long, value_name = "SCORE")]
    pub btag_threshold: Option<f64>,

    /// How the search uses b-tag scores.
    #[arg(long, value_enum, default_value = "threshold")]
    pub btag_mode: BtagMode,

    /// b-jet tagging efficiency of the working point behind the scores
    /// (`--btag-mode weighted`; typical value, from memory).
    #[arg(long, default_value_t = 0.70, value_name = "EFF")]
    pub btag_efficiency: f64,

    /// Light-jet mistag rate of that working point (`--btag-mode weighted`;
    /// typical value, from memory).
    #[arg(long, default_value_t = 0.01, value_name = "RATE")]
    pub mistag_rate: f64,

    /// Number of best assignments the search keeps per event and
    /// hypothesis (1-64); with --fit each is fitted and the best fit is
    /// reported.
    #[arg(long, default_value_t = 3, value_name = "K")]
    pub best: usize,

    /// Jets entering the search: the leading N by pT, replacing every
    /// hypothesis's own `leading_jets`.
    #[arg(long, value_name = "N")]
    pub max_jets: Option<usize>,

    /// Search budget: most assignments scored for one event under one
    /// hypothesis, 1 to 10^15 (default 100 000 000, far above any normal
    /// event). An event that reaches it gets status budget_exceeded, with
    /// the budget in the reason, and the run goes on.
    #[arg(long, default_value_t = quarry::assign::DEFAULT_MAX_ASSIGNMENTS, value_name = "N")]
    pub max_assignments: u64,

    /// Search budget in wall time for one event under one hypothesis, in
    /// seconds, 0.001 to 86400 (default: none). Unlike --max-assignments
    /// it depends on the machine and its load, so outputs may differ
    /// between runs.
    #[arg(long, value_name = "SECONDS")]
    pub max_search_seconds: Option<f64>,

    /// Input columns quarry does not know (e.g. a misspelt `btagScore`):
    /// `warn` (default) reads the file and warns, also under --quiet;
    /// `error` stops with exit code 2 naming the file and the column.
    #[arg(long, value_enum, default_value = "warn")]
    pub unknown_columns: UnknownColumnsArg,

    /// Hide the progress bar (it is hidden anyway when stderr is not a terminal).
    #[arg(long)]
    pub no_progress: bool,

    /// Do not print the end-of-run summary on stderr (reader warnings,
    /// such as unknown columns, are still printed).
    #[arg(short, long)]
    pub quiet: bool,
}

#[derive(Debug, Subcommand)]
pub enum PresetsCommand {
    /// Print every preset's name and a one-line description.
    #[command(after_help = "Example:\n  quarry presets list\n")]
    List,
    /// Print one preset as TOML, to copy and edit into your own hypothesis.
    #[command(
        after_help = "Example:\n  quarry presets show ttbar-ljets > my-hypothesis.toml\n  quarry reco events.csv -H my-hypothesis.toml\n"
    )]
    Show {
        /// Preset name.
        name: String,
    },
}

/// Processes the toy generator can produce.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum ProcessArg {
    /// Top-quark pair (the main background).
    Ttbar,
    /// Up-type vector-like quark pair T T̄ (T → bW, tZ, tH).
    VlqT,
    /// Down-type vector-like quark pair B B̄ (B → tW, bZ, bH).
    VlqB,
    /// Charge-5/3 quark pair (X → tW).
    X53,
    /// Excited-top pair (t* → tg).
    Tstar,
}

#[derive(Debug, Args)]
pub struct GenerateArgs {
    /// Process to generate.
    #[arg(short, long, value_enum, default_value = "ttbar")]
    pub process: ProcessArg,

    /// Mass of the new heavy quark [GeV] (heavy-quark processes only;
    /// default 1200).
    #[arg(short, long, value_name = "GEV")]
    pub mass: Option<f64>,

    /// Force one decay mode of the heavy quark (bW, tZ, tH, tW, bZ, bH, tg)
    /// instead of the partner's default branching fractions.
    #[arg(short, long, value_name = "MODE")]
    pub decay: Option<String>,

    /// Full generator configuration as TOML (replaces --process, --mass,
    /// --decay).
    #[arg(long, value_name = "FILE", conflicts_with_all = ["process", "mass", "decay"])]
    pub config: Option<PathBuf>,

    /// Number of events.
    #[arg(short = 'n', long, default_value_t = 1000)]
    pub events: u64,

    /// Random seed: the same seed gives the same file.
    #[arg(short, long, default_value_t = 1)]
    pub seed: u64,

    /// Id of the first event (ids are consecutive).
    #[arg(long, default_value_t = 0, value_name = "ID")]
    pub first_id: u64,

    /// Worker threads, 1-1024 (default: all cores); the output does not
    /// depend on it.
    #[arg(short = 'j', long, value_name = "N")]
    pub threads: Option<usize>,

    /// Output file (`-` = stdout; `.gz` suffix gzips). Written atomically.
    #[arg(short, long, default_value = "-", value_name = "FILE")]
    pub output: PathBuf,

    /// Do not print the one-line summary on stderr.
    #[arg(short, long)]
    pub quiet: bool,
}
