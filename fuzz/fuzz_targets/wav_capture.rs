//! Fuzz target: the WAV reader (`Capture::from_wav_bytes`) on arbitrary bytes.
//!
//! Asserts, when the header is accepted: at least one sample; the samples lie
//! inside the buffer (`data_offset + len·bytes_per_sample ≤ bytes`); the count
//! agrees with hound's own reader (values / 2 channels) wherever hound
//! accepts the file; every decoded sample is
//! finite and PCM samples stay within full scale ±1. When refused: a typed
//! capture error whose message names `<memory>`.
#![no_main]

use iqaudit::{Capture, Cf32, Container, WavEncoding};
use libfuzzer_sys::fuzz_target;

/// True when every chunk before the first `data` chunk has an even size (so the
/// RIFF pad-byte rule cannot make two chunk walkers disagree).
fn even_chunks_before_data(b: &[u8]) -> bool {
    let mut at = 12usize;
    while at + 8 <= b.len() {
        let size = u32::from_le_bytes([b[at + 4], b[at + 5], b[at + 6], b[at + 7]]) as usize;
        if &b[at..at + 4] == b"data" {
            return true;
        }
        if size % 2 == 1 {
            return false;
        }
        at = match at.checked_add(8 + size) {
            Some(n) => n,
            None => return true,
        };
    }
    true
}

fuzz_target!(|data: &[u8]| {
    match Capture::from_wav_bytes(data.to_vec()) {
        Ok(cap) => {
            let bps = cap.container().bytes_per_sample() as u64;
            assert!(cap.len() >= 1);
            assert!(cap.data_offset_bytes() + cap.len() as u64 * bps <= data.len() as u64);
            // hound is the independent reader where it accepts the file; it
            // refuses 64-bit float, RF64/BW64 and headers whose byte rate or
            // block alignment fields disagree with the rest (which this reader
            // tolerates, as most readers do: only the data layout is used). It
            // also walks past an odd-sized chunk without the RIFF pad byte, so
            // the two readers are compared only on chunk lists of even sizes.
            let hound = hound::WavReader::new(std::io::Cursor::new(data));
            if let (Ok(r), true) = (hound, even_chunks_before_data(data)) {
                assert_eq!(cap.len() as u64, u64::from(r.len()) / 2);
            }
            let pcm = !matches!(
                cap.container(),
                Container::Wav(WavEncoding::Float32 | WavEncoding::Float64)
            );
            let mut buf = vec![Cf32::new(0.0, 0.0); cap.len().min(1 << 16)];
            let st = cap.read_into(0, &mut buf).expect("in-range read");
            assert!(st.non_finite <= buf.len() as u64);
            for s in &buf {
                assert!(s.re.is_finite() && s.im.is_finite());
                if pcm {
                    assert!(s.re.abs() <= 1.0 && s.im.abs() <= 1.0, "{s}");
                }
            }
        }
        Err(e) => {
            assert!(e.to_string().starts_with("<memory>: "), "{e}");
        }
    }
});
