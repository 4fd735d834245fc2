//! Fuzz target: the WAV reader (`Capture::from_wav_bytes`) on arbitrary bytes.
//!
//! Asserts, when the header is accepted: at least one sample; the samples lie
//! inside the buffer (`data_offset + len·bytes_per_sample ≤ bytes`); the count
//! agrees with hound's own reader (values / 2 channels); every decoded sample is
//! finite and PCM samples stay within full scale ±1. When refused: a typed
//! capture error whose message names `<memory>`.
#![no_main]

use iqaudit::{Capture, Cf32, Container, WavEncoding};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    match Capture::from_wav_bytes(data.to_vec()) {
        Ok(cap) => {
            let bps = cap.container().bytes_per_sample() as u64;
            assert!(cap.len() >= 1);
            assert!(cap.data_offset_bytes() + cap.len() as u64 * bps <= data.len() as u64);
            let hound_len = hound::WavReader::new(std::io::Cursor::new(data))
                .map(|r| u64::from(r.len()) / 2)
                .expect("hound accepted the header a moment ago");
            assert_eq!(cap.len() as u64, hound_len);
            let pcm = !matches!(cap.container(), Container::Wav(WavEncoding::Float32));
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
