//! WAV at the edges: 64-bit float, RF64/BW64 and WAVE_FORMAT_EXTENSIBLE files
//! written by libsndfile, and WAV files that cannot be parsed, which are errors
//! — never raw samples — whatever format the profile or the option names.

use iqaudit::{Capture, Cf32, Container, OpenOptions, SampleFormat, WavEncoding};
use serde_json::Value;

use crate::util::{iqaudit, stderr_of, tempdir, test_data};

// Source: tests/vectors/wav/make_wav_vectors.py — libsndfile 1.2.2 (through
// the soundfile package) wrote the files; numpy computed mean(I² + Q²) in f64
// from what soundfile reads back. Tolerance: our samples are f32 (a 64-bit
// float rounds to 24 bits, relative error ≤ 2^-24 per component), so the
// powers agree to 1e-6 relative; the frame count is exact.
#[test]
fn libsndfile_float64_rf64_bw64_and_extensible_wavs_match_numpy_on_power_and_count() {
    let e: Value = serde_json::from_str(
        &std::fs::read_to_string(test_data("vectors/wav/expected.json")).unwrap(),
    )
    .unwrap();
    let rate = e["sample_rate_hz"].as_f64().unwrap();
    let files = e["files"].as_object().unwrap();
    assert_eq!(files.len(), 5);
    for (name, want) in files {
        let path = test_data(&format!("vectors/wav/{name}"));
        let cap = Capture::open(&path, &OpenOptions::default())
            .unwrap_or_else(|err| panic!("{name}: {err}"));
        let enc = match want["subtype"].as_str().unwrap() {
            "DOUBLE" => WavEncoding::Float64,
            "FLOAT" => WavEncoding::Float32,
            "PCM_16" => WavEncoding::Pcm16,
            "PCM_24" => WavEncoding::Pcm24,
            other => panic!("{other}"),
        };
        assert_eq!(cap.container(), Container::Wav(enc), "{name}");
        assert_eq!(cap.sample_rate_hz(), Some(rate), "{name}");
        assert_eq!(cap.len() as u64, want["frames"].as_u64().unwrap(), "{name}");
        let mut s = vec![Cf32::default(); cap.len()];
        cap.read_into(0, &mut s).unwrap();
        let p: f64 = s.iter().map(|x| f64::from(x.norm_sqr())).sum::<f64>() / s.len() as f64;
        let pw = want["mean_power"].as_f64().unwrap();
        assert!(((p - pw) / pw).abs() < 1e-6, "{name}: {p} vs {pw}");
    }
}

fn analyse_err(capture: &std::path::Path, profile_json: &str) -> (i32, String) {
    let dir = tempdir();
    let prof = dir.path().join("p.profile.json");
    std::fs::write(&prof, profile_json).unwrap();
    let out = iqaudit()
        .arg("analyse")
        .arg(capture)
        .arg("--profile")
        .arg(&prof)
        .output()
        .unwrap();
    (out.status.code().unwrap_or(-1), stderr_of(&out))
}

/// The committed link profile with `capture.format` set.
fn profile_with_format(f: &str) -> String {
    let mut v: Value = serde_json::from_str(
        &std::fs::read_to_string(test_data("vectors/sigmf/link.profile.json")).unwrap(),
    )
    .unwrap();
    v["capture"] = serde_json::json!({ "format": f, "sample_rate_hz": 250000.0 });
    v.to_string()
}

// Issue 18: with a raw format in the profile, a WAV whose header could not be
// read was silently read as raw samples, header included. RIFF/WAVE layout
// (shared/REFERENCE-VALUES.md §11): "RIFF" size "WAVE", then chunks.
#[test]
fn a_wav_that_cannot_be_parsed_is_an_error_even_when_the_profile_names_a_raw_format() {
    let dir = tempdir();
    // A WAV whose fmt chunk is cut short, and a .wav file with no RIFF tag.
    let mut broken = b"RIFF\x40\x00\x00\x00WAVEfmt \x10\x00\x00\x00\x01\x00".to_vec();
    broken.resize(64, 0);
    let cases = [
        ("broken.wav", broken.clone(), "invalid WAV header"),
        ("broken.bin", broken, "invalid WAV header"),
        ("not-riff.wav", vec![7u8; 64], "no RIFF, RF64 or BW64 tag"),
    ];
    for (name, bytes, words) in cases {
        let p = dir.path().join(name);
        std::fs::write(&p, bytes).unwrap();
        let (code, err) = analyse_err(&p, &profile_with_format("ci16_le"));
        assert_eq!(code, 2, "{name}: {err}");
        assert!(err.contains(words) && err.contains(name), "{name}: {err}");
        let e = Capture::open(
            &p,
            &OpenOptions {
                format: Some(SampleFormat::Ci16Le),
                ..OpenOptions::default()
            },
        )
        .unwrap_err();
        assert!(e.to_string().contains("WAV"), "{name}: {e}");
    }
}

#[test]
fn a_valid_wav_is_read_by_its_header_and_a_format_option_gives_a_warning() {
    let path = test_data("vectors/wav/rf64-pcm16.wav");
    let cap = Capture::open(
        &path,
        &OpenOptions {
            format: Some(SampleFormat::Cf32Le),
            ..OpenOptions::default()
        },
    )
    .unwrap();
    assert_eq!(cap.container(), Container::Wav(WavEncoding::Pcm16));
    assert_eq!(cap.notes().len(), 1);
    let note = cap.notes()[0].to_string();
    assert!(note.contains("cf32_le") && note.contains("WAV"), "{note}");
    let out = iqaudit()
        .arg("info")
        .arg(&path)
        .args(["--format", "cf32_le"])
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", stderr_of(&out));
    assert!(stderr_of(&out).contains("warning"), "{}", stderr_of(&out));
    assert!(String::from_utf8_lossy(&out.stdout).contains("wav_pcm16"));
}

// RIFF/WAVE: the data chunk length is a whole number of frames (block align);
// 24-bit samples in 4-byte containers are not a supported layout.
#[test]
fn a_24_bit_wav_in_32_bit_containers_is_refused_naming_both_sizes() {
    let dir = tempdir();
    let p = dir.path().join("wide.wav");
    let spec = hound::WavSpec {
        channels: 2,
        sample_rate: 8000,
        bits_per_sample: 24,
        sample_format: hound::SampleFormat::Int,
    };
    // hound writes 24-bit samples in 3-byte containers; claim 4-byte
    // containers by hand (block align 8 for 2 channels, bits still 24).
    {
        let mut w = hound::WavWriter::create(&p, spec).unwrap();
        for k in 0..8 {
            w.write_sample(k * 1000).unwrap();
        }
        w.finalize().unwrap();
    }
    let mut b = std::fs::read(&p).unwrap();
    let fmt = b.windows(4).position(|w| w == b"fmt ").unwrap();
    b[fmt + 8 + 12] = 8; // block align
    std::fs::write(&p, &b).unwrap();
    let e = Capture::open(&p, &OpenOptions::default()).unwrap_err();
    assert!(e.to_string().contains("frames of"), "{e}");
}
