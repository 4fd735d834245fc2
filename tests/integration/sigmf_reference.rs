//! Recordings written by the SigMF project's Python reference library
//! (tests/vectors/sigmf/make_sigmf_vectors.py, sigmf 1.14.0; versions in
//! expected.json) are read with the right datatype, rate, samples, frequency
//! per capture segment, header bytes and burst starts; archives are read in
//! place.

use iqaudit::capture::FormatSource;
use iqaudit::{Capture, Cf32, Container, OpenOptions, SampleFormat, UnsignedZero};
use serde_json::Value;

use crate::util::{iqaudit, stderr_of, test_data};

fn expected() -> Value {
    serde_json::from_str(
        &std::fs::read_to_string(test_data("vectors/sigmf/expected.json")).unwrap(),
    )
    .unwrap()
}

fn read_all(c: &Capture) -> Vec<Cf32> {
    let mut out = vec![Cf32::default(); c.len()];
    c.read_into(0, &mut out).unwrap();
    out
}

// Source: the SigMF reference library writes the metadata and reads the samples
// back (autoscale=True: signed codes ÷ 2^(bits−1), unsigned (x − 2^(bits−1)) ÷
// 2^(bits−1), floats as stored). With `power_of_two` our unsigned scaling is
// that convention. Exact for every datatype whose codes are exact in f32; the
// library converts 32-bit codes to f32 before it subtracts the zero point, so
// cu32 can differ from our (correctly rounded) value by one f32 rounding of
// the code: at most 2^-24 relative to full scale.
#[test]
fn every_complex_datatype_written_by_the_reference_library_reads_as_the_library_reads_it() {
    let e = expected();
    let rate = e["sample_rate_hz"].as_f64().unwrap();
    for f in SampleFormat::ALL {
        let d = &e["datatypes"][f.name()];
        let meta = test_data(&format!("vectors/sigmf/dt/{}.sigmf-meta", f.name()));
        let data = meta.with_extension("sigmf-data");
        for path in [&meta, &data] {
            let cap = Capture::open(
                path,
                &OpenOptions {
                    unsigned_zero: UnsignedZero::PowerOfTwo,
                    ..OpenOptions::default()
                },
            )
            .unwrap();
            assert_eq!(cap.container(), Container::Raw(f), "{}", path.display());
            assert_eq!(cap.format_source(), FormatSource::Sigmf);
            assert_eq!(cap.sample_rate_hz(), Some(rate));
            assert_eq!(cap.center_freq_hz(), Some(433.92e6));
            assert_eq!(cap.len() as u64, d["samples"].as_u64().unwrap());
            let got = read_all(&cap);
            for (k, s) in got.iter().enumerate() {
                let want = Cf32::new(
                    d["library_i"][k].as_f64().unwrap() as f32,
                    d["library_q"][k].as_f64().unwrap() as f32,
                );
                if f.family() == "cu32" {
                    assert!(
                        (s - want).norm() <= 2f32.powi(-23),
                        "{f} sample {k}: {s} vs {want}"
                    );
                } else {
                    assert_eq!(*s, want, "{f} sample {k}");
                }
            }
        }
    }
}

// Source: the raw codes the script stored (numpy), scaled by our documented
// default for unsigned types: (x − z)/z with z = (2^bits − 1)/2 (src/lib.rs),
// computed here in f64 and rounded to f32 once.
#[test]
fn unsigned_datatypes_use_the_symmetric_zero_point_by_default() {
    let e = expected();
    for f in SampleFormat::ALL.into_iter().filter(|f| f.is_unsigned()) {
        let d = &e["datatypes"][f.name()];
        let meta = test_data(&format!("vectors/sigmf/dt/{}.sigmf-meta", f.name()));
        let cap = Capture::open(&meta, &OpenOptions::default()).unwrap();
        let got = read_all(&cap);
        let bits = 8 * f.component_bytes() as i32;
        let z = (2f64.powi(bits) - 1.0) / 2.0;
        let codes: Vec<f64> = d["codes"]
            .as_array()
            .unwrap()
            .iter()
            .map(|c| c.as_f64().unwrap())
            .collect();
        for (k, s) in got.iter().enumerate() {
            let want = Cf32::new(
                ((codes[2 * k] - z) / z) as f32,
                ((codes[2 * k + 1] - z) / z) as f32,
            );
            assert_eq!(*s, want, "{f} sample {k}");
        }
        // Sample 14 holds (min code, max code): −1 and +1 exactly, and clipped.
        assert_eq!(got[14], Cf32::new(-1.0, 1.0), "{f}");
    }
}

