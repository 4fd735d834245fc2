//! Unit tests of profile parsing and resolution: every bad profile gives one
//! error naming the key, and the example profile resolves and round-trips.

use super::*;

fn example_json() -> String {
    serde_json::to_string_pretty(&example_profile(&ExampleOptions::default())).unwrap()
}

/// Replace the JSON value at a dotted path in the example profile.
fn example_with(path: &str, value: serde_json::Value) -> String {
    let mut v: serde_json::Value = serde_json::from_str(&example_json()).unwrap();
    let mut cur = &mut v;
    let keys: Vec<&str> = path.split('.').collect();
    for k in &keys[..keys.len() - 1] {
        cur = cur.get_mut(*k).unwrap();
    }
    cur.as_object_mut()
        .unwrap()
        .insert(keys[keys.len() - 1].to_string(), value);
    serde_json::to_string_pretty(&v).unwrap()
}

fn error_of(text: &str) -> ProfileError {
    match parse_profile(text).and_then(|p| p.resolve()) {
        Ok(_) => panic!("profile unexpectedly accepted:\n{text}"),
        Err(e) => e,
    }
}

#[test]
fn example_profile_resolves_and_round_trips_through_json() {
    let text = example_json();
    let parsed = parse_profile(&text).unwrap();
    assert_eq!(parsed, example_profile(&ExampleOptions::default()));
    let r = parsed.resolve().unwrap();
    assert_eq!(r.samples_per_symbol, 4);
    assert_eq!(r.symbol_rate_hz, Some(250_000.0));
    assert_eq!(r.payload.after_symbols, 1024);
    // The resolved profile also parses back into itself.
    let back: ResolvedProfile = serde_json::from_str(&serde_json::to_string(&r).unwrap()).unwrap();
    assert_eq!(back, r);
}

#[test]
fn minimal_profile_gets_every_default_filled_in() {
    let text = r#"{
        "samples_per_symbol": 4,
        "pulse": {"rolloff": 0.25},
        "training": {"sequence": {"kind": "prbs", "pattern": "prbs9", "length": 64}},
        "payload": {"modulation": "16qam", "length_symbols": 100}
    }"#;
    let r = parse_profile(text).unwrap().resolve().unwrap();
    assert_eq!(r.pulse.span_symbols, 12);
    assert_eq!(r.training.modulation, Some(Modulation::Qpsk));
    assert_eq!(
        r.training.sequence,
        ResolvedSequence::Prbs {
            pattern: Some(PrbsPattern::Prbs9),
            polynomial: [9, 5],
            seed: 511,
            inverted: false,
            length: 64
        }
    );
    assert_eq!(r.payload.position, PayloadPosition::After);
    assert_eq!(r.channel_fit.pre_cursor_taps, TapCount::Fixed(1));
    assert_eq!(r.channel_fit.post_cursor_taps, TapCount::Fixed(3));
    assert_eq!(r.equaliser.kind, EqualiserKind::MmseDfe);
    assert_eq!(r.equaliser.feedback_taps, 3);
    assert_eq!(r.equaliser.delay, Delay::Auto);
    assert_eq!(r.equaliser.tracking, Tracking::Off);
    assert_eq!(r.search.threshold, None);
    assert_eq!(r.search.max_cfo_hz, None);
    assert_eq!(r.search.max_cfo_hz_at(1e6, 4), 5000.0);
    assert_eq!(r.limits.ser_max, None);
}

#[test]
fn unknown_key_names_the_path_and_the_allowed_keys() {
    let e = error_of(&example_with("pulse.roloff", serde_json::json!(0.3)));
    assert_eq!(e.key(), Some("pulse.roloff"));
    let msg = e.to_string();
    assert!(msg.contains("unknown field `roloff`"), "{msg}");
    assert!(msg.contains("rolloff"), "allowed keys listed: {msg}");
    assert!(msg.contains("line "), "{msg}");
}

#[test]
fn unknown_modulation_names_the_key_and_the_allowed_values() {
    let e = error_of(&example_with(
        "payload.modulation",
        serde_json::json!("32qam"),
    ));
    assert_eq!(e.key(), Some("payload.modulation"));
    let msg = e.to_string();
    assert!(
        msg.contains("32qam") && msg.contains("16qam") && msg.contains("256qam"),
        "{msg}"
    );
}

#[test]
fn unknown_prbs_pattern_names_the_sequence_key() {
    let e = error_of(&example_with(
        "training.sequence",
        serde_json::json!({"kind": "prbs", "pattern": "prbs8", "length": 64}),
    ));
    let msg = e.to_string();
    assert!(e.key().unwrap().starts_with("training.sequence"), "{msg}");
    assert!(msg.contains("prbs8") && msg.contains("prbs9"), "{msg}");
}

