//! The committed sample captures (`sample-captures/`) regenerate byte for byte
//! from the `iqaudit synth` commands listed in their README, and each one has
//! its profile beside it.

use std::path::{Path, PathBuf};

use assert_cmd::Command;
use serde_json::Value;

fn dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-captures")
}

/// The `iqaudit synth …` lines of the README, split into arguments (the
/// commands use no quoting).
fn readme_commands() -> Vec<Vec<String>> {
    let readme = std::fs::read_to_string(dir().join("README.md")).unwrap();
    readme
        .lines()
        .filter(|l| l.starts_with("iqaudit synth "))
        .map(|l| l.split_whitespace().skip(1).map(str::to_string).collect())
        .collect()
}

fn out_arg(args: &[String]) -> String {
    let i = args.iter().position(|a| a == "--out").unwrap();
    args[i + 1].clone()
}

#[test]
fn sample_captures_regenerate_byte_identically() {
    let commands = readme_commands();
    assert!(
        (3..=5).contains(&commands.len()),
        "3-5 sample captures, found {}",
        commands.len()
    );
    let tmp = tempfile::tempdir().unwrap();
    for args in &commands {
        let out = out_arg(args);
        let profile = format!("{out}.profile.json");
        std::fs::copy(dir().join(&profile), tmp.path().join(&profile)).unwrap();
        Command::cargo_bin("iqaudit")
            .unwrap()
            .current_dir(tmp.path())
            .args(args)
            .assert()
            .success();
        let made = std::fs::read(tmp.path().join(&out)).unwrap();
        let committed = std::fs::read(dir().join(&out)).unwrap();
        assert_eq!(made.len(), committed.len(), "{out}: length");
        if let Some(i) = made.iter().zip(&committed).position(|(a, b)| a != b) {
            panic!("{out}: first differing byte at offset {i}");
        }
        // The truth agrees too (apart from the tool version string).
        let truth = |p: &Path| -> Value {
            let mut v: Value = serde_json::from_str(&std::fs::read_to_string(p).unwrap()).unwrap();
            v.as_object_mut().unwrap().remove("tool");
            v
        };
        assert_eq!(
            truth(&tmp.path().join(format!("{out}.truth.json"))),
            truth(&dir().join(format!("{out}.truth.json"))),
            "{out}: truth"
        );
    }
}

#[test]
fn every_sample_capture_has_its_profile_and_the_readme_has_the_transmit_caution() {
    for args in readme_commands() {
        let out = out_arg(&args);
        let profile = dir().join(format!("{out}.profile.json"));
        assert!(profile.is_file(), "{} missing", profile.display());
        iqaudit::load_profile(&profile).unwrap();
    }
    let readme = std::fs::read_to_string(dir().join("README.md")).unwrap();
    assert!(readme.contains("radiate only where licensed"));
}
