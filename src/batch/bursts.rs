//! The per-burst table across a batch: one row per burst of every analysed
//! capture, as JSON Lines and as CSV (`OUT/bursts.jsonl`, `OUT/bursts.csv`).
//!
//! Takes in: each capture's [`Report`]. Gives out: [`BurstRow`]s and their two
//! serialisations, sorted by (relative path, burst index) so the files are
//! byte-identical whatever the number of workers. Captures that failed or
//! found no burst add no row (the summary has their line).
//!
//! Columns (CSV header = JSON keys, in this order; every value is copied from
//! the capture's report, where docs/report.md defines it):
//!
//! | key | unit | meaning (report key) |
//! |---|---|---|
//! | `path` | — | capture path relative to the batch folder, `/`-separated |
//! | `burst` | — | burst number in the capture's report (`bursts[].index`) |
//! | `start_sample` | samples | first training symbol's sample (`start_sample`) |
//! | `start_time_s` | s | `start_sample` / sample rate |
//! | `center_freq_hz` | Hz | centre frequency of the burst's capture segment; empty when unknown |
//! | `cfo_hz` | Hz | carrier frequency offset (`cfo_hz`) |
//! | `sco_ppm` | ppm | sample-clock offset; empty when not estimated |
//! | `received_power_dbfs` | dBFS | mean power of the burst's samples |
//! | `sync_metric` | — | normalised training correlation at the burst (0–1) |
//! | `snr_db` | dB | SNR of the channel fit over the training (`channel.snr_db`) |
//! | `evm_rms_percent` | % | RMS EVM of the payload (`metrics.evm_rms_percent`) |
//! | `mer_db` | dB | MER of the payload; empty when undefined |
//! | `phase_error_rms_deg` | ° | RMS phase error of the payload; empty when undefined |
//! | `symbols` | count | payload symbols judged (`metrics.symbols`) |
//! | `symbol_errors` | count | wrong payload symbols; empty when the payload is unknown |
//! | `ser` | — | `symbol_errors / symbols`; empty when the payload is unknown |
//! | `bit_errors` | count | wrong payload bits; empty when unknown |
//! | `bits` | count | payload bits judged; empty when unknown |
//! | `ber` | — | `bit_errors / bits`; empty when unknown |
//! | `error_runs` | count | decision-error runs in the payload |
//! | `longest_error_run` | symbols | longest decision-error run |
//! | `equaliser` | — | equaliser kind (`equaliser.kind`) |
//! | `truncated` | — | `true` when the capture ends inside the burst |
//! | `warning_codes` | — | the burst's distinct warning codes, sorted, `;`-separated |
//!
//! Pooling: Σ `symbol_errors` / Σ `symbols` over any selection of rows is the
//! exact SER of those bursts. CSV follows RFC 4180 quoting, as the summary.

use super::summary::{csv_field, MergeError};
use crate::atomic::{write_atomic, WriteError};
use crate::report::schema::Report;
use serde::{Deserialize, Serialize};
use std::path::Path;

/// Schema id of one per-burst row (`iqaudit schema burst-row`).
pub const BURST_ROW_SCHEMA: &str = "iqaudit.burst-row/1";

/// One burst of one capture in the batch's per-burst table.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct BurstRow {
    /// Capture path relative to the batch folder.
    pub path: String,
    /// Burst number in the capture's report.
    pub burst: usize,
    /// First training symbol's sample.
    pub start_sample: u64,
    /// `start_sample` / sample rate, s.
    pub start_time_s: f64,
    /// Centre frequency of the burst's segment, Hz.
    pub center_freq_hz: Option<f64>,
    /// Carrier frequency offset, Hz.
    pub cfo_hz: f64,
    /// Sample-clock offset, ppm.
    pub sco_ppm: Option<f64>,
    /// Mean power of the burst's samples, dBFS.
    pub received_power_dbfs: Option<f64>,
    /// Normalised training correlation at the burst.
    pub sync_metric: f64,
    /// SNR of the channel fit over the training, dB.
    pub snr_db: f64,
    /// RMS EVM of the payload, %.
    pub evm_rms_percent: f64,
    /// MER of the payload, dB.
    pub mer_db: Option<f64>,
    /// RMS phase error of the payload, degrees.
    pub phase_error_rms_deg: Option<f64>,
    /// Payload symbols judged.
    pub symbols: usize,
    /// Wrong payload symbols.
    pub symbol_errors: Option<u64>,
    /// Symbol error rate.
    pub ser: Option<f64>,
    /// Wrong payload bits.
    pub bit_errors: Option<u64>,
    /// Payload bits judged.
    pub bits: Option<u64>,
    /// Bit error rate.
    pub ber: Option<f64>,
    /// Decision-error runs in the payload.
    pub error_runs: usize,
    /// Longest decision-error run, symbols.
    pub longest_error_run: usize,
    /// Equaliser kind.
    pub equaliser: String,
    /// The capture ends inside the burst.
    pub truncated: bool,
    /// The burst's distinct warning codes, sorted, `;`-separated.
    pub warning_codes: String,
}

