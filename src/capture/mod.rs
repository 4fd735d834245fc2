//! Open a recorded IQ capture and hand out complex `f32` samples.
//!
//! Takes in: a path to a raw interleaved file (`cf32_le`, `cf32_be`, `cf64_le`,
//! `ci16_le`, `ci16_be`, `ci8`, `cu8` — the SigMF datatype names), a 2-channel WAV
//! (channel 0 = I, channel 1 = Q; PCM 8/16/24/32-bit or 32-bit float) or a SigMF
//! recording (`NAME.sigmf-meta` beside `NAME.sigmf-data` or beside the raw file).
//! Gives out: a [`Capture`] that decodes any sample range into a caller-owned
//! [`Cf32`] buffer, scaled so that integer full scale is 1.0 (see `src/lib.rs`),
//! with clipped and non-finite counts per range. The file is memory-mapped (or
//! read piecewise) and never loaded whole; nothing here ever writes to it.
//!
//! Format resolution order: the explicit option ([`OpenOptions::format`]) >
//! SigMF sidecar > WAV header (`RIFF…WAVE` magic or `.wav` name) > file extension
//! (`.cf32`/`.cfile` → `cf32_le`, `.cf64` → `cf64_le`, `.ci16`/`.cs16` → `ci16_le`,
//! `.ci8`/`.cs8` → `ci8`, `.cu8` → `cu8`) > an error that lists the accepted
//! formats. The sample rate comes from the option, else the sidecar, else the
//! WAV header, else it is unknown.
//!
//! The writer side ([`write_capture`]) and capture statistics ([`stats`]) live in
//! submodules.

mod mmap;
mod raw;
mod sigmf;
pub mod stats;
pub mod views;
mod wav;
mod write;

use std::fmt;
use std::fs::File;
use std::io::Read;
use std::path::{Path, PathBuf};
use std::str::FromStr;

use serde::{Deserialize, Serialize};

use crate::Cf32;
use mmap::{Access, Source};

pub use sigmf::{parse_sidecar as parse_sigmf_meta, SigmfMeta};
pub use write::{encode_raw, write_capture, WriteSpec, WriteStats};

/// Raw interleaved complex sample layouts, named as SigMF `core:datatype` names.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
pub enum SampleFormat {
    /// 32-bit IEEE float, little-endian, I then Q (8 bytes per sample).
    #[serde(rename = "cf32_le")]
    Cf32Le,
    /// 32-bit IEEE float, big-endian.
    #[serde(rename = "cf32_be")]
    Cf32Be,
    /// 64-bit IEEE float, little-endian (16 bytes per sample).
    #[serde(rename = "cf64_le")]
    Cf64Le,
    /// 16-bit signed integer, little-endian; full scale 32768.
    #[serde(rename = "ci16_le")]
    Ci16Le,
    /// 16-bit signed integer, big-endian; full scale 32768.
    #[serde(rename = "ci16_be")]
    Ci16Be,
    /// 8-bit signed integer; full scale 128.
    #[serde(rename = "ci8")]
    Ci8,
    /// 8-bit unsigned integer, mid-scale 127.5; full scale 127.5.
    #[serde(rename = "cu8")]
    Cu8,
}

impl SampleFormat {
    /// Every supported raw format, in documentation order.
    pub const ALL: [SampleFormat; 7] = [
        SampleFormat::Cf32Le,
        SampleFormat::Cf32Be,
        SampleFormat::Cf64Le,
        SampleFormat::Ci16Le,
        SampleFormat::Ci16Be,
        SampleFormat::Ci8,
        SampleFormat::Cu8,
    ];

