//! The writer side: store [`Cf32`] samples in any supported layout.
//!
//! Takes in: full-scale-1.0 samples and a [`WriteSpec`]. Gives out: a raw or WAV
//! file (and optionally a SigMF sidecar, raw layouts only), written atomically —
//! to a temporary file in the same directory, then renamed over the target.
//!
//! Quantisation is the inverse of the reader's scaling (`src/lib.rs`): signed
//! integers write `round(x·2^(bits−1))` (`ci8` ×128, `ci16` ×32768, `ci32` ×2³¹),
//! unsigned ones `round(x·z + z)` with the zero point `z` of [`UnsignedZero`]
//! (127.5 for `cu8` by default), WAV PCM `round(x·2^(bits−1))` (8-bit stored
//! unsigned with offset 128). Values beyond the code range are clamped.
//! [`WriteStats::clipped`] counts samples whose I or Q lands on the most negative
//! or most positive code — exactly what the reader counts, so a round trip
//! reports the same figure. Float layouts store the value as is and count
//! `|x| ≥ 1` the same way. NaN quantises to code 0 (Rust's saturating
//! float-to-int cast).
//!
//! Sidecars (see `sigmf.rs` for the names): every sidecar of a data file other
//! than `NAME.sigmf-data` names it in `core:dataset`; a WAV file's sidecar also
//! gives `core:header_bytes` (where the samples start) and
//! `core:trailing_bytes`. The sidecar name is chosen before anything is written,
//! so a refusal (another capture's sidecar in the way) leaves no file behind.

use crate::atomic::{AtomicFile, WriteError};
use std::fs::File;
use std::io::Write;
use std::path::{Path, PathBuf};

use super::{
    sigmf, wav, wav_equivalent, CaptureError, Container, SampleFormat, SigmfAnnotation,
    UnsignedZero, WavEncoding,
};
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
    /// Also write a SigMF sidecar beside the file (any raw layout; WAV except
    /// 24-bit PCM, which has no SigMF datatype).
    pub sigmf_sidecar: bool,
    /// Free text for the sidecar's `core:description`.
    pub description: Option<String>,
    /// Annotations for the sidecar.
    pub annotations: Vec<SigmfAnnotation>,
    /// Zero point of the unsigned datatypes.
    pub unsigned_zero: UnsignedZero,
}

impl WriteSpec {
    /// A spec with no sidecar, description or annotations.
    pub fn new(container: Container, sample_rate_hz: f64) -> WriteSpec {
        WriteSpec {
            container,
            sample_rate_hz,
            center_freq_hz: None,
            sigmf_sidecar: false,
            description: None,
            annotations: Vec::new(),
            unsigned_zero: UnsignedZero::default(),
        }
    }
}

/// What was written.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct WriteStats {
    /// Complex samples written.
    pub samples: u64,
    /// Samples with I or Q at full scale (clamped codes; floats `|x| ≥ 1`).
    pub clipped: u64,
    /// The sidecar written, if any.
    pub sidecar: Option<PathBuf>,
}

/// Quantise one component to an integer code range.
#[inline(always)]
fn quant(x: f32, scale: f64, mid: f64, lo: i64, hi: i64) -> (i64, bool) {
    // Saturating cast; NaN → 0. Computed in f64 so 32-bit codes round exactly.
    let v = (f64::from(x) * scale + mid).round();
    let c = (v as i64).clamp(lo, hi);
    (c, c == lo || c == hi)
}

/// Append the raw byte encoding of `samples` in `format` to `out` (unsigned
/// zero point: the default); returns the number of clipped samples (see the
/// module doc).
pub fn encode_raw(samples: &[Cf32], format: SampleFormat, out: &mut Vec<u8>) -> u64 {
    encode_raw_with(samples, format, UnsignedZero::default(), out)
}

