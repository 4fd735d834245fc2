//! Atomic output files, shared by every stage that writes (reports, plots,
//! summaries, synth ground truth).
//!
//! Every report, plot and summary is written to a temporary file in the target's
//! directory and renamed over the target only when complete, so a run killed at
//! any moment leaves either the old file or the whole new one — never a partial
//! file. [`AtomicFile::finish`] commits; dropping an unfinished `AtomicFile`
//! removes the temporary file and leaves the target untouched.
//!

//! Temporary files are created by the `tempfile` crate: exclusively
//! (`O_CREAT | O_EXCL`, which never follows a symbolic link planted under the
//! name) and under an unpredictable random name (`.NAME.XXXXXX.tmp`) in the
//! target's folder. The target itself must be absent or a regular file: a
//! symbolic link, folder, FIFO or device node at the target is refused
//! ([`WriteError::NotARegularFile`]) and never replaced. Every live temporary
//! file is registered here, so a SIGINT/SIGTERM handler installed with
//! [`remove_temps_on_signal`] deletes them before the process exits.

use std::fs::{self, File};
use std::io::{self, BufWriter, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};
use std::sync::Mutex;

/// Paths of the temporary files being written right now (for the signal
/// handler's clean-up). Registration and the clean-up both hold the lock, so
/// no temporary file is created after a clean-up has started.
static LIVE_TEMPS: Mutex<Vec<PathBuf>> = Mutex::new(Vec::new());

fn lock_live() -> std::sync::MutexGuard<'static, Vec<PathBuf>> {
    LIVE_TEMPS.lock().unwrap_or_else(|p| p.into_inner())
}

fn unregister(temp: &Path) {
    let mut live = lock_live();
    if let Some(i) = live.iter().position(|p| p == temp) {
        live.swap_remove(i);
    }
}

/// Delete every temporary file this process is writing and keep the lock, so
/// that none is created afterwards. Returns the guard; the caller exits while
/// holding it.
fn remove_all_temps() -> std::sync::MutexGuard<'static, Vec<PathBuf>> {
    let mut live = lock_live();
    for p in live.drain(..) {
        let _ = fs::remove_file(p);
    }
    live
}

/// Install SIGINT/SIGTERM handling for a command that writes files: on the
/// signal, `on_first` is called with the signal number when given and returns
/// `true` to ask for a cooperative stop (the batch finishes its running
/// captures); otherwise — and on any later signal — every live temporary file
/// is deleted and the process exits with status 128 + signal (130 / 143).
/// The handler itself only wakes a thread (signal-hook's iterator), which does
/// the deleting outside signal context. Call once per process.
///
/// # Errors
/// The OS error when the handlers cannot be installed.
pub fn remove_temps_on_signal(on_first: Option<Box<dyn Fn(i32) -> bool + Send>>) -> io::Result<()> {
    use signal_hook::consts::{SIGINT, SIGTERM};
    let mut signals = signal_hook::iterator::Signals::new([SIGINT, SIGTERM])?;
    std::thread::Builder::new()
        .name("iqaudit-signals".to_string())
        .spawn(move || {
            let mut seen = false;
            for sig in signals.forever() {
                if !seen {
                    seen = true;
                    if let Some(f) = &on_first {
                        if f(sig) {
                            continue;
                        }
                    }
                }
                let _guard = remove_all_temps();
                std::process::exit(128 + sig);
            }
        })?;
    Ok(())
}

/// Why an output file could not be written.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum WriteError {
    /// Creating, writing or renaming the file failed.
    #[error("{}: cannot write: {source}", crate::text::escaped_path(path))]
    Io {
        /// The output path.
        path: PathBuf,
        /// The operating-system error.
        source: io::Error,
    },
    /// The output path is one of the inputs.
    #[error(
        "{}: refusing to write over an input file",
        crate::text::escaped_path(path)
    )]
    WouldOverwriteInput {
        /// The output path.
        path: PathBuf,
    },
    /// Something other than a regular file is at the output path.
    #[error(
        "{}: refusing to replace {what} (an output must be absent or a regular file{hint})",
        crate::text::escaped_path(path)
    )]
    NotARegularFile {
        /// The output path.
        path: PathBuf,
        /// What is there ("a symbolic link", "a folder", ...).
        what: &'static str,
        /// A hint (e.g. how to print on stdout instead).
        hint: &'static str,
    },
    /// Two outputs of one run would be the same file, or one would lie inside
    /// the other's folder under a name that run writes.
    #[error("{}: {problem}", crate::text::escaped_path(path))]
    Conflict {
        /// The output path.
        path: PathBuf,
        /// What collides.
        problem: String,
    },
}

