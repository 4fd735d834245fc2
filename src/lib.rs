//! # iqaudit — audit recorded baseband IQ captures
//!
//! iqaudit reads a recorded baseband IQ capture, finds every occurrence of a
//! user-described training block, fits a multi-tap complex channel over the
//! training symbols, equalises the payload with decision feedback and reports
//! EVM, MER, error counts, channel taps and decision-error runs.
//!
//! The library is usable without the command-line front end. The modules follow
//! the data flow:
//!
//! ```text
//! capture ──► signal definitions ──► sync ──► channel ──► equalise ──► report
//!   (raw/WAV/SigMF)  (constellations,   (find bursts,  (LS taps,   (ZF-DFE,     (metrics,
//!                     sequences, RRC)    CFO, timing)   noise)      MMSE-DFE…)   JSON, plots)
//! ```
//!
//! with `synth` (test captures with known ground truth) and `batch` beside them.
//!
//! ## Module map
//!
//! | module | job |
//! |---|---|
//! | [`capture`] | open raw, WAV and SigMF captures by memory map; decode to [`Cf32`] |
//! | [`signal`] | constellations, PRBS/Barker/Zadoff-Chu sequences, RRC pulses |
//! | [`profile`] | the link profile: strict schema, defaults, errors naming the key |
//! | [`sync`] | overlap-save search, CFO, timing, burst extraction |
//! | [`channel`] | least-squares channel fit, noise variance, tap counts |
//! | [`equalise`] | ZF-DFE, MMSE-DFE, linear MMSE, genie, carrier refinement, LMS/RLS, theory |
//! | [`report`] | figures of merit, the report schema, terminal text, plots, recheck comparison |
//! | [`analyse`] | the driver: one capture through every stage into a report |
//! | [`recheck`] | re-run a recorded report and say whether every figure reproduces |
//! | [`batch`] | folders of captures: walk, shard, resume, summaries |
//! | [`synth`] | test captures with known ground truth |
//! | [`atomic`] | atomic output files shared by every writer |
//! | [`limits`] | documented caps on every size read from input |
//!
//! ## Conventions (apply everywhere in the crate)
//!
//! * **Samples** are [`Cf32`] (`Complex<f32>`). Integer capture formats are scaled
//!   so that full scale is 1.0: signed codes divide by 2^(bits−1) (`ci8` by 128,
//!   `ci16` by 32768, `ci32` by 2³¹); unsigned codes (`cu8`, `cu16`, `cu32`) map
//!   `x` to `(x − z)/z` with the zero point `z` of [`UnsignedZero`] — by default
//!   `(2^bits − 1)/2` (127.5 for `cu8`), optionally `2^(bits−1)` (128, the SigMF
//!   reference library's); PCM WAV likewise (8-bit WAV PCM has its zero at 128).
//!   A sample sitting at the most negative or most positive integer code counts as
//!   clipped.
//! * **Carrier frequency offset** (`cfo_hz`): the received signal is the ideal
//!   baseband signal multiplied by `exp(+j·2π·cfo_hz·t)`, so a positive `cfo_hz`
//!   means the received carrier sits above the nominal one. Correction multiplies
//!   by `exp(−j·2π·cfo_hz·t)`. Carrier phase (`phase_rad`) is the residual phase of
//!   the received training block relative to the reference, at the first training
//!   symbol, after CFO correction.
//! * **Receiver DC and IQ imbalance**: the receiver samples
//!   `r = K1·s + K2·conj(s) + d` of the signal `s` it should see, with
//!   `I' = I, Q' = g·(Q·cos φ − I·sin φ)`, i.e. `K1 = (1 + g·e^{−jφ})/2` and
//!   `K2 = (1 − g·e^{jφ})/2`; gain imbalance is `20·log10 g` dB, phase imbalance
//!   `φ` degrees. `synth` applies this model, `info` estimates it blind and the
//!   report gives what the fit removed, all with this sign.
//! * **Sample-clock offset** (`sco_ppm`, ε = `sco_ppm`·10⁻⁶): positive when the
//!   receiver's sample clock runs fast. Received sample `n` is taken at transmit
//!   time `n/(fs·(1 + ε))`, so symbol `k` of a burst (0 = first training symbol)
//!   lies at capture sample `t₀ + k·sps·(1 + ε)` and a burst of `N` symbols
//!   spans `N·sps·ε` samples more than nominal (`synth --sco-ppm` makes such
//!   captures; the report's `bursts[].sco_ppm` estimates ε per burst).
//! * **Channel taps**: the symbol-spaced model is
//!   `y[k] = Σ_{i=−P}^{Q} h[i]·x[k−i] + n[k]`. Taps are stored in the order
//!   `h[−P], …, h[−1], h[0], h[1], …, h[Q]`; the *main tap* `h[0]` sits at index
//!   `P` (`main_index`). Taps with `i < 0` are **pre-cursor** (a later symbol
//!   leaks into the current sample), taps with `i > 0` are **post-cursor** (an
//!   earlier symbol leaks in; this is what the decision feedback cancels).
//! * **Symbol energy and noise**: constellations have unit mean power. Es/N0 is
//!   symbol energy over noise power spectral density; at the symbol-rate matched
//!   filter output (unit-energy pulse) it equals `E|x|² / E|n|²`, which is what
//!   "SNR" means in this crate.
//! * **EVM** is RMS: `sqrt(Σ|z−s|² / Σ|s|²)` where `s` are the reference symbols
//!   (the known payload — data-aided — or the decisions), i.e. normalised to the
//!   mean reference constellation power as 3GPP TS 36.104 / 38.104 define it.
//!   `evm_rms_percent = 100·EVM`, `evm_rms_db = 20·log10(EVM)`.
//!   **MER** (ETSI TR 101 290) is `10·log10(Σ|s|² / Σ|z−s|²)`; with the same
//!   reference `mer_db = −evm_rms_db`.
//! * **dB**: powers use `10·log10`, amplitude ratios `20·log10`. `dBFS` is power
//!   relative to a full-scale complex sample (`|x|² = 1` → 0 dBFS).
//! * **FFT normalisation**: rustfft's forward and inverse transforms are both
//!   unnormalised; code that needs an inverse divides by `N` explicitly and says so.
//! * **Units in names**: `_hz`, `_db`, `_percent`, `_samples`, `_symbols`,
//!   `_bytes`, `_rad`; `start_sample` is an index into the capture's complex
//!   samples counted from 0.
#![deny(missing_docs)]

use num_complex::Complex;

/// One complex baseband sample or symbol, single precision.
pub type Cf32 = Complex<f32>;
/// One complex value in double precision (used where sums must not drift).
pub type Cf64 = Complex<f64>;

pub mod analyse;
pub mod atomic;
pub mod batch;
pub mod capture;
pub mod channel;
pub mod equalise;
mod error;
pub mod json;
pub mod limits;
pub mod profile;
pub mod recheck;
pub mod report;
pub mod signal;
pub mod sync;
pub mod synth;
pub mod text;

pub use capture::{
    write_capture, AnnotationTarget, Capture, CaptureError, CaptureNote, Container, OpenOptions,
    ReadStats, SampleFormat, SigmfAnnotation, UnsignedZero, WavEncoding, WriteSpec, WriteStats,
};
pub use error::Error;
pub use profile::{load_profile, Profile, ProfileError, ResolvedProfile};
pub use signal::{Constellation, Modulation};
pub use synth::{GroundTruth, SynthError, SynthSpec};

#[cfg(test)]
mod testutil;
