//! Byte-exact decoders from a capture's stored layout to [`Cf32`] samples.
//!
//! Takes in: a byte slice holding whole complex samples (I first, then Q) in one
//! [`Container`] layout, and a caller-owned output slice of the matching length.
//! Gives out: full-scale-1.0 samples plus [`ReadStats`] (clipped and non-finite
//! counts) for that range. No allocation, no per-sample branching on the format.
//!
//! Scaling (crate convention, see `src/lib.rs`): `ci16` and 16-bit PCM divide by
//! 32768, `ci8` by 128, `cu8` maps code `x` to `(x − 127.5)/127.5`, 8-bit WAV PCM
//! (unsigned, mid-scale 128 per the RIFF/WAVE format) maps `x` to `(x − 128)/128`,
//! 24-bit PCM divides by 2²³ and 32-bit PCM by 2³¹. A complex sample is *clipped*
//! when its I or Q sits at the most negative or most positive integer code; for
//! float layouts, when `|I| ≥ 1` or `|Q| ≥ 1` (at or beyond full scale).
//! A float sample with a non-finite I or Q is written as 0 and counted as
//! non-finite (and not as clipped).

use super::{Container, ReadStats, SampleFormat, WavEncoding};
use crate::Cf32;

/// Decode `out.len()` complex samples from `bytes` (exactly
/// `out.len() * container.bytes_per_sample()` bytes).
///
/// # Panics
/// If `bytes.len() != out.len() * container.bytes_per_sample()` (a programming
/// error in the caller, never an input error).
pub(crate) fn decode(container: Container, bytes: &[u8], out: &mut [Cf32]) -> ReadStats {
    let need = out.len() * container.bytes_per_sample();
    if bytes.len() != need {
        length_mismatch(bytes.len(), need);
    }
    match container {
        Container::Raw(SampleFormat::Cf32Le) => floats::<4>(bytes, out, f32::from_le_bytes),
        Container::Raw(SampleFormat::Cf32Be) => floats::<4>(bytes, out, f32::from_be_bytes),
        Container::Raw(SampleFormat::Cf64Le) => {
            floats::<8>(bytes, out, |b| f64::from_le_bytes(b) as f32)
        }
        Container::Raw(SampleFormat::Ci16Le) | Container::Wav(WavEncoding::Pcm16) => ints::<2>(
            bytes,
            out,
            |b| i16::from_le_bytes(b) as i32,
            -32768,
            32767,
            0.0,
            32768.0,
        ),
        Container::Raw(SampleFormat::Ci16Be) => ints::<2>(
            bytes,
            out,
            |b| i16::from_be_bytes(b) as i32,
            -32768,
            32767,
            0.0,
            32768.0,
        ),
        Container::Raw(SampleFormat::Ci8) => {
            ints::<1>(bytes, out, |b| b[0] as i8 as i32, -128, 127, 0.0, 128.0)
        }
        Container::Raw(SampleFormat::Cu8) => {
            ints::<1>(bytes, out, |b| b[0] as i32, 0, 255, 127.5, 127.5)
        }
        Container::Wav(WavEncoding::Pcm8) => {
            ints::<1>(bytes, out, |b| b[0] as i32, 0, 255, 128.0, 128.0)
        }
        Container::Wav(WavEncoding::Pcm24) => ints::<3>(
            bytes,
            out,
            // Sign-extend: place the three bytes in the top of an i32, shift back.
            |b| i32::from_le_bytes([0, b[0], b[1], b[2]]) >> 8,
            -(1 << 23),
            (1 << 23) - 1,
            0.0,
            8_388_608.0,
        ),
        Container::Wav(WavEncoding::Pcm32) => ints::<4>(
            bytes,
            out,
            i32::from_le_bytes,
            i32::MIN,
            i32::MAX,
            0.0,
            2_147_483_648.0,
        ),
        Container::Wav(WavEncoding::Float32) => floats::<4>(bytes, out, f32::from_le_bytes),
    }
}

#[cold]
#[inline(never)]
fn length_mismatch(found: usize, need: usize) -> ! {
    panic!("decode: {found} bytes given for an output needing {need}")
}

/// Integer layouts: `value = (code − mid) / div`; clipped at code `lo` or `hi`.
#[inline(always)]
fn ints<const W: usize>(
    bytes: &[u8],
    out: &mut [Cf32],
    read: impl Fn([u8; W]) -> i32,
    lo: i32,
    hi: i32,
    mid: f32,
    div: f32,
) -> ReadStats {
    let mut clipped = 0u64;
    let (mid, inv) = (mid, 1.0 / div);
    let exact = div.log2().fract() == 0.0;
    for (o, c) in out.iter_mut().zip(bytes.chunks_exact(2 * W)) {
        let mut a = [0u8; W];
        let mut b = [0u8; W];
        a.copy_from_slice(&c[..W]);
        b.copy_from_slice(&c[W..]);
        let (i, q) = (read(a), read(b));
        clipped += u64::from((i == lo) | (i == hi) | (q == lo) | (q == hi));
        // Power-of-two divisors: multiplying by the reciprocal is exact.
        *o = if exact {
            Cf32::new((i as f32 - mid) * inv, (q as f32 - mid) * inv)
        } else {
            Cf32::new((i as f32 - mid) / div, (q as f32 - mid) / div)
        };
    }
    ReadStats {
        clipped,
        non_finite: 0,
    }
}

