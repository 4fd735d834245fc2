//! SigMF metadata: find, read and write `.sigmf-meta` sidecars and read `.sigmf`
//! archives.
//!
//! Takes in: the path of a recording (`NAME.sigmf-data`, any raw or WAV file,
//! `NAME.sigmf-meta` itself, or a `NAME.sigmf` archive). Gives out: a
//! [`SigmfMeta`] — the `global` `core:datatype` (as a [`SampleFormat`]),
//! `core:sample_rate` in Hz, `core:dataset` (the data file of a non-conforming
//! dataset), `core:trailing_bytes`, `core:offset` and every capture segment
//! (`core:sample_start`, `core:frequency` in Hz, `core:header_bytes`), plus the
//! whole document so that it can be written back with annotations.
//!
//! Rules (SigMF specification v1.2.5, shared/REFERENCE-VALUES.md §10):
//! - Unknown keys are ignored, as the specification requires of readers, and
//!   kept when a document is written back.
//! - Only single-channel complex datatypes are read; a real-valued datatype
//!   (`rf32_le`, `ri16_le`, `ru8`, …) is refused with a message saying that IQ
//!   needs complex samples.
//! - `core:sample_start` values are absolute sample indices: the file holds
//!   samples from `core:offset` on, so this crate's sample index `k` (from the
//!   first sample in the file) is SigMF index `k + core:offset`.
//! - `core:header_bytes` of the first capture segment is skipped before the first
//!   sample; header bytes in a later segment (data interleaved with headers) are
//!   refused with a message.
//! - A sidecar that names a `core:dataset` describes that file only.
//!
//! Sidecar names: the sidecar of `DIR/NAME.sigmf-data` is `DIR/NAME.sigmf-meta`
//! (a conforming recording). The sidecar of any other data file `DIR/NAME.EXT` is
//! looked for at `DIR/NAME.EXT.sigmf-meta`, then at `DIR/NAME.sigmf-meta`; one
//! whose `core:dataset` names another file is passed over (with a note). This
//! crate writes `core:dataset` into every sidecar of a non-conforming dataset and
//! never replaces a sidecar that describes another file: it writes
//! `NAME.sigmf-meta` when that is free or already describes the same file, else
//! `NAME.EXT.sigmf-meta`, else refuses.
//!
//! Annotations written by this crate use the `core:` keys for position, length,
//! label and frequency edges and this project's own extension namespace
//! [`EXTENSION_NAMESPACE`] (declared in `global.core:extensions`) for the rest;
//! docs/sigmf.md lists every key.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use serde_json::{json, Map, Value};

use super::{CaptureError, CaptureNote, SampleFormat};

/// The SigMF extension namespace of the keys this crate writes beside the
/// `core:` ones (`iqaudit:evm_rms_percent`, …; docs/sigmf.md).
pub const EXTENSION_NAMESPACE: &str = "iqaudit";

/// The version of the [`EXTENSION_NAMESPACE`] keys, as declared in
/// `global.core:extensions`.
pub const EXTENSION_VERSION: &str = "1.0.0";

/// The SigMF `core:version` written by this crate.
pub const SIGMF_VERSION: &str = "1.2.0";

/// One capture segment: from `sample_start` on, the recording was made at
/// `center_freq_hz`.
#[derive(Debug, Clone, PartialEq)]
pub struct SigmfSegment {
    /// First sample of the segment, counted from the first sample in the file
    /// (SigMF `core:sample_start` minus `core:offset`).
    pub sample_start: u64,
    /// `core:frequency`, Hz (null when the segment does not say).
    pub center_freq_hz: Option<f64>,
    /// `core:header_bytes` before this segment's samples.
    pub header_bytes: u64,
}

/// What a sidecar says about its recording.
#[derive(Debug, Clone, PartialEq)]
pub struct SigmfMeta {
    /// `global.core:datatype`.
    pub datatype: SampleFormat,
    /// `global.core:sample_rate`, Hz.
    pub sample_rate_hz: Option<f64>,
    /// `captures[0].core:frequency`, Hz.
    pub center_freq_hz: Option<f64>,
    /// `global.core:dataset`: the data file of a non-conforming dataset.
    pub dataset: Option<String>,
    /// `global.core:trailing_bytes`: bytes after the last sample.
    pub trailing_bytes: u64,
    /// `global.core:offset`: the SigMF index of the first sample in the file.
    pub offset: u64,
    /// Every capture segment, in order (at least one: a sidecar without
    /// captures has one segment at sample 0 with no frequency).
    pub segments: Vec<SigmfSegment>,
    /// The whole document as read (unknown keys included).
    pub document: Value,
    /// Keys in the `core` namespace that SigMF 1.x does not define for the
    /// object they sit in (a typo such as `core:sample_rat`): ignored like any
    /// other key the reader does not know, but listed so a note can name them
    /// (at most [`MAX_UNKNOWN_CORE_KEYS`] distinct ones).
    pub unknown_core_keys: Vec<UnknownCoreKey>,
}

/// A `core:` key that SigMF 1.x does not define where it sits.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct UnknownCoreKey {
    /// The first object it sits in: `global`, `captures[2]`, `annotations[7]`.
    pub object: String,
    /// The key, as a short escaped excerpt (the sidecar is not the user's file).
    pub key: String,
    /// Further objects of the same kind (`captures` / `annotations`) holding it.
    pub more: usize,
}

