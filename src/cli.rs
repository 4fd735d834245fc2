//! Command-line types (clap derive) and their conversion into library calls.
//!
//! Takes in: parsed arguments. Gives out: an [`Outcome`] or an [`iqaudit::Error`];
//! [`exit_code`] is the one place that turns either into the process exit code
//! (0 analysed and within limits, 1 a limit failed, 2 bad usage or unreadable
//! input, 3 no training block found, 4 the capture was read but its analysis
//! failed). Data goes to stdout, messages and progress
//! to stderr as `iqaudit: <file>: <problem>`.

use std::io::{IsTerminal, Write};
use std::path::PathBuf;
use std::process::ExitCode;

use clap::{Args, Parser, Subcommand};
use iqaudit::capture::stats::{capture_stats, info_report, InfoReport, StatsOptions};
use iqaudit::{Capture, CaptureError, Error, OpenOptions, SampleFormat};

mod analyse;
mod batch;
mod conventions;
mod docs;
mod profile_synth;
use analyse::{AnalyseArgs, RecheckArgs};
use batch::BatchArgs;
use conventions::ColorWhen;
use docs::{CompletionsArgs, ManArgs, SchemaArgs};
use profile_synth::{ProfileArgs, SynthArgs};

/// Audit recorded baseband IQ captures.
#[derive(Debug, Parser)]
#[command(name = "iqaudit", version, about)]
pub struct Cli {
    /// The command to run.
    #[command(subcommand)]
    pub command: Command,

    /// Colour the terminal output: auto (a terminal, unless NO_COLOR is set and
    /// not empty; CLICOLOR_FORCE forces it), always or never.
    #[arg(long, global = true, value_enum, value_name = "WHEN", default_value_t = ColorWhen::Auto)]
    pub color: ColorWhen,
}

/// The commands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Analyse one capture: find the training, fit the channel, equalise, report.
    #[command(visible_alias = "analyze")]
    Analyse(Box<AnalyseArgs>),
    /// Analyse every capture under a folder in parallel: one report each plus a summary.
    Batch(Box<BatchArgs>),
    /// Re-run the analysis recorded in a report and say whether every figure reproduces.
    Recheck(RecheckArgs),
    /// Describe what is in a capture: format, length, power, DC, clipping, bandwidth.
    Info(InfoArgs),
    /// Print an example link profile, or check one and print it with defaults filled in.
    Profile(ProfileArgs),
    /// Make a test capture with known ground truth (FILE + FILE.truth.json).
    Synth(Box<SynthArgs>),
    /// Print the JSON Schema of a document iqaudit writes (report, info, summary-row, burst-row, synth-truth, recheck).
    Schema(SchemaArgs),
    /// Print a shell completion script (bash, zsh, fish, elvish, powershell).
    Completions(CompletionsArgs),
    /// Print the man page (roff), or write one per command into a folder.
    Man(ManArgs),
}

/// Arguments of `iqaudit info`.
#[derive(Debug, Args)]
pub struct InfoArgs {
    /// The capture file (raw, WAV, or SigMF .sigmf-data/.sigmf-meta).
    pub capture: PathBuf,

    /// Raw sample format: any complex SigMF datatype (cf32_le, ci16_le, cu8, …).
    ///
    /// Overrides a SigMF sidecar and the file extension (a WAV file is always
    /// read by its header). Names are the SigMF datatype names: cf32_le, cf32_be,
    /// cf64_le, cf64_be, ci32_le, ci32_be, ci16_le, ci16_be, ci8, cu32_le,
    /// cu32_be, cu16_le, cu16_be, cu8.
    #[arg(long, short = 'f', value_name = "F")]
    pub format: Option<String>,

    /// Zero point of unsigned samples (cu8/cu16/cu32): symmetric or power_of_two.
    ///
    /// `symmetric` (the default) puts zero at the mid-code (2^bits − 1)/2, 127.5
    /// for cu8, so codes 0 and 255 are −1.0 and +1.0; `power_of_two` puts it at
    /// 2^(bits−1), 128 for cu8, as the SigMF reference library does.
    #[arg(long, value_name = "Z", value_parser = parse_unsigned_zero)]
    pub unsigned_zero: Option<iqaudit::UnsignedZero>,

