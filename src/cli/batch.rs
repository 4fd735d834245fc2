//! `iqaudit batch`: argument types and the thin glue that runs the library's
//! batch machinery with the single-capture analysis as its job.
//!
//! Exit codes (decided by `iqaudit::batch::BatchOutcome::exit_code`): 0 every
//! capture analysed and within limits; 1 some limit failed or some capture had
//! no training block; 2 some capture could not be read or analysed, or the batch
//! could not run (bad folder, output not writable, no captures); 130 / 143
//! interrupted by SIGINT / SIGTERM after writing the summary of what completed.

use std::path::{Path, PathBuf};

use clap::Args;
use iqaudit::analyse::{analyse_capture, AnalyseOptions};
use iqaudit::batch::{
    exit_code_for_rows, merge_summaries, profile_sha256, run_batch, BatchOptions, Glob, JobFailure,
    ProgressMode, Shard,
};
use iqaudit::profile::load_profile_with;
use iqaudit::Error;

use super::Outcome;

/// Arguments of `iqaudit batch`.
#[derive(Debug, Args)]
pub struct BatchArgs {
    /// Folder walked recursively for captures.
    ///
    /// Captures are files ending in .cf32 .cfile .cf64 .ci16 .cs16 .ci8 .cs8 .cu8
    /// .wav .sigmf-data, or .bin .raw .iq .dat (format from the profile or a
    /// SigMF sidecar). Sidecars and *.profile.json / *.truth.json /
    /// *.report.json files are not captures.
    #[arg(required_unless_present = "merge")]
    pub dir: Option<PathBuf>,

    /// Link profile (JSON) applied to every capture.
    #[arg(long, short = 'p', value_name = "P", required_unless_present = "merge")]
    pub profile: Option<PathBuf>,

    /// Output folder: OUT/<relative path>.report.json per capture, plus summary.jsonl and summary.csv.
    ///
    /// Created if missing and checked writable before any capture is read.
    #[arg(long, short = 'o', value_name = "OUT")]
    pub out: PathBuf,

    /// Worker threads (default: all cores). The summary is identical for any value.
    #[arg(long, short = 'j', value_name = "N")]
    pub jobs: Option<usize>,

    /// Only the captures of shard K of N (1-based), by a stable hash of the relative path.
    ///
    /// N machines each running one shard over the same folder cover every capture
    /// once; the summary files are then named summary.shard-K-of-N.*. See
    /// docs/scaling.md.
    #[arg(long, value_name = "K/N", value_parser = parse_shard)]
    pub shard: Option<Shard>,

    /// Re-analyse captures whose report is already up to date.
    ///
    /// Without it, a capture whose report exists with the same input SHA-256 and
    /// the same resolved profile is skipped and its summary row rebuilt.
    #[arg(long)]
    pub force: bool,

    /// Only captures whose relative path matches PATTERN (repeatable; any match).
    ///
    /// `*` and `?` stay within one folder, `**/` spans folders, `[1-3]` and
    /// `[!0]` are character classes, `{cf32,ci16}` alternatives, `\` escapes;
    /// a pattern without `/` is matched against the file name. A malformed
    /// pattern (unclosed `[` or `{`) is refused.
    #[arg(long = "glob", value_name = "PATTERN", value_parser = parse_glob)]
    pub globs: Vec<Glob>,

    /// Print only the final line on stderr.
    #[arg(long, short = 'q')]
    pub quiet: bool,

    /// Raw sample format for every capture, overriding the profile, sidecars and extensions.
    #[arg(long, short = 'f', value_name = "F")]
    pub format: Option<String>,

    /// Zero point of unsigned samples (cu8/cu16/cu32): symmetric or power_of_two.
    ///
    /// Overrides the profile's `capture.unsigned_zero` and is recorded in the
    /// report's profile, so `recheck` reads the samples the same way.
    /// `symmetric` (the default) puts zero at (2^bits − 1)/2, 127.5 for cu8;
    /// `power_of_two` at 2^(bits−1), 128 for cu8, as the SigMF reference library does.
    #[arg(long, value_name = "Z", value_parser = super::parse_unsigned_zero)]
    pub unsigned_zero: Option<iqaudit::UnsignedZero>,

    /// Sample rate in Hz for every capture, overriding the profile and the files.
    #[arg(long, value_name = "HZ", value_parser = super::parse_rate)]
    pub sample_rate: Option<f64>,

    /// Merge per-shard summary*.jsonl files into OUT/summary.jsonl and OUT/summary.csv instead of analysing.
    ///
    /// Fails if a capture appears in two files.
    /// Read symbols files named by the profile even outside the profile's folder.
    #[arg(long)]
    pub allow_outside_symbols: bool,

    #[arg(long, value_name = "SUMMARY.jsonl", num_args = 1.., conflicts_with_all = ["dir", "profile", "shard", "force", "globs", "format", "unsigned_zero", "sample_rate", "jobs"])]
    pub merge: Vec<PathBuf>,

    /// Also write each analysed capture's bursts as SigMF annotations, as
    /// `analyse --annotate` does: `new` (default) to CAPTURE.annotations.sigmf-meta
    /// beside the capture in the input folder, `sidecar` into its own sidecar.
    /// A capture whose report is reused (up to date) keeps the annotations
    /// written when it was analysed; --force writes them again.
    #[arg(long, value_name = "WHERE", num_args = 0..=1, default_missing_value = "new")]
    pub annotate: Option<super::analyse::AnnotateTo>,
}

fn parse_shard(s: &str) -> Result<Shard, String> {
    s.parse::<Shard>().map_err(|e| e.to_string())
}

fn parse_glob(s: &str) -> Result<Glob, String> {
    Glob::new(s).map_err(|e| e.to_string())
}

