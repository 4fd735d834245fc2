//! Batch analysis: every capture under a folder, in parallel, with one report
//! per capture and a sorted summary.
//!
//! Takes in: a folder, an output folder, [`BatchOptions`] and the per-capture
//! job (in the product, the single-capture analysis; any
//! `Fn(&Path, Option<&str>) -> Result<Report, JobFailure>` here, so the
//! machinery is tested with fake jobs). The job's second argument is the
//! capture's SHA-256 when the batch has already read the whole file to decide
//! whether an existing report is up to date (see [`run_batch`]). Gives out: `OUT/<relative path>.report.json` for each
//! capture (written atomically), `OUT/summary.jsonl` and `OUT/summary.csv`
//! (see [`summary`] for the columns), the per-burst table `OUT/bursts.jsonl`
//! and `OUT/bursts.csv` (one row per burst of every analysed capture; see
//! [`bursts`]) and a [`BatchOutcome`].
//!
//! How it runs:
//!
//! 1. The output folder is created and checked writable before anything else
//!    (fail fast, [`BatchError::OutputNotWritable`]).
//! 2. The folder is walked ([`walk`] says which files are captures; `--glob`
//!    narrows), the output folder itself is left out, and `--shard K/N` keeps
//!    the captures whose stable path hash falls in shard K ([`shard`]).
//! 3. Captures go to a rayon pool of `jobs` workers, one capture per task; no
//!    lock is held while a job runs (only around appending a line to the
//!    progress log or printing a line), so many small files scale with workers.
//!    A capture whose report already exists with the same input SHA-256 and
//!    the same resolved-profile SHA-256 is not re-run (its row is rebuilt from
//!    the report) unless [`BatchOptions::force`]. The file is hashed only when
//!    a report with the same profile and size exists; if the digest then
//!    differs, it is handed to the job, so each capture is read for its hash
//!    at most once per run.
//! 4. A capture that fails — unreadable, empty, corrupt, unknown format, or a
//!    job that panics — becomes a row with its error message and a
//!    `path: problem` line on stderr; the batch goes on.
//! 5. Each finished row is appended at once to `OUT/.progress.jsonl`, so a crash
//!    keeps what was done; at the end the rows, sorted by path, are written
//!    atomically to the summary files and the per-burst tables (byte-identical
//!    for any `jobs`) and the progress log is removed. Unless quiet, every
//!    capture that failed a limit is listed with the limits it failed.
//! 6. Memory holds the list of candidate paths, one summary row per capture and
//!    one burst row (≈ 300 bytes) per burst; the job streams the capture itself.
//!
//! With `--shard K/N` the summary files are named `summary.shard-K-of-N.jsonl`
//! / `.csv`, the burst tables `bursts.shard-K-of-N.jsonl` / `.csv` (and the log
//! `.progress.shard-K-of-N.jsonl`), so all shards can share one output folder;
//! [`merge_summaries`] joins them.
//!
//! # Exit classes ([`BatchOutcome::exit_code`])
//!
//! | code | meaning |
//! |---|---|
//! | 0 | every capture analysed and within limits |
//! | 1 | every capture analysed, but some failed a limit or had no training block |
//! | 2 | some capture could not be read or analysed (`unreadable` / `error` rows); also every [`BatchError`]: bad folder, output not writable, no captures found, summary not written |
//! | 130 / 143 | interrupted by SIGINT / SIGTERM (128 + signal): the summary of what completed was written; captures not started have no row |
//!
//! Code 2 wins over 1. (The single-capture `analyse` uses 3 for "no training
//! block"; a batch folds it into 1 and the summary names each such capture.)

pub mod bursts;
pub mod cancel;
pub mod glob;
pub mod progress;
pub mod shard;
pub mod summary;
pub mod walk;

pub use bursts::BurstRow;
pub use cancel::CancelFlag;
pub use glob::{Glob, GlobError};
pub use progress::ProgressMode;
pub use shard::{shard_of, Shard, ShardParseError};
pub use summary::{merge_summaries, MergeError, RowVerdict, SummaryRow};

