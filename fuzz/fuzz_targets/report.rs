//! Fuzz target: the report parser `recheck` uses before it touches any file
//! (`recheck::parse_recorded_report`).
//!
//! Asserts, when accepted: the schema is `SCHEMA` (`iqaudit.report/4`); `input.sha256` is
//! 64 hex digits; the recorded profile passes `validate`; the typed report
//! serialises and reads back unchanged. When refused: an `Error::Report`
//! naming the report path.
#![no_main]

use iqaudit::recheck::parse_recorded_report;
use iqaudit::report::schema::{Report, SCHEMA};
use iqaudit::Error;
use libfuzzer_sys::fuzz_target;
use std::path::Path;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    match parse_recorded_report(text, Path::new("fuzz.json")) {
        Ok(r) => {
            assert_eq!(r.report.schema, SCHEMA);
            assert_eq!(r.report.input.sha256.len(), 64);
            assert!(r.report.input.sha256.bytes().all(|b| b.is_ascii_hexdigit()));
            r.profile.validate().expect("validated on parse");
            let json = serde_json::to_string(&r.report).expect("serialises");
            let back: Report = serde_json::from_str(&json).expect("reads back");
            assert_eq!(back, r.report);
        }
        Err(e) => {
            assert!(matches!(e, Error::Report { .. }), "{e:?}");
            assert!(e.to_string().starts_with("fuzz.json: "), "{e}");
        }
    }
});
