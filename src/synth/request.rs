//! One synthesis request as a caller states it (the `iqaudit synth` options as
//! plain data) and the one path that checks it, builds the [`SynthSpec`] and
//! writes the files: shared by the command line and the Python bindings.
//!
//! Takes in: a [`SynthRequest`] (profile path, output path, format name,
//! impairments in the options' units: Hz, dB, degrees, ppm, samples). Gives out:
//! the [`GroundTruth`] as written and the [`Container`] used, or an [`Error`]
//! whose message names the `synth` option (CLI spelling) that is wrong (the
//! checks are [`SynthSpec::validate`]'s).

use std::path::{Path, PathBuf};

use super::{
    default_container, parse_container, parse_taps, write_outputs, ChannelSpec, GroundTruth,
    OutputSpec, SynthSpec, TapSpacing, TimingOffset,
};
use crate::capture::Container;
use crate::profile::load_profile;
use crate::Error;

/// The options of one synthesis (`iqaudit synth`), with the command line's
/// defaults from [`SynthRequest::new`].
#[derive(Debug, Clone, PartialEq)]
pub struct SynthRequest {
    /// Link profile file the bursts follow.
    pub profile: PathBuf,
    /// Output capture file; `FILE.truth.json` is written beside it.
    pub out: PathBuf,
    /// Output format name (`cf32_le`, …, `wav_pcm16`, …); `None`: from the name and profile.
    pub format: Option<String>,
    /// Sample rate, Hz; `None`: the profile's.
    pub sample_rate_hz: Option<f64>,
    /// Number of bursts (≥ 1).
    pub bursts: u64,
    /// RNG seed.
    pub seed: u64,
    /// Channel taps as text (`"0.1,1.0,0.4-0.2j"`), `h[-P] … h[0] … h[Q]`.
    pub channel: Option<String>,
    /// Index of the main tap in `channel`; `None`: the largest |tap|, the first on ties.
    pub channel_main: Option<usize>,
    /// Tap spacing of `channel`.
    pub channel_spacing: TapSpacing,
    /// Drift of the non-main taps, Hz.
    pub drift_hz: f64,
    /// Es/N0 in dB at the matched-filter output; `None`: no noise.
    pub esn0_db: Option<f64>,
    /// Carrier frequency offset, Hz.
    pub cfo_hz: f64,
    /// Carrier phase at capture sample 0, degrees.
    pub phase_deg: f64,
    /// Fractional timing offset.
    pub timing: TimingOffset,
    /// DC offset `[I, Q]`, full-scale units; `None`: none.
    pub dc: Option<[f64; 2]>,
    /// Receiver IQ gain imbalance, dB.
    pub iq_gain_db: f64,
    /// Receiver IQ phase imbalance, degrees.
    pub iq_phase_deg: f64,
    /// Receiver sample-clock offset, ppm.
    pub sco_ppm: f64,
    /// Mean power of the noise-free transmitted burst, dBFS.
    pub level_dbfs: f64,
    /// Noise-only gap between bursts, `(min, max)` samples.
    pub gap: (usize, usize),
    /// Noise-only samples before the first burst.
    pub lead_gap: usize,
    /// Do not write a SigMF sidecar for a raw format.
    pub no_sigmf: bool,
}

impl SynthRequest {
    /// The command line's defaults: one burst, seed 0, no channel, no noise,
    /// no impairments, −12 dBFS, gaps of 1000–3000 samples.
    pub fn new(profile: PathBuf, out: PathBuf) -> SynthRequest {
        SynthRequest {
            profile,
            out,
            format: None,
            sample_rate_hz: None,
            bursts: 1,
            seed: 0,
            channel: None,
            channel_main: None,
            channel_spacing: TapSpacing::Symbol,
            drift_hz: 0.0,
            esn0_db: None,
            cfo_hz: 0.0,
            phase_deg: 0.0,
            timing: TimingOffset::Fixed(0.0),
            dc: None,
            iq_gain_db: 0.0,
            iq_phase_deg: 0.0,
            sco_ppm: 0.0,
            level_dbfs: -12.0,
            gap: (1000, 3000),
            lead_gap: 0,
            no_sigmf: false,
        }
    }
}