use crate::atomic::{ensure_not_an_input, write_atomic, AtomicFile, WriteError};
use crate::report::schema::Report;
use progress::Progress;
use rayon::prelude::*;
use std::fs::{self, File};
use std::io::{self, Write};
use std::path::{Path, PathBuf};
use std::sync::Mutex;
use walk::Entry;

pub use crate::report::provenance::sha256_file;

pub use crate::report::provenance::{profile_sha256, report_json};

/// What kind of failure a job had; decides the row's verdict and the exit class.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[non_exhaustive]
pub enum FailureKind {
    /// The capture could not be opened, read or decoded (empty, truncated,
    /// corrupt header, unknown format): verdict `unreadable`.
    Unreadable,
    /// Anything else: verdict `error`.
    Other,
}

/// A job's failure on one capture. The message should not repeat the path (the
/// batch prints `path: message`).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct JobFailure {
    /// Which kind.
    pub kind: FailureKind,
    /// What went wrong, for people.
    pub message: String,
}

impl JobFailure {
    /// An unreadable capture.
    pub fn unreadable(message: impl Into<String>) -> JobFailure {
        JobFailure {
            kind: FailureKind::Unreadable,
            message: message.into(),
        }
    }

    /// Any other failure.
    pub fn other(message: impl Into<String>) -> JobFailure {
        JobFailure {
            kind: FailureKind::Other,
            message: message.into(),
        }
    }
}

/// Everything a batch needs besides the job.
#[derive(Debug, Clone)]
pub struct BatchOptions {
    /// The folder walked for captures.
    pub input_dir: PathBuf,
    /// Where reports and summaries go (created if missing).
    pub out_dir: PathBuf,
    /// Worker threads; 0 = all cores (rayon's default, `RAYON_NUM_THREADS` honoured).
    pub jobs: usize,
    /// Only this shard's captures.
    pub shard: Option<Shard>,
    /// Re-run captures whose report is up to date.
    pub force: bool,
    /// Only captures matching any of these (all when empty).
    pub globs: Vec<Glob>,
    /// What goes to stderr.
    pub progress: ProgressMode,
    /// SHA-256 of the resolved profile, as the job writes it in
    /// `report.provenance.profile_sha256`; used to decide whether a report is up to date.
    pub profile_sha256: String,
    /// The sample-format override the job applies (`report.provenance.format_override`);
    /// a report made with a different override is not reused.
    pub format_override: Option<String>,
    /// The sample-rate override the job applies, Hz (`report.provenance.sample_rate_override_hz`).
    pub sample_rate_override_hz: Option<f64>,
    /// Set to stop handing out captures (signals, tests).
    pub cancel: CancelFlag,
}

impl BatchOptions {
    /// Options with the defaults: all cores, no shard, no force, no glob, automatic progress.
    pub fn new(input_dir: &Path, out_dir: &Path, profile_sha256: &str) -> BatchOptions {
        BatchOptions {
            input_dir: input_dir.to_path_buf(),
            out_dir: out_dir.to_path_buf(),
            jobs: 0,
            shard: None,
            force: false,
            globs: Vec::new(),
            progress: ProgressMode::Auto,
            profile_sha256: profile_sha256.to_string(),
            format_override: None,
            sample_rate_override_hz: None,
            cancel: CancelFlag::new(),
        }
    }

    /// Path of the JSON Lines summary for these options.
    pub fn summary_jsonl_path(&self) -> PathBuf {
        self.out_dir.join(format!("summary{}.jsonl", self.tag()))
    }

    /// Path of the CSV summary for these options.
    pub fn summary_csv_path(&self) -> PathBuf {
        self.out_dir.join(format!("summary{}.csv", self.tag()))
    }

    /// Path of the per-burst JSON Lines table for these options.
    pub fn bursts_jsonl_path(&self) -> PathBuf {
        self.out_dir.join(format!("bursts{}.jsonl", self.tag()))
    }

    /// Path of the per-burst CSV table for these options.
    pub fn bursts_csv_path(&self) -> PathBuf {
        self.out_dir.join(format!("bursts{}.csv", self.tag()))
    }

