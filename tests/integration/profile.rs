//! `iqaudit profile new|check` from the command line: every bad profile gives
//! exit 2 and one message naming the file and the key; `new | check` round-trips.

use assert_cmd::Command;
use serde_json::{json, Value};

fn iqaudit() -> Command {
    Command::cargo_bin("iqaudit").unwrap()
}

/// The example profile as printed by `profile new`.
fn example() -> Value {
    let out = iqaudit().args(["profile", "new"]).output().unwrap();
    assert!(out.status.success());
    serde_json::from_slice(&out.stdout).unwrap()
}

/// Set the value at a dotted path.
fn set(v: &mut Value, path: &str, value: Value) {
    let keys: Vec<&str> = path.split('.').collect();
    let mut cur = v;
    for k in &keys[..keys.len() - 1] {
        cur = cur.get_mut(*k).unwrap();
    }
    cur.as_object_mut()
        .unwrap()
        .insert(keys[keys.len() - 1].to_string(), value);
}

/// Run `profile check` on `text`; assert exit 2 and one stderr line naming
/// the file and `key`, and return that line.
fn check_fails(text: &str, key: &str) -> String {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("crane.profile.json");
    std::fs::write(&path, text).unwrap();
    let out = iqaudit()
        .args(["profile", "check"])
        .arg(&path)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2), "exit code for {key}");
    assert!(out.stdout.is_empty(), "nothing on stdout for a bad profile");
    let err = String::from_utf8(out.stderr).unwrap();
    assert_eq!(err.lines().count(), 1, "one message: {err}");
    assert!(err.contains("crane.profile.json"), "names the file: {err}");
    assert!(err.contains(key), "names {key}: {err}");
    err
}

fn with(path: &str, value: Value) -> String {
    let mut v = example();
    set(&mut v, path, value);
    serde_json::to_string_pretty(&v).unwrap()
}

#[test]
fn profile_new_output_passes_profile_check_with_the_same_values() {
    let new = example();
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("p.json");
    std::fs::write(&path, serde_json::to_string_pretty(&new).unwrap()).unwrap();
    let out = iqaudit()
        .args(["profile", "check"])
        .arg(&path)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let resolved: Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(resolved["samples_per_symbol"], new["samples_per_symbol"]);
    assert_eq!(resolved["pulse"], new["pulse"]);
    assert_eq!(resolved["payload"]["modulation"], json!("16qam"));
    assert_eq!(resolved["payload"]["after_symbols"], json!(1024));
    assert_eq!(resolved["symbol_rate_hz"], json!(250000.0));
    assert_eq!(resolved["equaliser"], new["equaliser"]);
    assert_eq!(resolved["limits"], new["limits"]);
}

#[test]
fn profile_new_options_change_the_example() {
    let out = iqaudit()
        .args([
            "profile",
            "new",
            "--modulation",
            "64qam",
            "--sps",
            "8",
            "--rolloff",
            "0.35",
        ])
        .output()
        .unwrap();
    assert!(out.status.success());
    let v: Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["payload"]["modulation"], json!("64qam"));
    assert_eq!(v["samples_per_symbol"], json!(8));
    assert_eq!(v["pulse"]["rolloff"], json!(0.35));
    assert_eq!(v["capture"]["sample_rate_hz"], json!(2_000_000.0));
    // Source: TS 38.104 Table 6.5.2.2-1 via REFERENCE-VALUES §6.1 (64-QAM: 8 %).
    assert_eq!(v["limits"]["evm_rms_percent_max"], json!(8.0));
}

#[test]
fn an_unknown_key_is_named_with_the_allowed_keys() {
    let err = check_fails(&with("pulse.roll_off", json!(0.25)), "pulse.roll_off");
    assert!(
        err.contains("rolloff") && err.contains("span_symbols"),
        "{err}"
    );
}

#[test]
fn an_unknown_modulation_is_named_with_the_allowed_values() {
    let err = check_fails(
        &with("payload.modulation", json!("32qam")),
        "payload.modulation",
    );
    assert!(err.contains("16qam") && err.contains("256qam"), "{err}");
}

#[test]
fn zero_samples_per_symbol_exits_2() {
    check_fails(&with("samples_per_symbol", json!(0)), "samples_per_symbol");
}

#[test]
fn a_rolloff_outside_zero_to_one_exits_2() {
    for bad in [0.0, 1.5, -0.25] {
        let err = check_fails(&with("pulse.rolloff", json!(bad)), "pulse.rolloff");
        assert!(err.contains("(0, 1]"), "{err}");
    }
}

#[test]
fn a_training_shorter_than_the_channel_fit_needs_exits_2_and_says_how_many() {
    let text = with(
        "training.sequence",
        json!({"kind": "prbs", "pattern": "prbs9", "length": 7}),
    );
    let err = check_fails(&text, "training.sequence");
    assert!(err.contains("at least 10"), "{err}");
}

#[test]
fn a_payload_length_of_zero_exits_2() {
    check_fails(
        &with("payload.length_symbols", json!(0)),
        "payload.length_symbols",
    );
}

#[test]
fn nan_exits_2_naming_the_key() {
    let text = serde_json::to_string_pretty(&example())
        .unwrap()
        .replace("\"rolloff\": 0.25", "\"rolloff\": NaN");
    check_fails(&text, "pulse.rolloff");
}

#[test]
fn a_missing_profile_file_exits_2() {
    let out = iqaudit()
        .args(["profile", "check", "/nonexistent/x.profile.json"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("x.profile.json"));
}
