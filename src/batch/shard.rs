//! Stable partition of a folder's captures into N shards (`--shard K/N`).
//!
//! Takes in: a capture's path relative to the batch folder, UTF-8 with `/`
//! separators. Gives out: its 1-based shard number. The hash is SHA-256
//! (FIPS 180-4) of the path's UTF-8 bytes; the first 8 bytes of the digest read
//! as a big-endian `u64`, reduced modulo N, plus 1. It depends on nothing but
//! the relative path, so N machines that each run one shard over the same
//! folder cover every capture exactly once without talking to each other, and
//! adding or removing files never moves other files between shards.

use sha2::{Digest, Sha256};
use std::fmt;
use std::str::FromStr;

/// One shard of N (1-based index).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Shard {
    /// This shard, `1..=count`.
    pub index: u64,
    /// Number of shards, at least 1.
    pub count: u64,
}

/// A `--shard` value was malformed.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[non_exhaustive]
pub enum ShardParseError {
    /// Not of the form `K/N` with whole numbers.
    #[error("'{found}' is not a shard; expected K/N with whole numbers, e.g. 3/8")]
    Syntax {
        /// The text given.
        found: String,
    },
    /// K is outside 1..=N or N is 0.
    #[error("shard {index}/{count} is out of range; K must be between 1 and N (1-based)")]
    OutOfRange {
        /// K as given.
        index: u64,
        /// N as given.
        count: u64,
    },
}

impl Shard {
    /// A checked shard.
    pub fn new(index: u64, count: u64) -> Result<Shard, ShardParseError> {
        if count == 0 || index == 0 || index > count {
            return Err(ShardParseError::OutOfRange { index, count });
        }
        Ok(Shard { index, count })
    }

    /// Whether the capture at `rel_path` belongs to this shard.
    pub fn contains(&self, rel_path: &str) -> bool {
        shard_of(rel_path, self.count) == self.index
    }

    /// Suffix used in this shard's summary file names, e.g. `shard-3-of-8`.
    pub fn file_tag(&self) -> String {
        format!("shard-{}-of-{}", self.index, self.count)
    }
}

impl FromStr for Shard {
    type Err = ShardParseError;
    fn from_str(s: &str) -> Result<Shard, ShardParseError> {
        let syntax = || ShardParseError::Syntax {
            found: s.to_string(),
        };
        let (k, n) = s.trim().split_once('/').ok_or_else(syntax)?;
        let k: u64 = k.trim().parse().map_err(|_| syntax())?;
        let n: u64 = n.trim().parse().map_err(|_| syntax())?;
        Shard::new(k, n)
    }
}

impl fmt::Display for Shard {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}/{}", self.index, self.count)
    }
}

/// The stable 64-bit hash of a relative path: the first 8 bytes of
/// SHA-256(UTF-8 bytes), big-endian.
pub fn path_hash(rel_path: &str) -> u64 {
    let digest = Sha256::digest(rel_path.as_bytes());
    let mut first = [0u8; 8];
    first.copy_from_slice(&digest[..8]);
    u64::from_be_bytes(first)
}

/// The 1-based shard (of `count`) that `rel_path` falls in; `count` 0 is taken as 1.
pub fn shard_of(rel_path: &str, count: u64) -> u64 {
    path_hash(rel_path) % count.max(1) + 1
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fixed_paths_fall_in_the_shards_computed_independently_with_python_hashlib() {
        // Source: SHA-256 as specified in FIPS 180-4, computed independently by
        // tests/vectors/shard_hash.py (Python hashlib):
        //   int.from_bytes(hashlib.sha256(p.encode()).digest()[:8], "big") % n + 1
        let cases: &[(&str, u64, u64)] = &include!("../../tests/vectors/shard_hash.in");
        assert!(cases.len() >= 4);
        for &(path, hash, shard8) in cases {
            assert_eq!(path_hash(path), hash, "{path}");
            assert_eq!(shard_of(path, 8), shard8, "{path}");
        }
    }

    #[test]
    fn sha256_of_abc_matches_fips_180_4_example() {
        // Source: FIPS 180-4 example "abc" (NIST CSRC example values):
        // ba7816bf 8f01cfea 414140de 5dae2223 ...
        assert_eq!(path_hash("abc"), 0xba78_16bf_8f01_cfea);
    }

    #[test]
    fn shard_strings_parse_and_bad_ones_are_refused() {
        assert_eq!("3/8".parse::<Shard>(), Ok(Shard { index: 3, count: 8 }));
        assert_eq!(" 1/1 ".parse::<Shard>(), Ok(Shard { index: 1, count: 1 }));
        assert!(matches!(
            "0/8".parse::<Shard>(),
            Err(ShardParseError::OutOfRange { .. })
        ));
        assert!(matches!(
            "9/8".parse::<Shard>(),
            Err(ShardParseError::OutOfRange { .. })
        ));
        assert!(matches!(
            "1/0".parse::<Shard>(),
            Err(ShardParseError::OutOfRange { .. })
        ));
        for bad in ["3", "a/8", "3/", "-1/8", "3/8/2"] {
            assert!(
                matches!(bad.parse::<Shard>(), Err(ShardParseError::Syntax { .. })),
                "{bad}"
            );
        }
    }

    #[test]
    fn every_path_lands_in_exactly_one_shard() {
        let shards: Vec<Shard> = (1..=5).map(|k| Shard::new(k, 5).unwrap()).collect();
        for i in 0..200 {
            let p = format!("site-{}/cap{i}.cf32", i % 7);
            assert_eq!(shards.iter().filter(|s| s.contains(&p)).count(), 1);
        }
    }
}
