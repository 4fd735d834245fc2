//! SigMF capture segments and burst annotations through `analyse` (#18).
//!
//! Sources: the SigMF specification v1.2 (`captures` segments with
//! `core:sample_start` and `core:frequency`; `annotations` with
//! `core:sample_start`, `core:sample_count`, `core:label`,
//! `core:freq_lower_edge`/`core:freq_upper_edge`; extension namespaces declared
//! in `core:extensions`) and the SigMF project's reference library (Python
//! `sigmf`), which validates and reads the sidecar `--annotate` writes.

use std::path::{Path, PathBuf};

use iqaudit::UnsignedZero;
use serde_json::{json, Value};

use crate::sigmf_library::{manifest_entry, reference_library_available, run_checker};
use crate::util::{analyse_json, cf32_profile, iqaudit, stderr_of, tempdir};

/// A QPSK profile as cf32 at 1 MS/s, centre 458.5 MHz (the example's).
fn profile(dir: &Path) -> PathBuf {
    let p = cf32_profile("qpsk");
    let path = dir.join("link.profile.json");
    std::fs::write(&path, serde_json::to_vec_pretty(&p).unwrap()).unwrap();
    path
}

/// Four bursts with a SigMF sidecar; the truth file's bursts.
fn synth(dir: &Path, prof: &Path, cfo: &str) -> (PathBuf, Vec<Value>) {
    let cap = dir.join("seg.cf32");
    let out = iqaudit()
        .args(["synth", "--profile"])
        .arg(prof)
        .args(["--bursts", "4", "--esn0-db", "25", "--seed", "5"])
        .args(["--cfo-hz", cfo, "--out"])
        .arg(&cap)
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", stderr_of(&out));
    let truth: Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("seg.cf32.truth.json")).unwrap())
            .unwrap();
    (cap, truth["bursts"].as_array().unwrap().clone())
}

fn analyse(cap: &Path, prof: &Path, extra: &[&str]) -> (Value, String) {
    let (rep, _, err) = analyse_json(prof, cap, extra);
    (rep, err)
}

#[test]
fn each_burst_reports_the_centre_frequency_of_its_capture_segment() {
    let dir = tempdir();
    let prof = profile(dir.path());
    let (cap, truth) = synth(dir.path(), &prof, "1200");
    let meta_path = dir.path().join("seg.sigmf-meta");
    let mut meta: Value =
        serde_json::from_str(&std::fs::read_to_string(&meta_path).unwrap()).unwrap();
    // Segment 2 starts in the gap between bursts 1 and 2; segment 3 inside
    // burst 3's payload.
    let gap =
        (truth[1]["end_sample"].as_u64().unwrap() + truth[2]["first_sample"].as_u64().unwrap()) / 2;
    let inside = truth[3]["start_sample"].as_u64().unwrap() + 2000;
    let (f1, f2, f3) = (458.5e6, 458.6e6, 458.7e6);
    meta["captures"] = json!([
        {"core:sample_start": 0, "core:frequency": f1},
        {"core:sample_start": gap, "core:frequency": f2},
        {"core:sample_start": inside, "core:frequency": f3},
    ]);
    std::fs::write(&meta_path, serde_json::to_vec_pretty(&meta).unwrap()).unwrap();
    let (rep, _) = analyse(&cap, &prof, &[]);
    let b = rep["bursts"].as_array().unwrap();
    assert_eq!(b.len(), 4);
    for (i, want) in [(0, f1), (1, f1), (2, f2), (3, f2)] {
        assert_eq!(b[i]["center_freq_hz"].as_f64(), Some(want), "burst {i}");
        let ppm = b[i]["cfo_hz"].as_f64().unwrap() / want * 1e6;
        let got = b[i]["cfo_ppm"].as_f64().unwrap();
        assert!(
            (got - ppm).abs() < 1e-9,
            "burst {i}: {got} ppm against {ppm}"
        );
    }
    let spans = |i: usize| {
        b[i]["warnings"]
            .as_array()
            .unwrap()
            .iter()
            .any(|w| w["code"] == "spans-segments")
    };
    assert!(spans(3), "{}", b[3]["warnings"]);
    assert!(!(0..3).any(spans));
}

