//! Re-running a recorded report and saying whether every figure reproduces.
//!
//! Takes a report file written by `analyse`/`batch`; parses and checks it
//! ([`parse_recorded_report`]) before any file it names is touched, finds the
//! capture ([`locate_input`]), verifies its SHA-256, re-runs the analysis with
//! the recorded profile and options and gives the figures that differ
//! ([`RecheckResult`]).

use crate::analyse::{analyse_capture, AnalyseOptions, MAX_TRACED_BURSTS};
use crate::capture::SampleFormat;
use crate::profile::ResolvedProfile;
use crate::report::provenance::sha256_file;
use crate::report::schema::{Report, SCHEMA};
use crate::Error;
use std::path::{Path, PathBuf};

/// Where `recheck` finds the capture a report names. An absolute path is used
/// as it is. A relative one is looked up, in this order:
///
/// 1. `from_report` (`input.path_from_report`, recorded by `analyse --report`
///    when its capture path was relative: the capture's path from the
///    report's own folder, see [`path_from_folder`]) in the report's folder;
/// 2. `recorded` (`input.path`) in the report's folder (batch reports record
///    it relative to the folder they are written in);
/// 3. `recorded` relative to the working directory (`analyse` records the
///    path as given on its command line; reports written before
///    `path_from_report` existed).
///
/// So a report rechecks from any working directory, and after the capture and
/// report folders are moved together. The first candidate that exists is used.
pub fn locate_input(report_path: &Path, recorded: &str, from_report: Option<&str>) -> PathBuf {
    let p = PathBuf::from(recorded);
    let mut candidates = Vec::with_capacity(3);
    let dir = report_path
        .parent()
        .filter(|d| !d.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    if let Some(rel) = from_report.map(Path::new).filter(|r| r.is_relative()) {
        candidates.push(dir.join(rel));
    }
    if !p.is_absolute() {
        candidates.push(dir.join(&p));
    }
    candidates.push(p.clone());
    candidates.dedup();
    // `symlink_metadata`: a FIFO or a dangling link there still counts as the
    // file meant (and is then refused by name), rather than silently trying
    // another place.
    if let Some(c) = candidates.iter().find(|c| c.symlink_metadata().is_ok()) {
        return c.clone();
    }
    // A path that was not UTF-8 is recorded lossily (U+FFFD for each bad
    // sequence): find the one file whose name reads the same.
    if recorded.contains('\u{fffd}') {
        if let Some(found) = candidates.iter().find_map(|c| resolve_lossy(c)) {
            return found;
        }
    }
    p
}

/// `p` with every component that holds U+FFFD replaced by the one entry of
/// its folder whose lossy UTF-8 name equals it; `None` when a component has no
/// such entry or more than one (ambiguous).
fn resolve_lossy(p: &Path) -> Option<PathBuf> {
    use std::path::Component;
    let mut cur = PathBuf::new();
    for comp in p.components() {
        match comp {
            Component::Normal(name) if name.to_string_lossy().contains('\u{fffd}') => {
                let dir = if cur.as_os_str().is_empty() {
                    PathBuf::from(".")
                } else {
                    cur.clone()
                };
                let want = name.to_string_lossy();
                let mut found = None;
                for e in std::fs::read_dir(&dir).ok()?.flatten() {
                    if e.file_name().to_string_lossy() == want {
                        if found.is_some() {
                            return None;
                        }
                        found = Some(e.file_name());
                    }
                }
                cur.push(found?);
            }
            other => cur.push(other.as_os_str()),
        }
    }
    cur.symlink_metadata().is_ok().then_some(cur)
}

/// `target` (a path relative to the working directory) as a path relative to
/// `folder`, for recording in a report written in `folder`: both folders are
/// canonicalised (links resolved), the file name is kept as it is. `None` when
/// `target` is absolute (it is recorded as it is) or either folder cannot be
/// resolved.
pub fn path_from_folder(folder: &Path, target: &Path) -> Option<PathBuf> {
    if target.is_absolute() {
        return None;
    }
    let name = target.file_name()?;
    let non_empty = |p: &Path| -> PathBuf {
        if p.as_os_str().is_empty() {
            PathBuf::from(".")
        } else {
            p.to_path_buf()
        }
    };
    let base = std::fs::canonicalize(non_empty(folder)).ok()?;
    let dir = std::fs::canonicalize(non_empty(target.parent()?)).ok()?;
    let b: Vec<_> = base.components().collect();
    let d: Vec<_> = dir.components().collect();
    let common = b.iter().zip(&d).take_while(|(x, y)| x == y).count();
    let mut out = PathBuf::new();
    for _ in common..b.len() {
        out.push("..");
    }
    for c in &d[common..] {
        out.push(c);
    }
    out.push(name);
    Some(out)
}

/// Whether the recorded report says its format came from a SigMF sidecar.
fn format_from_sidecar(report: &Report) -> bool {
    report.input.format_source == crate::report::schema::InputFormatSource::Sigmf
}

/// A capture analysed with its SigMF sidecar must still have it beside it:
/// without it the format, rate and centre frequency would come from elsewhere
/// and every figure would differ for a reason that is not the analysis.
fn check_sidecar(report: &Report, input: &Path) -> Result<(), Error> {
    if !format_from_sidecar(report) {
        return Ok(());
    }
    let mut appended = input.as_os_str().to_owned();
    appended.push(".sigmf-meta");
    let candidates = [input.with_extension("sigmf-meta"), PathBuf::from(appended)];
    if candidates.iter().any(|c| c.is_file()) || !input.is_file() {
        // A missing capture, or one that is not a regular file (a FIFO, a
        // device), is reported by the hash check, naming the capture.
        return Ok(());
    }
    Err(Error::SidecarMissing {
        path: input.to_path_buf(),
        sidecar: candidates[0].clone(),
    })
}

/// Schema id of `recheck --json`'s document.
pub const RECHECK_SCHEMA: &str = "iqaudit.recheck/1";

/// The document `recheck --json` prints (schema [`RECHECK_SCHEMA`]).
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct RecheckDocument {
    /// Always [`RECHECK_SCHEMA`].
    pub schema: String,
    /// Name and version of the program that re-ran the analysis.
    pub tool: crate::report::schema::ToolInfo,
    /// The report file as given.
    pub report: String,
    /// The capture that was re-analysed.
    pub input: String,
    /// True when every figure reproduced.
    pub reproduces: bool,
    /// Numeric figures compared.
    pub figures_compared: usize,
    /// Figures that differ, all counted.
    pub differences_total: usize,
    /// The first differences in document order (at most
    /// [`MAX_KEPT_DIFFERENCES`](crate::report::compare::MAX_KEPT_DIFFERENCES)).
    pub differences: Vec<RecheckDifference>,
}

/// One figure that did not reproduce.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct RecheckDifference {
    /// JSON path of the figure, e.g. `bursts[0].cfo_hz`.
    pub path: String,
    /// Recorded value as compact JSON text, or `absent`.
    pub recorded: String,
    /// Re-computed value as compact JSON text, or `absent`.
    pub recomputed: String,
}

