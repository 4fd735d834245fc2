//! Batch machinery with fake per-capture jobs: failure isolation, exit classes,
//! determinism across worker counts, sharding, resume and cancellation.
//!
//! The fake job decides each capture's fate from its file name (good / limit /
//! quiet / corrupt / empty / mystery / boom) and returns a hand-built, schema-
//! valid `Report` whose figures are derived from the file's bytes, so a wrong
//! file-to-row pairing shows up in the summary.

use iqaudit::batch::{
    merge_summaries, run_batch_with_messages, sha256_file, BatchOptions, CancelFlag, Glob,
    JobFailure, ProgressMode, RowVerdict, Shard, SummaryRow,
};
use iqaudit::report::metrics::ErrorRate;
use iqaudit::report::schema::{
    InputInfo, Provenance, Report, Summary, ToolInfo, Verdict, VerdictResult, SCHEMA,
};
use std::fs;
use std::io::{self, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::{Arc, Mutex};

const PROFILE_SHA: &str = "5e1f0c0ffee5e1f0c0ffee5e1f0c0ffee5e1f0c0ffee5e1f0c0ffee5e1f0c0ff";

/// A minimal, schema-valid report for `path` with the given verdict.
fn minimal_report(path: &Path, result: VerdictResult, profile_sha: &str) -> Report {
    let bytes = fs::read(path).unwrap();
    let sum: u64 = bytes.iter().map(|&b| u64::from(b)).sum();
    let bursts = if result == VerdictResult::NoTraining {
        0
    } else {
        1 + bytes.len() % 3
    };
    let evm = (bursts > 0).then(|| 1.0 + (sum % 97) as f64 / 10.0);
    Report {
        schema: SCHEMA.to_string(),
        tool: ToolInfo {
            name: "iqaudit".into(),
            version: env!("CARGO_PKG_VERSION").into(),
        },
        command: vec!["iqaudit".into(), "batch".into()],
        input: InputInfo {
            path: path.display().to_string(),
            path_from_report: None,
            size_bytes: bytes.len() as u64,
            sha256: sha256_file(path).unwrap(),
            format: "cf32_le".into(),
            format_source: iqaudit::report::schema::InputFormatSource::Extension,
            swap_iq: false,
            sample_rate_hz: 1.0e6,
            center_freq_hz: None,
            samples: bytes.len() as u64 / 8,
        },
        profile: serde_json::json!({"fake": true}),
        capture: None,
        bursts: Vec::new(),
        summary: Summary {
            bursts,
            evm_rms_percent: evm,
            evm_worst_percent: evm.map(|e| e * 1.5),
            mer_db: evm.map(|e| -20.0 * (e / 100.0).log10()),
            ser: ErrorRate::new(sum % 5, 1000, 0.95),
            ser_run_aware: None,
            ber: None,
            cfo_abs_max_hz: evm.map(|_| 120.5),
            sco_mean_ppm: None,
            sco_abs_max_ppm: None,
            longest_error_run: (sum % 4) as usize,
        },
        verdict: Verdict {
            result,
            checks: Vec::new(),
        },
        warnings: Vec::new(),
        provenance: Provenance {
            profile_sha256: profile_sha.to_string(),
            format_override: None,
            sample_rate_override_hz: None,
            traced_bursts: 8,
            threshold: 0.5,
            recheck: "iqaudit recheck".into(),
        },
    }
}

/// The fake analysis: the file name says what happens.
fn fake_job(path: &Path, profile_sha: &str) -> Result<Report, JobFailure> {
    let name = path.file_name().unwrap().to_string_lossy().into_owned();
    let len = fs::metadata(path).map(|m| m.len()).unwrap_or(0);
    if name.starts_with("empty") || len == 0 {
        return Err(JobFailure::unreadable("empty file: no samples"));
    }
    if name.starts_with("corrupt") {
        return Err(JobFailure::unreadable(
            "not a WAV file: expected \"RIFF\" at offset 0, found \"JUNK\", giving up",
        ));
    }
    if name.starts_with("mystery") {
        return Err(JobFailure::unreadable(
            "cannot tell the sample format; set capture.format in the profile or add a SigMF sidecar",
        ));
    }
    if name.starts_with("boom") {
        panic!("fake job panicked on purpose");
    }
    let result = if name.starts_with("limit") {
        VerdictResult::Fail
    } else if name.starts_with("quiet") {
        VerdictResult::NoTraining
    } else {
        VerdictResult::Pass
    };
    Ok(minimal_report(path, result, profile_sha))
}

/// Write `files` (relative path → contents) under `root`.
fn populate(root: &Path, files: &[(&str, &[u8])]) {
    for (rel, bytes) in files {
        let p = root.join(rel);
        fs::create_dir_all(p.parent().unwrap()).unwrap();
        fs::write(p, bytes).unwrap();
    }
}

fn mixed_folder(root: &Path) {
    populate(
        root,
        &[
            ("site-a/good-1.cf32", &[1u8; 64]),
            ("site-a/good-2.cf32", &[2u8; 80]),
            ("site-a/day 2/good, with comma.ci16", &[3u8; 40]),
            ("site-b/limit-1.cu8", &[4u8; 48]),
            ("site-b/quiet-1.wav", &[5u8; 72]),
            ("site-b/corrupt.wav", b"JUNKJUNKJUNK"),
            ("empty.cf32", b""),
            ("mystery.bin", &[6u8; 33]),
            ("site-a/good-1.cf32.profile.json", b"{}"),
            ("site-a/good-1.sigmf-meta", b"{}"),
            ("README.txt", b"quayside crane telemetry, March"),
        ],
    );
}

/// A message sink the test can read back.
#[derive(Clone, Default)]
struct Sink(Arc<Mutex<Vec<u8>>>);
impl Write for Sink {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        self.0.lock().unwrap().extend_from_slice(buf);
        Ok(buf.len())
    }
    fn flush(&mut self) -> io::Result<()> {
        Ok(())
    }
}
impl Sink {
    fn text(&self) -> String {
        String::from_utf8(self.0.lock().unwrap().clone()).unwrap()
    }
}

