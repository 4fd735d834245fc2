//! Byte-exact decoders from a capture's stored layout to [`Cf32`] samples.
//!
//! Takes in: a byte slice holding whole complex samples (I first, then Q) in one
//! [`Container`] layout, and a caller-owned output slice of the matching length.
//! Gives out: full-scale-1.0 samples plus [`ReadStats`] (clipped and non-finite
//! counts) for that range. No allocation, no per-sample branching on the format.
//!
//! Scaling (crate convention, see `src/lib.rs`): signed integers divide by
//! 2^(bits−1) (`ci8` by 128, `ci16` and 16-bit PCM by 32768, `ci32` and 32-bit
//! PCM by 2³¹, 24-bit PCM by 2²³); unsigned SigMF integers (`cu8`, `cu16_*`,
//! `cu32_*`) map code `x` to `(x − z)/z` with the zero point `z` of
//! [`UnsignedZero`] (default (2^bits − 1)/2, e.g. 127.5; or 2^(bits−1));
//! 8-bit WAV PCM (unsigned, mid-scale 128 per the RIFF/WAVE format) maps `x` to
//! `(x − 128)/128`. 32-bit unsigned codes are scaled in `f64` and rounded to
//! `f32` once. A complex sample is *clipped* when its I or Q sits at the most
//! negative or most positive integer code; for float layouts, when `|I| ≥ 1` or
//! `|Q| ≥ 1` (at or beyond full scale). A float sample with a non-finite I or Q
//! is written as 0 and counted as non-finite (and not as clipped); `f64`
//! components are rounded to `f32` (values beyond the `f32` range become ±∞ and
//! so count as non-finite).

use super::{Container, ReadStats, SampleFormat, UnsignedZero, WavEncoding};
use crate::Cf32;

/// [`decode_with`] with the default unsigned zero point.
///
/// # Panics
/// As [`decode_with`].
#[cfg(test)]
pub(crate) fn decode(container: Container, bytes: &[u8], out: &mut [Cf32]) -> ReadStats {
    decode_with(container, UnsignedZero::default(), bytes, out)
}

/// Decode `out.len()` complex samples from `bytes` (exactly
/// `out.len() * container.bytes_per_sample()` bytes); `zero` applies to the
/// unsigned SigMF datatypes only.
///
/// # Panics
/// If `bytes.len() != out.len() * container.bytes_per_sample()` (a programming
/// error in the caller, never an input error).
pub(crate) fn decode_with(
    container: Container,
    zero: UnsignedZero,
    bytes: &[u8],
    out: &mut [Cf32],
) -> ReadStats {
    let bps = container.bytes_per_sample();
    let need = out.len() * bps;
    if bytes.len() != need {
        length_mismatch(bytes.len(), need);
    }
    // Block by block, each block's bytes touched first (see `touch_bytes`).
    // Block boundaries are whole samples and multiples of the block size, so the
    // alignment seen by the typed fast paths is that of `bytes` itself.
    let mut stats = ReadStats::default();
    for (b, o) in bytes.chunks(BLOCK * bps).zip(out.chunks_mut(BLOCK)) {
        touch_bytes(b);
        let st = decode_block(container, zero, b, o);
        stats.clipped += st.clipped;
        stats.non_finite += st.non_finite;
    }
    stats
}

/// Read one byte of every cache line of `b` in a light loop of independent
/// loads before the decode loop runs on it: on a memory-mapped capture this
/// streams the block in at the memory's speed (many loads in flight), where
/// the heavier decode loop alone leaves its loads waiting (measured on the
/// development VM: cf32 from a cached map 234 → 440 M samples/s).
#[inline(always)]
fn touch_bytes(b: &[u8]) {
    let mut acc = 0u8;
    for line in b.chunks(64) {
        acc ^= line[0];
    }
    std::hint::black_box(acc);
}

