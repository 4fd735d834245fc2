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

mod archive;
mod mmap;
mod raw;
mod sigmf;
pub mod stats;
pub mod views;
mod wav;
mod write;

use std::fmt;
use std::fs::File;
use std::path::{Path, PathBuf};
use std::str::FromStr;

use serde::{Deserialize, Serialize};
use serde_json::Value;

use crate::Cf32;
use mmap::{Access, Source};

pub use sigmf::{
    parse_sidecar as parse_sigmf_meta, SigmfAnnotation, SigmfMeta, SigmfSegment, UnknownCoreKey,
    ANNOTATION_CORE_KEYS, CAPTURE_CORE_KEYS, EXTENSION_NAMESPACE, EXTENSION_VERSION,
    GLOBAL_CORE_KEYS, MAX_UNKNOWN_CORE_KEYS, SIGMF_VERSION,
};
pub use write::{encode_raw, encode_raw_with, write_capture, WriteSpec, WriteStats};

/// Raw interleaved complex sample layouts: every complex SigMF `core:datatype`
/// (SigMF v1.2.5 §"Dataset format", shared/REFERENCE-VALUES.md §10), I then Q,
/// each component in the byte order the `_le`/`_be` suffix names.
///
/// Scaling to full scale 1.0 (crate convention, `src/lib.rs`): signed integers
/// divide by 2^(bits−1); unsigned integers subtract their zero point and divide
/// by the same value, where the zero point is chosen by [`UnsignedZero`]
/// (default: the symmetric mid-code (2^bits − 1)/2, e.g. 127.5 for `cu8`; the
/// SigMF reference library uses 2^(bits−1), e.g. 128).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize, schemars::JsonSchema)]
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
    /// 64-bit IEEE float, big-endian (16 bytes per sample).
    #[serde(rename = "cf64_be")]
    Cf64Be,
    /// 32-bit signed integer, little-endian; full scale 2³¹.
    #[serde(rename = "ci32_le")]
    Ci32Le,
    /// 32-bit signed integer, big-endian; full scale 2³¹.
    #[serde(rename = "ci32_be")]
    Ci32Be,
    /// 16-bit signed integer, little-endian; full scale 32768.
    #[serde(rename = "ci16_le")]
    Ci16Le,
    /// 16-bit signed integer, big-endian; full scale 32768.
    #[serde(rename = "ci16_be")]
    Ci16Be,
    /// 8-bit signed integer; full scale 128.
    #[serde(rename = "ci8")]
    Ci8,
    /// 32-bit unsigned integer, little-endian; zero point per [`UnsignedZero`].
    #[serde(rename = "cu32_le")]
    Cu32Le,
    /// 32-bit unsigned integer, big-endian; zero point per [`UnsignedZero`].
    #[serde(rename = "cu32_be")]
    Cu32Be,
    /// 16-bit unsigned integer, little-endian; zero point per [`UnsignedZero`].
    #[serde(rename = "cu16_le")]
    Cu16Le,
    /// 16-bit unsigned integer, big-endian; zero point per [`UnsignedZero`].
    #[serde(rename = "cu16_be")]
    Cu16Be,
    /// 8-bit unsigned integer; zero point per [`UnsignedZero`] (127.5 by default).
    #[serde(rename = "cu8")]
    Cu8,
}

impl SampleFormat {
    /// Every supported raw format, in documentation order.
    pub const ALL: [SampleFormat; 14] = [
        SampleFormat::Cf32Le,
        SampleFormat::Cf32Be,
        SampleFormat::Cf64Le,
        SampleFormat::Cf64Be,
        SampleFormat::Ci32Le,
        SampleFormat::Ci32Be,
        SampleFormat::Ci16Le,
        SampleFormat::Ci16Be,
        SampleFormat::Ci8,
        SampleFormat::Cu32Le,
        SampleFormat::Cu32Be,
        SampleFormat::Cu16Le,
        SampleFormat::Cu16Be,
        SampleFormat::Cu8,
    ];