/// Float layouts: non-finite → 0 and counted; `|x| ≥ 1` counted as clipped.
#[inline(always)]
fn floats<const W: usize>(
    bytes: &[u8],
    out: &mut [Cf32],
    read: impl Fn([u8; W]) -> f32,
) -> ReadStats {
    let mut stats = ReadStats::default();
    for (o, c) in out.iter_mut().zip(bytes.chunks_exact(2 * W)) {
        let mut a = [0u8; W];
        let mut b = [0u8; W];
        a.copy_from_slice(&c[..W]);
        b.copy_from_slice(&c[W..]);
        let (s, st) = check_float(Cf32::new(read(a), read(b)));
        stats.clipped += st.clipped;
        stats.non_finite += st.non_finite;
        *o = s;
    }
    stats
}

/// The float rule for one sample: returns the sample to use and its counts.
#[inline(always)]
pub(crate) fn check_float(s: Cf32) -> (Cf32, ReadStats) {
    // Branch-free so the loops around it vectorise.
    let finite = s.re.is_finite() & s.im.is_finite();
    let clip = (s.re.abs() >= 1.0) | (s.im.abs() >= 1.0);
    let v = if finite { s } else { Cf32::new(0.0, 0.0) };
    (
        v,
        ReadStats {
            clipped: u64::from(finite & clip),
            non_finite: u64::from(!finite),
        },
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    // Source: two's-complement and IEEE 754 byte layouts as the SigMF datatype
    // names define them (shared/REFERENCE-VALUES.md §10): "_le"/"_be" is the byte
    // order of each component, I before Q. Values below are hand-encoded bytes.
    #[test]
    fn ci16_le_and_be_decode_hand_encoded_bytes_with_scaling_by_32768() {
        // I = 0x4000 = 16384 → 0.5, Q = 0x8000 = −32768 → −1.0 (clipped code).
        let le = [0x00, 0x40, 0x00, 0x80];
        let be = [0x40, 0x00, 0x80, 0x00];
        let mut out = [Cf32::default(); 1];
        let st = decode(Container::Raw(SampleFormat::Ci16Le), &le, &mut out);
        assert_eq!(out[0], Cf32::new(0.5, -1.0));
        assert_eq!(st.clipped, 1);
        let st = decode(Container::Raw(SampleFormat::Ci16Be), &be, &mut out);
        assert_eq!(out[0], Cf32::new(0.5, -1.0));
        assert_eq!(st.clipped, 1);
    }

    #[test]
    fn cu8_maps_codes_0_and_255_to_minus_and_plus_full_scale_and_counts_them() {
        let mut out = [Cf32::default(); 2];
        let st = decode(
            Container::Raw(SampleFormat::Cu8),
            &[0, 255, 128, 127],
            &mut out,
        );
        assert_eq!(out[0], Cf32::new(-1.0, 1.0));
        assert_eq!(out[1], Cf32::new(0.5 / 127.5, -0.5 / 127.5));
        assert_eq!(st.clipped, 1);
    }

    #[test]
    fn pcm24_sign_extends_the_top_byte() {
        // 0xFFFFFF = −1, 0x800000 = −8388608 (most negative code → clipped).
        let bytes = [0xFF, 0xFF, 0xFF, 0x00, 0x00, 0x80];
        let mut out = [Cf32::default(); 1];
        let st = decode(Container::Wav(WavEncoding::Pcm24), &bytes, &mut out);
        assert_eq!(out[0], Cf32::new(-1.0 / 8_388_608.0, -1.0));
        assert_eq!(st.clipped, 1);
    }

    #[test]
    fn non_finite_float_samples_become_zero_and_are_counted_not_clipped() {
        let mut bytes = Vec::new();
        for v in [f32::NAN, 0.25, 0.5, f32::INFINITY, 0.125, -0.25, 1.0, 0.0] {
            bytes.extend_from_slice(&v.to_le_bytes());
        }
        let mut out = [Cf32::default(); 4];
        let st = decode(Container::Raw(SampleFormat::Cf32Le), &bytes, &mut out);
        assert_eq!(out[0], Cf32::new(0.0, 0.0));
        assert_eq!(out[1], Cf32::new(0.0, 0.0));
        assert_eq!(out[2], Cf32::new(0.125, -0.25));
        assert_eq!(out[3], Cf32::new(1.0, 0.0));
        assert_eq!((st.non_finite, st.clipped), (2, 1));
    }

    #[test]
    fn empty_input_decodes_to_nothing() {
        let mut out: [Cf32; 0] = [];
        let st = decode(Container::Raw(SampleFormat::Cf64Le), &[], &mut out);
        assert_eq!(st, ReadStats::default());
    }
}