fn opts(input: &Path, out: &Path, jobs: usize) -> BatchOptions {
    let mut o = BatchOptions::new(input, out, PROFILE_SHA);
    o.jobs = jobs;
    o.progress = ProgressMode::Lines;
    o
}

fn files_under(dir: &Path) -> Vec<PathBuf> {
    let mut out = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in fs::read_dir(&d).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                stack.push(p);
            } else {
                out.push(p);
            }
        }
    }
    out.sort();
    out
}

#[test]
fn every_file_of_a_mixed_folder_gets_a_row_and_failures_carry_their_message() {
    let dir = tempfile::tempdir().unwrap();
    let (input, out) = (dir.path().join("in"), dir.path().join("out"));
    mixed_folder(&input);
    let sink = Sink::default();
    let o = opts(&input, &out, 3);
    let outcome =
        run_batch_with_messages(&o, |p, _| fake_job(p, PROFILE_SHA), Box::new(sink.clone()))
            .unwrap();

    let by_path = |p: &str| outcome.rows.iter().find(|r| r.path == p).unwrap().clone();
    assert_eq!(outcome.rows.len(), 8, "{:?}", outcome.rows);
    assert_eq!(by_path("site-a/good-1.cf32").verdict, RowVerdict::Pass);
    assert_eq!(
        by_path("site-a/day 2/good, with comma.ci16").verdict,
        RowVerdict::Pass
    );
    assert_eq!(by_path("site-b/limit-1.cu8").verdict, RowVerdict::Fail);
    assert_eq!(
        by_path("site-b/quiet-1.wav").verdict,
        RowVerdict::NoTraining
    );
    assert_eq!(by_path("site-b/quiet-1.wav").bursts, Some(0));
    for (p, needle) in [
        ("site-b/corrupt.wav", "not a WAV file"),
        ("empty.cf32", "empty file"),
        ("mystery.bin", "cannot tell the sample format"),
    ] {
        let r = by_path(p);
        assert_eq!(r.verdict, RowVerdict::Unreadable, "{p}");
        assert!(
            r.error.as_deref().unwrap().contains(needle),
            "{p}: {:?}",
            r.error
        );
        assert!(r.report.is_none());
        assert!(!out.join(format!("{p}.report.json")).exists());
        assert!(sink.text().contains(&format!("{p}: {}", r.error.unwrap())));
    }
    let c = outcome.counts;
    assert_eq!(
        (
            c.total,
            c.analysed,
            c.passed,
            c.failed_limits,
            c.no_training,
            c.unreadable,
            c.errors
        ),
        (8, 5, 3, 1, 1, 3, 0)
    );
    assert_eq!(c.ignored_files, 3);
    assert_eq!(outcome.exit_code(), 2, "unreadable files make the class 2");

    // Reports are the job's reports, byte for byte, beside the relative path.
    let rep = out.join("site-a/good-1.cf32.report.json");
    let parsed: Report = serde_json::from_slice(&fs::read(&rep).unwrap()).unwrap();
    assert_eq!(
        parsed,
        fake_job(&input.join("site-a/good-1.cf32"), PROFILE_SHA).unwrap()
    );
    // Summary files agree with the rows and with each other.
    let jsonl = fs::read_to_string(out.join("summary.jsonl")).unwrap();
    let rows: Vec<SummaryRow> = jsonl
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    assert_eq!(rows, outcome.rows);
    let csv = fs::read_to_string(out.join("summary.csv")).unwrap();
    assert_eq!(csv.lines().count(), 1 + 8);
    assert!(csv.contains("\"site-a/day 2/good, with comma.ci16\","));
    assert!(
        !out.join(".progress.jsonl").exists(),
        "progress log removed at the end"
    );
    let text = sink.text();
    let last = text.lines().last().unwrap();
    assert!(last.starts_with("batch: 8 captures: 5 analysed"), "{last}");
    assert!(text.contains("hint: 1 capture had no training block"));
}