    /// The SigMF datatype name, e.g. `"ci16_le"`.
    pub fn name(self) -> &'static str {
        match self {
            SampleFormat::Cf32Le => "cf32_le",
            SampleFormat::Cf32Be => "cf32_be",
            SampleFormat::Cf64Le => "cf64_le",
            SampleFormat::Cf64Be => "cf64_be",
            SampleFormat::Ci32Le => "ci32_le",
            SampleFormat::Ci32Be => "ci32_be",
            SampleFormat::Ci16Le => "ci16_le",
            SampleFormat::Ci16Be => "ci16_be",
            SampleFormat::Ci8 => "ci8",
            SampleFormat::Cu32Le => "cu32_le",
            SampleFormat::Cu32Be => "cu32_be",
            SampleFormat::Cu16Le => "cu16_le",
            SampleFormat::Cu16Be => "cu16_be",
            SampleFormat::Cu8 => "cu8",
        }
    }

    /// The datatype without its byte order, e.g. `"ci16"` for `ci16_be`.
    pub fn family(self) -> &'static str {
        let n = self.name();
        n.split('_').next().unwrap_or(n)
    }

    /// Bytes per complex sample (I and Q together).
    pub fn bytes_per_sample(self) -> usize {
        2 * self.component_bytes()
    }

    /// Bytes per component (I or Q).
    pub fn component_bytes(self) -> usize {
        match self {
            SampleFormat::Cf64Le | SampleFormat::Cf64Be => 8,
            SampleFormat::Cf32Le
            | SampleFormat::Cf32Be
            | SampleFormat::Ci32Le
            | SampleFormat::Ci32Be
            | SampleFormat::Cu32Le
            | SampleFormat::Cu32Be => 4,
            SampleFormat::Ci16Le
            | SampleFormat::Ci16Be
            | SampleFormat::Cu16Le
            | SampleFormat::Cu16Be => 2,
            SampleFormat::Ci8 | SampleFormat::Cu8 => 1,
        }
    }

    /// True for the unsigned integer datatypes (`cu8`, `cu16_*`, `cu32_*`).
    pub fn is_unsigned(self) -> bool {
        self.family().starts_with("cu")
    }

    /// True for the float datatypes (`cf32_*`, `cf64_*`).
    pub fn is_float(self) -> bool {
        self.family().starts_with("cf")
    }

    /// The format implied by a file extension (without the dot), if any. An
    /// extension names a datatype family; the little-endian member is implied.
    pub fn from_extension(ext: &str) -> Option<SampleFormat> {
        match ext.to_ascii_lowercase().as_str() {
            "cf32" | "cfile" => Some(SampleFormat::Cf32Le),
            "cf64" => Some(SampleFormat::Cf64Le),
            "ci32" | "cs32" => Some(SampleFormat::Ci32Le),
            "ci16" | "cs16" => Some(SampleFormat::Ci16Le),
            "ci8" | "cs8" => Some(SampleFormat::Ci8),
            "cu32" => Some(SampleFormat::Cu32Le),
            "cu16" => Some(SampleFormat::Cu16Le),
            "cu8" => Some(SampleFormat::Cu8),
            _ => None,
        }
    }

    /// The accepted names, comma-separated (for messages).
    pub fn accepted_names() -> String {
        SampleFormat::ALL.map(SampleFormat::name).join(", ")
    }
}

/// Where the zero of an unsigned integer datatype (`cu8`, `cu16_*`, `cu32_*`)
/// sits. SigMF names the datatypes but not their zero point, and two
/// conventions are in use.
#[derive(
    Debug, Clone, Copy, Default, PartialEq, Eq, Hash, Serialize, Deserialize, schemars::JsonSchema,
)]
#[serde(rename_all = "snake_case")]
pub enum UnsignedZero {
    /// Zero at the mid-code (2^bits − 1)/2 (127.5 for `cu8`), full scale the
    /// same value: codes 0 and 2^bits − 1 map to −1.0 and +1.0 exactly. This
    /// crate's default.
    #[default]
    Symmetric,
    /// Zero at 2^(bits−1) (128 for `cu8`), full scale 2^(bits−1): code 0 maps to
    /// −1.0 and 2^bits − 1 to 1 − 2^−(bits−1). The SigMF reference library's
    /// convention (Python `sigmf` 1.14, `autoscale=True`).
    PowerOfTwo,
}

impl UnsignedZero {
    /// The zero point (and full-scale divisor) for `bits`-bit codes.
    pub fn zero_point(self, bits: u32) -> f64 {
        let half = (bits as f64 - 1.0).exp2();
        match self {
            UnsignedZero::Symmetric => half - 0.5,
            UnsignedZero::PowerOfTwo => half,
        }
    }

    /// The option value, `"symmetric"` or `"power_of_two"`.
    pub fn name(self) -> &'static str {
        match self {
            UnsignedZero::Symmetric => "symmetric",
            UnsignedZero::PowerOfTwo => "power_of_two",
        }
    }
}

impl FromStr for UnsignedZero {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        match s.trim().to_ascii_lowercase().replace('-', "_").as_str() {
            "symmetric" => Ok(UnsignedZero::Symmetric),
            "power_of_two" => Ok(UnsignedZero::PowerOfTwo),
            _ => Err(format!(
                "unknown unsigned zero point '{s}' (accepted: symmetric, power_of_two)"
            )),
        }
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
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize, schemars::JsonSchema)]
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
    /// 64-bit IEEE float (format tag 3).
    Float64,
}

impl WavEncoding {
    /// Every supported WAV encoding.
    pub const ALL: [WavEncoding; 6] = [
        WavEncoding::Pcm8,
        WavEncoding::Pcm16,
        WavEncoding::Pcm24,
        WavEncoding::Pcm32,
        WavEncoding::Float32,
        WavEncoding::Float64,
    ];

    /// Name used in messages and reports, e.g. `"pcm16"`.
    pub fn name(self) -> &'static str {
        match self {
            WavEncoding::Pcm8 => "pcm8",
            WavEncoding::Pcm16 => "pcm16",
            WavEncoding::Pcm24 => "pcm24",
            WavEncoding::Pcm32 => "pcm32",
            WavEncoding::Float32 => "float32",
            WavEncoding::Float64 => "float64",
        }
    }

    /// Bits per component.
    pub fn bits(self) -> u16 {
        match self {
            WavEncoding::Pcm8 => 8,
            WavEncoding::Pcm16 => 16,
            WavEncoding::Pcm24 => 24,
            WavEncoding::Pcm32 | WavEncoding::Float32 => 32,
            WavEncoding::Float64 => 64,
        }
    }
}

