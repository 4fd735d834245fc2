//! `iqaudit batch` stopped part-way by a real SIGINT / SIGTERM sent to the real
//! binary: only whole reports remain, the exit status is the documented
//! 128 + signal, and a second run resumes and completes.
//!
//! "Part-way" is established by polling the output folder for the first
//! finished report (reports are renamed into place whole), never by sleeping
//! for a guessed time. The batch runs on one worker over many copies of a
//! capture with many bursts, so the signal arrives with most captures still to
//! start.

use iqaudit::batch::sha256_file;
use iqaudit::report::schema::Report;
use serde_json::Value;
use std::fs;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

use crate::util::tempdir;

/// Captures in the folder; with one worker, all but a few are still to start
/// when the signal arrives.
const CAPTURES: usize = 32;

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_iqaudit"))
}

fn checked(cmd: &mut Command) -> std::process::Output {
    let out = cmd.output().unwrap();
    assert!(
        out.status.code().is_some_and(|c| c <= 1),
        "{:?}: {}",
        cmd,
        String::from_utf8_lossy(&out.stderr)
    );
    out
}

/// A profile and a folder of `CAPTURES` captures (copies of one synthesised
/// capture under two sub-folders). Returns (profile, folder, capture digest).
fn field_folder(root: &Path) -> (PathBuf, PathBuf, String) {
    let prof = root.join("link.profile.json");
    let out = checked(bin().args(["profile", "new", "--payload-symbols", "200"]));
    fs::write(&prof, &out.stdout).unwrap();
    let one = root.join("one.ci16");
    checked(
        bin()
            .args(["synth", "--profile"])
            .arg(&prof)
            .arg("--out")
            .arg(&one)
            .args(["--bursts", "16", "--seed", "71", "--esn0-db", "30"]),
    );
    let field = root.join("field");
    for i in 0..CAPTURES {
        let rel = format!("{}/crane-{i:02}.ci16", ["quay-a", "quay-b"][i % 2]);
        let p = field.join(rel);
        fs::create_dir_all(p.parent().unwrap()).unwrap();
        fs::copy(&one, &p).unwrap();
    }
    let digest = sha256_file(&one).unwrap();
    (prof, field, digest)
}

/// Every file under `dir`, as paths relative to it, sorted.
fn files_under(dir: &Path) -> Vec<String> {
    let mut out = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        let Ok(rd) = fs::read_dir(&d) else { continue };
        for e in rd.flatten() {
            let p = e.path();
            if p.is_dir() {
                stack.push(p);
            } else if let Ok(rel) = p.strip_prefix(dir) {
                out.push(rel.to_string_lossy().into_owned());
            }
        }
    }
    out.sort();
    out
}

fn reports_under(dir: &Path) -> Vec<String> {
    files_under(dir)
        .into_iter()
        .filter(|p| p.ends_with(".report.json"))
        .collect()
}

fn start_batch(prof: &Path, field: &Path, out: &Path) -> Child {
    bin()
        .arg("batch")
        .arg(field)
        .arg("--profile")
        .arg(prof)
        .arg("--out")
        .arg(out)
        .args(["--jobs", "1"])
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap()
}

/// Wait until the batch has written its first report (so it is mid-run and its
/// signal handlers are installed). Panics if the batch ends first; the long cap
/// only keeps a broken build from hanging the suite and is not a timing check.
fn wait_for_first_report(child: &mut Child, out: &Path) {
    let cap = Instant::now() + Duration::from_secs(300);
    loop {
        if !reports_under(out).is_empty() {
            return;
        }
        if let Some(status) = child.try_wait().unwrap() {
            panic!("the batch ended ({status}) before writing any report");
        }
        assert!(Instant::now() < cap, "no report after 300 s");
        std::thread::sleep(Duration::from_millis(5));
    }
}

fn send(signal: &str, child: &Child) {
    let st = Command::new("kill")
        .arg(format!("-{signal}"))
        .arg(child.id().to_string())
        .status()
        .unwrap();
    assert!(st.success(), "kill -{signal} failed");
}