/// [`encode_raw`] with the given unsigned zero point.
pub fn encode_raw_with(
    samples: &[Cf32],
    format: SampleFormat,
    zero: UnsignedZero,
    out: &mut Vec<u8>,
) -> u64 {
    out.reserve(samples.len() * format.bytes_per_sample());
    let big = format.name().ends_with("_be");
    let w = format.component_bytes();
    let bits = 8 * w as u32;
    // Integer code range, scale and offset of this layout.
    let (scale, mid, lo, hi) = if format.is_unsigned() {
        let z = zero.zero_point(bits);
        (z, z, 0i64, ((1u64 << bits) - 1) as i64)
    } else {
        let half = (1i64 << (bits - 1)) as f64;
        (half, 0.0, -(1i64 << (bits - 1)), (1i64 << (bits - 1)) - 1)
    };
    let put_int = |code: i64, out: &mut Vec<u8>| {
        let le = (code as u64).to_le_bytes();
        if big {
            out.extend(le[..w].iter().rev());
        } else {
            out.extend_from_slice(&le[..w]);
        }
    };
    let mut clipped = 0u64;
    for s in samples {
        let c = if format.is_float() {
            for v in [s.re, s.im] {
                match (w, big) {
                    (4, false) => out.extend_from_slice(&v.to_le_bytes()),
                    (4, true) => out.extend_from_slice(&v.to_be_bytes()),
                    (_, false) => out.extend_from_slice(&f64::from(v).to_le_bytes()),
                    (_, true) => out.extend_from_slice(&f64::from(v).to_be_bytes()),
                }
            }
            s.re.abs() >= 1.0 || s.im.abs() >= 1.0
        } else {
            let (i, ci) = quant(s.re, scale, mid, lo, hi);
            let (q, cq) = quant(s.im, scale, mid, lo, hi);
            put_int(i, out);
            put_int(q, out);
            ci || cq
        };
        clipped += u64::from(c);
    }
    clipped
}

