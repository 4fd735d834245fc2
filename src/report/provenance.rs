//! Provenance helpers: content hashes that let a report be reproduced and checked.
//!
//! Takes a file path or a serialisable value; gives a lowercase hex SHA-256
//! (FIPS 180-4). Files are streamed through a fixed 1 MiB buffer, so hashing a
//! capture of any size uses bounded memory.

use sha2::{Digest, Sha256};
use std::io::Read;
use std::path::Path;

/// Lowercase hex of a digest.
pub fn hex(bytes: &[u8]) -> String {
    const HEX: &[u8; 16] = b"0123456789abcdef";
    let mut s = String::with_capacity(bytes.len() * 2);
    for b in bytes {
        s.push(HEX[(b >> 4) as usize] as char);
        s.push(HEX[(b & 15) as usize] as char);
    }
    s
}

/// SHA-256 of a file's contents, lowercase hex, streamed with a 1 MiB buffer.
///
/// Only a regular file is read (never a FIFO or device, which could block or
/// never end), and only up to the length it had when opened.
pub fn sha256_file(path: &Path) -> std::io::Result<String> {
    let (f, len) = crate::limits::open_regular(path)?;
    let mut f = f.take(len);
    let mut hasher = Sha256::new();
    let mut buf = vec![0u8; 1 << 20];
    loop {
        let n = f.read(&mut buf)?;
        if n == 0 {
            break;
        }
        hasher.update(&buf[..n]);
    }
    Ok(hex(&hasher.finalize()))
}

/// SHA-256 of bytes, lowercase hex.
pub fn sha256_bytes(bytes: &[u8]) -> String {
    hex(&Sha256::digest(bytes))
}

/// SHA-256 of a resolved profile as every report records it in
/// `provenance.profile_sha256`: the hash of the compact JSON of the resolved profile.
pub fn profile_sha256(
    profile: &crate::profile::ResolvedProfile,
) -> Result<String, serde_json::Error> {
    let value = serde_json::to_value(profile)?;
    Ok(sha256_bytes(value.to_string().as_bytes()))
}

/// The bytes of a report file: pretty JSON plus a final newline (the same for
/// `analyse --report` and `batch`).
pub fn report_json(report: &crate::report::schema::Report) -> Result<Vec<u8>, serde_json::Error> {
    let mut v = serde_json::to_vec_pretty(report)?;
    v.push(b'\n');
    Ok(v)
}

/// Whether `s` looks like a SHA-256 in lowercase or uppercase hex.
pub fn is_sha256_hex(s: &str) -> bool {
    s.len() == 64 && s.bytes().all(|b| b.is_ascii_hexdigit())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sha256_of_abc_matches_the_fips_180_example() {
        // Source: FIPS 180-4 / NIST CSRC example "abc" → ba7816bf…f20015ad.
        assert_eq!(
            sha256_bytes(b"abc"),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("abc");
        std::fs::write(&p, b"abc").unwrap();
        assert_eq!(sha256_file(&p).unwrap(), sha256_bytes(b"abc"));
        assert!(is_sha256_hex(&sha256_bytes(b"")));
        assert!(!is_sha256_hex("xyz"));
    }
}