fn summary_rows(out: &Path) -> Vec<Value> {
    fs::read_to_string(out.join("summary.jsonl"))
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect()
}

/// Stop a batch with `signal`, check what it left, then resume it.
fn stop_check_and_resume(signal: &str, expected_code: i32) {
    let dir = tempdir();
    let (prof, field, digest) = field_folder(dir.path());
    let out = dir.path().join("out");

    let mut child = start_batch(&prof, &field, &out);
    wait_for_first_report(&mut child, &out);
    send(signal, &child);
    let run = child.wait_with_output().unwrap();
    let err = String::from_utf8_lossy(&run.stderr).into_owned();

    // Source: the documented exit classes (src/batch/mod.rs, README, docs/scaling.md):
    // 128 + signal number, with SIGINT = 2 and SIGTERM = 15 (POSIX signal.h).
    assert_eq!(run.status.code(), Some(expected_code), "{err}");
    assert!(
        err.contains(&format!("interrupted by SIG{signal}")),
        "{err}"
    );

    // Nothing partial: no temporary file, no progress log, no write check.
    let files = files_under(&out);
    assert!(
        files.iter().all(|f| {
            let name = Path::new(f).file_name().unwrap().to_string_lossy();
            !name.starts_with('.') && !name.ends_with(".tmp")
        }),
        "{files:?}"
    );
    // Every report present parses as a whole report of its capture.
    let reports = reports_under(&out);
    let done = reports.len();
    assert!(
        (1..CAPTURES).contains(&done),
        "stopped part-way: {done} of {CAPTURES} reports"
    );
    let mut before = Vec::new();
    for rel in &reports {
        let bytes = fs::read(out.join(rel)).unwrap();
        let rep: Report = serde_json::from_slice(&bytes).unwrap_or_else(|e| panic!("{rel}: {e}"));
        // Source: sha256_file, checked against the FIPS 180-4 examples in the
        // unit tests; every capture is a copy of the same file.
        assert_eq!(rep.input.sha256, digest, "{rel}");
        assert_eq!(rep.summary.bursts, 16, "{rel}: the synthesised burst count");
        let capture = rel.trim_end_matches(".report.json");
        assert!(rep.input.path.ends_with(capture), "{rel}");
        before.push((rel.clone(), bytes));
    }
    // The summary lists exactly the captures whose report was written.
    let rows = summary_rows(&out);
    let mut listed: Vec<String> = rows
        .iter()
        .map(|r| format!("{}.report.json", r["path"].as_str().unwrap()))
        .collect();
    listed.sort();
    assert_eq!(listed, reports);
    assert!(err.contains(&format!(
        "{} of {CAPTURES} captures not started",
        CAPTURES - done
    )));

    // A second run skips the finished captures and completes the rest.
    let again = bin()
        .arg("batch")
        .arg(&field)
        .arg("-p")
        .arg(&prof)
        .arg("-o")
        .arg(&out)
        .output()
        .unwrap();
    let err2 = String::from_utf8_lossy(&again.stderr).into_owned();
    assert!(again.status.code().is_some_and(|c| c <= 1), "{err2}");
    assert!(
        err2.contains(&format!(
            "{CAPTURES} captures: {} analysed, {done} skipped",
            CAPTURES - done
        )),
        "{err2}"
    );
    assert_eq!(reports_under(&out).len(), CAPTURES);
    assert_eq!(summary_rows(&out).len(), CAPTURES);
    for (rel, bytes) in before {
        assert_eq!(
            fs::read(out.join(&rel)).unwrap(),
            bytes,
            "{rel} was rewritten"
        );
    }
    assert!(!out.join(".progress.jsonl").exists());
}

#[test]
fn sigint_stops_a_running_batch_leaving_whole_reports_and_a_run_that_resumes() {
    stop_check_and_resume("INT", 130);
}

#[test]
fn sigterm_stops_a_running_batch_leaving_whole_reports_and_a_run_that_resumes() {
    stop_check_and_resume("TERM", 143);
}
