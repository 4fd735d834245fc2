//! Replays the committed fuzz seed corpora (`fuzz/seeds/<target>/`) through the
//! same library entry points as the libFuzzer targets in `fuzz/`, on the stable
//! toolchain with no fuzzer: every file must give `Ok` or a typed error, never a
//! panic, and the main properties of each target must hold. Any input a fuzzer
//! ever broke is added to these folders (docs/robustness.md).

use std::path::{Path, PathBuf};

use iqaudit::capture::parse_sigmf_meta;
use iqaudit::profile::parse_profile;
use iqaudit::recheck::parse_recorded_report;
use iqaudit::{Capture, Cf32, Container, SampleFormat, WavEncoding};

fn seeds(target: &str) -> Vec<(PathBuf, Vec<u8>)> {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("fuzz/seeds")
        .join(target);
    let mut files: Vec<PathBuf> = std::fs::read_dir(&dir)
        .unwrap_or_else(|e| panic!("{}: {e}", dir.display()))
        .map(|e| e.unwrap().path())
        .collect();
    files.sort();
    assert!(!files.is_empty(), "no seeds in {}", dir.display());
    files
        .into_iter()
        .map(|p| {
            let b = std::fs::read(&p).unwrap();
            (p, b)
        })
        .collect()
}

#[test]
fn raw_capture_seeds_decode_to_finite_samples_with_counts_matching_the_byte_size() {
    for (p, data) in seeds("raw_capture") {
        let format = SampleFormat::ALL[usize::from(data[0]) % SampleFormat::ALL.len()];
        let bytes = data[2..].to_vec();
        let cap = Capture::from_bytes(bytes.clone(), format);
        let bps = format.bytes_per_sample();
        assert_eq!(cap.len(), bytes.len() / bps, "{}", p.display());
        assert_eq!(cap.trailing_bytes(), bytes.len() % bps);
        let mut out = vec![Cf32::new(0.0, 0.0); cap.len()];
        cap.read_into(0, &mut out).unwrap();
        assert!(out.iter().all(|s| s.re.is_finite() && s.im.is_finite()));
    }
}

#[test]
fn wav_seeds_are_accepted_within_the_buffer_or_refused_with_a_typed_error() {
    for (p, data) in seeds("wav_capture") {
        match Capture::from_wav_bytes(data.clone()) {
            Ok(cap) => {
                let bps = cap.container().bytes_per_sample() as u64;
                assert!(cap.data_offset_bytes() + cap.len() as u64 * bps <= data.len() as u64);
                let mut out = vec![Cf32::new(0.0, 0.0); cap.len()];
                cap.read_into(0, &mut out).unwrap();
                assert!(out.iter().all(|s| s.re.is_finite() && s.im.is_finite()));
                if cap.container() != Container::Wav(WavEncoding::Float32) {
                    // PCM is scaled to full scale 1.0 (src/lib.rs).
                    assert!(out.iter().all(|s| s.re.abs() <= 1.0 && s.im.abs() <= 1.0));
                }
            }
            Err(e) => assert!(
                e.to_string().starts_with("<memory>: "),
                "{}: {e}",
                p.display()
            ),
        }
    }
}

#[test]
fn sigmf_seeds_parse_or_name_the_sidecar() {
    for (p, data) in seeds("sigmf_meta") {
        let text = String::from_utf8(data).unwrap();
        match parse_sigmf_meta(&text, &p) {
            Ok(m) => {
                if let Some(r) = m.sample_rate_hz {
                    assert!(r.is_finite() && r > 0.0, "{}", p.display());
                }
            }
            Err(e) => assert!(e.to_string().contains("sigmf-meta"), "{e}"),
        }
    }
}

#[test]
fn profile_seeds_resolve_validate_and_build_their_symbols() {
    for (p, data) in seeds("profile") {
        let text = String::from_utf8(data).unwrap();
        let r = parse_profile(&text)
            .and_then(|x| x.resolve())
            .unwrap_or_else(|e| panic!("{}: {e}", p.display()));
        r.validate().unwrap();
        let t = r.training_symbols().unwrap();
        assert_eq!(Some(t.len()), r.training.length_symbols);
        if let Some(k) = r.payload_symbols().unwrap() {
            assert_eq!(
                k.before.len() + k.after.len(),
                r.payload_symbols_per_burst()
            );
        }
    }
}

#[test]
fn report_seeds_pass_every_check_recheck_makes_before_opening_the_capture() {
    for (p, data) in seeds("report") {
        let text = String::from_utf8(data).unwrap();
        let r = parse_recorded_report(&text, &p).unwrap_or_else(|e| panic!("{e}"));
        r.profile.validate().unwrap();
    }
}