/// The scale of an unsigned `bits`-bit SigMF datatype under `zero`.
fn unsigned_scale(bits: u32, zero: UnsignedZero) -> IntScale {
    let z = zero.zero_point(bits) as f32;
    IntScale {
        lo: 0,
        hi: ((1u64 << bits) - 1) as i32,
        mid: z,
        div: z,
    }
}

const I32: IntScale = IntScale {
    lo: i32::MIN,
    hi: i32::MAX,
    mid: 0.0,
    div: 2_147_483_648.0,
};

fn decode_block(
    container: Container,
    zero: UnsignedZero,
    bytes: &[u8],
    out: &mut [Cf32],
) -> ReadStats {
    match container {
        Container::Raw(SampleFormat::Cf32Le) | Container::Wav(WavEncoding::Float32) => {
            match bytemuck::try_cast_slice::<u8, [u32; 2]>(bytes) {
                Ok(words) if cfg!(target_endian = "little") => host_float_block(words, out),
                _ => floats::<4>(bytes, out, f32::from_le_bytes),
            }
        }
        Container::Raw(SampleFormat::Cf32Be) => {
            match bytemuck::try_cast_slice::<u8, [u32; 2]>(bytes) {
                Ok(words) => float_words(words, out, u32::from_be),
                _ => floats::<4>(bytes, out, f32::from_be_bytes),
            }
        }
        Container::Raw(SampleFormat::Cf64Le) | Container::Wav(WavEncoding::Float64) => {
            floats::<8>(bytes, out, |b| f64::from_le_bytes(b) as f32)
        }
        Container::Raw(SampleFormat::Cf64Be) => {
            floats::<8>(bytes, out, |b| f64::from_be_bytes(b) as f32)
        }
        Container::Raw(SampleFormat::Ci32Le) | Container::Wav(WavEncoding::Pcm32) => {
            ints::<4>(bytes, out, i32::from_le_bytes, I32)
        }
        Container::Raw(SampleFormat::Ci32Be) => ints::<4>(bytes, out, i32::from_be_bytes, I32),
        Container::Raw(SampleFormat::Ci16Le) | Container::Wav(WavEncoding::Pcm16) => {
            int_pairs::<2>(bytes, out, |b| i16::from_le_bytes(b) as i32, I16)
        }
        Container::Raw(SampleFormat::Ci16Be) => {
            int_pairs::<2>(bytes, out, |b| i16::from_be_bytes(b) as i32, I16)
        }
        Container::Raw(SampleFormat::Ci8) => int_pairs::<1>(
            bytes,
            out,
            |b| b[0] as i8 as i32,
            IntScale {
                lo: -128,
                hi: 127,
                mid: 0.0,
                div: 128.0,
            },
        ),
        Container::Raw(SampleFormat::Cu8) => {
            int_pairs::<1>(bytes, out, |b| b[0] as i32, unsigned_scale(8, zero))
        }
        Container::Raw(SampleFormat::Cu16Le) => int_pairs::<2>(
            bytes,
            out,
            |b| u16::from_le_bytes(b) as i32,
            unsigned_scale(16, zero),
        ),
        Container::Raw(SampleFormat::Cu16Be) => int_pairs::<2>(
            bytes,
            out,
            |b| u16::from_be_bytes(b) as i32,
            unsigned_scale(16, zero),
        ),
        Container::Raw(SampleFormat::Cu32Le) => {
            u32s(bytes, out, u32::from_le_bytes, zero.zero_point(32))
        }
        Container::Raw(SampleFormat::Cu32Be) => {
            u32s(bytes, out, u32::from_be_bytes, zero.zero_point(32))
        }
        Container::Wav(WavEncoding::Pcm8) => int_pairs::<1>(
            bytes,
            out,
            |b| b[0] as i32,
            IntScale {
                lo: 0,
                hi: 255,
                mid: 128.0,
                div: 128.0,
            },
        ),
        Container::Wav(WavEncoding::Pcm24) => ints::<3>(
            bytes,
            out,
            // Sign-extend: place the three bytes in the top of an i32, shift back.
            |b| i32::from_le_bytes([0, b[0], b[1], b[2]]) >> 8,
            IntScale {
                lo: -(1 << 23),
                hi: (1 << 23) - 1,
                mid: 0.0,
                div: 8_388_608.0,
            },
        ),
    }
}