/// Distinct unknown `core:` keys listed per sidecar (further ones are not).
pub const MAX_UNKNOWN_CORE_KEYS: usize = 16;

/// The `core` keys SigMF 1.x defines for the global object (the metadata
/// schema `sigmf-schema.json` of v1.2.2; shared/REFERENCE-VALUES.md §10).
pub const GLOBAL_CORE_KEYS: &[&str] = &[
    "core:author",
    "core:collection",
    "core:data_doi",
    "core:dataset",
    "core:datatype",
    "core:description",
    "core:extensions",
    "core:geolocation",
    "core:hw",
    "core:license",
    "core:meta_doi",
    "core:metadata_only",
    "core:num_channels",
    "core:offset",
    "core:recorder",
    "core:sample_rate",
    "core:sha512",
    "core:trailing_bytes",
    "core:version",
];

/// The `core` keys SigMF 1.x defines for a capture segment object.
pub const CAPTURE_CORE_KEYS: &[&str] = &[
    "core:datetime",
    "core:frequency",
    "core:geolocation",
    "core:global_index",
    "core:header_bytes",
    "core:sample_start",
];

/// The `core` keys SigMF 1.x defines for an annotation segment object.
pub const ANNOTATION_CORE_KEYS: &[&str] = &[
    "core:comment",
    "core:freq_lower_edge",
    "core:freq_upper_edge",
    "core:generator",
    "core:label",
    "core:sample_count",
    "core:sample_start",
    "core:uuid",
];

/// Every `core:` key of the document's global, capture and annotation
/// objects that SigMF 1.x does not define there (global first, then captures,
/// then annotations), one entry per (kind of object, key).
fn unknown_core_keys(root: &Value) -> Vec<UnknownCoreKey> {
    let mut out: Vec<(String, UnknownCoreKey)> = Vec::new();
    let mut scan =
        |kind: &str, object: String, obj: &serde_json::Map<String, Value>, known: &[&str]| {
            for key in obj.keys() {
                if !key.starts_with("core:") || known.contains(&key.as_str()) {
                    continue;
                }
                let short_key = short(key);
                if let Some((_, u)) = out
                    .iter_mut()
                    .find(|(k, u)| k == kind && u.key == short_key)
                {
                    u.more += 1;
                } else if out.len() < MAX_UNKNOWN_CORE_KEYS {
                    out.push((
                        kind.to_string(),
                        UnknownCoreKey {
                            object: object.clone(),
                            key: short_key,
                            more: 0,
                        },
                    ));
                }
            }
        };
    if let Some(g) = root.get("global").and_then(Value::as_object) {
        scan("global", "global".into(), g, GLOBAL_CORE_KEYS);
    }
    for (kind, known) in [
        ("captures", CAPTURE_CORE_KEYS),
        ("annotations", ANNOTATION_CORE_KEYS),
    ] {
        if let Some(items) = root.get(kind).and_then(Value::as_array) {
            for (i, item) in items.iter().enumerate() {
                if let Some(obj) = item.as_object() {
                    scan(kind, format!("{kind}[{i}]"), obj, known);
                }
            }
        }
    }
    out.into_iter().map(|(_, u)| u).collect()
}

impl SigmfMeta {
    /// Bytes before the first sample (`captures[0].core:header_bytes`).
    pub fn header_bytes(&self) -> u64 {
        self.segments.first().map_or(0, |s| s.header_bytes)
    }

    /// True when the document declares this crate's extension namespace.
    pub fn declares_own_extension(&self) -> bool {
        declares_own_extension(&self.document)
    }
}

fn declares_own_extension(doc: &Value) -> bool {
    doc.get("global")
        .and_then(|g| g.get("core:extensions"))
        .and_then(Value::as_array)
        .is_some_and(|a| {
            a.iter()
                .any(|e| e.get("name").and_then(Value::as_str) == Some(EXTENSION_NAMESPACE))
        })
}

/// One annotation to write: a detected (or, for `synth`, a known) burst.
#[derive(Debug, Clone, PartialEq)]
pub struct SigmfAnnotation {
    /// First sample, counted from the first sample in the file (the writer adds
    /// `core:offset`).
    pub sample_start: u64,
    /// `core:sample_count`.
    pub sample_count: u64,
    /// `core:label`.
    pub label: String,
    /// `core:freq_lower_edge`, Hz.
    pub freq_lower_edge_hz: Option<f64>,
    /// `core:freq_upper_edge`, Hz.
    pub freq_upper_edge_hz: Option<f64>,
    /// `core:comment`.
    pub comment: Option<String>,
    /// Keys of this crate's namespace, written as `iqaudit:KEY` (KEY without the
    /// prefix), sorted.
    pub extension: BTreeMap<String, Value>,
}