    /// The SigMF datatype name, e.g. `"ci16_le"`.
    pub fn name(self) -> &'static str {
        match self {
            SampleFormat::Cf32Le => "cf32_le",
            SampleFormat::Cf32Be => "cf32_be",
            SampleFormat::Cf64Le => "cf64_le",
            SampleFormat::Ci16Le => "ci16_le",
            SampleFormat::Ci16Be => "ci16_be",
            SampleFormat::Ci8 => "ci8",
            SampleFormat::Cu8 => "cu8",
        }
    }

    /// Bytes per complex sample (I and Q together).
    pub fn bytes_per_sample(self) -> usize {
        match self {
            SampleFormat::Cf32Le | SampleFormat::Cf32Be => 8,
            SampleFormat::Cf64Le => 16,
            SampleFormat::Ci16Le | SampleFormat::Ci16Be => 4,
            SampleFormat::Ci8 | SampleFormat::Cu8 => 2,
        }
    }

    /// The format implied by a file extension (without the dot), if any.
    pub fn from_extension(ext: &str) -> Option<SampleFormat> {
        match ext.to_ascii_lowercase().as_str() {
            "cf32" | "cfile" => Some(SampleFormat::Cf32Le),
            "cf64" => Some(SampleFormat::Cf64Le),
            "ci16" | "cs16" => Some(SampleFormat::Ci16Le),
            "ci8" | "cs8" => Some(SampleFormat::Ci8),
            "cu8" => Some(SampleFormat::Cu8),
            _ => None,
        }
    }

    /// The accepted names, comma-separated (for messages).
    pub fn accepted_names() -> String {
        SampleFormat::ALL.map(SampleFormat::name).join(", ")
    }
}

impl fmt::Display for SampleFormat {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

/// The error of [`SampleFormat::from_str`]: the name is not a supported format.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("unknown sample format '{found}' (accepted: {accepted})")]
pub struct ParseFormatError {
    /// The text that was given.
    pub found: String,
    /// The accepted names, comma-separated.
    pub accepted: String,
}

impl FromStr for SampleFormat {
    type Err = ParseFormatError;
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        let lower = s.trim().to_ascii_lowercase();
        SampleFormat::ALL
            .into_iter()
            .find(|f| f.name() == lower)
            .ok_or_else(|| ParseFormatError {
                found: s.to_string(),
                accepted: SampleFormat::accepted_names(),
            })
    }
}

/// Sample encodings of a 2-channel WAV file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum WavEncoding {
    /// 8-bit unsigned PCM, mid-scale 128; full scale 128.
    Pcm8,
    /// 16-bit signed PCM; full scale 32768.
    Pcm16,
    /// 24-bit signed PCM (3-byte container); full scale 2²³.
    Pcm24,
    /// 32-bit signed PCM; full scale 2³¹.
    Pcm32,
    /// 32-bit IEEE float (format tag 3).
    Float32,
}

impl WavEncoding {
    /// Every supported WAV encoding.
    pub const ALL: [WavEncoding; 5] = [
        WavEncoding::Pcm8,
        WavEncoding::Pcm16,
        WavEncoding::Pcm24,
        WavEncoding::Pcm32,
        WavEncoding::Float32,
    ];

    /// Name used in messages and reports, e.g. `"pcm16"`.
    pub fn name(self) -> &'static str {
        match self {
            WavEncoding::Pcm8 => "pcm8",
            WavEncoding::Pcm16 => "pcm16",
            WavEncoding::Pcm24 => "pcm24",
            WavEncoding::Pcm32 => "pcm32",
            WavEncoding::Float32 => "float32",
        }
    }

    /// Bits per component.
    pub fn bits(self) -> u16 {
        match self {
            WavEncoding::Pcm8 => 8,
            WavEncoding::Pcm16 => 16,
            WavEncoding::Pcm24 => 24,
            WavEncoding::Pcm32 | WavEncoding::Float32 => 32,
        }
    }
}

impl fmt::Display for WavEncoding {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

/// A stored sample layout: raw interleaved or WAV.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Container {
    /// Raw interleaved samples, no header.
    Raw(SampleFormat),
    /// A 2-channel WAV file (channel 0 = I, channel 1 = Q).
    Wav(WavEncoding),
}