#[test]
fn exit_class_is_1_for_limits_or_no_training_and_0_when_all_pass() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("in");
    populate(
        &input,
        &[("good-1.cf32", &[1u8; 16]), ("good-2.cf32", &[2u8; 16])],
    );
    let o = opts(&input, &dir.path().join("o0"), 2);
    let r =
        run_batch_with_messages(&o, |p, _| fake_job(p, PROFILE_SHA), Box::new(io::sink())).unwrap();
    assert_eq!(r.exit_code(), 0);

    populate(&input, &[("quiet-1.cu8", &[3u8; 16])]);
    let o = opts(&input, &dir.path().join("o1"), 2);
    let r =
        run_batch_with_messages(&o, |p, _| fake_job(p, PROFILE_SHA), Box::new(io::sink())).unwrap();
    assert_eq!(r.exit_code(), 1);

    fs::remove_file(input.join("quiet-1.cu8")).unwrap();
    populate(&input, &[("limit-1.cu8", &[3u8; 16])]);
    let o = opts(&input, &dir.path().join("o2"), 2);
    let r =
        run_batch_with_messages(&o, |p, _| fake_job(p, PROFILE_SHA), Box::new(io::sink())).unwrap();
    assert_eq!(r.exit_code(), 1);

    populate(&input, &[("boom.cf32", &[9u8; 16])]);
    let o = opts(&input, &dir.path().join("o3"), 2);
    let r =
        run_batch_with_messages(&o, |p, _| fake_job(p, PROFILE_SHA), Box::new(io::sink())).unwrap();
    let boom = r.rows.iter().find(|x| x.path == "boom.cf32").unwrap();
    assert_eq!(boom.verdict, RowVerdict::Error);
    assert!(boom
        .error
        .as_deref()
        .unwrap()
        .contains("panicked on purpose"));
    assert_eq!(
        r.exit_code(),
        2,
        "a panicking job is isolated and makes the class 2"
    );
}

fn many_files(root: &Path, n: usize) {
    for i in 0..n {
        let kind = ["good", "good", "limit", "quiet", "corrupt", "good"][i % 6];
        let ext = ["cf32", "ci16", "cu8", "wav"][i % 4];
        let rel = format!("d{}/{kind}-{i:03}.{ext}", i % 5);
        let bytes: Vec<u8> = (0..(8 + i % 23)).map(|k| (k * 7 + i) as u8).collect();
        populate(root, &[(&rel, &bytes)]);
    }
}