impl SigmfAnnotation {
    fn to_json(&self, offset: u64) -> Value {
        let mut m = Map::new();
        m.insert(
            "core:sample_start".into(),
            json!(self.sample_start.saturating_add(offset)),
        );
        m.insert("core:sample_count".into(), json!(self.sample_count));
        m.insert("core:label".into(), json!(self.label));
        if let (Some(lo), Some(hi)) = (self.freq_lower_edge_hz, self.freq_upper_edge_hz) {
            if lo.is_finite() && hi.is_finite() {
                m.insert("core:freq_lower_edge".into(), json!(lo.min(hi)));
                m.insert("core:freq_upper_edge".into(), json!(lo.max(hi)));
            }
        }
        if let Some(c) = &self.comment {
            m.insert("core:comment".into(), json!(c));
        }
        m.insert("core:generator".into(), json!(recorder()));
        for (k, v) in &self.extension {
            m.insert(format!("{EXTENSION_NAMESPACE}:{k}"), v.clone());
        }
        Value::Object(m)
    }
}

fn recorder() -> &'static str {
    concat!("iqaudit ", env!("CARGO_PKG_VERSION"))
}

/// The conforming sidecar path for a recording: `NAME.sigmf-meta` where `NAME`
/// is the data path without its extension.
pub(crate) fn sidecar_path(data_path: &Path) -> PathBuf {
    data_path.with_extension("sigmf-meta")
}

/// `PATH.sigmf-meta` (the extension kept): the collision-proof name.
fn long_sidecar_path(data_path: &Path) -> PathBuf {
    let mut b = data_path.as_os_str().to_owned();
    b.push(".sigmf-meta");
    PathBuf::from(b)
}

fn file_name(p: &Path) -> String {
    p.file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default()
}

pub(crate) fn has_extension(path: &Path, ext: &str) -> bool {
    path.extension()
        .and_then(|e| e.to_str())
        .is_some_and(|e| e.eq_ignore_ascii_case(ext))
}

/// Whether the sidecar `meta` (at `meta_path`) describes the data file
/// `data_path`: it names it in `core:dataset`, or it names no dataset and
/// either is the conforming sidecar of `NAME.sigmf-data` or sits beside a data
/// file with no conforming `.sigmf-data` twin.
fn describes(meta: &SigmfMeta, meta_path: &Path, data_path: &Path) -> bool {
    match &meta.dataset {
        Some(d) => Path::new(d).file_name() == data_path.file_name(),
        None => {
            if has_extension(data_path, "sigmf-data") {
                return true;
            }
            // `NAME.sigmf-meta` without core:dataset is the sidecar of
            // `NAME.sigmf-data` when that exists.
            let twin = meta_path.with_extension("sigmf-data");
            !(twin.is_file() && twin != data_path)
        }
    }
}

/// The sidecar beside `data_path` that describes it, if any, read; and notes on
/// sidecars passed over because they describe another file.
pub(crate) fn find_sidecar(
    data_path: &Path,
    notes: &mut Vec<CaptureNote>,
) -> Result<Option<(PathBuf, SigmfMeta)>, CaptureError> {
    let candidates = if has_extension(data_path, "sigmf-data") {
        vec![sidecar_path(data_path)]
    } else {
        vec![long_sidecar_path(data_path), sidecar_path(data_path)]
    };
    for c in candidates {
        // Absent: not a sidecar. Present but not a regular file (a FIFO, a
        // folder, a device): refused by `read_sidecar`, naming it, rather than
        // silently reading the capture without the metadata meant for it.
        if c == data_path || c.symlink_metadata().is_err() {
            continue;
        }
        let meta = read_sidecar(&c)?;
        if describes(&meta, &c, data_path) {
            return Ok(Some((c, meta)));
        }
        notes.push(CaptureNote::SidecarForAnotherFile {
            sidecar: c.clone(),
            describes: meta
                .dataset
                .clone()
                .unwrap_or_else(|| file_name(&c.with_extension("sigmf-data"))),
        });
    }
    Ok(None)
}

/// The name to write the sidecar of `data_path` under: `NAME.sigmf-meta` when it
/// is free or already describes this file; else `NAME.EXT.sigmf-meta` on the
/// same terms; else an error naming both. A sidecar that cannot be read counts
/// as taken.
pub(crate) fn choose_sidecar_path(data_path: &Path) -> Result<PathBuf, CaptureError> {
    let short = sidecar_path(data_path);
    let candidates = if has_extension(data_path, "sigmf-data") {
        vec![short]
    } else {
        vec![short, long_sidecar_path(data_path)]
    };
    let mut taken = Vec::new();
    for c in &candidates {
        if !c.exists() {
            return Ok(c.clone());
        }
        match read_sidecar(c) {
            Ok(m) if m.dataset.is_some() && describes(&m, c, data_path) => return Ok(c.clone()),
            Ok(m) if has_extension(data_path, "sigmf-data") && describes(&m, c, data_path) => {
                return Ok(c.clone())
            }
            Ok(m) => taken.push(format!(
                "{} (describes {})",
                c.display(),
                m.dataset.unwrap_or_else(
                    || file_name(&c.with_extension("sigmf-data")) + " or another file"
                )
            )),
            Err(_) => taken.push(format!("{} (not a readable sidecar)", c.display())),
        }
    }
    Err(CaptureError::SidecarTaken {
        path: data_path.to_path_buf(),
        taken: taken.join("; "),
    })
}

/// Largest sidecar read (metadata files are small; this bounds memory).
pub(crate) const MAX_SIDECAR_BYTES: u64 = 64 << 20;