impl RecheckResult {
    /// The `recheck --json` document; `report` names the report file.
    pub fn document(&self, report: &Path) -> RecheckDocument {
        RecheckDocument {
            schema: RECHECK_SCHEMA.into(),
            tool: crate::report::schema::ToolInfo::this(),
            report: report.display().to_string(),
            input: self.input.display().to_string(),
            reproduces: self.differences.is_empty(),
            figures_compared: self.figures,
            differences_total: self.differences.total,
            differences: self
                .differences
                .kept
                .iter()
                .map(|d| RecheckDifference {
                    path: d.path.clone(),
                    recorded: d.recorded.clone(),
                    recomputed: d.recomputed.clone(),
                })
                .collect(),
        }
    }
}

/// What `recheck` found.
#[derive(Debug, Clone)]
pub struct RecheckResult {
    /// The capture that was re-analysed.
    pub input: PathBuf,
    /// Figures that did not reproduce: the first
    /// [`MAX_KEPT_DIFFERENCES`](crate::report::compare::MAX_KEPT_DIFFERENCES)
    /// and the total count (zero when every figure did).
    pub differences: crate::report::compare::Differences,
    /// Number of numeric figures compared.
    pub figures: usize,
}

fn count_numbers(v: &serde_json::Value) -> usize {
    match v {
        serde_json::Value::Number(_) => 1,
        serde_json::Value::Array(a) => a.iter().map(count_numbers).sum(),
        serde_json::Value::Object(o) => o.values().map(count_numbers).sum(),
        _ => 0,
    }
}

/// A report read back for `recheck`, checked before any file it names is touched.
#[derive(Debug, Clone)]
pub struct RecordedReport {
    /// The report as JSON (the figures are compared value by value).
    pub value: serde_json::Value,
    /// The report as typed data.
    pub report: Report,
    /// The resolved profile it recorded, re-validated
    /// ([`ResolvedProfile::validate`]).
    pub profile: ResolvedProfile,
    /// The `--format` override it recorded.
    pub format: Option<SampleFormat>,
}