    /// Sample rate in Hz (needed for durations and bandwidths in Hz).
    ///
    /// Overrides a SigMF sidecar's core:sample_rate and the WAV header's rate.
    #[arg(long, value_name = "HZ", value_parser = parse_rate)]
    pub sample_rate: Option<f64>,

    /// Swap I and Q after reading (mirrors the spectrum).
    ///
    /// For recordings whose I and Q channels were wired or stored the other way
    /// round.
    #[arg(long)]
    pub swap_iq: bool,

    /// Centre frequency in Hz, overriding a SigMF sidecar's core:frequency.
    ///
    /// Only labels the spectrum (absolute frequencies); the figures do not
    /// depend on it.
    #[arg(long, value_name = "HZ", value_parser = parse_center_freq)]
    pub center_freq: Option<f64>,

    /// Print one JSON object (schema iqaudit.info/2) instead of text.
    ///
    /// The keys are documented in the library's `InfoReport` type and in
    /// `iqaudit schema info`.
    #[arg(long)]
    pub json: bool,

    /// Write the spectrum and power-over-time plots and an index.html here.
    ///
    /// `psd.svg` (Welch PSD in dBFS/Hz around the centre frequency, occupied
    /// bandwidth and spurs marked) and `power.svg` (min/mean/max power over the
    /// whole capture). The folder is created if needed.
    #[arg(long, value_name = "DIR")]
    pub plots: Option<PathBuf>,

    /// Link profile: with `--plots`, find the bursts (a full analysis) and
    /// mark each on the power plot, and draw the profile's spectral mask on
    /// the spectrum.
    ///
    /// The capture is then read twice (statistics, then the analysis). The
    /// profile's capture keys apply as in `analyse`; this command's
    /// `--format`, `--sample-rate`, `--swap-iq` and `--unsigned-zero` win.
    #[arg(long, short = 'p', value_name = "P", requires = "plots")]
    pub profile: Option<PathBuf>,
}

/// Parse `--unsigned-zero`.
pub(crate) fn parse_unsigned_zero(s: &str) -> Result<iqaudit::UnsignedZero, String> {
    s.parse()
}

fn parse_rate(s: &str) -> Result<f64, String> {
    match s.trim().parse::<f64>() {
        Ok(v) if iqaudit::limits::check_rate_hz(v).is_ok() => Ok(v),
        _ => Err(format!(
            "'{s}' is not a sample rate in Hz (expected {})",
            iqaudit::limits::check_rate_hz(f64::NAN).unwrap_err()
        )),
    }
}

fn parse_center_freq(s: &str) -> Result<f64, String> {
    match s.trim().parse::<f64>() {
        Ok(v) if v > 0.0 && iqaudit::limits::check_frequency_hz(v).is_ok() => Ok(v),
        _ => Err(format!(
            "'{s}' is not a centre frequency in Hz (expected a finite number in (0, 1e12])"
        )),
    }
}

/// How a command ended when it did not fail.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Outcome {
    /// Analysed; every limit held (or there were none).
    Ok,
    /// Analysed, but a limit failed.
    LimitFailed,
    /// Analysed, but no training block was found.
    NoTrainingFound,
    /// `recheck`: some figure did not reproduce.
    Differs,
    /// `batch`: the exit code its outcome decided (see `iqaudit::batch`).
    Exit(u8),
}

/// The command line as recorded in reports and truth files: the program name
/// without its path, then every argument as given. Arguments that are not
/// UTF-8 are recorded lossily (invalid bytes become U+FFFD); the paths
/// themselves are used exactly as given (clap keeps them as `OsString`).
pub fn recorded_argv() -> Vec<String> {
    std::iter::once("iqaudit".to_string())
        .chain(
            std::env::args_os()
                .skip(1)
                .map(|a| a.to_string_lossy().into_owned()),
        )
        .collect()
}

