//! TEMPORARY stand-in for `capture::SampleFormat` until the capture module
//! lands on main; replaced by a re-export on merge (same serde names as
//! API-CONTRACT.md).

use serde::{Deserialize, Serialize};

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
