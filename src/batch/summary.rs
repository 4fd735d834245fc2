//! The batch summary: one row per capture, as JSON Lines and as CSV.
//!
//! Takes in: each capture's [`Report`] (or its failure). Gives out:
//! [`SummaryRow`]s and their two serialisations, sorted by relative path so the
//! files are byte-identical whatever the number of workers or the completion
//! order.
//!
//! Columns (CSV header = JSON keys, in this order):
//!
//! | key | meaning |
//! |---|---|
//! | `path` | capture path relative to the batch folder, `/`-separated |
//! | `bytes` | capture size in bytes |
//! | `sha256` | capture SHA-256 (hex) from the report; empty/`null` when it failed |
//! | `verdict` | `pass`, `fail` (a limit failed), `no-training`, `unreadable` (the capture could not be read or decoded) or `error` (any other failure) |
//! | `bursts` | bursts found |
//! | `evm_rms_percent` | RMS EVM over all payload symbols of all bursts, % |
//! | `evm_worst_percent` | worst burst RMS EVM, % |
//! | `mer_db` | MER over all bursts, dB |
//! | `ser` | symbol error rate; empty/`null` when the payload is unknown |
//! | `ber` | bit error rate; empty/`null` when the payload is unknown |
//! | `symbol_errors` | wrong payload symbols over all bursts (count); with `symbols` a fleet SER pools exactly as `Σ symbol_errors / Σ symbols` |
//! | `symbols` | payload symbols judged (count) |
//! | `bit_errors` | wrong payload bits over all bursts (count) |
//! | `bits` | payload bits judged (count) |
//! | `cfo_abs_max_hz` | largest \|CFO\| over bursts, Hz |
//! | `longest_error_run` | longest decision-error run, symbols |
//! | `warnings` | number of warnings (capture and burst level) |
//! | `warning_codes` | the distinct warning codes, sorted, `;`-separated |
//! | `failed_limits` | the limits that failed (profile keys, e.g. `limits.ser_max`), `;`-separated; empty when none |
//! | `format` | sample layout analysed (`ci16_le`, `wav_pcm16`, …) |
//! | `sample_rate_hz` | the capture's sample rate, Hz |
//! | `center_freq_hz` | the capture's centre frequency, Hz; empty/`null` when unknown |
//! | `report` | report path relative to the output folder |
//! | `error` | the problem, when the capture failed |
//!
//! CSV follows RFC 4180 quoting (a field holding `,`, `"`, CR or LF is put in
//! double quotes with inner quotes doubled), UTF-8, `\n` line ends; numbers are
//! written in Rust's shortest round-trip form; absent values are empty fields.

use crate::atomic::{write_atomic, WriteError};
use crate::report::schema::{Report, VerdictResult};
use serde::{Deserialize, Serialize};
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

/// Schema id of one summary row (`iqaudit schema summary-row`); rows do not
/// carry it, the CSV header and the JSON keys are the columns.
pub const SUMMARY_ROW_SCHEMA: &str = "iqaudit.summary-row/2";

/// What became of one capture.
#[derive(
    Debug,
    Clone,
    Copy,
    PartialEq,
    Eq,
    PartialOrd,
    Ord,
    Hash,
    Serialize,
    Deserialize,
    schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum RowVerdict {
    /// Analysed, every limit met.
    Pass,
    /// Analysed, at least one limit failed.
    Fail,
    /// Analysed, no training block found.
    NoTraining,
    /// The capture could not be opened, read or decoded.
    Unreadable,
    /// Any other failure (the analysis or writing the report failed).
    Error,
}

impl RowVerdict {
    /// The kebab-case name used in the summary files.
    pub fn as_str(self) -> &'static str {
        match self {
            RowVerdict::Pass => "pass",
            RowVerdict::Fail => "fail",
            RowVerdict::NoTraining => "no-training",
            RowVerdict::Unreadable => "unreadable",
            RowVerdict::Error => "error",
        }
    }
}

