//! `iqaudit profile new|check` and `iqaudit synth`: clap argument types and
//! their conversion into library calls (`iqaudit::profile`, `iqaudit::synth`).
//!
//! Takes in: parsed arguments. Gives out: JSON on stdout (`profile`), files
//! (`synth`: the capture, its SigMF sidecar, `FILE.truth.json`) and a one-line
//! summary on stderr, or an [`Error`] that `cli::exit_code` maps to exit 2.

use std::io::Write;
use std::path::PathBuf;

use clap::{Args, Subcommand, ValueEnum};
use iqaudit::profile::{example_profile, load_profile, ExampleOptions};
use iqaudit::synth::{synth_files, SynthRequest, TapSpacing, TimingOffset};
use iqaudit::{Error, Modulation};

use super::Outcome;

/// Arguments of `iqaudit profile`.
#[derive(Debug, Args)]
pub struct ProfileArgs {
    /// What to do with a profile.
    #[command(subcommand)]
    pub action: ProfileAction,
}

/// `profile` actions.
#[derive(Debug, Subcommand)]
pub enum ProfileAction {
    /// Print a complete example link profile (JSON) to stdout.
    ///
    /// The example is a quayside crane telemetry link: 16-QAM payload at 250 kBd,
    /// 4 samples per symbol, RRC roll-off 0.25, PRBS9 QPSK training of 64 symbols.
    /// Every key is written out; edit it and check it with `profile check`.
    New(ProfileNewArgs),
    /// Validate a link profile and print it with every default filled in.
    ///
    /// Exits 2 with one message naming the file, the key and the allowed values
    /// when the profile is bad.
    Check(ProfileCheckArgs),
}

/// Arguments of `iqaudit profile new`.
#[derive(Debug, Args)]
pub struct ProfileNewArgs {
    /// Payload modulation (bpsk, qpsk, 8psk, 16qam, 64qam, 256qam).
    ///
    /// Also sets the EVM and MER limits of the example to the 3GPP base-station
    /// figures for that modulation.
    #[arg(long, value_name = "M", default_value = "16qam", value_parser = parse_modulation)]
    pub modulation: Modulation,

    /// Samples per symbol.
    ///
    /// The sample rate of the example is the symbol rate times this.
    #[arg(long, value_name = "N", default_value_t = 4, value_parser = clap::value_parser!(u32).range(1..))]
    pub sps: u32,

    /// Symbol rate in Hz.
    ///
    /// Sets the sample rate, the largest expected CFO (2 %) and the CFO limit (1 %).
    #[arg(long, value_name = "HZ", default_value_t = 250_000.0, value_parser = parse_positive)]
    pub symbol_rate: f64,

    /// RRC roll-off in (0, 1].
    ///
    /// The excess bandwidth of the root-raised-cosine pulse.
    #[arg(long, value_name = "BETA", default_value_t = 0.25, value_parser = parse_rolloff)]
    pub rolloff: f64,

    /// Payload symbols per burst.
    ///
    /// The payload follows the training (preamble frame).
    #[arg(long, value_name = "N", default_value_t = 1024, value_parser = clap::value_parser!(u64).range(1..))]
    pub payload_symbols: u64,
}

/// Arguments of `iqaudit profile check`.
#[derive(Debug, Args)]
pub struct ProfileCheckArgs {
    /// The profile file (JSON).
    pub profile: PathBuf,
}

/// Tap spacing on the command line.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum SpacingArg {
    /// One symbol period between taps.
    Symbol,
    /// One sample between taps.
    Sample,
}

/// Arguments of `iqaudit synth`.
#[derive(Debug, Args)]
pub struct SynthArgs {
    /// Link profile the bursts follow (layout, modulation, pulse, sequences).
    ///
    /// The payload comes from the profile's `payload.known` rule when it has one,
    /// otherwise it is drawn at random from the seed and listed in the truth file.
    #[arg(long, short = 'p', value_name = "P")]
    pub profile: PathBuf,