// Source: make_sigmf_vectors.py — the library wrote three capture segments
// (core:sample_start/core:frequency) and the same samples behind 2 and 16
// header bytes (core:header_bytes, core:dataset, core:trailing_bytes), and
// checked with its own reader that they hold the same samples.
#[test]
fn segments_header_bytes_trailing_bytes_and_archives_give_the_same_samples() {
    let e = expected();
    let b = &e["bursts"];
    let conforming = Capture::open(
        &test_data("vectors/sigmf/bursts.sigmf-meta"),
        &OpenOptions::default(),
    )
    .unwrap();
    let want = read_all(&conforming);
    assert_eq!(want.len() as u64, b["samples"].as_u64().unwrap());
    let starts: Vec<u64> = conforming
        .segments()
        .iter()
        .map(|s| s.sample_start)
        .collect();
    let freqs: Vec<f64> = conforming
        .segments()
        .iter()
        .map(|s| s.center_freq_hz.unwrap())
        .collect();
    let want_starts: Vec<u64> = b["segment_starts"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_u64().unwrap())
        .collect();
    let want_freqs: Vec<f64> = b["frequencies_hz"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64().unwrap())
        .collect();
    assert_eq!(starts, want_starts);
    assert_eq!(freqs, want_freqs);
    assert_eq!(conforming.segment_index_at(want_starts[1] - 1), 0);
    assert_eq!(conforming.segment_index_at(want_starts[1]), 1);
    assert_eq!(conforming.segment_index_at(u64::MAX), 2);
    for (name, header) in [("ncd-hdr2", 2u64), ("ncd-hdr16", 16)] {
        for path in [
            test_data(&format!("vectors/sigmf/{name}.sigmf-meta")),
            test_data(&format!("vectors/sigmf/{name}.ci8")),
        ] {
            let cap = Capture::open(&path, &OpenOptions::default()).unwrap();
            assert_eq!(cap.data_offset_bytes(), header, "{}", path.display());
            assert_eq!(cap.trailing_bytes(), 0, "{}", path.display());
            assert_eq!(read_all(&cap), want, "{}", path.display());
            assert!(cap.notes().is_empty(), "{:?}", cap.notes());
        }
    }
    let archive = test_data("vectors/sigmf/bursts-archive.sigmf");
    for cap in [
        Capture::open(&archive, &OpenOptions::default()).unwrap(),
        Capture::open_unmapped(&archive, &OpenOptions::default()).unwrap(),
    ] {
        assert_eq!(
            cap.archive_member(),
            Some("bursts-archive/bursts-archive.sigmf-data")
        );
        assert_eq!(cap.segments().len(), 3);
        assert_eq!(read_all(&cap), want, "via {}", cap.access_path());
    }
    assert_eq!(
        Capture::open_mapped(&archive, &OpenOptions::default())
            .unwrap()
            .access_path(),
        "mmap"
    );
}

