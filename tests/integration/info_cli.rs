//! `iqaudit info` end to end: figures against closed-form values of synthetic
//! captures, the JSON object, warnings and exit codes.

use iqaudit::{write_capture, Cf32, Container, SampleFormat, WavEncoding, WriteSpec};
use serde_json::Value;

use crate::util::{iqaudit, stderr_of, tempdir};

fn info_json(args: &[&std::ffi::OsStr]) -> (Value, String) {
    let out = iqaudit()
        .arg("info")
        .args(args)
        .arg("--json")
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0), "{}", stderr_of(&out));
    (
        serde_json::from_slice(&out.stdout).unwrap(),
        stderr_of(&out),
    )
}

fn close(v: &Value, expect: f64, tol: f64) {
    let x = v.as_f64().unwrap_or(f64::NAN);
    assert!((x - expect).abs() <= tol, "{x} vs {expect} ± {tol}");
}

// Closed forms (exact arithmetic): a complex tone A·exp(j2πfn) has mean power
// A², peak A², so mean = peak = 20·log10(A) dBFS and PAPR 0 dB; adding a DC of d
// on I alone gives dc_i = d (the tone's mean over whole cycles is 0).
#[test]
fn a_tone_with_dc_gives_closed_form_power_peak_papr_and_dc() {
    let dir = tempdir();
    let p = dir.path().join("tone.cf32");
    let (a, d, n) = (0.5f64, 0.01f64, 65_536usize);
    let x: Vec<Cf32> = (0..n)
        .map(|t| {
            let ph = 2.0 * std::f64::consts::PI * 1024.0 * t as f64 / n as f64;
            Cf32::new((a * ph.cos() + d) as f32, (a * ph.sin()) as f32)
        })
        .collect();
    let spec = WriteSpec {
        container: Container::Raw(SampleFormat::Cf32Le),
        sample_rate_hz: 1e6,
        center_freq_hz: Some(915e6),
        sigmf_sidecar: true,
        description: None,
        annotations: Vec::new(),
        unsigned_zero: Default::default(),
    };
    write_capture(&p, &x, &spec).unwrap();
    let (j, _) = info_json(&[p.as_os_str()]);
    assert_eq!(j["schema"], "iqaudit.info/2");
    assert_eq!(j["tool"]["name"], "iqaudit");
    assert_eq!(j["samples"], n as u64);
    assert_eq!(j["format"], "cf32_le");
    assert_eq!(j["format_source"], "sigmf");
    close(&j["sample_rate_hz"], 1e6, 0.0);
    close(&j["center_freq_hz"], 915e6, 0.0);
    close(&j["duration_s"], n as f64 / 1e6, 1e-12);
    let mean = a * a + d * d; // cross term averages to 0 over whole cycles
    close(&j["mean_power_dbfs"], 10.0 * mean.log10(), 1e-4);
    let peak = (a + d) * (a + d);
    close(&j["peak_power_dbfs"], 10.0 * peak.log10(), 1e-4);
    close(&j["papr_db"], 10.0 * (peak / mean).log10(), 1e-4);
    close(&j["dc_i"], d, 1e-6);
    close(&j["dc_q"], 0.0, 1e-6);
    close(&j["dc_relative_db"], 10.0 * (d * d / mean).log10(), 0.01);
    assert_eq!(j["clipped_samples"], 0);
    assert_eq!(j["warnings"], serde_json::json!([]));
    // Tone at 1024/65536·1 MHz = 15625 Hz: nearly all power in one bin region.
    close(&j["psd_resolution_hz"], 1e6 / 4096.0, 1e-9);
    let lo = j["obw_lower_hz"].as_f64().unwrap();
    let hi = j["obw_upper_hz"].as_f64().unwrap();
    assert!(
        lo < 15_625.0 && hi > 15_625.0 && hi - lo < 4.0 * 1e6 / 4096.0,
        "{lo}..{hi}"
    );
}

