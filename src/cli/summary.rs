//! End-of-run summary and the progress bar, both on stderr.

use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::io::IsTerminal;
use std::time::{Duration, Instant};

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressState, ProgressStyle};

/// Counts what happened to every event of a run.
pub struct Summary {
    start: Instant,
    /// Events read from the inputs (good and rejected), before sharding.
    pub read: u64,
    /// Events this shard processed (good and rejected).
    pub processed: u64,
    /// Rows written.
    pub rows: u64,
    /// Rows per status name (`ok`, `no_valid_assignment`, ...).
    pub by_status: BTreeMap<&'static str, u64>,
    /// Rejected events per reader reason (`not-finite`, ...).
    pub bad_by_reason: BTreeMap<&'static str, u64>,
    /// The run stopped at the last event read (a bad event under
    /// `--on-bad stop`): that event has no rows.
    pub stopped: bool,
}

impl Summary {
    pub fn start() -> Summary {
        Summary {
            start: Instant::now(),
            read: 0,
            processed: 0,
            rows: 0,
            by_status: BTreeMap::new(),
            bad_by_reason: BTreeMap::new(),
            stopped: false,
        }
    }

    pub fn elapsed(&self) -> Duration {
        self.start.elapsed()
    }

    /// The text printed at the end of a run.
    pub fn render(&self, hypotheses: &[String], shard: Option<String>, threads: usize) -> String {
        let secs = self.elapsed().as_secs_f64();
        let rate = if secs > 0.0 {
            self.processed as f64 / secs
        } else {
            0.0
        };
        let mut s = String::new();
        let _ = write!(s, "quarry reco: {} events read", self.read);
        if let Some(shard) = shard {
            let _ = write!(s, ", {} in shard {shard}", self.processed);
        }
        if self.stopped {
            let _ = write!(s, ", the last one stopped the run (no rows for it)");
        }
        let _ = writeln!(
            s,
            "; {} rows ({} hypothes{}: {})",
            self.rows,
            hypotheses.len(),
            if hypotheses.len() == 1 { "is" } else { "es" },
            hypotheses.join(", ")
        );
        let statuses: Vec<String> = self
            .by_status
            .iter()
            .map(|(k, v)| format!("{k} {v}"))
            .collect();
        let _ = writeln!(s, "  rows by status: {}", statuses.join(", "));
        if !self.bad_by_reason.is_empty() {
            let reasons: Vec<String> = self
                .bad_by_reason
                .iter()
                .map(|(k, v)| format!("{k} {v}"))
                .collect();
            let _ = writeln!(
                s,
                "  rejected input events by reason: {}",
                reasons.join(", ")
            );
        }
        let _ = writeln!(
            s,
            "  wall time {secs:.3} s, {rate:.0} events/s ({threads} thread{})",
            if threads == 1 { "" } else { "s" }
        );
        s
    }
}

/// A spinner-style progress line (the total is unknown while streaming),
/// drawn only when stderr is a terminal.
pub fn progress_bar(enabled: bool) -> ProgressBar {
    if !enabled || !std::io::stderr().is_terminal() {
        return ProgressBar::hidden();
    }
    let bar = ProgressBar::with_draw_target(None, ProgressDrawTarget::stderr_with_hz(4));
    bar.set_style(
        ProgressStyle::with_template("{spinner} {human_pos} events  {rate}  {elapsed}")
            .unwrap_or_else(|_| ProgressStyle::default_spinner())
            .with_key(
                "rate",
                |state: &ProgressState, w: &mut dyn std::fmt::Write| {
                    let _ = write!(w, "{:.0} events/s", state.per_sec());
                },
            ),
    );
    bar
}