    /// Path of the progress log (removed when the summary is written).
    pub fn progress_log_path(&self) -> PathBuf {
        self.out_dir.join(format!(".progress{}.jsonl", self.tag()))
    }

    fn tag(&self) -> String {
        self.shard
            .map(|s| format!(".{}", s.file_tag()))
            .unwrap_or_default()
    }
}

/// How many captures ended which way.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct BatchCounts {
    /// Captures in this run (after `--glob` and `--shard`).
    pub total: usize,
    /// Analysed now (the job ran and the report was written).
    pub analysed: usize,
    /// Skipped because the report was up to date (row rebuilt from it).
    pub skipped: usize,
    /// Verdict pass (analysed or skipped).
    pub passed: usize,
    /// Verdict fail.
    pub failed_limits: usize,
    /// Verdict no-training.
    pub no_training: usize,
    /// Verdict unreadable.
    pub unreadable: usize,
    /// Verdict error.
    pub errors: usize,
    /// Not started because the batch was interrupted.
    pub not_started: usize,
    /// Files under the folder that are not captures or do not match `--glob`.
    pub ignored_files: usize,
    /// Captures left to other shards.
    pub other_shards: usize,
}

/// The result of a batch that ran (per-capture failures included).
#[derive(Debug, Clone)]
pub struct BatchOutcome {
    /// The counts.
    pub counts: BatchCounts,
    /// The signal that interrupted the batch, if any.
    pub interrupted: Option<i32>,
    /// The rows written, sorted by path.
    pub rows: Vec<SummaryRow>,
    /// The JSON Lines summary written.
    pub summary_jsonl: PathBuf,
    /// The CSV summary written.
    pub summary_csv: PathBuf,
    /// The per-burst JSON Lines table written.
    pub bursts_jsonl: PathBuf,
    /// The per-burst CSV table written.
    pub bursts_csv: PathBuf,
    /// Rows in the per-burst table.
    pub burst_rows: usize,
}

impl BatchOutcome {
    /// The process exit code; see the module documentation.
    pub fn exit_code(&self) -> u8 {
        if let Some(sig) = self.interrupted {
            return u8::try_from(128 + sig.clamp(1, 127)).unwrap_or(2);
        }
        exit_code_of(&self.counts)
    }
}

/// The exit class of a finished summary (e.g. merged shards): 2 if any row is
/// `unreadable` or `error`, else 1 if any is `fail` or `no-training`, else 0.
pub fn exit_code_for_rows(rows: &[SummaryRow]) -> u8 {
    let mut c = BatchCounts::default();
    for r in rows {
        match r.verdict {
            RowVerdict::Pass => c.passed += 1,
            RowVerdict::Fail => c.failed_limits += 1,
            RowVerdict::NoTraining => c.no_training += 1,
            RowVerdict::Unreadable => c.unreadable += 1,
            RowVerdict::Error => c.errors += 1,
        }
    }
    exit_code_of(&c)
}

fn exit_code_of(c: &BatchCounts) -> u8 {
    if c.unreadable + c.errors > 0 {
        2
    } else if c.failed_limits + c.no_training > 0 {
        1
    } else {
        0
    }
}

