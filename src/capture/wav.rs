//! WAV header handling: parse the RIFF/WAVE chunk list, take the data offset and
//! decode the data chunk ourselves (STYLE §8, but see below).
//!
//! Takes in: a seekable byte stream positioned anywhere in a RIFF/WAVE, RF64 or
//! BW64 file and its total length in bytes. Gives out: a [`WavLayout`] — the
//! encoding, the sample rate in Hz, the byte offset of the first sample and the
//! byte length of the data chunk. Requires exactly 2 channels (channel 0 = I,
//! channel 1 = Q: common practice, shared/REFERENCE-VALUES.md §11) and 8/16/24/32-bit
//! PCM or 32/64-bit IEEE float (format tag 1 or 3, also inside
//! `WAVE_FORMAT_EXTENSIBLE`), each sample in a container of exactly bits/8 bytes.
//!
//! Why not `hound` (which STYLE §8 names, and which still writes our WAVs):
//! it reads neither 64-bit float nor RF64/BW64, and those are what long and
//! high-resolution recordings are stored as. The parser here follows the
//! RIFF/WAVE layout (Microsoft/IBM RIFF specification; `fmt `, `data`, odd
//! chunks padded to even length), RF64 (EBU Tech 3306: `RF64` tag, `ds64` chunk
//! first, 32-bit sizes of `0xFFFFFFFF` replaced by the 64-bit ones) and BW64
//! (ITU-R BS.2088: the same layout with the `BW64` tag). Every size is checked
//! against the file length before it is used; a file that cannot be parsed is
//! an error, never raw samples.

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
    /// Which header variant: `"RIFF"`, `"RF64"` or `"BW64"`.
    pub variant: &'static str,
}

impl WavLayout {
    /// Bytes per complex sample (one frame of two channels).
    pub fn encoding_bytes(&self) -> u64 {
        2 * u64::from(self.encoding.bits() / 8)
    }
}

/// Whether the stream starts like a WAV file (`RIFF`/`RF64`/`BW64` … `WAVE`);
/// the stream is rewound.
pub(crate) fn has_magic<R: Read + Seek>(r: &mut R) -> bool {
    matches!(magic(r), Some(m) if &m[8..12] == b"WAVE")
}

/// Whether the file opens with a RIFF-family chunk id (`RIFF`, `RF64`,
/// `BW64`), WAVE form or not. Such a file is a container, not raw samples,
/// unless the user says otherwise with `--format` or a sidecar does.
pub(crate) fn has_riff_prefix<R: Read + Seek>(r: &mut R) -> bool {
    magic(r).is_some()
}

fn magic<R: Read + Seek>(r: &mut R) -> Option<[u8; 12]> {
    let mut magic = [0u8; 12];
    let ok = r.rewind().is_ok() && r.read_exact(&mut magic).is_ok();
    let _ = r.rewind();
    (ok && matches!(&magic[0..4], b"RIFF" | b"RF64" | b"BW64")).then_some(magic)
}

/// The SubFormat GUID tail shared by the KSDATAFORMAT_SUBTYPE_* GUIDs of
/// `WAVE_FORMAT_EXTENSIBLE` (bytes 2..16; bytes 0..2 hold the format tag).
const SUBFORMAT_TAIL: [u8; 14] = [
    0x00, 0x00, 0x00, 0x00, 0x10, 0x00, 0x80, 0x00, 0x00, 0xAA, 0x00, 0x38, 0x9B, 0x71,
];

struct Fmt {
    tag: u16,
    channels: u16,
    sample_rate: u32,
    block_align: u16,
    bits: u16,
}

fn read_exact_at<R: Read + Seek>(r: &mut R, pos: u64, buf: &mut [u8]) -> std::io::Result<()> {
    r.seek(SeekFrom::Start(pos))?;
    r.read_exact(buf)
}

fn u16le(b: &[u8], at: usize) -> u16 {
    u16::from_le_bytes([b[at], b[at + 1]])
}

fn u32le(b: &[u8], at: usize) -> u32 {
    u32::from_le_bytes([b[at], b[at + 1], b[at + 2], b[at + 3]])
}

fn u64le(b: &[u8], at: usize) -> u64 {
    let mut a = [0u8; 8];
    a.copy_from_slice(&b[at..at + 8]);
    u64::from_le_bytes(a)
}