/// The CSV header: the JSON keys in column order.
pub const BURST_CSV_HEADER: [&str; 24] = [
    "path",
    "burst",
    "start_sample",
    "start_time_s",
    "center_freq_hz",
    "cfo_hz",
    "sco_ppm",
    "received_power_dbfs",
    "sync_metric",
    "snr_db",
    "evm_rms_percent",
    "mer_db",
    "phase_error_rms_deg",
    "symbols",
    "symbol_errors",
    "ser",
    "bit_errors",
    "bits",
    "ber",
    "error_runs",
    "longest_error_run",
    "equaliser",
    "truncated",
    "warning_codes",
];

impl BurstRow {
    /// The rows of every burst in `r`, the capture at relative path `path`.
    pub fn from_report(path: &str, r: &Report) -> Vec<BurstRow> {
        let fs = r.input.sample_rate_hz;
        r.bursts
            .iter()
            .map(|b| {
                let m = &b.metrics;
                let codes: std::collections::BTreeSet<String> =
                    b.warnings.iter().map(|w| w.code.to_string()).collect();
                BurstRow {
                    path: path.to_string(),
                    burst: b.index,
                    start_sample: b.start_sample,
                    start_time_s: if fs > 0.0 {
                        b.start_sample as f64 / fs
                    } else {
                        0.0
                    },
                    center_freq_hz: b.center_freq_hz,
                    cfo_hz: b.cfo_hz,
                    sco_ppm: b.sco_ppm,
                    received_power_dbfs: b.received_power_dbfs,
                    sync_metric: b.sync_metric,
                    snr_db: b.channel.snr_db,
                    evm_rms_percent: m.evm_rms_percent,
                    mer_db: m.mer_db,
                    phase_error_rms_deg: m.phase_error_rms_deg,
                    symbols: m.symbols,
                    symbol_errors: m.ser.as_ref().map(|e| e.errors),
                    ser: m.ser.as_ref().map(|e| e.rate),
                    bit_errors: m.ber.as_ref().map(|e| e.errors),
                    bits: m.ber.as_ref().map(|e| e.trials),
                    ber: m.ber.as_ref().map(|e| e.rate),
                    error_runs: m.error_runs.len(),
                    longest_error_run: m.error_runs.iter().map(|e| e.length).max().unwrap_or(0),
                    equaliser: b.equaliser.kind.clone(),
                    truncated: b.truncated,
                    warning_codes: codes.into_iter().collect::<Vec<_>>().join(";"),
                }
            })
            .collect()
    }

    /// The row's fields as CSV text cells (unquoted), in [`BURST_CSV_HEADER`]
    /// order: numbers in Rust's shortest round-trip form, absent values empty.
    pub fn csv_cells(&self) -> Vec<String> {
        // A struct of strings, numbers, booleans and options always serialises
        // to an object holding every header key.
        let v = serde_json::to_value(self).unwrap_or_default();
        BURST_CSV_HEADER
            .iter()
            .map(|k| match v.get(k) {
                None | Some(serde_json::Value::Null) => String::new(),
                Some(serde_json::Value::String(s)) => s.clone(),
                Some(serde_json::Value::Number(n)) => match (n.as_u64(), n.as_i64()) {
                    (Some(u), _) => u.to_string(),
                    (None, Some(i)) => i.to_string(),
                    _ => n.as_f64().map(|x| x.to_string()).unwrap_or_default(),
                },
                Some(other) => other.to_string(),
            })
            .collect()
    }
}

/// Sort rows by (path in byte order, burst number).
pub fn sort_burst_rows(rows: &mut [BurstRow]) {
    rows.sort_by(|a, b| {
        a.path
            .as_bytes()
            .cmp(b.path.as_bytes())
            .then(a.burst.cmp(&b.burst))
    });
}

/// The JSON Lines text of `rows` (in the order given).
pub fn burst_jsonl_text(rows: &[BurstRow]) -> String {
    let mut s = String::new();
    for r in rows {
        s.push_str(&serde_json::to_string(r).unwrap_or_default());
        s.push('\n');
    }
    s
}

/// The CSV text of `rows` (header first, rows in the order given).
pub fn burst_csv_text(rows: &[BurstRow]) -> String {
    let mut s = BURST_CSV_HEADER.join(",");
    s.push('\n');
    for r in rows {
        let cells: Vec<String> = r.csv_cells().iter().map(|c| csv_field(c)).collect();
        s.push_str(&cells.join(","));
        s.push('\n');
    }
    s
}

/// Write `rows` (sorted here) to `jsonl` and `csv`, each atomically.
pub fn write_burst_tables(
    rows: &mut [BurstRow],
    jsonl: &Path,
    csv: &Path,
) -> Result<(), WriteError> {
    sort_burst_rows(rows);
    write_atomic(jsonl, burst_jsonl_text(rows).as_bytes())?;
    write_atomic(csv, burst_csv_text(rows).as_bytes())
}

