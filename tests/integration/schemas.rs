//! Every kind of JSON document iqaudit writes validates against the JSON Schema
//! shipped in docs/schemas/ (#19): reports (pass, fail, no training, WAV and
//! SigMF inputs), batch summary rows (analysed and unreadable captures) and the
//! reports batch writes, `info --json`, synth's truth files (the committed
//! sample captures' too) and `recheck --json` (reproducing and not).
//!
//! The validator is the Python `jsonschema` package (Draft 2020-12), run by
//! tests/schemas/validate.py — an implementation independent of the Rust types
//! the schemas are generated from. Deliberately broken documents (an unknown
//! key, another schema id, an unknown verdict, a number as a string) must fail
//! it, so the check can fail. Without python3 and the package the test says so
//! loudly and passes, except under CI (`CI`, `IQAUDIT_CI` or
//! `IQAUDIT_REQUIRE_SIGMF` set, as tests/run-all.sh and .ci/run do), where it
//! fails.

use std::fs;
use std::path::{Path, PathBuf};
use std::process::Command;

use serde_json::{json, Value};

use crate::util::{iqaudit, stderr_of, tempdir, test_data};

fn repo() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).to_path_buf()
}

fn schema(name: &str) -> PathBuf {
    repo()
        .join("docs/schemas")
        .join(format!("{name}.schema.json"))
}

/// Whether python3 with `jsonschema` runs; panics under CI when not.
fn validator_available() -> bool {
    let ok = Command::new("python3")
        .args(["-c", "import jsonschema"])
        .output()
        .is_ok_and(|o| o.status.success());
    if !ok {
        let required = ["CI", "IQAUDIT_CI", "IQAUDIT_REQUIRE_SIGMF"]
            .iter()
            .any(|v| std::env::var_os(v).is_some());
        assert!(
            !required,
            "python3 with the `jsonschema` package is required in CI (tests/run-all.sh installs it)"
        );
        eprintln!(
            "\n*** SKIPPED: JSON Schema validation of every document: python3 with the \
             `jsonschema` package is not installed (tests/run-all.sh installs it) ***\n"
        );
    }
    ok
}

fn run(cmd: &mut assert_cmd::Command, codes: &[i32]) -> std::process::Output {
    let out = cmd.output().unwrap();
    assert!(
        out.status.code().is_some_and(|c| codes.contains(&c)),
        "exit {:?}: {}",
        out.status.code(),
        stderr_of(&out)
    );
    out
}

fn entry(schema_name: &str, doc: &Path, lines: bool, valid: bool) -> Value {
    json!({"schema": schema(schema_name), "doc": doc, "lines": lines, "valid": valid})
}

/// `doc` edited by `f`, written beside it as `NAME.broken-TAG.json`.
fn broken(doc: &Path, tag: &str, f: impl FnOnce(&mut Value)) -> PathBuf {
    let mut v: Value = serde_json::from_str(&fs::read_to_string(doc).unwrap()).unwrap();
    f(&mut v);
    let p = doc.with_extension(format!("broken-{tag}.json"));
    fs::write(&p, serde_json::to_vec(&v).unwrap()).unwrap();
    p
}