/// 32-bit unsigned codes: `(x − zero)/zero` computed in `f64` (exact
/// subtraction, one rounding) and rounded to `f32`; clipped at 0 and 2³² − 1.
#[inline(always)]
fn u32s(bytes: &[u8], out: &mut [Cf32], read: impl Fn([u8; 4]) -> u32, zero: f64) -> ReadStats {
    let mut clipped = 0u64;
    for (o, c) in out.iter_mut().zip(bytes.chunks_exact(8)) {
        let i = read([c[0], c[1], c[2], c[3]]);
        let q = read([c[4], c[5], c[6], c[7]]);
        clipped += u64::from((i == 0) | (i == u32::MAX) | (q == 0) | (q == u32::MAX));
        *o = Cf32::new(
            ((f64::from(i) - zero) / zero) as f32,
            ((f64::from(q) - zero) / zero) as f32,
        );
    }
    ReadStats {
        clipped,
        non_finite: 0,
    }
}

/// How an integer layout maps to full scale: `value = (code − mid) / div`,
/// clipped at code `lo` or `hi`.
#[derive(Clone, Copy)]
struct IntScale {
    lo: i32,
    hi: i32,
    mid: f32,
    div: f32,
}

const I16: IntScale = IntScale {
    lo: -32768,
    hi: 32767,
    mid: 0.0,
    div: 32768.0,
};

/// Samples per block of the fast loops: counts are kept in `u32` lanes inside a
/// block (so the loop vectorises) and added to the `u64` totals after it.
const BLOCK: usize = 4096;

#[cold]
#[inline(never)]
fn length_mismatch(found: usize, need: usize) -> ! {
    panic!("decode: {found} bytes given for an output needing {need}")
}

/// Integer layouts from raw bytes (any alignment, any width): the general form.
#[inline(always)]
fn ints<const W: usize>(
    bytes: &[u8],
    out: &mut [Cf32],
    read: impl Fn([u8; W]) -> i32,
    k: IntScale,
) -> ReadStats {
    let mut clipped = 0u64;
    let inv = 1.0 / k.div;
    let exact = k.div.log2().fract() == 0.0;
    for (o, c) in out.iter_mut().zip(bytes.chunks_exact(2 * W)) {
        let mut a = [0u8; W];
        let mut b = [0u8; W];
        a.copy_from_slice(&c[..W]);
        b.copy_from_slice(&c[W..]);
        let (i, q) = (read(a), read(b));
        clipped += u64::from((i == k.lo) | (i == k.hi) | (q == k.lo) | (q == k.hi));
        // Power-of-two divisors: multiplying by the reciprocal is exact.
        *o = if exact {
            Cf32::new((i as f32 - k.mid) * inv, (q as f32 - k.mid) * inv)
        } else {
            Cf32::new((i as f32 - k.mid) / k.div, (q as f32 - k.mid) / k.div)
        };
    }
    ReadStats {
        clipped,
        non_finite: 0,
    }
}