/// `analyse --json` on `path`: the start samples of the bursts found.
fn burst_starts(path: &std::path::Path) -> Vec<u64> {
    let out = iqaudit()
        .arg("analyse")
        .arg(path)
        .arg("--profile")
        .arg(test_data("vectors/sigmf/link.profile.json"))
        .arg("--json")
        .output()
        .unwrap();
    let v: Value = serde_json::from_slice(&out.stdout)
        .unwrap_or_else(|e| panic!("{}: no JSON ({e}): {}", path.display(), stderr_of(&out)));
    v["bursts"]
        .as_array()
        .unwrap()
        .iter()
        .map(|b| b["start_sample"].as_u64().unwrap())
        .collect()
}

// Source: the true start samples come from `iqaudit synth`'s truth file
// (recorded by make_sigmf_vectors.py); the library placed its annotations at
// the first sample of each burst. A 2-byte header used to misalign I and Q
// ("no training found"); a 16-byte one shifted every burst by 4 samples.
#[test]
fn bursts_are_found_at_their_true_starts_behind_any_header_and_inside_an_archive() {
    let e = expected();
    let want: Vec<u64> = e["bursts"]["true_start_samples"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_u64().unwrap())
        .collect();
    for rel in [
        "vectors/sigmf/bursts.sigmf-meta",
        "vectors/sigmf/ncd-hdr2.sigmf-meta",
        "vectors/sigmf/ncd-hdr16.ci8",
        "vectors/sigmf/bursts-archive.sigmf",
    ] {
        assert_eq!(burst_starts(&test_data(rel)), want, "{rel}");
    }
    // The library's annotations start where the truth says the bursts start.
    let meta: Value = serde_json::from_str(
        &std::fs::read_to_string(test_data("vectors/sigmf/bursts.sigmf-meta")).unwrap(),
    )
    .unwrap();
    let ann: Vec<u64> = meta["annotations"]
        .as_array()
        .unwrap()
        .iter()
        .map(|a| a["core:sample_start"].as_u64().unwrap())
        .collect();
    assert_eq!(
        ann,
        e["bursts"]["annotation_starts"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_u64().unwrap())
            .collect::<Vec<_>>()
    );
}

// Source: the SigMF reference library wrote bursts.sigmf-meta with three
// capture segments at 433.92, 434.02 and 434.12 MHz (make_sigmf_vectors.py),
// segments starting at 0, 969 and 2097; burst 2 (true start 2057) runs across
// the last boundary (expected.json `spanning_burst`). SigMF v1.2 `captures`: a
// segment's `core:frequency` holds from its `core:sample_start` on. Each burst
// reports the frequency of the segment it starts in and its CFO in ppm of it,
// and the spanning one is flagged (#18).
#[test]
fn each_burst_of_the_reference_librarys_recording_reports_its_segments_frequency() {
    let out = iqaudit()
        .arg("analyse")
        .arg(test_data("vectors/sigmf/bursts.sigmf-meta"))
        .arg("--profile")
        .arg(test_data("vectors/sigmf/link.profile.json"))
        .arg("--json")
        .output()
        .unwrap();
    let v: Value =
        serde_json::from_slice(&out.stdout).unwrap_or_else(|e| panic!("{e}: {}", stderr_of(&out)));
    let got: Vec<f64> = v["bursts"]
        .as_array()
        .unwrap()
        .iter()
        .map(|b| b["center_freq_hz"].as_f64().unwrap())
        .collect();
    assert_eq!(got, [433.92e6, 434.02e6, 434.02e6]);
    let spans: Vec<bool> = v["bursts"]
        .as_array()
        .unwrap()
        .iter()
        .map(|b| {
            b["warnings"]
                .as_array()
                .unwrap()
                .iter()
                .any(|w| w["code"] == "spans-segments")
        })
        .collect();
    assert_eq!(spans, [false, false, true]);
    for b in v["bursts"].as_array().unwrap() {
        let want = b["cfo_hz"].as_f64().unwrap() / b["center_freq_hz"].as_f64().unwrap() * 1e6;
        assert!((b["cfo_ppm"].as_f64().unwrap() - want).abs() < 1e-9);
    }
}
