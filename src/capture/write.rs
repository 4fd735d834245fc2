//! The writer side: store [`Cf32`] samples in any supported layout.
//!
//! Takes in: full-scale-1.0 samples and a [`WriteSpec`]. Gives out: a raw or WAV
//! file (and optionally a SigMF sidecar, raw layouts only), written atomically —
//! to a temporary file in the same directory, then renamed over the target.
//!
//! Quantisation is the inverse of the reader's scaling (`src/lib.rs`): `ci16`
//! writes `round(x·32768)`, `ci8` `round(x·128)`, `cu8` `round(x·127.5 + 127.5)`,
//! WAV PCM `round(x·2^(bits−1))` (8-bit stored unsigned with offset 128). Values
//! beyond the code range are clamped. [`WriteStats::clipped`] counts samples whose
//! I or Q lands on the most negative or most positive code — exactly what the
//! reader counts, so a round trip reports the same figure. Float layouts store
//! the value as is and count `|x| ≥ 1` the same way. NaN quantises to code 0
//! (Rust's saturating float-to-int cast).

use crate::atomic::{AtomicFile, WriteError};
use std::io::Write;
use std::path::Path;

use super::{sigmf, CaptureError, Container, SampleFormat, WavEncoding};
use crate::Cf32;

/// What to write.
#[derive(Debug, Clone, PartialEq)]
pub struct WriteSpec {
    /// Layout of the sample file.
    pub container: Container,
    /// Sample rate in Hz (WAV header rate is this rounded to an integer).
    pub sample_rate_hz: f64,
    /// Centre frequency in Hz, recorded in the SigMF sidecar.
    pub center_freq_hz: Option<f64>,
    /// Also write `NAME.sigmf-meta` beside the file (raw containers only).
    pub sigmf_sidecar: bool,
    /// Free text for the sidecar's `core:description`.
    pub description: Option<String>,
}

/// What was written.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct WriteStats {
    /// Complex samples written.
    pub samples: u64,
    /// Samples with I or Q at full scale (clamped codes; floats `|x| ≥ 1`).
    pub clipped: u64,
}

/// Quantise one component to an integer code range.
#[inline(always)]
fn quant(x: f32, scale: f32, mid: f32, lo: i32, hi: i32) -> (i32, bool) {
    // Saturating cast; NaN → 0. Computed in f64 so 32-bit codes round exactly.
    let v = (f64::from(x) * f64::from(scale) + f64::from(mid)).round();
    let c = (v as i64).clamp(i64::from(lo), i64::from(hi)) as i32;
    (c, c == lo || c == hi)
}

/// Append the raw byte encoding of `samples` in `format` to `out`; returns the
/// number of clipped samples (see the module doc).
pub fn encode_raw(samples: &[Cf32], format: SampleFormat, out: &mut Vec<u8>) -> u64 {
    out.reserve(samples.len() * format.bytes_per_sample());
    let mut clipped = 0u64;
    for s in samples {
        let c = match format {
            SampleFormat::Cf32Le | SampleFormat::Cf32Be => {
                let be = format == SampleFormat::Cf32Be;
                for v in [s.re, s.im] {
                    out.extend_from_slice(&if be { v.to_be_bytes() } else { v.to_le_bytes() });
                }
                s.re.abs() >= 1.0 || s.im.abs() >= 1.0
            }
            SampleFormat::Cf64Le => {
                out.extend_from_slice(&f64::from(s.re).to_le_bytes());
                out.extend_from_slice(&f64::from(s.im).to_le_bytes());
                s.re.abs() >= 1.0 || s.im.abs() >= 1.0
            }
            SampleFormat::Ci16Le | SampleFormat::Ci16Be => {
                let (i, ci) = quant(s.re, 32768.0, 0.0, -32768, 32767);
                let (q, cq) = quant(s.im, 32768.0, 0.0, -32768, 32767);
                for v in [i as i16, q as i16] {
                    out.extend_from_slice(&if format == SampleFormat::Ci16Be {
                        v.to_be_bytes()
                    } else {
                        v.to_le_bytes()
                    });
                }
                ci || cq
            }
            SampleFormat::Ci8 => {
                let (i, ci) = quant(s.re, 128.0, 0.0, -128, 127);
                let (q, cq) = quant(s.im, 128.0, 0.0, -128, 127);
                out.extend_from_slice(&[i as i8 as u8, q as i8 as u8]);
                ci || cq
            }
            SampleFormat::Cu8 => {
                let (i, ci) = quant(s.re, 127.5, 127.5, 0, 255);
                let (q, cq) = quant(s.im, 127.5, 127.5, 0, 255);
                out.extend_from_slice(&[i as u8, q as u8]);
                ci || cq
            }
        };
        clipped += u64::from(c);
    }
    clipped
}