/// Read and interpret the sidecar at `path`.
pub(crate) fn read_sidecar(path: &Path) -> Result<SigmfMeta, CaptureError> {
    let open_err = |source| CaptureError::Open {
        path: path.to_path_buf(),
        source,
    };
    // A regular file only, checked on the open descriptor (never blocks on
    // a FIFO, never reads a device), and never more than the cap.
    let (file, len) = crate::limits::open_regular(path).map_err(open_err)?;
    if len > MAX_SIDECAR_BYTES {
        return Err(CaptureError::SigmfJson {
            path: path.to_path_buf(),
            problem: format!("{len} bytes is too large for a metadata file"),
        });
    }
    let mut bytes = Vec::new();
    std::io::Read::read_to_end(
        &mut std::io::Read::take(file, MAX_SIDECAR_BYTES),
        &mut bytes,
    )
    .map_err(open_err)?;
    parse_sidecar_bytes(&bytes, path)
}

/// [`parse_sidecar`] on bytes that must be UTF-8.
pub(crate) fn parse_sidecar_bytes(bytes: &[u8], path: &Path) -> Result<SigmfMeta, CaptureError> {
    let text = std::str::from_utf8(bytes).map_err(|e| CaptureError::SigmfJson {
        path: path.to_path_buf(),
        problem: format!("not UTF-8 (byte {})", e.valid_up_to()),
    })?;
    parse_sidecar(text, path)
}

/// Whether `name` is a real-valued SigMF datatype name (`rf32_le`, `ri16_be`,
/// `ru8`, …).
fn is_real_datatype(name: &str) -> bool {
    let Some(rest) = name.strip_prefix('r') else {
        return false;
    };
    let c = format!("c{rest}");
    c.parse::<SampleFormat>().is_ok()
}

fn u64_key(
    obj: &Map<String, Value>,
    key: &str,
    full: &str,
    path: &Path,
) -> Result<Option<u64>, CaptureError> {
    match obj.get(key) {
        None | Some(Value::Null) => Ok(None),
        Some(v) => v.as_u64().map(Some).ok_or_else(|| CaptureError::SigmfKey {
            path: path.to_path_buf(),
            key: full.to_string(),
            problem: format!("{} is not a non-negative integer", short(v)),
        }),
    }
}

/// A value from the sidecar as quoted in an error: at most 40 characters,
/// escaped (a sidecar is not a file the user wrote; a 1 MB string in it must
/// not become a 1 MB message).
fn short(v: &(impl std::fmt::Display + ?Sized)) -> String {
    crate::text::excerpt(&v.to_string(), 40)
}

