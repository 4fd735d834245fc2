//! The byte source behind a [`Capture`](super::Capture): a read-only memory map of
//! the file, an in-memory buffer (tests, `Capture::from_bytes`), or — when mapping
//! fails or is refused — positioned buffered reads from the open file.
//!
//! Takes in: an open [`File`] (or a `Vec<u8>`). Gives out: byte ranges
//! `[offset, offset + len)` of the whole file, handed to a closure, so that
//! decoding code only ever sees `&[u8]`. Offsets and lengths are in bytes from the
//! start of the file.
//!
//! This file holds the crate's only `unsafe` code: the call to `Mmap::map` and
//! the `MADV_DONTNEED` advice of [`Source::release`]. Everything else takes
//! `&[u8]` or `&[Cf32]`.
//!
//! Resident memory: every page of a map that has been touched counts in the
//! process's resident set (`RssFile`) until it is unmapped, so a search over a
//! 1 GiB capture would hold 1 GiB resident although each byte is needed for a
//! moment. Callers therefore [`release`](Source::release) each range once they
//! have decoded it: the pages leave the process (they stay in the kernel's page
//! cache, so reading them again costs a minor fault, not a disk read).
//!
//! Truncation: touching a mapped page that lies past the file's current end
//! raises SIGBUS, which no `Result` can catch, and a check of the length
//! before each chunk (kept below as [`Source::ensure_present`]) still leaves
//! the scan of that chunk exposed. So [`Capture::open`](super::Capture::open)
//! — every command of the binary — reads files with positioned reads
//! ([`Access::ReadOnly`]): a file that shrinks while it is read gives an
//! `UnexpectedEof` error ("the file shrank to N bytes while open"), never a
//! signal. Measured as fast as the map on this crate's search
//! (docs/performance.md). The map is used only when a library caller asks
//! for it ([`Capture::open_mapped`](super::Capture::open_mapped)) and accepts
//! that hazard (docs/robustness.md).

use std::cell::RefCell;
use std::fs::File;
use std::io;

use memmap2::Mmap;

/// How the bytes of a capture are reached.
#[derive(Debug)]
pub(crate) enum Source {
    /// A read-only map of the whole file, and the file (kept open so its
    /// current length can be checked before each access).
    Mapped {
        /// The map.
        map: Mmap,
        /// The mapped file.
        file: File,
    },
    /// Bytes owned in memory.
    Memory(Vec<u8>),
    /// Positioned reads from the file (fallback when mapping is not possible).
    File {
        /// The open file, read with positioned reads (no shared position).
        file: File,
        /// File length in bytes at open time.
        len: u64,
    },
}

/// Which access path to use when opening a file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Access {
    /// Try to memory-map; fall back to reads if mapping fails.
    MapOrRead,
    /// Never map; always use positioned reads.
    ReadOnly,
}

/// Granularity of [`Source::release`], bytes: a multiple of the kernel's
/// fault-around window (64 KiB by default on Linux), with room for a larger one.
const RELEASE_ALIGN: usize = 128 << 10;

thread_local! {
    /// Per-thread scratch for the read fallback; grows to the largest request
    /// (one chunk) and is reused, so there is no per-sample allocation.
    static READ_SCRATCH: RefCell<Vec<u8>> = const { RefCell::new(Vec::new()) };
}

impl Source {
    /// Open `file` (of length `len` bytes) for reading through the chosen path.
    pub(crate) fn from_file(file: File, len: u64, access: Access) -> Source {
        if access == Access::MapOrRead && usize::try_from(len).is_ok() {
            // SAFETY: the map is read-only and this crate never writes through it
            // or to the file. The remaining hazard is another process truncating
            // the file while it is mapped: reads from the vanished part raise
            // SIGBUS, which no `Result` can catch. Every access goes through
            // `ensure_present`, which re-reads the file length with fstat just
            // before the chunk is touched and turns a vanished range into an
            // error; only a truncation racing that one chunk copy can still
            // fault. Rewriting in place (same length) changes the samples seen,
            // not memory safety: the bytes are plain `u8`/`f32` with no
            // invariants. Users are told (docs/robustness.md) not to analyse
            // files that are still being written.
            match unsafe { Mmap::map(&file) } {
                Ok(map) => {
                    #[cfg(unix)]
                    {
                        // Advice only; failure changes nothing but speed.
                        let _ = map.advise(memmap2::Advice::Sequential);
                    }
                    return Source::Mapped { map, file };
                }
                Err(_) => {
                    if std::env::var_os("IQAUDIT_DEBUG").is_some() {
                        eprintln!("iqaudit: debug: memory map failed; using buffered reads");
                    }
                }
            }
        }
        Source::File { file, len }
    }

    /// Total length in bytes.
    pub(crate) fn len(&self) -> u64 {
        match self {
            Source::Mapped { map, .. } => map.len() as u64,
            Source::Memory(v) => v.len() as u64,
            Source::File { len, .. } => *len,
        }
    }

    /// The whole source as one slice, when it is in memory (mapped or owned).
    pub(crate) fn as_slice(&self) -> Option<&[u8]> {
        match self {
            Source::Mapped { map, .. } => Some(&map[..]),
            Source::Memory(v) => Some(&v[..]),
            Source::File { .. } => None,
        }
    }