    /// Output capture file; FILE.truth.json is written beside it.
    ///
    /// Written atomically. A raw format also gets a SigMF sidecar
    /// (NAME.sigmf-meta) unless --no-sigmf is given.
    #[arg(long, short = 'o', value_name = "FILE")]
    pub out: PathBuf,

    /// Output format: cf32_le, cf32_be, cf64_le, ci16_le, ci16_be, ci8, cu8, wav_pcm8, wav_pcm16, wav_pcm24, wav_pcm32, wav_float32.
    ///
    /// Default: wav_pcm16 for a .wav file, else the profile's capture.format, else
    /// the format the reader infers from the extension, else cf32_le; an
    /// extension naming another raw format than the profile's is refused.
    /// Integer formats quantise and clip at full scale.
    #[arg(long, short = 'f', value_name = "F")]
    pub format: Option<String>,

    /// Sample rate in Hz (default: the profile's capture.sample_rate_hz).
    ///
    /// Needed when the profile has none.
    #[arg(long, value_name = "HZ", value_parser = parse_positive)]
    pub sample_rate: Option<f64>,

    /// Number of bursts.
    ///
    /// Bursts are separated by noise-only gaps (see --gap).
    #[arg(long, value_name = "N", default_value_t = 1, value_parser = clap::value_parser!(u64).range(1..))]
    pub bursts: u64,

    /// RNG seed; the same seed and options give a byte-identical capture.
    ///
    /// One ChaCha8 generator: stream 1 for timing, random payloads and gaps,
    /// stream 2 for the noise.
    #[arg(long, value_name = "S", default_value_t = 0)]
    pub seed: u64,

    /// Multipath channel taps, h[-P] … h[0] … h[Q], e.g. "0.1,1.0,0.4-0.2j".
    ///
    /// Complex numbers written a, bj, a+bj or a-bj. The main tap h[0] is the one
    /// given by --channel-main (default: the largest |tap|, the first on ties);
    /// taps before it are pre-cursor, after it post-cursor (src/lib.rs).
    #[arg(long, value_name = "TAPS", allow_hyphen_values = true)]
    pub channel: Option<String>,

    /// Index (from 0) of the main tap in --channel.
    ///
    /// The number of pre-cursor taps P. The burst's start_sample refers to the
    /// main-tap path.
    #[arg(long, value_name = "N", requires = "channel")]
    pub channel_main: Option<usize>,

    /// Tap spacing of --channel.
    ///
    /// symbol: taps one symbol period apart (the equaliser's model); sample: one
    /// sample apart.
    #[arg(long, value_enum, value_name = "S", default_value = "symbol")]
    pub channel_spacing: SpacingArg,

    /// Drift of the non-main taps in Hz (slowly varying channel for tracking tests).
    ///
    /// Every tap except the main one turns by exp(j·2π·F·t) relative to the main
    /// tap, t measured from the burst's first training symbol.
    #[arg(long, value_name = "F", default_value_t = 0.0, requires = "channel", allow_hyphen_values = true, value_parser = parse_finite)]
    pub drift_hz: f64,

    /// Es/N0 in dB at the matched-filter output (default: no noise).
    ///
    /// Noise variance per sample = amplitude² / (Es/N0): with a unit-energy pulse
    /// and unit-power symbols that is the noise at the matched-filter output.
    #[arg(long, value_name = "X", allow_hyphen_values = true, value_parser = parse_finite)]
    pub esn0_db: Option<f64>,

    /// Carrier frequency offset in Hz (positive: received carrier above nominal).
    ///
    /// The local oscillator is continuous over the whole capture.
    #[arg(long, value_name = "F", default_value_t = 0.0, allow_hyphen_values = true, value_parser = parse_finite)]
    pub cfo_hz: f64,

    /// Carrier phase at capture sample 0, degrees.
    ///
    /// The truth lists each burst's phase at its first training symbol.
    #[arg(long, value_name = "D", default_value_t = 0.0, allow_hyphen_values = true, value_parser = parse_finite)]
    pub phase_deg: f64,