#[test]
fn zero_samples_per_symbol_is_rejected() {
    let e = error_of(&example_with("samples_per_symbol", serde_json::json!(0)));
    assert_eq!(e.key(), Some("samples_per_symbol"));
}

#[test]
fn rolloff_outside_zero_to_one_is_rejected_and_one_is_accepted() {
    for bad in [0.0, -0.1, 1.01, 7.0] {
        let e = error_of(&example_with("pulse.rolloff", serde_json::json!(bad)));
        assert_eq!(e.key(), Some("pulse.rolloff"), "{bad}");
        assert!(e.to_string().contains("(0, 1]"), "{e}");
    }
    let ok = example_with("pulse.rolloff", serde_json::json!(1.0));
    assert!(parse_profile(&ok).unwrap().resolve().is_ok());
}

#[test]
fn training_shorter_than_the_channel_fit_needs_says_so() {
    // 1 + 3 + 1 = 5 taps need 10 training symbols (rule: 2 x taps).
    let nine = example_with(
        "training.sequence",
        serde_json::json!({"kind": "prbs", "pattern": "prbs9", "length": 9}),
    );
    let e = error_of(&nine);
    assert_eq!(e.key(), Some("training.sequence"));
    let msg = e.to_string();
    assert!(
        msg.contains("9 symbols") && msg.contains("5 taps") && msg.contains("at least 10"),
        "{msg}"
    );
    let ten = nine.replace("\"length\": 9", "\"length\": 10");
    assert!(parse_profile(&ten).unwrap().resolve().is_ok());
}

#[test]
fn payload_length_zero_is_rejected() {
    let e = error_of(&example_with(
        "payload.length_symbols",
        serde_json::json!(0),
    ));
    assert_eq!(e.key(), Some("payload.length_symbols"));
}

#[test]
fn nan_and_negative_numbers_are_rejected_with_the_key() {
    // JSON has no NaN literal: the parser stops there and names the key.
    let text = example_json().replace("\"rolloff\": 0.25", "\"rolloff\": NaN");
    let e = error_of(&text);
    assert_eq!(e.key(), Some("pulse.rolloff"), "{e}");
    assert!(e.to_string().contains("NaN"), "{e}");
    // A NaN built in code is caught by resolution.
    let mut p = example_profile(&ExampleOptions::default());
    p.search.threshold = Some(f64::NAN);
    assert_eq!(p.resolve().unwrap_err().key(), Some("search.threshold"));
    let e = error_of(&example_with("search.max_cfo_hz", serde_json::json!(-5.0)));
    assert_eq!(e.key(), Some("search.max_cfo_hz"));
    let e = error_of(&example_with(
        "payload.length_symbols",
        serde_json::json!(-5),
    ));
    assert_eq!(e.key(), Some("payload.length_symbols"));
}

#[test]
fn midamble_payload_needs_both_lengths() {
    let mut p = example_profile(&ExampleOptions::default());
    p.payload.position = Some(PayloadPosition::Both);
    assert_eq!(
        p.resolve().unwrap_err().key(),
        Some("payload.length_symbols")
    );
    p.payload.length_symbols = None;
    p.payload.length_before_symbols = Some(100);
    assert_eq!(
        p.resolve().unwrap_err().key(),
        Some("payload.length_after_symbols")
    );
    p.payload.length_after_symbols = Some(200);
    let r = p.resolve().unwrap();
    assert_eq!(
        (r.payload.before_symbols, r.payload.after_symbols),
        (100, 200)
    );
}

#[test]
fn equaliser_values_are_checked() {
    let e = error_of(&example_with(
        "equaliser.tracking",
        serde_json::json!({"kind": "rls", "lambda": 1.5}),
    ));
    assert_eq!(e.key(), Some("equaliser.tracking.lambda"));
    let e = error_of(&example_with("equaliser.kind", serde_json::json!("dfe")));
    assert!(e.to_string().contains("mmse-dfe"), "{e}");
    let e = error_of(&example_with("equaliser.delay", serde_json::json!("soon")));
    assert_eq!(e.key(), Some("equaliser.delay"));
    assert!(e.to_string().contains("\"auto\""), "{e}");
    let e = error_of(&example_with("equaliser.delay", serde_json::json!(8)));
    assert_eq!(e.key(), Some("equaliser.delay"));
}

