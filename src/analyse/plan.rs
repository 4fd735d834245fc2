//! The per-capture plan: everything prepared once and shared by all bursts.
//!
//! Takes the resolved profile, the command-line options and the opened capture;
//! gives the capture itself ([`open_capture`], with the documented precedence of
//! format and rate sources), the [`Plan`] (training and known payload symbols,
//! constellation, equaliser settings, rates) and the [`Synchroniser`] with its
//! threshold. No samples are read here.

use super::AnalyseOptions;
use crate::capture::{Capture, OpenOptions, SampleFormat};
use crate::channel::{ChannelFitConfig, TapSpan, WindowCost};
use crate::equalise::mlse::MlseConfig;
use crate::equalise::tracking::{AdaptMode, TrackingConfig};
use crate::equalise::BurstConfig;
use crate::profile::ResolvedProfile;
use crate::profile::{Delay, EqualiserKind, TapCount, Tracking};
use crate::signal::{rrc_taps, Constellation};
use crate::sync::{SyncConfig, SyncDimensions, Synchroniser};
use crate::{Cf32, Error};
use std::path::Path;

/// Everything prepared once per capture and shared by all bursts.
pub(super) struct Plan {
    /// Training symbols, unit mean power.
    pub(super) training: Vec<Cf32>,
    /// Known payload before / after the training (both or neither).
    pub(super) known_before: Option<Vec<Cf32>>,
    pub(super) known_after: Option<Vec<Cf32>>,
    /// Payload symbols before / after the training that a burst in this
    /// capture can hold: the profile's counts, cut to the capture's length
    /// ([`payload_reach`]), so no per-burst buffer is sized by the profile
    /// alone. Equal to the profile's counts whenever the payload fits the capture.
    pub(super) before: usize,
    pub(super) after: usize,
    /// The profile's payload counts before / after the training (a whole burst).
    pub(super) before_nominal: usize,
    pub(super) after_nominal: usize,
    /// The payload constellation (and slicer).
    pub(super) constellation: Constellation,
    /// Channel-fit and equaliser settings shared by every burst.
    pub(super) burst_cfg: BurstConfig,
    /// Symbols of padding cut out either side of the frame.
    pub(super) margin: usize,
    /// Samples per symbol.
    pub(super) sps: usize,
    /// Rate of the stream the analysis reads (the capture's, or the rate it
    /// is resampled to).
    pub(super) sample_rate_hz: f64,
    pub(super) symbol_rate_hz: f64,
    /// The capture's own sample rate.
    pub(super) input_rate_hz: f64,
    /// Resampler to the analysis rate, when the rates differ (see `rate.rs`).
    pub(super) resampler: Option<crate::signal::Resampler>,
    /// Centre frequency: the profile's, else the capture's.
    pub(super) center_freq_hz: Option<f64>,
    /// The MLSE reference detector, when the profile turns it on.
    pub(super) mlse: Option<MlseConfig>,
    /// Cost of a sampling instant for the channel fit's tap window (`None` when the
    /// training cannot support the span; the fit then reports why).
    pub(super) window: Option<WindowCost>,
}

pub(super) fn usage(message: impl Into<String>) -> Error {
    Error::Usage {
        message: message.into(),
    }
}

/// The capture format the profile asks for, converted to the capture layer's type.
fn profile_format(profile: &ResolvedProfile) -> Result<Option<SampleFormat>, Error> {
    let Some(f) = &profile.capture.format else {
        return Ok(None);
    };
    let name = serde_json::to_value(f)
        .ok()
        .and_then(|v| v.as_str().map(str::to_string))
        .unwrap_or_default();
    name.parse::<SampleFormat>().map(Some).map_err(|_| {
        usage(format!(
            "profile: capture.format '{name}' is not a readable format"
        ))
    })
}

/// Open options for a capture analysed with `profile` and `opts`.
fn open_options(profile: &ResolvedProfile, opts: &AnalyseOptions) -> Result<OpenOptions, Error> {
    Ok(OpenOptions {
        format: match opts.format {
            Some(f) => Some(f),
            None => profile_format(profile)?,
        },
        sample_rate_hz: opts.sample_rate_hz.or(profile.capture.sample_rate_hz),
        swap_iq: profile.capture.swap_iq,
        // The profile's (recorded with it in the report, so `recheck` reads
        // the samples the same way).
        unsigned_zero: profile.capture.unsigned_zero.unwrap_or_default(),
    })
}

