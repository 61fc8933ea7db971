//! SIGINT and SIGTERM: a run stops within about a second, exits with code 4
//! and leaves no temporary file, whatever it is doing.
//!
//! The first signal sets a flag. The writing loop checks it after every
//! event, and every worker's searches watch it ([`Interrupt::flag`] given to
//! `Worker::set_cancel`, checked every 65 536 assignments), so a run stops
//! on its own within milliseconds even inside one long event, drops its
//! writer (which removes the temporary file) and returns
//! [`Failure::Interrupted`]. One wait cannot see a flag: a reader blocked
//! on a stalled stdin. For it, the signal thread waits [`GRACE`] and then
//! ends the process itself, after removing the temporary file. A lock keeps it from doing so
//! while the main thread commits the output, so a run that already renamed
//! its output into place is never reported as interrupted.

use std::path::PathBuf;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, Mutex};
use std::time::Duration;

use super::Failure;

/// How long the main thread has to stop on its own after the first signal.
pub const GRACE: Duration = Duration::from_millis(800);

/// The signal state shared by the main thread and the signal thread.
#[derive(Default)]
struct Shared {
    /// The temporary file to remove if the process must end at once.
    temp: Option<PathBuf>,
    /// The output name, for the message.
    output: Option<String>,
    /// The output was committed or the run ended: nothing to clean up.
    done: bool,
}

/// Cancellation for one run: the flag the loops check, and what the
/// signal thread needs to end the process itself.
#[derive(Clone)]
pub struct Interrupt {
    flag: Arc<AtomicBool>,
    shared: Arc<Mutex<Shared>>,
}

impl Interrupt {
    /// Installs the handler for SIGINT and SIGTERM (what batch systems send
    /// before killing a job). Without a handler (it could not be installed)
    /// the default action still ends the run, leaving only the hidden
    /// temporary file.
    pub fn install() -> Interrupt {
        let me = Interrupt {
            flag: Arc::new(AtomicBool::new(false)),
            shared: Arc::new(Mutex::new(Shared::default())),
        };
        let handler = me.clone();
        let _ = ctrlc::set_handler(move || handler.on_signal());
        me
    }

    /// The flag itself, for loops that take an `Arc<AtomicBool>`.
    pub fn flag(&self) -> Arc<AtomicBool> {
        Arc::clone(&self.flag)
    }

    /// Whether a signal arrived.
    pub fn is_set(&self) -> bool {
        self.flag.load(Ordering::Relaxed)
    }

    /// Records the temporary file to remove and the output's name.
    pub fn watch_output(&self, temp: Option<PathBuf>, output: String) {
        let mut s = self.lock();
        s.temp = temp;
        s.output = Some(output);
    }

    /// Runs `commit` (the rename into place) so that the signal thread
    /// cannot end the process half-way, and marks the run done.
    pub fn commit<T>(&self, commit: impl FnOnce() -> T) -> T {
        let mut s = self.lock();
        let result = commit();
        s.done = true;
        result
    }

    /// Marks the run as ended (the writer was dropped, so the temporary
    /// file is gone): the signal thread leaves the exit to the main thread.
    pub fn finished(&self) {
        self.lock().done = true;
    }

    fn lock(&self) -> std::sync::MutexGuard<'_, Shared> {
        self.shared.lock().unwrap_or_else(|e| e.into_inner())
    }

    /// On the signal thread: set the flag, give the main thread [`GRACE`]
    /// to stop on its own, then end the process. Signals are handled one
    /// at a time, so a second signal during the grace period changes
    /// nothing: the process ends at the end of it either way.
    fn on_signal(&self) {
        self.flag.store(true, Ordering::Relaxed);
        std::thread::sleep(GRACE);
        let s = self.lock();
        if s.done {
            return;
        }
        if let Some(temp) = &s.temp {
            let _ = std::fs::remove_file(temp);
        }
        let not_written = match &s.output {
            Some(name) if name != "-" => format!("; {name} not written"),
            _ => String::new(),
        };
        eprintln!(
            "quarry: error: interrupted by a signal (SIGINT or SIGTERM) while waiting for \
             input{not_written}"
        );
        std::process::exit(i32::from(Failure::INTERRUPTED));
    }
}