/// Parse and check report text for `recheck` without touching any other file:
/// valid JSON, schema [`SCHEMA`], every key known, `input.sha256` a
/// 64-digit hex string, the recorded profile usable and within the caps of
/// `crate::limits`, the format override a known format. `report_path` only
/// names the report in errors.
///
/// # Errors
/// [`Error::Report`] naming what is wrong.
pub fn parse_recorded_report(text: &str, report_path: &Path) -> Result<RecordedReport, Error> {
    let bad = |message: String| Error::Report {
        path: report_path.to_path_buf(),
        message,
    };
    // Strict: a key given twice is refused (a plain Value would keep the last).
    let recorded: serde_json::Value =
        crate::json::parse_strict(text).map_err(|e| bad(format!("not valid JSON ({e})")))?;
    let schema = recorded
        .get("schema")
        .and_then(|s| s.as_str())
        .unwrap_or("");
    if schema != SCHEMA {
        let why = if schema.starts_with("iqaudit-report/") || schema.starts_with("iqaudit.report/")
        {
            "written by another iqaudit version; analyse the capture again"
        } else {
            "not an iqaudit report?"
        };
        return Err(bad(format!(
            "schema is '{}', expected '{SCHEMA}' ({why})",
            crate::text::excerpt(schema, 40)
        )));
    }
    // From a borrow: cloning the tree first would hold it twice.
    let report = <Report as serde::Deserialize>::deserialize(&recorded)
        .map_err(|e| bad(format!("does not match the {SCHEMA} schema: {e}")))?;
    if !crate::report::provenance::is_sha256_hex(&report.input.sha256) {
        return Err(bad(format!(
            "input.sha256 '{}' is not a 64-digit hex SHA-256",
            crate::text::excerpt(&report.input.sha256, 70)
        )));
    }
    let profile: ResolvedProfile = serde_json::from_value(report.profile.clone())
        .map_err(|e| bad(format!("the recorded profile is not usable: {e}")))?;
    profile
        .validate()
        .map_err(|e| bad(format!("the recorded profile is not usable: profile.{e}")))?;
    let format = match &report.provenance.format_override {
        Some(name) => Some(name.parse::<SampleFormat>().map_err(|_| {
            bad(format!(
                "provenance.format_override '{}' is not a format",
                crate::text::excerpt(name, 40)
            ))
        })?),
        None => None,
    };
    if report.provenance.traced_bursts > MAX_TRACED_BURSTS {
        return Err(bad(format!(
            "provenance.traced_bursts {} is above the cap {MAX_TRACED_BURSTS}",
            report.provenance.traced_bursts
        )));
    }
    if let Some(r) = report.provenance.sample_rate_override_hz {
        if let Err(expected) = crate::limits::check_rate_hz(r) {
            return Err(bad(format!(
                "provenance.sample_rate_override_hz {} is not a usable rate (expected {expected})",
                crate::limits::show_number(r)
            )));
        }
    }
    Ok(RecordedReport {
        value: recorded,
        report,
        profile,
        format,
    })
}

/// Re-run the analysis recorded in a report and compare every figure exactly.
///
/// # Errors
/// [`Error::Report`] when the report cannot be read or is not an
/// [`SCHEMA`] document (see [`parse_recorded_report`]); [`Error::Io`]
/// when the capture is missing; [`Error::InputChanged`] when its SHA-256 differs
/// from the recorded one; and any error of [`analyse_capture`].
pub fn recheck(report_path: &Path) -> Result<RecheckResult, Error> {
    recheck_with(report_path, false, &|_| {})
}

