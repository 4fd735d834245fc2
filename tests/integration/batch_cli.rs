//! `iqaudit batch` end to end on synthesised captures (the real analysis as the job).

use crate::util::{iqaudit, stderr_of, tempdir};
use serde_json::Value;
use std::fs;
use std::path::Path;

fn profile(dir: &Path) -> std::path::PathBuf {
    let out = iqaudit()
        .args(["profile", "new", "--payload-symbols", "200"])
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", stderr_of(&out));
    let p = dir.join("link.profile.json");
    fs::write(&p, &out.stdout).unwrap();
    p
}

fn synth(profile: &Path, out: &Path, seed: &str) {
    fs::create_dir_all(out.parent().unwrap()).unwrap();
    let o = iqaudit()
        .args(["synth", "--profile"])
        .arg(profile)
        .arg("--out")
        .arg(out)
        .args(["--bursts", "2", "--seed", seed, "--esn0-db", "30"])
        // A name whose extension is not the profile's format: write what the
        // name says (synth refuses the contradiction otherwise).
        .args(match out.extension().and_then(|e| e.to_str()) {
            Some("cf32") => &["--format", "cf32_le"][..],
            _ => &[][..],
        })
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", stderr_of(&o));
}

fn without_command(mut v: Value) -> Value {
    v.as_object_mut().unwrap().remove("command");
    v
}

/// `iqaudit analyse CAPTURE --profile P --report DIR/single.report.json`, the
/// report parsed (the single-capture run a batch report must equal).
fn analyse_report(dir: &Path, capture: &Path, profile: &Path) -> Value {
    let single = dir.join("single.report.json");
    let a = iqaudit()
        .arg("analyse")
        .arg(capture)
        .arg("--profile")
        .arg(profile)
        .arg("--report")
        .arg(&single)
        .output()
        .unwrap();
    assert!(a.status.code().is_some_and(|c| c <= 1), "{}", stderr_of(&a));
    serde_json::from_slice(&fs::read(&single).unwrap()).unwrap()
}

#[test]
fn batch_reports_equal_analyse_reports_and_bad_files_become_rows() {
    let dir = tempdir();
    let prof = profile(dir.path());
    let field = dir.path().join("field");
    synth(&prof, &field.join("crane-1.ci16"), "11");
    synth(&prof, &field.join("quay/crane-2.cf32"), "12");
    fs::write(field.join("empty.cf32"), b"").unwrap();
    // A capture name that cannot be opened: a link to a file that does not exist.
    std::os::unix::fs::symlink(dir.path().join("gone.wav"), field.join("broken.wav")).unwrap();
    let out = dir.path().join("out");

    let run = iqaudit()
        .args(["batch"])
        .arg(&field)
        .arg("--profile")
        .arg(&prof)
        .arg("--out")
        .arg(&out)
        .args(["--jobs", "2"])
        .output()
        .unwrap();
    let err = stderr_of(&run);
    assert_eq!(run.status.code(), Some(2), "{err}");
    assert!(err.contains("empty.cf32: "), "{err}");
    assert!(err.contains("broken.wav: "), "{err}");

    let rows: Vec<Value> = fs::read_to_string(out.join("summary.jsonl"))
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    let paths: Vec<&str> = rows.iter().map(|r| r["path"].as_str().unwrap()).collect();
    assert_eq!(
        paths,
        [
            "broken.wav",
            "crane-1.ci16",
            "empty.cf32",
            "quay/crane-2.cf32"
        ]
    );
    for r in &rows {
        match r["path"].as_str().unwrap() {
            "empty.cf32" | "broken.wav" => {
                assert_eq!(r["verdict"], "unreadable", "{r}");
                assert!(!r["error"].as_str().unwrap().is_empty());
            }
            _ => {
                assert_eq!(r["bursts"], 2, "{r}");
                assert!(r["verdict"] == "pass" || r["verdict"] == "fail", "{r}");
            }
        }
    }

    // The batch report is the analyse report (bar the recorded command line).
    let from_analyse = analyse_report(dir.path(), &field.join("quay/crane-2.cf32"), &prof);
    let from_batch: Value =
        serde_json::from_slice(&fs::read(out.join("quay/crane-2.cf32.report.json")).unwrap())
            .unwrap();
    assert_eq!(without_command(from_batch), without_command(from_analyse));

    // A second run reuses both reports and writes the same summary.
    let before = fs::read(out.join("summary.csv")).unwrap();
    let again = iqaudit()
        .args(["batch"])
        .arg(&field)
        .args(["-p"])
        .arg(&prof)
        .args(["-o"])
        .arg(&out)
        .output()
        .unwrap();
    let err = stderr_of(&again);
    assert_eq!(again.status.code(), Some(2), "{err}");
    assert!(err.contains("0 analysed, 2 skipped"), "{err}");
    assert_eq!(fs::read(out.join("summary.csv")).unwrap(), before);
}