impl fmt::Display for WavEncoding {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

/// A stored sample layout: raw interleaved or WAV.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum Container {
    /// Raw interleaved samples, no header.
    Raw(SampleFormat),
    /// A 2-channel WAV file (channel 0 = I, channel 1 = Q).
    Wav(WavEncoding),
}

impl Container {
    /// True for float samples (raw `cf32_*`/`cf64_*`, WAV float), which have no
    /// extreme code: a value beyond ±1.0 is *above full scale*, not clipped.
    pub fn is_float(self) -> bool {
        match self {
            Container::Raw(f) => f.is_float(),
            Container::Wav(e) => matches!(e, WavEncoding::Float32 | WavEncoding::Float64),
        }
    }

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
    /// Zero point of the unsigned datatypes (`cu8`, `cu16_*`, `cu32_*`).
    pub unsigned_zero: UnsignedZero,
}

/// Where the sample format of an opened capture came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, schemars::JsonSchema)]
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
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, schemars::JsonSchema)]
pub struct ReadStats {
    /// Samples with I or Q at the most negative/positive code (floats: `|x| ≥ 1`,
    /// which callers report as *above full scale*, see [`Container::is_float`]).
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

/// Something about an opened capture that the user should know: it was opened,
/// but two sources disagree or a sidecar was passed over. Shown as a warning.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub enum CaptureNote {
    /// The sidecar's datatype is of another family than the file extension says.
    ExtensionContradictsDatatype {
        /// The data file.
        data: PathBuf,
        /// The sidecar.
        sidecar: PathBuf,
        /// The sidecar's datatype (used).
        datatype: SampleFormat,
        /// The datatype family the extension names.
        extension_means: SampleFormat,
    },
    /// A sidecar beside the file describes another data file and was not used.
    SidecarForAnotherFile {
        /// The sidecar.
        sidecar: PathBuf,
        /// The file it describes.
        describes: String,
    },
    /// A format option was given for a WAV file, whose header rules.
    FormatOptionIgnoredForWav {
        /// The option's format.
        format: SampleFormat,
    },
    /// The format option overrides a sidecar's datatype.
    FormatOptionOverridesSidecar {
        /// The option's format (used).
        format: SampleFormat,
        /// The sidecar.
        sidecar: PathBuf,
        /// Its datatype (not used).
        datatype: SampleFormat,
    },
    /// A sidecar and a WAV header say different things.
    SidecarDisagreesWithWav {
        /// The sidecar.
        sidecar: PathBuf,
        /// What differs, e.g. `"datatype"`.
        what: &'static str,
        /// The sidecar's value.
        sidecar_says: String,
        /// The WAV header's value (used).
        wav_says: String,
    },
    /// A sidecar holds a `core:` key SigMF 1.x does not define for the object
    /// it sits in (often a typo, e.g. `core:sample_rat`); it was ignored.
    UnknownSigmfCoreKey {
        /// The sidecar.
        sidecar: PathBuf,
        /// The first object holding it (`global`, `captures[0]`, …).
        object: String,
        /// The key (a short escaped excerpt).
        key: String,
        /// Further objects of the same kind holding it.
        more: usize,
    },
    /// Two sources of the sample rate disagree; the first one is used.
    RateDisagrees {
        /// The source used, e.g. the sidecar's path.
        used_from: String,
        /// Its rate, Hz.
        used_hz: f64,
        /// The other source.
        other_from: String,
        /// Its rate, Hz.
        other_hz: f64,
    },
}

