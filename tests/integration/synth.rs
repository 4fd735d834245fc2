//! `iqaudit synth` end to end: the capture it writes, read back through
//! `capture`, agrees with its truth file symbol by symbol.

use std::path::Path;

use assert_cmd::Command;
use iqaudit::signal::{rrc_impulse, Constellation};
use iqaudit::synth::GroundTruth;
use iqaudit::{load_profile, Capture, Cf32, Cf64, OpenOptions};
use serde_json::{json, Value};

fn iqaudit() -> Command {
    Command::cargo_bin("iqaudit").unwrap()
}

/// Write the example profile with a span-32 pulse (negligible truncation ISI)
/// and the payload modified by `edit`.
fn write_profile(dir: &Path, edit: impl Fn(&mut Value)) -> std::path::PathBuf {
    let out = iqaudit()
        .args(["profile", "new", "--payload-symbols", "200"])
        .output()
        .unwrap();
    let mut v: Value = serde_json::from_slice(&out.stdout).unwrap();
    v["pulse"]["span_symbols"] = json!(32);
    edit(&mut v);
    let p = dir.join("link.profile.json");
    std::fs::write(&p, serde_json::to_string_pretty(&v).unwrap()).unwrap();
    p
}

/// Slow matched filter at a fractional instant, straight from the RRC closed form.
fn mf_at(r: &[Cf32], t: f64, sps: usize, beta: f64, span: usize) -> Cf64 {
    let half = (span * sps).div_ceil(2) as f64;
    let energy: f64 = (0..=2 * half as usize)
        .map(|m| rrc_impulse((m as f64 - half) / sps as f64, beta).powi(2))
        .sum();
    let lo = (t - half).ceil().max(0.0) as usize;
    let hi = ((t + half).floor() as usize).min(r.len() - 1);
    (lo..=hi)
        .map(|n| {
            Cf64::new(r[n].re as f64, r[n].im as f64)
                * (rrc_impulse((n as f64 - t) / sps as f64, beta) / energy.sqrt())
        })
        .sum()
}

#[test]
fn a_noise_free_synth_capture_read_back_gives_the_truth_symbols_at_the_truth_instants() {
    // Source: the timing convention of API-CONTRACT.md (instant = start_sample +
    // timing_frac) and the CFO sign of src/lib.rs. Tolerance 3e-3: span-32 RRC
    // truncation ISI (< 2e-3, see synth unit tests) plus ci16 quantisation
    // (~1e-4 after dividing by the amplitude).
    let dir = tempfile::tempdir().unwrap();
    let prof = write_profile(dir.path(), |v| {
        // Unknown midamble payload: exercises the random labels and both sides.
        let p = v["payload"].as_object_mut().unwrap();
        p.remove("known");
        p.remove("length_symbols");
        p.insert("position".into(), json!("both"));
        p.insert("length_before_symbols".into(), json!(60));
        p.insert("length_after_symbols".into(), json!(150));
        v["limits"].as_object_mut().unwrap().remove("ser_max");
    });
    let out = dir.path().join("burst.ci16");
    iqaudit()
        .args(["synth", "--profile"])
        .arg(&prof)
        .arg("--out")
        .arg(&out)
        .args([
            "--bursts",
            "3",
            "--seed",
            "21",
            "--cfo-hz",
            "-2300",
            "--phase-deg",
            "40",
        ])
        .args([
            "--timing-frac",
            "random",
            "--lead-gap",
            "300",
            "--gap",
            "200:900",
        ])
        .assert()
        .success();
    let truth: GroundTruth = serde_json::from_str(
        &std::fs::read_to_string(dir.path().join("burst.ci16.truth.json")).unwrap(),
    )
    .unwrap();
    let cap = Capture::open(&out, &OpenOptions::default()).unwrap();
    assert_eq!(cap.len() as u64, truth.total_samples);
    assert_eq!(
        cap.sample_rate_hz(),
        Some(1e6),
        "rate from the SigMF sidecar"
    );
    let mut r = vec![Cf32::new(0.0, 0.0); cap.len()];
    cap.read_into(0, &mut r).unwrap();

    let profile = load_profile(&prof).unwrap();
    let training = profile.training_symbols().unwrap();
    let pts = Constellation::new(profile.payload.modulation);
    let fs = truth.sample_rate_hz;
    for b in &truth.bursts {
        let lab = |l: &Option<Vec<u16>>| -> Vec<Cf32> {
            l.as_ref()
                .unwrap()
                .iter()
                .map(|&x| pts.points()[x as usize])
                .collect()
        };
        let syms: Vec<Cf32> = lab(&b.payload.labels_before)
            .into_iter()
            .chain(training.iter().copied())
            .chain(lab(&b.payload.labels_after))
            .collect();
        let instant0 = b.start_sample as f64 + b.timing_frac;
        let first = instant0 - (b.payload.before_symbols * 4) as f64;
        let mut worst = 0f64;
        for (k, x) in syms.iter().enumerate() {
            let t = first + (k * 4) as f64;
            let ph = b.phase_rad + 2.0 * std::f64::consts::PI * b.cfo_hz * (t - instant0) / fs;
            let z = mf_at(&r, t, 4, 0.25, 32) * Cf64::from_polar(1.0, -ph) / b.amplitude;
            worst = worst.max((z - Cf64::new(x.re as f64, x.im as f64)).norm());
        }
        assert!(worst < 3e-3, "burst {}: worst {worst}", b.index);
    }
}

#[test]
fn synth_writes_a_wav_the_reader_opens_with_the_rate_and_length_of_the_truth() {
    let dir = tempfile::tempdir().unwrap();
    let prof = write_profile(dir.path(), |_| {});
    let out = dir.path().join("handheld.wav");
    iqaudit()
        .args(["synth", "--profile"])
        .arg(&prof)
        .arg("--out")
        .arg(&out)
        .args([
            "--esn0-db",
            "20",
            "--dc",
            "0.02,-0.01",
            "--iq-gain-db",
            "0.7",
        ])
        .assert()
        .success();
    assert!(
        !dir.path().join("handheld.sigmf-meta").exists(),
        "no sidecar for WAV"
    );
    let truth: Value = serde_json::from_str(
        &std::fs::read_to_string(dir.path().join("handheld.wav.truth.json")).unwrap(),
    )
    .unwrap();
    assert_eq!(truth["capture"]["format"], json!("wav_pcm16"));
    let cap = Capture::open(&out, &OpenOptions::default()).unwrap();
    assert_eq!(cap.sample_rate_hz(), Some(1e6));
    assert_eq!(Some(cap.len() as u64), truth["total_samples"].as_u64());
}

#[test]
fn synth_with_a_bad_channel_or_profile_exits_2() {
    let dir = tempfile::tempdir().unwrap();
    let prof = write_profile(dir.path(), |_| {});
    let out = dir.path().join("x.cf32");
    let r = iqaudit()
        .args(["synth", "--profile"])
        .arg(&prof)
        .arg("--out")
        .arg(&out)
        .args(["--channel", "1.0,0.3+j0.2"])
        .output()
        .unwrap();
    assert_eq!(r.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&r.stderr).contains("--channel"));
    assert!(!out.exists(), "nothing written on error");
    let r = iqaudit()
        .args(["synth", "--profile", "/nonexistent.json", "--out"])
        .arg(&out)
        .output()
        .unwrap();
    assert_eq!(r.status.code(), Some(2));
}
