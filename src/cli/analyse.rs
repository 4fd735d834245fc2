//! `iqaudit analyse` / `analyze` and `iqaudit recheck`: argument types and the
//! thin glue that turns them into library calls and output files.

use std::io::Write;
use std::path::{Path, PathBuf};

use clap::Args;
use iqaudit::analyse::{analyse_capture, AnalyseOptions};
use iqaudit::atomic::{ensure_not_an_input, write_atomic};
use iqaudit::profile::load_profile_with;
use iqaudit::recheck::recheck_with;
use iqaudit::report::plots::write_plots;
use iqaudit::report::schema::{Report, VerdictResult};
use iqaudit::{Constellation, Error};

use super::Outcome;

/// Arguments of `iqaudit analyse`.
#[derive(Debug, Args)]
pub struct AnalyseArgs {
    /// The capture file (raw, WAV, or SigMF .sigmf-data/.sigmf-meta).
    pub capture: PathBuf,

    /// Link profile (JSON). Default: CAPTURE.profile.json beside the capture.
    ///
    /// The profile says how the signal was built: samples per symbol, pulse,
    /// training block, payload, equaliser settings, search settings and limits.
    /// `iqaudit profile new` prints a complete example.
    #[arg(long, short = 'p', value_name = "P")]
    pub profile: Option<PathBuf>,

    /// Write the JSON report here (atomically; never over the capture); `-` prints it on stdout.
    #[arg(long, short = 'r', value_name = "R.json")]
    pub report: Option<PathBuf>,

    /// Write SVG plots and an offline index.html into this folder.
    #[arg(long, value_name = "DIR")]
    pub plots: Option<PathBuf>,

    /// Print the JSON report on stdout instead of the summary.
    #[arg(long)]
    pub json: bool,

    /// Raw sample format, overriding the profile, a SigMF sidecar and the extension.
    ///
    /// Any complex SigMF datatype name: ci8, cu8, ci16_le, ci16_be, cu16_le,
    /// cu16_be, ci32_le, ci32_be, cu32_le, cu32_be, cf32_le, cf32_be, cf64_le,
    /// cf64_be.
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

    /// Sample rate in Hz, overriding the profile and the file.
    #[arg(long, value_name = "HZ", value_parser = super::parse_rate)]
    pub sample_rate: Option<f64>,

    /// Worker threads (default: all cores). Results are identical for any value.
    #[arg(long, short = 'j', value_name = "N")]
    pub jobs: Option<usize>,

    /// Read symbols files named by the profile even outside the profile's folder.
    ///
    /// Without it, a `symbols_file` training or known payload must lie inside
    /// the folder of the profile (also of `CAPTURE.profile.json` when that is
    /// used), so a profile from someone else cannot make the tool read, and
    /// quote from, an arbitrary file.
    #[arg(long)]
    pub allow_outside_symbols: bool,

    /// Write the detected bursts as SigMF annotations (start, length, label,
    /// band edges from the CFO and roll-off, and the burst's EVM/MER/SER/verdict
    /// under the `iqaudit:` extension).
    ///
    /// `new` (the default when no value is given) writes them, atomically, to a
    /// new sidecar CAPTURE.annotations.sigmf-meta beside the data file, which names
    /// the data in `core:dataset`; `sidecar` adds them to the input's own SigMF
    /// sidecar (annotations of other programs are kept). See docs/sigmf.md.
    #[arg(long, value_name = "WHERE", num_args = 0..=1, default_missing_value = "new")]
    pub annotate: Option<AnnotateTo>,

    /// Keep plot traces for the first K bursts and the K worst by RMS EVM
    /// (default 8, at most 1000; 0 keeps none). Other bursts report `trace: null`.
    #[arg(long, value_name = "K")]
    pub traced_bursts: Option<usize>,
}

/// Where `--annotate` writes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum AnnotateTo {
    /// A new sidecar CAPTURE.annotations.sigmf-meta (the input is not touched).
    New,
    /// The input's own SigMF sidecar.
    Sidecar,
}

impl AnnotateTo {
    /// The library's target.
    pub fn target(self) -> iqaudit::capture::AnnotationTarget {
        match self {
            AnnotateTo::New => iqaudit::capture::AnnotationTarget::NewSidecar,
            AnnotateTo::Sidecar => iqaudit::capture::AnnotationTarget::InputSidecar,
        }
    }
}

/// Arguments of `iqaudit recheck`.
#[derive(Debug, Args)]
pub struct RecheckArgs {
    /// A report written by `iqaudit analyse --report`.
    pub report: PathBuf,

