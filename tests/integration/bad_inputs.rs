//! Hostile inputs through the CLI binary, table-driven: captures, SigMF
//! sidecars, link profiles, reports and output paths. Each row states the
//! exact exit code and a piece of the message the user must see (stdout and
//! stderr together), and runs with a time limit so a hang (e.g. a FIFO opened
//! for reading) fails the test instead of stalling it. docs/robustness.md
//! lists the same table. Exit codes: 0 ok, 1 limit failed, 2 bad usage or
//! unreadable input, 3 no training found (PRODUCT.md).

use std::path::{Path, PathBuf};
use std::time::Duration;

use iqaudit::report::schema::Report;

use crate::util::{iqaudit, tempdir};

/// One row: a name, a setup that writes files into a fresh folder and returns
/// the command line (without the program name), the exit code and a message
/// substring; `check` runs afterwards on the folder for extra properties.
struct Case {
    name: &'static str,
    setup: fn(&Path) -> Vec<String>,
    code: i32,
    message: &'static str,
    check: Option<fn(&Path)>,
}

fn s(p: &Path) -> String {
    p.display().to_string()
}

fn run_ok(args: &[&str]) {
    let out = iqaudit().args(args).output().unwrap();
    assert!(
        out.status.code().is_some_and(|c| c == 0 || c == 1),
        "{args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
}

/// The example profile (`iqaudit profile new`) as JSON, with edits.
fn profile_with(dir: &Path, name: &str, edit: impl FnOnce(&mut serde_json::Value)) -> PathBuf {
    let out = iqaudit().args(["profile", "new"]).output().unwrap();
    let mut v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    // A short payload keeps the reports small and the runs quick.
    v["payload"]["length_symbols"] = serde_json::json!(128);
    edit(&mut v);
    let p = dir.join(name);
    std::fs::write(&p, serde_json::to_string_pretty(&v).unwrap()).unwrap();
    p
}

fn profile(dir: &Path) -> PathBuf {
    profile_with(dir, "p.json", |_| {})
}

/// A synthetic capture `c.ci16` (+ sidecar) made from the example profile.
fn capture(dir: &Path) -> (PathBuf, PathBuf) {
    let p = profile(dir);
    let c = dir.join("c.ci16");
    run_ok(&["synth", "--profile", &s(&p), "--out", &s(&c), "--seed", "7"]);
    (c, p)
}

/// A capture, its profile and a report `r.json` of it.
fn report(dir: &Path) -> PathBuf {
    let (c, p) = capture(dir);
    let r = dir.join("r.json");
    run_ok(&["analyse", &s(&c), "--profile", &s(&p), "--report", &s(&r)]);
    r
}

/// Edit the report JSON in place (as text, so NaN-free edits only).
fn edit_report(r: &Path, edit: impl FnOnce(&mut serde_json::Value)) {
    let mut v: serde_json::Value = serde_json::from_slice(&std::fs::read(r).unwrap()).unwrap();
    edit(&mut v);
    std::fs::write(r, serde_json::to_string(&v).unwrap()).unwrap();
}

fn mkfifo(p: &Path) {
    let ok = std::process::Command::new("mkfifo")
        .arg(p)
        .status()
        .unwrap()
        .success();
    assert!(ok, "mkfifo {}", p.display());
}

/// A canonical 44-byte PCM16 stereo WAV header followed by `payload` bytes,
/// with the data chunk declaring `declared` bytes (RIFF/WAVE layout,
/// REFERENCE-VALUES §11).
fn wav_header(declared: u32, payload: usize) -> Vec<u8> {
    let mut b = Vec::new();
    b.extend_from_slice(b"RIFF");
    b.extend_from_slice(&(36u32.wrapping_add(declared)).to_le_bytes());
    b.extend_from_slice(b"WAVEfmt ");
    b.extend_from_slice(&16u32.to_le_bytes());
    b.extend_from_slice(&1u16.to_le_bytes()); // PCM
    b.extend_from_slice(&2u16.to_le_bytes()); // channels
    b.extend_from_slice(&48_000u32.to_le_bytes());
    b.extend_from_slice(&(48_000u32 * 4).to_le_bytes());
    b.extend_from_slice(&4u16.to_le_bytes()); // block align
    b.extend_from_slice(&16u16.to_le_bytes()); // bits
    b.extend_from_slice(b"data");
    b.extend_from_slice(&declared.to_le_bytes());
    b.resize(b.len() + payload, 0);
    b
}

fn raw_with_sidecar(dir: &Path, meta: &str) -> Vec<String> {
    let c = dir.join("x.sigmf-data");
    std::fs::write(&c, [0u8; 64]).unwrap();
    std::fs::write(dir.join("x.sigmf-meta"), meta).unwrap();
    vec!["info".into(), s(&c)]
}

fn analyse_with_profile(dir: &Path, edit: fn(&mut serde_json::Value)) -> Vec<String> {
    let (c, _) = capture(dir);
    let p = profile_with(dir, "bad.json", edit);
    vec!["analyse".into(), s(&c), "--profile".into(), s(&p)]
}

fn analyse_with_profile_text(dir: &Path, text: &str) -> Vec<String> {
    let (c, _) = capture(dir);
    let p = dir.join("bad.json");
    std::fs::write(&p, text).unwrap();
    vec!["analyse".into(), s(&c), "--profile".into(), s(&p)]
}

fn recheck(r: &Path) -> Vec<String> {
    vec!["recheck".into(), s(r)]
}

fn run_table(cases: &[Case]) {
    let mut failures = Vec::new();
    for case in cases {
        let dir = tempdir();
        let args = (case.setup)(dir.path());
        let out = iqaudit()
            .args(&args)
            .timeout(Duration::from_secs(60))
            .output()
            .unwrap();
        let text = format!(
            "{}{}",
            String::from_utf8_lossy(&out.stdout),
            String::from_utf8_lossy(&out.stderr)
        );
        if out.status.code() != Some(case.code) || !text.contains(case.message) {
            failures.push(format!(
                "{}: expected exit {} with '{}', got {:?}:\n{}",
                case.name,
                case.code,
                case.message,
                out.status.code(),
                text
            ));
            continue;
        }
        if text.contains("panicked") {
            failures.push(format!("{}: panicked:\n{text}", case.name));
        }
        if let Some(check) = case.check {
            check(dir.path());
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n\n"));
}

#[test]
fn hostile_captures_give_the_documented_exit_code_and_message() {
    run_table(&[
        Case {
            name: "WAV whose data chunk claims 4 GiB",
            setup: |d| {
                let p = d.join("huge.wav");
                std::fs::write(&p, wav_header(u32::MAX - 3, 64)).unwrap();
                vec!["info".into(), s(&p)]
            },
            code: 2,
            message: "only 64 follow the header",
            check: None,
        },
        Case {
            name: "WAV truncated inside the header",
            setup: |d| {
                let p = d.join("cut.wav");
                std::fs::write(&p, &wav_header(64, 0)[..30]).unwrap();
                vec!["info".into(), s(&p)]
            },
            code: 2,
            message: "invalid WAV header",
            check: None,
        },
        Case {
            name: "raw file truncated mid-sample",
            setup: |d| {
                let p = d.join("cut.cf32");
                std::fs::write(&p, [0u8; 8 * 10 + 5]).unwrap();
                vec!["info".into(), s(&p)]
            },
            code: 0,
            message: "5 trailing byte(s) ignored",
            check: None,
        },
        Case {
            name: "raw file shorter than one sample",
            setup: |d| {
                let p = d.join("one-byte.cf32");
                std::fs::write(&p, [1u8]).unwrap();
                vec!["info".into(), s(&p)]
            },
            code: 2,
            message: "empty capture (1 bytes",
            check: None,
        },
        Case {
            name: "capture that is a directory",
            setup: |d| {
                let p = d.join("dir.cf32");
                std::fs::create_dir(&p).unwrap();
                vec!["info".into(), s(&p)]
            },
            code: 2,
            message: "not a regular file",
            check: None,
        },
        Case {
            name: "capture that is a FIFO (must not hang)",
            setup: |d| {
                let p = d.join("pipe.cf32");
                mkfifo(&p);
                vec!["info".into(), s(&p)]
            },
            code: 2,
            message: "not a regular file",
            check: None,
        },
        Case {
            name: "capture that is a character device",
            setup: |_| {
                vec![
                    "info".into(),
                    "--format".into(),
                    "cu8".into(),
                    "/dev/zero".into(),
                ]
            },
            code: 2,
            message: "not a regular file",
            check: None,
        },
        Case {
            name: "format name with a wrong endianness suffix",
            setup: |d| {
                let p = d.join("x.bin");
                std::fs::write(&p, [0u8; 16]).unwrap();
                vec!["info".into(), "--format".into(), "cf32_xe".into(), s(&p)]
            },
            code: 2,
            message: "unknown --format 'cf32_xe'",
            check: None,
        },
        Case {
            name: "no extension, no sidecar, no --format",
            setup: |d| {
                let p = d.join("mystery");
                std::fs::write(&p, [0u8; 16]).unwrap();
                vec!["info".into(), s(&p)]
            },
            code: 2,
            message: "cannot tell the sample format",
            check: None,
        },
        Case {
            name: "capture of all NaN: no training, and the report is valid JSON",
            setup: |d| {
                let p = profile(d);
                let c = d.join("nan.cf32");
                let nan = f32::NAN.to_le_bytes();
                let bytes: Vec<u8> = (0..2 * 20_000).flat_map(|_| nan).collect();
                std::fs::write(&c, bytes).unwrap();
                let r = d.join("r.json");
                vec![
                    "analyse".into(),
                    s(&c),
                    "--format".into(),
                    "cf32_le".into(),
                    "--profile".into(),
                    s(&p),
                    "--report".into(),
                    s(&r),
                ]
            },
            code: 3,
            message: "no training block",
            check: Some(|d| {
                let text = std::fs::read_to_string(d.join("r.json")).unwrap();
                assert!(!text.contains("NaN") && !text.contains("Infinity"));
                let r: Report = serde_json::from_str(&text).expect("report reads back");
                assert!(r.bursts.is_empty());
            }),
        },
        Case {
            name: "training longer than the capture",
            setup: |d| {
                let (c, _) = capture(d);
                let p = profile_with(d, "long.json", |v| {
                    v["training"]["sequence"]["length"] = serde_json::json!(4096);
                });
                vec!["analyse".into(), s(&c), "--profile".into(), s(&p)]
            },
            code: 3,
            message: "fewer than the",
            check: None,
        },
    ]);
}

#[test]
fn hostile_sigmf_sidecars_give_the_documented_exit_code_and_message() {
    run_table(&[
        Case {
            name: "datatype with a wrong endianness suffix",
            setup: |d| {
                raw_with_sidecar(
                    d,
                    r#"{"global":{"core:datatype":"cf32_xe","core:version":"1.2.0"}}"#,
                )
            },
            code: 2,
            message: "unsupported SigMF core:datatype 'cf32_xe'",
            check: None,
        },
        Case {
            name: "negative sample rate",
            setup: |d| {
                raw_with_sidecar(
                    d,
                    r#"{"global":{"core:datatype":"cf32_le","core:sample_rate":-1e6}}"#,
                )
            },
            code: 2,
            message: "SigMF key 'global.core:sample_rate'",
            check: None,
        },
        Case {
            name: "sample rate as a string",
            setup: |d| {
                raw_with_sidecar(
                    d,
                    r#"{"global":{"core:datatype":"cf32_le","core:sample_rate":"1e6"}}"#,
                )
            },
            code: 2,
            message: "is not a positive number of samples per second",
            check: None,
        },
        Case {
            name: "sample rate beyond f64 (NaN-ish)",
            setup: |d| {
                raw_with_sidecar(
                    d,
                    r#"{"global":{"core:datatype":"cf32_le","core:sample_rate":1e999}}"#,
                )
            },
            code: 2,
            message: "invalid SigMF metadata",
            check: None,
        },
        Case {
            name: "sample rate NaN literal",
            setup: |d| {
                raw_with_sidecar(
                    d,
                    r#"{"global":{"core:datatype":"cf32_le","core:sample_rate":NaN}}"#,
                )
            },
            code: 2,
            message: "invalid SigMF metadata",
            check: None,
        },
        Case {
            name: "two channels",
            setup: |d| {
                raw_with_sidecar(
                    d,
                    r#"{"global":{"core:datatype":"ci16_le","core:num_channels":2}}"#,
                )
            },
            code: 2,
            message: "core:num_channels",
            check: None,
        },
        Case {
            name: "captures is not an array",
            setup: |d| raw_with_sidecar(d, r#"{"global":{"core:datatype":"ci8"},"captures":7}"#),
            code: 2,
            message: "SigMF key 'captures'",
            check: None,
        },
        Case {
            name: "sidecar that is not UTF-8",
            setup: |d| {
                let c = d.join("x.sigmf-data");
                std::fs::write(&c, [0u8; 64]).unwrap();
                std::fs::write(d.join("x.sigmf-meta"), [0xff, 0xfe, b'{']).unwrap();
                vec!["info".into(), s(&c)]
            },
            code: 2,
            message: "not UTF-8",
            check: None,
        },
    ]);
}

#[test]
fn hostile_profiles_give_the_documented_exit_code_and_message() {
    run_table(&[
        Case {
            name: "NaN in a profile",
            setup: |d| {
                analyse_with_profile_text(
                    d,
                    r#"{"samples_per_symbol":4,"pulse":{"shape":"rrc","rolloff":NaN}}"#,
                )
            },
            code: 2,
            message: "JSON has no NaN or Infinity",
            check: None,
        },
        Case {
            name: "negative sample rate in a profile",
            setup: |d| {
                analyse_with_profile(d, |v| {
                    v["capture"]["sample_rate_hz"] = serde_json::json!(-1e6)
                })
            },
            code: 2,
            message: "capture.sample_rate_hz: expected a finite number > 0",
            check: None,
        },
        Case {
            name: "a number beyond f64",
            setup: |d| {
                let (c, _) = capture(d);
                let p = profile(d);
                let text = std::fs::read_to_string(&p)
                    .unwrap()
                    .replace("\"search\": {", "\"search\": {\"threshold\": 1e400,");
                assert!(
                    text.contains("1e400"),
                    "the profile has no search section to edit"
                );
                let bad = d.join("bad.json");
                std::fs::write(&bad, text).unwrap();
                vec!["analyse".into(), s(&c), "--profile".into(), s(&bad)]
            },
            code: 2,
            message: "search.threshold",
            check: None,
        },
        Case {
            name: "payload length 10^12",
            setup: |d| {
                analyse_with_profile(d, |v| {
                    v["payload"]["length_symbols"] = serde_json::json!(1_000_000_000_000u64)
                })
            },
            code: 2,
            message: "payload.length_symbols: expected an integer in 1..=16777216",
            check: None,
        },
        Case {
            name: "PRBS training of 10^12 symbols",
            setup: |d| {
                analyse_with_profile(d, |v| {
                    v["training"]["sequence"]["length"] = serde_json::json!(1_000_000_000_000u64)
                })
            },
            code: 2,
            message: "training.sequence.length: expected an integer in 1..=1048576",
            check: None,
        },
        Case {
            name: "a billion feedforward taps",
            setup: |d| {
                analyse_with_profile(d, |v| {
                    v["equaliser"]["feedforward_taps"] = serde_json::json!(1_000_000_000u64)
                })
            },
            code: 2,
            message: "equaliser.feedforward_taps",
            check: None,
        },
        Case {
            name: "post-cursor taps at u64::MAX",
            setup: |d| {
                analyse_with_profile(d, |v| {
                    v["channel_fit"]["post_cursor_taps"] = serde_json::json!(u64::MAX)
                })
            },
            code: 2,
            message: "channel_fit.post_cursor_taps",
            check: None,
        },
        Case {
            name: "zero samples per symbol",
            setup: |d| analyse_with_profile(d, |v| v["samples_per_symbol"] = serde_json::json!(0)),
            code: 2,
            message: "samples_per_symbol",
            check: None,
        },
        Case {
            name: "unknown key",
            setup: |d| analyse_with_profile(d, |v| v["colour"] = serde_json::json!("red")),
            code: 2,
            message: "unknown field `colour`",
            check: None,
        },
        Case {
            name: "profile that is a FIFO (must not hang)",
            setup: |d| {
                let (c, _) = capture(d);
                let p = d.join("pipe.json");
                mkfifo(&p);
                vec!["analyse".into(), s(&c), "--profile".into(), s(&p)]
            },
            code: 2,
            message: "not a regular file",
            check: None,
        },
        Case {
            name: "training symbols file that is /dev/zero (must not read forever)",
            setup: |d| {
                let mut a = analyse_with_profile(d, |v| {
                    v["training"] = serde_json::json!({
                        "sequence": {"kind": "symbols_file", "path": "/dev/zero"}
                    })
                });
                // Outside the profile's folder: the opt-in reaches the file check.
                a.push("--allow-outside-symbols".into());
                a
            },
            code: 2,
            message: "not a regular file",
            check: None,
        },
        Case {
            name: "symbols file larger than its cap (sparse, never read)",
            setup: |d| {
                let f = std::fs::File::create(d.join("huge.txt")).unwrap();
                f.set_len(iqaudit::limits::MAX_SYMBOLS_FILE_BYTES + 1)
                    .unwrap();
                analyse_with_profile(d, |v| {
                    v["training"] = serde_json::json!({
                        "sequence": {"kind": "symbols_file", "path": "huge.txt"}
                    })
                })
            },
            code: 2,
            message: "-byte limit",
            check: None,
        },
    ]);
}

#[test]
fn hostile_reports_give_the_documented_exit_code_and_message() {
    run_table(&[
        Case {
            name: "SHA-256 that is not hex",
            setup: |d| {
                let r = report(d);
                edit_report(&r, |v| {
                    v["input"]["sha256"] = serde_json::json!("z".repeat(64))
                });
                recheck(&r)
            },
            code: 2,
            message: "is not a 64-digit hex SHA-256",
            check: None,
        },
        Case {
            name: "unknown key",
            setup: |d| {
                let r = report(d);
                edit_report(&r, |v| v["extra"] = serde_json::json!(1));
                recheck(&r)
            },
            code: 2,
            message: "unknown field `extra`",
            check: None,
        },
        Case {
            name: "wrong schema",
            setup: |d| {
                let r = report(d);
                edit_report(&r, |v| v["schema"] = serde_json::json!("iqaudit-report/99"));
                recheck(&r)
            },
            code: 2,
            message: "schema is 'iqaudit-report/99'",
            check: None,
        },
        Case {
            name: "not JSON",
            setup: |d| {
                let r = d.join("r.json");
                std::fs::write(&r, "{\"schema\": ").unwrap();
                recheck(&r)
            },
            code: 2,
            message: "not valid JSON",
            check: None,
        },
        Case {
            name: "report that is a FIFO (must not hang)",
            setup: |d| {
                let r = d.join("r.json");
                mkfifo(&r);
                recheck(&r)
            },
            code: 2,
            message: "not a regular file",
            check: None,
        },
        Case {
            name: "recorded profile with a payload of 10^12 symbols",
            setup: |d| {
                let r = report(d);
                edit_report(&r, |v| {
                    v["profile"]["payload"]["after_symbols"] =
                        serde_json::json!(1_000_000_000_000u64)
                });
                recheck(&r)
            },
            code: 2,
            message: "the recorded profile is not usable: profile.payload",
            check: None,
        },
        Case {
            name: "recorded profile with roll-off 0 (would panic the pulse builder)",
            setup: |d| {
                let r = report(d);
                edit_report(&r, |v| {
                    v["profile"]["pulse"]["rolloff"] = serde_json::json!(0.0)
                });
                recheck(&r)
            },
            code: 2,
            message: "pulse.rolloff",
            check: None,
        },
        Case {
            name: "capture changed since the report",
            setup: |d| {
                let r = report(d);
                let c = d.join("c.ci16");
                let mut b = std::fs::read(&c).unwrap();
                b[100] ^= 1;
                std::fs::write(&c, b).unwrap();
                recheck(&r)
            },
            code: 2,
            message: "the capture changed since the report was written",
            check: None,
        },
    ]);
}

/// The capture `c.ci16` must be byte-identical after the run.
fn capture_unchanged(d: &Path) {
    let now = std::fs::read(d.join("c.ci16")).unwrap();
    let before = std::fs::read(d.join("c.ci16.copy")).unwrap();
    assert_eq!(now, before, "the capture was modified");
}

fn capture_with_copy(d: &Path) -> (PathBuf, PathBuf) {
    let (c, p) = capture(d);
    std::fs::copy(&c, d.join("c.ci16.copy")).unwrap();
    (c, p)
}

#[test]
fn outputs_are_never_written_over_an_input() {
    run_table(&[
        Case {
            name: "analyse X --report X",
            setup: |d| {
                let (c, p) = capture_with_copy(d);
                let args = ["analyse", &s(&c), "--profile", &s(&p), "--report", &s(&c)];
                args.map(String::from).to_vec()
            },
            code: 2,
            message: "refusing to write over an input file",
            check: Some(capture_unchanged),
        },
        Case {
            name: "analyse X --plots X",
            setup: |d| {
                let (c, p) = capture_with_copy(d);
                let args = ["analyse", &s(&c), "--profile", &s(&p), "--plots", &s(&c)];
                args.map(String::from).to_vec()
            },
            code: 2,
            message: "refusing to write over an input file",
            check: Some(capture_unchanged),
        },
        Case {
            name: "analyse X --report X's SigMF sidecar",
            setup: |d| {
                let (c, p) = capture_with_copy(d);
                let meta = d.join("c.sigmf-meta");
                let args = [
                    "analyse",
                    &s(&c),
                    "--profile",
                    &s(&p),
                    "--report",
                    &s(&meta),
                ];
                args.map(String::from).to_vec()
            },
            code: 2,
            message: "refusing to write over an input file",
            check: Some(capture_unchanged),
        },
        Case {
            name: "analyse X --report PROFILE",
            setup: |d| {
                let (c, p) = capture_with_copy(d);
                let args = ["analyse", &s(&c), "--profile", &s(&p), "--report", &s(&p)];
                args.map(String::from).to_vec()
            },
            code: 2,
            message: "refusing to write over an input file",
            check: Some(capture_unchanged),
        },
        Case {
            name: "report into a folder that does not exist",
            setup: |d| {
                let (c, p) = capture_with_copy(d);
                let r = d.join("no").join("such").join("r.json");
                let args = ["analyse", &s(&c), "--profile", &s(&p), "--report", &s(&r)];
                args.map(String::from).to_vec()
            },
            code: 2,
            message: "the folder for this output does not exist",
            check: Some(capture_unchanged),
        },
    ]);
}

/// Issue 16, rules 2–5 through the binary: resource caps on products and on
/// every file read, writes that cannot hurt, no disclosure, recognised but
/// broken containers refused.
#[test]
fn issue_16_hostile_inputs_and_outputs_are_refused_before_any_work() {
    fn analyse_args(d: &Path, extra: &[&str]) -> Vec<String> {
        let (c, p) = capture_with_copy(d);
        let mut v = vec!["analyse".to_string(), s(&c), "--profile".into(), s(&p)];
        v.extend(extra.iter().map(|x| x.to_string()));
        v
    }
    run_table(&[
        Case {
            name: "samples_per_symbol 1024 × a 2^20-symbol training (product cap)",
            setup: |d| {
                analyse_with_profile(d, |v| {
                    v["samples_per_symbol"] = serde_json::json!(1024);
                    v["training"]["sequence"] =
                        serde_json::json!({"kind": "prbs", "pattern": "prbs9", "length": 1 << 20});
                })
            },
            code: 2,
            message: "a frame of at most 33554432 samples",
            check: None,
        },
        Case {
            name: "pulse span × samples per symbol above the tap cap",
            setup: |d| {
                analyse_with_profile(d, |v| {
                    v["samples_per_symbol"] = serde_json::json!(1024);
                    v["pulse"]["span_symbols"] = serde_json::json!(1024);
                })
            },
            code: 2,
            message: "pulse.span_symbols",
            check: None,
        },
        Case {
            name: "--jobs 100000",
            setup: |d| analyse_args(d, &["--jobs", "100000"]),
            code: 2,
            message: "--jobs 100000: expected 1..=",
            check: None,
        },
        Case {
            name: "--jobs 0",
            setup: |d| analyse_args(d, &["--jobs", "0"]),
            code: 2,
            message: "--jobs 0: expected 1..=",
            check: None,
        },
        Case {
            name: "batch --jobs 100000",
            setup: |d| {
                let (_, p) = capture(d);
                let o = d.join("out");
                vec![
                    "batch".into(),
                    s(d),
                    "--profile".into(),
                    s(&p),
                    "--out".into(),
                    s(&o),
                    "--jobs".into(),
                    "100000".into(),
                ]
            },
            code: 2,
            message: "--jobs 100000: expected 1..=",
            check: None,
        },
        Case {
            name: "batch --merge /dev/zero",
            setup: |d| {
                let o = d.join("m");
                vec![
                    "batch".into(),
                    "--merge".into(),
                    "/dev/zero".into(),
                    "--out".into(),
                    s(&o),
                ]
            },
            code: 2,
            message: "not a regular file",
            check: None,
        },
        Case {
            name: "batch --merge of a FIFO (must not hang)",
            setup: |d| {
                let f = d.join("s.jsonl");
                mkfifo(&f);
                let o = d.join("m");
                vec![
                    "batch".into(),
                    "--merge".into(),
                    s(&f),
                    "--out".into(),
                    s(&o),
                ]
            },
            code: 2,
            message: "not a regular file",
            check: None,
        },
        Case {
            name: "synth --bursts 100000000",
            setup: |d| {
                let p = profile(d);
                let o = d.join("x.ci16");
                let a = [
                    "synth",
                    "--profile",
                    &s(&p),
                    "--out",
                    &s(&o),
                    "--bursts",
                    "100000000",
                ];
                a.map(String::from).to_vec()
            },
            code: 2,
            message: "samples per capture",
            check: Some(|d| assert!(!d.join("x.ci16").exists())),
        },
        Case {
            name: "synth --lead-gap 10^15",
            setup: |d| {
                let p = profile(d);
                let o = d.join("x.ci16");
                let a = [
                    "synth",
                    "--profile",
                    &s(&p),
                    "--out",
                    &s(&o),
                    "--lead-gap",
                    "1000000000000000",
                ];
                a.map(String::from).to_vec()
            },
            code: 2,
            message: "samples per capture",
            check: None,
        },
        Case {
            name: "synth --out onto its own profile",
            setup: |d| {
                let p = profile(d);
                std::fs::copy(&p, d.join("p.copy")).unwrap();
                let a = [
                    "synth",
                    "--profile",
                    &s(&p),
                    "--out",
                    &s(&p),
                    "--format",
                    "ci16_le",
                ];
                a.map(String::from).to_vec()
            },
            code: 2,
            message: "refusing to write over an input file",
            check: Some(|d| {
                assert_eq!(
                    std::fs::read(d.join("p.json")).unwrap(),
                    std::fs::read(d.join("p.copy")).unwrap()
                )
            }),
        },
        Case {
            name: "--report onto /dev/null (a device node is never replaced)",
            setup: |d| analyse_args(d, &["--report", "/dev/null"]),
            code: 2,
            message: "refusing to replace a device node",
            check: Some(capture_unchanged),
        },
        Case {
            name: "--report onto a FIFO",
            setup: |d| {
                let f = d.join("r.json");
                mkfifo(&f);
                analyse_args(d, &["--report", &s(&f)])
            },
            code: 2,
            message: "refusing to replace a FIFO",
            check: None,
        },
        Case {
            name: "--report onto a symbolic link (planted)",
            setup: |d| {
                std::fs::write(d.join("victim"), b"keep").unwrap();
                std::os::unix::fs::symlink(d.join("victim"), d.join("r.json")).unwrap();
                analyse_args(d, &["--report", &s(&d.join("r.json"))])
            },
            code: 2,
            message: "refusing to replace a symbolic link",
            check: Some(|d| assert_eq!(std::fs::read(d.join("victim")).unwrap(), b"keep")),
        },
        Case {
            name: "--report naming a folder leaves no temporary file",
            setup: |d| {
                std::fs::create_dir(d.join("sub")).unwrap();
                analyse_args(d, &["--report", &s(&d.join("sub"))])
            },
            code: 2,
            message: "refusing to replace a folder",
            check: Some(|d| assert_eq!(std::fs::read_dir(d.join("sub")).unwrap().count(), 0)),
        },
        // #19: `-` is stdout wherever a report path is taken (the library's
        // writer still refuses to write a file named `-`).
        Case {
            name: "--report -",
            setup: |d| analyse_args(d, &["--report", "-"]),
            code: 0,
            message: "\"schema\": \"iqaudit.report/4\"",
            check: None,
        },
        Case {
            name: "--report X --plots X",
            setup: |d| {
                let x = s(&d.join("x"));
                analyse_args(d, &["--report", &x, "--plots", &x])
            },
            code: 2,
            message: "is also the --plots folder",
            check: Some(|d| assert!(!d.join("x").exists())),
        },
        Case {
            name: "--report inside --plots under a plot's name",
            setup: |d| {
                let dir = d.join("pl");
                let r = s(&dir.join("index.html"));
                std::fs::create_dir(&dir).unwrap();
                analyse_args(d, &["--report", &r, "--plots", &s(&dir)])
            },
            code: 2,
            message: "under a name the plots are written with",
            check: None,
        },
        Case {
            name: "--plots over a folder holding an input named like a plot",
            setup: |d| {
                let (c, _) = capture(d);
                let p = profile_with(d, "index.html", |_| {});
                let a = ["analyse", &s(&c), "--profile", &s(&p), "--plots", &s(d)];
                a.map(String::from).to_vec()
            },
            code: 2,
            message: "under a name the plots are written with",
            check: None,
        },
        Case {
            name: "symbols file outside the profile's folder needs the opt-in",
            setup: |d| {
                let (c, _) = capture(d);
                let sub = d.join("profiles");
                std::fs::create_dir(&sub).unwrap();
                std::fs::write(d.join("secret.txt"), "root:$6$hash:1:2\n").unwrap();
                let p = profile_with(&sub, "p.json", |v| {
                    v["training"]["sequence"] =
                        serde_json::json!({"kind": "symbols_file", "path": "../secret.txt"});
                    v["training"].as_object_mut().unwrap().remove("modulation");
                });
                vec!["analyse".into(), s(&c), "--profile".into(), s(&p)]
            },
            code: 2,
            message: "--allow-outside-symbols",
            check: None,
        },
        Case {
            name: "a symbols file's bad line is quoted short and escaped",
            setup: |d| {
                let (c, _) = capture(d);
                std::fs::write(
                    d.join("t.txt"),
                    "root:$6$averyveryverylongsaltandhashvalue\u{1b}[31m:19000:0:99999:7:::\n",
                )
                .unwrap();
                let p = profile_with(d, "q.json", |v| {
                    v["training"]["sequence"] =
                        serde_json::json!({"kind": "symbols_file", "path": "t.txt"});
                    v["training"].as_object_mut().unwrap().remove("modulation");
                });
                vec!["analyse".into(), s(&c), "--profile".into(), s(&p)]
            },
            code: 2,
            message: "line 1",
            check: None,
        },
        Case {
            name: "WAV with a broken header is refused even with --format",
            setup: |d| {
                let p = d.join("x.ci16");
                std::fs::write(&p, &wav_header(64, 64)[..20]).unwrap();
                vec!["info".into(), s(&p), "--format".into(), "ci16_le".into()]
            },
            code: 2,
            message: "invalid WAV header",
            check: None,
        },
        Case {
            name: "file starting with RIFF but a raw extension is parsed as WAV",
            setup: |d| {
                let p = d.join("x.cf32");
                let mut b = wav_header(64, 64);
                b[8..12].copy_from_slice(b"JUNK");
                std::fs::write(&p, b).unwrap();
                vec!["info".into(), s(&p)]
            },
            code: 2,
            message: "WAV",
            check: None,
        },
        Case {
            name: "recheck reports 'differs' and no digest of the file",
            setup: |d| {
                let r = report(d);
                edit_report(&r, |v| {
                    v["input"]["sha256"] = serde_json::json!("0".repeat(64))
                });
                recheck(&r)
            },
            code: 2,
            message: "differs from the one recorded",
            check: None,
        },
        Case {
            name: "recheck says which files it will read",
            setup: |d| {
                let r = report(d);
                recheck(&r)
            },
            code: 0,
            message: "recheck will read:",
            check: None,
        },
        Case {
            name: "recheck of a report naming /dev/zero (must not hang)",
            setup: |d| {
                let r = report(d);
                edit_report(&r, |v| v["input"]["path"] = serde_json::json!("/dev/zero"));
                recheck(&r)
            },
            code: 2,
            message: "not a regular file",
            check: None,
        },
        Case {
            name: "recheck of a report naming a FIFO (must not hang)",
            setup: |d| {
                let r = report(d);
                mkfifo(&d.join("pipe.ci16"));
                edit_report(&r, |v| v["input"]["path"] = serde_json::json!("pipe.ci16"));
                recheck(&r)
            },
            code: 2,
            message: "not a regular file",
            check: None,
        },
        Case {
            name: "recorded profile with a product over the cap",
            setup: |d| {
                let r = report(d);
                edit_report(&r, |v| {
                    v["profile"]["samples_per_symbol"] = serde_json::json!(1024);
                    v["profile"]["payload"]["after_symbols"] = serde_json::json!(1 << 24);
                });
                recheck(&r)
            },
            code: 2,
            message: "the recorded profile is not usable",
            check: None,
        },
        Case {
            name: "recorded symbols file outside the report's folder",
            setup: |d| {
                let r = report(d);
                edit_report(&r, |v| {
                    v["profile"]["training"]["sequence"] =
                        serde_json::json!({"kind": "symbols_file", "path": "/etc/passwd"});
                    v["profile"]["training"]["length_symbols"] = serde_json::Value::Null;
                });
                recheck(&r)
            },
            code: 2,
            message: "--allow-outside-symbols",
            check: None,
        },
        Case {
            name: "an error naming a file with control characters is escaped",
            setup: |d| {
                let p = d.join("evil\u{1b}[2Jname.cf32");
                std::fs::write(&p, [0u8; 1]).unwrap();
                vec!["info".into(), s(&p)]
            },
            code: 2,
            message: "evil\\u{1b}[2Jname.cf32",
            check: None,
        },
    ]);
}

/// Issue 16, rule 1: a non-UTF-8 argument is used exactly and recorded
/// lossily; nothing panics.
#[cfg(unix)]
#[test]
fn a_non_utf8_path_is_used_exactly_and_recorded_lossily() {
    use std::os::unix::ffi::OsStrExt;
    let dir = tempdir();
    let d = dir.path();
    let p = profile(d);
    let name = std::ffi::OsStr::from_bytes(b"cap\xff\xfe.ci16");
    let c = d.join(name);
    let out = iqaudit()
        .arg("synth")
        .arg("--profile")
        .arg(&p)
        .arg("--out")
        .arg(&c)
        .arg("--seed")
        .arg("3")
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(c.exists(), "written under the exact non-UTF-8 name");
    let r = d.join("r.json");
    let out = iqaudit()
        .arg("analyse")
        .arg(&c)
        .arg("--profile")
        .arg(&p)
        .arg("--report")
        .arg(&r)
        .output()
        .unwrap();
    let code = out.status.code();
    assert!(
        matches!(code, Some(0) | Some(1)),
        "{code:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&std::fs::read(&r).unwrap()).unwrap();
    let cmd = v["command"].to_string();
    assert!(cmd.contains('\u{fffd}'), "{cmd}");
    let out = iqaudit()
        .arg("info")
        .arg(&c)
        .arg("--format")
        .arg(std::ffi::OsStr::from_bytes(b"\xff"))
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(!String::from_utf8_lossy(&out.stderr).contains("panicked"));
}

/// Issue 16, rule 3: SIGTERM during a write leaves no temporary file.
#[cfg(unix)]
#[test]
fn a_sigterm_during_synth_leaves_no_temporary_file() {
    let dir = tempdir();
    let d = dir.path();
    let p = profile(d);
    let o = d.join("big.ci16");
    let mut child = std::process::Command::new(assert_cmd::cargo::cargo_bin("iqaudit"))
        .args([
            "synth",
            "--profile",
            &s(&p),
            "--out",
            &s(&o),
            "--bursts",
            "3000",
            "--seed",
            "1",
        ])
        .stderr(std::process::Stdio::null())
        .spawn()
        .unwrap();
    // Wait until its temporary file appears (or it finished), then stop it.
    for _ in 0..2000 {
        let tmp = std::fs::read_dir(d)
            .unwrap()
            .any(|e| e.unwrap().file_name().to_string_lossy().ends_with(".tmp"));
        if tmp || child.try_wait().unwrap().is_some() {
            break;
        }
        std::thread::sleep(Duration::from_millis(5));
    }
    let _ = std::process::Command::new("kill")
        .args(["-TERM", &child.id().to_string()])
        .status();
    let _ = child.wait().unwrap();
    let left: Vec<_> = std::fs::read_dir(d)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.ends_with(".tmp"))
        .collect();
    assert!(left.is_empty(), "temporary files left: {left:?}");
}