/// Write `samples` to `path` as `spec` says, atomically; optionally also a
/// SigMF sidecar (see the module doc for its name and contents; [`Capture::open`]
/// finds it again).
///
/// [`Capture::open`]: super::Capture::open
pub fn write_capture(
    path: &Path,
    samples: &[Cf32],
    spec: &WriteSpec,
) -> Result<WriteStats, CaptureError> {
    if !(spec.sample_rate_hz.is_finite() && spec.sample_rate_hz > 0.0) {
        return Err(CaptureError::BadWriteSpec {
            path: path.to_path_buf(),
            problem: format!("sample rate {} Hz is not positive", spec.sample_rate_hz),
        });
    }
    let sidecar_datatype = match spec.container {
        Container::Raw(f) => f,
        Container::Wav(enc) => match wav_equivalent(enc) {
            Some(f) => f,
            None if spec.sigmf_sidecar => {
                return Err(CaptureError::BadWriteSpec {
                    path: path.to_path_buf(),
                    problem: format!(
                    "no SigMF datatype stores {enc} samples; choose another format or no sidecar"
                ),
                })
            }
            None => SampleFormat::Cf32Le,
        },
    };
    let meta_path = if spec.sigmf_sidecar {
        Some(sigmf::choose_sidecar_path(path)?)
    } else {
        None
    };
    let clipped = match spec.container {
        Container::Raw(format) => atomic_write(path, |w| {
            let mut buf = Vec::with_capacity(CHUNK * format.bytes_per_sample());
            let mut clipped = 0;
            for chunk in samples.chunks(CHUNK) {
                buf.clear();
                clipped += encode_raw_with(chunk, format, spec.unsigned_zero, &mut buf);
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
    if let Some(meta) = &meta_path {
        let (header_bytes, trailing_bytes) = match spec.container {
            Container::Raw(_) => (0, 0),
            Container::Wav(_) => {
                // Where the writer put the samples: read the header back.
                let mut f = File::open(path).map_err(|source| CaptureError::Write {
                    path: path.to_path_buf(),
                    source,
                })?;
                let len = f
                    .metadata()
                    .map_err(|source| CaptureError::Write {
                        path: path.to_path_buf(),
                        source,
                    })?
                    .len();
                let l = wav::read_header(&mut f, path, len)?;
                (l.data_offset, len - l.data_offset - l.data_bytes)
            }
        };
        let conforming = sigmf::has_extension(path, "sigmf-data");
        let doc = sigmf::sidecar_document(&sigmf::SidecarSpec {
            datatype: sidecar_datatype,
            sample_rate_hz: spec.sample_rate_hz,
            center_freq_hz: spec.center_freq_hz,
            description: spec.description.as_deref(),
            dataset: (!conforming).then(|| {
                path.file_name()
                    .map(|n| n.to_string_lossy().into_owned())
                    .unwrap_or_default()
            }),
            header_bytes,
            trailing_bytes,
            annotations: &spec.annotations,
        });
        let text = sigmf::document_text(&doc);
        atomic_write(meta, |w| w.write_all(text.as_bytes()))?;
    }
    Ok(WriteStats {
        samples: samples.len() as u64,
        clipped,
        sidecar: meta_path,
    })
}

const CHUNK: usize = 1 << 14;

/// A 2-channel 64-bit IEEE float WAV (format tag 3, 18-byte fmt chunk,
/// `fact` chunk, as the RIFF/WAVE format defines for non-PCM data). Sizes
/// past the 32-bit RIFF limit are refused.
fn write_wav_f64(w: &mut AtomicFile, samples: &[Cf32], rate: u32) -> std::io::Result<u64> {
    let data = samples.len() as u64 * 16;
    let riff = 4 + (8 + 18) + (8 + 4) + 8 + data;
    let (Ok(riff), Ok(data32), Ok(frames)) = (
        u32::try_from(riff),
        u32::try_from(data),
        u32::try_from(samples.len()),
    ) else {
        return Err(std::io::Error::other(
            "too long for a RIFF WAV (4 GiB); write a raw format",
        ));
    };
    w.write_all(b"RIFF")?;
    w.write_all(&riff.to_le_bytes())?;
    w.write_all(b"WAVEfmt ")?;
    w.write_all(&18u32.to_le_bytes())?;
    w.write_all(&3u16.to_le_bytes())?; // WAVE_FORMAT_IEEE_FLOAT
    w.write_all(&2u16.to_le_bytes())?;
    w.write_all(&rate.to_le_bytes())?;
    w.write_all(&(u64::from(rate) as u32).wrapping_mul(16).to_le_bytes())?;
    w.write_all(&16u16.to_le_bytes())?;
    w.write_all(&64u16.to_le_bytes())?;
    w.write_all(&0u16.to_le_bytes())?; // cbSize
    w.write_all(b"fact")?;
    w.write_all(&4u32.to_le_bytes())?;
    w.write_all(&frames.to_le_bytes())?;
    w.write_all(b"data")?;
    w.write_all(&data32.to_le_bytes())?;
    let mut clipped = 0u64;
    for s in samples {
        w.write_all(&f64::from(s.re).to_le_bytes())?;
        w.write_all(&f64::from(s.im).to_le_bytes())?;
        clipped += u64::from(s.re.abs() >= 1.0 || s.im.abs() >= 1.0);
    }
    Ok(clipped)
}

/// Encode a 2-channel WAV through hound (the independent WAV writer); 64-bit
/// float, which hound does not write, by [`write_wav_f64`].
fn write_wav(
    w: &mut AtomicFile,
    samples: &[Cf32],
    enc: WavEncoding,
    rate: u32,
) -> std::io::Result<u64> {
    if enc == WavEncoding::Float64 {
        return write_wav_f64(w, samples, rate);
    }
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
    let (scale, lo, hi): (f64, i64, i64) = match enc {
        WavEncoding::Pcm8 => (128.0, -128, 127),
        WavEncoding::Pcm16 => (32768.0, -32768, 32767),
        WavEncoding::Pcm24 => (8_388_608.0, -(1 << 23), (1 << 23) - 1),
        WavEncoding::Pcm32 | WavEncoding::Float32 | WavEncoding::Float64 => {
            (2_147_483_648.0, i32::MIN.into(), i32::MAX.into())
        }
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
            wr.write_sample(i as i32).map_err(to_io)?;
            wr.write_sample(q as i32).map_err(to_io)?;
        }
    }
    wr.finalize().map_err(to_io)?;
    Ok(clipped)
}

/// Write through `f` into a [`crate::atomic::AtomicFile`] beside `path`: the
/// target appears whole or not at all, and on any error the temporary file is
/// removed.
pub(crate) fn atomic_write<T>(
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
                // The reader's scaling applied to the clamped, rounded code.
                let bits = 8 * f.component_bytes() as i32;
                let q = |x: f32| -> f32 {
                    if f.is_float() {
                        return x;
                    }
                    let (z, mid, lo, hi) = if f.is_unsigned() {
                        let z = UnsignedZero::default().zero_point(bits as u32);
                        (z, z, 0.0, 2f64.powi(bits) - 1.0)
                    } else {
                        let h = 2f64.powi(bits - 1);
                        (h, 0.0, -h, h - 1.0)
                    };
                    let code = (f64::from(x) * z + mid).round().clamp(lo, hi);
                    ((code - mid) / z) as f32
                };
                let expect = Cf32::new(q(a.re), q(a.im));
                assert_eq!(*b, expect, "{f} sample {k}");
            }
        }
    }

    #[test]
    fn atomic_write_leaves_no_temporary_file_and_sidecar_is_refused_for_pcm24_wav() {
        let dir = tempfile::tempdir().unwrap();
        let dir = dir.path();
        let p = dir.join("t.cf32");
        let spec = WriteSpec {
            center_freq_hz: Some(1e9),
            sigmf_sidecar: true,
            ..WriteSpec::new(Container::Raw(SampleFormat::Cf32Le), 1e6)
        };
        let st = write_capture(&p, &[Cf32::new(0.1, 0.2)], &spec).unwrap();
        assert_eq!(st.samples, 1);
        assert_eq!(
            st.sidecar.as_deref(),
            Some(dir.join("t.sigmf-meta").as_path())
        );
        let names: Vec<_> = std::fs::read_dir(dir)
            .unwrap()
            .map(|e| e.unwrap().file_name().into_string().unwrap())
            .collect();
        assert!(names.iter().all(|n| !n.ends_with(".tmp")), "{names:?}");
        let wav = WriteSpec {
            container: Container::Wav(WavEncoding::Pcm24),
            ..spec
        };
        let e = write_capture(&dir.join("t.wav"), &[], &wav).unwrap_err();
        assert!(e.to_string().contains("pcm24"), "{e}");
        assert!(!dir.join("t.wav").exists());
    }

    #[test]
    fn a_second_capture_of_the_same_name_gets_its_own_sidecar_and_a_third_is_refused() {
        let dir = tempfile::tempdir().unwrap();
        let dir = dir.path();
        let spec = |f| WriteSpec {
            sigmf_sidecar: true,
            ..WriteSpec::new(Container::Raw(f), 1e6)
        };
        let s = [Cf32::new(0.5, -0.5)];
        let a = write_capture(&dir.join("a.ci16"), &s, &spec(SampleFormat::Ci16Le)).unwrap();
        assert_eq!(a.sidecar, Some(dir.join("a.sigmf-meta")));
        let b = write_capture(&dir.join("a.cf32"), &s, &spec(SampleFormat::Cf32Le)).unwrap();
        assert_eq!(b.sidecar, Some(dir.join("a.cf32.sigmf-meta")));
        // Writing a.ci16 again replaces its own sidecar.
        let a2 = write_capture(&dir.join("a.ci16"), &s, &spec(SampleFormat::Ci16Le)).unwrap();
        assert_eq!(a2.sidecar, Some(dir.join("a.sigmf-meta")));
        // A third file whose both names are taken by others is refused, and
        // nothing is written.
        std::fs::write(
            dir.join("a.cu8.sigmf-meta"),
            r#"{"global":{"core:datatype":"cu8","core:dataset":"other.cu8"}}"#,
        )
        .unwrap();
        let e = write_capture(&dir.join("a.cu8"), &s, &spec(SampleFormat::Cu8)).unwrap_err();
        assert!(matches!(e, CaptureError::SidecarTaken { .. }), "{e}");
        assert!(e.to_string().contains("a.ci16"), "{e}");
        assert!(!dir.join("a.cu8").exists());
        // Each file opens with its own sidecar's datatype.
        for (name, f) in [
            ("a.ci16", SampleFormat::Ci16Le),
            ("a.cf32", SampleFormat::Cf32Le),
        ] {
            let c = Capture::open(&dir.join(name), &Default::default()).unwrap();
            assert_eq!(c.container(), Container::Raw(f), "{name}");
            assert_eq!(c.format_source(), super::super::FormatSource::Sigmf);
        }
    }
}
