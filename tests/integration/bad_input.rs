//! Bad input through the CLI: exit code 2 and one clear line naming the file and
//! the problem; never a panic; the input is never modified.

use std::path::Path;

use iqaudit::{Capture, OpenOptions};

use crate::util::{iqaudit, stderr_of, tempdir, test_data};

/// Run `iqaudit info ARGS…`, require exit 2 and exactly one stderr line that
/// starts with `iqaudit: `, names `file` and contains every `words` entry.
fn fails_clearly(args: &[&str], file: &str, words: &[&str]) {
    let out = iqaudit().arg("info").args(args).output().unwrap();
    let err = stderr_of(&out);
    assert_eq!(out.status.code(), Some(2), "{args:?}: {err}");
    assert_eq!(err.lines().count(), 1, "{args:?}: {err}");
    assert!(err.starts_with("iqaudit: "), "{err}");
    assert!(
        err.contains(file),
        "{args:?}: message does not name {file}: {err}"
    );
    for w in words {
        assert!(err.contains(w), "{args:?}: missing '{w}' in: {err}");
    }
    assert!(!err.contains("panicked"), "{err}");
    assert!(out.stdout.is_empty(), "no data on stdout for a failure");
}

fn bad(name: &str) -> String {
    test_data(&format!("data/bad/{name}")).display().to_string()
}

#[test]
fn a_missing_file_is_exit_2_naming_it() {
    let dir = tempdir();
    let p = dir.path().join("nowhere.cf32").display().to_string();
    fails_clearly(&[&p], "nowhere.cf32", &["cannot open"]);
}

#[test]
fn a_directory_is_exit_2_saying_it_is_not_a_file() {
    let dir = tempdir();
    let p = dir.path().display().to_string();
    fails_clearly(&[&p], &p, &["not a regular file"]);
}

#[test]
fn an_empty_file_is_exit_2_saying_empty() {
    fails_clearly(&[&bad("empty.cf32")], "empty.cf32", &["empty"]);
}

#[test]
fn wav_files_with_1_or_3_channels_are_exit_2_naming_the_channel_count() {
    fails_clearly(
        &[&bad("one-channel.wav")],
        "one-channel.wav",
        &["1 channel", "exactly 2"],
    );
    fails_clearly(
        &[&bad("three-channels.wav")],
        "three-channels.wav",
        &["3 channel"],
    );
}

#[test]
fn truncated_and_corrupt_wav_headers_are_exit_2_saying_invalid_wav_header() {
    fails_clearly(
        &[&bad("truncated-header.wav")],
        "truncated-header.wav",
        &["invalid WAV header", "truncated"],
    );
    fails_clearly(
        &[&bad("not-riff.wav")],
        "not-riff.wav",
        &["invalid WAV header"],
    );
    fails_clearly(
        &[&bad("odd-data-chunk.wav")],
        "odd-data-chunk.wav",
        &["invalid WAV header"],
    );
    fails_clearly(
        &[&bad("compressed-format-tag.wav")],
        "compressed-format-tag.wav",
        &["WAV"],
    );
    fails_clearly(
        &[&bad("data-longer-than-file.wav")],
        "data-longer-than-file.wav",
        &["4000", "8", "truncated"],
    );
}

#[test]
fn a_sigmf_sidecar_with_an_unknown_datatype_or_invalid_json_is_exit_2_naming_the_sidecar() {
    fails_clearly(
        &[&bad("unknown-datatype.sigmf-data")],
        "unknown-datatype.sigmf-meta",
        &["ri16_le", "real-valued", "complex samples"],
    );
    fails_clearly(
        &[&bad("bad-json.sigmf-data")],
        "bad-json.sigmf-meta",
        &["invalid SigMF metadata", "line 1"],
    );
}

#[test]
fn an_unknown_format_option_is_exit_2_listing_the_accepted_names() {
    fails_clearly(
        &[&bad("no-extension"), "--format", "ci12_le"],
        "no-extension",
        &["ci12_le", "cf32_le", "cu8"],
    );
}

#[test]
fn a_file_whose_format_cannot_be_told_is_exit_2_saying_how_to_give_one() {
    fails_clearly(
        &[&bad("no-extension")],
        "no-extension",
        &["--format", "sigmf-meta", ".cf32"],
    );
}

#[test]
fn clap_usage_errors_exit_2_too() {
    let out = iqaudit().args(["info"]).output().unwrap();
    assert_eq!(out.status.code(), Some(2));
    let out = iqaudit()
        .args(["info", "x.cf32", "--sample-rate", "fast"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
}

// STYLE §14: open every committed bad file through the library; each must be an
// Err (never a panic), through both access paths.
#[test]
fn every_file_in_the_bad_corpus_is_an_error_never_a_panic() {
    let dir = test_data("data/bad");
    let mut n = 0;
    for e in std::fs::read_dir(&dir).unwrap() {
        let p = e.unwrap().path();
        let name = p.file_name().unwrap().to_string_lossy().into_owned();
        if name.ends_with(".py") || name.ends_with(".sigmf-meta") {
            continue;
        }
        n += 1;
        assert!(
            Capture::open(&p, &OpenOptions::default()).is_err(),
            "{name} opened"
        );
        assert!(
            Capture::open_unmapped(&p, &OpenOptions::default()).is_err(),
            "{name}"
        );
    }
    assert!(n >= 10, "corpus went missing: {n} files");
}

fn snapshot(p: &Path) -> (Vec<u8>, std::time::SystemTime, u32) {
    use std::os::unix::fs::PermissionsExt;
    let m = std::fs::metadata(p).unwrap();
    (
        std::fs::read(p).unwrap(),
        m.modified().unwrap(),
        m.permissions().mode(),
    )
}

#[test]
fn info_never_writes_to_its_input_or_beside_it() {
    let dir = tempdir();
    let p = dir.path().join("keep.ci8");
    std::fs::write(&p, [1u8, 2, 3, 4, 5, 250, 7]).unwrap();
    let before = snapshot(&p);
    let out = iqaudit()
        .arg("info")
        .arg(&p)
        .arg("--json")
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0), "{}", stderr_of(&out));
    assert_eq!(snapshot(&p), before);
    assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
}
