//! Channel estimation over the known training symbols.
//!
//! Takes symbol-rate samples `y` (one complex sample per symbol, already
//! CFO-corrected and timed by `sync`), the known training symbols and the index
//! of the first training symbol in `y`. Gives out a [`ChannelEstimate`]: complex
//! taps `h[−P..=Q]` (crate convention, main tap at index `P`), the noise
//! variance and SNR from the fit residual, the number of significant taps and,
//! when asked, a DC term and the conjugate (image) taps of a widely-linear
//! model for IQ imbalance.
//!
//! Model (crate convention, see `src/lib.rs`):
//! `y[k] = Σ_{i=−P}^{Q} h[i]·x[k−i] (+ Σ_i g[i]·conj(x[k−i]) + d) + n[k]`.
//! SNR is `Σ|h|²·Es / σ²` with `Es` the mean power of the training symbols
//! (1 for the crate's unit-power constellations) and `σ² = E|n|²`.
//! All computation is in `f64`.

mod front_end;
mod ls;
mod noise;
mod window;

pub use front_end::{beta_from_imbalance, fit_front_end, imbalance_from_beta, FrontEndFit};
pub use ls::{fit_channel, fit_taps};
pub use noise::{noise_variance_from_rss, significant_tap_count, snr_db};
pub use window::{WindowCost, WindowScore};

use crate::Cf64;
use serde::{Deserialize, Serialize};

/// Errors of the channel fit.
#[derive(Debug, thiserror::Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum ChannelError {
    /// The training does not lie inside `y`.
    #[error(
        "training of {training_len} symbols at offset {offset} does not fit in {samples} samples"
    )]
    TrainingOutOfRange {
        /// index of the first training symbol in `y`
        offset: usize,
        /// training length in symbols
        training_len: usize,
        /// samples available
        samples: usize,
    },
    /// Fewer usable observations than unknowns plus one (no residual degree of freedom).
    #[error("training too short: {observations} usable observations for {unknowns} unknowns (need at least unknowns + 1)")]
    TooShort {
        /// observations whose whole regressor lies in the training
        observations: usize,
        /// complex unknowns of the model
        unknowns: usize,
    },
    /// The training does not excite every tap: condition number of the regressor above the cap.
    #[error("training does not excite all {unknowns} unknowns: regressor condition number {condition:.3e} exceeds the cap {cap:.3e}")]
    IllConditioned {
        /// complex unknowns of the model
        unknowns: usize,
        /// 2-norm condition number of the regressor matrix
        condition: f64,
        /// configured cap ([`ChannelFitConfig::max_condition`])
        cap: f64,
    },
    /// A non-finite sample inside the observation window.
    #[error("non-finite sample at index {index}")]
    NonFinite {
        /// index into `y`
        index: usize,
    },
    /// A configuration value out of range.
    #[error("bad channel-fit setting `{key}`: expected {expected}, found {found}")]
    BadConfig {
        /// name of the setting
        key: &'static str,
        /// what is allowed
        expected: &'static str,
        /// what was given
        found: String,
    },
}

/// How many pre-cursor and post-cursor taps to fit.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum TapSpan {
    /// Exactly `pre` pre-cursor and `post` post-cursor taps.
    Fixed {
        /// pre-cursor taps `P`
        pre: usize,
        /// post-cursor taps `Q`
        post: usize,
    },
    /// Choose `P ∈ [min_pre, max_pre]`, `Q ∈ [min_post, max_post]` by the MDL
    /// criterion (Rissanen 1978), see [`fit_channel`]. A count that is fixed
    /// while the other is automatic has `min == max`.
    Auto {
        /// smallest `P` tried
        min_pre: usize,
        /// largest `P` tried
        max_pre: usize,
        /// smallest `Q` tried
        min_post: usize,
        /// largest `Q` tried
        max_post: usize,
    },
}

/// Plain configuration of the least-squares channel fit.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct ChannelFitConfig {
    /// Tap counts, fixed or chosen automatically.
    pub span: TapSpan,
    /// Fit a constant (DC) term `d`.
    pub dc_offset: bool,
    /// Fit conjugate taps `g` (widely-linear model for IQ imbalance).
    pub iq_imbalance: bool,
    /// Largest accepted 2-norm condition number of the regressor matrix
    /// (default 1e3: the noise gain of the worst-excited direction is then at
    /// most 1e6 times the best one; a white random training gives about 1–3).
    pub max_condition: f64,
    /// A tap counts as significant when `|h_i|² > significance·var(ĥ_i)`, with
    /// `var(ĥ_i) = σ²·[(XᴴX)⁻¹]_ii` its estimation variance (default 10: a zero
    /// tap passes with probability e⁻¹⁰ ≈ 4.5e-5 under Gaussian noise).
    pub significance: f64,
}

impl Default for ChannelFitConfig {
    fn default() -> Self {
        ChannelFitConfig {
            span: TapSpan::Fixed { pre: 2, post: 4 },
            dc_offset: false,
            iq_imbalance: false,
            max_condition: 1e3,
            significance: 10.0,
        }
    }
}

/// How the tap counts were chosen.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum SpanChoice {
    /// Given by the caller.
    Fixed,
    /// Chosen by MDL; `score` is the winning `M·ln(RSS/M) + K·ln(M)`.
    Mdl {
        /// MDL score of the chosen model (lower is better)
        score: f64,
    },
}

/// Result of the least-squares channel fit.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ChannelEstimate {
    /// Taps `h[−P], …, h[Q]`; the main tap `h[0]` is at index `pre`.
    pub taps: Vec<Cf64>,
    /// Pre-cursor tap count `P` (= index of the main tap).
    pub pre: usize,
    /// Post-cursor tap count `Q`.
    pub post: usize,
    /// Conjugate taps `g[−P..=Q]` of the widely-linear model, when fitted.
    pub conj_taps: Option<Vec<Cf64>>,
    /// DC term `d`, when fitted.
    pub dc: Option<Cf64>,
    /// Noise variance `σ² = RSS/(M − K)` (unbiased: `M` observations, `K` complex unknowns).
    pub noise_var: f64,
    /// Mean power of the training symbols (`Es`).
    pub es: f64,
    /// `Σ|h|²·Es/σ²` in dB.
    pub snr_db: f64,
    /// Observations used (`M`).
    pub observations: usize,
    /// Complex unknowns (`K`).
    pub unknowns: usize,
    /// 2-norm condition number of the regressor.
    pub condition_number: f64,
    /// Estimation variance of each tap, `σ²·[(XᴴX)⁻¹]_ii` (same order as `taps`).
    pub tap_variance: Vec<f64>,
    /// Taps with `|h_i|² > significance·var(ĥ_i)`.
    pub significant_taps: usize,
    /// How `pre`/`post` were chosen.
    pub span_choice: SpanChoice,
}

impl ChannelEstimate {
    /// Index of the main tap in `taps` (= `pre`).
    pub fn main_index(&self) -> usize {
        self.pre
    }
    /// Linear SNR `Σ|h|²·Es/σ²`.
    pub fn snr_linear(&self) -> f64 {
        10f64.powf(self.snr_db / 10.0)
    }
}