/// The job's failure for an analysis error: read/decode problems are
/// `unreadable`, the rest `error`; the path prefix is dropped (the batch adds
/// the relative path).
fn to_failure(path: &Path, e: Error) -> JobFailure {
    let text = e.to_string();
    let prefix = format!("{}: ", path.display());
    let message = text.strip_prefix(&prefix).unwrap_or(&text).to_string();
    match e {
        Error::Capture(_) | Error::Io { .. } => JobFailure::unreadable(message),
        _ => JobFailure::other(message),
    }
}

/// Run `iqaudit batch`.
pub fn run_batch_cmd(args: &BatchArgs, argv: &[String]) -> Result<Outcome, Error> {
    if !args.merge.is_empty() {
        let rows = merge_summaries(&args.merge, &args.out)?;
        let (burst_rows, tables) =
            iqaudit::batch::bursts::merge_burst_tables(&args.merge, &args.out)?;
        eprintln!(
            "batch: merged {} rows from {} summaries into {}",
            rows.len(),
            args.merge.len(),
            args.out.join("summary.csv").display()
        );
        if tables > 0 {
            eprintln!(
                "batch: merged {burst_rows} burst rows from {tables} per-burst tables into {}",
                args.out.join("bursts.csv").display()
            );
        }
        return Ok(Outcome::Exit(exit_code_for_rows(&rows)));
    }
    let (Some(dir), Some(profile_path)) = (&args.dir, &args.profile) else {
        return Err(Error::Usage {
            message: "batch needs DIR and --profile (or --merge)".to_string(),
        });
    };
    let format = super::parse_format_arg(args.format.as_deref(), dir)?;
    let mut profile = load_profile_with(profile_path, args.allow_outside_symbols)?;
    if let Some(z) = args.unsigned_zero {
        profile.capture.unsigned_zero = Some(z);
    }
    let sha = profile_sha256(&profile).map_err(|e| Error::Usage {
        message: format!("{}: {e}", profile_path.display()),
    })?;
    let mut opts = BatchOptions::new(dir, &args.out, &sha);
    opts.jobs = super::analyse::checked_jobs(args.jobs)?.unwrap_or(0);
    opts.shard = args.shard;
    opts.force = args.force;
    opts.globs = args.globs.clone();
    opts.progress = if args.quiet {
        ProgressMode::Quiet
    } else {
        ProgressMode::Auto
    };
    opts.format_override = format.map(|f| f.name().to_string());
    opts.sample_rate_override_hz = args.sample_rate;
    // The first SIGINT/SIGTERM stops handing out captures (running ones finish
    // and are written whole); a second deletes every temporary file and exits
    // with 128 + signal. Without handlers a Ctrl-C still stops the batch.
    let cancel = opts.cancel.clone();
    let _ = iqaudit::atomic::remove_temps_on_signal(Some(Box::new(move |sig| {
        cancel.request(sig);
        true
    })));
    let aopts = AnalyseOptions {
        format,
        sample_rate_hz: args.sample_rate,
        command: argv.to_vec(),
        input_sha256: None,
        traced_bursts: None,
        skip_input_hash: false,
    };
    let outcome = run_batch(&opts, |p, known_sha256| {
        // A digest the resume check already computed is passed through, so the
        // capture is not read a second time just to hash it.
        let with_digest;
        let aopts = match known_sha256 {
            None => &aopts,
            Some(d) => {
                with_digest = AnalyseOptions {
                    input_sha256: Some(d.to_string()),
                    ..aopts.clone()
                };
                &with_digest
            }
        };
        let report = analyse_capture(p, &profile, aopts).map_err(|e| to_failure(p, e))?;
        if let Some(to) = args.annotate {
            iqaudit::analyse::write_burst_annotations(p, &profile, aopts, &report, to.target())
                .map_err(|e| to_failure(p, e))?;
        }
        Ok(report)
    })?;
    Ok(Outcome::Exit(outcome.exit_code()))
}

#[cfg(test)]
mod tests {
    use super::super::{Cli, Command};
    use clap::Parser;

    #[test]
    fn batch_parses_every_flag() {
        let cli = Cli::try_parse_from([
            "iqaudit",
            "batch",
            "field",
            "--profile",
            "p.json",
            "--out",
            "o",
            "--jobs",
            "3",
            "--shard",
            "2/8",
            "--force",
            "--glob",
            "*.cf32",
            "--glob",
            "a/**",
            "--quiet",
        ])
        .unwrap();
        let Command::Batch(a) = cli.command else {
            panic!("not batch")
        };
        assert_eq!(a.dir.as_deref(), Some(std::path::Path::new("field")));
        assert_eq!(a.jobs, Some(3));
        assert_eq!(a.shard.map(|s| (s.index, s.count)), Some((2, 8)));
        assert!(a.force && a.quiet);
        assert_eq!(a.globs.len(), 2);
    }

    #[test]
    fn batch_refuses_a_bad_shard_and_a_missing_profile() {
        assert!(Cli::try_parse_from([
            "iqaudit", "batch", "d", "-p", "p", "-o", "o", "--shard", "9/8"
        ])
        .is_err());
        assert!(Cli::try_parse_from(["iqaudit", "batch", "d", "-o", "o"]).is_err());
    }

    #[test]
    fn batch_merge_needs_no_folder_but_refuses_analysis_flags() {
        let cli = Cli::try_parse_from([
            "iqaudit", "batch", "--merge", "a.jsonl", "b.jsonl", "--out", "m",
        ])
        .unwrap();
        let Command::Batch(a) = cli.command else {
            panic!("not batch")
        };
        assert_eq!(a.merge.len(), 2);
        assert!(
            Cli::try_parse_from(["iqaudit", "batch", "d", "--merge", "a.jsonl", "-o", "m"])
                .is_err()
        );
    }
}
