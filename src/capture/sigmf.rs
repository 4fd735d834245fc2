//! SigMF metadata sidecars: find, read and write `NAME.sigmf-meta`.
//!
//! Takes in: the path of a recording (`NAME.sigmf-data` or any raw file
//! `NAME.ext`). Gives out: the `global` `core:datatype` (as a [`SampleFormat`]),
//! `core:sample_rate` in Hz and the first capture segment's `core:frequency` in Hz.
//! Unknown keys are ignored, as the specification requires of readers
//! (shared/REFERENCE-VALUES.md §10, SigMF v1.2.5). Only single-channel complex
//! datatypes that [`SampleFormat`] names are supported; anything else is an
//! error naming the datatype found.

use std::path::{Path, PathBuf};

use serde_json::{json, Map, Value};

use super::{CaptureError, SampleFormat};

/// What a sidecar says about its recording.
#[derive(Debug, Clone, PartialEq)]
pub struct SigmfMeta {
    /// `global.core:datatype`.
    pub datatype: SampleFormat,
    /// `global.core:sample_rate`, Hz.
    pub sample_rate_hz: Option<f64>,
    /// `captures[0].core:frequency`, Hz.
    pub center_freq_hz: Option<f64>,
}

/// The sidecar path for a recording: `NAME.sigmf-meta` where `NAME` is the data
/// path without its extension (`x.sigmf-data` → `x.sigmf-meta`,
/// `x.cf32` → `x.sigmf-meta`).
pub(crate) fn sidecar_path(data_path: &Path) -> PathBuf {
    data_path.with_extension("sigmf-meta")
}

/// The sidecar beside `data_path`, if one exists: `NAME.sigmf-meta`, else
/// `NAME.ext.sigmf-meta`.
pub(crate) fn find_sidecar(data_path: &Path) -> Option<PathBuf> {
    let a = sidecar_path(data_path);
    if a != data_path && a.is_file() {
        return Some(a);
    }
    let mut b = data_path.as_os_str().to_owned();
    b.push(".sigmf-meta");
    let b = PathBuf::from(b);
    b.is_file().then_some(b)
}

/// Largest sidecar read (metadata files are small; this bounds memory).
const MAX_SIDECAR_BYTES: u64 = 64 << 20;

/// Read and interpret the sidecar at `path`.
pub(crate) fn read_sidecar(path: &Path) -> Result<SigmfMeta, CaptureError> {
    let open_err = |source| CaptureError::Open {
        path: path.to_path_buf(),
        source,
    };
    let len = std::fs::metadata(path).map_err(open_err)?.len();
    if len > MAX_SIDECAR_BYTES {
        return Err(CaptureError::SigmfJson {
            path: path.to_path_buf(),
            problem: format!("{len} bytes is too large for a metadata file"),
        });
    }
    let bytes = std::fs::read(path).map_err(open_err)?;
    let text = String::from_utf8(bytes).map_err(|e| CaptureError::SigmfJson {
        path: path.to_path_buf(),
        problem: format!("not UTF-8 (byte {})", e.utf8_error().valid_up_to()),
    })?;
    parse_sidecar(&text, path)
}

/// Interpret sidecar text; `path` is only used in errors. Guarantees: a
/// sample rate, when present, is finite and > 0; a centre frequency is finite.
pub fn parse_sidecar(text: &str, path: &Path) -> Result<SigmfMeta, CaptureError> {
    let root: Value = serde_json::from_str(text).map_err(|e| CaptureError::SigmfJson {
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
    let datatype = dt
        .parse::<SampleFormat>()
        .map_err(|_| CaptureError::SigmfDatatype {
            path: path.to_path_buf(),
            found: dt.to_string(),
            supported: SampleFormat::accepted_names(),
        })?;
    if let Some(ch) = global.get("core:num_channels") {
        if ch.as_u64() != Some(1) {
            return Err(key_err(
                "global.core:num_channels",
                &format!("{ch} channels; only single-channel complex recordings are supported"),
            ));
        }
    }
    let sample_rate_hz = match global.get("core:sample_rate") {
        None | Some(Value::Null) => None,
        Some(v) => match v.as_f64() {
            Some(r) if r.is_finite() && r > 0.0 => Some(r),
            _ => {
                return Err(key_err(
                    "global.core:sample_rate",
                    &format!("{v} is not a positive number of samples per second"),
                ))
            }
        },
    };
    let center_freq_hz = match root.get("captures") {
        None | Some(Value::Null) => None,
        Some(Value::Array(caps)) => match caps.first().and_then(|c| c.get("core:frequency")) {
            None | Some(Value::Null) => None,
            Some(v) => match v.as_f64() {
                Some(f) if f.is_finite() => Some(f),
                _ => {
                    return Err(key_err(
                        "captures[0].core:frequency",
                        &format!("{v} is not a frequency in Hz"),
                    ))
                }
            },
        },
        Some(_) => return Err(key_err("captures", "not an array")),
    };
    Ok(SigmfMeta {
        datatype,
        sample_rate_hz,
        center_freq_hz,
    })
}

/// Sidecar text for a recording written by this crate (SigMF core:version 1.2.0,
/// one capture segment at sample 0, no annotations). Keys are sorted.
pub(crate) fn sidecar_json(
    datatype: SampleFormat,
    sample_rate_hz: f64,
    center_freq_hz: Option<f64>,
    description: Option<&str>,
) -> String {
    let mut global = Map::new();
    global.insert("core:datatype".into(), json!(datatype.name()));
    global.insert("core:sample_rate".into(), json!(sample_rate_hz));
    global.insert("core:version".into(), json!("1.2.0"));
    global.insert(
        "core:recorder".into(),
        json!(concat!("iqaudit ", env!("CARGO_PKG_VERSION"))),
    );
    if let Some(d) = description {
        global.insert("core:description".into(), json!(d));
    }
    let mut cap = Map::new();
    cap.insert("core:sample_start".into(), json!(0));
    if let Some(f) = center_freq_hz {
        cap.insert("core:frequency".into(), json!(f));
    }
    let root = json!({ "global": global, "captures": [cap], "annotations": [] });
    let mut s = serde_json::to_string_pretty(&root).unwrap_or_default();
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

    #[test]
    fn real_and_32_bit_datatypes_are_named_in_the_error() {
        for dt in ["ri16_le", "ci32_le", "cu16_be", "nonsense"] {
            let text = format!(
                r#"{{"global":{{"core:datatype":"{dt}","core:version":"1.2.0"}},"captures":[],"annotations":[]}}"#
            );
            let e = parse_sidecar(&text, Path::new("a.sigmf-meta")).unwrap_err();
            assert!(e.to_string().contains(dt), "{e}");
            assert!(matches!(e, CaptureError::SigmfDatatype { .. }));
        }
    }

    #[test]
    fn written_sidecar_reads_back() {
        let t = sidecar_json(SampleFormat::Cu8, 1e6, Some(868e6), Some("crane link"));
        let m = parse_sidecar(&t, Path::new("x")).unwrap();
        assert_eq!(
            m,
            SigmfMeta {
                datatype: SampleFormat::Cu8,
                sample_rate_hz: Some(1e6),
                center_freq_hz: Some(868e6)
            }
        );
        let v: Value = serde_json::from_str(&t).unwrap();
        assert_eq!(v["global"]["core:version"], "1.2.0");
        assert_eq!(v["captures"][0]["core:sample_start"], 0);
        assert_eq!(v["annotations"], json!([]));
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