/// What kind of non-regular file is at `path`, if any: `Ok(None)` when the
/// path is absent or a regular file (not a link to one).
pub fn non_regular_kind(path: &Path) -> io::Result<Option<&'static str>> {
    match fs::symlink_metadata(path) {
        Err(e) if e.kind() == io::ErrorKind::NotFound => Ok(None),
        Err(e) => Err(e),
        Ok(m) => {
            let t = m.file_type();
            if t.is_file() {
                return Ok(None);
            }
            if t.is_symlink() {
                return Ok(Some("a symbolic link"));
            }
            if t.is_dir() {
                return Ok(Some("a folder"));
            }
            #[cfg(unix)]
            {
                use std::os::unix::fs::FileTypeExt;
                if t.is_fifo() {
                    return Ok(Some("a FIFO"));
                }
                if t.is_char_device() || t.is_block_device() {
                    return Ok(Some("a device node"));
                }
                if t.is_socket() {
                    return Ok(Some("a socket"));
                }
            }
            Ok(Some("a special file"))
        }
    }
}

/// Refuse an output path at which something other than a regular file exists
/// (see the module documentation). `-`, `/dev/stdout` and the like are refused
/// too, with a hint: reports go to stdout with `--json`.
pub fn ensure_replaceable(target: &Path) -> Result<(), WriteError> {
    if target.as_os_str() == "-" {
        return Err(WriteError::NotARegularFile {
            path: target.to_path_buf(),
            what: "'-'",
            hint: "; use --json to print the report on stdout",
        });
    }
    match non_regular_kind(target) {
        Ok(None) => Ok(()),
        Ok(Some(what)) => Err(WriteError::NotARegularFile {
            path: target.to_path_buf(),
            what,
            hint: if target.starts_with("/dev") || target.starts_with("/proc") {
                "; use --json to print the report on stdout"
            } else {
                ""
            },
        }),
        Err(source) => Err(WriteError::Io {
            path: target.to_path_buf(),
            source,
        }),
    }
}

/// A file being written under a temporary name; see the module documentation.
#[derive(Debug)]
pub struct AtomicFile {
    target: PathBuf,
    temp: Option<tempfile::TempPath>,
    writer: Option<BufWriter<File>>,
}

impl AtomicFile {
    /// Start writing `target` (its directory must exist; the target must be
    /// absent or a regular file).
    pub fn create(target: &Path) -> Result<AtomicFile, WriteError> {
        AtomicFile::with_capacity(target, 8 * 1024)
    }

    /// [`create`](Self::create) with a write buffer of `capacity` bytes. The
    /// temporary file is created exclusively under a random name, so an
    /// existing file or link of that name is never written through.
    pub fn with_capacity(target: &Path, capacity: usize) -> Result<AtomicFile, WriteError> {
        ensure_replaceable(target)?;
        let dir = match target.parent() {
            Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
            _ => PathBuf::from("."),
        };
        let name = target
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_else(|| "output".to_string());
        let mut live = lock_live();
        let mut builder = tempfile::Builder::new();
        let prefix = format!(".{name}.");
        builder.prefix(&prefix).suffix(".tmp");
        // Created 0666 less the umask, as any file a program writes: the
        // temporary name is still exclusive and random, but a report or
        // capture in a shared folder must stay readable by colleagues once
        // renamed (tempfile's own default, 0600, would make it private).
        #[cfg(unix)]
        {
            use std::os::unix::fs::PermissionsExt;
            builder.permissions(std::fs::Permissions::from_mode(0o666));
        }
        let named = builder.tempfile_in(&dir).map_err(|source| WriteError::Io {
            path: target.to_path_buf(),
            source,
        })?;
        let (file, temp) = named.into_parts();
        live.push(temp.to_path_buf());
        drop(live);
        Ok(AtomicFile {
            target: target.to_path_buf(),
            temp: Some(temp),
            writer: Some(BufWriter::with_capacity(capacity, file)),
        })
    }

    /// The final path.
    pub fn target(&self) -> &Path {
        &self.target
    }