    /// Fractional timing offset in [-0.5, 0.5) samples, or "random" (per burst).
    ///
    /// The first training symbol's instant is start_sample + this fraction.
    #[arg(long, value_name = "F", default_value = "0", allow_hyphen_values = true, value_parser = parse_timing)]
    pub timing_frac: TimingOffset,

    /// DC offset "I,Q" in full-scale units, added last.
    ///
    /// E.g. "0.02,-0.01".
    #[arg(long, value_name = "I,Q", allow_hyphen_values = true, value_parser = parse_pair)]
    pub dc: Option<[f64; 2]>,

    /// Receiver IQ gain imbalance (Q relative to I), dB.
    ///
    /// Model: I' = I, Q' = g·(Q·cos φ − I·sin φ).
    #[arg(long, value_name = "DB", default_value_t = 0.0, allow_hyphen_values = true, value_parser = parse_finite)]
    pub iq_gain_db: f64,

    /// Receiver IQ phase imbalance φ, degrees.
    ///
    /// See --iq-gain-db for the model.
    #[arg(long, value_name = "DEG", default_value_t = 0.0, allow_hyphen_values = true, value_parser = parse_finite)]
    pub iq_phase_deg: f64,

    /// Receiver sample-clock offset, ppm (positive: the receiver's clock is fast).
    ///
    /// Received sample n is taken at transmit time n/(fs·(1 + PPM·1e-6)): a burst
    /// of N symbols spans N·sps·(1 + PPM·1e-6) samples. Made by resampling the
    /// finished capture.
    #[arg(long, value_name = "PPM", default_value_t = 0.0, allow_hyphen_values = true, value_parser = parse_finite)]
    pub sco_ppm: f64,

    /// Mean power of the noise-free transmitted burst, dBFS.
    ///
    /// Leave headroom for the peak-to-average ratio of the pulse-shaped signal;
    /// integer formats clip at 0 dBFS per component.
    #[arg(long, value_name = "DB", default_value_t = -12.0, allow_hyphen_values = true, value_parser = parse_finite)]
    pub level_dbfs: f64,

    /// Noise-only gap between bursts, "MIN:MAX" samples (uniform, from the seed).
    ///
    /// One more gap follows the last burst.
    #[arg(long, value_name = "MIN:MAX", default_value = "1000:3000", value_parser = parse_gap)]
    pub gap: (usize, usize),

    /// Noise-only samples before the first burst.
    ///
    /// Default 0: the first burst's pulse tail starts at sample 0.
    #[arg(long, value_name = "N", default_value_t = 0)]
    pub lead_gap: usize,

    /// Do not write a SigMF sidecar for a raw format.
    ///
    /// WAV files never get one (the header carries the rate).
    #[arg(long)]
    pub no_sigmf: bool,
}

fn parse_modulation(s: &str) -> Result<Modulation, String> {
    s.parse::<Modulation>().map_err(|e| e.to_string())
}

fn parse_finite(s: &str) -> Result<f64, String> {
    match s.trim().parse::<f64>() {
        Ok(v) if v.is_finite() => Ok(v),
        _ => Err(format!("'{s}' is not a finite number")),
    }
}

fn parse_positive(s: &str) -> Result<f64, String> {
    match parse_finite(s) {
        Ok(v) if iqaudit::limits::check_rate_hz(v).is_ok() => Ok(v),
        _ => Err(format!(
            "'{s}' is not a sample rate in Hz (expected {})",
            iqaudit::limits::check_rate_hz(f64::NAN).unwrap_err()
        )),
    }
}

fn parse_rolloff(s: &str) -> Result<f64, String> {
    match parse_finite(s) {
        Ok(v) if v > 0.0 && v <= 1.0 => Ok(v),
        _ => Err(format!("'{s}' is not a roll-off in (0, 1]")),
    }
}

