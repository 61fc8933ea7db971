//! The subcommands of the `quarry` binary and how their failures map to exit
//! codes.

pub mod args;
pub mod eval;
pub mod generate;
pub mod merge;
pub mod presets;
pub mod reco;
pub mod reco_manifest;
pub mod summary;

/// A failed run: what to print (one line) and which exit code to return.
#[derive(Debug)]
pub enum Failure {
    /// Bad option, unknown preset, invalid hypothesis or generator settings.
    Usage(String),
    /// Unreadable input, or a bad event under `--on-bad stop`.
    Input(String),
    /// The output cannot be created or written.
    Output(String),
    /// SIGINT or SIGTERM arrived; the output was not committed.
    Interrupted(String),
    /// `quarry merge` refused the shards (missing, duplicated,
    /// inconsistent); the message lists every problem, one per line.
    Refused(String),
}

impl Failure {
    /// Exit code of a usage or configuration error.
    pub const USAGE: u8 = 1;
    /// Exit code of an input error.
    pub const INPUT: u8 = 2;
    /// Exit code of an output error.
    pub const OUTPUT: u8 = 3;
    /// Exit code of a run stopped by SIGINT or SIGTERM.
    pub const INTERRUPTED: u8 = 4;
    /// Exit code of a merge refused because of its shards.
    pub const REFUSED: u8 = 5;

    pub fn code(&self) -> u8 {
        match self {
            Failure::Usage(_) => Self::USAGE,
            Failure::Input(_) => Self::INPUT,
            Failure::Output(_) => Self::OUTPUT,
            Failure::Interrupted(_) => Self::INTERRUPTED,
            Failure::Refused(_) => Self::REFUSED,
        }
    }

    /// The message, on one line (a refusal keeps its list of problems,
    /// one per line).
    pub fn message(&self) -> String {
        match self {
            Failure::Usage(m)
            | Failure::Input(m)
            | Failure::Output(m)
            | Failure::Interrupted(m) => m.replace('\n', " "),
            Failure::Refused(m) => m.clone(),
        }
    }
}