/// Why a batch could not run at all (exit class 2).
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum BatchError {
    /// The batch folder cannot be listed.
    #[error("{}: cannot list the batch folder: {source}", path.display())]
    InputFolder {
        /// The folder.
        path: PathBuf,
        /// The OS error.
        source: io::Error,
    },
    /// Nothing to do.
    #[error("{}: no captures found{hint}", path.display())]
    NoCaptures {
        /// The folder.
        path: PathBuf,
        /// What was looked for.
        hint: String,
    },
    /// The output folder cannot be created or written.
    #[error("{}: output folder is not writable: {source}", path.display())]
    OutputNotWritable {
        /// The folder.
        path: PathBuf,
        /// The OS error.
        source: io::Error,
    },
    /// A summary file could not be written, or would overwrite an input.
    #[error(transparent)]
    Write(#[from] WriteError),
    /// The worker pool could not be started.
    #[error("cannot start {jobs} worker threads: {message}")]
    ThreadPool {
        /// Workers asked for.
        jobs: usize,
        /// rayon's message.
        message: String,
    },
}

impl BatchError {
    /// Always 2 (bad usage or unreadable input).
    pub fn exit_code(&self) -> u8 {
        2
    }
}

/// Run a batch, printing progress and messages on stderr. See the module
/// documentation.
///
/// The per-capture job is called as `job(path, known_sha256)` and returns the
/// capture's report. `known_sha256` is the file's SHA-256 (lowercase hex) when
/// the batch already computed it while checking an existing report, so the job
/// need not read the file again to hash it; `None` when the batch did not hash
/// it. The report must be the same either way.
pub fn run_batch<F>(opts: &BatchOptions, job: F) -> Result<BatchOutcome, BatchError>
where
    F: Fn(&Path, Option<&str>) -> Result<Report, JobFailure> + Sync,
{
    run_batch_with_messages(opts, job, Box::new(io::stderr()))
}

/// [`run_batch`] with the line messages (modes `Lines` and `Quiet`) sent to
/// `messages` instead of stderr; progress bars always draw on stderr.
pub fn run_batch_with_messages<F>(
    opts: &BatchOptions,
    job: F,
    messages: Box<dyn Write + Send>,
) -> Result<BatchOutcome, BatchError>
where
    F: Fn(&Path, Option<&str>) -> Result<Report, JobFailure> + Sync,
{
    let root = &opts.input_dir;
    fs::read_dir(root).map_err(|source| BatchError::InputFolder {
        path: root.clone(),
        source,
    })?;
    check_writable(&opts.out_dir)?;
    let out_canon = fs::canonicalize(&opts.out_dir).ok();
    let found = walk::walk(root, out_canon.as_deref(), &opts.globs).map_err(|source| {
        BatchError::InputFolder {
            path: root.clone(),
            source,
        }
    })?;
    if found.entries.is_empty() {
        let globs: Vec<&str> = opts.globs.iter().map(Glob::as_str).collect();
        let hint = format!(
            " (looked for *.{}{}; {} other files ignored)",
            walk::CAPTURE_EXTENSIONS.join(", *."),
            if globs.is_empty() {
                String::new()
            } else {
                format!(" matching --glob {}", globs.join(" or "))
            },
            found.ignored
        );
        return Err(BatchError::NoCaptures {
            path: root.clone(),
            hint,
        });
    }
    let mut counts = BatchCounts {
        ignored_files: found.ignored,
        ..BatchCounts::default()
    };
    let entries: Vec<Entry> = match opts.shard {
        None => found.entries,
        Some(s) => {
            let n = found.entries.len();
            let mine: Vec<Entry> = found
                .entries
                .into_iter()
                .filter(|e| s.contains(&e.rel))
                .collect();
            counts.other_shards = n - mine.len();
            mine
        }
    };
    counts.total = entries.len();

    let jsonl_path = opts.summary_jsonl_path();
    let csv_path = opts.summary_csv_path();
    let log_path = opts.progress_log_path();
    let bursts_jsonl = opts.bursts_jsonl_path();
    let bursts_csv = opts.bursts_csv_path();
    {
        let inputs: Vec<&Path> = entries.iter().map(|e| e.full.as_path()).collect();
        for p in [
            &jsonl_path,
            &csv_path,
            &log_path,
            &bursts_jsonl,
            &bursts_csv,
        ] {
            ensure_not_an_input(p, &inputs)?;
        }
    }
    let log = File::create(&log_path).map_err(|source| BatchError::OutputNotWritable {
        path: log_path.clone(),
        source,
    })?;
    let log = Mutex::new(log);

    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(opts.jobs)
        .thread_name(|i| format!("iqaudit-batch-{i}"))
        .build()
        .map_err(|e| BatchError::ThreadPool {
            jobs: opts.jobs,
            message: e.to_string(),
        })?;
    let total_bytes = entries.iter().map(|e| e.bytes).sum();
    let progress = Progress::new(
        opts.progress,
        entries.len() as u64,
        total_bytes,
        pool.current_num_threads(),
        messages,
    );

    let results: Vec<Option<(SummaryRow, Vec<BurstRow>, bool)>> = pool.install(|| {
        entries
            .par_iter()
            .with_max_len(1)
            .map(|e| {
                if opts.cancel.is_cancelled() {
                    return None;
                }
                let worker = rayon::current_thread_index();
                progress.start(worker, &e.rel);
                let (row, bursts, reused) = process_one(opts, e, &job);
                append_log(&log, &row);
                progress.finish(worker, &row, reused);
                Some((row, bursts, reused))
            })
            .collect()
    });

    let mut rows = Vec::with_capacity(results.len());
    let mut burst_rows = Vec::new();
    for (row, bursts, reused) in results.into_iter().flatten() {
        burst_rows.extend(bursts);
        match row.verdict {
            RowVerdict::Pass => counts.passed += 1,
            RowVerdict::Fail => counts.failed_limits += 1,
            RowVerdict::NoTraining => counts.no_training += 1,
            RowVerdict::Unreadable => counts.unreadable += 1,
            RowVerdict::Error => counts.errors += 1,
        }
        if row.report.is_some() {
            if reused {
                counts.skipped += 1;
            } else {
                counts.analysed += 1;
            }
        }
        rows.push(row);
    }
    counts.not_started = counts.total - rows.len();
    let interrupted = opts.cancel.signal();

    progress.clear();
    summary::write_summaries(&mut rows, &jsonl_path, &csv_path)?;
    bursts::write_burst_tables(&mut burst_rows, &bursts_jsonl, &bursts_csv)?;
    drop(log);
    let _ = fs::remove_file(&log_path);

    for line in failed_limit_lines(&rows) {
        progress.hint(&line);
    }
    for hint in hints(&counts) {
        progress.hint(&hint);
    }
    progress.line(&final_line(&counts, interrupted, &csv_path));
    Ok(BatchOutcome {
        counts,
        interrupted,
        rows,
        summary_jsonl: jsonl_path,
        summary_csv: csv_path,
        bursts_jsonl,
        bursts_csv,
        burst_rows: burst_rows.len(),
    })
}

fn check_writable(out_dir: &Path) -> Result<(), BatchError> {
    let not_writable = |source| BatchError::OutputNotWritable {
        path: out_dir.to_path_buf(),
        source,
    };
    fs::create_dir_all(out_dir).map_err(not_writable)?;
    // Creating (and dropping, which removes) a temporary file proves we can write there.
    match AtomicFile::create(&out_dir.join(".iqaudit-write-check")) {
        Ok(f) => {
            drop(f);
            Ok(())
        }
        Err(WriteError::Io { source, .. }) => Err(not_writable(source)),
        Err(e) => Err(BatchError::Write(e)),
    }
}

fn append_log(log: &Mutex<File>, row: &SummaryRow) {
    let mut line = row.to_json_line();
    line.push('\n');
    if let Ok(mut f) = log.lock() {
        // One write per line; the log only helps after a crash, so a failure
        // to append does not stop the batch.
        let _ = f.write_all(line.as_bytes());
    }
}

/// `OUT/<rel>.report.json` and its `/`-separated relative form.
fn report_paths(out_dir: &Path, e: &Entry) -> (PathBuf, String) {
    let mut os = out_dir.join(&e.rel_os).into_os_string();
    os.push(".report.json");
    (PathBuf::from(os), format!("{}.report.json", e.rel))
}

/// One capture: reuse its report, or run the job and write the report.
/// Returns the row and whether the report was reused.
fn process_one<F>(opts: &BatchOptions, e: &Entry, job: &F) -> (SummaryRow, Vec<BurstRow>, bool)
where
    F: Fn(&Path, Option<&str>) -> Result<Report, JobFailure> + Sync,
{
    if let Some(msg) = &e.walk_error {
        return (
            SummaryRow::failed(&e.rel, e.bytes, RowVerdict::Unreadable, msg),
            Vec::new(),
            false,
        );
    }
    let (report_path, report_rel) = report_paths(&opts.out_dir, e);
    let fail = |verdict, msg: &str| {
        (
            SummaryRow::failed(&e.rel, e.bytes, verdict, msg),
            Vec::new(),
            false,
        )
    };
    if let Err(err) = ensure_not_an_input(&report_path, &[&e.full]) {
        return fail(RowVerdict::Error, &err.to_string());
    }
    let mut known_sha256 = None;
    if !opts.force {
        match try_reuse(opts, e, &report_path, &report_rel) {
            Reuse::UpToDate(row, bursts) => return (*row, bursts, true),
            Reuse::Stale { sha256 } => known_sha256 = sha256,
        }
    }
    let outcome = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
        job(&e.full, known_sha256.as_deref())
    }));
    let report = match outcome {
        Ok(Ok(r)) => r,
        Ok(Err(f)) => {
            let verdict = match f.kind {
                FailureKind::Unreadable => RowVerdict::Unreadable,
                FailureKind::Other => RowVerdict::Error,
            };
            return fail(verdict, &f.message);
        }
        Err(panic) => {
            let what = panic
                .downcast_ref::<&str>()
                .map(|s| s.to_string())
                .or_else(|| panic.downcast_ref::<String>().cloned())
                .unwrap_or_else(|| "unknown panic".to_string());
            return fail(
                RowVerdict::Error,
                &format!("internal error (please report it): {what}"),
            );
        }
    };
    let mut report = report;
    let written = report_path
        .parent()
        .map_or(Ok(()), |parent| {
            fs::create_dir_all(parent)
                .map_err(|err| format!("{}: cannot create folder: {err}", parent.display()))?;
            // Recorded relative to the report's own folder, so `recheck`
            // finds the capture from any working directory.
            if let Some(rel) = crate::recheck::path_from_folder(parent, &e.full) {
                report.input.path = rel.to_string_lossy().into_owned();
            }
            Ok(())
        })
        .and_then(|()| report_json(&report).map_err(|e| e.to_string()))
        .and_then(|bytes| write_atomic(&report_path, &bytes).map_err(|err| err.to_string()));
    match written {
        Ok(()) => (
            SummaryRow::from_report(&e.rel, e.bytes, &report_rel, &report),
            BurstRow::from_report(&e.rel, &report),
            false,
        ),
        Err(msg) => fail(RowVerdict::Error, &format!("report not written: {msg}")),
    }
}