#[test]
fn zadoff_chu_root_must_be_coprime_with_the_length() {
    let mut p = example_profile(&ExampleOptions::default());
    p.training.modulation = None;
    p.training.sequence = Sequence::ZadoffChu {
        root: 21,
        length: 63,
        shift: 0,
    };
    assert_eq!(
        p.resolve().unwrap_err().key(),
        Some("training.sequence.root")
    );
    p.training.sequence = Sequence::ZadoffChu {
        root: 25,
        length: 63,
        shift: 0,
    };
    assert!(p.resolve().is_ok());
}

#[test]
fn load_profile_names_the_file_in_every_error() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("bad.profile.json");
    std::fs::write(
        &path,
        example_with("samples_per_symbol", serde_json::json!(0)),
    )
    .unwrap();
    let msg = load_profile(&path).unwrap_err().to_string();
    assert!(
        msg.contains("bad.profile.json") && msg.contains("samples_per_symbol"),
        "{msg}"
    );
}

/// Issue 8 regression: sizes read from a profile used to go straight into
/// allocations (a payload of 10^12 symbols asked for 8 TB; a PRBS training of
/// 10^12 symbols likewise). Each is now refused at resolution, naming the key
/// and the cap from `crate::limits`.
#[test]
fn huge_lengths_and_tap_counts_are_refused_before_any_allocation() {
    use serde_json::json;
    let cases = [
        ("payload.length_symbols", json!(1_000_000_000_000u64)),
        ("samples_per_symbol", json!(4_000_000_000u64)),
        ("equaliser.feedforward_taps", json!(1_000_000_000u64)),
        ("equaliser.feedback_taps", json!(1_000_000_000u64)),
        ("channel_fit.pre_cursor_taps", json!(1_000_000_000u64)),
        ("channel_fit.post_cursor_taps", json!(u64::MAX)),
    ];
    for (key, value) in cases {
        let e = error_of(&example_with(key, value.clone()));
        assert_eq!(e.key(), Some(key), "{key}: {e}");
        assert!(e.to_string().contains("..="), "{key}: {e}");
    }
    let mut v: serde_json::Value = serde_json::from_str(&example_json()).unwrap();
    v["training"]["sequence"]["length"] = json!(1_000_000_000_000u64);
    let e = error_of(&v.to_string());
    assert_eq!(e.key(), Some("training.sequence.length"), "{e}");
}

/// Issue 8 regression (found by reading `check_training_fits`): tap counts
/// near `usize::MAX` overflowed `pre + post + 1` (a panic in debug builds).
/// A resolved profile read back from a report never went through `resolve`,
/// so `validate` must refuse it without overflowing.
#[test]
fn a_resolved_profile_with_overflowing_tap_counts_fails_validate_without_panicking() {
    let mut r = parse_profile(&example_json()).unwrap().resolve().unwrap();
    r.validate().unwrap();
    r.channel_fit.pre_cursor_taps = TapCount::Fixed(usize::MAX);
    r.channel_fit.post_cursor_taps = TapCount::Fixed(usize::MAX);
    assert!(check_training_fits(&r.channel_fit, 10).is_err());
    let e = r.validate().unwrap_err();
    assert_eq!(e.key(), Some("channel_fit.pre_cursor_taps"), "{e}");
    let mut r = parse_profile(&example_json()).unwrap().resolve().unwrap();
    r.payload.after_symbols = 1 << 40;
    assert!(r.validate().is_err());
    let mut r = parse_profile(&example_json()).unwrap().resolve().unwrap();
    r.pulse.rolloff = 0.0;
    assert_eq!(r.validate().unwrap_err().key(), Some("pulse.rolloff"));
}

#[test]
fn the_payload_next_to_the_training_is_the_matching_ends_of_the_whole_payload() {
    // The slow reference is the whole payload generated at once; the
    // near-training form must give exactly its tail before and head after.
    let mut p = example_profile(&ExampleOptions::default());
    p.payload.position = Some(PayloadPosition::Both);
    p.payload.length_symbols = None;
    p.payload.length_before_symbols = Some(9000);
    p.payload.length_after_symbols = Some(7000);
    let r = p.resolve().unwrap();
    let whole = r
        .payload_symbols()
        .unwrap()
        .expect("the example payload is known");
    for (b, a) in [
        (0, 0),
        (1, 1),
        (4095, 4097),
        (8191, 3),
        (9000, 7000),
        (20_000, 20_000),
    ] {
        let near = r.payload_symbols_near_training(b, a).unwrap().unwrap();
        let b = b.min(9000);
        let a = a.min(7000);
        assert_eq!(near.before, whole.before[9000 - b..], "before {b}");
        assert_eq!(near.after, whole.after[..a], "after {a}");
    }
}
