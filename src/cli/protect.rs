//! Checks that protect a user's files and machine before a run starts: an
//! output that would replace one of the inputs, and option values that
//! would exhaust memory or threads.

use std::path::Path;

use super::Failure;

/// The most worker threads `-j` accepts. Far above any batch node's core
/// count; a typo such as `-j 20000` would otherwise start that many threads.
pub const MAX_THREADS: usize = 1024;

/// The largest `--chunk-size`. Three chunks are in memory at once; at about
/// 1 kB per event this bounds the run near 200 MB. Chunks above 4096 were
/// already slower than the default 256 (measured, see README "Performance").
pub const MAX_CHUNK: usize = 65_536;

/// `Err` naming `option` unless `lo ≤ value ≤ hi`.
pub fn in_range(option: &str, value: usize, lo: usize, hi: usize) -> Result<(), Failure> {
    if (lo..=hi).contains(&value) {
        Ok(())
    } else {
        Err(Failure::Usage(format!(
            "{option} {value} is out of range: it must be between {lo} and {hi}"
        )))
    }
}

/// Refuses an output that is one of the inputs: the run would replace its
/// own input with results. Files are compared by device and inode, so a
/// symbolic link, a hard link or another spelling of the same path is
/// caught too. `-` (stdout/stdin) and outputs that do not exist yet pass.
pub fn refuse_output_among_inputs<'a>(
    output: &Path,
    inputs: impl IntoIterator<Item = &'a Path>,
) -> Result<(), Failure> {
    if output.as_os_str() == "-" {
        return Ok(());
    }
    let Ok(out) = std::fs::metadata(output) else {
        return Ok(());
    };
    for input in inputs {
        if input.as_os_str() == "-" {
            continue;
        }
        if let Ok(inp) = std::fs::metadata(input) {
            if same_file(&out, &inp) {
                return Err(Failure::Usage(format!(
                    "output {} is the input {} (same file): refusing to overwrite an input",
                    output.display(),
                    input.display()
                )));
            }
        }
    }
    Ok(())
}

#[cfg(unix)]
fn same_file(a: &std::fs::Metadata, b: &std::fs::Metadata) -> bool {
    use std::os::unix::fs::MetadataExt;
    a.dev() == b.dev() && a.ino() == b.ino()
}

#[cfg(not(unix))]
fn same_file(_: &std::fs::Metadata, _: &std::fs::Metadata) -> bool {
    // std has no portable file identity: the check is Unix-only.
    false
}