/// Write `samples` to `path` as `spec` says, atomically; optionally also the
/// SigMF sidecar `NAME.sigmf-meta` (see [`Capture::open`](super::Capture::open)
/// for how it is found again).
pub fn write_capture(
    path: &Path,
    samples: &[Cf32],
    spec: &WriteSpec,
) -> Result<WriteStats, CaptureError> {
    if spec.sigmf_sidecar && matches!(spec.container, Container::Wav(_)) {
        return Err(CaptureError::BadWriteSpec {
            path: path.to_path_buf(),
            problem:
                "a SigMF sidecar describes raw samples only; choose a raw format or no sidecar"
                    .into(),
        });
    }
    if !(spec.sample_rate_hz.is_finite() && spec.sample_rate_hz > 0.0) {
        return Err(CaptureError::BadWriteSpec {
            path: path.to_path_buf(),
            problem: format!("sample rate {} Hz is not positive", spec.sample_rate_hz),
        });
    }
    let clipped = match spec.container {
        Container::Raw(format) => atomic_write(path, |w| {
            let mut buf = Vec::with_capacity(CHUNK * format.bytes_per_sample());
            let mut clipped = 0;
            for chunk in samples.chunks(CHUNK) {
                buf.clear();
                clipped += encode_raw(chunk, format, &mut buf);
                w.write_all(&buf)?;
            }
            Ok(clipped)
        })?,
        Container::Wav(enc) => {
            let rate = spec.sample_rate_hz.round();
            if rate > f64::from(u32::MAX) || rate < 1.0 {
                return Err(CaptureError::BadWriteSpec {
                    path: path.to_path_buf(),
                    problem: format!("sample rate {rate} Hz does not fit a WAV header"),
                });
            }
            atomic_write(path, |w| write_wav(w, samples, enc, rate as u32))?
        }
    };
    if spec.sigmf_sidecar {
        if let Container::Raw(format) = spec.container {
            let text = sigmf::sidecar_json(
                format,
                spec.sample_rate_hz,
                spec.center_freq_hz,
                spec.description.as_deref(),
            );
            let meta = sigmf::sidecar_path(path);
            atomic_write(&meta, |w| w.write_all(text.as_bytes()))?;
        }
    }
    Ok(WriteStats {
        samples: samples.len() as u64,
        clipped,
    })
}

const CHUNK: usize = 1 << 14;

/// Encode a 2-channel WAV through hound (the independent WAV writer).
fn write_wav(
    w: &mut AtomicFile,
    samples: &[Cf32],
    enc: WavEncoding,
    rate: u32,
) -> std::io::Result<u64> {
    let spec = hound::WavSpec {
        channels: 2,
        sample_rate: rate,
        bits_per_sample: enc.bits(),
        sample_format: if enc == WavEncoding::Float32 {
            hound::SampleFormat::Float
        } else {
            hound::SampleFormat::Int
        },
    };
    let to_io = |e: hound::Error| match e {
        hound::Error::IoError(io) => io,
        other => std::io::Error::other(other.to_string()),
    };
    let mut wr = hound::WavWriter::new(w, spec).map_err(to_io)?;
    let mut clipped = 0u64;
    let (scale, lo, hi) = match enc {
        WavEncoding::Pcm8 => (128.0, -128, 127),
        WavEncoding::Pcm16 => (32768.0, -32768, 32767),
        WavEncoding::Pcm24 => (8_388_608.0, -(1 << 23), (1 << 23) - 1),
        WavEncoding::Pcm32 | WavEncoding::Float32 => (2_147_483_648.0, i32::MIN, i32::MAX),
    };
    for s in samples {
        if enc == WavEncoding::Float32 {
            wr.write_sample(s.re).map_err(to_io)?;
            wr.write_sample(s.im).map_err(to_io)?;
            clipped += u64::from(s.re.abs() >= 1.0 || s.im.abs() >= 1.0);
            continue;
        }
        let (i, ci) = quant(s.re, scale, 0.0, lo, hi);
        let (q, cq) = quant(s.im, scale, 0.0, lo, hi);
        clipped += u64::from(ci || cq);
        if enc == WavEncoding::Pcm8 {
            // hound stores 8-bit samples unsigned (adds 128), as WAV requires.
            wr.write_sample(i as i8).map_err(to_io)?;
            wr.write_sample(q as i8).map_err(to_io)?;
        } else {
            wr.write_sample(i).map_err(to_io)?;
            wr.write_sample(q).map_err(to_io)?;
        }
    }
    wr.finalize().map_err(to_io)?;
    Ok(clipped)
}