#[test]
fn every_document_iqaudit_writes_validates_against_its_shipped_schema() {
    if !validator_available() {
        return;
    }
    let dir = tempdir();
    let d = dir.path();
    let link = test_data("vectors/sigmf/link.profile.json");
    let mut manifest = Vec::new();

    // synth: raw with a SigMF sidecar, and WAV.
    let field = d.join("field");
    fs::create_dir_all(&field).unwrap();
    for (name, extra) in [
        ("a.ci16", &["--format", "ci16_le"][..]),
        ("b.wav", &["--format", "wav_pcm16"][..]),
    ] {
        run(
            iqaudit()
                .args(["synth", "--profile"])
                .arg(&link)
                .arg("--out")
                .arg(field.join(name))
                .args(["--sample-rate", "250000", "--bursts", "2", "--seed", "5"])
                .args(["--esn0-db", "22"])
                .args(extra),
            &[0],
        );
        manifest.push(entry(
            "synth-truth",
            &field.join(format!("{name}.truth.json")),
            false,
            true,
        ));
    }
    for f in fs::read_dir(repo().join("sample-captures")).unwrap() {
        let p = f.unwrap().path();
        if p.to_string_lossy().ends_with(".truth.json") {
            manifest.push(entry("synth-truth", &p, false, true));
        }
    }
    // A capture with no burst in it: zeros.
    let quiet = d.join("quiet.ci16");
    fs::write(&quiet, vec![0u8; 40_000]).unwrap();

    // analyse: pass/fail, WAV, no training; then recheck.
    let mut reports = Vec::new();
    for (cap, codes) in [
        (field.join("a.ci16"), &[0, 1][..]),
        (field.join("b.wav"), &[0, 1][..]),
        (quiet.clone(), &[3][..]),
    ] {
        let report = cap.with_extension("report.json");
        let mut cmd = iqaudit();
        cmd.arg("analyse")
            .arg(&cap)
            .arg("--profile")
            .arg(&link)
            .arg("--report")
            .arg(&report);
        if cap == quiet {
            cmd.args(["--sample-rate", "250000"]);
        }
        run(&mut cmd, codes);
        manifest.push(entry("report", &report, false, true));
        reports.push(report);
    }
    // The committed sample capture with its strict limits.
    let sample = repo().join("sample-captures/crane-fade.ci16");
    let sample_report = d.join("crane-fade.report.json");
    run(
        iqaudit()
            .arg("analyse")
            .arg(&sample)
            .arg("--report")
            .arg(&sample_report),
        &[0, 1],
    );
    manifest.push(entry("report", &sample_report, false, true));

    let recheck_ok = d.join("recheck-ok.json");
    let out = run(
        iqaudit().arg("recheck").arg(&reports[0]).arg("--json"),
        &[0],
    );
    fs::write(&recheck_ok, &out.stdout).unwrap();
    manifest.push(entry("recheck", &recheck_ok, false, true));
    let tampered = broken(&reports[0], "tampered", |v| {
        let x = v["bursts"][0]["cfo_hz"].as_f64().unwrap();
        v["bursts"][0]["cfo_hz"] = json!(x + 1.0);
    });
    let recheck_differs = d.join("recheck-differs.json");
    let out = run(iqaudit().arg("recheck").arg(&tampered).arg("--json"), &[1]);
    fs::write(&recheck_differs, &out.stdout).unwrap();
    manifest.push(entry("recheck", &recheck_differs, false, true));

    // info --json, with and without a known rate.
    for (i, cap) in [field.join("a.ci16"), quiet.clone()].iter().enumerate() {
        let out = run(iqaudit().arg("info").arg(cap).arg("--json"), &[0]);
        let p = d.join(format!("info-{i}.json"));
        fs::write(&p, &out.stdout).unwrap();
        manifest.push(entry("info", &p, false, true));
    }

    // batch: analysed captures, an empty file, a capture without training.
    fs::write(field.join("empty.cf32"), b"").unwrap();
    fs::copy(&quiet, field.join("quiet.ci16")).unwrap();
    let out_dir = d.join("out");
    run(
        iqaudit()
            .arg("batch")
            .arg(&field)
            .arg("--profile")
            .arg(&link)
            .arg("--out")
            .arg(&out_dir),
        &[1, 2, 3],
    );
    let summary = out_dir.join("summary.jsonl");
    manifest.push(entry("summary-row", &summary, true, true));
    let bursts = out_dir.join("bursts.jsonl");
    assert!(fs::read_to_string(&bursts).unwrap().lines().count() >= 2);
    manifest.push(entry("burst-row", &bursts, true, true));
    let mut batch_reports = 0;
    for f in fs::read_dir(&out_dir).unwrap() {
        let p = f.unwrap().path();
        if p.to_string_lossy().ends_with(".report.json") {
            manifest.push(entry("report", &p, false, true));
            batch_reports += 1;
        }
    }
    assert!(batch_reports >= 2, "{batch_reports} batch reports");

    // Broken documents must fail: the check can fail.
    let r = &reports[0];
    manifest.push(entry(
        "report",
        &broken(r, "extra-key", |v| v["input"]["colour"] = json!("blue")),
        false,
        false,
    ));
    manifest.push(entry(
        "report",
        &broken(r, "old-id", |v| v["schema"] = json!("iqaudit-report/3")),
        false,
        false,
    ));
    manifest.push(entry(
        "report",
        &broken(r, "string-number", |v| {
            v["bursts"][0]["metrics"]["evm_rms_percent"] = json!("1.5")
        }),
        false,
        false,
    ));
    manifest.push(entry(
        "report",
        &broken(r, "no-summary", |v| {
            v.as_object_mut().unwrap().remove("summary");
        }),
        false,
        false,
    ));
    let first_row = fs::read_to_string(&summary).unwrap();
    let row_path = d.join("row.json");
    fs::write(&row_path, first_row.lines().next().unwrap()).unwrap();
    manifest.push(entry(
        "summary-row",
        &broken(&row_path, "verdict", |v| v["verdict"] = json!("maybe")),
        false,
        false,
    ));
    manifest.push(entry(
        "info",
        &broken(&d.join("info-0.json"), "tool-string", |v| {
            v["tool"] = json!("iqaudit 0.1.0")
        }),
        false,
        false,
    ));

    let manifest_path = d.join("manifest.json");
    fs::write(&manifest_path, serde_json::to_vec(&manifest).unwrap()).unwrap();
    let out = Command::new("python3")
        .arg(test_data("schemas/validate.py"))
        .arg(&manifest_path)
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(
        out.status.success(),
        "JSON Schema validation failed:\n{text}{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(
        text.contains(&format!("{} passed, 0 failed", manifest.len())),
        "{text}"
    );
}

#[test]
fn schema_prints_each_document_kind_and_writes_the_shipped_files() {
    let dir = tempdir();
    let out = run(iqaudit().arg("schema"), &[0]);
    let list = String::from_utf8_lossy(&out.stdout);
    for id in [
        "iqaudit.report/4",
        "iqaudit.info/2",
        "iqaudit.summary-row/2",
        "iqaudit.burst-row/1",
        "iqaudit.synth-truth/2",
        "iqaudit.recheck/1",
    ] {
        assert!(list.contains(id), "{list}");
    }
    run(iqaudit().arg("schema").arg("--out").arg(dir.path()), &[0]);
    for name in [
        "report",
        "info",
        "summary-row",
        "burst-row",
        "synth-truth",
        "recheck",
    ] {
        let written = fs::read(dir.path().join(format!("{name}.schema.json"))).unwrap();
        let shipped = fs::read(schema(name)).unwrap();
        assert!(written == shipped, "{name}: docs/schemas is stale");
        let printed = run(iqaudit().args(["schema", name]), &[0]).stdout;
        assert_eq!(printed, shipped, "{name}");
    }
    let bad = run(iqaudit().args(["schema", "nope"]), &[2]);
    assert!(
        stderr_of(&bad).contains("summary-row"),
        "{}",
        stderr_of(&bad)
    );
}