/// Open the capture with the precedence of the product contract: `--format` /
/// `--sample-rate` first, then what the file says (SigMF sidecar, WAV header),
/// then the profile's `capture.format` / `capture.sample_rate_hz`, then the file
/// extension. Taking the profile first would let it override the file.
///
/// # Errors
/// The capture cannot be opened.
pub fn open_capture(
    path: &Path,
    profile: &ResolvedProfile,
    opts: &AnalyseOptions,
) -> Result<Capture, Error> {
    use crate::capture::FormatSource;
    let with_profile = open_options(profile, opts)?;
    // First let the file speak: only the command-line overrides.
    let explicit = OpenOptions {
        format: opts.format,
        sample_rate_hz: opts.sample_rate_hz,
        swap_iq: profile.capture.swap_iq,
        unsigned_zero: with_profile.unsigned_zero,
    };
    if let Ok(c) = Capture::open(path, &explicit) {
        let file_says = opts.format.is_some()
            || matches!(
                c.format_source(),
                FormatSource::Sigmf | FormatSource::WavHeader
            );
        if file_says {
            if c.sample_rate_hz().is_some() || with_profile.sample_rate_hz.is_none() {
                return Ok(c);
            }
            // The file gave the format but no rate: take the profile's rate.
            let rate = OpenOptions {
                sample_rate_hz: with_profile.sample_rate_hz,
                ..explicit
            };
            return Ok(Capture::open(path, &rate)?);
        }
    }
    Ok(Capture::open(path, &with_profile)?)
}

fn burst_config(profile: &ResolvedProfile) -> BurstConfig {
    let mut cfg = BurstConfig::default();
    let fit = &profile.channel_fit;
    let max_total = fit.max_total_taps.unwrap_or(16).max(1);
    let span = match (fit.pre_cursor_taps, fit.post_cursor_taps) {
        (TapCount::Fixed(pre), TapCount::Fixed(post)) => TapSpan::Fixed { pre, post },
        (pre, post) => {
            // A fixed count is tried alone (min = max); "auto" tries 0 up to a cap
            // the training supports.
            let range = |t: TapCount, cap: usize| match t {
                TapCount::Fixed(n) => (n, n),
                TapCount::Auto => (0, cap),
            };
            let (min_pre, max_pre) = range(pre, (max_total / 4).clamp(1, 8));
            let (min_post, max_post) = range(post, (max_total / 2).clamp(1, 16));
            TapSpan::Auto {
                min_pre,
                max_pre,
                min_post,
                max_post,
            }
        }
    };
    cfg.channel = ChannelFitConfig {
        span,
        dc_offset: fit.dc_offset,
        iq_imbalance: fit.iq_imbalance,
        ..ChannelFitConfig::default()
    };
    let eq = &profile.equaliser;
    cfg.ff_taps = eq.feedforward_taps.max(1);
    cfg.fb_taps = eq.feedback_taps;
    cfg.delay = match eq.delay {
        Delay::Auto => None,
        Delay::Fixed(d) => Some(d),
    };
    cfg.carrier.enabled = eq.carrier_refinement;
    cfg.tracking = match eq.tracking {
        Tracking::Off => TrackingConfig::default(),
        Tracking::Lms { mu } => TrackingConfig {
            mode: AdaptMode::Lms,
            lms_step: mu as f32,
            ..TrackingConfig::default()
        },
        Tracking::Rls { lambda } => TrackingConfig {
            mode: AdaptMode::Rls,
            rls_forgetting: lambda as f32,
            ..TrackingConfig::default()
        },
    };
    cfg
}

/// Name of the equaliser result the profile asks to report.
pub(super) fn chosen_name(profile: &ResolvedProfile) -> &'static str {
    match (profile.equaliser.kind, profile.equaliser.tracking) {
        (EqualiserKind::ZfDfe, _) => "zf-dfe",
        (EqualiserKind::LinearMmse, _) => "linear-mmse",
        (EqualiserKind::MmseDfe, Tracking::Off) => "mmse-dfe",
        (EqualiserKind::MmseDfe, Tracking::Lms { .. }) => "mmse-dfe-lms",
        (EqualiserKind::MmseDfe, Tracking::Rls { .. }) => "mmse-dfe-rls",
    }
}

pub(super) fn tracking_name(t: Tracking) -> &'static str {
    match t {
        Tracking::Off => "off",
        Tracking::Lms { .. } => "lms",
        Tracking::Rls { .. } => "rls",
    }
}