/// Whether an existing report can stand for a fresh analysis.
enum Reuse {
    /// Made from the same bytes with the same resolved profile: its rows.
    UpToDate(Box<SummaryRow>, Vec<BurstRow>),
    /// Missing, unreadable or stale; `sha256` is the capture's digest when it
    /// was computed to find that out (passed on to the job).
    Stale { sha256: Option<String> },
}

/// Check the existing report of `e`. The capture is hashed only when the
/// report's profile, overrides and input size all match.
fn try_reuse(opts: &BatchOptions, e: &Entry, report_path: &Path, report_rel: &str) -> Reuse {
    let stale = Reuse::Stale { sha256: None };
    let Ok(text) = crate::limits::read_small_text(report_path, crate::limits::MAX_REPORT_BYTES)
    else {
        return stale;
    };
    let Ok(report) = serde_json::from_str::<Report>(&text) else {
        return stale;
    };
    let p = &report.provenance;
    if p.profile_sha256 != opts.profile_sha256
        || p.format_override != opts.format_override
        || p.sample_rate_override_hz != opts.sample_rate_override_hz
        || report.input.size_bytes != e.bytes
    {
        return stale;
    }
    let Ok(sha) = sha256_file(&e.full) else {
        return stale;
    };
    if sha == report.input.sha256 {
        Reuse::UpToDate(
            Box::new(SummaryRow::from_report(
                &e.rel, e.bytes, report_rel, &report,
            )),
            BurstRow::from_report(&e.rel, &report),
        )
    } else {
        Reuse::Stale { sha256: Some(sha) }
    }
}

