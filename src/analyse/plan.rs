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
use crate::sync::{SyncConfig, Synchroniser};
use crate::{Cf32, Error};
use std::path::Path;

/// Everything prepared once per capture and shared by all bursts.
pub(super) struct Plan {
    /// Training symbols, unit mean power.
    pub(super) training: Vec<Cf32>,
    /// Known payload before / after the training (both or neither).
    pub(super) known_before: Option<Vec<Cf32>>,
    pub(super) known_after: Option<Vec<Cf32>>,
    /// Payload symbols before / after the training.
    pub(super) before: usize,
    pub(super) after: usize,
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
        let payload = profile.payload_symbols()?;
        let (known_before, known_after) = match payload {
            Some(p) => (Some(p.before), Some(p.after)),
            None => (None, None),
        };
        let burst_cfg = burst_config(profile);
        let taps_span = match burst_cfg.channel.span {
            TapSpan::Fixed { pre, post } => pre + post + 1,
            TapSpan::Auto {
                max_pre, max_post, ..
            } => max_pre + max_post + 1,
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
            before: profile.payload.before_symbols,
            after: profile.payload.after_symbols,
            constellation: Constellation::new(profile.payload.modulation),
            margin: burst_cfg.ff_taps + burst_cfg.fb_taps + taps_span + 4,
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

    pub(super) fn frame_symbols(&self) -> usize {
        self.before + self.training.len() + self.after
    }
}

/// The synchroniser for a plan, with the threshold to use.
pub(super) fn synchroniser(profile: &ResolvedProfile, plan: &Plan) -> Result<Synchroniser, Error> {
    let pulse = rrc_taps(profile.pulse.rolloff, profile.pulse.span_symbols, plan.sps);
    let cfg = SyncConfig {
        sps: plan.sps,
        sample_rate_hz: plan.sample_rate_hz,
        max_cfo_hz: profile
            .search
            .max_cfo_hz_at(plan.sample_rate_hz, plan.sps)
            .min(0.25 * plan.symbol_rate_hz),
        threshold: profile.search.threshold,
        min_spacing_samples: Some((plan.frame_symbols() * plan.sps).max(1)),
        cfo_segments: 4,
    };
    Ok(Synchroniser::new(&plan.training, &pulse, cfg)?)
}
