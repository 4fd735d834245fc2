//! Building the symbols a resolved profile describes: the training block and,
//! when the payload is known, the payload. Takes in a [`ResolvedProfile`];
//! gives out unit-mean-power constellation symbols (`Cf32`) in transmission
//! order, or a [`ProfileError`] naming the key (e.g. an unreadable symbols file).
//!
//! Bits map onto symbols `bits_per_symbol` at a time, the first bit the most
//! significant of the label (the `signal` constellation convention). A Barker
//! chip `+1` is BPSK bit 0 and `−1` is bit 1.

use std::path::Path;

use super::resolve::{check_training_fits, ResolvedPayloadRule, ResolvedSequence};
use super::{ProfileError, ResolvedProfile};
use crate::pending_signal as sig;
use crate::Cf32;

/// The known payload of one burst: the symbols before and after the training.
#[derive(Debug, Clone, PartialEq)]
pub struct PayloadSymbols {
    /// Symbols before the training (empty unless position is before/both).
    pub before: Vec<Cf32>,
    /// Symbols after the training (empty unless position is after/both).
    pub after: Vec<Cf32>,
}

fn map_bits(points: &[Cf32], bps: usize, bits: &[u8], out: &mut Vec<Cf32>) {
    for group in bits.chunks_exact(bps) {
        let label = group.iter().fold(0usize, |acc, &b| (acc << 1) | b as usize);
        out.push(points[label]);
    }
}

fn read_symbols_file(key: &str, path: &str) -> Result<Vec<Cf32>, ProfileError> {
    let text = std::fs::read_to_string(path).map_err(|e| ProfileError::SymbolsFile {
        key: key.to_string(),
        path: Path::new(path).to_path_buf(),
        message: e.to_string(),
    })?;
    sig::parse_symbols(&text).map_err(|message| ProfileError::SymbolsFile {
        key: key.to_string(),
        path: Path::new(path).to_path_buf(),
        message,
    })
}

impl ResolvedProfile {
    /// The training symbols, in order. Reads the symbols file when the
    /// sequence is one, and then checks its length against the channel fit.
    pub fn training_symbols(&self) -> Result<Vec<Cf32>, ProfileError> {
        let t = &self.training;
        let symbols = match &t.sequence {
            ResolvedSequence::Prbs {
                polynomial,
                seed,
                inverted,
                length,
                ..
            } => {
                let m = t.modulation.unwrap_or(super::Modulation::Qpsk);
                let bps = sig::bits_per_symbol(m);
                let mut bits = vec![0u8; length * bps];
                sig::prbs_bits(polynomial[0], polynomial[1], *seed, *inverted, &mut bits);
                let mut out = Vec::with_capacity(*length);
                map_bits(&sig::points(m), bps, &bits, &mut out);
                out
            }
            ResolvedSequence::Barker { n } => {
                let code = sig::barker(*n).ok_or_else(|| ProfileError::InvalidValue {
                    key: "training.sequence.n".into(),
                    expected: "one of 2, 3, 4, 5, 7, 11, 13".into(),
                    found: n.to_string(),
                })?;
                let p = sig::points(super::Modulation::Bpsk);
                code.iter().map(|&c| p[(c < 0) as usize]).collect()
            }
            ResolvedSequence::ZadoffChu {
                root,
                length,
                shift,
            } => sig::zadoff_chu(*root, *length, *shift),
            ResolvedSequence::Symbols { values } => values
                .iter()
                .map(|v| Cf32::new(v[0] as f32, v[1] as f32))
                .collect(),
            ResolvedSequence::SymbolsFile { path } => {
                let s = read_symbols_file("training.sequence.path", path)?;
                check_training_fits(&self.channel_fit, s.len())?;
                s
            }
        };
        Ok(symbols)
    }

    /// The payload symbols of one burst when the payload is known (`None`
    /// otherwise). A PRBS rule restarts from its seed in every burst and runs
    /// through the part before the training, then on through the part after.
    pub fn payload_symbols(&self) -> Result<Option<PayloadSymbols>, ProfileError> {
        let p = &self.payload;
        let total = p.before_symbols + p.after_symbols;
        let all = match &p.known {
            None => return Ok(None),
            Some(ResolvedPayloadRule::Prbs {
                polynomial,
                seed,
                inverted,
                ..
            }) => {
                let bps = sig::bits_per_symbol(p.modulation);
                let mut bits = vec![0u8; total * bps];
                sig::prbs_bits(polynomial[0], polynomial[1], *seed, *inverted, &mut bits);
                let mut out = Vec::with_capacity(total);
                map_bits(&sig::points(p.modulation), bps, &bits, &mut out);
                out
            }
            Some(ResolvedPayloadRule::SymbolsFile { path }) => {
                let mut s = read_symbols_file("payload.known.path", path)?;
                if s.len() < total {
                    return Err(ProfileError::SymbolsFile {
                        key: "payload.known.path".into(),
                        path: Path::new(path).to_path_buf(),
                        message: format!(
                            "holds {} symbols but the payload needs {total} per burst",
                            s.len()
                        ),
                    });
                }
                s.truncate(total);
                s
            }
        };
        let (before, after) = all.split_at(p.before_symbols);
        Ok(Some(PayloadSymbols {
            before: before.to_vec(),
            after: after.to_vec(),
        }))
    }
}