/// One line per capture that failed a limit, naming the limits (every one,
/// whatever the progress mode but quiet, so a terminal run lists them all).
fn failed_limit_lines(rows: &[SummaryRow]) -> Vec<String> {
    let failed: Vec<&SummaryRow> = rows
        .iter()
        .filter(|r| r.verdict == RowVerdict::Fail)
        .collect();
    if failed.is_empty() {
        return Vec::new();
    }
    let mut lines = vec![format!(
        "failed limits ({} capture{}):",
        failed.len(),
        if failed.len() == 1 { "" } else { "s" }
    )];
    for r in failed {
        let limits = r.failed_limits.as_deref().unwrap_or("").replace(';', ", ");
        lines.push(format!(
            "  {}: {}",
            crate::text::escape_controls(&r.path),
            limits
        ));
    }
    lines
}

fn hints(c: &BatchCounts) -> Vec<String> {
    let mut h = Vec::new();
    let done = c.analysed + c.skipped;
    if done == 0 && c.total > c.not_started && c.unreadable + c.errors > 0 {
        h.push(
            "hint: no capture could be analysed; check that the profile's capture format and \
             sample rate match the files (or add SigMF sidecars)"
                .to_string(),
        );
    }
    if c.no_training > 0 {
        h.push(format!(
            "hint: {} capture{} had no training block; check the profile's training section and \
             search threshold against the sync_metric trace in a report",
            c.no_training,
            if c.no_training == 1 { "" } else { "s" }
        ));
    }
    h
}