#[test]
fn the_summary_and_reports_are_byte_identical_for_one_and_four_workers() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("in");
    many_files(&input, 60);
    let (o1, o4) = (dir.path().join("j1"), dir.path().join("j4"));
    let job = |p: &Path, _: Option<&str>| fake_job(p, PROFILE_SHA);
    let a = run_batch_with_messages(&opts(&input, &o1, 1), job, Box::new(io::sink())).unwrap();
    let b = run_batch_with_messages(&opts(&input, &o4, 4), job, Box::new(io::sink())).unwrap();
    assert_eq!(a.counts, b.counts);
    for name in ["summary.jsonl", "summary.csv"] {
        assert_eq!(
            fs::read(o1.join(name)).unwrap(),
            fs::read(o4.join(name)).unwrap(),
            "{name}"
        );
    }
    let f1: Vec<PathBuf> = files_under(&o1)
        .iter()
        .map(|p| p.strip_prefix(&o1).unwrap().into())
        .collect();
    let f4: Vec<PathBuf> = files_under(&o4)
        .iter()
        .map(|p| p.strip_prefix(&o4).unwrap().into())
        .collect();
    assert_eq!(f1, f4);
    for rel in &f1 {
        assert_eq!(
            fs::read(o1.join(rel)).unwrap(),
            fs::read(o4.join(rel)).unwrap(),
            "{rel:?}"
        );
    }
}

#[test]
fn the_shards_partition_the_captures_and_their_merge_equals_the_whole_run() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("in");
    many_files(&input, 40);
    let job = |p: &Path, _: Option<&str>| fake_job(p, PROFILE_SHA);
    let whole = dir.path().join("whole");
    let all = run_batch_with_messages(&opts(&input, &whole, 2), job, Box::new(io::sink())).unwrap();

    let shared = dir.path().join("shards");
    let n = 3;
    let mut seen: Vec<String> = Vec::new();
    let mut parts = Vec::new();
    for k in 1..=n {
        let mut o = opts(&input, &shared, 2);
        o.shard = Some(Shard::new(k, n).unwrap());
        let r = run_batch_with_messages(&o, job, Box::new(io::sink())).unwrap();
        assert_eq!(r.counts.total + r.counts.other_shards, 40);
        assert!(
            r.counts.total > 0,
            "40 paths over 3 shards leave none empty here"
        );
        seen.extend(r.rows.iter().map(|x| x.path.clone()));
        parts.push(shared.join(format!("summary.shard-{k}-of-{n}.jsonl")));
        assert_eq!(r.summary_jsonl, *parts.last().unwrap());
    }
    let unique: std::collections::BTreeSet<&String> = seen.iter().collect();
    assert_eq!(unique.len(), seen.len(), "no capture is in two shards");
    assert_eq!(seen.len(), all.rows.len(), "every capture is in some shard");

    let merged_dir = dir.path().join("merged");
    let merged = merge_summaries(&parts, &merged_dir).unwrap();
    assert_eq!(merged, all.rows);
    for name in ["summary.jsonl", "summary.csv"] {
        assert_eq!(
            fs::read(merged_dir.join(name)).unwrap(),
            fs::read(whole.join(name)).unwrap()
        );
    }
    // The same shard file twice is refused.
    assert!(merge_summaries(&[parts[0].clone(), parts[0].clone()], &merged_dir).is_err());
}

