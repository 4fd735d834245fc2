//! Atomic output files, shared by every stage that writes (reports, plots,
//! summaries, synth ground truth).
//!
//! Every report, plot and summary is written to a temporary file in the target's
//! directory and renamed over the target only when complete, so a run killed at
//! any moment leaves either the old file or the whole new one — never a partial
//! file. [`AtomicFile::finish`] commits; dropping an unfinished `AtomicFile`
//! removes the temporary file and leaves the target untouched.

use std::fs::{self, File};
use std::io::{self, BufWriter, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

/// Makes the temporary names of one process distinct.
static TEMP_COUNTER: AtomicU64 = AtomicU64::new(0);

/// Why an output file could not be written.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum WriteError {
    /// Creating, writing or renaming the file failed.
    #[error("{path}: cannot write: {source}")]
    Io {
        /// The output path.
        path: PathBuf,
        /// The operating-system error.
        source: io::Error,
    },
    /// The output path is one of the inputs.
    #[error("{path}: refusing to write over an input file")]
    WouldOverwriteInput {
        /// The output path.
        path: PathBuf,
    },
}

/// A file being written under a temporary name; see the module documentation.
#[derive(Debug)]
pub struct AtomicFile {
    target: PathBuf,
    temp: PathBuf,
    writer: Option<BufWriter<File>>,
}

impl AtomicFile {
    /// Start writing `target` (its directory must exist).
    pub fn create(target: &Path) -> Result<AtomicFile, WriteError> {
        AtomicFile::with_capacity(target, 8 * 1024)
    }

    /// [`create`](Self::create) with a write buffer of `capacity` bytes. The
    /// temporary file is created exclusively (`create_new`), so an existing file
    /// of that name is never written through.
    pub fn with_capacity(target: &Path, capacity: usize) -> Result<AtomicFile, WriteError> {
        let dir = match target.parent() {
            Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
            _ => PathBuf::from("."),
        };
        let name = target
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_else(|| "output".to_string());
        let temp = dir.join(format!(
            ".{name}.{}-{}.tmp",
            std::process::id(),
            TEMP_COUNTER.fetch_add(1, Ordering::Relaxed)
        ));
        let file = File::options()
            .write(true)
            .create_new(true)
            .open(&temp)
            .map_err(|source| WriteError::Io {
                path: target.to_path_buf(),
                source,
            })?;
        Ok(AtomicFile {
            target: target.to_path_buf(),
            temp,
            writer: Some(BufWriter::with_capacity(capacity, file)),
        })
    }

    /// The final path.
    pub fn target(&self) -> &Path {
        &self.target
    }

    /// Flush, sync and rename over the target.
    pub fn finish(mut self) -> Result<(), WriteError> {
        let io_err = |source| WriteError::Io {
            path: self.target.clone(),
            source,
        };
        if let Some(w) = self.writer.take() {
            let file = w.into_inner().map_err(|e| io_err(e.into_error()))?;
            file.sync_all().map_err(io_err)?;
        }
        fs::rename(&self.temp, &self.target).map_err(io_err)
    }
}

impl Write for AtomicFile {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        match self.writer.as_mut() {
            Some(w) => w.write(buf),
            None => Err(io::Error::other("file already finished")),
        }
    }
    fn flush(&mut self) -> io::Result<()> {
        match self.writer.as_mut() {
            Some(w) => w.flush(),
            None => Ok(()),
        }
    }
}

/// Seeking is for writers that patch a header after the data (WAV).
impl Seek for AtomicFile {
    fn seek(&mut self, pos: SeekFrom) -> io::Result<u64> {
        match self.writer.as_mut() {
            Some(w) => w.seek(pos),
            None => Err(io::Error::other("file already finished")),
        }
    }
}

impl Drop for AtomicFile {
    fn drop(&mut self) {
        if self.writer.take().is_some() {
            let _ = fs::remove_file(&self.temp);
        }
    }
}

/// Write `bytes` to `target` atomically.
pub fn write_atomic(target: &Path, bytes: &[u8]) -> Result<(), WriteError> {
    let mut f = AtomicFile::create(target)?;
    f.write_all(bytes).map_err(|source| WriteError::Io {
        path: target.to_path_buf(),
        source,
    })?;
    f.finish()
}

/// Refuse when `output` names the same file as any of `inputs` (compared after
/// resolving the existing parts of both paths).
pub fn ensure_not_an_input(output: &Path, inputs: &[&Path]) -> Result<(), WriteError> {
    let resolve = |p: &Path| -> PathBuf {
        if let Ok(c) = fs::canonicalize(p) {
            return c;
        }
        match (p.parent(), p.file_name()) {
            (Some(d), Some(n)) => {
                let d = if d.as_os_str().is_empty() {
                    Path::new(".")
                } else {
                    d
                };
                fs::canonicalize(d)
                    .map(|d| d.join(n))
                    .unwrap_or_else(|_| p.to_path_buf())
            }
            _ => p.to_path_buf(),
        }
    };
    let out = resolve(output);
    if inputs.iter().any(|i| resolve(i) == out) {
        return Err(WriteError::WouldOverwriteInput {
            path: output.to_path_buf(),
        });
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn an_unfinished_file_leaves_the_old_target_and_no_temporary() {
        let dir = tempfile::tempdir().unwrap();
        let target = dir.path().join("r.json");
        fs::write(&target, b"old").unwrap();
        {
            let mut f = AtomicFile::create(&target).unwrap();
            f.write_all(b"new and partial").unwrap();
            // dropped without finish()
        }
        assert_eq!(fs::read(&target).unwrap(), b"old");
        assert_eq!(fs::read_dir(dir.path()).unwrap().count(), 1);
    }

    #[test]
    fn a_finished_file_replaces_the_target() {
        let dir = tempfile::tempdir().unwrap();
        let target = dir.path().join("r.json");
        write_atomic(&target, b"{}").unwrap();
        assert_eq!(fs::read(&target).unwrap(), b"{}");
        assert_eq!(fs::read_dir(dir.path()).unwrap().count(), 1);
    }

    #[test]
    fn writing_over_an_input_is_refused() {
        let dir = tempfile::tempdir().unwrap();
        let input = dir.path().join("cap.cf32");
        fs::write(&input, b"12345678").unwrap();
        let same = dir.path().join(".").join("cap.cf32");
        assert!(ensure_not_an_input(&same, &[&input]).is_err());
        assert!(ensure_not_an_input(&dir.path().join("r.json"), &[&input]).is_ok());
    }
}