impl Container {
    /// Bytes per complex sample.
    pub fn bytes_per_sample(self) -> usize {
        match self {
            Container::Raw(f) => f.bytes_per_sample(),
            Container::Wav(e) => 2 * usize::from(e.bits() / 8),
        }
    }
}

impl fmt::Display for Container {
    /// `cf32_le`, …, or `wav_pcm16`, `wav_float32`, ….
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Container::Raw(r) => write!(f, "{r}"),
            Container::Wav(w) => write!(f, "wav_{w}"),
        }
    }
}

/// How to open a capture. `Default` = everything from the file itself.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct OpenOptions {
    /// Raw sample format; overrides sidecar, WAV header and extension.
    pub format: Option<SampleFormat>,
    /// Sample rate in Hz; overrides the sidecar and the WAV header.
    pub sample_rate_hz: Option<f64>,
    /// Swap I and Q after decoding (mirrors the spectrum).
    pub swap_iq: bool,
}

/// Where the sample format of an opened capture came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum FormatSource {
    /// The caller's explicit option (`--format`).
    Option,
    /// A SigMF `.sigmf-meta` sidecar.
    Sigmf,
    /// The WAV header.
    WavHeader,
    /// The file extension.
    Extension,
    /// Given in memory ([`Capture::from_bytes`]).
    Memory,
}

/// Clipped and non-finite counts over a decoded range (complex samples).
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize)]
pub struct ReadStats {
    /// Samples with I or Q at the most negative/positive code (floats: `|x| ≥ 1`).
    pub clipped: u64,
    /// Samples with a non-finite I or Q; they are replaced by 0 in the output.
    pub non_finite: u64,
}

impl std::ops::AddAssign for ReadStats {
    fn add_assign(&mut self, rhs: ReadStats) {
        self.clipped += rhs.clipped;
        self.non_finite += rhs.non_finite;
    }
}

