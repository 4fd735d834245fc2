//! Shared helpers: temporary directories, the binary under test, committed data.

use std::path::{Path, PathBuf};

use assert_cmd::Command;

/// A fresh temporary directory, removed on drop.
pub fn tempdir() -> tempfile::TempDir {
    tempfile::Builder::new()
        .prefix("iqaudit-test-")
        .tempdir()
        .expect("temporary directory")
}

/// The `iqaudit` binary built by cargo for this test run.
pub fn iqaudit() -> Command {
    Command::cargo_bin("iqaudit").expect("iqaudit binary")
}

/// A path under the repository's `tests/` directory.
pub fn test_data(rel: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests")
        .join(rel)
}

/// stderr as text.
pub fn stderr_of(out: &std::process::Output) -> String {
    String::from_utf8_lossy(&out.stderr).into_owned()
}

/// `iqaudit analyse --json --profile PROF CAP EXTRA…`: the report, the exit
/// code and stderr. Panics with stderr when stdout is not a JSON report.
pub fn analyse_json(
    prof: &Path,
    cap: &Path,
    extra: &[&str],
) -> (serde_json::Value, Option<i32>, String) {
    let out = iqaudit()
        .args(["analyse", "--json", "--profile"])
        .arg(prof)
        .arg(cap)
        .args(extra)
        .output()
        .expect("run iqaudit analyse");
    let rep =
        serde_json::from_slice(&out.stdout).unwrap_or_else(|e| panic!("{e}: {}", stderr_of(&out)));
    (rep, out.status.code(), stderr_of(&out))
}

/// `iqaudit profile new --modulation M` with `capture.format` set to `cf32_le`
/// (what `synth --out NAME.cf32` writes), as JSON to edit further.
pub fn cf32_profile(modulation: &str) -> serde_json::Value {
    let out = iqaudit()
        .args(["profile", "new", "--modulation", modulation])
        .output()
        .expect("run iqaudit profile new");
    assert!(out.status.success(), "{}", stderr_of(&out));
    let mut p: serde_json::Value =
        serde_json::from_slice(&out.stdout).expect("profile new prints JSON");
    p["capture"]["format"] = "cf32_le".into();
    p
}