/// One capture's line in the summary; see the module documentation for each key.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct SummaryRow {
    /// Path relative to the batch folder, `/`-separated.
    pub path: String,
    /// Capture size in bytes.
    pub bytes: u64,
    /// Capture SHA-256 (hex), from the report.
    pub sha256: Option<String>,
    /// Outcome.
    pub verdict: RowVerdict,
    /// Bursts found.
    pub bursts: Option<usize>,
    /// RMS EVM over all bursts, %.
    pub evm_rms_percent: Option<f64>,
    /// Worst burst RMS EVM, %.
    pub evm_worst_percent: Option<f64>,
    /// MER over all bursts, dB.
    pub mer_db: Option<f64>,
    /// Symbol error rate (payload known).
    pub ser: Option<f64>,
    /// Bit error rate (payload known).
    pub ber: Option<f64>,
    /// Wrong payload symbols (payload known).
    #[serde(default)]
    pub symbol_errors: Option<u64>,
    /// Payload symbols judged (payload known).
    #[serde(default)]
    pub symbols: Option<u64>,
    /// Wrong payload bits (payload known).
    #[serde(default)]
    pub bit_errors: Option<u64>,
    /// Payload bits judged (payload known).
    #[serde(default)]
    pub bits: Option<u64>,
    /// Largest |CFO| over bursts, Hz.
    pub cfo_abs_max_hz: Option<f64>,
    /// Longest decision-error run, symbols.
    pub longest_error_run: Option<usize>,
    /// Warnings in the report (capture and burst level).
    pub warnings: Option<usize>,
    /// Distinct warning codes, sorted, `;`-separated.
    #[serde(default)]
    pub warning_codes: Option<String>,
    /// Failed limits (profile keys), `;`-separated.
    #[serde(default)]
    pub failed_limits: Option<String>,
    /// Sample layout analysed.
    #[serde(default)]
    pub format: Option<String>,
    /// Sample rate, Hz.
    #[serde(default)]
    pub sample_rate_hz: Option<f64>,
    /// Centre frequency, Hz.
    #[serde(default)]
    pub center_freq_hz: Option<f64>,
    /// Report path relative to the output folder, `/`-separated.
    pub report: Option<String>,
    /// The problem, when the capture failed.
    pub error: Option<String>,
}

/// The CSV header, in column order.
pub const CSV_HEADER: [&str; 24] = [
    "path",
    "bytes",
    "sha256",
    "verdict",
    "bursts",
    "evm_rms_percent",
    "evm_worst_percent",
    "mer_db",
    "ser",
    "ber",
    "symbol_errors",
    "symbols",
    "bit_errors",
    "bits",
    "cfo_abs_max_hz",
    "longest_error_run",
    "warnings",
    "warning_codes",
    "failed_limits",
    "format",
    "sample_rate_hz",
    "center_freq_hz",
    "report",
    "error",
];

impl SummaryRow {
    /// The row of an analysed capture.
    pub fn from_report(path: &str, bytes: u64, report_rel: &str, r: &Report) -> SummaryRow {
        let verdict = match r.verdict.result {
            VerdictResult::Pass => RowVerdict::Pass,
            VerdictResult::Fail => RowVerdict::Fail,
            VerdictResult::NoTraining => RowVerdict::NoTraining,
        };
        let warnings = r.warnings.len() + r.bursts.iter().map(|b| b.warnings.len()).sum::<usize>();
        let codes: std::collections::BTreeSet<String> = r
            .warnings
            .iter()
            .chain(r.bursts.iter().flat_map(|b| b.warnings.iter()))
            .map(|w| w.code.to_string())
            .collect();
        let failed: Vec<&str> = r
            .verdict
            .checks
            .iter()
            .filter(|c| !c.pass)
            .map(|c| c.limit.as_str())
            .collect();
        SummaryRow {
            path: path.to_string(),
            bytes,
            sha256: Some(r.input.sha256.clone()),
            verdict,
            bursts: Some(r.summary.bursts),
            evm_rms_percent: r.summary.evm_rms_percent,
            evm_worst_percent: r.summary.evm_worst_percent,
            mer_db: r.summary.mer_db,
            ser: r.summary.ser.as_ref().map(|e| e.rate),
            ber: r.summary.ber.as_ref().map(|e| e.rate),
            symbol_errors: r.summary.ser.as_ref().map(|e| e.errors),
            symbols: r.summary.ser.as_ref().map(|e| e.trials),
            bit_errors: r.summary.ber.as_ref().map(|e| e.errors),
            bits: r.summary.ber.as_ref().map(|e| e.trials),
            cfo_abs_max_hz: r.summary.cfo_abs_max_hz,
            longest_error_run: Some(r.summary.longest_error_run),
            warnings: Some(warnings),
            warning_codes: Some(codes.into_iter().collect::<Vec<_>>().join(";")),
            failed_limits: Some(failed.join(";")),
            format: Some(r.input.format.clone()),
            sample_rate_hz: Some(r.input.sample_rate_hz),
            center_freq_hz: r.input.center_freq_hz,
            report: Some(report_rel.to_string()),
            error: None,
        }
    }