/// Everything that can go wrong opening or reading a capture.
///
/// Every variant that concerns a file carries its `path`; `Display` starts with
/// the path, so the binary prints `iqaudit: <Display>`.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum CaptureError {
    /// The file could not be opened or its metadata read.
    #[error("{}: cannot open: {source}", path.display())]
    Open {
        /// The file.
        path: PathBuf,
        /// The OS error.
        source: std::io::Error,
    },
    /// The path is a directory or other non-regular file.
    #[error("{}: not a regular file (a directory, FIFO or device?); give the path of a capture file", path.display())]
    NotAFile {
        /// The path.
        path: PathBuf,
    },
    /// The file holds no sample data.
    #[error("{}: empty capture ({found_bytes} bytes of sample data)", path.display())]
    Empty {
        /// The file.
        path: PathBuf,
        /// Bytes of sample data found.
        found_bytes: u64,
    },
    /// No format was given and none could be inferred.
    #[error(
        "{}: cannot tell the sample format; give one with --format ({accepted}), \
         add a SigMF .sigmf-meta sidecar, or use an extension (.cf32, .cfile, .cf64, .ci16, .cs16, .ci8, .cs8, .cu8, .wav)",
        path.display()
    )]
    UnknownFormat {
        /// The file.
        path: PathBuf,
        /// The accepted raw format names.
        accepted: String,
    },
    /// An explicitly given format name is not supported.
    #[error("{}: unknown --format '{found}' (accepted: {accepted})", path.display())]
    BadFormatName {
        /// The capture the option was for.
        path: PathBuf,
        /// The name given.
        found: String,
        /// The accepted names.
        accepted: String,
    },
    /// The WAV header is invalid (as judged by `hound`) or truncated.
    #[error("{}: invalid WAV header: {problem}", path.display())]
    WavHeader {
        /// The file.
        path: PathBuf,
        /// What is wrong.
        problem: String,
    },
    /// The WAV file does not have exactly two channels.
    #[error("{}: WAV has {found} channel(s); an IQ WAV needs exactly 2 (channel 0 = I, channel 1 = Q)", path.display())]
    WavChannels {
        /// The file.
        path: PathBuf,
        /// Channels in the header.
        found: u16,
    },
    /// The WAV encoding is not one of the supported ones.
    #[error("{}: unsupported WAV encoding: {found} (supported: 8/16/24/32-bit PCM, 32-bit float)", path.display())]
    WavEncoding {
        /// The file.
        path: PathBuf,
        /// A description of the encoding found.
        found: String,
    },
    /// The WAV data chunk claims more bytes than the file holds.
    #[error(
        "{}: WAV data chunk declares {declared_bytes} bytes but only {available_bytes} follow the header \
         (truncated file?); WAV sizes are 32-bit, so store long recordings as raw files",
        path.display()
    )]
    WavDataSize {
        /// The file.
        path: PathBuf,
        /// Declared size of the data chunk.
        declared_bytes: u64,
        /// Bytes after the data offset.
        available_bytes: u64,
    },
    /// The SigMF sidecar is not valid JSON (or not UTF-8).
    #[error("{}: invalid SigMF metadata: {problem}", path.display())]
    SigmfJson {
        /// The sidecar file.
        path: PathBuf,
        /// Parser message with line and column.
        problem: String,
    },
    /// A SigMF key is missing or has a bad value.
    #[error("{}: SigMF key '{key}': {problem}", path.display())]
    SigmfKey {
        /// The sidecar file.
        path: PathBuf,
        /// The key, e.g. `global.core:sample_rate`.
        key: String,
        /// What is wrong.
        problem: String,
    },
    /// The SigMF datatype is valid or unknown but not supported here.
    #[error("{}: unsupported SigMF core:datatype '{found}' (supported: {supported})", path.display())]
    SigmfDatatype {
        /// The sidecar file.
        path: PathBuf,
        /// The datatype string found.
        found: String,
        /// The supported names.
        supported: String,
    },
    /// Reading sample bytes failed.
    #[error("{}: read error at byte {offset_bytes}: {source}", path.display())]
    Read {
        /// The file.
        path: PathBuf,
        /// Byte offset of the failed read.
        offset_bytes: u64,
        /// The OS error.
        source: std::io::Error,
    },
    /// A requested sample range lies outside the capture.
    #[error("{}: samples {start}..{end} requested but the capture has {available}", path.display())]
    OutOfRange {
        /// The file.
        path: PathBuf,
        /// First sample requested.
        start: usize,
        /// One past the last sample requested.
        end: usize,
        /// Samples in the capture.
        available: usize,
    },
    /// Writing a capture failed.
    #[error("{}: cannot write: {source}", path.display())]
    Write {
        /// The output file.
        path: PathBuf,
        /// The OS or encoder error.
        source: std::io::Error,
    },
    /// The write request itself is invalid (e.g. a SigMF sidecar for a WAV file).
    #[error("{}: {problem}", path.display())]
    BadWriteSpec {
        /// The output file.
        path: PathBuf,
        /// What is wrong.
        problem: String,
    },
}

/// An opened capture: the bytes (memory-mapped, in memory or read on demand),
/// where the samples start, how they are encoded and what the metadata says.
#[derive(Debug)]
pub struct Capture {
    path: PathBuf,
    source: Source,
    data_offset: u64,
    len: usize,
    container: Container,
    format_source: FormatSource,
    trailing_bytes: usize,
    sample_rate_hz: Option<f64>,
    center_freq_hz: Option<f64>,
    swap_iq: bool,
    sidecar: Option<PathBuf>,
}

/// Reads at least this long release their mapped pages at once (see
/// [`Capture::read_into`]); shorter ones leave that to
/// [`Capture::release_samples`].
pub const RELEASE_MIN_READ_BYTES: usize = 256 << 10;

