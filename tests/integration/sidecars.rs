//! SigMF sidecars beside raw files: `core:dataset` names the data, a sidecar is
//! never replaced by another capture's, a `.sigmf-meta` path opens its data,
//! and a datatype that contradicts the extension is a warning naming both.

use iqaudit::{Capture, Container, OpenOptions, SampleFormat};
use serde_json::Value;

use crate::util::{iqaudit, stderr_of, tempdir, test_data};

fn synth(out: &std::path::Path, rate: &str) {
    let o = iqaudit()
        .arg("synth")
        .arg("--profile")
        .arg(test_data("vectors/sigmf/link.profile.json"))
        .arg("--out")
        .arg(out)
        .args(["--sample-rate", rate, "--bursts", "1", "--seed", "3"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", stderr_of(&o));
}

fn json(p: &std::path::Path) -> Value {
    serde_json::from_str(&std::fs::read_to_string(p).unwrap()).unwrap()
}

// Issue 18 regression: `synth --out a.ci16` then `--out a.cf32` both wrote
// a.sigmf-meta, and a.ci16 was then read as cf32 at the other rate.
// SigMF v1.2.5: core:dataset names the dataset file of a non-conforming
// recording (shared/REFERENCE-VALUES.md §10).
#[test]
fn two_captures_of_one_name_keep_their_own_sidecars_and_rates() {
    let dir = tempdir();
    let a16 = dir.path().join("a.ci16");
    let a32 = dir.path().join("a.cf32");
    synth(&a16, "250000");
    synth(&a32, "500000");
    let m16 = json(&dir.path().join("a.sigmf-meta"));
    let m32 = json(&dir.path().join("a.cf32.sigmf-meta"));
    assert_eq!(m16["global"]["core:dataset"], "a.ci16");
    assert_eq!(m32["global"]["core:dataset"], "a.cf32");
    for (p, f, rate) in [
        (&a16, SampleFormat::Ci16Le, 250e3),
        (&a32, SampleFormat::Cf32Le, 500e3),
    ] {
        let c = Capture::open(p, &OpenOptions::default()).unwrap();
        assert_eq!(c.container(), Container::Raw(f));
        assert_eq!(c.sample_rate_hz(), Some(rate));
        assert!(c
            .notes()
            .iter()
            .all(|n| !n.to_string().contains("contradict")));
    }
    // The sidecar given as the capture opens the file it names.
    let c = Capture::open(&dir.path().join("a.sigmf-meta"), &OpenOptions::default()).unwrap();
    assert_eq!(c.path(), a16.as_path());
    let c = Capture::open(
        &dir.path().join("a.cf32.sigmf-meta"),
        &OpenOptions::default(),
    )
    .unwrap();
    assert_eq!(c.path(), a32.as_path());
    // Both names taken by other captures: refused, naming them, nothing written.
    std::fs::write(
        dir.path().join("a.cu8.sigmf-meta"),
        r#"{"global":{"core:datatype":"cu8","core:dataset":"b.cu8"}}"#,
    )
    .unwrap();
    let o = iqaudit()
        .arg("synth")
        .arg("--profile")
        .arg(test_data("vectors/sigmf/link.profile.json"))
        .arg("--out")
        .arg(dir.path().join("a.cu8"))
        .args(["--sample-rate", "250000"])
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(2), "{}", stderr_of(&o));
    let err = stderr_of(&o);
    assert!(
        err.contains("will not replace") && err.contains("a.ci16"),
        "{err}"
    );
    assert!(!dir.path().join("a.cu8").exists());
}

#[test]
fn a_datatype_that_contradicts_the_extension_is_a_warning_naming_both() {
    let dir = tempdir();
    let p = dir.path().join("b.ci16");
    std::fs::write(&p, [0u8; 64]).unwrap();
    std::fs::write(
        dir.path().join("b.sigmf-meta"),
        r#"{"global":{"core:datatype":"cf32_le","core:dataset":"b.ci16","core:sample_rate":1e6,
            "core:version":"1.2.0"},"captures":[],"annotations":[]}"#,
    )
    .unwrap();
    let c = Capture::open(&p, &OpenOptions::default()).unwrap();
    assert_eq!(c.container(), Container::Raw(SampleFormat::Cf32Le));
    let o = iqaudit().arg("info").arg(&p).output().unwrap();
    assert!(o.status.success(), "{}", stderr_of(&o));
    let err = stderr_of(&o);
    assert!(
        err.contains("warning") && err.contains("ci16") && err.contains("cf32_le"),
        "{err}"
    );
    // A sidecar naming another dataset is passed over, with a note.
    let q = dir.path().join("b.cu8");
    std::fs::write(&q, [128u8; 64]).unwrap();
    let c = Capture::open(&q, &OpenOptions::default()).unwrap();
    assert_eq!(c.container(), Container::Raw(SampleFormat::Cu8));
    assert!(c.sidecar_path().is_none());
    assert!(
        c.notes()[0].to_string().contains("describes b.ci16"),
        "{:?}",
        c.notes()
    );
}

// Issue 18 regression: `info NAME.sigmf-meta` on the shipped sidecars failed
// ("NAME.sigmf-data: cannot open").
#[test]
fn every_shipped_sidecar_opens_as_the_capture_it_describes() {
    let dir = test_data("../sample-captures");
    let mut n = 0;
    for e in std::fs::read_dir(&dir).unwrap() {
        let p = e.unwrap().path();
        if p.extension().and_then(|x| x.to_str()) == Some("sigmf-meta") {
            let o = iqaudit().arg("info").arg(&p).output().unwrap();
            assert!(o.status.success(), "{}: {}", p.display(), stderr_of(&o));
            n += 1;
        }
    }
    assert!(n >= 4, "{n} sidecars");
}

#[test]
fn a_sidecar_whose_data_is_missing_says_what_it_looked_for() {
    let dir = tempdir();
    let m = dir.path().join("gone.sigmf-meta");
    std::fs::write(
        &m,
        r#"{"global":{"core:datatype":"ci8","core:dataset":"gone.ci8"}}"#,
    )
    .unwrap();
    let e = Capture::open(&m, &OpenOptions::default()).unwrap_err();
    let s = e.to_string();
    assert!(s.contains("gone.ci8") && s.contains("core:dataset"), "{s}");
    let m2 = dir.path().join("c.sigmf-meta");
    std::fs::write(&m2, r#"{"global":{"core:datatype":"ci8"}}"#).unwrap();
    let s = Capture::open(&m2, &OpenOptions::default())
        .unwrap_err()
        .to_string();
    assert!(
        s.contains("c.sigmf-data") && s.contains(".sigmf archive"),
        "{s}"
    );
}
