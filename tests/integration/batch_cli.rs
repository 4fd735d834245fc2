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
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", stderr_of(&o));
}

fn without_command(mut v: Value) -> Value {
    v.as_object_mut().unwrap().remove("command");
    v
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
    let single = dir.path().join("single.report.json");
    let a = iqaudit()
        .arg("analyse")
        .arg(field.join("quay/crane-2.cf32"))
        .arg("--profile")
        .arg(&prof)
        .arg("--report")
        .arg(&single)
        .output()
        .unwrap();
    assert!(a.status.code().is_some_and(|c| c <= 1), "{}", stderr_of(&a));
    let from_batch: Value =
        serde_json::from_slice(&fs::read(out.join("quay/crane-2.cf32.report.json")).unwrap())
            .unwrap();
    let from_analyse: Value = serde_json::from_slice(&fs::read(&single).unwrap()).unwrap();
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
}