/// Run one command.
pub fn run(cli: Cli) -> Result<Outcome, Error> {
    let argv = recorded_argv;
    // The worker pool is sized from the environment before any work: a huge
    // RAYON_NUM_THREADS is refused like a huge --jobs.
    iqaudit::limits::check_thread_env(std::env::var_os("RAYON_NUM_THREADS").as_deref())
        .map_err(|message| Error::Usage { message })?;
    // Commands that write files delete their temporary files on SIGINT/SIGTERM
    // (batch installs its own, cooperative, handler).
    let plain_signals = || {
        let _ = iqaudit::atomic::remove_temps_on_signal(None);
    };
    match cli.command {
        Command::Analyse(args) => {
            plain_signals();
            analyse::run_analyse(&args, &argv(), cli.color)
        }
        Command::Batch(args) => batch::run_batch_cmd(&args, &argv()),
        Command::Recheck(args) => analyse::run_recheck(&args),
        Command::Info(args) => {
            plain_signals();
            run_info(&args)
        }
        Command::Profile(args) => profile_synth::run_profile(&args),
        Command::Schema(args) => docs::run_schema(&args),
        Command::Completions(args) => docs::run_completions(&args),
        Command::Man(args) => docs::run_man(&args),
        Command::Synth(args) => {
            plain_signals();
            profile_synth::run_synth(&args, &argv())
        }
    }
}

/// The one mapping from outcome or error to the process exit code. Errors are
/// printed here, once, as `iqaudit: <message>`; a closed stdout (broken pipe)
/// exits quietly with 0.
pub fn exit_code(result: Result<Outcome, Error>) -> ExitCode {
    match result {
        Ok(Outcome::Ok) => ExitCode::SUCCESS,
        Ok(Outcome::LimitFailed) | Ok(Outcome::Differs) => ExitCode::from(1),
        Ok(Outcome::NoTrainingFound) => ExitCode::from(3),
        Ok(Outcome::Exit(code)) => ExitCode::from(code),
        Err(Error::Io { ref source, .. }) if source.kind() == std::io::ErrorKind::BrokenPipe => {
            ExitCode::SUCCESS
        }
        Err(e) => {
            // Names and excerpts in the message may come from hostile files.
            eprintln!(
                "iqaudit: {}",
                iqaudit::text::escape_controls(&e.to_string())
            );
            // 4: the capture was read but its analysis failed; 2: usage or input.
            ExitCode::from(if matches!(e, Error::Analysis { .. }) {
                4
            } else {
                2
            })
        }
    }
}

/// Parse an optional `--format` value; a bad name is an error naming `path`
/// (the capture or folder it was meant for) and listing the accepted names.
pub(crate) fn parse_format_arg(
    name: Option<&str>,
    path: &std::path::Path,
) -> Result<Option<SampleFormat>, Error> {
    match name {
        None => Ok(None),
        Some(name) => Ok(Some(name.parse::<SampleFormat>().map_err(|e| {
            CaptureError::BadFormatName {
                path: path.to_path_buf(),
                found: e.found,
                accepted: e.accepted,
            }
        })?)),
    }
}

/// `info --plots --profile P`: the bursts an analysis finds, as power-plot
/// marks, and the profile's spectral mask.
fn info_bursts(
    args: &InfoArgs,
    format: Option<SampleFormat>,
    profile_path: &std::path::Path,
) -> Result<
    (
        Vec<iqaudit::report::capture_plots::BurstMark>,
        Vec<iqaudit::report::capture_plots::MaskLine>,
    ),
    Error,
> {
    let mut profile = iqaudit::load_profile(profile_path)?;
    if args.swap_iq {
        profile.capture.swap_iq = true;
    }
    if let Some(z) = args.unsigned_zero {
        profile.capture.unsigned_zero = Some(z);
    }
    let opts = iqaudit::analyse::AnalyseOptions {
        format,
        sample_rate_hz: args.sample_rate,
        traced_bursts: Some(0),
        skip_input_hash: true,
        ..Default::default()
    };
    let report = iqaudit::analyse::analyse_capture(&args.capture, &profile, &opts)?;
    eprintln!(
        "iqaudit: {}: {} burst(s) found with {}",
        iqaudit::text::escaped_path(&args.capture),
        report.bursts.len(),
        iqaudit::text::escaped_path(profile_path)
    );
    Ok((
        iqaudit::report::plots::burst_marks(&report),
        iqaudit::report::plots::mask_lines(&report),
    ))
}

