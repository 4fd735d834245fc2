//! In-cache decode kernel benchmark (not a test; `cargo bench --bench decode`).
//!
//! Takes in: env `N` (samples per call, default 32768 — the buffers stay in
//! L2 so the figure is the decoder's own speed, not the memory system's).
//! Gives out: for each raw format, the best of 3000 calls of
//! `Capture::read_into` on an in-memory capture of pseudo-random codes, in
//! millions of samples per second and ns per sample. The minimum over many
//! short calls is robust to other load on the machine. Page-cache figures are
//! in `capture_throughput`.

use iqaudit::{Capture, Cf32, SampleFormat};
use std::time::Instant;

fn main() {
    let n: usize = std::env::var("N")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(1 << 15);
    for f in [
        SampleFormat::Ci16Le,
        SampleFormat::Ci16Be,
        SampleFormat::Ci8,
        SampleFormat::Cu8,
        SampleFormat::Cf32Le,
        SampleFormat::Cf32Be,
        SampleFormat::Cf64Le,
    ] {
        let bps = f.bytes_per_sample();
        let mut bytes = vec![0u8; n * bps];
        let mut s = 0x1234_5678_9abc_def1u64;
        for (i, b) in bytes.iter_mut().enumerate() {
            s ^= s << 13;
            s ^= s >> 7;
            s ^= s << 17;
            *b = s as u8;
            // Floats: force a small exponent so the values are ordinary and finite.
            match f {
                SampleFormat::Cf32Le if i % 4 == 3 => *b = 0x3e,
                SampleFormat::Cf32Be if i % 4 == 0 => *b = 0x3e,
                SampleFormat::Cf64Le if i % 8 == 7 => *b = 0x3f,
                _ => {}
            }
        }
        let cap = Capture::from_bytes(bytes, f);
        let mut out = vec![Cf32::default(); n];
        let mut best = f64::MAX;
        for _ in 0..3000 {
            let t = Instant::now();
            cap.read_into(0, &mut out).unwrap();
            best = best.min(t.elapsed().as_secs_f64());
            std::hint::black_box(&out);
        }
        println!(
            "{:8} {:7.0} M samples/s  ({:.2} ns/sample)",
            f.name(),
            n as f64 / best / 1e6,
            best / n as f64 * 1e9
        );
    }
}