/// The per-burst table beside a summary file: `DIR/summary.X.jsonl` →
/// `DIR/bursts.X.jsonl`. `None` when the name does not start with `summary`.
pub fn bursts_beside(summary: &Path) -> Option<std::path::PathBuf> {
    let name = summary.file_name()?.to_str()?;
    let rest = name.strip_prefix("summary")?;
    Some(summary.with_file_name(format!("bursts{rest}")))
}

/// Read the rows of one `bursts*.jsonl` file (blank lines ignored; strict keys).
pub fn read_bursts_jsonl(path: &Path) -> Result<Vec<BurstRow>, MergeError> {
    super::summary::read_jsonl_rows(path, |path, line, message| MergeError::BadBurstLine {
        path,
        line,
        message,
    })
}

/// With `batch --merge`: join the per-burst tables that sit beside the merged
/// summary files into `out_dir/bursts.jsonl` and `.csv`. Summaries without a
/// table beside them (written before the table existed) add nothing. Returns
/// the rows written and how many tables were found; nothing is written when no
/// input has a table.
pub fn merge_burst_tables(
    summaries: &[std::path::PathBuf],
    out_dir: &Path,
) -> Result<(usize, usize), MergeError> {
    let tables: Vec<std::path::PathBuf> = summaries
        .iter()
        .filter_map(|s| bursts_beside(s))
        .filter(|p| p.is_file())
        .collect();
    if tables.is_empty() {
        return Ok((0, 0));
    }
    let jsonl = out_dir.join("bursts.jsonl");
    let csv = out_dir.join("bursts.csv");
    let mut inputs: Vec<&Path> = tables.iter().map(std::path::PathBuf::as_path).collect();
    inputs.extend(summaries.iter().map(std::path::PathBuf::as_path));
    for p in [&jsonl, &csv] {
        crate::atomic::ensure_not_an_input(p, &inputs)?;
    }
    let mut rows = Vec::new();
    for t in &tables {
        rows.extend(read_bursts_jsonl(t)?);
    }
    write_burst_tables(&mut rows, &jsonl, &csv)?;
    Ok((rows.len(), tables.len()))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn row(path: &str, burst: usize) -> BurstRow {
        BurstRow {
            path: path.into(),
            burst,
            start_sample: 4000,
            start_time_s: 0.004,
            center_freq_hz: None,
            cfo_hz: -12.5,
            sco_ppm: Some(1.5),
            received_power_dbfs: Some(-12.0),
            sync_metric: 0.97,
            snr_db: 24.0,
            evm_rms_percent: 3.25,
            mer_db: Some(29.8),
            phase_error_rms_deg: None,
            symbols: 1024,
            symbol_errors: Some(0),
            ser: Some(0.0),
            bit_errors: Some(0),
            bits: Some(2048),
            ber: Some(0.0),
            error_runs: 0,
            longest_error_run: 0,
            equaliser: "mmse-dfe".into(),
            truncated: false,
            warning_codes: "a,b;c".into(),
        }
    }

    #[test]
    fn the_csv_header_is_every_json_key_in_column_order() {
        let v = serde_json::to_value(row("a.cf32", 0)).unwrap();
        let keys: Vec<&str> = v.as_object().unwrap().keys().map(String::as_str).collect();
        let mut header = BURST_CSV_HEADER.to_vec();
        let mut sorted = keys.clone();
        sorted.sort_unstable();
        header.sort_unstable();
        assert_eq!(header, sorted);
    }

    #[test]
    fn csv_cells_quote_per_rfc_4180_and_leave_absent_values_empty() {
        // Source: RFC 4180 §2 (a field with a comma is quoted).
        let text = burst_csv_text(&[row("x.cf32", 3)]);
        let line = text.lines().nth(1).unwrap();
        assert_eq!(
            line,
            "x.cf32,3,4000,0.004,,-12.5,1.5,-12,0.97,24,3.25,29.8,,1024,0,0,0,2048,0,0,0,mmse-dfe,false,\"a,b;c\""
        );
    }

    #[test]
    fn rows_sort_by_path_then_burst_and_round_trip_as_json_lines() {
        let mut rows = vec![row("b.cf32", 0), row("a.cf32", 2), row("a.cf32", 1)];
        sort_burst_rows(&mut rows);
        let order: Vec<(&str, usize)> = rows.iter().map(|r| (r.path.as_str(), r.burst)).collect();
        assert_eq!(order, [("a.cf32", 1), ("a.cf32", 2), ("b.cf32", 0)]);
        let back: Vec<BurstRow> = burst_jsonl_text(&rows)
            .lines()
            .map(|l| serde_json::from_str(l).unwrap())
            .collect();
        assert_eq!(back, rows);
    }
}