impl Capture {
    /// Open the capture at `path`, memory-mapping it (falls back to buffered reads
    /// when mapping fails). See the module doc for how the format is resolved.
    pub fn open(path: &Path, opts: &OpenOptions) -> Result<Capture, CaptureError> {
        Capture::open_with(path, opts, Access::MapOrRead)
    }

    /// Like [`open`](Self::open) but never memory-maps: every range is read with
    /// positioned buffered reads. Same samples, different access path (used by
    /// the tests that check both paths agree).
    pub fn open_unmapped(path: &Path, opts: &OpenOptions) -> Result<Capture, CaptureError> {
        Capture::open_with(path, opts, Access::ReadOnly)
    }

    fn open_with(path: &Path, opts: &OpenOptions, access: Access) -> Result<Capture, CaptureError> {
        // A `.sigmf-meta` path stands for its recording.
        let data_path = if has_extension(path, "sigmf-meta") {
            path.with_extension("sigmf-data")
        } else {
            path.to_path_buf()
        };
        let open_err = |source| CaptureError::Open {
            path: data_path.clone(),
            source,
        };
        let meta = std::fs::metadata(&data_path).map_err(open_err)?;
        if !meta.is_file() {
            return Err(CaptureError::NotAFile { path: data_path });
        }
        let mut file = File::open(&data_path).map_err(open_err)?;
        let file_len = file.metadata().map_err(open_err)?.len();

        let sidecar = sigmf::find_sidecar(&data_path);
        let sigmf_meta = match &sidecar {
            Some(p) => Some(sigmf::read_sidecar(p)?),
            None => None,
        };

        let mut wav_rate = None;
        let (container, data_offset, data_bytes, format_source) = if let Some(f) = opts.format {
            (Container::Raw(f), 0, file_len, FormatSource::Option)
        } else if let Some(m) = &sigmf_meta {
            (Container::Raw(m.datatype), 0, file_len, FormatSource::Sigmf)
        } else if has_extension(&data_path, "wav") || starts_with_riff(&mut file) {
            let layout = wav::read_header(&mut file, &data_path, file_len)?;
            wav_rate = Some(f64::from(layout.sample_rate_hz));
            (
                Container::Wav(layout.encoding),
                layout.data_offset,
                layout.data_bytes,
                FormatSource::WavHeader,
            )
        } else if let Some(f) = data_path
            .extension()
            .and_then(|e| e.to_str())
            .and_then(SampleFormat::from_extension)
        {
            (Container::Raw(f), 0, file_len, FormatSource::Extension)
        } else {
            return Err(CaptureError::UnknownFormat {
                path: data_path,
                accepted: SampleFormat::accepted_names(),
            });
        };

        let bps = container.bytes_per_sample() as u64;
        let len = data_bytes / bps;
        let trailing_bytes = (data_bytes % bps) as usize;
        if len == 0 {
            return Err(CaptureError::Empty {
                path: data_path,
                found_bytes: data_bytes,
            });
        }
        let len = usize::try_from(len).map_err(|_| CaptureError::OutOfRange {
            path: data_path.clone(),
            start: 0,
            end: usize::MAX,
            available: usize::MAX,
        })?;
        let sample_rate_hz = opts
            .sample_rate_hz
            .or(sigmf_meta.as_ref().and_then(|m| m.sample_rate_hz))
            .or(wav_rate);
        let center_freq_hz = sigmf_meta.as_ref().and_then(|m| m.center_freq_hz);
        Ok(Capture {
            source: Source::from_file(file, file_len, access),
            path: data_path,
            data_offset,
            len,
            container,
            format_source,
            trailing_bytes,
            sample_rate_hz,
            center_freq_hz,
            swap_iq: opts.swap_iq,
            sidecar,
        })
    }