impl fmt::Display for CaptureNote {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            CaptureNote::ExtensionContradictsDatatype {
                data,
                sidecar,
                datatype,
                extension_means,
            } => write!(
                f,
                "{}: the extension means {} but the sidecar {} says core:datatype {}; read as {} \
                 (rename the file or fix the sidecar)",
                data.display(),
                extension_means.family(),
                sidecar.display(),
                datatype,
                datatype
            ),
            CaptureNote::SidecarForAnotherFile { sidecar, describes } => write!(
                f,
                "{} describes {describes}, not this file; not used",
                sidecar.display()
            ),
            CaptureNote::FormatOptionIgnoredForWav { format } => write!(
                f,
                "format {format} (option or profile) ignored: the file is a WAV and its header gives the layout"
            ),
            CaptureNote::FormatOptionOverridesSidecar {
                format,
                sidecar,
                datatype,
            } => write!(
                f,
                "format {format} (option) overrides core:datatype {datatype} of {}",
                sidecar.display()
            ),
            CaptureNote::SidecarDisagreesWithWav {
                sidecar,
                what,
                sidecar_says,
                wav_says,
            } => write!(
                f,
                "{} says {what} {sidecar_says} but the WAV header says {wav_says}; the header is used",
                sidecar.display()
            ),
            CaptureNote::UnknownSigmfCoreKey {
                sidecar,
                object,
                key,
                more,
            } => {
                write!(
                    f,
                    "{}: {object} has the key {key}, which SigMF 1.x does not define in the core namespace there (a typo?); ignored",
                    sidecar.display()
                )?;
                if *more > 0 {
                    write!(f, " (also in {more} more)")?;
                }
                Ok(())
            }
            CaptureNote::RateDisagrees {
                used_from,
                used_hz,
                other_from,
                other_hz,
            } => write!(
                f,
                "sample rate {used_hz} Hz from {used_from} differs from {other_hz} Hz from {other_from}; {used_hz} Hz is used"
            ),
        }
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
    #[error("{}: unsupported WAV encoding: {found} (supported: 8/16/24/32-bit PCM, 32/64-bit float)", path.display())]
    WavEncoding {
        /// The file.
        path: PathBuf,
        /// A description of the encoding found.
        found: String,
    },
    /// The WAV data chunk claims more bytes than the file holds.
    #[error(
        "{}: WAV data chunk declares {declared_bytes} bytes but only {available_bytes} follow the header \
         (truncated file?); RIFF sizes are 32-bit, so store recordings past 4 GiB as RF64/BW64 or raw files",
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
    /// The SigMF datatype is a real-valued one.
    #[error(
        "{}: SigMF core:datatype '{found}' is real-valued; IQ analysis needs complex samples \
         (a 'c' datatype such as cf32_le or ci16_le)",
        path.display()
    )]
    SigmfRealDatatype {
        /// The sidecar file.
        path: PathBuf,
        /// The datatype string found.
        found: String,
    },
    /// A sidecar was given (or found) but its data file is not there.
    #[error("{}: no data file for this SigMF metadata: {tried} (a .sigmf archive is given as NAME.sigmf)", path.display())]
    SigmfNoData {
        /// The sidecar file.
        path: PathBuf,
        /// What was looked for, and why it failed.
        tried: String,
    },
    /// The header and trailing bytes a sidecar declares do not fit the file.
    #[error("{}: SigMF says {header_bytes} header + {trailing_bytes} trailing bytes but the data file {} has {file_bytes} bytes", sidecar.display(), path.display())]
    SigmfBytes {
        /// The data file.
        path: PathBuf,
        /// The sidecar.
        sidecar: PathBuf,
        /// `core:header_bytes` of the first segment.
        header_bytes: u64,
        /// `core:trailing_bytes`.
        trailing_bytes: u64,
        /// Length of the data file.
        file_bytes: u64,
    },
    /// A SigMF archive that cannot be read.
    #[error("{}: SigMF archive {problem}", path.display())]
    Archive {
        /// The archive file.
        path: PathBuf,
        /// What is wrong.
        problem: String,
    },
    /// Every name a sidecar could be written under describes another file.
    #[error("{}: will not replace another capture's SigMF sidecar: {taken}; rename the output or remove the old sidecar", path.display())]
    SidecarTaken {
        /// The data file the sidecar was for.
        path: PathBuf,
        /// The names tried and what they describe.
        taken: String,
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
    unsigned_zero: UnsignedZero,
    sidecar: Option<PathBuf>,
    sigmf: Option<Box<SigmfMeta>>,
    segments: Vec<SigmfSegment>,
    notes: Vec<CaptureNote>,
    archive_member: Option<String>,
}

/// Reads at least this long release their mapped pages at once (see
/// [`Capture::read_into`]); shorter ones leave that to
/// [`Capture::release_samples`].
pub const RELEASE_MIN_READ_BYTES: usize = 256 << 10;

impl Capture {
    /// Open the capture at `path`, memory-mapping it (falls back to buffered reads
    /// when mapping fails). See the module doc for how the format is resolved.
    ///
    /// ```
    /// use iqaudit::{Capture, Cf32, OpenOptions};
    /// use std::path::Path;
    ///
    /// // The SigMF sidecar beside the file gives format and rate.
    /// let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-captures/bench-noise-floor.cf32");
    /// let cap = Capture::open(&path, &OpenOptions::default())?;
    /// assert_eq!(cap.len(), 65_536);
    /// assert_eq!(cap.sample_rate_hz(), Some(1e6));
    /// let mut first = vec![Cf32::new(0.0, 0.0); 1024];
    /// let stats = cap.read_into(0, &mut first)?;
    /// assert_eq!(stats.clipped, 0);
    /// # Ok::<(), iqaudit::CaptureError>(())
    /// ```
    pub fn open(path: &Path, opts: &OpenOptions) -> Result<Capture, CaptureError> {
        // Positioned reads: a file truncated while it is read gives a read
        // error ("the file shrank …"), never SIGBUS (issue 16).
        Capture::open_with(path, opts, Access::ReadOnly)
    }

    /// Like [`open`](Self::open) but never memory-maps: every range is read with
    /// positioned buffered reads. Same samples, different access path (used by
    /// the tests that check both paths agree).
    pub fn open_unmapped(path: &Path, opts: &OpenOptions) -> Result<Capture, CaptureError> {
        Capture::open_with(path, opts, Access::ReadOnly)
    }

