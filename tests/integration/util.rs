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