/// Interpret sidecar text; `path` is only used in errors. Guarantees: a
/// sample rate, when present, is finite and > 0; frequencies are finite;
/// segments start in non-decreasing order, the first one at or after
/// `core:offset`; only the first segment has header bytes.
pub fn parse_sidecar(text: &str, path: &Path) -> Result<SigmfMeta, CaptureError> {
    // Strict JSON (no key given twice); keys SigMF does not define are still
    // ignored, as the standard requires of a compliant reader.
    let root: Value = crate::json::parse_strict(text).map_err(|e| CaptureError::SigmfJson {
        path: path.to_path_buf(),
        problem: e.to_string(),
    })?;
    let key_err = |key: &str, problem: &str| CaptureError::SigmfKey {
        path: path.to_path_buf(),
        key: key.to_string(),
        problem: problem.to_string(),
    };
    let global = root
        .get("global")
        .and_then(Value::as_object)
        .ok_or_else(|| key_err("global", "missing or not an object"))?;
    let dt = global
        .get("core:datatype")
        .ok_or_else(|| key_err("global.core:datatype", "missing (required by SigMF)"))?
        .as_str()
        .ok_or_else(|| key_err("global.core:datatype", "not a string"))?;
    let datatype = match dt.parse::<SampleFormat>() {
        Ok(f) => f,
        Err(_) if is_real_datatype(dt) => {
            return Err(CaptureError::SigmfRealDatatype {
                path: path.to_path_buf(),
                found: short(dt),
            })
        }
        Err(_) => {
            return Err(CaptureError::SigmfDatatype {
                path: path.to_path_buf(),
                found: short(dt),
                supported: SampleFormat::accepted_names(),
            })
        }
    };
    if let Some(ch) = global.get("core:num_channels") {
        if ch.as_u64() != Some(1) {
            return Err(key_err(
                "global.core:num_channels",
                &format!(
                    "{} channels; only single-channel complex recordings are supported",
                    short(ch)
                ),
            ));
        }
    }
    let sample_rate_hz = match global.get("core:sample_rate") {
        None | Some(Value::Null) => None,
        Some(v) => match v.as_f64() {
            Some(r) if crate::limits::check_rate_hz(r).is_ok() => Some(r),
            _ => {
                return Err(key_err(
                    "global.core:sample_rate",
                    &format!(
                        "{} is not a positive number of samples per second (expected a finite rate in [1, 1e12] Hz)",
                        short(v)
                    ),
                ))
            }
        },
    };
    let dataset = match global.get("core:dataset") {
        None | Some(Value::Null) => None,
        Some(Value::String(s)) => {
            let name = Path::new(s).file_name().map(|n| n.to_string_lossy());
            // A file name in the sidecar's own folder (SigMF: "the full filename").
            if s.is_empty() || s.len() > 255 || name.as_deref() != Some(s.as_str()) {
                return Err(key_err(
                    "global.core:dataset",
                    &format!(
                        "'{}' is not a plain file name in the sidecar's folder",
                        short(s)
                    ),
                ));
            }
            Some(s.clone())
        }
        Some(v) => {
            return Err(key_err(
                "global.core:dataset",
                &format!("{} is not a string", short(v)),
            ))
        }
    };
    let trailing_bytes = u64_key(
        global,
        "core:trailing_bytes",
        "global.core:trailing_bytes",
        path,
    )?
    .unwrap_or(0);
    let offset = u64_key(global, "core:offset", "global.core:offset", path)?.unwrap_or(0);
    let mut segments = Vec::new();
    match root.get("captures") {
        None | Some(Value::Null) => {}
        Some(Value::Array(caps)) => {
            for (i, c) in caps.iter().enumerate() {
                let obj = c
                    .as_object()
                    .ok_or_else(|| key_err(&format!("captures[{i}]"), "not an object"))?;
                let k = |name: &str| format!("captures[{i}].{name}");
                let start = match u64_key(obj, "core:sample_start", &k("core:sample_start"), path)?
                {
                    Some(s) => s,
                    None if i == 0 => offset,
                    None => {
                        return Err(key_err(
                            &k("core:sample_start"),
                            "missing (required by SigMF)",
                        ))
                    }
                };
                let start = start.checked_sub(offset).ok_or_else(|| {
                    key_err(
                        &k("core:sample_start"),
                        &format!("{start} lies before global.core:offset {offset}"),
                    )
                })?;
                if let Some(prev) = segments.last().map(|s: &SigmfSegment| s.sample_start) {
                    if start < prev {
                        return Err(key_err(
                            &k("core:sample_start"),
                            "capture segments must be in increasing core:sample_start order",
                        ));
                    }
                }
                let center_freq_hz = match obj.get("core:frequency") {
                    None | Some(Value::Null) => None,
                    Some(v) => match v.as_f64() {
                        Some(f) if crate::limits::check_frequency_hz(f).is_ok() => Some(f),
                        _ => {
                            return Err(key_err(
                                &k("core:frequency"),
                                &format!(
                                    "{} is not a frequency in Hz (expected a finite number in [-1e12, 1e12])",
                                    short(v)
                                ),
                            ))
                        }
                    },
                };
                let header_bytes =
                    u64_key(obj, "core:header_bytes", &k("core:header_bytes"), path)?.unwrap_or(0);
                if i > 0 && header_bytes > 0 {
                    return Err(key_err(
                        &k("core:header_bytes"),
                        &format!(
                            "{header_bytes} header bytes inside the data (between capture segments) \
                             are not supported; only the first segment may have header bytes"
                        ),
                    ));
                }
                segments.push(SigmfSegment {
                    sample_start: start,
                    center_freq_hz,
                    header_bytes,
                });
            }
        }
        Some(_) => return Err(key_err("captures", "not an array")),
    }
    if segments.first().map_or(true, |s| s.sample_start > 0) {
        // Samples before the first segment belong to no segment: give them one
        // with what is known (nothing).
        segments.insert(
            0,
            SigmfSegment {
                sample_start: 0,
                center_freq_hz: None,
                header_bytes: 0,
            },
        );
        if segments.len() > 1 {
            segments[0].header_bytes = std::mem::take(&mut segments[1].header_bytes);
        }
    }
    match root.get("annotations") {
        None | Some(Value::Null) | Some(Value::Array(_)) => {}
        Some(_) => return Err(key_err("annotations", "not an array")),
    }
    Ok(SigmfMeta {
        datatype,
        sample_rate_hz,
        center_freq_hz: segments.first().and_then(|s| s.center_freq_hz),
        dataset,
        trailing_bytes,
        offset,
        segments,
        unknown_core_keys: unknown_core_keys(&root),
        document: root,
    })
}

/// What a sidecar written by this crate says.
#[derive(Debug, Clone)]
pub(crate) struct SidecarSpec<'a> {
    /// `core:datatype`.
    pub datatype: SampleFormat,
    /// `core:sample_rate`, Hz.
    pub sample_rate_hz: f64,
    /// `captures[0].core:frequency`, Hz.
    pub center_freq_hz: Option<f64>,
    /// `core:description`.
    pub description: Option<&'a str>,
    /// `core:dataset`: the data file's name (None for `NAME.sigmf-data`).
    pub dataset: Option<String>,
    /// `captures[0].core:header_bytes` (0: not written).
    pub header_bytes: u64,
    /// `core:trailing_bytes` (0: not written).
    pub trailing_bytes: u64,
    /// Annotations (none: an empty list).
    pub annotations: &'a [SigmfAnnotation],
}