/// Samples above which `info` shows a progress bar (on a terminal).
const PROGRESS_MIN_SAMPLES: usize = 64 << 20;

fn run_info(args: &InfoArgs) -> Result<Outcome, Error> {
    let format = parse_format_arg(args.format.as_deref(), &args.capture)?;
    let opts = OpenOptions {
        format,
        sample_rate_hz: args.sample_rate,
        swap_iq: args.swap_iq,
        unsigned_zero: args.unsigned_zero.unwrap_or_default(),
    };
    let capture = Capture::open(&args.capture, &opts)?;
    for note in capture.notes() {
        eprintln!("iqaudit: warning: {}: {note}", args.capture.display());
    }
    if let Some(dir) = &args.plots {
        let inputs = [
            Some(args.capture.as_path()),
            capture.sidecar_path(),
            Some(capture.path()),
            args.profile.as_deref(),
        ];
        let inputs: Vec<&std::path::Path> = inputs.into_iter().flatten().collect();
        iqaudit::atomic::ensure_not_an_input(dir, &inputs)?;
    }
    let stats_opts = StatsOptions::default();
    let bar =
        (!args.json && std::io::stderr().is_terminal() && capture.len() >= PROGRESS_MIN_SAMPLES)
            .then(|| {
                let bar = indicatif::ProgressBar::new(capture.len() as u64);
                if let Ok(style) = indicatif::ProgressStyle::with_template(
                    "{spinner} reading {human_pos}/{human_len} samples [{bar:30}] {per_sec} {eta}",
                ) {
                    bar.set_style(style.progress_chars("=> "));
                }
                bar
            });
    let progress = |n: u64| {
        if let Some(b) = &bar {
            b.inc(n);
        }
    };
    let stats = capture_stats(&capture, &stats_opts, &progress)?;
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    let mut report = info_report(&capture, &stats, &stats_opts);
    if let Some(f) = args.center_freq {
        report.set_center_freq(&stats, &stats_opts, f);
    }
    if let Some(dir) = &args.plots {
        let (marks, mask) = match &args.profile {
            Some(p) => info_bursts(args, format, p)?,
            None => (Vec::new(), Vec::new()),
        };
        iqaudit::report::capture_plots::write_info_plots(&report, &marks, &mask, dir)?;
    }
    for w in &report.warnings {
        eprintln!(
            "iqaudit: warning: {}: {}",
            iqaudit::text::escaped_path(&args.capture),
            iqaudit::text::escape_controls(&w.message)
        );
    }
    let text = if args.json {
        let mut s = serde_json::to_string_pretty(&report).map_err(|e| Error::Io {
            path: PathBuf::from("<stdout>"),
            source: e.into(),
        })?;
        s.push('\n');
        s
    } else {
        render_info(&report, &capture)
    };
    write_stdout(text.as_bytes())?;
    Ok(Outcome::Ok)
}

/// Write `bytes` to stdout and flush; an error names `<stdout>`.
pub(crate) fn write_stdout(bytes: &[u8]) -> Result<(), Error> {
    let mut out = std::io::stdout().lock();
    out.write_all(bytes)
        .and_then(|_| out.flush())
        .map_err(|source| Error::Io {
            path: PathBuf::from("<stdout>"),
            source,
        })
}

fn opt(v: Option<f64>, digits: usize, unit: &str) -> String {
    match v {
        Some(x) => format!("{x:.digits$} {unit}"),
        None => "n/a".to_string(),
    }
}

fn hz(v: Option<f64>) -> String {
    match v {
        Some(x) if x.abs() >= 1e6 => format!("{:.6} MHz", x / 1e6),
        Some(x) if x.abs() >= 1e3 => format!("{:.3} kHz", x / 1e3),
        Some(x) => format!("{x:.1} Hz"),
        None => "n/a (no sample rate; give --sample-rate)".to_string(),
    }
}