    /// Flush, sync and rename over the target (re-checked to be absent or a
    /// regular file). On error the temporary file is removed.
    pub fn finish(mut self) -> Result<(), WriteError> {
        let io_err = |source| WriteError::Io {
            path: self.target.clone(),
            source,
        };
        if let Some(w) = self.writer.take() {
            let file = w.into_inner().map_err(|e| io_err(e.into_error()))?;
            file.sync_all().map_err(io_err)?;
        }
        ensure_replaceable(&self.target)?;
        let Some(temp) = self.temp.take() else {
            return Err(io_err(io::Error::other("file already finished")));
        };
        let temp_path = temp.to_path_buf();
        let result = temp.persist(&self.target);
        unregister(&temp_path);
        // On failure the returned TempPath is dropped here, deleting the file.
        result.map_err(|e| io_err(e.error))
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
        self.writer.take();
        if let Some(temp) = self.temp.take() {
            let p = temp.to_path_buf();
            // TempPath's own drop deletes the file.
            drop(temp);
            unregister(&p);
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
    let out = resolve(output);
    if inputs.iter().any(|i| resolve(i) == out) {
        return Err(WriteError::WouldOverwriteInput {
            path: output.to_path_buf(),
        });
    }
    Ok(())
}

/// `p` with its existing part resolved (links followed, `.`/`..` removed).
fn resolve(p: &Path) -> PathBuf {
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
}

/// Whether `name` is one a plots folder is written with (`index.html`, any
/// `.svg`): the names `analyse --plots` and `info --plots` create.
pub fn is_plot_name(name: &std::ffi::OsStr) -> bool {
    let n = name.to_string_lossy().to_ascii_lowercase();
    n == "index.html" || n.ends_with(".svg")
}

/// Refuse a plots folder that would write over an input or another output of
/// the same run: the folder itself may not be an input or `others` (a report
/// path), and no input or other output may lie directly inside it under a name
/// the plots are written with. An existing non-folder at `dir` is refused too.
pub fn ensure_plots_dir_clear(
    dir: &Path,
    inputs: &[&Path],
    others: &[&Path],
) -> Result<(), WriteError> {
    ensure_not_an_input(dir, inputs)?;
    if let Some(what) = non_regular_kind(dir)
        .ok()
        .flatten()
        .filter(|w| *w != "a folder")
    {
        return Err(WriteError::NotARegularFile {
            path: dir.to_path_buf(),
            what,
            hint: " (a plots path must be a folder or absent)",
        });
    }
    if fs::symlink_metadata(dir).is_ok_and(|m| m.file_type().is_file()) {
        return Err(WriteError::Conflict {
            path: dir.to_path_buf(),
            problem: "is a file; --plots needs a folder".to_string(),
        });
    }
    let d = resolve(dir);
    for o in others {
        if resolve(o) == d {
            return Err(WriteError::Conflict {
                path: o.to_path_buf(),
                problem: "is also the --plots folder".to_string(),
            });
        }
    }
    for p in inputs.iter().chain(others) {
        let r = resolve(p);
        if r.parent() == Some(d.as_path()) && r.file_name().is_some_and(is_plot_name) {
            return Err(WriteError::Conflict {
                path: p.to_path_buf(),
                problem: format!(
                    "lies in the --plots folder under a name the plots are written with; \
                     choose another folder than {}",
                    crate::text::escaped_path(dir)
                ),
            });
        }
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

    #[cfg(unix)]
    #[test]
    fn a_link_a_folder_or_a_device_at_the_target_is_refused_and_left_alone() {
        let dir = tempfile::tempdir().unwrap();
        let victim = dir.path().join("victim");
        fs::write(&victim, b"keep").unwrap();
        let link = dir.path().join("r.json");
        std::os::unix::fs::symlink(&victim, &link).unwrap();
        let e = write_atomic(&link, b"new").unwrap_err();
        assert!(e.to_string().contains("a symbolic link"), "{e}");
        assert_eq!(fs::read(&victim).unwrap(), b"keep");
        assert!(fs::symlink_metadata(&link)
            .unwrap()
            .file_type()
            .is_symlink());
        let e = write_atomic(dir.path(), b"x").unwrap_err();
        assert!(e.to_string().contains("a folder"), "{e}");
        let e = write_atomic(Path::new("/dev/null"), b"x").unwrap_err();
        assert!(e.to_string().contains("a device node"), "{e}");
        assert!(write_atomic(Path::new("-"), b"x").is_err());
        // No temporary file survives any of the refusals.
        let names: Vec<_> = fs::read_dir(dir.path()).unwrap().collect();
        assert_eq!(names.len(), 2);
    }

    #[test]
    fn temporary_names_are_random_and_never_reused_through_a_planted_file() {
        let dir = tempfile::tempdir().unwrap();
        let target = dir.path().join("r.json");
        let a = AtomicFile::create(&target).unwrap();
        let b = AtomicFile::create(&target).unwrap();
        let (ta, tb) = (a.temp.as_ref().unwrap(), b.temp.as_ref().unwrap());
        assert_ne!(ta.to_path_buf(), tb.to_path_buf());
        let name = ta.file_name().unwrap().to_string_lossy().into_owned();
        assert!(
            name.starts_with(".r.json.") && name.ends_with(".tmp"),
            "{name}"
        );
        assert!(lock_live().iter().any(|p| p == &ta.to_path_buf()));
        drop(a);
        drop(b);
        assert_eq!(fs::read_dir(dir.path()).unwrap().count(), 0);
    }

    #[cfg(unix)]
    #[test]
    fn a_finished_file_gets_the_mode_of_a_new_file_not_a_private_one() {
        // Common practice (POSIX open(2)): new files are 0666 less the umask.
        use std::os::unix::fs::PermissionsExt;
        let dir = tempfile::tempdir().unwrap();
        let plain = dir.path().join("plain");
        std::fs::write(&plain, b"x").unwrap();
        let target = dir.path().join("report.json");
        write_atomic(&target, b"{}").unwrap();
        let mode = |p: &Path| std::fs::metadata(p).unwrap().permissions().mode() & 0o777;
        assert_eq!(mode(&target), mode(&plain));
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
