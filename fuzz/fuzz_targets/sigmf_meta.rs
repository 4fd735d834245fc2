//! Fuzz target: the SigMF sidecar parser (`capture::parse_sigmf_meta`).
//!
//! Asserts, when accepted: the datatype is one of the supported names and
//! parses back to itself; a sample rate is finite and > 0; a centre frequency is
//! finite. When refused: a typed SigMF error naming the sidecar path.
#![no_main]

use iqaudit::capture::parse_sigmf_meta;
use iqaudit::{CaptureError, SampleFormat};
use libfuzzer_sys::fuzz_target;
use std::path::Path;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    match parse_sigmf_meta(text, Path::new("fuzz.sigmf-meta")) {
        Ok(m) => {
            assert!(SampleFormat::ALL.contains(&m.datatype));
            assert_eq!(m.datatype.name().parse::<SampleFormat>(), Ok(m.datatype));
            if let Some(r) = m.sample_rate_hz {
                assert!(r.is_finite() && r > 0.0, "{r}");
            }
            if let Some(f) = m.center_freq_hz {
                assert!(f.is_finite(), "{f}");
            }
        }
        Err(e) => {
            assert!(
                matches!(
                    e,
                    CaptureError::SigmfJson { .. }
                        | CaptureError::SigmfKey { .. }
                        | CaptureError::SigmfDatatype { .. }
                        | CaptureError::SigmfRealDatatype { .. }
                ),
                "{e:?}"
            );
            assert!(e.to_string().starts_with("fuzz.sigmf-meta: "), "{e}");
        }
    }
});