#[test]
fn a_profile_frequency_that_contradicts_the_sidecar_is_named_in_a_warning() {
    let dir = tempdir();
    let prof = profile(dir.path());
    let (cap, _) = synth(dir.path(), &prof, "0");
    let mut p: Value = serde_json::from_str(&std::fs::read_to_string(&prof).unwrap()).unwrap();
    p["capture"]["center_freq_hz"] = json!(869.525e6);
    let other = dir.path().join("other.profile.json");
    std::fs::write(&other, serde_json::to_vec_pretty(&p).unwrap()).unwrap();
    let (rep, err) = analyse(&cap, &other, &[]);
    // The sidecar wins (the precedence of docs/sigmf.md), and both are named.
    assert_eq!(rep["input"]["center_freq_hz"].as_f64(), Some(458.5e6));
    let w: Vec<&str> = rep["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|w| w["code"] == "metadata-disagrees")
        .map(|w| w["message"].as_str().unwrap())
        .collect();
    assert!(
        w.iter()
            .any(|m| m.contains("458500000") && m.contains("869525000")),
        "{w:?}"
    );
    assert!(err.contains("869525000"), "{err}");
}

#[test]
fn annotate_writes_the_bursts_to_a_new_sidecar_the_reference_library_accepts() {
    let dir = tempdir();
    let prof = profile(dir.path());
    let (cap, truth) = synth(dir.path(), &prof, "-700");
    let input_meta = dir.path().join("seg.sigmf-meta");
    let before = std::fs::read(&input_meta).unwrap();
    let (rep, err) = analyse(&cap, &prof, &["--annotate"]);
    let new_meta = dir.path().join("seg.cf32.annotations.sigmf-meta");
    assert!(err.contains("4 burst annotation(s) written"), "{err}");
    assert_eq!(
        std::fs::read(&input_meta).unwrap(),
        before,
        "the input sidecar changed"
    );
    let meta: Value = serde_json::from_str(&std::fs::read_to_string(&new_meta).unwrap()).unwrap();
    let ours: Vec<&Value> = meta["annotations"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|a| a["iqaudit:kind"] == "detected")
        .collect();
    assert_eq!(ours.len(), 4);
    for (i, a) in ours.iter().enumerate() {
        // The burst's first symbol instant (the training's: the payload follows it) within a sample of the truth's.
        let start = a["core:sample_start"].as_i64().unwrap();
        let first = truth[i]["start_sample"].as_i64().unwrap();
        assert!(
            (start - first).abs() <= 1,
            "burst {i}: {start} against {first}"
        );
        assert_eq!(
            a["iqaudit:evm_rms_percent"].as_f64(),
            rep["bursts"][i]["metrics"]["evm_rms_percent"].as_f64()
        );
        let lo = a["core:freq_lower_edge"].as_f64().unwrap();
        let hi = a["core:freq_upper_edge"].as_f64().unwrap();
        // Band edges: carrier ± (1 + roll-off)·Rs/2 = 458.5 MHz − 700 Hz ± 156.25 kHz.
        let carrier = 458.5e6 + rep["bursts"][i]["cfo_hz"].as_f64().unwrap();
        assert!(
            (lo - (carrier - 156_250.0)).abs() < 1e-3 && (hi - (carrier + 156_250.0)).abs() < 1e-3
        );
    }
    assert!(
        meta["global"]["core:extensions"]
            .as_array()
            .is_some_and(|e| e.iter().any(|x| x["name"] == "iqaudit")),
        "{}",
        meta["global"]
    );
    // `--annotate sidecar` updates the input's own sidecar; running it twice
    // replaces this crate's annotations and keeps synth's truth ones.
    for _ in 0..2 {
        let (_, err) = analyse(&cap, &prof, &["--annotate", "sidecar"]);
        assert!(err.contains("written to"), "{err}");
    }
    let meta: Value = serde_json::from_str(&std::fs::read_to_string(&input_meta).unwrap()).unwrap();
    let kinds: Vec<&str> = meta["annotations"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|a| a["iqaudit:kind"].as_str())
        .collect();
    assert_eq!(
        kinds.iter().filter(|k| **k == "detected").count(),
        4,
        "{kinds:?}"
    );
    assert_eq!(
        kinds.iter().filter(|k| **k == "truth").count(),
        4,
        "{kinds:?}"
    );
    if reference_library_available() {
        let entries = vec![
            manifest_entry(dir.path(), &new_meta, UnsignedZero::Symmetric),
            manifest_entry(dir.path(), &input_meta, UnsignedZero::Symmetric),
        ];
        run_checker(dir.path(), &entries);
    }
}

#[test]
fn batch_annotate_writes_a_sidecar_for_every_capture_it_analyses() {
    let dir = tempdir();
    let prof = profile(dir.path());
    let input = dir.path().join("field");
    std::fs::create_dir(&input).unwrap();
    for (name, seed) in [("north.cf32", "1"), ("south.cf32", "2")] {
        let out = iqaudit()
            .args(["synth", "--profile"])
            .arg(&prof)
            .args(["--bursts", "3", "--esn0-db", "25", "--seed", seed, "--out"])
            .arg(input.join(name))
            .output()
            .unwrap();
        assert!(out.status.success(), "{}", stderr_of(&out));
    }
    let out = iqaudit()
        .arg("batch")
        .arg(&input)
        .arg("--profile")
        .arg(&prof)
        .arg("--out")
        .arg(dir.path().join("reports"))
        .args(["--annotate", "--quiet"])
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", stderr_of(&out));
    for name in ["north.cf32", "south.cf32"] {
        let meta: Value = serde_json::from_str(
            &std::fs::read_to_string(input.join(format!("{name}.annotations.sigmf-meta"))).unwrap(),
        )
        .unwrap();
        let detected = meta["annotations"]
            .as_array()
            .unwrap()
            .iter()
            .filter(|a| a["iqaudit:kind"] == "detected")
            .count();
        assert_eq!(detected, 3, "{name}");
    }
    // Source: the SigMF reference library (Python sigmf) validates each
    // sidecar batch wrote and reads the same samples through it.
    if reference_library_available() {
        let entries: Vec<Value> = ["north.cf32", "south.cf32"]
            .iter()
            .map(|name| {
                let meta = input.join(format!("{name}.annotations.sigmf-meta"));
                manifest_entry(dir.path(), &meta, UnsignedZero::Symmetric)
            })
            .collect();
        run_checker(dir.path(), &entries);
    }
}

#[test]
fn the_profile_can_name_the_unsigned_zero_point_and_analyse_reads_by_it() {
    // SigMF leaves the zero of unsigned datatypes open; `power_of_two` is the
    // reference library's convention (Python sigmf 1.14, autoscale: (x − 128)/128
    // for cu8), `symmetric` this crate's default ((x − 127.5)/127.5). The burst's
    // received power must be the mean |x|² of its samples under the named rule,
    // computed here directly from the bytes.
    let dir = tempdir();
    let prof = profile(dir.path());
    let cap = dir.path().join("u.cu8");
    let out = iqaudit()
        .args(["synth", "--profile"])
        .arg(&prof)
        .args([
            "--bursts",
            "2",
            "--esn0-db",
            "25",
            "--seed",
            "8",
            "--format",
            "cu8",
        ])
        .args(["--level-dbfs", "-12", "--no-sigmf", "--out"])
        .arg(&cap)
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", stderr_of(&out));
    let bytes = std::fs::read(&cap).unwrap();
    for (rule, zero) in [("symmetric", 127.5f64), ("power_of_two", 128.0)] {
        let mut p: Value = serde_json::from_str(&std::fs::read_to_string(&prof).unwrap()).unwrap();
        p["capture"]["format"] = "cu8".into();
        p["capture"]["unsigned_zero"] = rule.into();
        let pp = dir.path().join(format!("{rule}.json"));
        std::fs::write(&pp, serde_json::to_vec(&p).unwrap()).unwrap();
        let (rep, err) = analyse(&cap, &pp, &[]);
        assert_eq!(rep["profile"]["capture"]["unsigned_zero"], rule, "{err}");
        let b = &rep["bursts"][0];
        // The burst's own samples: training (64) and payload after (1024) at 4 samples/symbol.
        let start = b["start_sample"].as_u64().unwrap() as usize;
        let end = (start + (64 + 1024) * 4).min(bytes.len() / 2);
        let power: f64 = (start..end)
            .map(|k| {
                let i = (f64::from(bytes[2 * k]) - zero) / zero;
                let q = (f64::from(bytes[2 * k + 1]) - zero) / zero;
                i * i + q * q
            })
            .sum::<f64>()
            / (end - start) as f64;
        let want = 10.0 * power.log10();
        let got = b["received_power_dbfs"].as_f64().unwrap();
        assert!(
            (got - want).abs() < 1e-4,
            "{rule}: {got} dBFS against {want}"
        );
        // `--unsigned-zero` on the command line overrides the profile (here
        // the opposite rule), is recorded in the report's profile, and the
        // report written with it rechecks.
        let other = if rule == "symmetric" {
            "power_of_two"
        } else {
            "symmetric"
        };
        p["capture"]["unsigned_zero"] = other.into();
        std::fs::write(&pp, serde_json::to_vec(&p).unwrap()).unwrap();
        let report = dir.path().join(format!("{rule}.report.json"));
        let flag = [
            "--unsigned-zero",
            rule,
            "--report",
            report.to_str().unwrap(),
        ];
        let (rep, err) = analyse(&cap, &pp, &flag);
        assert_eq!(rep["profile"]["capture"]["unsigned_zero"], rule, "{err}");
        assert_eq!(rep["bursts"][0]["received_power_dbfs"].as_f64(), Some(got));
        let out = iqaudit().arg("recheck").arg(&report).output().unwrap();
        assert!(out.status.success(), "{rule}: {}", stderr_of(&out));
    }
}

#[test]
fn pooled_ser_from_the_summary_columns_equals_one_analysis_of_the_concatenated_captures() {
    // #19: with symbol_errors and symbols per row a fleet SER pools exactly
    // (Σ errors / Σ symbols); the reference is one analysis of the two
    // captures joined end to end (synth leaves gaps around every burst, so no
    // burst straddles the join). 11 dB Es/N0 on 16-QAM makes errors to count.
    let dir = tempdir();
    let out = iqaudit()
        .args(["profile", "new", "--modulation", "16qam"])
        .output()
        .unwrap();
    let mut p: Value = serde_json::from_slice(&out.stdout).unwrap();
    p["capture"]["format"] = "cf32_le".into();
    let prof = dir.path().join("p.json");
    std::fs::write(&prof, serde_json::to_vec(&p).unwrap()).unwrap();
    let input = dir.path().join("field");
    std::fs::create_dir(&input).unwrap();
    let mut joined = Vec::new();
    for (name, seed) in [("a.cf32", "1"), ("b.cf32", "2")] {
        let out = iqaudit()
            .args(["synth", "--profile"])
            .arg(&prof)
            .args([
                "--bursts",
                "3",
                "--esn0-db",
                "11",
                "--seed",
                seed,
                "--no-sigmf",
            ])
            .args(["--lead-gap", "2000", "--out"])
            .arg(input.join(name))
            .output()
            .unwrap();
        assert!(out.status.success(), "{}", stderr_of(&out));
        joined.extend(std::fs::read(input.join(name)).unwrap());
    }
    let out = iqaudit()
        .arg("batch")
        .arg(&input)
        .arg("--profile")
        .arg(&prof)
        .arg("--out")
        .arg(dir.path().join("reports"))
        .arg("--quiet")
        .output()
        .unwrap();
    assert!(
        out.status.code().is_some_and(|c| c <= 1),
        "{}",
        stderr_of(&out)
    );
    let jsonl = std::fs::read_to_string(dir.path().join("reports/summary.jsonl")).unwrap();
    let (mut e, mut n) = (0u64, 0u64);
    for line in jsonl.lines() {
        let r: Value = serde_json::from_str(line).unwrap();
        e += r["symbol_errors"].as_u64().unwrap();
        n += r["symbols"].as_u64().unwrap();
        assert_eq!(r["format"], "cf32_le");
        assert_eq!(r["sample_rate_hz"].as_f64(), Some(1e6));
    }
    let whole = dir.path().join("joined.cf32");
    std::fs::write(&whole, &joined).unwrap();
    let (rep, _) = analyse(&whole, &prof, &[]);
    assert_eq!(rep["bursts"].as_array().unwrap().len(), 6);
    assert!(e > 0, "no errors to pool");
    assert_eq!(rep["summary"]["ser"]["errors"].as_u64(), Some(e));
    assert_eq!(rep["summary"]["ser"]["trials"].as_u64(), Some(n));
    // The CSV carries the same columns, and a failed limit is named.
    let csv = std::fs::read_to_string(dir.path().join("reports/summary.csv")).unwrap();
    let header: Vec<&str> = csv.lines().next().unwrap().split(',').collect();
    for col in [
        "symbol_errors",
        "symbols",
        "warning_codes",
        "failed_limits",
        "center_freq_hz",
    ] {
        assert!(header.contains(&col), "{col}: {header:?}");
    }
    assert!(jsonl.contains("limits.ser_max"), "{jsonl}");
}