/// The human-readable summary: one `key: value` line per figure.
fn render_info(r: &InfoReport, capture: &Capture) -> String {
    let mut s = String::new();
    let mut line = |k: &str, v: String| {
        s.push_str(&format!("{k:<24}{v}\n"));
    };
    line("capture", r.path.clone());
    line("format", capture.format_description());
    line("samples", r.samples.to_string());
    line("sample rate", hz(r.sample_rate_hz));
    line(
        "centre frequency",
        match r.center_freq_hz {
            Some(_) => hz(r.center_freq_hz),
            None => "unknown (give --center-freq; the figures do not need it)".into(),
        },
    );
    if capture.segments().len() > 1 {
        let list: Vec<String> = capture
            .segments()
            .iter()
            .map(|g| format!("{} from sample {}", hz(g.center_freq_hz), g.sample_start))
            .collect();
        line("capture segments", list.join("; "));
    }
    if let Some(m) = capture.archive_member() {
        line("archive member", m.to_string());
    }
    line("duration", opt(r.duration_s, 6, "s"));
    line("mean power", opt(r.mean_power_dbfs, 2, "dBFS"));
    line("peak power", opt(r.peak_power_dbfs, 2, "dBFS"));
    line("peak-to-average", opt(r.papr_db, 2, "dB"));
    line(
        "DC offset",
        format!(
            "I {:+.6}  Q {:+.6}  ({} rel. mean power)",
            r.dc_i,
            r.dc_q,
            opt(r.dc_relative_db, 1, "dB")
        ),
    );
    match r.above_full_scale_samples {
        Some(n) => line("above full scale (float)", n.to_string()),
        None => line(
            "clipped",
            format!("{} ({:.4} %)", r.clipped_samples, r.clipped_percent),
        ),
    }
    line("non-finite", r.non_finite_samples.to_string());
    line(
        "IQ imbalance (blind)",
        format!(
            "gain {}  phase {}",
            opt(r.iq_gain_imbalance_db, 3, "dB"),
            opt(r.iq_phase_imbalance_deg, 2, "deg")
        ),
    );
    let bw = match (r.obw_hz, r.obw_fraction_of_rate) {
        (Some(_), _) => format!(
            "{} (from {} to {})",
            hz(r.obw_hz),
            hz(r.obw_lower_hz),
            hz(r.obw_upper_hz)
        ),
        (None, Some(f)) => format!("{f:.5} × sample rate"),
        (None, None) => "n/a".to_string(),
    };
    line(&format!("occupied bw {:.0} %", 100.0 * r.obw_fraction), bw);
    if let (Some(n), Some(avg), Some(avail)) = (
        r.psd_fft_len,
        r.psd_segments_averaged,
        r.psd_segments_available,
    ) {
        line(
            "spectrum",
            format!(
                "Welch, Hann, {n}-point, 50 % overlap, {avg} of {avail} segments, bin {}",
                match r.psd_resolution_hz {
                    Some(_) => hz(r.psd_resolution_hz),
                    None => format!("1/{n} of the rate"),
                }
            ),
        );
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::CommandFactory;

    #[test]
    fn the_clap_definition_is_internally_consistent() {
        Cli::command().debug_assert();
    }

    #[test]
    fn info_parses_format_rate_swap_and_json() {
        let cli = Cli::try_parse_from([
            "iqaudit",
            "info",
            "x.bin",
            "--format",
            "ci16_le",
            "--sample-rate",
            "2.4e6",
            "--swap-iq",
            "--json",
        ])
        .unwrap();
        let Command::Info(a) = cli.command else {
            panic!("not info")
        };
        assert_eq!(a.format.as_deref(), Some("ci16_le"));
        assert_eq!(a.sample_rate, Some(2.4e6));
        assert!(a.swap_iq && a.json);
    }

    #[test]
    fn a_negative_sample_rate_is_a_usage_error() {
        assert!(Cli::try_parse_from(["iqaudit", "info", "x", "--sample-rate", "-5"]).is_err());
    }
}