#[test]
fn batch_shards_merge_back_into_the_whole_summary() {
    let dir = tempdir();
    let prof = profile(dir.path());
    let field = dir.path().join("field");
    for i in 0..4 {
        synth(
            &prof,
            &field.join(format!("c{i}.ci16")),
            &format!("{}", 30 + i),
        );
    }
    let whole = dir.path().join("whole");
    let shards = dir.path().join("shards");
    let st = iqaudit()
        .arg("batch")
        .arg(&field)
        .arg("-p")
        .arg(&prof)
        .arg("-o")
        .arg(&whole)
        .arg("-q")
        .output()
        .unwrap();
    assert!(
        st.status.code().is_some_and(|c| c <= 1),
        "{}",
        stderr_of(&st)
    );
    let mut parts = Vec::new();
    for k in 1..=2 {
        let st = iqaudit()
            .arg("batch")
            .arg(&field)
            .arg("-p")
            .arg(&prof)
            .arg("-o")
            .arg(&shards)
            .args(["--shard", &format!("{k}/2"), "-q"])
            .output()
            .unwrap();
        assert!(
            st.status.code().is_some_and(|c| c <= 1),
            "{}",
            stderr_of(&st)
        );
        parts.push(shards.join(format!("summary.shard-{k}-of-2.jsonl")));
    }
    let merged = dir.path().join("merged");
    let m = iqaudit()
        .args(["batch", "--merge"])
        .args(&parts)
        .arg("--out")
        .arg(&merged)
        .output()
        .unwrap();
    assert!(m.status.code().is_some_and(|c| c <= 1), "{}", stderr_of(&m));
    assert_eq!(
        fs::read(merged.join("summary.jsonl")).unwrap(),
        fs::read(whole.join("summary.jsonl")).unwrap()
    );
    // The per-burst tables merge the same way (#19).
    assert!(
        stderr_of(&m).contains("burst rows from 2 per-burst tables"),
        "{}",
        stderr_of(&m)
    );
    for name in ["bursts.jsonl", "bursts.csv"] {
        assert_eq!(
            fs::read(merged.join(name)).unwrap(),
            fs::read(whole.join(name)).unwrap(),
            "{name}"
        );
    }
}

