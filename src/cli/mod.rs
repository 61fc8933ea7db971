//! The subcommands of the `quarry` binary and how their failures map to exit
//! codes.

pub mod args;
pub mod columns;
pub mod eval;
pub mod generate;
pub mod interrupt;
pub mod merge;
pub mod presets;
pub mod protect;
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
    /// `quarry reco` finished, but not one event could be read: the inputs held
    /// no event, or every event was rejected (`bad_input`). The output is
    /// written (every event accounted for) but is of no use.
    NoEvents(String),
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
    /// Exit code of a run that read no usable event.
    pub const NO_EVENTS: u8 = 6;

    pub fn code(&self) -> u8 {
        match self {
            Failure::Usage(_) => Self::USAGE,
            Failure::Input(_) => Self::INPUT,
            Failure::Output(_) => Self::OUTPUT,
            Failure::Interrupted(_) => Self::INTERRUPTED,
            Failure::Refused(_) => Self::REFUSED,
            Failure::NoEvents(_) => Self::NO_EVENTS,
        }
    }

    /// The message. A refusal keeps its list of problems, one per line;
    /// configuration errors keep their line breaks (a TOML error points at
    /// the line and column with a caret under the text), indented under
    /// the first line; every other message is one line, as it may quote
    /// input text.
    pub fn message(&self) -> String {
        match self {
            Failure::Usage(m) => m.trim_end().replace('\n', "\n  "),
            Failure::Input(m)
            | Failure::Output(m)
            | Failure::Interrupted(m)
            | Failure::NoEvents(m) => m.replace('\n', " "),
            Failure::Refused(m) => m.clone(),
        }
    }
}
