//! Fuzz target: link-profile parsing, resolution and symbol generation.
//!
//! Asserts, for every profile that resolves: it passes `validate` (the
//! invariants `resolve` promises, incl. the caps of `iqaudit::limits`); it
//! round-trips through JSON unchanged; the training has `length_symbols`
//! finite symbols; a known payload has exactly `before_symbols` +
//! `after_symbols` finite symbols. Every refusal names a key. Symbols files
//! are not read (the fuzzer must not read arbitrary paths); payloads longer
//! than 2^18 symbols are not generated, to keep executions fast (their cap is
//! checked by `validate`).
#![no_main]

use iqaudit::profile::{parse_profile, ResolvedPayloadRule, ResolvedProfile, ResolvedSequence};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    let resolved = match parse_profile(text).and_then(|p| p.resolve()) {
        Ok(r) => r,
        Err(e) => {
            assert!(e.key().is_some(), "{e}");
            return;
        }
    };
    resolved
        .validate()
        .expect("resolve's output passes validate");
    let json = serde_json::to_string(&resolved).expect("serialises");
    let back: ResolvedProfile = serde_json::from_str(&json).expect("reads back");
    assert_eq!(back, resolved);

    if !matches!(
        resolved.training.sequence,
        ResolvedSequence::SymbolsFile { .. }
    ) {
        match resolved.training_symbols() {
            Ok(t) => {
                assert_eq!(Some(t.len()), resolved.training.length_symbols);
                assert!(t.iter().all(|s| s.re.is_finite() && s.im.is_finite()));
            }
            Err(e) => assert!(e.key().is_some(), "{e}"),
        }
    }
    let total = resolved.payload_symbols_per_burst();
    let file = matches!(
        resolved.payload.known,
        Some(ResolvedPayloadRule::SymbolsFile { .. })
    );
    if !file && total <= 1 << 18 {
        match resolved.payload_symbols() {
            Ok(Some(p)) => {
                assert_eq!(p.before.len(), resolved.payload.before_symbols);
                assert_eq!(p.after.len(), resolved.payload.after_symbols);
                let all = p.before.iter().chain(&p.after);
                assert!(all.clone().all(|s| s.re.is_finite() && s.im.is_finite()));
            }
            Ok(None) => assert!(resolved.payload.known.is_none()),
            Err(e) => assert!(e.key().is_some(), "{e}"),
        }
    }
});
