//! Atomic output files shared by both writers: data go to a temporary file
//! beside the target and are renamed into place only when the writer
//! finishes, so a crash or an error never leaves a half-written output under
//! the final name.

use std::fs::{self, File};
use std::io::{self, BufWriter, Stdout, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

use flate2::write::GzEncoder;
use flate2::Compression;

use crate::CsvError;

/// The display name used for `-` as an output.
pub(crate) const STDOUT_NAME: &str = "<stdout>";

/// Where bytes go: stdout or a temporary file, optionally gzipped.
enum Sink {
    Stdout(BufWriter<Stdout>),
    File(BufWriter<File>),
    GzFile(GzEncoder<BufWriter<File>>),
}

/// Removes the temporary file on drop unless the output was committed.
struct TempGuard {
    tmp: PathBuf,
    committed: bool,
    /// The permissions of the file the output replaces, given to the new
    /// file before the rename, so an existing output keeps its mode.
    keep_mode: Option<fs::Permissions>,
}

impl Drop for TempGuard {
    fn drop(&mut self) {
        if !self.committed {
            let _ = fs::remove_file(&self.tmp);
        }
    }
}

/// An output byte stream that becomes visible under its final name only on
/// [`AtomicOutput::commit`]: `-` is stdout, a `.gz` suffix gzips, anything
/// else goes to a hidden temporary file beside the target that is removed
/// if the value is dropped uncommitted. Both writers use it; `quarry merge`
/// writes its raw bytes through it.
///
/// ```
/// use std::io::Write;
/// let dir = tempfile::tempdir().unwrap();
/// let path = dir.path().join("merged.csv");
/// let mut out = quarry_csv::AtomicOutput::create(&path).unwrap();
/// out.write_all(b"a,b\n1,2\n").unwrap();
/// assert!(!path.exists()); // not visible before commit
/// out.commit().unwrap();
/// assert_eq!(std::fs::read_to_string(&path).unwrap(), "a,b\n1,2\n");
/// ```
pub struct AtomicOutput {
    // Field order matters: the sink (and its file handle) drops before the
    // guard removes the temporary file.
    sink: Sink,
    target: Option<(PathBuf, TempGuard)>,
    name: String,
}

static COUNTER: AtomicU64 = AtomicU64::new(0);

impl AtomicOutput {
    /// Opens `path` for writing: `-` is stdout; a `.gz` suffix gzips.
    pub fn create(path: &Path) -> Result<AtomicOutput, CsvError> {
        let gz = path.extension().is_some_and(|e| e == "gz");
        if path.as_os_str() == "-" {
            let out = BufWriter::new(io::stdout());
            return Ok(AtomicOutput {
                sink: Sink::Stdout(out),
                target: None,
                name: STDOUT_NAME.to_string(),
            });
        }
        let name = path.display().to_string();
        refuse_non_regular(path, &name)?;
        // A symbolic link is written through: the file it points to is
        // replaced and the link stays a link.
        let path = &follow_links(path).map_err(|source| CsvError::Write {
            file: name.clone(),
            source,
        })?;
        let file_name = path.file_name().ok_or_else(|| CsvError::Write {
            file: name.clone(),
            source: io::Error::new(io::ErrorKind::InvalidInput, "not a file name"),
        })?;
        let dir = match path.parent() {
            Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
            _ => PathBuf::from("."),
        };
        if !dir.is_dir() {
            return Err(CsvError::Write {
                file: name.clone(),
                source: io::Error::new(
                    io::ErrorKind::NotFound,
                    format!(
                        "output directory '{}' does not exist (quarry does not create directories)",
                        dir.display()
                    ),
                ),
            });
        }
        let keep_mode = fs::metadata(path).ok().map(|m| m.permissions());
        let n = COUNTER.fetch_add(1, Ordering::Relaxed);
        let tmp = dir.join(format!(
            ".{}.tmp-{}-{n}",
            file_name.to_string_lossy(),
            std::process::id()
        ));
        let file = File::create(&tmp).map_err(|source| CsvError::Write {
            file: name.clone(),
            source,
        })?;
        let guard = TempGuard {
            tmp,
            committed: false,
            keep_mode,
        };
        let buf = BufWriter::new(file);
        let sink = if gz {
            Sink::GzFile(GzEncoder::new(buf, Compression::default()))
        } else {
            Sink::File(buf)
        };
        Ok(AtomicOutput {
            sink,
            target: Some((path.to_path_buf(), guard)),
            name,
        })
    }

    /// The name used in error messages.
    pub fn name(&self) -> &str {
        &self.name
    }

    /// The hidden temporary file being written, if the output is a file.
    /// A program that must end at once (no destructor runs on
    /// `std::process::exit`) can remove it.
    pub fn temp_path(&self) -> Option<&Path> {
        self.target.as_ref().map(|(_, guard)| guard.tmp.as_path())
    }

    /// Flushes everything, closes the file and renames it into place.
    pub fn commit(self) -> Result<(), CsvError> {
        let AtomicOutput { sink, target, name } = self;
        let werr = |source| CsvError::Write {
            file: name.clone(),
            source,
        };
        match sink {
            Sink::Stdout(mut w) => w.flush().map_err(werr)?,
            Sink::File(w) => finish_file(w).map_err(werr)?,
            Sink::GzFile(gz) => finish_file(gz.finish().map_err(werr)?).map_err(werr)?,
        }
        if let Some((path, mut guard)) = target {
            // Checked again here: the target may have appeared since create.
            refuse_non_regular(&path, &name)?;
            if let Some(mode) = guard.keep_mode.take() {
                fs::set_permissions(&guard.tmp, mode).map_err(werr)?;
            }
            fs::rename(&guard.tmp, &path).map_err(werr)?;
            guard.committed = true;
        }
        Ok(())
    }
}

/// Refuses a target that exists but is not a regular file (a device node
/// such as `/dev/null`, a FIFO, a socket, a directory): the rename in
/// [`AtomicOutput::commit`] would replace the node itself (as root even
/// `/dev/null`). Symbolic links are followed, so a link to a device is
/// refused too. A missing target is fine.
fn refuse_non_regular(path: &Path, name: &str) -> Result<(), CsvError> {
    match fs::metadata(path) {
        Ok(m) if !m.is_file() => Err(CsvError::Write {
            file: name.to_string(),
            source: io::Error::new(
                io::ErrorKind::InvalidInput,
                "output exists and is not a regular file (a device, pipe or directory); \
                 write to stdout with '-' and redirect instead",
            ),
        }),
        _ => Ok(()),
    }
}

/// The file a chain of symbolic links ends at (`path` itself if it is not
/// a link, or if the chain ends at a name that does not exist yet).
fn follow_links(path: &Path) -> io::Result<PathBuf> {
    let mut path = path.to_path_buf();
    // The kernel's own limit on links in one lookup (Linux: 40).
    for _ in 0..40 {
        match fs::symlink_metadata(&path) {
            Ok(m) if m.file_type().is_symlink() => {
                let target = fs::read_link(&path)?;
                path = match path.parent() {
                    Some(dir) => dir.join(target),
                    None => target,
                };
            }
            _ => return Ok(path),
        }
    }
    Err(io::Error::other("too many levels of symbolic links"))
}

fn finish_file(w: BufWriter<File>) -> io::Result<()> {
    let file = w.into_inner().map_err(|e| e.into_error())?;
    file.sync_all()
}

impl Write for AtomicOutput {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        match &mut self.sink {
            Sink::Stdout(w) => w.write(buf),
            Sink::File(w) => w.write(buf),
            Sink::GzFile(w) => w.write(buf),
        }
    }

    fn flush(&mut self) -> io::Result<()> {
        match &mut self.sink {
            Sink::Stdout(w) => w.flush(),
            Sink::File(w) => w.flush(),
            Sink::GzFile(w) => w.flush(),
        }
    }
}
