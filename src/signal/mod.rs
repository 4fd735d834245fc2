//! Signal definitions: constellations, training sequences and pulse shaping.
//!
//! Takes in: modulation names, bit streams (one bit per `u8`, 0 or 1), symbol
//! lists and pulse parameters. Gives out: unit-mean-power constellation points
//! ([`Cf32`](crate::Cf32)), hard decisions (labels), bit sequences, and
//! root-raised-cosine taps with the filters that use them.
//!
//! Conventions:
//! * a *label* is the integer formed by a symbol's bit group read first bit as
//!   the most significant bit (3GPP TS 38.211 §5.1 numbers the bits b(i), b(i+1), …
//!   in transmission order);
//! * constellations have unit mean power (Es = 1) over equiprobable labels;
//! * time in the pulse-shaping code is in symbol periods (T = 1); `sps` is samples
//!   per symbol.

pub mod barker;
pub mod constellation;
pub mod prbs;
pub mod resample;
pub mod rrc;
pub mod symbols;
pub mod zadoff_chu;

pub use barker::{barker, barker_symbols, BARKER_LENGTHS};
pub use constellation::{Constellation, Modulation, Psk8Map};
pub use prbs::{prbs_bits, prbs_symbols, Lfsr, PrbsPattern};
pub use resample::Resampler;
pub use rrc::{
    matched_filter, matched_filter_at, matched_filter_into, rrc_impulse, rrc_taps, shape,
    validate_rrc, PolyphaseInterpolator,
};
pub use symbols::{parse_symbols, parse_symbols_capped, read_symbols_file, symbols_from_pairs};
pub use zadoff_chu::{zadoff_chu, zadoff_chu_checked};

/// Errors from parsing or validating signal definitions (user input, never programmer errors).
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum SignalError {
    /// A modulation name was not one of the known names.
    #[error("unknown modulation {found:?}; expected one of {expected}")]
    UnknownModulation {
        /// The text that was given.
        found: String,
        /// The accepted names, comma separated.
        expected: &'static str,
    },
    /// An 8PSK bit-map name was not one of the known names.
    #[error("unknown 8PSK bit map {found:?}; expected one of {expected}")]
    UnknownPsk8Map {
        /// The text that was given.
        found: String,
        /// The accepted names, comma separated.
        expected: &'static str,
    },
    /// A pulse-shaping parameter is outside its allowed range.
    #[error("invalid pulse-shaping parameter {key} = {found}: expected {expected}")]
    InvalidPulseParameter {
        /// Which parameter (`beta`, `span_symbols`, `sps`).
        key: &'static str,
        /// The value given, formatted.
        found: String,
        /// The allowed range.
        expected: &'static str,
    },
    /// A PRBS pattern name was not one of the known names.
    #[error("unknown PRBS pattern {found:?}; expected one of {expected}")]
    UnknownPrbs {
        /// The text that was given.
        found: String,
        /// The accepted names, comma separated.
        expected: &'static str,
    },
    /// An LFSR definition (register length, feedback stages, seed) is invalid.
    #[error("invalid LFSR {key} = {found}: expected {expected}")]
    InvalidLfsr {
        /// Which part (`degree`, `taps`, `seed`).
        key: &'static str,
        /// The value given, formatted.
        found: String,
        /// What is allowed.
        expected: &'static str,
    },
    /// A Zadoff–Chu definition (root, length) is invalid.
    #[error("invalid Zadoff-Chu {key} = {found}: expected {expected}")]
    InvalidZadoffChu {
        /// Which part (`root`, `length`).
        key: &'static str,
        /// The value given, formatted.
        found: String,
        /// What is allowed.
        expected: String,
    },
    /// A line of a symbol list could not be parsed.
    #[error("symbol list line {line}: expected {expected}, found {found:?}")]
    SymbolsParse {
        /// 1-based line number (or pair index for explicit pairs).
        line: usize,
        /// What the line should contain.
        expected: &'static str,
        /// The offending text.
        found: String,
    },
    /// A line of a symbols file could not be parsed.
    #[error("{}: line {line}: expected {expected}, found {found:?}", path.display())]
    SymbolsFile {
        /// The file.
        path: std::path::PathBuf,
        /// 1-based line number.
        line: usize,
        /// What the line should contain.
        expected: &'static str,
        /// The offending text.
        found: String,
    },
    /// A symbol list contained no symbols.
    #[error("the symbol list contains no symbols; expected at least one `re im` pair")]
    NoSymbols,
    /// A symbols file could not be read.
    #[error("cannot read symbols file {}: {message}", path.display())]
    Io {
        /// The file.
        path: std::path::PathBuf,
        /// The operating-system error, as text (kept as text so the error stays `Clone`).
        message: String,
    },
}