/// [`recheck`], with the opt-in for symbols files outside the report's folder
/// and `notice`, called with every file the recheck will read (the capture,
/// the sidecar it may use, the symbols files) after the report is checked and
/// before any of them is opened.
///
/// # Errors
/// As [`recheck`]; a symbols file outside the report's folder without
/// `allow_outside_symbols` is an [`Error::Profile`].
pub fn recheck_with(
    report_path: &Path,
    allow_outside_symbols: bool,
    notice: &dyn Fn(&[PathBuf]),
) -> Result<RecheckResult, Error> {
    let bad = |message: String| Error::Report {
        path: report_path.to_path_buf(),
        message,
    };
    let text = crate::limits::read_small_text(report_path, crate::limits::MAX_REPORT_BYTES)
        .map_err(|source| Error::Io {
            path: report_path.to_path_buf(),
            source,
        })?;
    let RecordedReport {
        value: recorded,
        report,
        profile,
        format,
    } = parse_recorded_report(&text, report_path)?;
    drop(text);
    let report_dir = match report_path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d,
        _ => Path::new("."),
    };
    if !allow_outside_symbols {
        crate::profile::check_symbols_files_inside(&profile, report_dir).map_err(|e| {
            Error::Profile(crate::profile::ProfileError::InFile {
                path: report_path.to_path_buf(),
                source: Box::new(e),
            })
        })?;
    }
    let input = locate_input(
        report_path,
        &report.input.path,
        report.input.path_from_report.as_deref(),
    );
    check_sidecar(&report, &input)?;
    // The digest is of the sample data: a `.sigmf-meta` path stands for its
    // `.sigmf-data`, as in `analyse`.
    let data = crate::capture::data_path_of(&input);
    let mut reads = vec![data.clone()];
    reads.extend(
        crate::profile::symbols_files(&profile)
            .into_iter()
            .map(|(_, p)| p),
    );
    notice(&reads);
    let found = sha256_file(&data).map_err(|source| Error::Io {
        path: data.clone(),
        source,
    })?;
    if !found.eq_ignore_ascii_case(&report.input.sha256) {
        return Err(Error::InputChanged {
            path: data,
            expected: report.input.sha256.clone(),
            found,
        });
    }
    let opts = AnalyseOptions {
        format,
        sample_rate_hz: report.provenance.sample_rate_override_hz,
        command: report.command.clone(),
        input_sha256: Some(found),
        traced_bursts: Some(report.provenance.traced_bursts),
        skip_input_hash: false,
    };
    let recorded_path = report.input.path.clone();
    let recorded_from_report = report.input.path_from_report.clone();
    drop(report);
    let mut again = analyse_capture(&input, &profile, &opts)?;
    again.input.path = recorded_path;
    again.input.path_from_report = recorded_from_report;
    // Burst by burst: one JSON tree (the recorded one) in memory, not two.
    let differences = crate::report::compare::report_differences(&recorded, again, &["command"])
        .map_err(|e| bad(e.to_string()))?;
    Ok(RecheckResult {
        input,
        differences,
        figures: count_numbers(&recorded),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_path_from_a_folder_climbs_to_the_common_ancestor() {
        // cargo runs unit tests in the package root, where both folders exist.
        let rel = path_from_folder(Path::new("tests/integration"), Path::new("src/lib.rs"));
        assert_eq!(rel, Some(PathBuf::from("../../src/lib.rs")));
        let beside = path_from_folder(Path::new("src"), Path::new("src/lib.rs"));
        assert_eq!(beside, Some(PathBuf::from("lib.rs")));
        let abs = std::env::current_dir().unwrap().join("src/lib.rs");
        assert_eq!(
            path_from_folder(Path::new("src"), &abs),
            None,
            "absolute stays"
        );
    }

    #[test]
    fn a_relative_capture_path_is_found_beside_the_report_first() {
        let dir = tempfile::tempdir().unwrap();
        let d = dir.path();
        std::fs::create_dir_all(d.join("out")).unwrap();
        std::fs::write(d.join("c.ci16"), b"").unwrap();
        let found = locate_input(&d.join("out/r.json"), "../c.ci16", None);
        assert_eq!(found, d.join("out/../c.ci16"));
        // Not beside the report: left relative to the working directory.
        assert_eq!(
            locate_input(&d.join("out/r.json"), "nowhere.ci16", None),
            PathBuf::from("nowhere.ci16")
        );
    }

    #[cfg(unix)]
    #[test]
    fn a_lossily_recorded_name_finds_the_one_file_it_stands_for() {
        use std::os::unix::ffi::OsStrExt;
        let dir = tempfile::tempdir().unwrap();
        let d = dir.path();
        let name = std::ffi::OsStr::from_bytes(b"c\xff.ci16");
        std::fs::write(d.join(name), b"").unwrap();
        let recorded = d.join(name).to_string_lossy().into_owned();
        assert_eq!(
            locate_input(&d.join("r.json"), &recorded, None),
            d.join(name)
        );
        // Two names that read the same: ambiguous, not guessed.
        std::fs::write(d.join(std::ffi::OsStr::from_bytes(b"c\xfe.ci16")), b"").unwrap();
        assert_eq!(
            locate_input(&d.join("r.json"), &recorded, None),
            PathBuf::from(&recorded)
        );
    }

    #[test]
    fn the_path_from_the_report_folder_is_tried_first_and_only_when_relative() {
        // `analyse --report` in folder A of `in/c.ci16` writes
        // path "in/c.ci16" (from A) and path_from_report "../in/c.ci16" (from
        // A/out, the report's folder).
        let dir = tempfile::tempdir().unwrap();
        let d = dir.path();
        std::fs::create_dir_all(d.join("out")).unwrap();
        std::fs::create_dir_all(d.join("in")).unwrap();
        std::fs::write(d.join("in/c.ci16"), b"").unwrap();
        let r = d.join("out/r.json");
        assert_eq!(
            locate_input(&r, "in/c.ci16", Some("../in/c.ci16")),
            d.join("out/../in/c.ci16")
        );
        // Absent there: the older candidates, in order.
        assert_eq!(
            locate_input(&r, "in/c.ci16", Some("gone.ci16")),
            PathBuf::from("in/c.ci16")
        );
        // An absolute path_from_report is not used.
        let abs = d.join("in/c.ci16").display().to_string();
        assert_eq!(
            locate_input(&r, "nowhere.ci16", Some(&abs)),
            PathBuf::from("nowhere.ci16")
        );
    }
}