/// The document of a sidecar written by this crate (SigMF core:version 1.2.0,
/// one capture segment at sample 0).
pub(crate) fn sidecar_document(spec: &SidecarSpec<'_>) -> Value {
    let mut global = Map::new();
    global.insert("core:datatype".into(), json!(spec.datatype.name()));
    global.insert("core:sample_rate".into(), json!(spec.sample_rate_hz));
    global.insert("core:version".into(), json!(SIGMF_VERSION));
    global.insert("core:recorder".into(), json!(recorder()));
    if let Some(d) = spec.description {
        global.insert("core:description".into(), json!(d));
    }
    if let Some(d) = &spec.dataset {
        global.insert("core:dataset".into(), json!(d));
    }
    if spec.trailing_bytes > 0 {
        global.insert("core:trailing_bytes".into(), json!(spec.trailing_bytes));
    }
    let mut cap = Map::new();
    cap.insert("core:sample_start".into(), json!(0));
    if let Some(f) = spec.center_freq_hz {
        cap.insert("core:frequency".into(), json!(f));
    }
    if spec.header_bytes > 0 {
        cap.insert("core:header_bytes".into(), json!(spec.header_bytes));
    }
    let mut root = json!({ "global": global, "captures": [cap], "annotations": [] });
    set_annotations(&mut root, spec.annotations, 0);
    root
}

/// Replace the annotations this crate wrote earlier (those with a key of its
/// namespace) of the kinds being written (`iqaudit:kind`: `detected` bursts
/// replace earlier detected ones and leave `synth`'s `truth`; an annotation of
/// ours without a kind is always replaced) by `annotations` (sample indices
/// from the first sample in the file; `offset` = `core:offset` is added), keep
/// every other annotation, sort
/// by `core:sample_start` and declare the namespace in `core:extensions` when
/// any annotation uses it.
pub(crate) fn set_annotations(doc: &mut Value, annotations: &[SigmfAnnotation], offset: u64) {
    let prefix = format!("{EXTENSION_NAMESPACE}:");
    let ours = |a: &Value| {
        a.as_object()
            .is_some_and(|o| o.keys().any(|k| k.starts_with(&prefix)))
    };
    let kinds: std::collections::BTreeSet<&str> = annotations
        .iter()
        .filter_map(|a| a.extension.get("kind").and_then(Value::as_str))
        .collect();
    let kind_key = format!("{prefix}kind");
    let replaced = |a: &Value| {
        ours(a)
            && match a.get(&kind_key).and_then(Value::as_str) {
                Some(k) => kinds.is_empty() || kinds.contains(k),
                None => true,
            }
    };
    let Some(root) = doc.as_object_mut() else {
        return;
    };
    let mut list: Vec<Value> = match root.remove("annotations") {
        Some(Value::Array(a)) => a.into_iter().filter(|a| !replaced(a)).collect(),
        _ => Vec::new(),
    };
    list.extend(annotations.iter().map(|a| a.to_json(offset)));
    list.sort_by_key(|a| a.get("core:sample_start").and_then(Value::as_u64));
    let uses_ns = list.iter().any(ours);
    root.insert("annotations".into(), Value::Array(list));
    if uses_ns && !declares_own_extension(&Value::Object(root.clone())) {
        if let Some(Value::Object(g)) = root.get_mut("global") {
            let ext = g
                .entry("core:extensions")
                .or_insert_with(|| Value::Array(Vec::new()));
            if !ext.is_array() {
                *ext = Value::Array(Vec::new());
            }
            if let Value::Array(a) = ext {
                a.push(json!({
                    "name": EXTENSION_NAMESPACE,
                    "version": EXTENSION_VERSION,
                    "optional": true
                }));
            }
        }
    }
}

/// Pretty JSON text with a final newline.
pub(crate) fn document_text(doc: &Value) -> String {
    let mut s = serde_json::to_string_pretty(doc).unwrap_or_default();
    s.push('\n');
    s
}
#[cfg(test)]
mod tests {
    use super::*;

