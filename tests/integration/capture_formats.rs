//! Every raw layout and WAV encoding round-trips known values written by an
//! independent writer; format resolution follows the documented order.

use std::path::Path;

use iqaudit::capture::FormatSource;
use iqaudit::{
    write_capture, Capture, Cf32, Container, OpenOptions, SampleFormat, WavEncoding, WriteSpec,
};
use serde_json::Value;

use crate::util::{tempdir, test_data};

fn read_all(c: &Capture) -> (Vec<Cf32>, iqaudit::ReadStats) {
    let mut out = vec![Cf32::default(); c.len()];
    let st = c.read_into(0, &mut out).unwrap();
    (out, st)
}

// Source: tests/vectors/make_raw_vectors.py — numpy (version recorded in the
// script and in expected.json) encodes every layout with its own dtype
// encoders; expected values are computed there in float64. Integer scalings
// are exact or correctly rounded in f32, so the comparison is exact.
#[test]
fn every_raw_layout_written_by_numpy_decodes_to_the_expected_values_and_counts() {
    let expected: Value =
        serde_json::from_str(&std::fs::read_to_string(test_data("vectors/expected.json")).unwrap())
            .unwrap();
    for f in SampleFormat::ALL {
        let e = &expected["vectors"][f.name()];
        let path = test_data(&format!("vectors/vec.{}", f.name()));
        let opts = OpenOptions {
            format: Some(f),
            ..OpenOptions::default()
        };
        for cap in [
            Capture::open(&path, &opts).unwrap(),
            Capture::open_unmapped(&path, &opts).unwrap(),
        ] {
            let (got, st) = read_all(&cap);
            assert_eq!(got.len(), 16, "{f}");
            for (k, s) in got.iter().enumerate() {
                let i = e["i"][k].as_f64().unwrap() as f32;
                let q = e["q"][k].as_f64().unwrap() as f32;
                assert_eq!(
                    *s,
                    Cf32::new(i, q),
                    "{f} sample {k} via {}",
                    cap.access_path()
                );
            }
            assert_eq!(st.clipped, e["clipped"].as_u64().unwrap(), "{f}");
            assert_eq!(st.non_finite, e["non_finite"].as_u64().unwrap(), "{f}");
        }
    }
}

#[test]
fn cf32_le_on_a_little_endian_host_is_a_zero_copy_view() {
    let cap = Capture::open_mapped(
        &test_data("vectors/vec.cf32_le"),
        &OpenOptions {
            format: Some(SampleFormat::Cf32Le),
            ..OpenOptions::default()
        },
    )
    .unwrap();
    if cfg!(target_endian = "little") {
        let view = cap.as_cf32_slice().expect("aligned mmap gives a view");
        let (got, _) = read_all(&cap);
        // Equal except where the view holds the stored non-finite values.
        for (v, g) in view.iter().zip(&got) {
            if v.re.is_finite() && v.im.is_finite() {
                assert_eq!(v, g);
            }
        }
    }
}

fn hound_wav(path: &Path, bits: u16, float: bool, frames: &[(f64, f64)]) {
    let spec = hound::WavSpec {
        channels: 2,
        sample_rate: 250_000,
        bits_per_sample: bits,
        sample_format: if float {
            hound::SampleFormat::Float
        } else {
            hound::SampleFormat::Int
        },
    };
    let mut w = hound::WavWriter::create(path, spec).unwrap();
    for &(i, q) in frames {
        for v in [i, q] {
            if float {
                w.write_sample(v as f32).unwrap();
            } else {
                // Integer codes given directly (already in the bit depth's range).
                match bits {
                    8 => w.write_sample(v as i8).unwrap(),
                    16 => w.write_sample(v as i16).unwrap(),
                    _ => w.write_sample(v as i32).unwrap(),
                }
            }
        }
    }
    w.finalize().unwrap();
}