fn usage(message: String) -> Error {
    Error::Usage { message }
}

/// Options that only mean something together (the command line's parser
/// refuses them alone): `channel_main` and a drift need `channel`.
fn check_pairs(req: &SynthRequest) -> Result<(), Error> {
    if req.channel.is_none() && (req.channel_main.is_some() || req.drift_hz != 0.0) {
        return Err(usage(
            "--channel-main and --drift-hz need --channel (the taps they refer to)".into(),
        ));
    }
    Ok(())
}

/// The SigMF sidecar names `out` may get (`NAME.sigmf-meta`, `FILE.sigmf-meta`)
/// and the truth file name, after `out` itself.
fn output_names(out: &Path) -> [PathBuf; 4] {
    let mut truth_name = out.as_os_str().to_owned();
    truth_name.push(".truth.json");
    let mut meta_name = out.as_os_str().to_owned();
    meta_name.push(".sigmf-meta");
    [
        out.to_path_buf(),
        PathBuf::from(truth_name),
        out.with_extension("sigmf-meta"),
        PathBuf::from(meta_name),
    ]
}

/// Check `req`, synthesise and write the capture, its SigMF sidecar (a raw
/// format unless `no_sigmf`) and `FILE.truth.json`; `command` is recorded in
/// the truth. Returns the truth as written and the container used.
///
/// # Errors
/// An option out of range (the message names the `synth` option), an unusable
/// profile, an output that would replace the profile or is not a regular file,
/// or a failed write.
pub fn synth_files(
    req: &SynthRequest,
    command: Option<String>,
) -> Result<(GroundTruth, Container), Error> {
    // The outputs (capture, its sidecar, the truth file) never replace the
    // profile, and are absent or regular files.
    let outputs = output_names(&req.out);
    for o in &outputs {
        crate::atomic::ensure_not_an_input(o, &[req.profile.as_path()])?;
    }
    crate::atomic::ensure_replaceable(&req.out)?;
    check_pairs(req)?;
    let profile = load_profile(&req.profile)?;
    let channel = match &req.channel {
        None => None,
        Some(text) => {
            let taps = parse_taps(text)?;
            let main_index = req.channel_main.unwrap_or_else(|| {
                // Largest |tap|, the first on ties (total_cmp: NaN-safe; taps are finite).
                let mut best = 0;
                for (i, t) in taps.iter().enumerate() {
                    if t.norm().total_cmp(&taps[best].norm()).is_gt() {
                        best = i;
                    }
                }
                best
            });
            Some(ChannelSpec {
                taps,
                main_index,
                spacing: req.channel_spacing,
                drift_hz: req.drift_hz,
            })
        }
    };
    let container = match &req.format {
        Some(f) => parse_container(f)?,
        None => default_container(&req.out, &profile)?,
    };
    let spec = SynthSpec {
        sample_rate_hz: req.sample_rate_hz,
        bursts: req.bursts as usize,
        seed: req.seed,
        channel,
        esn0_db: req.esn0_db,
        cfo_hz: req.cfo_hz,
        phase_rad: req.phase_deg.to_radians(),
        timing: req.timing,
        dc_offset: req.dc.unwrap_or([0.0, 0.0]),
        iq_gain_db: req.iq_gain_db,
        iq_phase_deg: req.iq_phase_deg,
        level_dbfs: req.level_dbfs,
        gap_samples: req.gap,
        lead_gap_samples: req.lead_gap,
        sco_ppm: req.sco_ppm,
        profile,
    };
    // The library's own check (one implementation): ranges, finiteness and
    // the capture's size, before any output name is touched.
    spec.validate()?;
    let output = OutputSpec {
        container,
        sigmf_sidecar: !req.no_sigmf && matches!(container, Container::Raw(_)),
        center_freq_hz: None,
    };
    // Every output name is checked before anything is generated: a planted
    // link at the truth or sidecar name must not leave a capture written and
    // the run failed half-way.
    let checked: &[PathBuf] = if output.sigmf_sidecar {
        &outputs[1..]
    } else {
        &outputs[1..2]
    };
    for o in checked {
        crate::atomic::ensure_replaceable(o)?;
    }
    let truth = write_outputs(&spec, &req.out, &output, command)?;
    Ok((truth, container))
}