/// Write through `f` into a [`crate::atomic::AtomicFile`] beside `path`: the
/// target appears whole or not at all, and on any error the temporary file is
/// removed.
fn atomic_write<T>(
    path: &Path,
    f: impl FnOnce(&mut AtomicFile) -> std::io::Result<T>,
) -> Result<T, CaptureError> {
    let err = |e: WriteError| CaptureError::Write {
        path: path.to_path_buf(),
        source: match e {
            WriteError::Io { source, .. } => source,
            other => std::io::Error::other(other.to_string()),
        },
    };
    let mut file = AtomicFile::with_capacity(path, 1 << 16).map_err(err)?;
    let value = f(&mut file).map_err(|source| CaptureError::Write {
        path: path.to_path_buf(),
        source,
    })?;
    file.finish().map_err(err)?;
    Ok(value)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::capture::Capture;

    // Round trip writer → reader in memory. The quantiser is the exact inverse of
    // the reader's scaling, so values on the code grid come back bit-exact.
    #[test]
    fn every_raw_format_round_trips_grid_values_and_counts_the_same_clipping() {
        let samples: Vec<Cf32> = vec![
            Cf32::new(0.5, -0.25),
            Cf32::new(-1.0, 0.0),
            Cf32::new(1.5, 0.125), // beyond full scale: clamps
            Cf32::new(-0.0078125, 0.75),
        ];
        for f in SampleFormat::ALL {
            let mut bytes = Vec::new();
            let clipped = encode_raw(&samples, f, &mut bytes);
            assert_eq!(bytes.len(), samples.len() * f.bytes_per_sample());
            let cap = Capture::from_bytes(bytes, f);
            let mut out = vec![Cf32::default(); samples.len()];
            let st = cap.read_into(0, &mut out).unwrap();
            assert_eq!(st.clipped, clipped, "{f}");
            assert_eq!(clipped, 2, "{f}: the -1.0 and the 1.5 sample");
            for (k, (a, b)) in samples.iter().zip(&out).enumerate() {
                let expect = match f {
                    SampleFormat::Cu8 => {
                        let q = |x: f32| {
                            ((x * 127.5 + 127.5).round().clamp(0.0, 255.0) - 127.5) / 127.5
                        };
                        Cf32::new(q(a.re), q(a.im))
                    }
                    _ if k == 2
                        && !matches!(
                            f,
                            SampleFormat::Cf32Le | SampleFormat::Cf32Be | SampleFormat::Cf64Le
                        ) =>
                    {
                        let top = match f {
                            SampleFormat::Ci8 => 127.0 / 128.0,
                            _ => 32767.0 / 32768.0,
                        };
                        Cf32::new(top, a.im)
                    }
                    _ => *a,
                };
                assert_eq!(*b, expect, "{f} sample {k}");
            }
        }
    }

    #[test]
    fn atomic_write_leaves_no_temporary_file_and_sidecar_is_refused_for_wav() {
        let dir = std::env::temp_dir().join(format!("iqaudit-w-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let p = dir.join("t.cf32");
        let spec = WriteSpec {
            container: Container::Raw(SampleFormat::Cf32Le),
            sample_rate_hz: 1e6,
            center_freq_hz: Some(1e9),
            sigmf_sidecar: true,
            description: None,
        };
        let st = write_capture(&p, &[Cf32::new(0.1, 0.2)], &spec).unwrap();
        assert_eq!(st.samples, 1);
        let names: Vec<_> = std::fs::read_dir(&dir)
            .unwrap()
            .map(|e| e.unwrap().file_name().into_string().unwrap())
            .collect();
        assert!(names.iter().all(|n| !n.ends_with(".tmp")), "{names:?}");
        assert!(dir.join("t.sigmf-meta").is_file());
        let wav = WriteSpec {
            container: Container::Wav(WavEncoding::Pcm16),
            ..spec
        };
        assert!(write_capture(&dir.join("t.wav"), &[], &wav).is_err());
        std::fs::remove_dir_all(&dir).unwrap();
    }
}