    /// The row of a capture that failed.
    pub fn failed(path: &str, bytes: u64, verdict: RowVerdict, message: &str) -> SummaryRow {
        SummaryRow {
            path: path.to_string(),
            bytes,
            sha256: None,
            verdict,
            bursts: None,
            evm_rms_percent: None,
            evm_worst_percent: None,
            mer_db: None,
            ser: None,
            ber: None,
            symbol_errors: None,
            symbols: None,
            bit_errors: None,
            bits: None,
            cfo_abs_max_hz: None,
            longest_error_run: None,
            warnings: None,
            warning_codes: None,
            failed_limits: None,
            format: None,
            sample_rate_hz: None,
            center_freq_hz: None,
            report: None,
            error: Some(message.to_string()),
        }
    }

    /// The row's fields as CSV text cells (unquoted), in [`CSV_HEADER`] order.
    pub fn csv_cells(&self) -> [String; 24] {
        fn f(v: Option<f64>) -> String {
            v.map(|x| x.to_string()).unwrap_or_default()
        }
        fn u(v: Option<usize>) -> String {
            v.map(|x| x.to_string()).unwrap_or_default()
        }
        fn n(v: Option<u64>) -> String {
            v.map(|x| x.to_string()).unwrap_or_default()
        }
        [
            self.path.clone(),
            self.bytes.to_string(),
            self.sha256.clone().unwrap_or_default(),
            self.verdict.as_str().to_string(),
            u(self.bursts),
            f(self.evm_rms_percent),
            f(self.evm_worst_percent),
            f(self.mer_db),
            f(self.ser),
            f(self.ber),
            n(self.symbol_errors),
            n(self.symbols),
            n(self.bit_errors),
            n(self.bits),
            f(self.cfo_abs_max_hz),
            u(self.longest_error_run),
            u(self.warnings),
            self.warning_codes.clone().unwrap_or_default(),
            self.failed_limits.clone().unwrap_or_default(),
            self.format.clone().unwrap_or_default(),
            f(self.sample_rate_hz),
            f(self.center_freq_hz),
            self.report.clone().unwrap_or_default(),
            self.error.clone().unwrap_or_default(),
        ]
    }

    /// One JSON line (no trailing newline).
    pub fn to_json_line(&self) -> String {
        // A struct of strings, numbers and options always serialises.
        serde_json::to_string(self).unwrap_or_default()
    }
}