fn parse_timing(s: &str) -> Result<TimingOffset, String> {
    if s == "random" {
        return Ok(TimingOffset::Random);
    }
    match parse_finite(s) {
        Ok(v) if (-0.5..0.5).contains(&v) => Ok(TimingOffset::Fixed(v)),
        _ => Err(format!(
            "'{s}' is not a fraction in [-0.5, 0.5) or \"random\""
        )),
    }
}

fn parse_pair(s: &str) -> Result<[f64; 2], String> {
    let parts: Vec<&str> = s.split(',').collect();
    match parts.as_slice() {
        [a, b] => Ok([parse_finite(a)?, parse_finite(b)?]),
        _ => Err(format!("'{s}' is not \"I,Q\"")),
    }
}

fn parse_gap(s: &str) -> Result<(usize, usize), String> {
    let err = || format!("'{s}' is not \"MIN:MAX\" samples with MIN <= MAX");
    let (a, b) = s.split_once(':').ok_or_else(err)?;
    let a: usize = a.trim().parse().map_err(|_| err())?;
    let b: usize = b.trim().parse().map_err(|_| err())?;
    if a > b {
        return Err(err());
    }
    Ok((a, b))
}

fn stdout_write(text: &str) -> Result<(), Error> {
    let mut out = std::io::stdout().lock();
    out.write_all(text.as_bytes())
        .and_then(|_| out.flush())
        .map_err(|source| Error::Io {
            path: PathBuf::from("<stdout>"),
            source,
        })
}

fn to_json<T: serde::Serialize>(v: &T) -> Result<String, Error> {
    let mut s = serde_json::to_string_pretty(v).map_err(|e| Error::Io {
        path: PathBuf::from("<stdout>"),
        source: e.into(),
    })?;
    s.push('\n');
    Ok(s)
}

/// Run `iqaudit profile …`.
pub fn run_profile(args: &ProfileArgs) -> Result<Outcome, Error> {
    match &args.action {
        ProfileAction::New(a) => {
            let p = example_profile(&ExampleOptions {
                modulation: a.modulation,
                samples_per_symbol: a.sps,
                symbol_rate_hz: a.symbol_rate,
                rolloff: a.rolloff,
                payload_symbols: a.payload_symbols as usize,
            });
            stdout_write(&to_json(&p)?)?;
        }
        ProfileAction::Check(a) => {
            let r = load_profile(&a.profile)?;
            stdout_write(&to_json(&r)?)?;
        }
    }
    Ok(Outcome::Ok)
}

/// Run `iqaudit synth …`; `argv` is recorded in the truth. The checks and the
/// writing are the library's ([`iqaudit::synth::synth_files`]).
pub fn run_synth(args: &SynthArgs, argv: &[String]) -> Result<Outcome, Error> {
    let req = SynthRequest {
        profile: args.profile.clone(),
        out: args.out.clone(),
        format: args.format.clone(),
        sample_rate_hz: args.sample_rate,
        bursts: args.bursts,
        seed: args.seed,
        channel: args.channel.clone(),
        channel_main: args.channel_main,
        channel_spacing: match args.channel_spacing {
            SpacingArg::Symbol => TapSpacing::Symbol,
            SpacingArg::Sample => TapSpacing::Sample,
        },
        drift_hz: args.drift_hz,
        esn0_db: args.esn0_db,
        cfo_hz: args.cfo_hz,
        phase_deg: args.phase_deg,
        timing: args.timing_frac,
        dc: args.dc,
        iq_gain_db: args.iq_gain_db,
        iq_phase_deg: args.iq_phase_deg,
        sco_ppm: args.sco_ppm,
        level_dbfs: args.level_dbfs,
        gap: args.gap,
        lead_gap: args.lead_gap,
        no_sigmf: args.no_sigmf,
    };
    let (truth, container) = synth_files(&req, Some(argv.join(" ")))?;
    let clipped = truth.capture.as_ref().map_or(0, |c| c.clipped);
    eprintln!(
        "iqaudit: wrote {} ({} samples, {} bursts, {container}{}) and {}",
        args.out.display(),
        truth.total_samples,
        truth.bursts.len(),
        if clipped > 0 {
            format!(", {clipped} samples clipped")
        } else {
            String::new()
        },
        iqaudit::synth::truth_path(&args.out).display()
    );
    Ok(Outcome::Ok)
}