    /// An in-memory capture of raw bytes in `format` (for tests and for data that
    /// is already in memory). A partial sample at the end is ignored and counted
    /// by [`trailing_bytes`](Self::trailing_bytes).
    pub fn from_bytes(bytes: Vec<u8>, format: SampleFormat) -> Capture {
        let bps = format.bytes_per_sample();
        Capture {
            path: PathBuf::from("<memory>"),
            len: bytes.len() / bps,
            trailing_bytes: bytes.len() % bps,
            source: Source::Memory(bytes),
            data_offset: 0,
            container: Container::Raw(format),
            format_source: FormatSource::Memory,
            sample_rate_hz: None,
            center_freq_hz: None,
            swap_iq: false,
            sidecar: None,
        }
    }

    /// An in-memory WAV file (complete, header included), validated exactly as
    /// [`open`](Self::open) validates a WAV file on disk.
    pub fn from_wav_bytes(bytes: Vec<u8>) -> Result<Capture, CaptureError> {
        let path = PathBuf::from("<memory>");
        let total = bytes.len() as u64;
        let layout = wav::read_header(&mut std::io::Cursor::new(&bytes[..]), &path, total)?;
        let len = (layout.data_bytes / layout.encoding_bytes()) as usize;
        if len == 0 {
            return Err(CaptureError::Empty {
                path,
                found_bytes: layout.data_bytes,
            });
        }
        Ok(Capture {
            path,
            source: Source::Memory(bytes),
            data_offset: layout.data_offset,
            len,
            container: Container::Wav(layout.encoding),
            format_source: FormatSource::WavHeader,
            trailing_bytes: 0,
            sample_rate_hz: Some(f64::from(layout.sample_rate_hz)),
            center_freq_hz: None,
            swap_iq: false,
            sidecar: None,
        })
    }

    /// Number of complex samples.
    pub fn len(&self) -> usize {
        self.len
    }

    /// True when the capture holds no samples (never true for an opened file).
    pub fn is_empty(&self) -> bool {
        self.len == 0
    }

    /// Sample rate in Hz, if the option, a sidecar or a WAV header gave one.
    pub fn sample_rate_hz(&self) -> Option<f64> {
        self.sample_rate_hz
    }

    /// Centre frequency in Hz from the SigMF sidecar's first capture segment.
    pub fn center_freq_hz(&self) -> Option<f64> {
        self.center_freq_hz
    }

    /// The path the samples come from (`<memory>` for in-memory captures).
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// The SigMF sidecar that was read, if any.
    pub fn sidecar_path(&self) -> Option<&Path> {
        self.sidecar.as_deref()
    }

    /// The stored layout.
    pub fn container(&self) -> Container {
        self.container
    }

    /// Where the format came from.
    pub fn format_source(&self) -> FormatSource {
        self.format_source
    }

    /// Byte offset of the first sample in the file.
    pub fn data_offset_bytes(&self) -> u64 {
        self.data_offset
    }

    /// Total length of the underlying file or buffer in bytes.
    pub fn file_len_bytes(&self) -> u64 {
        self.source.len()
    }