/// Parse the header and locate the data chunk.
pub(crate) fn read_header<R: Read + Seek>(
    r: &mut R,
    path: &Path,
    total_len: u64,
) -> Result<WavLayout, CaptureError> {
    let header_err = |problem: String| CaptureError::WavHeader {
        path: path.to_path_buf(),
        problem,
    };
    let truncated = || header_err("file ends inside the header (truncated)".into());
    let io_err = |e: std::io::Error| {
        if e.kind() == std::io::ErrorKind::UnexpectedEof {
            truncated()
        } else {
            header_err(e.to_string())
        }
    };
    let mut head = [0u8; 12];
    read_exact_at(r, 0, &mut head).map_err(io_err)?;
    let variant = match &head[0..4] {
        b"RIFF" => "RIFF",
        b"RF64" => "RF64",
        b"BW64" => "BW64",
        other => {
            return Err(header_err(format!(
                "no RIFF, RF64 or BW64 tag (found {:?}); not a WAV file",
                String::from_utf8_lossy(other)
            )))
        }
    };
    if &head[8..12] != b"WAVE" {
        return Err(header_err(format!(
            "{variant} file of form {:?}, not WAVE",
            String::from_utf8_lossy(&head[8..12])
        )));
    }
    let wide = variant != "RIFF";
    let mut ds64_data: Option<u64> = None;
    let mut fmt: Option<Fmt> = None;
    let mut pos = 12u64;
    let (data_offset, declared) = loop {
        let mut ch = [0u8; 8];
        if pos.checked_add(8).map_or(true, |e| e > total_len) {
            return Err(if fmt.is_none() {
                truncated()
            } else {
                header_err("no data chunk".into())
            });
        }
        read_exact_at(r, pos, &mut ch).map_err(io_err)?;
        let id = [ch[0], ch[1], ch[2], ch[3]];
        let size32 = u32le(&ch, 4);
        let body = pos + 8;
        match &id {
            b"ds64" => {
                if size32 < 24 || body + 24 > total_len {
                    return Err(header_err(format!(
                        "ds64 chunk of {size32} bytes is too short"
                    )));
                }
                let mut d = [0u8; 24];
                read_exact_at(r, body, &mut d).map_err(io_err)?;
                ds64_data = Some(u64le(&d, 8));
            }
            b"fmt " => {
                if size32 < 16 || body + 16 > total_len {
                    return Err(header_err(format!(
                        "fmt chunk of {size32} bytes is too short"
                    )));
                }
                let n = (size32 as usize).min(40);
                let mut f = vec![0u8; n];
                read_exact_at(r, body, &mut f).map_err(io_err)?;
                let mut tag = u16le(&f, 0);
                if tag == 0xFFFE {
                    if n < 40 {
                        return Err(header_err(format!(
                            "WAVE_FORMAT_EXTENSIBLE fmt chunk of {size32} bytes (40 needed)"
                        )));
                    }
                    if f[26..40] != SUBFORMAT_TAIL {
                        return Err(CaptureError::WavEncoding {
                            path: path.to_path_buf(),
                            found: "WAVE_FORMAT_EXTENSIBLE with a non-standard SubFormat GUID"
                                .into(),
                        });
                    }
                    tag = u16le(&f, 24);
                }
                fmt = Some(Fmt {
                    tag,
                    channels: u16le(&f, 2),
                    sample_rate: u32le(&f, 4),
                    block_align: u16le(&f, 12),
                    bits: u16le(&f, 14),
                });
            }
            b"data" => {
                if fmt.is_none() {
                    return Err(header_err("data chunk before the fmt chunk".into()));
                }
                let size = if wide && size32 == u32::MAX {
                    ds64_data.ok_or_else(|| {
                        header_err(format!(
                            "{variant} file without a ds64 chunk giving the data size"
                        ))
                    })?
                } else {
                    u64::from(size32)
                };
                break (body, size);
            }
            _ => {}
        }
        if wide && pos == 12 && &id != b"ds64" {
            return Err(header_err(format!(
                "{variant} file whose first chunk is not ds64"
            )));
        }
        // Chunks are padded to an even length.
        let size = u64::from(size32);
        pos = body + size + (size & 1);
    };
    let Some(fmt) = fmt else {
        return Err(header_err("no fmt chunk".into()));
    };
    if fmt.channels != 2 {
        return Err(CaptureError::WavChannels {
            path: path.to_path_buf(),
            found: fmt.channels,
        });
    }
    let encoding = match (fmt.tag, fmt.bits) {
        (1, 8) => WavEncoding::Pcm8,
        (1, 16) => WavEncoding::Pcm16,
        (1, 24) => WavEncoding::Pcm24,
        (1, 32) => WavEncoding::Pcm32,
        (3, 32) => WavEncoding::Float32,
        (3, 64) => WavEncoding::Float64,
        (1, bits) => {
            return Err(CaptureError::WavEncoding {
                path: path.to_path_buf(),
                found: format!("{bits}-bit PCM"),
            })
        }
        (3, bits) => {
            return Err(CaptureError::WavEncoding {
                path: path.to_path_buf(),
                found: format!("{bits}-bit float"),
            })
        }
        (tag, bits) => {
            return Err(CaptureError::WavEncoding {
                path: path.to_path_buf(),
                found: format!("format tag {tag:#06x} ({bits} bits; compressed?)"),
            })
        }
    };
    // The container width must equal bits/8 (e.g. 24-bit in 4-byte containers is
    // not supported).
    let width = encoding.bits() / 8;
    if fmt.block_align != 2 * width {
        return Err(CaptureError::WavEncoding {
            path: path.to_path_buf(),
            found: format!(
                "{}-bit samples in frames of {} bytes ({} expected for 2 channels)",
                encoding.bits(),
                fmt.block_align,
                2 * width
            ),
        });
    }
    if fmt.sample_rate == 0 {
        return Err(header_err("sample rate 0 in the fmt chunk".into()));
    }
    if declared % u64::from(fmt.block_align) != 0 {
        return Err(header_err(format!(
            "data chunk of {declared} bytes is not a whole number of {}-byte frames",
            fmt.block_align
        )));
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
        sample_rate_hz: fmt.sample_rate,
        data_offset,
        data_bytes: declared,
        variant,
    })
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