// Source: hound (independent WAV writer) stores the codes; expected values
// follow the scaling in src/lib.rs (PCM code / 2^(bits−1); hound's 8-bit
// samples are signed in its API and stored unsigned +128, RIFF/WAVE per
// shared/REFERENCE-VALUES.md §11).
#[test]
fn every_wav_encoding_written_by_hound_decodes_to_scaled_codes_with_i_on_channel_0() {
    let dir = tempdir();
    for (enc, bits) in [
        (WavEncoding::Pcm8, 8u16),
        (WavEncoding::Pcm16, 16),
        (WavEncoding::Pcm24, 24),
        (WavEncoding::Pcm32, 32),
    ] {
        let full = 2f64.powi(i32::from(bits) - 1);
        let frames = [
            (0.0, 1.0),
            (full / 2.0, -full / 4.0),
            (-full, 3.0),          // most negative code → clipped
            (5.0, full - 1.0),     // most positive code → clipped
            (-(full / 8.0), 17.0), // inside
        ];
        let p = dir.path().join(format!("t{bits}.wav"));
        hound_wav(&p, bits, false, &frames);
        let cap = Capture::open(&p, &OpenOptions::default()).unwrap();
        assert_eq!(cap.container(), Container::Wav(enc));
        assert_eq!(cap.format_source(), FormatSource::WavHeader);
        assert_eq!(cap.sample_rate_hz(), Some(250_000.0));
        // hound writes the canonical 44-byte header, or the 68-byte
        // WAVE_FORMAT_EXTENSIBLE one for more than 16 bits (STYLE §8).
        let expect_offset = if bits > 16 { 68 } else { 44 };
        assert_eq!(cap.data_offset_bytes(), expect_offset, "{enc}");
        let (got, st) = read_all(&cap);
        for (k, (&(i, q), s)) in frames.iter().zip(&got).enumerate() {
            let e = Cf32::new((i / full) as f32, (q / full) as f32);
            assert_eq!(*s, e, "{enc} frame {k}");
        }
        assert_eq!(st.clipped, 2, "{enc}");
    }
    let p = dir.path().join("f.wav");
    let frames = [(0.25, -0.5), (1.0, 0.0), (f64::NAN, 0.1)];
    hound_wav(&p, 32, true, &frames);
    let cap = Capture::open(&p, &OpenOptions::default()).unwrap();
    assert_eq!(cap.container(), Container::Wav(WavEncoding::Float32));
    let (got, st) = read_all(&cap);
    assert_eq!(got[0], Cf32::new(0.25, -0.5));
    assert_eq!(got[2], Cf32::new(0.0, 0.0));
    assert_eq!((st.clipped, st.non_finite), (1, 1));
}

#[test]
fn the_writer_round_trips_every_wav_encoding_and_counts_the_clipping_the_reader_sees() {
    let dir = tempdir();
    let samples: Vec<Cf32> = (0..1000)
        .map(|k| {
            let a = k as f32 * 0.0123;
            Cf32::new(1.2 * a.cos(), 0.7 * a.sin())
        })
        .collect();
    for enc in WavEncoding::ALL {
        let p = dir.path().join(format!("w-{enc}.wav"));
        let spec = WriteSpec {
            container: Container::Wav(enc),
            sample_rate_hz: 48_000.0,
            center_freq_hz: None,
            sigmf_sidecar: false,
            description: None,
            annotations: Vec::new(),
            unsigned_zero: Default::default(),
        };
        let ws = write_capture(&p, &samples, &spec).unwrap();
        let cap = Capture::open(&p, &OpenOptions::default()).unwrap();
        let (got, st) = read_all(&cap);
        assert_eq!(got.len(), samples.len());
        assert_eq!(st.clipped, ws.clipped, "{enc}");
        assert!(ws.clipped > 0, "{enc}: the 1.2 amplitude must clip");
        // Quantisation error bound: half a code step, 2^-(bits-1)/2 (float: exact).
        let float = matches!(enc, WavEncoding::Float32 | WavEncoding::Float64);
        let step = if float {
            0.0
        } else {
            2f32.powi(1 - i32::from(enc.bits()))
        };
        for (a, b) in samples.iter().zip(&got) {
            let ca = if float {
                *a
            } else {
                Cf32::new(a.re.clamp(-1.0, 1.0 - step), a.im.clamp(-1.0, 1.0 - step))
            };
            assert!((ca - b).norm() <= step + 1e-6, "{enc}: {a} vs {b}");
        }
    }
}

#[test]
fn a_sigmf_sidecar_gives_format_rate_and_frequency_and_yields_only_to_the_option() {
    let dir = tempdir();
    let samples = [Cf32::new(0.5, -0.5), Cf32::new(0.25, 0.0)];
    // The data file's extension says cu8; the sidecar says ci16_le and wins.
    let p = dir.path().join("crane.cu8");
    write_capture(
        &p,
        &samples,
        &WriteSpec {
            container: Container::Raw(SampleFormat::Ci16Le),
            sample_rate_hz: 1.5e6,
            center_freq_hz: Some(433.92e6),
            sigmf_sidecar: true,
            description: Some("quayside crane telemetry".into()),
            annotations: Vec::new(),
            unsigned_zero: Default::default(),
        },
    )
    .unwrap();
    assert!(dir.path().join("crane.sigmf-meta").is_file());
    let cap = Capture::open(&p, &OpenOptions::default()).unwrap();
    assert_eq!(cap.format_source(), FormatSource::Sigmf);
    assert_eq!(cap.container(), Container::Raw(SampleFormat::Ci16Le));
    assert_eq!(cap.sample_rate_hz(), Some(1.5e6));
    assert_eq!(cap.center_freq_hz(), Some(433.92e6));
    assert_eq!(read_all(&cap).0, samples);
    // The explicit option wins over the sidecar (and the rate option too).
    let cap = Capture::open(
        &p,
        &OpenOptions {
            format: Some(SampleFormat::Cu8),
            sample_rate_hz: Some(2e6),
            swap_iq: false,
            unsigned_zero: Default::default(),
        },
    )
    .unwrap();
    assert_eq!(cap.format_source(), FormatSource::Option);
    assert_eq!(cap.len(), 4);
    assert_eq!(cap.sample_rate_hz(), Some(2e6));
    // A .sigmf-data/.sigmf-meta pair opens by either name.
    let d = dir.path().join("pair.sigmf-data");
    let spec = WriteSpec {
        container: Container::Raw(SampleFormat::Cf32Be),
        sample_rate_hz: 1e5,
        center_freq_hz: None,
        sigmf_sidecar: true,
        description: None,
        annotations: Vec::new(),
        unsigned_zero: Default::default(),
    };
    write_capture(&d, &samples, &spec).unwrap();
    for name in ["pair.sigmf-data", "pair.sigmf-meta"] {
        let cap = Capture::open(&dir.path().join(name), &OpenOptions::default()).unwrap();
        assert_eq!(read_all(&cap).0, samples, "{name}");
        assert_eq!(cap.center_freq_hz(), None);
    }
}