    /// Open with a read-only memory map (falling back to positioned reads when
    /// mapping fails): zero-copy for `cf32_le`. Only for a file nobody truncates
    /// while it is open: touching a range that another process cut off raises
    /// SIGBUS, which the length check before each chunk
    /// ([`ensure_present`](Self::ensure_present)) narrows but cannot close. The
    /// binary never uses it (docs/robustness.md).
    pub fn open_mapped(path: &Path, opts: &OpenOptions) -> Result<Capture, CaptureError> {
        Capture::open_with(path, opts, Access::MapOrRead)
    }

    fn open_with(path: &Path, opts: &OpenOptions, access: Access) -> Result<Capture, CaptureError> {
        if sigmf::has_extension(path, "sigmf") {
            return Capture::open_archive(path, opts, access);
        }
        let mut notes = Vec::new();
        // A `.sigmf-meta` path stands for its recording: the `core:dataset` it
        // names, else `NAME.sigmf-data`.
        let (data_path, sidecar) = if sigmf::has_extension(path, "sigmf-meta") {
            let meta = sigmf::read_sidecar(path)?;
            let data = match &meta.dataset {
                Some(d) => path.with_file_name(d),
                None => path.with_extension("sigmf-data"),
            };
            if !data.is_file() {
                let why = match &meta.dataset {
                    Some(_) => "named by core:dataset",
                    None => "the conforming data file (no core:dataset)",
                };
                let archive = path.with_extension("sigmf");
                let hint = if archive.is_file() {
                    format!("; {} exists: give that archive instead", archive.display())
                } else {
                    String::new()
                };
                return Err(CaptureError::SigmfNoData {
                    path: path.to_path_buf(),
                    tried: format!("{} ({why}) is not a file{hint}", data.display()),
                });
            }
            (data, Some((path.to_path_buf(), meta)))
        } else {
            (path.to_path_buf(), None)
        };
        let open_err = |source| CaptureError::Open {
            path: data_path.clone(),
            source,
        };
        let meta = std::fs::metadata(&data_path).map_err(open_err)?;
        if !meta.is_file() {
            return Err(CaptureError::NotAFile { path: data_path });
        }
        // Opened without blocking and checked again on the descriptor (a FIFO
        // swapped in after the check above is refused, not waited on).
        let (mut file, file_len) = match crate::limits::open_regular(&data_path) {
            Ok(f) => f,
            Err(e) if e.kind() == std::io::ErrorKind::InvalidInput => {
                return Err(CaptureError::NotAFile { path: data_path })
            }
            Err(e) => return Err(open_err(e)),
        };
        let sidecar = match sidecar {
            Some(s) => Some(s),
            None => sigmf::find_sidecar(&data_path, &mut notes)?,
        };
        // A RIFF-family file is parsed as WAV whatever its name; one that is
        // not a WAVE form is refused rather than read as samples, unless the
        // user or a sidecar names a raw format.
        let is_wav = sigmf::has_extension(&data_path, "wav")
            || wav::has_magic(&mut file)
            || (opts.format.is_none() && sidecar.is_none() && wav::has_riff_prefix(&mut file));
        let resolved = resolve_layout(
            &data_path,
            &mut file,
            file_len,
            0,
            is_wav,
            sidecar.as_ref().map(|(p, m)| (p.as_path(), m)),
            opts,
            &mut notes,
        )?;
        let (sidecar_path, meta) = match sidecar {
            Some((p, m)) => (Some(p), Some(Box::new(m))),
            None => (None, None),
        };
        Capture::assemble(
            data_path,
            Source::from_file(file, file_len, access),
            resolved,
            opts,
            sidecar_path,
            meta,
            notes,
            None,
        )
    }

    /// Open the single recording inside a `.sigmf` archive, reading its data in
    /// place (the archive is memory-mapped like any capture).
    fn open_archive(
        path: &Path,
        opts: &OpenOptions,
        access: Access,
    ) -> Result<Capture, CaptureError> {
        let open_err = |source| CaptureError::Open {
            path: path.to_path_buf(),
            source,
        };
        let md = std::fs::metadata(path).map_err(open_err)?;
        if !md.is_file() {
            return Err(CaptureError::NotAFile {
                path: path.to_path_buf(),
            });
        }
        let mut file = File::open(path).map_err(open_err)?;
        let file_len = file.metadata().map_err(open_err)?.len();
        let member = archive::locate(&mut file, path)?;
        let meta_label = PathBuf::from(format!("{}:{}", path.display(), member.meta_name));
        let mut notes = Vec::new();
        // The member's bytes stand for the data file: header and trailing bytes
        // are counted inside it.
        let member_end = member.data_offset + member.data_len;
        let resolved = resolve_layout(
            Path::new(&member.data_name),
            &mut file,
            member_end,
            member.data_offset,
            false,
            Some((meta_label.as_path(), &member.meta)),
            opts,
            &mut notes,
        )?;
        Capture::assemble(
            path.to_path_buf(),
            Source::from_file(file, file_len, access),
            resolved,
            opts,
            Some(meta_label),
            Some(Box::new(member.meta)),
            notes,
            Some(member.data_name),
        )
    }