#[cfg(test)]
mod tests {
    use super::super::{Cli, Command};
    use super::*;
    use clap::Parser;

    #[test]
    fn synth_parses_every_impairment_option() {
        let cli = Cli::try_parse_from([
            "iqaudit",
            "synth",
            "--profile",
            "p.json",
            "--out",
            "x.ci16",
            "--channel",
            "0.1,1.0,0.4-0.2j",
            "--channel-main",
            "1",
            "--channel-spacing",
            "sample",
            "--drift-hz",
            "-2.5",
            "--esn0-db",
            "18",
            "--cfo-hz",
            "-1200",
            "--phase-deg",
            "30",
            "--timing-frac",
            "random",
            "--dc",
            "0.02,-0.01",
            "--iq-gain-db",
            "0.5",
            "--iq-phase-deg",
            "-3",
            "--level-dbfs",
            "-15",
            "--gap",
            "100:200",
            "--lead-gap",
            "50",
            "--bursts",
            "3",
            "--seed",
            "9",
            "--format",
            "ci16_le",
        ])
        .unwrap();
        let Command::Synth(a) = cli.command else {
            panic!("not synth")
        };
        assert_eq!(a.channel.as_deref(), Some("0.1,1.0,0.4-0.2j"));
        assert_eq!(a.channel_main, Some(1));
        assert_eq!(a.channel_spacing, SpacingArg::Sample);
        assert_eq!(
            (a.drift_hz, a.esn0_db, a.cfo_hz),
            (-2.5, Some(18.0), -1200.0)
        );
        assert_eq!(a.timing_frac, TimingOffset::Random);
        assert_eq!(a.dc, Some([0.02, -0.01]));
        assert_eq!(
            (a.iq_gain_db, a.iq_phase_deg, a.level_dbfs),
            (0.5, -3.0, -15.0)
        );
        assert_eq!(
            (a.gap, a.lead_gap, a.bursts, a.seed),
            ((100, 200), 50, 3, 9)
        );
    }

    #[test]
    fn synth_rejects_bad_option_values_as_usage_errors() {
        let base = ["iqaudit", "synth", "--profile", "p", "--out", "o"];
        for extra in [
            ["--timing-frac", "0.5"],
            ["--gap", "5:1"],
            ["--dc", "0.1"],
            ["--bursts", "0"],
            ["--esn0-db", "nan"],
            ["--channel-spacing", "chip"],
        ] {
            let args: Vec<&str> = base.iter().chain(extra.iter()).copied().collect();
            assert!(Cli::try_parse_from(&args).is_err(), "{extra:?} accepted");
        }
    }

    #[test]
    fn profile_new_and_check_parse() {
        let cli = Cli::try_parse_from([
            "iqaudit",
            "profile",
            "new",
            "--modulation",
            "64qam",
            "--sps",
            "8",
        ])
        .unwrap();
        let Command::Profile(ProfileArgs {
            action: ProfileAction::New(a),
        }) = cli.command
        else {
            panic!("not profile new")
        };
        assert_eq!((a.modulation, a.sps), (Modulation::Qam64, 8));
        assert!(Cli::try_parse_from(["iqaudit", "profile", "new", "--sps", "0"]).is_err());
        assert!(Cli::try_parse_from(["iqaudit", "profile", "new", "--rolloff", "1.5"]).is_err());
        let cli = Cli::try_parse_from(["iqaudit", "profile", "check", "p.json"]).unwrap();
        assert!(matches!(
            cli.command,
            Command::Profile(ProfileArgs {
                action: ProfileAction::Check(_)
            })
        ));
    }
}
