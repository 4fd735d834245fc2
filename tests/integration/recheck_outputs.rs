//! `iqaudit recheck` on reports that went through other tools (#19): numbers
//! compare as numbers, the listing is capped with the total, `--json` gives the
//! result, and a capture moved without its SigMF sidecar is an input problem.

use std::path::{Path, PathBuf};
use std::process::Command as Process;

use serde_json::{json, Value};

use crate::util::{iqaudit, stderr_of, tempdir};

/// The committed sample capture, its sidecar and profile copied into `dir`,
/// analysed there with a report; gives the report path.
fn sample_report(dir: &Path) -> PathBuf {
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-captures");
    for f in [
        "crane-bench-cable.ci16",
        "crane-bench-cable.sigmf-meta",
        "crane-bench-cable.ci16.profile.json",
    ] {
        std::fs::copy(src.join(f), dir.join(f)).unwrap();
    }
    let out = iqaudit()
        .current_dir(dir)
        .args(["analyse", "crane-bench-cable.ci16", "--report", "r.json"])
        .output()
        .unwrap();
    assert!(
        matches!(out.status.code(), Some(0 | 1)),
        "{}",
        stderr_of(&out)
    );
    dir.join("r.json")
}

/// True when `tool` runs; otherwise says loudly that the check is skipped, and
/// fails under CI (`.ci/run` sets IQAUDIT_CI=1 and installs the tools).
fn have(tool: &str) -> bool {
    let ok = Process::new(tool)
        .arg("--version")
        .output()
        .is_ok_and(|o| o.status.success());
    if !ok {
        eprintln!(
            "\n*** SKIPPED: `{tool}` is not installed; the {tool} round trip is NOT checked ***\n"
        );
        assert!(
            std::env::var_os("IQAUDIT_CI").is_none(),
            "{tool} missing under CI (.ci/run installs it)"
        );
    }
    ok
}

#[test]
fn reports_re_serialised_by_jq_python_and_node_still_reproduce_and_a_tampered_one_does_not() {
    // The re-serialisations are those of tests/vectors/reserialised/reserialise.sh,
    // run live on a fresh report (the committed vectors test the comparison
    // itself in src/report/compare.rs).
    let dir = tempdir();
    let report = sample_report(dir.path());
    let script =
        Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/vectors/reserialised/reserialise.sh");
    if !(have("jq") && have("python3") && have("node")) {
        return;
    }
    let out = Process::new("bash")
        .arg(&script)
        .arg(&report)
        .arg(dir.path())
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", stderr_of(&out));
    for tool in ["jq", "python", "node"] {
        let r = dir.path().join(format!("report.{tool}.json"));
        let out = iqaudit().arg("recheck").arg(&r).output().unwrap();
        assert_eq!(
            out.status.code(),
            Some(0),
            "{tool}: {}{}",
            String::from_utf8_lossy(&out.stdout),
            stderr_of(&out)
        );
        // A figure one ulp off is still caught, by its path.
        let mut v: Value = serde_json::from_str(&std::fs::read_to_string(&r).unwrap()).unwrap();
        let x = v["bursts"][1]["metrics"]["evm_rms_percent"]
            .as_f64()
            .unwrap();
        v["bursts"][1]["metrics"]["evm_rms_percent"] = json!(f64::from_bits(x.to_bits() + 1));
        std::fs::write(&r, serde_json::to_string(&v).unwrap()).unwrap();
        let out = iqaudit().arg("recheck").arg(&r).output().unwrap();
        assert_eq!(out.status.code(), Some(1), "{tool}");
        let text = String::from_utf8_lossy(&out.stdout);
        assert!(text.contains("1 figure(s)"), "{tool}: {text}");
        assert!(
            text.contains("bursts[1].metrics.evm_rms_percent"),
            "{tool}: {text}"
        );
    }
}

#[test]
fn a_long_listing_is_capped_with_the_total_and_json_gives_every_count() {
    let dir = tempdir();
    let report = sample_report(dir.path());
    let mut v: Value = serde_json::from_str(&std::fs::read_to_string(&report).unwrap()).unwrap();
    // Every tap of every burst moved: 2 numbers per tap.
    let mut moved = 0;
    for b in v["bursts"].as_array_mut().unwrap() {
        for t in b["channel"]["taps"].as_array_mut().unwrap() {
            t[0] = json!(t[0].as_f64().unwrap() + 1.0);
            t[1] = json!(t[1].as_f64().unwrap() + 1.0);
            moved += 2;
        }
    }
    assert!(moved > 25, "{moved}");
    std::fs::write(&report, serde_json::to_string(&v).unwrap()).unwrap();
    let out = iqaudit()
        .arg("recheck")
        .arg(&report)
        .args(["--max-listed", "5"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(1));
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.starts_with(&format!("{moved} figure(s)")), "{text}");
    assert_eq!(
        text.lines().filter(|l| l.contains("recorded")).count(),
        5,
        "{text}"
    );
    assert!(text.contains(&format!("and {} more", moved - 5)), "{text}");

    let out = iqaudit()
        .arg("recheck")
        .arg(&report)
        .arg("--json")
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(1));
    let j: Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(j["schema"], "iqaudit.recheck/1");
    assert_eq!(j["reproduces"], false);
    assert_eq!(j["differences_total"], moved);
    assert_eq!(j["differences"].as_array().unwrap().len(), moved);
    assert_eq!(j["differences"][0]["path"], "bursts[0].channel.taps[0][0]");
    assert!(j["figures_compared"].as_u64().unwrap() > moved as u64);
}

#[test]
fn a_capture_moved_without_its_sidecar_is_an_input_problem_not_differing_figures() {
    // PRODUCT.md / README exit classes: 2 for unreadable or incomplete input.
    let dir = tempdir();
    let report = sample_report(dir.path());
    let out = iqaudit()
        .arg("recheck")
        .arg(&report)
        .arg("--json")
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0), "{}", stderr_of(&out));
    assert_eq!(
        serde_json::from_slice::<Value>(&out.stdout).unwrap()["reproduces"],
        true
    );
    // Move report and capture to another folder, leaving the .sigmf-meta behind.
    let moved = dir.path().join("moved");
    std::fs::create_dir(&moved).unwrap();
    for f in ["r.json", "crane-bench-cable.ci16"] {
        std::fs::rename(dir.path().join(f), moved.join(f)).unwrap();
    }
    let out = iqaudit()
        .arg("recheck")
        .arg(moved.join("r.json"))
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(2),
        "{}",
        String::from_utf8_lossy(&out.stdout)
    );
    let err = stderr_of(&out);
    assert!(
        err.contains("crane-bench-cable.sigmf-meta") && err.contains("sidecar"),
        "{err}"
    );
    assert!(out.stdout.is_empty());
}