    /// List at most N differing figures in text mode (the total is always given).
    #[arg(long, value_name = "N", default_value_t = 20)]
    pub max_listed: usize,

    /// Print the result as one JSON object (schema `iqaudit.recheck/1`, `iqaudit schema recheck`) on stdout.
    ///
    /// Keys: `schema`, `tool` {name, version}, `report`, `input`, `reproduces`,
    /// `figures_compared`, `differences_total`, `differences` (the first 1000 in
    /// document order, each {path, recorded, recomputed} as compact JSON text).
    #[arg(long)]
    pub json: bool,

    /// Read symbols files the recorded profile names even outside the report's folder.
    ///
    /// Without it, every symbols file must lie inside the folder of the report,
    /// so a report from someone else cannot make the tool read an arbitrary file.
    #[arg(long)]
    pub allow_outside_symbols: bool,
}

fn outcome_of(report: &Report) -> Outcome {
    match report.verdict.result {
        VerdictResult::Pass => Outcome::Ok,
        VerdictResult::Fail => Outcome::LimitFailed,
        VerdictResult::NoTraining => Outcome::NoTrainingFound,
    }
}

fn stdout_err(source: std::io::Error) -> Error {
    Error::Io {
        path: PathBuf::from("<stdout>"),
        source,
    }
}

/// Every file an analysis of `capture` with `profile` may read: the capture as
/// named, its data file when a `.sigmf-meta` path is given, both SigMF sidecar
/// names and the profile. No output may be written over any of them.
fn input_paths(capture: &Path, profile: &Path) -> Vec<PathBuf> {
    let mut with_meta = capture.as_os_str().to_owned();
    with_meta.push(".sigmf-meta");
    vec![
        capture.to_path_buf(),
        capture.with_extension("sigmf-data"),
        capture.with_extension("sigmf-meta"),
        PathBuf::from(with_meta),
        profile.to_path_buf(),
    ]
}

/// Fail early when an output could not be written, would replace an input, or
/// is not a regular file (links, folders, FIFOs, devices, `-` are refused).
fn check_output(path: &Path, inputs: &[&Path]) -> Result<(), Error> {
    ensure_not_an_input(path, inputs)?;
    iqaudit::atomic::ensure_replaceable(path)?;
    let dir = match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d,
        _ => Path::new("."),
    };
    if !dir.is_dir() {
        return Err(Error::Usage {
            message: format!(
                "{}: the folder for this output does not exist",
                path.display()
            ),
        });
    }
    Ok(())
}

/// The `--jobs` value checked against [`iqaudit::limits::max_jobs`].
pub(crate) fn checked_jobs(jobs: Option<usize>) -> Result<Option<usize>, Error> {
    jobs.map(|n| iqaudit::limits::check_jobs(n).map_err(|message| Error::Usage { message }))
        .transpose()
}