#[test]
fn clipping_non_finite_and_trailing_bytes_are_counted_and_warned_about() {
    let dir = tempdir();
    let p = dir.path().join("bad-values.cf32");
    let mut bytes = Vec::new();
    for v in [
        0.1f32,
        0.2,
        f32::NAN,
        0.0,
        1.0,
        0.5,
        0.3,
        f32::NEG_INFINITY,
        -0.1,
        0.0,
    ] {
        bytes.extend_from_slice(&v.to_le_bytes());
    }
    bytes.extend_from_slice(&[1, 2, 3]); // a partial sample
    std::fs::write(&p, &bytes).unwrap();
    let (j, err) = info_json(&[p.as_os_str()]);
    assert_eq!(j["samples"], 5);
    assert_eq!(j["trailing_bytes"], 3);
    assert_eq!(j["non_finite_samples"], 2);
    // A float format has no extreme code (#17): the 1.0 sample is above full
    // scale, not clipped.
    assert_eq!(j["clipped_samples"], 0);
    assert_eq!(j["above_full_scale_samples"], 1);
    // Non-finite samples count as 0: mean power over 5 samples.
    let mean = (0.01 + 0.04 + 1.0 + 0.25 + 0.01) / 5.0;
    close(&j["mean_power_dbfs"], 10.0 * f64::log10(mean), 1e-5);
    for key in [
        "mean_power_dbfs",
        "peak_power_dbfs",
        "papr_db",
        "dc_i",
        "dc_q",
    ] {
        assert!(
            j[key].as_f64().is_some_and(f64::is_finite),
            "{key}: {}",
            j[key]
        );
    }
    assert!(err.contains("3 trailing byte(s) ignored"), "{err}");
    assert!(err.contains("bad-values.cf32"), "{err}");
    let kinds: Vec<_> = j["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|w| w["kind"].clone())
        .collect();
    assert_eq!(kinds, ["trailing_bytes", "above_full_scale", "non_finite"]);
}

#[test]
fn text_output_names_every_figure_and_wav_rate_comes_from_the_header() {
    let dir = tempdir();
    let p = dir.path().join("crane.wav");
    let x: Vec<Cf32> = (0..5000)
        .map(|k| Cf32::new((k % 7) as f32 * 0.1, -0.2))
        .collect();
    let spec = WriteSpec {
        container: Container::Wav(WavEncoding::Pcm16),
        sample_rate_hz: 96_000.0,
        center_freq_hz: None,
        sigmf_sidecar: false,
        description: None,
        annotations: Vec::new(),
        unsigned_zero: Default::default(),
    };
    write_capture(&p, &x, &spec).unwrap();
    let out = iqaudit().arg("info").arg(&p).output().unwrap();
    assert_eq!(out.status.code(), Some(0));
    let text = String::from_utf8(out.stdout).unwrap();
    for key in [
        "wav_pcm16",
        "96.000 kHz",
        "mean power",
        "peak-to-average",
        "DC offset",
        "clipped",
        "non-finite",
        "IQ imbalance",
        "occupied bw 99 %",
        "Welch",
    ] {
        assert!(text.contains(key), "missing {key} in\n{text}");
    }
}

// STYLE §1: a closed stdout (e.g. `iqaudit info X | head -0`) exits quietly.
// The read end of the pipe is closed before the child has analysed the capture,
// so its write gets EPIPE (Rust ignores SIGPIPE); it must exit 0 with no message.
#[test]
fn stdout_closed_early_is_not_an_error() {
    let dir = tempdir();
    let p = dir.path().join("z.cu8");
    std::fs::write(&p, vec![128u8; 1 << 22]).unwrap();
    let mut child = std::process::Command::new(assert_cmd::cargo::cargo_bin("iqaudit"))
        .arg("info")
        .arg(&p)
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    drop(child.stdout.take());
    let out = child.wait_with_output().unwrap();
    let err = stderr_of(&out);
    assert_eq!(out.status.code(), Some(0), "{err}");
    assert!(!err.contains("iqaudit:"), "{err}");
}

#[test]
fn info_plots_with_a_profile_mark_every_burst_the_analysis_finds() {
    // The shipped bench capture holds 4 bursts (its truth file); the power
    // plot marks each with its report number, the same marks as
    // `analyse --plots` draws on its capture view.
    let dir = tempdir();
    let samples = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-captures");
    let cap = samples.join("crane-bench-cable.ci16");
    let prof = samples.join("crane-bench-cable.ci16.profile.json");
    let info_dir = dir.path().join("info");
    let out = iqaudit()
        .arg("info")
        .arg(&cap)
        .arg("--plots")
        .arg(&info_dir)
        .arg("--profile")
        .arg(&prof)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0), "{}", stderr_of(&out));
    assert!(
        stderr_of(&out).contains("4 burst(s) found"),
        "{}",
        stderr_of(&out)
    );
    let power = std::fs::read_to_string(info_dir.join("power.svg")).unwrap();
    for k in 0..4 {
        assert!(power.contains(&format!(">#{k}<")), "burst {k} not marked");
    }
    let an_dir = dir.path().join("analyse");
    let out = iqaudit()
        .arg("analyse")
        .arg(&cap)
        .arg("--profile")
        .arg(&prof)
        .arg("--plots")
        .arg(&an_dir)
        .output()
        .unwrap();
    assert!(
        out.status.code().is_some_and(|c| c <= 1),
        "{}",
        stderr_of(&out)
    );
    let labels = |svg: &str| -> Vec<String> {
        svg.lines()
            .filter(|l| l.contains("data-label"))
            .map(str::to_string)
            .collect()
    };
    let analysed = std::fs::read_to_string(an_dir.join("power.svg")).unwrap();
    assert_eq!(labels(&power), labels(&analysed));
    // Without a profile there is nothing to mark; a profile needs --plots.
    let out = iqaudit()
        .arg("info")
        .arg(&cap)
        .arg("--profile")
        .arg(&prof)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2), "{}", stderr_of(&out));
}
