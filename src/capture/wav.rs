//! WAV header handling: `hound` validates the header, we take the data offset
//! and decode the data chunk ourselves (STYLE §8).
//!
//! Takes in: a seekable byte stream positioned at the start of a RIFF/WAVE file
//! and its total length in bytes. Gives out: a [`WavLayout`] — the encoding, the
//! sample rate in Hz, the byte offset of the first sample and the byte length of
//! the data chunk. Requires exactly 2 channels (channel 0 = I, channel 1 = Q:
//! common practice, shared/REFERENCE-VALUES.md §11) and 8/16/24/32-bit PCM or
//! 32-bit float in a container of exactly bits/8 bytes.

use std::io::{Read, Seek, SeekFrom};
use std::path::Path;

use super::{CaptureError, WavEncoding};

/// Where and how the samples of a WAV file are stored.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct WavLayout {
    /// Sample encoding.
    pub encoding: WavEncoding,
    /// Frames per second from the header.
    pub sample_rate_hz: u32,
    /// Byte offset of the first sample (start of the data chunk's payload).
    pub data_offset: u64,
    /// Declared length of the data chunk in bytes (checked against the file).
    pub data_bytes: u64,
}

impl WavLayout {
    /// Bytes per complex sample (one frame of two channels).
    pub fn encoding_bytes(&self) -> u64 {
        2 * u64::from(self.encoding.bits() / 8)
    }
}

/// Validate the header with hound and locate the data chunk.
pub(crate) fn read_header<R: Read + Seek>(
    r: &mut R,
    path: &Path,
    total_len: u64,
) -> Result<WavLayout, CaptureError> {
    let header_err = |problem: String| CaptureError::WavHeader {
        path: path.to_path_buf(),
        problem,
    };
    r.seek(SeekFrom::Start(0))
        .map_err(|e| header_err(e.to_string()))?;
    let (spec, value_count) = {
        let reader = hound::WavReader::new(&mut *r).map_err(|e| header_err(hound_problem(e)))?;
        (reader.spec(), u64::from(reader.len()))
    };
    let data_offset = r.stream_position().map_err(|e| header_err(e.to_string()))?;
    if spec.channels != 2 {
        return Err(CaptureError::WavChannels {
            path: path.to_path_buf(),
            found: spec.channels,
        });
    }
    // The data chunk header ("data" + u32 size) sits just before the payload.
    let mut chunk = [0u8; 8];
    let declared = match data_offset.checked_sub(8) {
        Some(pos) => {
            r.seek(SeekFrom::Start(pos))
                .and_then(|_| r.read_exact(&mut chunk))
                .map_err(|e| header_err(e.to_string()))?;
            if &chunk[0..4] != b"data" {
                return Err(header_err("data chunk header not found".into()));
            }
            u64::from(u32::from_le_bytes([chunk[4], chunk[5], chunk[6], chunk[7]]))
        }
        None => return Err(header_err("data chunk header not found".into())),
    };
    let encoding = match (spec.sample_format, spec.bits_per_sample) {
        (hound::SampleFormat::Int, 8) => WavEncoding::Pcm8,
        (hound::SampleFormat::Int, 16) => WavEncoding::Pcm16,
        (hound::SampleFormat::Int, 24) => WavEncoding::Pcm24,
        (hound::SampleFormat::Int, 32) => WavEncoding::Pcm32,
        (hound::SampleFormat::Float, 32) => WavEncoding::Float32,
        (fmt, bits) => {
            return Err(CaptureError::WavEncoding {
                path: path.to_path_buf(),
                found: format!("{bits}-bit {fmt:?}"),
            })
        }
    };
    // The container width must equal bits/8 (e.g. 24-bit in 4-byte containers is
    // not supported); hound's value count tells us the width actually used.
    let width = u64::from(encoding.bits() / 8);
    if value_count > 0 && declared != value_count * width {
        return Err(CaptureError::WavEncoding {
            path: path.to_path_buf(),
            found: format!(
                "{}-bit samples in {}-byte containers",
                encoding.bits(),
                declared / value_count
            ),
        });
    }
    let available = total_len.saturating_sub(data_offset);
    if declared > available {
        return Err(CaptureError::WavDataSize {
            path: path.to_path_buf(),
            declared_bytes: declared,
            available_bytes: available,
        });
    }
    Ok(WavLayout {
        encoding,
        sample_rate_hz: spec.sample_rate,
        data_offset,
        data_bytes: declared,
    })
}

fn hound_problem(e: hound::Error) -> String {
    match e {
        hound::Error::IoError(io) if io.kind() == std::io::ErrorKind::UnexpectedEof => {
            "file ends inside the header (truncated)".to_string()
        }
        other => other.to_string(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::io::Cursor;

    fn wav_bytes(channels: u16, bits: u16, fmt: hound::SampleFormat, frames: usize) -> Vec<u8> {
        let spec = hound::WavSpec {
            channels,
            sample_rate: 48_000,
            bits_per_sample: bits,
            sample_format: fmt,
        };
        let mut cur = Cursor::new(Vec::new());
        {
            let mut w = hound::WavWriter::new(&mut cur, spec).unwrap();
            for k in 0..frames * channels as usize {
                match fmt {
                    hound::SampleFormat::Float => w.write_sample(k as f32 / 100.0).unwrap(),
                    hound::SampleFormat::Int => w.write_sample((k % 100) as i32).unwrap(),
                }
            }
            w.finalize().unwrap();
        }
        cur.into_inner()
    }

    // Source: hound (independent WAV writer) produces the header; the canonical
    // 44-byte header puts the data at offset 44 (RIFF/WAVE format, REFERENCE-VALUES §11).
    #[test]
    fn a_hound_written_16_bit_stereo_file_has_its_data_at_byte_44() {
        let b = wav_bytes(2, 16, hound::SampleFormat::Int, 10);
        let l = read_header(&mut Cursor::new(&b[..]), Path::new("x.wav"), b.len() as u64).unwrap();
        assert_eq!(l.data_offset, 44);
        assert_eq!(l.data_bytes, 40);
        assert_eq!(l.encoding, WavEncoding::Pcm16);
        assert_eq!(l.sample_rate_hz, 48_000);
    }

    #[test]
    fn mono_and_three_channel_files_are_refused_naming_the_channel_count() {
        for ch in [1u16, 3] {
            let b = wav_bytes(ch, 16, hound::SampleFormat::Int, 4);
            let e = read_header(&mut Cursor::new(&b[..]), Path::new("x.wav"), b.len() as u64)
                .unwrap_err();
            assert!(matches!(e, CaptureError::WavChannels { found, .. } if found == ch));
        }
    }

    #[test]
    fn a_data_chunk_longer_than_the_file_reports_both_sizes() {
        let b = wav_bytes(2, 16, hound::SampleFormat::Int, 10);
        let cut = &b[..b.len() - 6];
        let e =
            read_header(&mut Cursor::new(cut), Path::new("x.wav"), cut.len() as u64).unwrap_err();
        assert!(
            matches!(
                e,
                CaptureError::WavDataSize {
                    declared_bytes: 40,
                    available_bytes: 34,
                    ..
                }
            ),
            "{e}"
        );
    }

    #[test]
    fn every_header_truncation_is_an_error_never_a_panic() {
        let b = wav_bytes(2, 24, hound::SampleFormat::Int, 3);
        for n in 0..44 {
            let cut = &b[..n];
            assert!(read_header(&mut Cursor::new(cut), Path::new("x.wav"), n as u64).is_err());
        }
    }
}
