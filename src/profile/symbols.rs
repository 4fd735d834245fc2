//! Building the symbols a resolved profile describes: the training block and,
//! when the payload is known, the payload. Takes in a [`ResolvedProfile`];
//! gives out constellation symbols (`Cf32`, unit mean power for the
//! constellations) in transmission order, or a [`ProfileError`] naming the key
//! (e.g. an unreadable symbols file).
//!
//! PRBS bits come from `signal::Lfsr` (Fibonacci register, stage convention of
//! `signal::prbs`) and map onto symbols `bits_per_symbol` at a time, the first
//! bit the most significant of the label (`signal::Lfsr::fill_symbols`). Barker
//! chips are real symbols `±1` (`signal::barker_symbols`).

use std::path::Path;

use super::resolve::{check_training_fits, ResolvedPayloadRule, ResolvedSequence};
use super::{ProfileError, ResolvedProfile};
use crate::signal::{self, Constellation, Lfsr, Modulation};
use crate::Cf32;

/// The known payload of one burst: the symbols before and after the training.
#[derive(Debug, Clone, PartialEq)]
pub struct PayloadSymbols {
    /// Symbols before the training (empty unless position is before/both).
    pub before: Vec<Cf32>,
    /// Symbols after the training (empty unless position is after/both).
    pub after: Vec<Cf32>,
}

fn symbols_file_error(key: &str, path: &str, e: impl std::fmt::Display) -> ProfileError {
    ProfileError::SymbolsFile {
        key: key.to_string(),
        path: Path::new(path).to_path_buf(),
        message: e.to_string(),
    }
}

/// `n` symbols of `m` from the LFSR `x^n + x^a + 1` (`polynomial = [n, a]`).
fn lfsr_symbols(
    key: &str,
    polynomial: [u32; 2],
    seed: u64,
    inverted: bool,
    m: Modulation,
    n: usize,
) -> Result<Vec<Cf32>, ProfileError> {
    let [deg, a] = polynomial;
    let mut lfsr = Lfsr::new(deg, &[deg, a], seed)
        .map_err(|e| ProfileError::InvalidValue {
            key: key.to_string(),
            expected: "a valid PRBS register".into(),
            found: e.to_string(),
        })?
        .with_inversion(inverted);
    let mut out = vec![Cf32::new(0.0, 0.0); n];
    lfsr.fill_symbols(&Constellation::new(m), &mut out);
    Ok(out)
}

impl ResolvedProfile {
    /// The training symbols, in order. Reads the symbols file when the
    /// sequence is one, and then checks its length against the channel fit.
    pub fn training_symbols(&self) -> Result<Vec<Cf32>, ProfileError> {
        let t = &self.training;
        let key = "training.sequence";
        let invalid = |k: &str, e: signal::SignalError| ProfileError::InvalidValue {
            key: format!("{key}.{k}"),
            expected: "a valid sequence".into(),
            found: e.to_string(),
        };
        let symbols = match &t.sequence {
            ResolvedSequence::Prbs {
                polynomial,
                seed,
                inverted,
                length,
                ..
            } => lfsr_symbols(
                key,
                *polynomial,
                *seed,
                *inverted,
                t.modulation.unwrap_or(Modulation::Qpsk),
                *length,
            )?,
            ResolvedSequence::Barker { n } => {
                signal::barker_symbols(*n).ok_or_else(|| ProfileError::InvalidValue {
                    key: format!("{key}.n"),
                    expected: "one of 2, 3, 4, 5, 7, 11, 13".into(),
                    found: n.to_string(),
                })?
            }
            ResolvedSequence::ZadoffChu {
                root,
                length,
                shift,
            } => signal::zadoff_chu_checked(*root, *length, *shift)
                .map_err(|e| invalid("root", e))?,
            ResolvedSequence::Symbols { values } => {
                signal::symbols_from_pairs(values).map_err(|e| invalid("values", e))?
            }
            ResolvedSequence::SymbolsFile { path } => {
                let s =
                    signal::read_symbols_file(Path::new(path), crate::limits::MAX_TRAINING_SYMBOLS)
                        .map_err(|e| symbols_file_error("training.sequence.path", path, e))?;
                check_training_fits(&self.channel_fit, s.len())?;
                let mut with_len = self.clone();
                with_len.training.length_symbols = Some(s.len());
                with_len.check_products()?;
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
            }) => lfsr_symbols(
                "payload.known",
                *polynomial,
                *seed,
                *inverted,
                p.modulation,
                total,
            )?,
            Some(ResolvedPayloadRule::SymbolsFile { path }) => {
                let mut s =
                    signal::read_symbols_file(Path::new(path), crate::limits::MAX_PAYLOAD_SYMBOLS)
                        .map_err(|e| symbols_file_error("payload.known.path", path, e))?;
                if s.len() < total {
                    return Err(symbols_file_error(
                        "payload.known.path",
                        path,
                        format!(
                            "holds {} symbols but the payload needs {total} per burst",
                            s.len()
                        ),
                    ));
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

    /// The known payload symbols next to the training only: the last
    /// `before_keep` of the part before it and the first `after_keep` of the
    /// part after it (each at most the profile's count), the same symbols as
    /// the matching ends of [`payload_symbols`](Self::payload_symbols). A PRBS
    /// rule is stepped through the symbols it skips in a fixed scratch block,
    /// so memory follows what is kept (what a capture can hold), never the
    /// profile's payload length.
    pub fn payload_symbols_near_training(
        &self,
        before_keep: usize,
        after_keep: usize,
    ) -> Result<Option<PayloadSymbols>, ProfileError> {
        let p = &self.payload;
        let (before_keep, after_keep) = (
            before_keep.min(p.before_symbols),
            after_keep.min(p.after_symbols),
        );
        match &p.known {
            None => Ok(None),
            Some(ResolvedPayloadRule::Prbs {
                polynomial,
                seed,
                inverted,
                ..
            }) => {
                let [deg, a] = *polynomial;
                let mut lfsr = Lfsr::new(deg, &[deg, a], *seed)
                    .map_err(|e| ProfileError::InvalidValue {
                        key: "payload.known".to_string(),
                        expected: "a valid PRBS register".into(),
                        found: e.to_string(),
                    })?
                    .with_inversion(*inverted);
                let c = Constellation::new(p.modulation);
                let mut scratch = [Cf32::new(0.0, 0.0); 4096];
                let mut skip = p.before_symbols - before_keep;
                while skip > 0 {
                    let n = skip.min(scratch.len());
                    lfsr.fill_symbols(&c, &mut scratch[..n]);
                    skip -= n;
                }
                let mut before = vec![Cf32::new(0.0, 0.0); before_keep];
                lfsr.fill_symbols(&c, &mut before);
                let mut after = vec![Cf32::new(0.0, 0.0); after_keep];
                lfsr.fill_symbols(&c, &mut after);
                Ok(Some(PayloadSymbols { before, after }))
            }
            // A symbols file is read whole: its size is the file's, an input.
            Some(ResolvedPayloadRule::SymbolsFile { .. }) => {
                Ok(self.payload_symbols()?.map(|mut s| {
                    s.before.drain(..s.before.len() - before_keep);
                    s.after.truncate(after_keep);
                    s
                }))
            }
        }
    }
}