#[test]
fn a_second_run_skips_up_to_date_reports_and_force_redoes_them() {
    let dir = tempfile::tempdir().unwrap();
    let (input, out) = (dir.path().join("in"), dir.path().join("out"));
    mixed_folder(&input);
    let calls = AtomicUsize::new(0);
    // Every digest the batch hands to the job, by file name.
    let digests: Mutex<Vec<(String, String)>> = Mutex::new(Vec::new());
    let job = |p: &Path, known: Option<&str>| {
        calls.fetch_add(1, Ordering::SeqCst);
        if let Some(d) = known {
            let name = p.file_name().unwrap().to_string_lossy().into_owned();
            digests.lock().unwrap().push((name, d.to_string()));
        }
        fake_job(p, PROFILE_SHA)
    };
    let first = run_batch_with_messages(&opts(&input, &out, 2), job, Box::new(io::sink())).unwrap();
    let summary1 = fs::read(out.join("summary.jsonl")).unwrap();
    let csv1 = fs::read(out.join("summary.csv")).unwrap();
    assert_eq!(calls.swap(0, Ordering::SeqCst), 8);

    let second =
        run_batch_with_messages(&opts(&input, &out, 2), job, Box::new(io::sink())).unwrap();
    // Only the three unreadable files (no report) are tried again.
    assert_eq!(calls.swap(0, Ordering::SeqCst), 3);
    assert_eq!((second.counts.skipped, second.counts.analysed), (5, 0));
    assert_eq!(second.exit_code(), first.exit_code());
    assert_eq!(
        fs::read(out.join("summary.jsonl")).unwrap(),
        summary1,
        "rows rebuilt from reports"
    );
    assert_eq!(fs::read(out.join("summary.csv")).unwrap(), csv1);

    let mut forced = opts(&input, &out, 2);
    forced.force = true;
    let third = run_batch_with_messages(&forced, job, Box::new(io::sink())).unwrap();
    assert_eq!(calls.swap(0, Ordering::SeqCst), 8);
    assert_eq!((third.counts.skipped, third.counts.analysed), (0, 5));

    // Same size, different bytes: the hash differs, so that capture is re-run.
    fs::write(input.join("site-a/good-2.cf32"), [7u8; 80]).unwrap();
    let fourth =
        run_batch_with_messages(&opts(&input, &out, 2), job, Box::new(io::sink())).unwrap();
    assert_eq!(calls.swap(0, Ordering::SeqCst), 3 + 1);
    assert_eq!(fourth.counts.analysed, 1);
    // The digest computed to find the report stale is handed to the job (so the
    // capture is hashed once), and it is the new file's digest; in the runs
    // before, no capture was hashed before its job ran (no report, or --force).
    // Source: sha256_file, checked against the FIPS 180-4 examples in the unit tests.
    assert_eq!(
        *digests.lock().unwrap(),
        [(
            "good-2.cf32".to_string(),
            sha256_file(&input.join("site-a/good-2.cf32")).unwrap()
        )]
    );

    // A different resolved profile makes every report stale.
    let other = "0".repeat(64);
    let o = BatchOptions {
        profile_sha256: other.clone(),
        ..opts(&input, &out, 2)
    };
    let fifth = run_batch_with_messages(
        &o,
        |p, _| {
            calls.fetch_add(1, Ordering::SeqCst);
            fake_job(p, &other)
        },
        Box::new(io::sink()),
    )
    .unwrap();
    assert_eq!(calls.swap(0, Ordering::SeqCst), 8);
    assert_eq!(fifth.counts.analysed, 5);
}

#[test]
fn an_interrupted_batch_leaves_only_whole_reports_and_a_summary_of_what_completed() {
    let dir = tempfile::tempdir().unwrap();
    let (input, out) = (dir.path().join("in"), dir.path().join("out"));
    for i in 0..30 {
        populate(&input, &[(&format!("good-{i:02}.cf32"), &[i as u8; 24])]);
    }
    let cancel = CancelFlag::new();
    let mut o = opts(&input, &out, 2);
    o.cancel = cancel.clone();
    let started = AtomicUsize::new(0);
    let job = |p: &Path, _: Option<&str>| {
        // The fourth capture to start plays the user pressing Ctrl-C; captures
        // already running finish (slowly) and are written whole.
        if started.fetch_add(1, Ordering::SeqCst) == 3 {
            cancel.request(iqaudit::batch::cancel::SIGINT);
        }
        std::thread::sleep(std::time::Duration::from_millis(20));
        fake_job(p, PROFILE_SHA)
    };
    let sink = Sink::default();
    let r = run_batch_with_messages(&o, job, Box::new(sink.clone())).unwrap();
    assert_eq!(r.interrupted, Some(2));
    assert_eq!(r.exit_code(), 130);
    let done = r.rows.len();
    assert!((4..30).contains(&done), "{done} rows");
    assert_eq!(r.counts.not_started, 30 - done);

    let files = files_under(&out);
    assert!(
        files.iter().all(|p| !p.to_string_lossy().ends_with(".tmp")),
        "{files:?}"
    );
    let reports: Vec<&PathBuf> = files
        .iter()
        .filter(|p| p.to_string_lossy().ends_with(".report.json"))
        .collect();
    assert_eq!(reports.len(), done);
    for p in reports {
        let rep: Report = serde_json::from_slice(&fs::read(p).unwrap()).unwrap();
        assert_eq!(rep.verdict.result, VerdictResult::Pass);
    }
    let jsonl = fs::read_to_string(out.join("summary.jsonl")).unwrap();
    assert_eq!(jsonl.lines().count(), done);
    assert!(sink.text().contains("interrupted by SIGINT"));

    // Resuming picks up exactly where it stopped.
    let r2 = run_batch_with_messages(
        &opts(&input, &out, 2),
        |p, _| fake_job(p, PROFILE_SHA),
        Box::new(io::sink()),
    )
    .unwrap();
    assert_eq!((r2.counts.skipped, r2.counts.analysed), (done, 30 - done));
    assert_eq!(r2.exit_code(), 0);
}