/// Integer layouts of `W`-byte codes (`W` = 1 or 2), I then Q: the same
/// arithmetic as [`ints`], written as two straight loops per block so the
/// compiler vectorises both: the scaling runs over the flat run of components
/// (the same operation for I and Q), the clip count over whole samples (one
/// sample = one little-endian `2W`-byte word holding both codes). No per-sample
/// branch; counts in `u32` lanes inside a block.
#[inline(always)]
fn int_pairs<const W: usize>(
    bytes: &[u8],
    out: &mut [Cf32],
    read: impl Fn([u8; W]) -> i32 + Copy,
    k: IntScale,
) -> ReadStats {
    let mut clipped = 0u64;
    let inv = 1.0 / k.div;
    let exact = k.div.log2().fract() == 0.0;
    let flat: &mut [f32] = bytemuck::cast_slice_mut(out);
    for (o, b) in flat.chunks_mut(2 * BLOCK).zip(bytes.chunks(2 * W * BLOCK)) {
        let codes = b.chunks_exact(W).map(|c| {
            let mut a = [0u8; W];
            a.copy_from_slice(c);
            read(a) as f32 - k.mid
        });
        if exact {
            for (o, v) in o.iter_mut().zip(codes) {
                *o = v * inv;
            }
        } else {
            for (o, v) in o.iter_mut().zip(codes) {
                *o = v / k.div;
            }
        }
        let mut c = 0u32;
        for s in b.chunks_exact(2 * W) {
            let mut a = [0u8; W];
            let mut q = [0u8; W];
            a.copy_from_slice(&s[..W]);
            q.copy_from_slice(&s[W..]);
            let (i, q) = (read(a), read(q));
            c += u32::from((i == k.lo) | (i == k.hi) | (q == k.lo) | (q == k.hi));
        }
        clipped += u64::from(c);
    }
    ReadStats {
        clipped,
        non_finite: 0,
    }
}

/// `f32` (I, Q) pairs given as their IEEE 754 bit patterns (after `order` puts
/// the bytes in host order): the rule of [`check_float`] done on the bits, so
/// the loop vectorises. With `m = max(|I| bits, |Q| bits)` (sign cleared):
/// the sample is non-finite iff `m ≥ 0x7F80_0000` (exponent all ones: ±∞ or
/// NaN) and, when finite, clipped iff `m ≥ 0x3F80_0000` (the bits of 1.0; for
/// non-negative IEEE 754 floats the bit patterns order like the values).
#[inline(always)]
fn float_words(words: &[[u32; 2]], out: &mut [Cf32], order: impl Fn(u32) -> u32) -> ReadStats {
    let mut stats = ReadStats::default();
    let out_words: &mut [[u32; 2]] = bytemuck::cast_slice_mut(out);
    for (o, w) in out_words.chunks_mut(BLOCK).zip(words.chunks(BLOCK)) {
        let (mut clipped, mut non_finite) = (0u32, 0u32);
        for (o, &[a, b]) in o.iter_mut().zip(w) {
            let (a, b) = (order(a), order(b));
            let m = (a & 0x7FFF_FFFF).max(b & 0x7FFF_FFFF);
            let bad = u32::from(m >= 0x7F80_0000);
            let keep = bad.wrapping_sub(1); // all ones when finite, 0 when not
            *o = [a & keep, b & keep];
            non_finite += bad;
            clipped += u32::from(m >= 0x3F80_0000) & (bad ^ 1);
        }
        stats.clipped += u64::from(clipped);
        stats.non_finite += u64::from(non_finite);
    }
    stats
}

/// [`check_float`] over a slice of samples already in host order (the
/// zero-copy `cf32_le` view): same results, vectorised.
pub(crate) fn check_floats(src: &[Cf32], out: &mut [Cf32]) -> ReadStats {
    let n = src.len().min(out.len());
    let mut stats = ReadStats::default();
    for (s, o) in src[..n].chunks(BLOCK).zip(out[..n].chunks_mut(BLOCK)) {
        let st = host_float_block(bytemuck::cast_slice(s), o);
        stats.clipped += st.clipped;
        stats.non_finite += st.non_finite;
    }
    stats
}