    /// A short name of the access path, for diagnostics.
    pub(crate) fn kind(&self) -> &'static str {
        match self {
            Source::Mapped { .. } => "mmap",
            Source::Memory(_) => "memory",
            Source::File { .. } => "read",
        }
    }

    /// For a mapped file: drop the process's mapping of the pages around the
    /// bytes `[offset, offset + len)`: the range rounded outwards to
    /// [`RELEASE_ALIGN`] boundaries of the address space, clamped to the map.
    /// The rounding matters: on a page fault Linux maps the neighbouring cached
    /// pages too ("fault-around", a 64 KiB window aligned in the address space),
    /// and pages mapped that way beside a range that another thread has already
    /// released would otherwise stay resident. The bytes stay readable: the next
    /// access maps the same page-cache page again. A no-op for the other sources
    /// and off Unix; failure is ignored (it changes memory use, not data).
    pub(crate) fn release(&self, offset: u64, len: usize) {
        #[cfg(unix)]
        if let Source::Mapped { map, .. } = self {
            let (Ok(start), true) = (usize::try_from(offset), len > 0) else {
                return;
            };
            let Some(end) = start.checked_add(len).filter(|&e| e <= map.len()) else {
                return;
            };
            // Round in the address space (where fault-around windows are aligned).
            let base = map.as_ptr() as usize;
            let lo = (base + start) & !(RELEASE_ALIGN - 1);
            let hi = (base + end).div_ceil(RELEASE_ALIGN) * RELEASE_ALIGN;
            let start = lo.saturating_sub(base);
            let len = hi.saturating_sub(base).min(map.len()) - start;
            // SAFETY: `MADV_DONTNEED` on this map only unmaps pages from this
            // process; it never changes the bytes seen through it. The map is a
            // read-only shared (`MAP_SHARED`, `PROT_READ`) mapping of a file that
            // this crate never writes, so after the advice the next access —
            // including one by another thread that holds a `&[u8]` into the same
            // pages at this moment — faults in the page-cache page of the same
            // file offset, which holds the bytes the pages held before. (The
            // data-loss case of `MADV_DONTNEED`, discarding private modified
            // pages, cannot arise: nothing is ever written through the map.) The
            // range lies inside the map (checked above; memmap2 rounds the start
            // down to a page boundary of the map, and the kernel rounds the
            // length up, still within the map's last page). The one remaining
            // hazard is the one of `Mmap::map` itself: a file truncated by another
            // process, for which `ensure_present` guards every access.
            let _ = unsafe {
                map.unchecked_advise_range(memmap2::UncheckedAdvice::DontNeed, start, len)
            };
        }
        #[cfg(not(unix))]
        let _ = (offset, len);
    }

    /// For a mapped file: check that bytes up to `end` still exist in the file
    /// (another process may have truncated it since it was mapped); a no-op for
    /// the other sources, which cannot fault.
    pub(crate) fn ensure_present(&self, end: u64) -> io::Result<()> {
        if let Source::Mapped { file, .. } = self {
            let now = file.metadata()?.len();
            if now < end {
                return Err(io::Error::new(
                    io::ErrorKind::UnexpectedEof,
                    format!(
                        "the file shrank to {now} bytes while open (truncated by another \
                         process?); {end} bytes are needed"
                    ),
                ));
            }
        }
        Ok(())
    }

    /// Call `f` with the bytes `[offset, offset + len)`.
    ///
    /// The range must lie inside the source (checked by the caller against
    /// [`len`](Self::len)); an out-of-range request is an `UnexpectedEof` error.
    pub(crate) fn with_bytes<R>(
        &self,
        offset: u64,
        len: usize,
        f: impl FnOnce(&[u8]) -> R,
    ) -> io::Result<R> {
        let end = offset.checked_add(len as u64);
        if !matches!(end, Some(e) if e <= self.len()) {
            return Err(io::Error::new(
                io::ErrorKind::UnexpectedEof,
                "byte range beyond the end of the capture",
            ));
        }
        if let Some(all) = self.as_slice() {
            self.ensure_present(offset + len as u64)?;
            let start = offset as usize;
            return Ok(f(&all[start..start + len]));
        }
        let Source::File { file, .. } = self else {
            unreachable!("as_slice covers the in-memory sources")
        };
        READ_SCRATCH.with(|cell| {
            let mut buf = cell.borrow_mut();
            buf.resize(len, 0);
            read_at(file, offset, &mut buf[..len]).map_err(|e| {
                if e.kind() == io::ErrorKind::UnexpectedEof {
                    shrank(file, offset + len as u64)
                } else {
                    e
                }
            })?;
            Ok(f(&buf[..len]))
        })
    }
}

/// The error for a range that vanished: the file is shorter than `end` now.
fn shrank(file: &File, end: u64) -> io::Error {
    let now = file
        .metadata()
        .map(|m| m.len().to_string())
        .unwrap_or_else(|_| "fewer".to_string());
    io::Error::new(
        io::ErrorKind::UnexpectedEof,
        format!(
            "the file shrank to {now} bytes while open (truncated by another process?); \
             {end} bytes are needed"
        ),
    )
}

/// Fill `buf` from byte `offset` of the file with positioned reads (`pread` on
/// Unix, `ReadFile` with an offset on Windows): no lock and no shared file
/// position, so threads read in parallel. A file shorter than the range gives
/// `UnexpectedEof` — never a signal.
fn read_at(file: &File, offset: u64, buf: &mut [u8]) -> io::Result<()> {
    #[cfg(unix)]
    {
        use std::os::unix::fs::FileExt;
        file.read_exact_at(buf, offset)
    }
    #[cfg(windows)]
    {
        use std::os::windows::fs::FileExt;
        let mut done = 0;
        while done < buf.len() {
            match file.seek_read(&mut buf[done..], offset + done as u64) {
                Ok(0) => return Err(io::ErrorKind::UnexpectedEof.into()),
                Ok(n) => done += n,
                Err(e) if e.kind() == io::ErrorKind::Interrupted => {}
                Err(e) => return Err(e),
            }
        }
        Ok(())
    }
    #[cfg(not(any(unix, windows)))]
    {
        let _ = (file, offset, buf);
        Err(io::Error::other(
            "positioned reads are not supported on this platform",
        ))
    }
}
