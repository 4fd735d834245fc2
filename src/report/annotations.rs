//! Detected bursts as SigMF annotations, built from the report data alone.
//!
//! Takes in: a finished [`Report`] and, per burst, the centre frequency it was
//! recorded at (the capture segment's, else the profile's; `None` when unknown).
//! Gives out: one [`SigmfAnnotation`] per burst, in report order — the keys and
//! their meaning are listed in docs/sigmf.md:
//! - `core:sample_start` = `start_sample − round(before_symbols · fs / Rs)` (the
//!   first symbol of the burst, payload before the training included; clamped at
//!   0) and `core:sample_count` = `round((before + training + after) · fs / Rs)`
//!   (clamped to the capture), with `fs` the sample rate and `Rs` the symbol
//!   rate (`fs / samples_per_symbol` when the profile gives none);
//! - `core:freq_lower_edge` / `core:freq_upper_edge` = carrier ∓ (1 + β)·Rs/2,
//!   carrier = centre frequency (0 when unknown) + `cfo_hz`, β the RRC roll-off;
//! - the `iqaudit:` keys: EVM, MER, SER, the capture's verdict, CFO, start
//!   sample and centre frequency.

use std::collections::BTreeMap;

use serde_json::{json, Value};

use super::schema::{BurstReport, Report};
use crate::capture::SigmfAnnotation;

fn num(v: &Value, path: &[&str]) -> Option<f64> {
    let mut v = v;
    for k in path {
        v = v.get(k)?;
    }
    v.as_f64()
}

/// The annotations of every burst of `report`; `center_freq_hz(burst)` gives
/// the centre frequency the burst was recorded at.
pub fn burst_annotations(
    report: &Report,
    center_freq_hz: &dyn Fn(&BurstReport) -> Option<f64>,
) -> Vec<SigmfAnnotation> {
    let p = &report.profile;
    let fs = report.input.sample_rate_hz;
    let sps = num(p, &["samples_per_symbol"]).unwrap_or(1.0).max(1.0);
    let rs = num(p, &["symbol_rate_hz"]).unwrap_or(fs / sps);
    let per_symbol = if rs > 0.0 { fs / rs } else { sps };
    let beta = num(p, &["pulse", "rolloff"]).unwrap_or(0.0);
    let before = num(p, &["payload", "before_symbols"]).unwrap_or(0.0);
    let after = num(p, &["payload", "after_symbols"]).unwrap_or(0.0);
    let training = num(p, &["training", "length_symbols"]).unwrap_or(0.0);
    let half_bw = 0.5 * (1.0 + beta) * rs;
    let verdict = serde_json::to_value(report.verdict.result).unwrap_or(Value::Null);
    let total = report.input.samples;
    report
        .bursts
        .iter()
        .map(|b| {
            let lead = (before * per_symbol).round() as u64;
            let start = b.start_sample.saturating_sub(lead);
            let count = ((before + training + after) * per_symbol).round() as u64;
            let count = count.min(total.saturating_sub(start));
            let fc = center_freq_hz(b);
            let carrier = fc.unwrap_or(0.0) + b.cfo_hz;
            let m = &b.metrics;
            let mut ext = BTreeMap::new();
            ext.insert("kind".to_string(), json!("detected"));
            ext.insert("burst_index".to_string(), json!(b.index));
            ext.insert("start_sample".to_string(), json!(b.start_sample));
            ext.insert("cfo_hz".to_string(), json!(b.cfo_hz));
            ext.insert("center_freq_hz".to_string(), json!(fc));
            ext.insert("evm_rms_percent".to_string(), json!(m.evm_rms_percent));
            ext.insert("evm_rms_db".to_string(), json!(m.evm_rms_db));
            ext.insert("mer_db".to_string(), json!(m.mer_db));
            ext.insert("ser".to_string(), json!(m.ser.as_ref().map(|s| s.rate)));
            ext.insert("verdict".to_string(), verdict.clone());
            let mer = m
                .mer_db
                .map_or_else(|| "n/a".to_string(), |x| format!("{x:.1} dB"));
            SigmfAnnotation {
                sample_start: start,
                sample_count: count,
                label: format!("burst {}", b.index),
                freq_lower_edge_hz: Some(carrier - half_bw),
                freq_upper_edge_hz: Some(carrier + half_bw),
                comment: Some(format!(
                    "iqaudit: EVM {:.2} %, MER {mer}, CFO {:+.1} Hz",
                    m.evm_rms_percent, b.cfo_hz
                )),
                extension: ext,
            }
        })
        .collect()
}