    // Source: SigMF specification v1.2.5 (shared/REFERENCE-VALUES.md §10): the
    // required top-level objects, `core:datatype`, `core:sample_rate` in global,
    // `core:frequency` in captures; readers ignore keys they do not know.
    #[test]
    fn a_spec_shaped_sidecar_gives_datatype_rate_and_frequency_and_unknown_keys_are_ignored() {
        let text = r#"{"global":{"core:datatype":"ci16_le","core:sample_rate":2.4e6,
            "core:version":"1.2.0","vendor:thing":7},
            "captures":[{"core:sample_start":0,"core:frequency":433.92e6}],
            "annotations":[], "extra_object": {}}"#;
        let m = parse_sidecar(text, Path::new("a.sigmf-meta")).unwrap();
        assert_eq!(m.datatype, SampleFormat::Ci16Le);
        assert_eq!(m.sample_rate_hz, Some(2.4e6));
        assert_eq!(m.center_freq_hz, Some(433.92e6));
    }

    // Source: SigMF v1.2.x metadata schema (`sigmf-schema.json`) and
    // shared/REFERENCE-VALUES.md §10: the core namespace has a fixed key list
    // per object; other namespaces (`vendor:`) are extensions a reader ignores.
    #[test]
    fn core_keys_the_standard_does_not_define_are_listed_by_object_and_the_read_still_succeeds() {
        let long = "x".repeat(10_000);
        let text = format!(
            r#"{{"global":{{"core:datatype":"ci16_le","core:sample_rat":2.4e6,
            "core:version":"1.2.0","core:sha512":"00","vendor:sample_rat":1,"core:{long}":0}},
            "captures":[{{"core:sample_start":0,"core:frequncy":433.92e6,"core:datetime":"x"}},
                        {{"core:sample_start":10,"core:frequncy":1.0}}],
            "annotations":[{{"core:sample_start":0,"core:lable":"a","core:uuid":"u"}},
                           {{"core:sample_start":1,"core:lable":"b"}},
                           {{"core:sample_start":2,"core:lable":"c"}}]}}"#
        );
        let m = parse_sidecar(&text, Path::new("a.sigmf-meta")).unwrap();
        assert_eq!(m.sample_rate_hz, None, "a typo is not read as the rate");
        assert_eq!(m.center_freq_hz, None);
        let got: Vec<(&str, &str, usize)> = m
            .unknown_core_keys
            .iter()
            .map(|u| (u.object.as_str(), u.key.as_str(), u.more))
            .collect();
        assert_eq!(got.len(), 4, "{got:?}");
        assert_eq!(got[0], ("global", "core:sample_rat", 0));
        assert_eq!(got[1].0, "global");
        assert!(got[1].1.chars().count() <= 41, "excerpted: {}", got[1].1);
        assert_eq!(got[2], ("captures[0]", "core:frequncy", 1));
        assert_eq!(got[3], ("annotations[0]", "core:lable", 2));
        // Every key this crate writes, and every key the standard defines, is known.
        let clean = r#"{"global":{"core:datatype":"ci16_le","core:version":"1.2.0",
            "core:author":"a","core:collection":"c","core:data_doi":"d","core:description":"d",
            "core:extensions":[],"core:geolocation":{"type":"Point","coordinates":[0,0]},
            "core:hw":"h","core:license":"l","core:meta_doi":"m","core:metadata_only":false,
            "core:num_channels":1,"core:offset":0,"core:recorder":"r","core:sample_rate":1e6,
            "core:sha512":"0","core:trailing_bytes":0},
            "captures":[{"core:sample_start":0,"core:datetime":"t","core:frequency":1e6,
              "core:geolocation":{"type":"Point","coordinates":[0,0]},"core:global_index":0,
              "core:header_bytes":0}],
            "annotations":[{"core:sample_start":0,"core:sample_count":1,"core:comment":"c",
              "core:freq_lower_edge":0,"core:freq_upper_edge":1,"core:generator":"g",
              "core:label":"l","core:uuid":"u"}]}"#;
        let m = parse_sidecar(clean, Path::new("a.sigmf-meta")).unwrap();
        assert!(m.unknown_core_keys.is_empty(), "{:?}", m.unknown_core_keys);
        // At most MAX_UNKNOWN_CORE_KEYS distinct keys are listed.
        let many: String = (0..100).map(|i| format!(r#","core:k{i}":0"#)).collect();
        let text =
            format!(r#"{{"global":{{"core:datatype":"ci16_le","core:version":"1.2.0"{many}}}}}"#);
        let m = parse_sidecar(&text, Path::new("a.sigmf-meta")).unwrap();
        assert_eq!(m.unknown_core_keys.len(), MAX_UNKNOWN_CORE_KEYS);
    }

    #[test]
    fn unknown_datatypes_are_named_in_the_error_and_real_ones_say_iq_needs_complex() {
        for dt in ["ci12_le", "nonsense", "cf16_le"] {
            let text = format!(
                r#"{{"global":{{"core:datatype":"{dt}","core:version":"1.2.0"}},"captures":[],"annotations":[]}}"#
            );
            let e = parse_sidecar(&text, Path::new("a.sigmf-meta")).unwrap_err();
            assert!(e.to_string().contains(dt), "{e}");
            assert!(matches!(e, CaptureError::SigmfDatatype { .. }));
        }
        // SigMF v1.2.5: "r" datatypes are real-valued (one component per sample).
        for dt in ["rf32_le", "ri16_be", "ru8", "rf64_be", "ri32_le", "ru16_le"] {
            let text = format!(
                r#"{{"global":{{"core:datatype":"{dt}","core:version":"1.2.0"}},"captures":[],"annotations":[]}}"#
            );
            let e = parse_sidecar(&text, Path::new("a.sigmf-meta")).unwrap_err();
            assert!(
                matches!(e, CaptureError::SigmfRealDatatype { .. }),
                "{dt}: {e}"
            );
            let msg = e.to_string();
            assert!(msg.contains(dt) && msg.contains("complex"), "{msg}");
        }
    }

    #[test]
    fn every_complex_datatype_name_is_accepted() {
        // SigMF v1.2.5 dataset format: c{f64,f32,i32,i16,u32,u16}_{le,be}, ci8, cu8.
        for dt in [
            "cf64_le", "cf64_be", "cf32_le", "cf32_be", "ci32_le", "ci32_be", "ci16_le", "ci16_be",
            "cu32_le", "cu32_be", "cu16_le", "cu16_be", "ci8", "cu8",
        ] {
            let text = format!(r#"{{"global":{{"core:datatype":"{dt}"}}}}"#);
            let m = parse_sidecar(&text, Path::new("a.sigmf-meta")).unwrap();
            assert_eq!(m.datatype.name(), dt);
        }
    }

    #[test]
    fn written_sidecar_reads_back() {
        let ann = SigmfAnnotation {
            sample_start: 10,
            sample_count: 5,
            label: "burst 0".into(),
            freq_lower_edge_hz: Some(868e6 - 1e3),
            freq_upper_edge_hz: Some(868e6 + 1e3),
            comment: None,
            extension: BTreeMap::from([("evm_rms_percent".to_string(), json!(3.5))]),
        };
        let doc = sidecar_document(&SidecarSpec {
            datatype: SampleFormat::Cu8,
            sample_rate_hz: 1e6,
            center_freq_hz: Some(868e6),
            description: Some("crane link"),
            dataset: Some("x.cu8".into()),
            header_bytes: 16,
            trailing_bytes: 3,
            annotations: std::slice::from_ref(&ann),
        });
        let t = document_text(&doc);
        let m = parse_sidecar(&t, Path::new("x")).unwrap();
        assert_eq!(m.datatype, SampleFormat::Cu8);
        assert_eq!(m.sample_rate_hz, Some(1e6));
        assert_eq!(m.center_freq_hz, Some(868e6));
        assert_eq!(m.dataset.as_deref(), Some("x.cu8"));
        assert_eq!((m.header_bytes(), m.trailing_bytes), (16, 3));
        assert!(m.declares_own_extension());
        let v: Value = serde_json::from_str(&t).unwrap();
        assert_eq!(v["global"]["core:version"], "1.2.0");
        assert_eq!(v["captures"][0]["core:sample_start"], 0);
        let a = &v["annotations"][0];
        assert_eq!(a["core:sample_start"], 10);
        assert_eq!(a["core:sample_count"], 5);
        assert_eq!(a["iqaudit:evm_rms_percent"], 3.5);
        assert_eq!(v["global"]["core:extensions"][0]["name"], "iqaudit");
    }

    #[test]
    fn annotations_of_this_crate_are_replaced_and_others_kept() {
        let mut doc: Value = serde_json::from_str(
            r#"{"global":{"core:datatype":"cf32_le","core:offset":100},"captures":[],
                "annotations":[{"core:sample_start":150,"core:label":"theirs"},
                               {"core:sample_start":120,"iqaudit:kind":"detected"},
                               {"core:sample_start":130,"iqaudit:kind":"truth"}]}"#,
        )
        .unwrap();
        let ann = SigmfAnnotation {
            sample_start: 5,
            sample_count: 1,
            label: "burst 0".into(),
            freq_lower_edge_hz: None,
            freq_upper_edge_hz: None,
            comment: None,
            extension: BTreeMap::from([("kind".to_string(), json!("detected"))]),
        };
        set_annotations(&mut doc, &[ann], 100);
        let a = doc["annotations"].as_array().unwrap();
        // The old detected one is replaced; synth's truth and the other
        // program's annotation stay.
        assert_eq!(a.len(), 3);
        assert_eq!(a[0]["core:sample_start"], 105);
        assert_eq!(a[0]["iqaudit:kind"], "detected");
        assert_eq!(a[1]["iqaudit:kind"], "truth");
        assert_eq!(a[2]["core:label"], "theirs");
    }

    // SigMF v1.2.5: core:sample_start is absolute (from core:offset on); only
    // the first segment's header bytes are supported here.
    #[test]
    fn segments_are_relative_to_the_offset_and_later_header_bytes_are_refused() {
        let t = r#"{"global":{"core:datatype":"ci16_le","core:offset":1000},
            "captures":[{"core:sample_start":1000,"core:frequency":1e9,"core:header_bytes":2},
                        {"core:sample_start":1500,"core:frequency":1.1e9}]}"#;
        let m = parse_sidecar(t, Path::new("a")).unwrap();
        assert_eq!(m.segments.len(), 2);
        assert_eq!(m.segments[1].sample_start, 500);
        assert_eq!(m.segments[1].center_freq_hz, Some(1.1e9));
        assert_eq!(m.header_bytes(), 2);
        let t = r#"{"global":{"core:datatype":"ci16_le"},
            "captures":[{"core:sample_start":0},{"core:sample_start":10,"core:header_bytes":4}]}"#;
        let e = parse_sidecar(t, Path::new("a")).unwrap_err();
        assert!(
            e.to_string().contains("captures[1].core:header_bytes"),
            "{e}"
        );
        let t = r#"{"global":{"core:datatype":"ci16_le"},
            "captures":[{"core:sample_start":10},{"core:sample_start":5}]}"#;
        assert!(parse_sidecar(t, Path::new("a")).is_err());
        let t = r#"{"global":{"core:datatype":"ci16_le","core:dataset":"../x.ci16"}}"#;
        assert!(parse_sidecar(t, Path::new("a")).is_err());
    }

    #[test]
    fn invalid_json_and_missing_datatype_are_errors_with_the_key() {
        let p = Path::new("a.sigmf-meta");
        assert!(matches!(
            parse_sidecar("{\"global\": ", p),
            Err(CaptureError::SigmfJson { .. })
        ));
        let e = parse_sidecar(r#"{"global":{}}"#, p).unwrap_err();
        assert!(e.to_string().contains("core:datatype"), "{e}");
    }
}