/// Run `iqaudit analyse`.
pub fn run_analyse(
    args: &AnalyseArgs,
    argv: &[String],
    color: super::conventions::ColorWhen,
) -> Result<Outcome, Error> {
    // `--report -` is the JSON on stdout (as `--json`), not a file named `-`.
    let report_to_stdout = args.report.as_deref() == Some(Path::new("-"));
    let report_file = args.report.as_deref().filter(|_| !report_to_stdout);
    let json_out = args.json || report_to_stdout;
    let profile_path = iqaudit::analyse::profile_path_for(&args.capture, args.profile.as_deref())?;
    let format = super::parse_format_arg(args.format.as_deref(), &args.capture)?;
    let inputs = input_paths(&args.capture, &profile_path);
    let inputs: Vec<&Path> = inputs.iter().map(PathBuf::as_path).collect();
    if let Some(r) = report_file {
        check_output(r, &inputs)?;
    }
    if let Some(d) = &args.plots {
        let others: Vec<&Path> = report_file.into_iter().collect();
        iqaudit::atomic::ensure_plots_dir_clear(d, &inputs, &others)?;
    }
    let jobs = checked_jobs(args.jobs)?;
    let mut profile = load_profile_with(&profile_path, args.allow_outside_symbols)?;
    if let Some(z) = args.unsigned_zero {
        profile.capture.unsigned_zero = Some(z);
    }
    let opts = AnalyseOptions {
        format,
        sample_rate_hz: args.sample_rate,
        command: argv.to_vec(),
        input_sha256: None,
        traced_bursts: args.traced_bursts,
        // The digest appears in the JSON (file or stdout) and on the plots'
        // index page; the terminal summary does not show it.
        skip_input_hash: args.report.is_none() && !json_out && args.plots.is_none(),
    };
    let run = || analyse_capture(&args.capture, &profile, &opts);
    let report = match jobs {
        Some(n) => rayon::ThreadPoolBuilder::new()
            .num_threads(n.max(1))
            .build()
            .map_err(|e| Error::Usage {
                message: format!("--jobs {n}: cannot start the worker threads ({e})"),
            })?
            .install(run)?,
        None => run()?,
    };
    let mut report = report;
    if let Some(r) = report_file {
        // So `recheck` finds a relatively named capture from any working
        // directory: its path from the report's own folder.
        let folder = r.parent().unwrap_or(Path::new(""));
        report.input.path_from_report = iqaudit::recheck::path_from_folder(folder, &args.capture)
            .map(|p| p.to_string_lossy().into_owned());
    }
    // Serialise only when a JSON form is asked for (a file or stdout): on a
    // capture with thousands of bursts it is a noticeable share of the run.
    let json = if args.report.is_some() || json_out || args.plots.is_some() {
        iqaudit::report::provenance::report_json(&report).map_err(|e| stdout_err(e.into()))?
    } else {
        Vec::new()
    };
    if let Some(r) = report_file {
        write_atomic(r, &json)?;
    }
    if let Some(d) = &args.plots {
        let ideal = Constellation::new(profile.payload.modulation);
        write_plots(
            &report,
            ideal.points(),
            report.provenance.threshold,
            d,
            &json,
        )?;
    }
    if let Some(to) = args.annotate {
        let written = iqaudit::analyse::write_burst_annotations(
            &args.capture,
            &profile,
            &opts,
            &report,
            to.target(),
        )?;
        eprintln!(
            "iqaudit: {} burst annotation(s) written to {}",
            report.bursts.len(),
            iqaudit::text::escaped_path(&written)
        );
    }
    // Warnings go to stderr in every mode (stdout carries only the data).
    for w in iqaudit::report::text::warning_lines(&report) {
        eprintln!(
            "iqaudit: {}: {}",
            iqaudit::text::escaped_path(&args.capture),
            iqaudit::text::escape_controls(&w)
        );
    }
    let mut out = std::io::stdout().lock();
    if json_out {
        out.write_all(&json).map_err(stdout_err)?;
    } else {
        let colour = super::conventions::colour_stdout(color);
        out.write_all(iqaudit::report::text::render_without_warnings(&report, colour).as_bytes())
            .map_err(stdout_err)?;
    }
    out.flush().map_err(stdout_err)?;
    Ok(outcome_of(&report))
}

/// Run `iqaudit recheck`.
pub fn run_recheck(args: &RecheckArgs) -> Result<Outcome, Error> {
    let notice = |files: &[PathBuf]| {
        let names: Vec<String> = files
            .iter()
            .map(|p| iqaudit::text::escaped_path(p))
            .collect();
        eprintln!("iqaudit: recheck will read: {}", names.join(", "));
    };
    let r = recheck_with(&args.report, args.allow_outside_symbols, &notice)?;
    let mut out = std::io::stdout().lock();
    let text = if args.json {
        let mut t = serde_json::to_string_pretty(&r.document(&args.report))
            .map_err(|e| stdout_err(e.into()))?;
        t.push('\n');
        t
    } else if r.differences.is_empty() {
        format!(
            "every figure reproduces: {} numbers in {} match a fresh analysis of {}\n",
            r.figures,
            iqaudit::text::escaped_path(&args.report),
            iqaudit::text::escaped_path(&r.input)
        )
    } else {
        let total = r.differences.total;
        let mut s = format!(
            "{total} figure(s) in {} do not reproduce:\n",
            iqaudit::text::escaped_path(&args.report),
        );
        let shown = r.differences.kept.iter().take(args.max_listed);
        let listed = shown.len();
        for d in shown {
            s.push_str(&format!(
                "  {}\n",
                iqaudit::text::escape_controls(&d.to_string())
            ));
        }
        if listed < total {
            s.push_str(&format!(
                "  … and {} more (--max-listed N lists more; --json gives the first {})\n",
                total - listed,
                iqaudit::report::compare::MAX_KEPT_DIFFERENCES
            ));
        }
        s
    };
    out.write_all(text.as_bytes()).map_err(stdout_err)?;
    out.flush().map_err(stdout_err)?;
    Ok(if r.differences.is_empty() {
        Outcome::Ok
    } else {
        Outcome::Differs
    })
}