/// Quote one CSV field per RFC 4180 §2 rules 6–7.
pub fn csv_field(s: &str) -> String {
    if s.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

/// Sort rows by path (byte order of the UTF-8 path), the summary's canonical order.
pub fn sort_rows(rows: &mut [SummaryRow]) {
    rows.sort_by(|a, b| a.path.as_bytes().cmp(b.path.as_bytes()));
}

/// The JSON Lines text of `rows` (in the order given).
pub fn jsonl_text(rows: &[SummaryRow]) -> String {
    let mut s = String::new();
    for r in rows {
        s.push_str(&r.to_json_line());
        s.push('\n');
    }
    s
}

/// The CSV text of `rows` (header first, rows in the order given).
pub fn csv_text(rows: &[SummaryRow]) -> String {
    let mut s = CSV_HEADER.join(",");
    s.push('\n');
    for r in rows {
        let cells = r.csv_cells();
        for (i, c) in cells.iter().enumerate() {
            if i > 0 {
                s.push(',');
            }
            let _ = write!(s, "{}", csv_field(c));
        }
        s.push('\n');
    }
    s
}

/// Write `rows` (sorted here) to `jsonl` and `csv`, each atomically.
pub fn write_summaries(
    rows: &mut [SummaryRow],
    jsonl: &Path,
    csv: &Path,
) -> Result<(), WriteError> {
    sort_rows(rows);
    write_atomic(jsonl, jsonl_text(rows).as_bytes())?;
    write_atomic(csv, csv_text(rows).as_bytes())
}

/// Why summaries could not be merged.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum MergeError {
    /// A summary file could not be read.
    #[error("{}: cannot read: {source}", path.display())]
    Read {
        /// The file.
        path: PathBuf,
        /// The OS error.
        source: std::io::Error,
    },
    /// A line is not a summary row.
    #[error("{}: line {line}: not a summary row: {message}", path.display())]
    BadLine {
        /// The file.
        path: PathBuf,
        /// 1-based line number.
        line: usize,
        /// The parser's message.
        message: String,
    },
    /// A line of a per-burst table is not a burst row.
    #[error("{}: line {line}: not a burst row: {message}", path.display())]
    BadBurstLine {
        /// The file.
        path: PathBuf,
        /// 1-based line number.
        line: usize,
        /// The parser's message.
        message: String,
    },
    /// The same capture appears twice (overlapping shards or the same file given twice).
    #[error("{capture}: appears in both {} and {}; shards must not overlap", first.display(), second.display())]
    Duplicate {
        /// The capture's relative path.
        capture: String,
        /// The first summary file holding it.
        first: PathBuf,
        /// The second summary file holding it.
        second: PathBuf,
    },
    /// Writing the merged files failed.
    #[error(transparent)]
    Write(#[from] WriteError),
}

/// Read one JSON Lines file of rows of type `T` (blank lines ignored): a
/// regular file of bounded size only (never /dev/zero or a FIFO); `bad_line`
/// turns (file, 1-based line, parser message) into the caller's error.
pub(crate) fn read_jsonl_rows<T: serde::de::DeserializeOwned>(
    path: &Path,
    bad_line: fn(PathBuf, usize, String) -> MergeError,
) -> Result<Vec<T>, MergeError> {
    let text = crate::limits::read_small_text(path, crate::limits::MAX_SUMMARY_BYTES).map_err(
        |source| MergeError::Read {
            path: path.to_path_buf(),
            source,
        },
    )?;
    let mut rows = Vec::new();
    for (i, line) in text.lines().enumerate() {
        if line.trim().is_empty() {
            continue;
        }
        let row = serde_json::from_str::<T>(line)
            .map_err(|e| bad_line(path.to_path_buf(), i + 1, e.to_string()))?;
        rows.push(row);
    }
    Ok(rows)
}

/// Read the rows of one `summary*.jsonl` file (blank lines ignored).
pub fn read_summary_jsonl(path: &Path) -> Result<Vec<SummaryRow>, MergeError> {
    read_jsonl_rows(path, |path, line, message| MergeError::BadLine {
        path,
        line,
        message,
    })
}

/// Merge per-shard `summary*.jsonl` files into `out_dir/summary.jsonl` and
/// `out_dir/summary.csv` (sorted by path, atomically); a capture present in two
/// inputs is an error. Returns the merged rows.
pub fn merge_summaries(inputs: &[PathBuf], out_dir: &Path) -> Result<Vec<SummaryRow>, MergeError> {
    // Outputs are checked against every input before anything is read.
    let input_refs: Vec<&Path> = inputs.iter().map(PathBuf::as_path).collect();
    for name in ["summary.jsonl", "summary.csv"] {
        crate::atomic::ensure_not_an_input(&out_dir.join(name), &input_refs)?;
    }
    let mut all: Vec<(SummaryRow, usize)> = Vec::new();
    for (k, p) in inputs.iter().enumerate() {
        all.extend(read_summary_jsonl(p)?.into_iter().map(|r| (r, k)));
    }
    all.sort_by(|a, b| a.0.path.as_bytes().cmp(b.0.path.as_bytes()));
    for w in all.windows(2) {
        if w[0].0.path == w[1].0.path {
            return Err(MergeError::Duplicate {
                capture: w[0].0.path.clone(),
                first: inputs[w[0].1].clone(),
                second: inputs[w[1].1].clone(),
            });
        }
    }
    let mut rows: Vec<SummaryRow> = all.into_iter().map(|(r, _)| r).collect();
    std::fs::create_dir_all(out_dir).map_err(|source| WriteError::Io {
        path: out_dir.to_path_buf(),
        source,
    })?;
    write_summaries(
        &mut rows,
        &out_dir.join("summary.jsonl"),
        &out_dir.join("summary.csv"),
    )?;
    Ok(rows)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A slow RFC 4180 reader (state machine over characters) to check the writer.
    pub(crate) fn parse_csv(text: &str) -> Vec<Vec<String>> {
        let mut rows = Vec::new();
        let mut row = Vec::new();
        let mut field = String::new();
        let mut in_quotes = false;
        let mut chars = text.chars().peekable();
        while let Some(c) = chars.next() {
            if in_quotes {
                if c == '"' {
                    if chars.peek() == Some(&'"') {
                        field.push('"');
                        chars.next();
                    } else {
                        in_quotes = false;
                    }
                } else {
                    field.push(c);
                }
            } else {
                match c {
                    '"' => in_quotes = true,
                    ',' => row.push(std::mem::take(&mut field)),
                    '\n' => {
                        row.push(std::mem::take(&mut field));
                        rows.push(std::mem::take(&mut row));
                    }
                    other => field.push(other),
                }
            }
        }
        assert!(
            field.is_empty() && row.is_empty(),
            "text must end with a newline"
        );
        rows
    }

    #[test]
    fn awkward_fields_survive_a_round_trip_through_an_rfc_4180_reader() {
        // Source: RFC 4180 §2 (quoting rules 5–7).
        let msg = "bad header: expected \"RIFF\", found \"RIFX\",\nsecond line\r";
        let rows = vec![
            SummaryRow::failed("a,b/c \"d\".cf32", 17, RowVerdict::Unreadable, msg),
            SummaryRow::failed("plain.cu8", 0, RowVerdict::Error, "empty"),
        ];
        let parsed = parse_csv(&csv_text(&rows));
        assert_eq!(parsed.len(), 3);
        assert_eq!(parsed[0], CSV_HEADER.map(str::to_string).to_vec());
        assert_eq!(parsed[1][0], "a,b/c \"d\".cf32");
        assert_eq!(parsed[1][3], "unreadable");
        assert_eq!(parsed[1][CSV_HEADER.len() - 1], msg);
        assert_eq!(parsed[2][0], "plain.cu8");
        assert!(parsed.iter().all(|r| r.len() == CSV_HEADER.len()));
    }

    #[test]
    fn json_lines_round_trip_and_carry_the_documented_keys() {
        let row = SummaryRow::failed("x/y.ci8", 3, RowVerdict::Unreadable, "truncated");
        let line = row.to_json_line();
        assert!(!line.contains('\n'));
        let v: serde_json::Value = serde_json::from_str(&line).unwrap();
        let keys: Vec<&str> = v.as_object().unwrap().keys().map(String::as_str).collect();
        let mut want = CSV_HEADER.to_vec();
        want.sort_unstable();
        let mut got = keys.clone();
        got.sort_unstable();
        assert_eq!(got, want);
        assert_eq!(serde_json::from_str::<SummaryRow>(&line).unwrap(), row);
    }

    #[test]
    fn rows_sort_by_byte_order_of_the_path() {
        let mut rows: Vec<SummaryRow> = ["b", "a b", "a/b", "a", "Z"]
            .iter()
            .map(|p| SummaryRow::failed(p, 0, RowVerdict::Error, "x"))
            .collect();
        sort_rows(&mut rows);
        let order: Vec<&str> = rows.iter().map(|r| r.path.as_str()).collect();
        assert_eq!(order, ["Z", "a", "a b", "a/b", "b"]);
    }
}
