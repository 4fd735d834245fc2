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

pub mod constellation;
pub mod rrc;

pub use constellation::{Constellation, Modulation, Psk8Map};
pub use rrc::{
    matched_filter, matched_filter_into, rrc_impulse, rrc_taps, shape, validate_rrc,
    PolyphaseInterpolator,
};

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
}