    /// How the bytes are reached: `"mmap"`, `"read"` or `"memory"`.
    pub fn access_path(&self) -> &'static str {
        self.source.kind()
    }

    /// Whether I and Q are swapped after decoding.
    pub fn swap_iq(&self) -> bool {
        self.swap_iq
    }

    /// A one-line description, e.g. `"ci16_le (raw, from extension)"`.
    pub fn format_description(&self) -> String {
        let src = match self.format_source {
            FormatSource::Option => "as given by --format or the profile",
            FormatSource::Sigmf => "from SigMF sidecar",
            FormatSource::WavHeader => "from WAV header",
            FormatSource::Extension => "from file extension",
            FormatSource::Memory => "in memory",
        };
        let swap = if self.swap_iq { ", I/Q swapped" } else { "" };
        format!("{} ({src}{swap})", self.container)
    }

    /// Bytes at the end that do not make a whole sample (ignored).
    pub fn trailing_bytes(&self) -> usize {
        self.trailing_bytes
    }

    /// Decode samples `[start, start + out.len())` into `out` and return the
    /// clipped and non-finite counts for that range (non-finite samples are
    /// replaced by 0 in `out`). For a memory-mapped file the pages of the range
    /// are released afterwards, so the process's resident memory does not grow
    /// with the part of the capture read (reading them again is a minor fault).
    pub fn read_into(&self, start: usize, out: &mut [Cf32]) -> Result<ReadStats, CaptureError> {
        let end = start.checked_add(out.len());
        let end = match end {
            Some(e) if e <= self.len => e,
            _ => {
                return Err(CaptureError::OutOfRange {
                    path: self.path.clone(),
                    start,
                    end: end.unwrap_or(usize::MAX),
                    available: self.len,
                })
            }
        };
        let bps = self.container.bytes_per_sample();
        let offset = self.data_offset + (start as u64) * bps as u64;
        let stats = match self.as_cf32_view() {
            Some(view) => {
                self.ensure_present(start, end)?;
                raw::check_floats(&view[start..end], out)
            }
            None => self
                .source
                .with_bytes(offset, out.len() * bps, |b| {
                    raw::decode(self.container, b, out)
                })
                .map_err(|source| CaptureError::Read {
                    path: self.path.clone(),
                    offset_bytes: offset,
                    source,
                })?,
        };
        // The samples are decoded into `out`: let the mapped pages go, so
        // that a pass over the whole capture does not keep it resident. Only
        // for large (sequential) reads: releasing costs a system call and, with
        // other threads running, a TLB shootdown, so the many small reads of
        // burst analysis are released in bulk by the caller
        // ([`release_samples`](Self::release_samples)).
        if out.len() * bps >= RELEASE_MIN_READ_BYTES {
            self.source.release(offset, out.len() * bps);
        }
        if self.swap_iq {
            for s in out.iter_mut() {
                *s = Cf32::new(s.im, s.re);
            }
        }
        Ok(stats)
    }

    /// Let the process's mapping of samples `[start, end)` go (clamped to the
    /// capture): a hint that they will not be read again soon. The samples stay
    /// readable — the next read maps the same cached pages again — so calling
    /// this is never wrong, only possibly slower. A no-op unless memory-mapped.
    pub fn release_samples(&self, start: usize, end: usize) {
        let end = end.min(self.len);
        if start >= end {
            return;
        }
        let bps = self.container.bytes_per_sample() as u64;
        let offset = self.data_offset + start as u64 * bps;
        self.source.release(offset, (end - start) * bps as usize);
    }

    /// Check that samples `[start, end)` are still in the file: a memory-mapped
    /// file may have been truncated by another process since it was opened, and
    /// touching the vanished part would kill the process with SIGBUS. Call this
    /// before reading a range of [`as_cf32_slice`](Self::as_cf32_slice);
    /// [`read_into`](Self::read_into) calls it itself.
    ///
    /// # Errors
    /// [`CaptureError::Read`] (kind `UnexpectedEof`) when the range is gone.
    pub fn ensure_present(&self, start: usize, end: usize) -> Result<(), CaptureError> {
        let bps = self.container.bytes_per_sample() as u64;
        let first = self.data_offset + start as u64 * bps;
        let last = self.data_offset + end as u64 * bps;
        self.source
            .ensure_present(last)
            .map_err(|source| CaptureError::Read {
                path: self.path.clone(),
                offset_bytes: first,
                source,
            })
    }

    /// A zero-copy view of all samples: only for `cf32_le` (raw or float WAV is
    /// not included) on a little-endian host, when the data is in memory or mapped
    /// and 4-byte aligned, and I/Q are not swapped. Non-finite values appear as
    /// stored; use [`read_into`](Self::read_into) for cleaned samples.
    pub fn as_cf32_slice(&self) -> Option<&[Cf32]> {
        if self.swap_iq {
            return None;
        }
        self.as_cf32_view()
    }

    fn as_cf32_view(&self) -> Option<&[Cf32]> {
        if !cfg!(target_endian = "little") || self.container != Container::Raw(SampleFormat::Cf32Le)
        {
            return None;
        }
        let all = self.source.as_slice()?;
        let start = usize::try_from(self.data_offset).ok()?;
        let bytes = all.get(start..start + self.len * 8)?;
        bytemuck::try_cast_slice::<u8, Cf32>(bytes).ok()
    }
}