#[test]
fn an_unwritable_output_folder_fails_before_any_capture_is_touched() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("in");
    mixed_folder(&input);
    let blocker = dir.path().join("a-file");
    fs::write(&blocker, b"x").unwrap();
    let calls = AtomicUsize::new(0);
    let err = run_batch_with_messages(
        &opts(&input, &blocker.join("out"), 2),
        |p, _| {
            calls.fetch_add(1, Ordering::SeqCst);
            fake_job(p, PROFILE_SHA)
        },
        Box::new(io::sink()),
    )
    .unwrap_err();
    assert!(
        matches!(err, iqaudit::batch::BatchError::OutputNotWritable { .. }),
        "{err}"
    );
    assert_eq!(err.exit_code(), 2);
    assert_eq!(calls.load(Ordering::SeqCst), 0);
}

#[test]
fn a_folder_without_captures_or_a_missing_folder_is_an_error() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("in");
    populate(&input, &[("notes.txt", b"nothing here")]);
    let out = dir.path().join("out");
    let job = |p: &Path, _: Option<&str>| fake_job(p, PROFILE_SHA);
    let err =
        run_batch_with_messages(&opts(&input, &out, 1), job, Box::new(io::sink())).unwrap_err();
    assert!(err.to_string().contains("no captures found"), "{err}");
    let err = run_batch_with_messages(
        &opts(&dir.path().join("nope"), &out, 1),
        job,
        Box::new(io::sink()),
    )
    .unwrap_err();
    assert!(
        matches!(err, iqaudit::batch::BatchError::InputFolder { .. }),
        "{err}"
    );
}

#[test]
fn an_output_folder_inside_the_input_is_not_walked_and_glob_narrows_the_set() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().to_path_buf();
    mixed_folder(&input);
    let out = input.join("reports");
    let job = |p: &Path, _: Option<&str>| fake_job(p, PROFILE_SHA);
    let a = run_batch_with_messages(&opts(&input, &out, 2), job, Box::new(io::sink())).unwrap();
    // A capture-named file planted in the output folder is never picked up.
    fs::write(out.join("planted.cf32"), [1u8; 8]).unwrap();
    let b = run_batch_with_messages(&opts(&input, &out, 2), job, Box::new(io::sink())).unwrap();
    assert_eq!(a.counts.total, 8);
    assert_eq!(b.counts.total, 8);

    let mut o = opts(&input, &dir.path().join("narrow"), 2);
    o.globs = vec![
        Glob::new("site-a/**/*.cf32").unwrap(),
        Glob::new("*.bin").unwrap(),
    ];
    let c = run_batch_with_messages(&o, job, Box::new(io::sink())).unwrap();
    let paths: Vec<&str> = c.rows.iter().map(|r| r.path.as_str()).collect();
    assert_eq!(
        paths,
        ["mystery.bin", "site-a/good-1.cf32", "site-a/good-2.cf32"]
    );
    // Classes and alternation (#19): `[12]` and `{a,b}` are wildcards, not text.
    let mut o = opts(&input, &dir.path().join("classes"), 2);
    o.globs = vec![Glob::new("site-{a,z}/good-[2-9].cf32").unwrap()];
    let c = run_batch_with_messages(&o, job, Box::new(io::sink())).unwrap();
    let paths: Vec<&str> = c.rows.iter().map(|r| r.path.as_str()).collect();
    assert_eq!(paths, ["site-a/good-2.cf32"]);
}

#[test]
fn quiet_mode_prints_only_the_final_line() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("in");
    mixed_folder(&input);
    let mut o = opts(&input, &dir.path().join("out"), 2);
    o.progress = ProgressMode::Quiet;
    let sink = Sink::default();
    run_batch_with_messages(&o, |p, _| fake_job(p, PROFILE_SHA), Box::new(sink.clone())).unwrap();
    let text = sink.text();
    let lines: Vec<&str> = text.lines().collect();
    assert_eq!(lines.len(), 1, "{text}");
    assert!(lines[0].starts_with("batch: 8 captures"));
}
