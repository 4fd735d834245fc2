//! Fuzz target: the raw capture reader on arbitrary bytes in every format.
//!
//! Takes in: byte 0 picks the format (mod 7) and byte 1 the chunk size; the
//! rest is the capture. Asserts: `len == bytes / bytes_per_sample` and the
//! remainder is `trailing_bytes`; chunked and whole reads agree; every decoded
//! sample is finite; the non-finite count equals an independent count of
//! non-finite float components; integer formats stay within full scale ±1;
//! a range past the end is an `OutOfRange` error.
#![no_main]

use iqaudit::{Capture, CaptureError, Cf32, SampleFormat};
use libfuzzer_sys::fuzz_target;

fn non_finite_reference(format: SampleFormat, bytes: &[u8]) -> u64 {
    let bps = format.bytes_per_sample();
    let whole = &bytes[..bytes.len() / bps * bps];
    whole
        .chunks_exact(bps)
        .filter(|s| {
            let (i, q) = s.split_at(bps / 2);
            let bad = |b: &[u8]| match format {
                SampleFormat::Cf32Le => !f32::from_le_bytes(b.try_into().unwrap()).is_finite(),
                SampleFormat::Cf32Be => !f32::from_be_bytes(b.try_into().unwrap()).is_finite(),
                // cf64 → f32: a finite f64 beyond f32 range becomes infinite too.
                SampleFormat::Cf64Le => {
                    !(f64::from_le_bytes(b.try_into().unwrap()) as f32).is_finite()
                }
                SampleFormat::Cf64Be => {
                    !(f64::from_be_bytes(b.try_into().unwrap()) as f32).is_finite()
                }
                _ => false,
            };
            bad(i) || bad(q)
        })
        .count() as u64
}

fuzz_target!(|data: &[u8]| {
    if data.len() < 2 {
        return;
    }
    let format = SampleFormat::ALL[usize::from(data[0]) % SampleFormat::ALL.len()];
    let chunk = usize::from(data[1]).max(1);
    let bytes = data[2..].to_vec();
    let bps = format.bytes_per_sample();
    let cap = Capture::from_bytes(bytes.clone(), format);
    assert_eq!(cap.len(), bytes.len() / bps);
    assert_eq!(cap.trailing_bytes(), bytes.len() % bps);

    let mut whole = vec![Cf32::new(0.0, 0.0); cap.len()];
    let st = cap.read_into(0, &mut whole).expect("in-range read");
    assert_eq!(st.non_finite, non_finite_reference(format, &bytes));
    assert!(st.clipped + st.non_finite <= cap.len() as u64);
    let integer = !format.is_float();
    for s in &whole {
        assert!(s.re.is_finite() && s.im.is_finite(), "{s}");
        if integer {
            assert!(s.re.abs() <= 1.0 && s.im.abs() <= 1.0, "{s}");
        }
    }
    // Chunked reads give the same samples and the same counts.
    let mut buf = vec![Cf32::new(0.0, 0.0); chunk];
    let (mut start, mut nf) = (0, 0);
    while start < cap.len() {
        let n = chunk.min(cap.len() - start);
        nf += cap
            .read_into(start, &mut buf[..n])
            .expect("chunk")
            .non_finite;
        assert_eq!(&buf[..n], &whole[start..start + n]);
        start += n;
    }
    assert_eq!(nf, st.non_finite);
    let mut one = [Cf32::new(0.0, 0.0)];
    assert!(matches!(
        cap.read_into(cap.len(), &mut one),
        Err(CaptureError::OutOfRange { .. })
    ));
});