fn has_extension(path: &Path, ext: &str) -> bool {
    path.extension()
        .and_then(|e| e.to_str())
        .is_some_and(|e| e.eq_ignore_ascii_case(ext))
}

fn starts_with_riff(file: &mut File) -> bool {
    use std::io::{Seek, SeekFrom};
    let mut magic = [0u8; 12];
    let ok = file.read_exact(&mut magic).is_ok();
    let _ = file.seek(SeekFrom::Start(0));
    ok && &magic[0..4] == b"RIFF" && &magic[8..12] == b"WAVE"
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_format_name_parses_back_to_itself_and_unknown_names_list_the_accepted_ones() {
        for f in SampleFormat::ALL {
            assert_eq!(f.name().parse::<SampleFormat>(), Ok(f));
            let json = serde_json::to_string(&f).unwrap();
            assert_eq!(json, format!("\"{}\"", f.name()));
        }
        let err = "ci12".parse::<SampleFormat>().unwrap_err();
        assert!(err.to_string().contains("cf32_le, cf32_be"), "{err}");
    }

    /// Issue 8 regression: a capture truncated by another process while it is
    /// memory-mapped used to kill the process with SIGBUS on the next read of
    /// the vanished range; now the read is a typed error and the part still in
    /// the file reads as before. Covers the zero-copy (`cf32_le`) and the
    /// decoding (`ci16_le`) paths.
    #[test]
    fn a_capture_truncated_while_mapped_gives_a_read_error_not_sigbus() {
        for (ext, bps) in [("cf32", 8usize), ("ci16", 4)] {
            let dir = tempfile::tempdir().unwrap();
            let p = dir.path().join(format!("shrinking.{ext}"));
            let bytes: Vec<u8> = (0..(1usize << 20)).map(|i| (i % 251) as u8).collect();
            std::fs::write(&p, &bytes).unwrap();
            let cap = Capture::open(&p, &OpenOptions::default()).unwrap();
            assert_eq!(cap.access_path(), "mmap");
            let len = cap.len();
            assert_eq!(len, bytes.len() / bps);
            let mut head = vec![Cf32::default(); 16];
            let before = cap.read_into(0, &mut head).unwrap();
            std::fs::OpenOptions::new()
                .write(true)
                .open(&p)
                .unwrap()
                .set_len(8192)
                .unwrap();
            let mut tail = vec![Cf32::default(); 4096];
            let e = cap.read_into(len - 4096, &mut tail).unwrap_err();
            match &e {
                CaptureError::Read { source, .. } => {
                    assert_eq!(source.kind(), std::io::ErrorKind::UnexpectedEof, "{e}");
                }
                other => panic!("{ext}: expected a read error, got {other:?}"),
            }
            assert!(e.to_string().contains("shrank"), "{e}");
            let mut again = vec![Cf32::default(); 16];
            assert_eq!(cap.read_into(0, &mut again).unwrap(), before);
            assert_eq!(again, head);
        }
    }

    #[test]
    fn read_into_rejects_a_range_past_the_end() {
        let cap = Capture::from_bytes(vec![0u8; 16], SampleFormat::Cf32Le);
        let mut out = [Cf32::default(); 3];
        assert!(matches!(
            cap.read_into(0, &mut out),
            Err(CaptureError::OutOfRange { available: 2, .. })
        ));
        assert!(cap.read_into(usize::MAX, &mut out).is_err());
    }
}