#[test]
fn the_per_burst_table_carries_every_burst_and_the_terminal_lists_every_failed_limit() {
    // #19: one row per burst across the folder, each figure copied from the
    // capture's report; off a terminal (line mode) and on it alike, the
    // captures that failed a limit are listed with the limits they failed.
    let dir = tempdir();
    let prof = profile(dir.path());
    let mut p: Value = serde_json::from_str(&fs::read_to_string(&prof).unwrap()).unwrap();
    // An EVM limit that the 14 dB capture fails and the 30 dB ones meet.
    p["limits"]["evm_rms_percent_max"] = serde_json::json!(8.0);
    fs::write(&prof, serde_json::to_vec(&p).unwrap()).unwrap();
    let field = dir.path().join("field");
    synth(&prof, &field.join("good-1.ci16"), "3");
    synth(&prof, &field.join("good-2.ci16"), "4");
    fs::create_dir_all(&field).unwrap();
    let o = iqaudit()
        .args(["synth", "--profile"])
        .arg(&prof)
        .arg("--out")
        .arg(field.join("noisy.ci16"))
        .args(["--bursts", "3", "--seed", "5", "--esn0-db", "14"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", stderr_of(&o));
    let out = dir.path().join("out");
    let st = iqaudit()
        .arg("batch")
        .arg(&field)
        .arg("-p")
        .arg(&prof)
        .arg("-o")
        .arg(&out)
        .output()
        .unwrap();
    assert_eq!(st.status.code(), Some(1), "{}", stderr_of(&st));
    let err = stderr_of(&st);
    assert!(err.contains("failed limits (1 capture):"), "{err}");
    assert!(
        err.contains("  noisy.ci16: limits.evm_rms_percent_max"),
        "{err}"
    );
    let rows: Vec<Value> = fs::read_to_string(out.join("bursts.jsonl"))
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    assert_eq!(rows.len(), 2 + 2 + 3);
    let csv = fs::read_to_string(out.join("bursts.csv")).unwrap();
    assert_eq!(csv.lines().count(), 1 + rows.len());
    assert!(csv.starts_with("path,burst,start_sample,start_time_s,"));
    for row in &rows {
        let path = row["path"].as_str().unwrap();
        let report: Value = serde_json::from_str(
            &fs::read_to_string(out.join(format!("{path}.report.json"))).unwrap(),
        )
        .unwrap();
        let b = &report["bursts"][row["burst"].as_u64().unwrap() as usize];
        assert_eq!(row["start_sample"], b["start_sample"]);
        assert_eq!(row["cfo_hz"], b["cfo_hz"]);
        assert_eq!(row["evm_rms_percent"], b["metrics"]["evm_rms_percent"]);
        assert_eq!(row["symbol_errors"], b["metrics"]["ser"]["errors"]);
        let fs_hz = report["input"]["sample_rate_hz"].as_f64().unwrap();
        let t = b["start_sample"].as_f64().unwrap() / fs_hz;
        assert_eq!(row["start_time_s"].as_f64(), Some(t));
    }
    // Pooled from the table, the SER equals the summary's pooled counts.
    let pooled: u64 = rows
        .iter()
        .map(|r| r["symbol_errors"].as_u64().unwrap())
        .sum();
    let summary_errors: u64 = fs::read_to_string(out.join("summary.jsonl"))
        .unwrap()
        .lines()
        .map(|l| {
            serde_json::from_str::<Value>(l).unwrap()["symbol_errors"]
                .as_u64()
                .unwrap()
        })
        .sum();
    assert_eq!(pooled, summary_errors);
}

#[test]
fn a_capture_changed_in_place_is_hashed_once_and_its_report_is_what_analyse_writes() {
    let dir = tempdir();
    let prof = profile(dir.path());
    let field = dir.path().join("field");
    let capture = field.join("crane-7.ci16");
    synth(&prof, &capture, "21");
    let out = dir.path().join("out");
    let batch = || {
        let run = iqaudit()
            .arg("batch")
            .arg(&field)
            .arg("-p")
            .arg(&prof)
            .arg("-o")
            .arg(&out)
            .output()
            .unwrap();
        assert!(
            run.status.code().is_some_and(|c| c <= 1),
            "{}",
            stderr_of(&run)
        );
        stderr_of(&run)
    };
    batch();

    // Same seed, lower Es/N0: the same length with other bytes, so the resume
    // check hashes the file, finds the report stale and passes the digest on.
    let changed = dir.path().join("crane-7-changed.ci16");
    let o = iqaudit()
        .args(["synth", "--profile"])
        .arg(&prof)
        .arg("--out")
        .arg(&changed)
        .args(["--bursts", "2", "--seed", "21", "--esn0-db", "24"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", stderr_of(&o));
    assert_eq!(
        fs::metadata(&changed).unwrap().len(),
        fs::metadata(&capture).unwrap().len(),
        "precondition: same size"
    );
    fs::copy(&changed, &capture).unwrap();
    let err = batch();
    assert!(err.contains("1 analysed, 0 skipped"), "{err}");

    // The report made with the passed-on digest is the one `analyse` makes
    // hashing the file itself (bar the recorded command line).
    let from_analyse = analyse_report(dir.path(), &capture, &prof);
    let from_batch: Value =
        serde_json::from_slice(&fs::read(out.join("crane-7.ci16.report.json")).unwrap()).unwrap();
    assert_eq!(
        without_command(from_batch.clone()),
        without_command(from_analyse)
    );
    // Source: sha256_file, checked against the FIPS 180-4 examples in the unit tests.
    assert_eq!(
        from_batch["input"]["sha256"],
        iqaudit::batch::sha256_file(&capture).unwrap()
    );
}

/// Analyse one small capture with `opts` and with the defaults; check that the
/// default run records the file's own SHA-256 (sha2, FIPS 180-4, via
/// `batch::sha256_file`) and that the two reports differ in nothing but the
/// digest. Returns the digest `opts` recorded, the file's digest, and the paths.
fn digest_against_default(
    opts: &iqaudit::analyse::AnalyseOptions,
) -> (
    String,
    String,
    tempfile::TempDir,
    std::path::PathBuf,
    std::path::PathBuf,
) {
    let dir = tempdir();
    let prof = profile(dir.path());
    let capture = dir.path().join("crane-8.ci16");
    synth(&prof, &capture, "22");
    let profile = iqaudit::profile::load_profile(&prof).unwrap();
    let mut given = iqaudit::analyse::analyse_capture(&capture, &profile, opts).unwrap();
    let own = iqaudit::analyse::analyse_capture(&capture, &profile, &Default::default()).unwrap();
    let digest = iqaudit::batch::sha256_file(&capture).unwrap();
    assert_eq!(own.input.sha256, digest);
    let recorded = std::mem::replace(&mut given.input.sha256, digest.clone());
    assert_eq!(given, own, "the digest option changes nothing else");
    (recorded, digest, dir, prof, capture)
}

#[test]
fn a_digest_given_to_analyse_is_recorded_as_given_instead_of_rehashing() {
    // The option exists so a caller that has just hashed the file (batch resume,
    // recheck) does not pay for a second pass; a deliberately wrong digest shows
    // that the file is not hashed again. Source: common practice (a probe value).
    let probe = "ab".repeat(32);
    let opts = iqaudit::analyse::AnalyseOptions {
        input_sha256: Some(probe.clone()),
        ..Default::default()
    };
    let (recorded, _, _dir, _, _) = digest_against_default(&opts);
    assert_eq!(recorded, probe);
}

#[test]
fn analyse_skips_the_digest_only_when_no_json_is_written() {
    // The terminal summary carries no digest, so `analyse` without --report/--json
    // does not hash the file; the JSON forms always carry it. Reference: sha2's
    // own digest of the file (FIPS 180-4), via `batch::sha256_file`.
    let opts = iqaudit::analyse::AnalyseOptions {
        skip_input_hash: true,
        ..Default::default()
    };
    let (recorded, digest, _dir, prof, capture) = digest_against_default(&opts);
    assert_eq!(recorded, "");
    let out = iqaudit()
        .args(["analyse", capture.to_str().unwrap(), "--profile"])
        .arg(&prof)
        .arg("--json")
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", stderr_of(&out));
    let v: Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["input"]["sha256"], serde_json::json!(digest));
}
