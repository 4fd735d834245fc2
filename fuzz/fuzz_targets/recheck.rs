//! Fuzz target: `recheck` end to end on a report file (issue 16) — reading the
//! file (regular-file and size checks), parsing it strictly, locating and
//! checking the capture it names, and the error it gives.
//!
//! The input is written to `r.json` in a private temporary folder and handed
//! to `iqaudit::recheck::recheck`. Asserts: no panic, no hang (libFuzzer's
//! `-timeout`), and an error message never states the SHA-256 of a file the
//! report named (it says "differs"), and once escaped for the terminal holds
//! no control character.
#![no_main]

use std::sync::OnceLock;

use libfuzzer_sys::fuzz_target;

fn dir() -> &'static std::path::Path {
    static DIR: OnceLock<std::path::PathBuf> = OnceLock::new();
    DIR.get_or_init(|| {
        let d = std::env::temp_dir().join(format!("iqaudit-fuzz-recheck-{}", std::process::id()));
        std::fs::create_dir_all(&d).expect("temp folder");
        d
    })
}

fuzz_target!(|data: &[u8]| {
    let p = dir().join("r.json");
    if std::fs::write(&p, data).is_err() {
        return;
    }
    match iqaudit::recheck::recheck(&p) {
        Ok(_) => {}
        Err(e) => {
            let text = e.to_string();
            if let iqaudit::Error::InputChanged { .. } = e {
                assert!(text.contains("differs"), "{text}");
            }
            let shown = iqaudit::text::escape_controls(&text);
            assert!(!shown.chars().any(|c| c.is_control()), "{shown:?}");
        }
    }
});