/// Host-order `f32` (I, Q) pairs, one block: first one light vectorised pass
/// counting components that are not an ordinary value below full scale
/// (`!(|x| < 1)`: ±∞, NaN, `|x| ≥ 1`); when there are none — the usual case —
/// every sample is finite and unclipped, so the block is copied as it is (the
/// same bits [`float_words`] would give) with zero counts; otherwise the
/// block goes through [`float_words`]. The counting pass also streams the
/// block into cache at the memory's speed before the copy.
fn host_float_block(words: &[[u32; 2]], out: &mut [Cf32]) -> ReadStats {
    ordered_float_block(words, out, |w| w)
}

/// [`host_float_block`] for words whose bytes `order` puts in host order.
/// (Measured for `cf32_be` with a byte swap as `order`: slower than
/// [`float_words`] alone on SSE2, so only the identity is used.)
#[inline(always)]
fn ordered_float_block(
    words: &[[u32; 2]],
    out: &mut [Cf32],
    order: impl Fn(u32) -> u32 + Copy,
) -> ReadStats {
    let flat: &[u32] = bytemuck::cast_slice(words);
    let mut unusual = 0u32;
    for &w in flat {
        // `ordinary` is false for NaN as well as for |x| ≥ 1 and ±∞.
        let ordinary = f32::from_bits(order(w)).abs() < 1.0;
        unusual += u32::from(!ordinary);
    }
    if unusual == 0 {
        let o: &mut [u32] = bytemuck::cast_slice_mut(out);
        for (o, &w) in o.iter_mut().zip(flat) {
            *o = order(w);
        }
        ReadStats::default()
    } else {
        float_words(words, out, order)
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

    /// The obvious per-sample decoder, written from the format definitions
    /// (SigMF datatype names, RIFF/WAVE PCM; shared/REFERENCE-VALUES.md §10) with
    /// none of the fast paths: read one component at a time, scale, apply the
    /// clip and non-finite rules of the module doc.
    fn slow_decode(container: Container, bytes: &[u8]) -> (Vec<Cf32>, ReadStats) {
        slow_decode_with(container, UnsignedZero::Symmetric, bytes)
    }

    fn slow_decode_with(
        container: Container,
        zero: UnsignedZero,
        bytes: &[u8],
    ) -> (Vec<Cf32>, ReadStats) {
        let w = container.bytes_per_sample() / 2;
        let mut out = Vec::new();
        let mut st = ReadStats::default();
        // One component's bytes in big-endian order (most significant first).
        let be = |c: &[u8], big: bool| -> Vec<u8> {
            let mut v = c.to_vec();
            if !big {
                v.reverse();
            }
            v
        };
        for s in bytes.chunks_exact(2 * w) {
            let comp = |c: &[u8]| -> (f32, bool, bool) {
                // (value, clipped, finite)
                let (kind, big) = match container {
                    Container::Raw(f) => {
                        let kind = match f.family() {
                            "cf32" | "cf64" => 'f',
                            "ci32" | "ci16" | "ci8" => 'i',
                            _ => 'u',
                        };
                        (kind, f.name().ends_with("_be"))
                    }
                    Container::Wav(WavEncoding::Float32 | WavEncoding::Float64) => ('f', false),
                    Container::Wav(WavEncoding::Pcm8) => ('w', false),
                    Container::Wav(_) => ('i', false),
                };
                let b = be(c, big);
                match kind {
                    'f' => {
                        let v = if w == 4 {
                            f32::from_be_bytes([b[0], b[1], b[2], b[3]])
                        } else {
                            let mut a = [0u8; 8];
                            a.copy_from_slice(&b);
                            f64::from_be_bytes(a) as f32
                        };
                        (v, v.abs() >= 1.0, v.is_finite())
                    }
                    'i' => {
                        // Two's complement from the big-endian bytes.
                        let mut v: i64 = if b[0] & 0x80 != 0 { -1 } else { 0 };
                        for &x in &b {
                            v = (v << 8) | i64::from(x);
                        }
                        let bits = 8 * w as u32;
                        let half = 1i64 << (bits - 1);
                        (
                            (v as f64 / half as f64) as f32,
                            v == -half || v == half - 1,
                            true,
                        )
                    }
                    'u' => {
                        let mut v: u64 = 0;
                        for &x in &b {
                            v = (v << 8) | u64::from(x);
                        }
                        let bits = 8 * w as u32;
                        let z = zero.zero_point(bits);
                        (
                            ((v as f64 - z) / z) as f32,
                            v == 0 || v == (1u64 << bits) - 1,
                            true,
                        )
                    }
                    _ => {
                        let v = c[0];
                        ((v as f32 - 128.0) / 128.0, v == 0 || v == 255, true)
                    }
                }
            };
            let (i, ci, fi) = comp(&s[..w]);
            let (q, cq, fq) = comp(&s[w..]);
            if fi && fq {
                out.push(Cf32::new(i, q));
                st.clipped += u64::from(ci || cq);
            } else {
                out.push(Cf32::new(0.0, 0.0));
                st.non_finite += 1;
            }
        }
        (out, st)
    }

    #[test]
    fn every_layout_matches_the_per_sample_reference_decoder_bit_for_bit() {
        // Slow twin for the vectorised decoders: random bytes salted with the
        // edge codes (most negative/positive integers, ±1.0, ±∞, NaN, values
        // too large for f32), over sizes 0, 1, 2, 13, a block boundary ± 1 and
        // a misaligned start (the general, unaligned form).
        let containers: Vec<Container> = SampleFormat::ALL
            .into_iter()
            .map(Container::Raw)
            .chain(WavEncoding::ALL.into_iter().map(Container::Wav))
            .collect();
        let mut state = 0x2545_F491_4F6C_DD1Du64;
        let mut next = move || {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            state
        };
        for container in containers {
            let bps = container.bytes_per_sample();
            for n in [0usize, 1, 2, 13, BLOCK - 1, BLOCK, BLOCK + 1, 2 * BLOCK + 7] {
                // One spare byte in front so the same data can be read misaligned.
                let mut buf = vec![0u8; n * bps + 1];
                for b in buf.iter_mut() {
                    *b = next() as u8;
                }
                let w = bps / 2;
                for k in 0..n * 2 {
                    let at = 1 + k * w;
                    let salt = next() % 8;
                    let c = &mut buf[at..at + w];
                    match (salt, w) {
                        (0, 4) => c.copy_from_slice(&[0, 0, 0x80, 0x3F]), // 1.0 le
                        (1, 4) => c.copy_from_slice(&[0, 0, 0x80, 0x7F]), // +inf le
                        (2, 4) => c.copy_from_slice(&[1, 0, 0xC0, 0xFF]), // NaN le
                        (3, 4) => c.copy_from_slice(&[0, 0, 0x80, 0xBF]), // -1.0 le
                        (4, 4) => c.copy_from_slice(&[0x3F, 0x80, 0, 0]), // 1.0 be
                        (0, 8) => c.copy_from_slice(&1e300f64.to_le_bytes()),
                        (1, 8) => c.copy_from_slice(&f64::NAN.to_le_bytes()),
                        (2, 8) => c.copy_from_slice(&(-1.0f64).to_le_bytes()),
                        (3, 8) => c.copy_from_slice(&0.999_999_999f64.to_le_bytes()),
                        (0, _) => c.iter_mut().for_each(|b| *b = 0xFF),
                        (1, _) => c.iter_mut().for_each(|b| *b = 0),
                        (2, _) => {
                            c.iter_mut().for_each(|b| *b = 0);
                            c[w - 1] = 0x80; // most negative (le)
                        }
                        (3, _) => {
                            c.iter_mut().for_each(|b| *b = 0xFF);
                            c[w - 1] = 0x7F; // most positive (le)
                        }
                        (4, _) => {
                            c.iter_mut().for_each(|b| *b = 0);
                            c[0] = 0x80; // most negative (be) / mid-scale byte
                        }
                        (5, _) => {
                            c.iter_mut().for_each(|b| *b = 0xFF);
                            c[0] = 0x7F; // most positive (be)
                        }
                        _ => {}
                    }
                }
                for (start, zero) in [
                    (0usize, UnsignedZero::Symmetric),
                    (1, UnsignedZero::Symmetric),
                    (0, UnsignedZero::PowerOfTwo),
                ] {
                    let bytes = &buf[start..start + n * bps];
                    let (want, want_st) = slow_decode_with(container, zero, bytes);
                    let mut got = vec![Cf32::new(7.0, 7.0); n];
                    let got_st = decode_with(container, zero, bytes, &mut got);
                    assert_eq!(got_st, want_st, "{container:?} n={n} start={start}");
                    for (k, (g, w)) in got.iter().zip(&want).enumerate() {
                        assert!(
                            g.re.to_bits() == w.re.to_bits() && g.im.to_bits() == w.im.to_bits(),
                            "{container:?} {zero:?} n={n} start={start} sample {k}: {g} vs {w}"
                        );
                    }
                }
            }
        }
    }

    #[test]
    fn ordinary_float_blocks_take_the_copy_path_and_still_match_the_reference() {
        // Slow twin for the copy path of `host_float_block`: blocks of ordinary
        // values (|x| < 1, including ±0 and values just below 1), then one
        // clipped, one NaN and one exactly −1.0 sample placed in later blocks.
        let n = 3 * BLOCK + 5;
        let mut vals: Vec<f32> = (0..2 * n)
            .map(|k| ((k as f32 * 0.618_034).fract() - 0.5) * 1.999)
            .collect();
        vals[0] = -0.0;
        vals[1] = 0.999_999_94;
        let mut cases = vec![vals.clone()];
        let mut with_edges = vals;
        with_edges[2 * BLOCK + 3] = 1.5;
        with_edges[2 * (2 * BLOCK) + 1] = f32::NAN;
        with_edges[2 * (3 * BLOCK) + 2] = -1.0;
        cases.push(with_edges);
        for v in cases {
            let bytes: Vec<u8> = v.iter().flat_map(|x| x.to_le_bytes()).collect();
            let bytes_be: Vec<u8> = v.iter().flat_map(|x| x.to_be_bytes()).collect();
            let (want, want_st) = slow_decode(Container::Raw(SampleFormat::Cf32Be), &bytes_be);
            let mut got = vec![Cf32::new(7.0, 7.0); n];
            assert_eq!(
                decode(Container::Raw(SampleFormat::Cf32Be), &bytes_be, &mut got),
                want_st
            );
            for k in 0..n {
                assert_eq!(got[k].re.to_bits(), want[k].re.to_bits(), "be sample {k}");
                assert_eq!(got[k].im.to_bits(), want[k].im.to_bits(), "be sample {k}");
            }
            for c in [
                Container::Raw(SampleFormat::Cf32Le),
                Container::Wav(WavEncoding::Float32),
            ] {
                let (want, want_st) = slow_decode(c, &bytes);
                let mut got = vec![Cf32::new(7.0, 7.0); n];
                assert_eq!(decode(c, &bytes, &mut got), want_st);
                let samples: &[Cf32] = bytemuck::cast_slice(&v);
                let mut got_view = vec![Cf32::new(7.0, 7.0); n];
                assert_eq!(check_floats(samples, &mut got_view), want_st);
                for k in 0..n {
                    for g in [got[k], got_view[k]] {
                        assert_eq!(g.re.to_bits(), want[k].re.to_bits(), "sample {k}");
                        assert_eq!(g.im.to_bits(), want[k].im.to_bits(), "sample {k}");
                    }
                }
            }
        }
    }

    #[test]
    fn empty_input_decodes_to_nothing() {
        let mut out: [Cf32; 0] = [];
        let st = decode(Container::Raw(SampleFormat::Cf64Le), &[], &mut out);
        assert_eq!(st, ReadStats::default());
    }
}