#[test]
fn extensions_map_to_formats_and_swap_iq_mirrors_the_samples() {
    let dir = tempdir();
    let samples = [Cf32::new(0.5, -0.25)];
    for (ext, f) in [
        ("cf32", SampleFormat::Cf32Le),
        ("cfile", SampleFormat::Cf32Le),
        ("cf64", SampleFormat::Cf64Le),
        ("ci16", SampleFormat::Ci16Le),
        ("cs16", SampleFormat::Ci16Le),
        ("ci8", SampleFormat::Ci8),
        ("cs8", SampleFormat::Ci8),
        ("cu8", SampleFormat::Cu8),
    ] {
        let p = dir.path().join(format!("x.{ext}"));
        let mut bytes = Vec::new();
        iqaudit::capture::encode_raw(&samples, f, &mut bytes);
        std::fs::write(&p, bytes).unwrap();
        let cap = Capture::open(&p, &OpenOptions::default()).unwrap();
        assert_eq!(cap.container(), Container::Raw(f), "{ext}");
        assert_eq!(cap.format_source(), FormatSource::Extension);
        let swapped = Capture::open(
            &p,
            &OpenOptions {
                swap_iq: true,
                ..OpenOptions::default()
            },
        )
        .unwrap();
        let (a, b) = (read_all(&cap).0[0], read_all(&swapped).0[0]);
        assert_eq!((a.re, a.im), (b.im, b.re));
    }
}

#[test]
fn a_partial_sample_at_the_end_is_ignored_and_counted() {
    let dir = tempdir();
    let p = dir.path().join("odd.ci16");
    std::fs::write(&p, [0u8, 64, 0, 192, 1, 2, 3]).unwrap();
    let cap = Capture::open(&p, &OpenOptions::default()).unwrap();
    assert_eq!((cap.len(), cap.trailing_bytes()), (1, 3));
    assert_eq!(read_all(&cap).0[0], Cf32::new(0.5, -0.5));
}

// STYLE §12: the same capture through every access path (mmap with the
// zero-copy cf32 view, positioned reads, in memory) gives byte-identical JSON,
// including chunks that hold non-finite values (the view path cleans a copy).
#[test]
fn mapped_unmapped_and_in_memory_reads_give_identical_statistics() {
    use iqaudit::capture::stats::{capture_stats, info_report, StatsOptions};
    let dir = tempdir();
    let mut samples: Vec<Cf32> = (0..70_001)
        .map(|k| {
            Cf32::new(
                ((k * 37) % 1000) as f32 / 1500.0,
                ((k * 91) % 777) as f32 / -900.0,
            )
        })
        .collect();
    samples[66_000] = Cf32::new(f32::NAN, 0.5);
    for f in [
        SampleFormat::Ci16Le,
        SampleFormat::Cf32Le,
        SampleFormat::Cu8,
    ] {
        let p = dir.path().join(format!("s.{}", f.name()));
        let mut bytes = Vec::new();
        iqaudit::capture::encode_raw(&samples, f, &mut bytes);
        std::fs::write(&p, &bytes).unwrap();
        let o = StatsOptions::default();
        let json = |c: &Capture| {
            let st = capture_stats(c, &o, &|_| {}).unwrap();
            let mut r = info_report(c, &st, &o);
            r.path.clear();
            r.format_source = FormatSource::Memory;
            r.file_size_bytes = 0;
            serde_json::to_string(&r).unwrap()
        };
        let opts = OpenOptions {
            format: Some(f),
            ..OpenOptions::default()
        };
        let mapped = Capture::open_mapped(&p, &opts).unwrap();
        if f == SampleFormat::Cf32Le && cfg!(target_endian = "little") {
            assert!(mapped.as_cf32_slice().is_some(), "view path exercised");
        }
        let a = json(&mapped);
        let b = json(&Capture::open_unmapped(&p, &opts).unwrap());
        let c = json(&Capture::from_bytes(bytes, f));
        assert_eq!(a, b, "{f}");
        assert_eq!(a, c, "{f}");
        if f == SampleFormat::Cf32Le {
            assert!(a.contains("\"non_finite_samples\":1"), "{a}");
        }
    }
}