fn final_line(c: &BatchCounts, interrupted: Option<i32>, csv: &Path) -> String {
    let mut s = String::from("batch: ");
    if let Some(sig) = interrupted {
        let name = match sig {
            cancel::SIGINT => "SIGINT".to_string(),
            cancel::SIGTERM => "SIGTERM".to_string(),
            n => format!("signal {n}"),
        };
        s.push_str(&format!(
            "interrupted by {name}, {} of {} captures not started; ",
            c.not_started, c.total
        ));
    }
    s.push_str(&format!(
        "{} captures: {} analysed, {} skipped (report up to date), {} passed, {} failed limits, \
         {} no training, {} unreadable, {} other errors",
        c.total,
        c.analysed,
        c.skipped,
        c.passed,
        c.failed_limits,
        c.no_training,
        c.unreadable,
        c.errors
    ));
    if c.ignored_files > 0 || c.other_shards > 0 {
        s.push_str(&format!(
            " ({} other files ignored, {} captures in other shards)",
            c.ignored_files, c.other_shards
        ));
    }
    s.push_str(&format!("; summary {}", csv.display()));
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sha256_file_matches_the_fips_180_4_examples_across_buffer_boundaries() {
        // Source: FIPS 180-4 / NIST CSRC example values: SHA-256("abc") and
        // SHA-256 of one million 'a' characters. That file fits in one buffer,
        // so a 3·2^20 + 5 byte file checks the chaining against sha2's one-shot
        // digest as well.
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("abc");
        fs::write(&p, b"abc").unwrap();
        assert_eq!(
            sha256_file(&p).unwrap(),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
        let p = dir.path().join("million-a");
        fs::write(&p, vec![b'a'; 1_000_000]).unwrap();
        assert_eq!(
            sha256_file(&p).unwrap(),
            "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0"
        );
        let big: Vec<u8> = (0..(3 * (1 << 20) + 5)).map(|i| (i % 251) as u8).collect();
        let p = dir.path().join("big");
        fs::write(&p, &big).unwrap();
        assert_eq!(
            sha256_file(&p).unwrap(),
            crate::report::provenance::sha256_bytes(&big)
        );
        let p = dir.path().join("empty");
        fs::write(&p, b"").unwrap();
        // Source: FIPS 180-4 (SHA-256 of the empty message), NIST example values.
        assert_eq!(
            sha256_file(&p).unwrap(),
            "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855"
        );
    }

    #[test]
    fn exit_classes_follow_the_documented_precedence() {
        let mut c = BatchCounts {
            total: 3,
            passed: 3,
            ..Default::default()
        };
        assert_eq!(exit_code_of(&c), 0);
        c.no_training = 1;
        assert_eq!(exit_code_of(&c), 1);
        c.no_training = 0;
        c.failed_limits = 1;
        assert_eq!(exit_code_of(&c), 1);
        c.unreadable = 1;
        assert_eq!(exit_code_of(&c), 2);
        c.unreadable = 0;
        c.errors = 1;
        assert_eq!(exit_code_of(&c), 2);
    }
}
