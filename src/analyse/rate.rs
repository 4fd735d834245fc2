//! Captures whose sample rate is not an integer multiple of the symbol rate
//! (#17): the analysis sees the capture resampled to `samples_per_symbol`
//! samples per symbol, read through [`Plan::read_analysis`] a stretch at a
//! time (memory bounded by the stretch, never the capture).
//!
//! Takes in: the capture's rate and the profile's `symbol_rate_hz`. Gives out:
//! the [`Resampler`] (none when the rates already agree), the analysis
//! stream's length and reads, and the map from analysis-stream positions back
//! to capture samples (for the per-burst sample statistics and page release).
//! Sample positions in the report (`start_sample`, …) are in the analysis
//! stream, at `samples_per_symbol × symbol_rate_hz`; `input.sample_rate_hz`
//! stays the capture's own.

use super::plan::{usage, Plan};
use crate::capture::{Capture, CaptureError};
use crate::profile::ResolvedProfile;
use crate::signal::Resampler;
use crate::{Cf32, Error};

/// Rates closer than this (relative) count as equal: no resampling.
const SAME_RATE: f64 = 1e-12;

/// The resampler from `input_rate_hz` to the profile's analysis rate, or none.
pub(super) fn resampler_for(
    profile: &ResolvedProfile,
    capture: &Capture,
    input_rate_hz: f64,
) -> Result<(f64, Option<Resampler>), Error> {
    let Some(rs) = profile.resample_to_symbol_rate_hz else {
        return Ok((input_rate_hz, None));
    };
    let out_rate = rs * profile.samples_per_symbol as f64;
    let ratio = input_rate_hz / out_rate;
    if (ratio - 1.0).abs() < SAME_RATE {
        return Ok((input_rate_hz, None));
    }
    let r = Resampler::new(ratio).ok_or_else(|| {
        usage(format!(
            "{}: sample rate {input_rate_hz} Hz against {out_rate} Hz ({} samples per symbol at {rs} Bd): the ratio must lie within 1/{max}..{max}",
            capture.path().display(),
            profile.samples_per_symbol,
            max = crate::signal::resample::MAX_RATIO
        ))
    })?;
    Ok((out_rate, Some(r)))
}

impl Plan {
    /// Samples in the stream the analysis reads.
    pub(super) fn analysis_len(&self, capture: &Capture) -> usize {
        match &self.resampler {
            Some(r) => r.output_len(capture.len()),
            None => capture.len(),
        }
    }

    /// Capture samples `[lo, hi)` under analysis-stream samples `[lo, hi)`
    /// (clamped to the capture).
    pub(super) fn capture_range(&self, lo: usize, hi: usize, capture: &Capture) -> (usize, usize) {
        let (lo, hi) = match &self.resampler {
            Some(r) => (
                r.input_time(lo).floor() as usize,
                r.input_time(hi).ceil() as usize,
            ),
            None => (lo, hi),
        };
        (lo.min(capture.len()), hi.min(capture.len()))
    }

    /// Analysis-stream samples `[start, start + out.len())`.
    pub(super) fn read_analysis(
        &self,
        capture: &Capture,
        start: usize,
        out: &mut [Cf32],
    ) -> Result<(), CaptureError> {
        let Some(r) = &self.resampler else {
            return capture.read_into(start, out).map(|_| ());
        };
        let (lo, hi) = r.input_span(start, out.len());
        let lo_c = lo.max(0) as usize;
        let hi_c = (hi.max(0) as usize).min(capture.len());
        let mut buf = vec![Cf32::new(0.0, 0.0); hi_c.saturating_sub(lo_c)];
        if !buf.is_empty() {
            capture.read_into(lo_c, &mut buf)?;
        }
        r.process(&buf, lo_c as i64, start, out);
        Ok(())
    }
}