    #[allow(clippy::too_many_arguments)]
    fn assemble(
        path: PathBuf,
        source: Source,
        r: Resolved,
        opts: &OpenOptions,
        sidecar: Option<PathBuf>,
        meta: Option<Box<SigmfMeta>>,
        notes: Vec<CaptureNote>,
        archive_member: Option<String>,
    ) -> Result<Capture, CaptureError> {
        let bps = r.container.bytes_per_sample() as u64;
        let len = r.data_bytes / bps;
        let trailing_bytes = (r.data_bytes % bps) as usize;
        if len == 0 {
            return Err(CaptureError::Empty {
                path,
                found_bytes: r.data_bytes,
            });
        }
        let len = usize::try_from(len).map_err(|_| CaptureError::OutOfRange {
            path: path.clone(),
            start: 0,
            end: usize::MAX,
            available: usize::MAX,
        })?;
        let segments = match &meta {
            Some(m) => m.segments.clone(),
            None => vec![SigmfSegment {
                sample_start: 0,
                center_freq_hz: None,
                header_bytes: 0,
            }],
        };
        Ok(Capture {
            path,
            source,
            data_offset: r.data_offset,
            len,
            container: r.container,
            format_source: r.format_source,
            trailing_bytes,
            sample_rate_hz: r.sample_rate_hz,
            center_freq_hz: segments.first().and_then(|s| s.center_freq_hz),
            swap_iq: opts.swap_iq,
            unsigned_zero: opts.unsigned_zero,
            sidecar,
            sigmf: meta,
            segments,
            notes,
            archive_member,
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
            unsigned_zero: UnsignedZero::default(),
            sidecar: None,
            sigmf: None,
            segments: vec![SigmfSegment {
                sample_start: 0,
                center_freq_hz: None,
                header_bytes: 0,
            }],
            notes: Vec::new(),
            archive_member: None,
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
            unsigned_zero: UnsignedZero::default(),
            sidecar: None,
            sigmf: None,
            segments: vec![SigmfSegment {
                sample_start: 0,
                center_freq_hz: None,
                header_bytes: 0,
            }],
            notes: Vec::new(),
            archive_member: None,
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

    /// The capture segments (SigMF `captures`), in order, the first at sample 0;
    /// a capture without a sidecar has one segment with no frequency.
    pub fn segments(&self) -> &[SigmfSegment] {
        &self.segments
    }

    /// Index into [`segments`](Self::segments) of the segment holding `sample`.
    pub fn segment_index_at(&self, sample: u64) -> usize {
        self.segments
            .partition_point(|s| s.sample_start <= sample)
            .saturating_sub(1)
    }

    /// What the SigMF metadata said, when there was a sidecar (or an archive).
    pub fn sigmf(&self) -> Option<&SigmfMeta> {
        self.sigmf.as_deref()
    }

    /// Notes made while opening: disagreeing sources, sidecars passed over.
    pub fn notes(&self) -> &[CaptureNote] {
        &self.notes
    }

    /// For a `.sigmf` archive: the name of the data member read in place.
    pub fn archive_member(&self) -> Option<&str> {
        self.archive_member.as_deref()
    }

    /// The zero point used for unsigned datatypes.
    pub fn unsigned_zero(&self) -> UnsignedZero {
        self.unsigned_zero
    }

    /// Byte offset one past the last sample byte (trailing bytes that do not
    /// make a whole sample excluded).
    pub fn data_end_bytes(&self) -> u64 {
        self.data_offset + self.len as u64 * self.container.bytes_per_sample() as u64
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
                    raw::decode_with(self.container, self.unsigned_zero, b, out)
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

/// Where [`Capture::write_annotations`] puts the annotations.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum AnnotationTarget {
    /// A new sidecar beside the data file
    /// ([`Capture::annotations_sidecar_path`]); the input is left alone.
    #[default]
    NewSidecar,
    /// The sidecar the capture was opened with, replaced atomically (only on
    /// the user's explicit request).
    InputSidecar,
}

impl Capture {
    /// The new sidecar [`write_annotations`](Self::write_annotations) writes by
    /// default: `DATA.annotations.sigmf-meta` beside the data file (the archive
    /// for a `.sigmf` archive), naming the data in `core:dataset`.
    pub fn annotations_sidecar_path(&self) -> PathBuf {
        let mut s = self.path.as_os_str().to_owned();
        s.push(".annotations.sigmf-meta");
        PathBuf::from(s)
    }

    /// Write `annotations` (sample indices from the first sample in the file)
    /// as SigMF annotations, atomically, and return the sidecar written.
    ///
    /// The document is the input sidecar's (every key kept; earlier annotations
    /// of this crate's namespace replaced, others kept), or, without one, a new
    /// one from what was resolved: the datatype (a WAV's equivalent), the
    /// sample rate and `center_freq_hz` (the caller's resolved values, used
    /// only when there is no sidecar). A new sidecar names the data file in
    /// `core:dataset` and gives `core:header_bytes` and `core:trailing_bytes`,
    /// so it describes the same samples whatever the input was (conforming
    /// recording, raw file, WAV or archive member).
    ///
    /// # Errors
    /// A 24-bit WAV (no SigMF datatype); [`AnnotationTarget::InputSidecar`]
    /// without a sidecar file or inside an archive; a file at the new name that
    /// this crate did not write ([`CaptureError::SidecarTaken`]); write errors.
    pub fn write_annotations(
        &self,
        annotations: &[SigmfAnnotation],
        target: AnnotationTarget,
        sample_rate_hz: Option<f64>,
        center_freq_hz: Option<f64>,
    ) -> Result<PathBuf, CaptureError> {
        let bad = |problem: String| CaptureError::BadWriteSpec {
            path: self.path.clone(),
            problem,
        };
        let offset = self.sigmf.as_ref().map_or(0, |m| m.offset);
        let (out, mut doc) = match target {
            AnnotationTarget::InputSidecar => {
                let (Some(sc), Some(meta)) = (&self.sidecar, &self.sigmf) else {
                    return Err(bad(
                        "no SigMF sidecar was read for this capture, so there is none to update; \
                         write a new one instead"
                            .into(),
                    ));
                };
                if self.archive_member.is_some() {
                    return Err(bad(
                        "the metadata is inside a .sigmf archive, which is never modified; \
                         write a new sidecar instead"
                            .into(),
                    ));
                }
                (sc.clone(), meta.document.clone())
            }
            AnnotationTarget::NewSidecar => {
                let out = self.annotations_sidecar_path();
                if out.exists() {
                    let ours = sigmf::read_sidecar(&out)
                        .map(|m| m.declares_own_extension())
                        .unwrap_or(false);
                    if !ours {
                        return Err(CaptureError::SidecarTaken {
                            path: self.path.clone(),
                            taken: format!(
                                "{} exists and was not written by iqaudit",
                                out.display()
                            ),
                        });
                    }
                }
                let datatype = match self.container {
                    Container::Raw(f) => f,
                    Container::Wav(enc) => wav_equivalent(enc).ok_or_else(|| {
                        bad(format!(
                            "no SigMF datatype stores WAV {enc} samples; no annotations written"
                        ))
                    })?,
                };
                let mut doc = match &self.sigmf {
                    Some(m) => m.document.clone(),
                    None => sigmf::sidecar_document(&sigmf::SidecarSpec {
                        datatype,
                        sample_rate_hz: self.sample_rate_hz.or(sample_rate_hz).unwrap_or(0.0),
                        center_freq_hz,
                        description: None,
                        dataset: None,
                        header_bytes: 0,
                        trailing_bytes: 0,
                        annotations: &[],
                    }),
                };
                if self.sigmf.is_none() && self.sample_rate_hz.or(sample_rate_hz).is_none() {
                    if let Some(Value::Object(g)) = doc.get_mut("global") {
                        g.remove("core:sample_rate");
                    }
                }
                let name = self
                    .path
                    .file_name()
                    .map(|n| n.to_string_lossy().into_owned())
                    .unwrap_or_default();
                let trailing = self.file_len_bytes().saturating_sub(self.data_end_bytes());
                if let Some(Value::Object(g)) = doc.get_mut("global") {
                    g.insert("core:dataset".into(), Value::from(name));
                    g.insert("core:datatype".into(), Value::from(datatype.name()));
                    if trailing > 0 {
                        g.insert("core:trailing_bytes".into(), Value::from(trailing));
                    } else {
                        g.remove("core:trailing_bytes");
                    }
                }
                if let Some(Value::Array(caps)) = doc.get_mut("captures") {
                    if caps.is_empty() {
                        caps.push(serde_json::json!({ "core:sample_start": offset }));
                    }
                    if let Some(Value::Object(c0)) = caps.first_mut() {
                        if self.data_offset > 0 {
                            c0.insert("core:header_bytes".into(), Value::from(self.data_offset));
                        } else {
                            c0.remove("core:header_bytes");
                        }
                    }
                }
                (out, doc)
            }
        };
        sigmf::set_annotations(&mut doc, annotations, offset);
        let text = sigmf::document_text(&doc);
        write::atomic_write(&out, |w| {
            use std::io::Write as _;
            w.write_all(text.as_bytes())
        })?;
        Ok(out)
    }
}

/// The layout of an opened capture, before the byte source is attached.
struct Resolved {
    container: Container,
    data_offset: u64,
    data_bytes: u64,
    format_source: FormatSource,
    sample_rate_hz: Option<f64>,
}

/// The SigMF datatype whose bytes a WAV encoding stores (24-bit PCM has none;
/// 8-bit PCM is `cu8` with the zero at 128).
pub(crate) fn wav_equivalent(enc: WavEncoding) -> Option<SampleFormat> {
    match enc {
        WavEncoding::Pcm8 => Some(SampleFormat::Cu8),
        WavEncoding::Pcm16 => Some(SampleFormat::Ci16Le),
        WavEncoding::Pcm24 => None,
        WavEncoding::Pcm32 => Some(SampleFormat::Ci32Le),
        WavEncoding::Float32 => Some(SampleFormat::Cf32Le),
        WavEncoding::Float64 => Some(SampleFormat::Cf64Le),
    }
}

/// Decide the layout of the data in `file` from `[base, end)` (the whole file,
/// or an archive member): a WAV by its header (never as raw samples); raw data
/// by the option, else the sidecar, else the extension of `data_path`; header
/// and trailing bytes from the sidecar. Appends notes on disagreements.
#[allow(clippy::too_many_arguments)]
fn resolve_layout(
    data_path: &Path,
    file: &mut File,
    end: u64,
    base: u64,
    is_wav: bool,
    sidecar: Option<(&Path, &SigmfMeta)>,
    opts: &OpenOptions,
    notes: &mut Vec<CaptureNote>,
) -> Result<Resolved, CaptureError> {
    let sidecar_rate = sidecar.and_then(|(_, m)| m.sample_rate_hz);
    if let Some((sp, m)) = sidecar {
        for u in &m.unknown_core_keys {
            notes.push(CaptureNote::UnknownSigmfCoreKey {
                sidecar: sp.to_path_buf(),
                object: u.object.clone(),
                key: u.key.clone(),
                more: u.more,
            });
        }
    }
    if is_wav {
        let layout = wav::read_header(file, data_path, end)?;
        if let Some(f) = opts.format {
            notes.push(CaptureNote::FormatOptionIgnoredForWav { format: f });
        }
        let wav_rate = f64::from(layout.sample_rate_hz);
        if let Some((sp, m)) = sidecar {
            let eq = wav_equivalent(layout.encoding);
            if eq != Some(m.datatype) {
                notes.push(CaptureNote::SidecarDisagreesWithWav {
                    sidecar: sp.to_path_buf(),
                    what: "core:datatype",
                    sidecar_says: m.datatype.to_string(),
                    wav_says: layout.encoding.to_string(),
                });
            }
            if m.header_bytes() != layout.data_offset {
                notes.push(CaptureNote::SidecarDisagreesWithWav {
                    sidecar: sp.to_path_buf(),
                    what: "core:header_bytes",
                    sidecar_says: m.header_bytes().to_string(),
                    wav_says: format!("data at byte {}", layout.data_offset),
                });
            }
            if let Some(r) = m.sample_rate_hz {
                if r != wav_rate && opts.sample_rate_hz.is_none() {
                    notes.push(CaptureNote::RateDisagrees {
                        used_from: sp.display().to_string(),
                        used_hz: r,
                        other_from: "the WAV header".into(),
                        other_hz: wav_rate,
                    });
                }
            }
        }
        return Ok(Resolved {
            container: Container::Wav(layout.encoding),
            data_offset: layout.data_offset,
            data_bytes: layout.data_bytes,
            format_source: FormatSource::WavHeader,
            sample_rate_hz: opts.sample_rate_hz.or(sidecar_rate).or(Some(wav_rate)),
        });
    }
    let (header, trailing) = sidecar.map_or((0, 0), |(_, m)| (m.header_bytes(), m.trailing_bytes));
    let avail = end - base;
    let data_bytes = header
        .checked_add(trailing)
        .and_then(|skip| avail.checked_sub(skip))
        .ok_or_else(|| CaptureError::SigmfBytes {
            path: data_path.to_path_buf(),
            sidecar: sidecar.map(|(p, _)| p.to_path_buf()).unwrap_or_default(),
            header_bytes: header,
            trailing_bytes: trailing,
            file_bytes: avail,
        })?;
    let by_ext = data_path
        .extension()
        .and_then(|e| e.to_str())
        .and_then(SampleFormat::from_extension);
    let (format, format_source) = match (opts.format, sidecar) {
        (Some(f), side) => {
            if let Some((sp, m)) = side {
                if m.datatype != f {
                    notes.push(CaptureNote::FormatOptionOverridesSidecar {
                        format: f,
                        sidecar: sp.to_path_buf(),
                        datatype: m.datatype,
                    });
                }
            }
            (f, FormatSource::Option)
        }
        (None, Some((sp, m))) => {
            if let Some(e) = by_ext {
                if e.family() != m.datatype.family() {
                    notes.push(CaptureNote::ExtensionContradictsDatatype {
                        data: data_path.to_path_buf(),
                        sidecar: sp.to_path_buf(),
                        datatype: m.datatype,
                        extension_means: e,
                    });
                }
            }
            (m.datatype, FormatSource::Sigmf)
        }
        (None, None) => match by_ext {
            Some(e) => (e, FormatSource::Extension),
            None => {
                return Err(CaptureError::UnknownFormat {
                    path: data_path.to_path_buf(),
                    accepted: SampleFormat::accepted_names(),
                })
            }
        },
    };
    Ok(Resolved {
        container: Container::Raw(format),
        data_offset: base + header,
        data_bytes,
        format_source,
        sample_rate_hz: opts.sample_rate_hz.or(sidecar_rate),
    })
}

/// The file holding the samples of the capture named `path`: a `.sigmf-meta`
/// path stands for its `.sigmf-data` recording, anything else for itself.
pub fn data_path_of(path: &Path) -> PathBuf {
    if sigmf::has_extension(path, "sigmf-meta") {
        path.with_extension("sigmf-data")
    } else {
        path.to_path_buf()
    }
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
            let cap = Capture::open_mapped(&p, &OpenOptions::default()).unwrap();
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
