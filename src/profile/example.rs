//! The example profile printed by `iqaudit profile new`: the project's quayside
//! crane telemetry link (16-QAM at 250 kBd, 4 samples per symbol, RRC 0.25),
//! with a few fields overridable. Takes in [`ExampleOptions`], gives out a
//! complete [`Profile`] in which every key is written out.

use super::schema::{
    CaptureSection, ChannelFitSection, Delay, EqualiserKind, EqualiserSection, LimitsSection,
    MlseSection, PayloadPosition, PayloadRule, PayloadSection, Profile, PulseSection, PulseShape,
    SearchSection, Sequence, TapCount, Tracking, TrainingSection,
};
use crate::capture::SampleFormat;
use crate::signal::{Modulation, PrbsPattern};

/// What `profile new` lets the user change; the rest is the crane link.
#[derive(Debug, Clone, PartialEq)]
pub struct ExampleOptions {
    /// Payload modulation (default 16-QAM).
    pub modulation: Modulation,
    /// Samples per symbol (default 4).
    pub samples_per_symbol: u32,
    /// Symbol rate in Hz (default 250 000).
    pub symbol_rate_hz: f64,
    /// RRC roll-off (default 0.25).
    pub rolloff: f64,
    /// Payload symbols per burst (default 1024).
    pub payload_symbols: usize,
}

impl Default for ExampleOptions {
    fn default() -> Self {
        ExampleOptions {
            modulation: Modulation::Qam16,
            samples_per_symbol: 4,
            symbol_rate_hz: 250_000.0,
            rolloff: 0.25,
            payload_symbols: 1024,
        }
    }
}

/// The crane telemetry link profile with every key written out: PRBS9 training
/// of 64 QPSK symbols, payload after it regenerated from PRBS15, a 1 + 3 tap
/// channel fit and an MMSE-DFE. The EVM limit is the 3GPP base-station figure
/// for the payload modulation (TS 38.104 Table 6.5.2.2-1 via
/// REFERENCE-VALUES §6.1: QPSK 17.5 %, 16-QAM 12.5 %, 64-QAM 8 %, 256-QAM 3.5 %;
/// BPSK and 8PSK take the QPSK and 16-QAM figures, a project choice), and
/// `mer_db_min` is the same figure in dB.
pub fn example_profile(opts: &ExampleOptions) -> Profile {
    let evm_percent = match opts.modulation {
        Modulation::Bpsk | Modulation::Qpsk => 17.5,
        Modulation::Psk8 | Modulation::Qam16 => 12.5,
        Modulation::Qam64 => 8.0,
        Modulation::Qam256 => 3.5,
    };
    let mer_db_min = (-20.0 * (evm_percent / 100.0f64).log10() * 100.0).round() / 100.0;
    let sample_rate_hz = opts.symbol_rate_hz * opts.samples_per_symbol as f64;
    Profile {
        capture: CaptureSection {
            format: Some(SampleFormat::Ci16Le),
            sample_rate_hz: Some(sample_rate_hz),
            center_freq_hz: Some(458_500_000.0),
            swap_iq: false,
            unsigned_zero: None,
        },
        samples_per_symbol: Some(opts.samples_per_symbol),
        symbol_rate_hz: None,
        pulse: PulseSection {
            shape: PulseShape::Rrc,
            rolloff: opts.rolloff,
            span_symbols: Some(12),
        },
        training: TrainingSection {
            modulation: Some(Modulation::Qpsk),
            sequence: Sequence::Prbs {
                pattern: Some(PrbsPattern::Prbs9),
                polynomial: None,
                seed: Some(511),
                inverted: Some(false),
                length: 64,
            },
        },
        payload: PayloadSection {
            modulation: opts.modulation,
            position: Some(PayloadPosition::After),
            length_symbols: Some(opts.payload_symbols),
            length_before_symbols: None,
            length_after_symbols: None,
            known: Some(PayloadRule::Prbs {
                pattern: Some(PrbsPattern::Prbs15),
                polynomial: None,
                seed: Some(0x7fff),
                inverted: Some(true),
            }),
        },
        channel_fit: ChannelFitSection {
            pre_cursor_taps: Some(TapCount::Fixed(1)),
            post_cursor_taps: Some(TapCount::Fixed(3)),
            dc_offset: Some(false),
            iq_imbalance: Some(false),
        },
        equaliser: EqualiserSection {
            kind: Some(EqualiserKind::MmseDfe),
            feedforward_taps: Some(8),
            feedback_taps: Some(3),
            delay: Some(Delay::Auto),
            carrier_refinement: Some(true),
            tracking: Some(Tracking::Off),
            clock_tracking: Some(true),
            mlse: Some(MlseSection {
                enabled: Some(false),
                max_states: Some(crate::equalise::mlse::DEFAULT_MAX_STATES),
                reduced_state: Some(true),
            }),
        },
        search: SearchSection {
            threshold: None,
            max_cfo_hz: Some(0.02 * opts.symbol_rate_hz),
        },
        limits: LimitsSection {
            evm_rms_percent_max: Some(evm_percent),
            mer_db_min: Some(mer_db_min),
            ser_max: Some(1e-3),
            ser_max_on_upper_bound: None,
            cfo_hz_abs_max: Some(0.01 * opts.symbol_rate_hz),
            spectral_mask: Vec::new(),
        },
    }
}
