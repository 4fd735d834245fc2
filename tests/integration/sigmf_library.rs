//! Every sidecar iqaudit writes is checked by the SigMF project's reference
//! library (Python `sigmf`, installed by .ci/run): it validates the metadata,
//! finds the data and reads the same samples iqaudit reads
//! (tests/sigmf/check_sidecars.py states the comparison).
//!
//! Without Python or the package the test says so loudly and passes, except
//! under CI (`CI` or `IQAUDIT_REQUIRE_SIGMF` set), where it fails.

use std::path::{Path, PathBuf};
use std::process::Command;

use iqaudit::{
    write_capture, Capture, Cf32, Container, OpenOptions, SampleFormat, UnsignedZero, WavEncoding,
    WriteSpec,
};
use serde_json::json;

use crate::util::{iqaudit, stderr_of, tempdir, test_data};

/// Whether the reference library can be run; panics under CI when not.
pub fn reference_library_available() -> bool {
    let ok = Command::new("python3")
        .args(["-c", "import sigmf, numpy"])
        .output()
        .is_ok_and(|o| o.status.success());
    if !ok {
        let required =
            std::env::var_os("CI").is_some() || std::env::var_os("IQAUDIT_REQUIRE_SIGMF").is_some();
        assert!(
            !required,
            "the SigMF reference library (python3 -m pip install sigmf) is required in CI"
        );
        eprintln!(
            "\n*** SKIPPED: SigMF reference-library checks: python3 with the `sigmf` package \
             is not installed (python3 -m pip install sigmf; .ci/run does this) ***\n"
        );
    }
    ok
}

/// One entry of the checker's manifest: the sidecar and iqaudit's reading of it.
pub fn manifest_entry(dir: &Path, meta: &Path, zero: UnsignedZero) -> serde_json::Value {
    let cap = Capture::open(
        meta,
        &OpenOptions {
            unsigned_zero: zero,
            ..OpenOptions::default()
        },
    )
    .unwrap_or_else(|e| panic!("{}: {e}", meta.display()));
    let mut s = vec![Cf32::default(); cap.len()];
    cap.read_into(0, &mut s).unwrap();
    let bytes: Vec<u8> = s
        .iter()
        .flat_map(|c| [c.re.to_le_bytes(), c.im.to_le_bytes()])
        .flatten()
        .collect();
    let name = meta.file_name().unwrap().to_string_lossy().into_owned();
    let dump = dir.join(format!("{name}.iqaudit.cf32"));
    std::fs::write(&dump, bytes).unwrap();
    json!({ "meta": meta, "samples": dump, "unsigned_zero": zero.name() })
}

/// Run the checker on `entries`; panics with its output on any failure.
pub fn run_checker(dir: &Path, entries: &[serde_json::Value]) {
    let manifest = dir.join("manifest.json");
    std::fs::write(&manifest, serde_json::to_vec(entries).unwrap()).unwrap();
    let out = Command::new("python3")
        .arg(test_data("sigmf/check_sidecars.py"))
        .arg(&manifest)
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(
        out.status.success(),
        "reference library check failed:\n{text}{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(
        text.contains(&format!("{} passed, 0 failed", entries.len())),
        "{text}"
    );
}

fn synth(out: &Path, format: &str) -> PathBuf {
    let o = iqaudit()
        .arg("synth")
        .arg("--profile")
        .arg(test_data("vectors/sigmf/link.profile.json"))
        .arg("--out")
        .arg(out)
        .args([
            "--format",
            format,
            "--sample-rate",
            "250000",
            "--bursts",
            "2",
        ])
        .args(["--seed", "11", "--esn0-db", "25", "--level-dbfs", "-9"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{format}: {}", stderr_of(&o));
    let c = Capture::open(out, &OpenOptions::default()).unwrap();
    c.sidecar_path()
        .expect("synth wrote a sidecar")
        .to_path_buf()
}

// Source: the SigMF reference library (Python sigmf, version printed by the
// checker) — schema validation, dataset lookup and sample reading are its own.
#[test]
fn the_reference_library_validates_and_reads_every_sidecar_synth_writes() {
    if !reference_library_available() {
        return;
    }
    let dir = tempdir();
    let mut entries = Vec::new();
    for f in SampleFormat::ALL {
        // Two captures of one name in one folder: the second gets NAME.EXT.sigmf-meta.
        let out = dir.path().join(format!("stim.{}", f.name()));
        let meta = synth(&out, f.name());
        entries.push(manifest_entry(dir.path(), &meta, UnsignedZero::Symmetric));
    }
    let conforming = dir.path().join("pair.sigmf-data");
    let meta = synth(&conforming, "ci16_le");
    assert_eq!(meta, dir.path().join("pair.sigmf-meta"));
    entries.push(manifest_entry(dir.path(), &meta, UnsignedZero::Symmetric));
    run_checker(dir.path(), &entries);
}

// Source: as above. WAV sidecars are non-conforming datasets: core:dataset
// names the WAV and core:header_bytes / core:trailing_bytes skip its chunks.
#[test]
fn the_reference_library_reads_wav_and_power_of_two_sidecars_the_writer_makes() {
    if !reference_library_available() {
        return;
    }
    let dir = tempdir();
    let samples: Vec<Cf32> = (0..300)
        .map(|k| {
            let a = k as f32 * 0.05;
            Cf32::new(0.6 * a.cos(), 0.6 * a.sin())
        })
        .collect();
    let mut entries = Vec::new();
    let wavs = [
        WavEncoding::Pcm8,
        WavEncoding::Pcm16,
        WavEncoding::Pcm32,
        WavEncoding::Float32,
        WavEncoding::Float64,
    ];
    for enc in wavs {
        let p = dir.path().join(format!("w-{enc}.wav"));
        let st = write_capture(
            &p,
            &samples,
            &WriteSpec {
                sigmf_sidecar: true,
                center_freq_hz: Some(869.5e6),
                ..WriteSpec::new(Container::Wav(enc), 48_000.0)
            },
        )
        .unwrap();
        // 8-bit WAV PCM is offset binary with zero at 128 (RIFF/WAVE): the
        // sidecar's cu8 is read with the power-of-two zero point.
        let zero = if enc == WavEncoding::Pcm8 {
            UnsignedZero::PowerOfTwo
        } else {
            UnsignedZero::Symmetric
        };
        entries.push(manifest_entry(dir.path(), &st.sidecar.unwrap(), zero));
    }
    for f in [
        SampleFormat::Cu8,
        SampleFormat::Cu16Be,
        SampleFormat::Cu32Le,
    ] {
        let p = dir.path().join(format!("p2.{}", f.name()));
        let st = write_capture(
            &p,
            &samples,
            &WriteSpec {
                sigmf_sidecar: true,
                unsigned_zero: UnsignedZero::PowerOfTwo,
                ..WriteSpec::new(Container::Raw(f), 48_000.0)
            },
        )
        .unwrap();
        entries.push(manifest_entry(
            dir.path(),
            &st.sidecar.unwrap(),
            UnsignedZero::PowerOfTwo,
        ));
    }
    run_checker(dir.path(), &entries);
}
