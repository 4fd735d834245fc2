//! TEMPORARY stand-ins for `signal::Modulation`, `signal::PrbsPattern` and
//! `capture::SampleFormat` until those modules land on main; replaced by
//! re-exports on merge (same serde names as API-CONTRACT.md).

use serde::{Deserialize, Serialize};

/// Constellation names (stand-in for `signal::Modulation`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub enum Modulation {
    /// BPSK.
    #[serde(rename = "bpsk")]
    Bpsk,
    /// QPSK.
    #[serde(rename = "qpsk")]
    Qpsk,
    /// 8PSK.
    #[serde(rename = "8psk")]
    Psk8,
    /// 16-QAM.
    #[serde(rename = "16qam")]
    Qam16,
    /// 64-QAM.
    #[serde(rename = "64qam")]
    Qam64,
    /// 256-QAM.
    #[serde(rename = "256qam")]
    Qam256,
}

/// PRBS pattern names (stand-in for `signal::PrbsPattern`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum PrbsPattern {
    /// x^7+x^6+1.
    Prbs7,
    /// x^9+x^5+1.
    Prbs9,
    /// x^11+x^9+1.
    Prbs11,
    /// x^15+x^14+1.
    Prbs15,
    /// x^23+x^18+1.
    Prbs23,
    /// x^31+x^28+1.
    Prbs31,
}

/// SigMF datatype names (stand-in for `capture::SampleFormat`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum SampleFormat {
    /// cf32_le.
    Cf32Le,
    /// cf32_be.
    Cf32Be,
    /// cf64_le.
    Cf64Le,
    /// ci16_le.
    Ci16Le,
    /// ci16_be.
    Ci16Be,
    /// ci8.
    Ci8,
    /// cu8.
    Cu8,
}
