//! CLI conventions (#19): shell completions and man pages generate, `-` is
//! stdout for a report, warnings go to stderr, `--color` with NO_COLOR and
//! CLICOLOR_FORCE as their conventions say, the same short flags on every
//! command, `info --center-freq`.

use std::fs;
use std::path::{Path, PathBuf};
use std::process::Command as Process;

use serde_json::Value;

use crate::util::{iqaudit, stderr_of, tempdir, test_data};

fn synth(dir: &Path) -> PathBuf {
    let out = dir.join("a.ci16");
    // Short flags -p, -o and -f on synth (the same letters as on analyse/batch).
    let o = iqaudit()
        .arg("synth")
        .arg("-p")
        .arg(test_data("vectors/sigmf/link.profile.json"))
        .arg("-o")
        .arg(&out)
        .args(["-f", "ci16_le", "--sample-rate", "250000", "--bursts", "2"])
        .args(["--seed", "9", "--esn0-db", "25"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", stderr_of(&o));
    out
}

fn analyse(cap: &Path, args: &[&str]) -> std::process::Output {
    iqaudit()
        .arg("analyse")
        .arg(cap)
        .arg("-p")
        .arg(test_data("vectors/sigmf/link.profile.json"))
        .args(args)
        .env_remove("NO_COLOR")
        .env_remove("CLICOLOR_FORCE")
        .env_remove("CLICOLOR")
        .output()
        .unwrap()
}

/// Whether `tool` runs; says loudly when not, and fails under CI.
fn have(tool: &str) -> bool {
    let ok = Process::new(tool)
        .arg("--version")
        .output()
        .is_ok_and(|o| o.status.success());
    if !ok {
        eprintln!("\n*** SKIPPED: `{tool}` is not installed; that check is NOT made ***\n");
        assert!(
            std::env::var_os("IQAUDIT_CI").is_none() && std::env::var_os("CI").is_none(),
            "{tool} missing under CI (tests/run-all.sh installs it)"
        );
    }
    ok
}

#[test]
fn completions_generate_for_every_shell_and_bash_accepts_its_script() {
    for shell in ["bash", "zsh", "fish", "elvish", "powershell"] {
        let o = iqaudit().args(["completions", shell]).output().unwrap();
        assert!(o.status.success(), "{shell}: {}", stderr_of(&o));
        let text = String::from_utf8_lossy(&o.stdout);
        for word in ["analyse", "recheck", "batch", "schema", "traced-bursts"] {
            assert!(text.contains(word), "{shell}: no {word}");
        }
    }
    let bad = iqaudit().args(["completions", "tcsh"]).output().unwrap();
    assert_eq!(bad.status.code(), Some(2));
    // Source: bash itself parses the script and registers the completion.
    if have("bash") {
        let dir = tempdir();
        let script = dir.path().join("iqaudit.bash");
        let o = iqaudit().args(["completions", "bash"]).output().unwrap();
        fs::write(&script, &o.stdout).unwrap();
        let check = Process::new("bash")
            .arg("-c")
            .arg(format!(". '{}' && complete -p iqaudit", script.display()))
            .output()
            .unwrap();
        assert!(check.status.success(), "{}", stderr_of(&check));
        assert!(String::from_utf8_lossy(&check.stdout).contains("iqaudit"));
    }
}

#[test]
fn man_pages_generate_and_groff_renders_them() {
    let dir = tempdir();
    let o = iqaudit().arg("man").output().unwrap();
    assert!(o.status.success());
    let page = String::from_utf8_lossy(&o.stdout).into_owned();
    assert!(page.contains(".TH iqaudit 1"), "{page}");
    let o = iqaudit()
        .arg("man")
        .arg("-o")
        .arg(dir.path())
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", stderr_of(&o));
    for cmd in [
        "analyse",
        "batch",
        "recheck",
        "info",
        "profile",
        "synth",
        "schema",
        "completions",
        "man",
    ] {
        let p = dir.path().join(format!("iqaudit-{cmd}.1"));
        assert!(p.is_file(), "{}", p.display());
    }
    // Source: groff's man macros render the page (an outside roff reader).
    if have("groff") {
        for (file, want) in [
            ("iqaudit.1", "completions"),
            ("iqaudit-analyse.1", "--traced-bursts"),
        ] {
            let r = Process::new("groff")
                .args(["-man", "-Tutf8", "-ww", "-P-cbou"])
                .arg(dir.path().join(file))
                .output()
                .unwrap();
            assert!(r.status.success(), "{file}: {}", stderr_of(&r));
            let text = String::from_utf8_lossy(&r.stdout);
            // groff -Tutf8 may render '-' as U+2010/U+2212; compare without them.
            let plain: String = text
                .chars()
                .map(|c| {
                    if matches!(c, '\u{2010}' | '\u{2212}') {
                        '-'
                    } else {
                        c
                    }
                })
                .filter(|c| *c != '\u{8}')
                .collect();
            assert!(plain.contains("NAME"), "{file}: {plain}");
            assert!(plain.contains(want), "{file}: no {want}");
        }
    }
}

#[test]
fn a_report_path_of_dash_is_stdout_and_warnings_go_to_stderr() {
    let dir = tempdir();
    let cap = synth(dir.path());
    let o = iqaudit()
        .current_dir(dir.path())
        .arg("analyse")
        .arg(&cap)
        .arg("-p")
        .arg(test_data("vectors/sigmf/link.profile.json"))
        .args(["--report", "-"])
        .output()
        .unwrap();
    assert!(matches!(o.status.code(), Some(0 | 1)), "{}", stderr_of(&o));
    let v: Value = serde_json::from_slice(&o.stdout).expect("the report on stdout");
    assert_eq!(v["schema"], "iqaudit.report/4");
    assert!(!dir.path().join("-").exists(), "a file named - was written");

    // A capture with no burst: its warning is on stderr, not in the summary.
    let quiet = dir.path().join("quiet.ci16");
    fs::write(&quiet, vec![0u8; 40_000]).unwrap();
    let o = analyse(&quiet, &["--sample-rate", "250000"]);
    assert_eq!(o.status.code(), Some(3), "{}", stderr_of(&o));
    let out = String::from_utf8_lossy(&o.stdout);
    let err = stderr_of(&o);
    assert!(out.contains("NO TRAINING BLOCK FOUND"), "{out}");
    assert!(!out.contains("no-training-found"), "{out}");
    assert!(
        err.contains("quiet.ci16: warning: [no-training-found]"),
        "{err}"
    );
}

#[test]
fn color_follows_the_option_then_no_color_then_clicolor_force() {
    let dir = tempdir();
    let cap = synth(dir.path());
    let esc = |o: &std::process::Output| o.stdout.contains(&0x1b);
    // Off a terminal, auto means no colour.
    assert!(!esc(&analyse(&cap, &[])));
    assert!(esc(&analyse(&cap, &["--color", "always"])));
    assert!(!esc(&analyse(&cap, &["--color", "never"])));
    let with_env = |vars: &[(&str, &str)], args: &[&str]| {
        let mut c = iqaudit();
        c.arg("analyse")
            .arg(&cap)
            .arg("-p")
            .arg(test_data("vectors/sigmf/link.profile.json"))
            .args(args)
            .env_remove("NO_COLOR")
            .env_remove("CLICOLOR_FORCE")
            .env_remove("CLICOLOR");
        for (k, v) in vars {
            c.env(k, v);
        }
        c.output().unwrap()
    };
    // bixense.com/clicolors: CLICOLOR_FORCE other than 0 forces colour; "0" does not.
    assert!(esc(&with_env(&[("CLICOLOR_FORCE", "1")], &[])));
    assert!(!esc(&with_env(&[("CLICOLOR_FORCE", "0")], &[])));
    // no-color.org: NO_COLOR present and not empty disables; an empty one does not.
    assert!(!esc(&with_env(
        &[("NO_COLOR", "1"), ("CLICOLOR_FORCE", "1")],
        &[]
    )));
    assert!(esc(&with_env(
        &[("NO_COLOR", ""), ("CLICOLOR_FORCE", "1")],
        &[]
    )));
    // The option wins over the environment.
    assert!(esc(&with_env(&[("NO_COLOR", "1")], &["--color", "always"])));
    // --color is global: accepted before the command too.
    let o = iqaudit()
        .args(["--color", "never", "info"])
        .arg(&cap)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", stderr_of(&o));
}

#[test]
fn the_same_short_flags_mean_the_same_on_every_command_and_info_takes_a_centre_frequency() {
    let dir = tempdir();
    let cap = synth(dir.path());
    let o = analyse(&cap, &["-f", "ci16_le", "-j", "1", "-r", "-"]);
    assert!(matches!(o.status.code(), Some(0 | 1)), "{}", stderr_of(&o));
    let o = iqaudit()
        .arg("info")
        .arg(&cap)
        .args(["-f", "ci16_le", "--center-freq", "433.92e6", "--json"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", stderr_of(&o));
    let v: Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["center_freq_hz"], 433.92e6);
    // Without a centre frequency the text says what is missing, not the rate.
    let raw = dir.path().join("raw.ci16");
    fs::copy(&cap, &raw).unwrap();
    let o = iqaudit()
        .arg("info")
        .arg(&raw)
        .args(["--sample-rate", "250000"])
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&o.stdout);
    let line = text
        .lines()
        .find(|l| l.starts_with("centre frequency"))
        .unwrap();
    assert!(line.contains("--center-freq"), "{line}");
    assert!(!line.contains("--sample-rate"), "{line}");
    let out = dir.path().join("out");
    let o = iqaudit()
        .arg("batch")
        .arg(dir.path())
        .arg("-p")
        .arg(test_data("vectors/sigmf/link.profile.json"))
        .arg("-o")
        .arg(&out)
        .args(["-f", "ci16_le", "-j", "1", "-q", "--glob", "a.ci16"])
        .output()
        .unwrap();
    assert!(matches!(o.status.code(), Some(0 | 1)), "{}", stderr_of(&o));
}