impl Plan {
    pub(super) fn new(profile: &ResolvedProfile, capture: &Capture) -> Result<Plan, Error> {
        let input_rate_hz = capture.sample_rate_hz().ok_or_else(|| {
            usage(format!(
                "{}: sample rate unknown: give capture.sample_rate_hz in the profile, a SigMF sidecar, or --sample-rate",
                capture.path().display()
            ))
        })?;
        let (sample_rate_hz, resampler) =
            super::rate::resampler_for(profile, capture, input_rate_hz)?;
        let sps = profile.samples_per_symbol;
        let training = profile.training_symbols()?;
        let burst_cfg = burst_config(profile);
        let taps_span = match burst_cfg.channel.span {
            TapSpan::Fixed { pre, post } => pre + post + 1,
            TapSpan::Auto {
                max_pre, max_post, ..
            } => max_pre + max_post + 1,
        };
        let margin = burst_cfg.ff_taps + burst_cfg.fb_taps + taps_span + 4;
        let analysis_len = resampler
            .as_ref()
            .map_or(capture.len(), |r| r.output_len(capture.len()));
        let reach = payload_reach(analysis_len, sps, margin);
        let (before_nominal, after_nominal) = (
            profile.payload.before_symbols,
            profile.payload.after_symbols,
        );
        let (before, after) = (before_nominal.min(reach), after_nominal.min(reach));
        // The symbols next to the training only (the tail of the part before
        // it, the head of the part after it), generated without the rest.
        let (known_before, known_after) =
            match profile.payload_symbols_near_training(before, after)? {
                Some(p) => (Some(p.before), Some(p.after)),
                None => (None, None),
            };
        let window = WindowCost::new(
            &training,
            burst_cfg.channel.span,
            burst_cfg.channel.max_condition,
        )
        .ok();
        Ok(Plan {
            window,
            training,
            known_before,
            known_after,
            before,
            after,
            before_nominal,
            after_nominal,
            constellation: Constellation::new(profile.payload.modulation),
            margin,
            burst_cfg,
            sps,
            sample_rate_hz,
            symbol_rate_hz: sample_rate_hz / sps as f64,
            input_rate_hz,
            resampler,
            // Sidecar over profile, as for the rate (#18); per burst the
            // segment's own frequency comes first (`burst.rs`).
            center_freq_hz: capture.center_freq_hz().or(profile.capture.center_freq_hz),
            mlse: profile.equaliser.mlse.enabled.then_some(MlseConfig {
                max_states: profile.equaliser.mlse.max_states,
                reduced_state: profile.equaliser.mlse.reduced_state,
                traceback_depth: None,
            }),
        })
    }

    /// Symbols of a frame as a burst in this capture can hold them.
    pub(super) fn frame_symbols(&self) -> usize {
        self.before + self.training.len() + self.after
    }

    /// Symbols of a whole frame, as the profile gives it.
    pub(super) fn frame_symbols_nominal(&self) -> usize {
        self.before_nominal + self.training.len() + self.after_nominal
    }

    /// The payload number (the profile's count: the symbols before the
    /// training first) of the `p`-th payload symbol the plan holds.
    pub(super) fn payload_number(&self, p: usize) -> usize {
        if p < self.before {
            p + (self.before_nominal - self.before)
        } else {
            p - self.before + self.before_nominal
        }
    }

    /// The profile's payload is longer than this capture can hold: every
    /// burst of it is cut.
    pub(super) fn payload_cut(&self) -> bool {
        self.before < self.before_nominal || self.after < self.after_nominal
    }
}

/// Payload symbols on either side of the training that can lie inside a
/// capture (analysis stream) of `len` samples at `sps` samples per symbol:
/// `len / sps` and a slack of 1/64 of it (a symbol clock up to 1.5 % fast,
/// far beyond any the clock tracking accepts), the frame margin and two. A
/// profile's payload longer than that is cut to it, which changes nothing a
/// burst can show (those symbols lie outside the capture) and keeps every
/// per-burst buffer (frame, known symbols, equaliser outputs) bounded by the
/// capture, not the profile: a 2^23-symbol payload at 4 samples per symbol took
/// 2.3 GB on a 15 KB capture before.
pub(super) fn payload_reach(len: usize, sps: usize, margin: usize) -> usize {
    let symbols = len / sps.max(1);
    symbols + symbols / 64 + margin + 2
}

/// The synchroniser's pulse and settings for a plan.
fn sync_parts(profile: &ResolvedProfile, plan: &Plan) -> (Vec<f32>, SyncConfig) {
    let pulse = rrc_taps(profile.pulse.rolloff, profile.pulse.span_symbols, plan.sps);
    let cfg = SyncConfig {
        sps: plan.sps,
        sample_rate_hz: plan.sample_rate_hz,
        max_cfo_hz: profile
            .search
            .max_cfo_hz_at(plan.sample_rate_hz, plan.sps)
            .min(0.25 * plan.symbol_rate_hz),
        threshold: profile.search.threshold,
        min_spacing_samples: Some((plan.frame_symbols_nominal() * plan.sps).max(1)),
        cfo_segments: 4,
    };
    (pulse, cfg)
}

/// The synchroniser for a plan, checked but not yet built: its sizes are
/// known ([`SyncDimensions`]) before the reference (`training × sps`
/// samples) and the hypothesis bank are allocated, so a capture too short for
/// the training never pays for them.
pub(super) struct SyncPlan {
    pulse: Vec<f32>,
    cfg: SyncConfig,
    /// Sizes, the threshold and the shortest capture that can be searched.
    pub(super) dims: SyncDimensions,
}

impl SyncPlan {
    /// Check the synchroniser's settings for a plan (no waveform is built).
    pub(super) fn new(profile: &ResolvedProfile, plan: &Plan) -> Result<SyncPlan, Error> {
        let (pulse, cfg) = sync_parts(profile, plan);
        let dims = Synchroniser::dimensions(plan.training.len(), pulse.len(), &cfg)?;
        Ok(SyncPlan { pulse, cfg, dims })
    }

    /// Build the synchroniser (reference, bank, FFT plans).
    pub(super) fn build(self, plan: &Plan) -> Result<Synchroniser, Error> {
        Ok(Synchroniser::new(&plan.training, &self.pulse, self.cfg)?)
    }
}
