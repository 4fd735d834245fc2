//! Equalisation of a burst: classic ZF-DFE, finite-length MMSE-DFE, linear
//! MMSE, genie-fed DFE, decision-directed carrier refinement and LMS/RLS
//! tracking; plus the infinite-length theory ([`theory`]), decision-error
//! runs and a Viterbi MLSE reference detector ([`mlse`]).
//!
//! Inputs are plain: symbol-rate samples `y` (one per symbol, timed and
//! CFO-corrected by `sync`), the training symbols and the index `offset` of the
//! first one in `y`, a [`Slicer`] (the crate's constellations implement it),
//! optionally the known transmitted symbols (indexed like `y`), and plain
//! configuration structs. Outputs cover every index of `y`: soft symbols
//! (unbiased, carrier-corrected), hard decisions as constellation labels, the
//! filters used and each equaliser's predicted output SNR from theory.
//!
//! Filters are stored in *apply form*: for symbol `n`
//! `z_n = e^{−jφ_n}·Σ_{r=0}^{Nf−1} ff[r]·y[n + Δ − P − r] − Σ_{j=1}^{Nb} fb[j−1]·d[n−j]`,
//! with `Δ` the decision delay, `P` the channel's pre-cursor count, `d` the
//! fed-back symbols (decisions; the known training inside the training block;
//! the true symbols for the genie) and `φ_n` the phase loop's estimate (0 when
//! off). Samples outside `y` read as zero, so the last `Δ − P` symbols of a
//! burst see a truncated window.
//!
//! Burst layout: symbols from the training onwards are equalised forwards,
//! starting at the first training symbol (inside the training the fed-back
//! symbols are the known ones). Symbols before the training (midamble and
//! postamble frames) are equalised time-reversed from the training: with
//! `y'_k = y_{R−k}` and `x'_n = x_{R−n}` the model becomes
//! `y'_k = Σ_i h[−i]·x'_{k−i}`, i.e. the taps are reversed in order (pre-cursor
//! and post-cursor swap) and **not** conjugated — conjugation would only enter
//! for a matched-filter (time-reversed conjugate) form, not for re-indexing a
//! convolution. The reversed filters are designed from the reversed taps.

pub mod carrier;
mod engine;
pub mod genie;
pub mod linear_mmse;
pub mod mlse;
pub mod mmse_dfe;
pub mod theory;
pub mod tracking;
pub mod zf_dfe;

use crate::channel::{ChannelError, ChannelEstimate, ChannelFitConfig};
use crate::{Cf32, Cf64};
use carrier::{CarrierConfig, CarrierReport};
use engine::{run_fixed_lanes, run_pass, Adapt, FixedLane, LoopFilters, Pass};
pub use genie::GenieDfe;
pub use linear_mmse::LinearMmse;
pub use mmse_dfe::{design_mmse_dfe, DesignInput};
use serde::{Deserialize, Serialize};
use std::ops::Range;
use tracking::{AdaptMode, LoopConfig, PhaseLoop, TrackingConfig};
pub use zf_dfe::design_zf_dfe;

/// Errors of the equalisers.
#[derive(Debug, thiserror::Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum EqualiseError {
    /// The channel fit failed.
    #[error("channel fit: {0}")]
    Channel(#[from] ChannelError),
    /// The ZF-DFE main tap is too weak to divide by.
    #[error("ZF-DFE main tap {index} is {main_snr_db:.1} dB above the noise, below the {min_db:.1} dB needed to divide by it")]
    WeakMainTap {
        /// index of the main tap in `taps`
        index: usize,
        /// `10·log10(|h_m|²·Es/σ²)`
        main_snr_db: f64,
        /// threshold in dB
        min_db: f64,
    },
    /// No decision delay gave a positive-definite MMSE system.
    #[error(
        "MMSE design singular for {ff_taps} feedforward and {fb_taps} feedback taps at every delay"
    )]
    SingularDesign {
        /// `Nf`
        ff_taps: usize,
        /// `Nb`
        fb_taps: usize,
    },
    /// Known symbols were required (genie) but missing or of the wrong length.
    #[error("known symbols: expected {expected}, found {found}")]
    KnownSymbols {
        /// expected length
        expected: usize,
        /// found length (0 when absent)
        found: usize,
    },
    /// The training block does not fit in `y`.
    #[error(
        "training of {training_len} symbols at offset {offset} does not fit in {samples} samples"
    )]
    TrainingOutOfRange {
        /// training offset in `y`
        offset: usize,
        /// training length
        training_len: usize,
        /// `y.len()`
        samples: usize,
    },
    /// A configuration value out of range.
    #[error("bad equaliser setting `{key}`: expected {expected}, found {found}")]
    BadConfig {
        /// name of the setting
        key: &'static str,
        /// what is allowed
        expected: &'static str,
        /// what was given
        found: String,
    },
}

/// Hard-decision device: the crate's constellations implement it.
pub trait Slicer {
    /// Label of the nearest constellation point.
    fn slice(&self, z: Cf32) -> usize;
    /// The points, indexed by label.
    fn points(&self) -> &[Cf32];
    /// The crate's constellation behind this slicer, if it is one: the
    /// equalisers then slice with its inlined per-scheme kernel instead of
    /// calling [`Slicer::slice`] per symbol (same labels). Default: `None`.
    fn as_constellation(&self) -> Option<&crate::signal::Constellation> {
        None
    }
}

/// Designed filters in apply form (see the module doc), scaled to give an
/// unbiased output, with the design's predicted output SNR.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DfeFilters {
    /// Feedforward taps `ff[0..Nf]`.
    pub ff: Vec<Cf32>,
    /// Feedback taps `fb[0..Nb]` (`fb[j−1]` multiplies `d[n−j]`).
    pub fb: Vec<Cf32>,
    /// Decision delay `Δ`.
    pub delay: usize,
    /// Channel pre-cursor count `P` the design refers to.
    pub pre: usize,
    /// Bias factor `β` divided out (1 for zero-forcing).
    pub bias: f64,
    /// Predicted biased output SNR, dB.
    pub predicted_snr_biased_db: f64,
    /// Predicted unbiased output SNR, dB (governs the symbol error rate).
    pub predicted_snr_unbiased_db: f64,
}

impl DfeFilters {
    pub(crate) fn from_f64(
        ff: &[Cf64],
        fb: &[Cf64],
        delay: usize,
        pre: usize,
        bias: f64,
        snr_biased: f64,
        snr_unbiased: f64,
    ) -> Self {
        let n = |v: &Cf64| Cf32::new(v.re as f32, v.im as f32);
        DfeFilters {
            ff: ff.iter().map(n).collect(),
            fb: fb.iter().map(n).collect(),
            delay,
            pre,
            bias,
            predicted_snr_biased_db: theory::to_db(snr_biased),
            predicted_snr_unbiased_db: theory::to_db(snr_unbiased),
        }
    }
    /// `Δ − P`: the sample index offset of the newest sample the feedforward
    /// filter reads for symbol `n` (`y[n + lag]`).
    pub fn lag(&self) -> isize {
        self.delay as isize - self.pre as isize
    }
}

/// One burst as the equalisers see it.
#[derive(Clone, Copy)]
pub struct BurstView<'a> {
    /// Symbol-rate samples.
    pub y: &'a [Cf32],
    /// Training symbols.
    pub training: &'a [Cf32],
    /// Index of `training[0]` in `y`.
    pub offset: usize,
    /// Hard-decision device.
    pub slicer: &'a dyn Slicer,
    /// Known transmitted symbols indexed like `y` (needed by the genie only).
    pub known: Option<&'a [Cf32]>,
}

/// Equaliser output for every index of `y`.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct EqualisedSymbols {
    /// Soft symbols `z_n` (unbiased, carrier-corrected).
    pub soft: Vec<Cf32>,
    /// Hard decisions as constellation labels.
    pub labels: Vec<usize>,
    /// Phase-loop estimate `φ_n` (rad) used for symbol `n` (0 with the loop off).
    pub phase_rad: Vec<f32>,
}

/// What every equaliser offers.
pub trait Equaliser {
    /// Short name (`"zf-dfe"`, `"mmse-dfe"`, …).
    fn name(&self) -> &'static str;
    /// The forward-direction filters.
    fn filters(&self) -> &DfeFilters;
    /// Equalise the whole burst into `out` (resized to `y.len()`).
    ///
    /// # Errors
    /// [`EqualiseError::TrainingOutOfRange`]; [`EqualiseError::KnownSymbols`] for a
    /// genie without known symbols of length `y.len()`.
    fn run_into(
        &mut self,
        burst: &BurstView<'_>,
        out: &mut EqualisedSymbols,
    ) -> Result<(), EqualiseError>;
    /// Allocating convenience form of [`Equaliser::run_into`].
    ///
    /// # Errors
    /// As [`Equaliser::run_into`].
    fn run(&mut self, burst: &BurstView<'_>) -> Result<EqualisedSymbols, EqualiseError> {
        let mut out = EqualisedSymbols::default();
        self.run_into(burst, &mut out)?;
        Ok(out)
    }
}

/// Options of a DFE run shared by all equaliser types.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct RunOptions {
    /// Second-order phase loop inside the DFE (None: off).
    pub phase_loop: Option<LoopConfig>,
    /// Initial loop frequency, cycles/symbol (forward time).
    pub initial_freq_cycles_per_symbol: f64,
    /// Filter adaptation.
    pub tracking: TrackingConfig,
    /// Feed the known symbols back instead of decisions (genie).
    pub genie: bool,
}

impl Default for RunOptions {
    fn default() -> Self {
        RunOptions {
            phase_loop: None,
            initial_freq_cycles_per_symbol: 0.0,
            tracking: TrackingConfig::default(),
            genie: false,
        }
    }
}

/// A forward and a time-reversed filter pair plus run options: the body of
/// every equaliser type.
#[derive(Debug, Clone)]
pub(crate) struct DfeCore {
    pub fwd: DfeFilters,
    pub rev: DfeFilters,
    pub opts: RunOptions,
}

/// Taps of the time-reversed channel (`h'[i] = h[−i]`): reversed order, no
/// conjugation; the new pre-cursor count is the old post-cursor count.
pub fn reverse_channel(taps: &[Cf64], pre: usize) -> (Vec<Cf64>, usize) {
    let rev: Vec<Cf64> = taps.iter().rev().cloned().collect();
    let post = taps.len().saturating_sub(pre + 1);
    (rev, post)
}

impl DfeCore {
    pub(crate) fn design(
        ch: &DesignInput<'_>,
        opts: RunOptions,
        f: impl Fn(&DesignInput<'_>) -> Result<DfeFilters, EqualiseError>,
    ) -> Result<Self, EqualiseError> {
        let fwd = f(ch)?;
        let (rtaps, rpre) = reverse_channel(ch.taps, ch.pre);
        let rev = f(&DesignInput {
            taps: &rtaps,
            pre: rpre,
            ..*ch
        })?;
        Ok(DfeCore { fwd, rev, opts })
    }

    pub(crate) fn run_into(
        &self,
        burst: &BurstView<'_>,
        out: &mut EqualisedSymbols,
    ) -> Result<(), EqualiseError> {
        run_cores(&[self], burst, std::slice::from_mut(out))
            .pop()
            .unwrap_or(Ok(()))
    }

    /// The phase loop of a pass (`sign` −1 for the time-reversed one), if on.
    fn make_loop(&self, sign: f64) -> Option<PhaseLoop> {
        let two_pi = 2.0 * std::f64::consts::PI;
        self.opts.phase_loop.filter(|l| l.bandwidth > 0.0).map(|l| {
            let mut p = PhaseLoop::new(&l);
            p.freq = sign * two_pi * self.opts.initial_freq_cycles_per_symbol;
            p
        })
    }

    /// Fills `truth` (reference symbols indexed like `y`) and returns the
    /// range where they are fed back; `KnownSymbols` for a genie without them.
    fn fill_truth(
        &self,
        burst: &BurstView<'_>,
        truth: &mut Vec<Cf32>,
    ) -> Result<Range<usize>, EqualiseError> {
        let len = burst.y.len();
        let nt = burst.training.len();
        truth.clear();
        if self.opts.genie {
            match burst.known {
                Some(k) if k.len() == len => truth.extend_from_slice(k),
                other => {
                    return Err(EqualiseError::KnownSymbols {
                        expected: len,
                        found: other.map_or(0, |k| k.len()),
                    })
                }
            }
            Ok(0..len)
        } else {
            truth.resize(len, Cf32::new(0.0, 0.0));
            truth[burst.offset..burst.offset + nt].copy_from_slice(burst.training);
            Ok(burst.offset..burst.offset + nt)
        }
    }

    /// Both passes of an adapting equaliser (LMS/RLS), one after the other.
    fn run_adaptive(
        &self,
        burst: &BurstView<'_>,
        truth_range: Range<usize>,
        cs: &mut CoreScratch,
        yr: &[Cf32],
        out: &mut EqualisedSymbols,
        pass_scratch: &mut engine::PassScratch,
    ) {
        let len = burst.y.len();
        let nt = burst.training.len();
        let nadapt = |f: &DfeFilters| f.ff.len() + f.fb.len();
        // Forward: from the first training symbol to the end.
        {
            let mut lf = LoopFilters::new(&self.fwd.ff, &self.fwd.fb, self.fwd.lag());
            let mut pll = self.make_loop(1.0);
            let mut adapt = Adapt::new(&self.opts.tracking, nadapt(&self.fwd));
            let pass = Pass {
                y: burst.y,
                truth: &cs.truth,
                truth_range,
                range: burst.offset..len,
            };
            run_pass(
                &pass,
                &mut lf,
                burst.slicer,
                pll.as_mut(),
                &mut adapt,
                &mut out.soft,
                &mut out.labels,
                &mut out.phase_rad,
                pass_scratch,
            );
        }
        // Backward: the symbols before the training, time-reversed.
        if burst.offset > 0 {
            let rr = if self.opts.genie {
                0..len
            } else {
                len - burst.offset - nt..len - burst.offset
            };
            let mut lf = LoopFilters::new(&self.rev.ff, &self.rev.fb, self.rev.lag());
            let mut pll = self.make_loop(-1.0);
            let mut adapt = Adapt::new(&self.opts.tracking, nadapt(&self.rev));
            let pass = Pass {
                y: yr,
                truth: &cs.tr,
                truth_range: rr,
                range: len - burst.offset - nt..len,
            };
            run_pass(
                &pass,
                &mut lf,
                burst.slicer,
                pll.as_mut(),
                &mut adapt,
                &mut cs.soft,
                &mut cs.labels,
                &mut cs.phase,
                pass_scratch,
            );
        }
    }
}

/// Runs every core in `cores` on `burst` into the matching `outs` entry
/// (`outs.len() >= cores.len()`); returns one result per core, in order.
///
/// The passes of cores whose filters do not adapt — forward and
/// time-reversed, of every such core — go through one
/// [`engine::run_fixed_lanes`] call, which steps them in lockstep so their
/// serial recursions overlap; each pass's output is bit-identical to running
/// the core alone. Adapting cores (LMS/RLS) run one pass after the other.
pub(crate) fn run_cores(
    cores: &[&DfeCore],
    burst: &BurstView<'_>,
    outs: &mut [EqualisedSymbols],
) -> Vec<Result<(), EqualiseError>> {
    // One set of buffers per thread, reused by every run of every burst (the
    // buffers' contents never carry over: each use resets them). Should it be
    // in use already (it cannot be: runs do not nest), a fresh set serves.
    thread_local! {
        static SCRATCH: std::cell::RefCell<RunScratch> = std::cell::RefCell::new(RunScratch::default());
    }
    SCRATCH.with(|cell| match cell.try_borrow_mut() {
        Ok(mut s) => run_cores_with(cores, burst, outs, &mut s),
        Err(_) => run_cores_with(cores, burst, outs, &mut RunScratch::default()),
    })
}

fn run_cores_with(
    cores: &[&DfeCore],
    burst: &BurstView<'_>,
    outs: &mut [EqualisedSymbols],
    scratch: &mut RunScratch,
) -> Vec<Result<(), EqualiseError>> {
    assert!(outs.len() >= cores.len());
    let len = burst.y.len();
    let nt = burst.training.len();
    if burst.offset.checked_add(nt).map_or(true, |e| e > len) {
        let e = EqualiseError::TrainingOutOfRange {
            offset: burst.offset,
            training_len: nt,
            samples: len,
        };
        return cores.iter().map(|_| Err(e.clone())).collect();
    }
    let RunScratch {
        yr,
        cores: cs,
        pass,
    } = scratch;
    if cs.len() < cores.len() {
        cs.resize_with(cores.len(), CoreScratch::default);
    }
    // Two passes per core at most.
    if pass.len() < 2 * cores.len() {
        pass.resize_with(2 * cores.len(), engine::PassScratch::default);
    }
    if burst.offset > 0 {
        yr.clear();
        yr.extend(burst.y.iter().rev());
    }
    let mut status = Vec::with_capacity(cores.len());
    let mut truth_ranges = Vec::with_capacity(cores.len());
    for ((core, c), out) in cores.iter().zip(cs.iter_mut()).zip(outs.iter_mut()) {
        match core.fill_truth(burst, &mut c.truth) {
            Ok(r) => {
                status.push(Ok(()));
                truth_ranges.push(r);
            }
            Err(e) => {
                status.push(Err(e));
                truth_ranges.push(0..0);
                continue;
            }
        }
        reset_outputs(&mut out.soft, &mut out.labels, &mut out.phase_rad, len);
        if burst.offset > 0 {
            c.tr.clear();
            c.tr.extend(c.truth.iter().rev());
            reset_outputs(&mut c.soft, &mut c.labels, &mut c.phase, len);
        }
    }
    // Adapting cores: alone.
    for (((core, st), c), (out, tr)) in cores
        .iter()
        .zip(&status)
        .zip(cs.iter_mut())
        .zip(outs.iter_mut().zip(&truth_ranges))
    {
        if st.is_ok() && core.opts.tracking.mode != AdaptMode::Off {
            core.run_adaptive(burst, tr.clone(), c, yr, out, &mut pass[0]);
        }
    }
    // Fixed cores: every pass in one interleaved run.
    let filters: Vec<(LoopFilters, LoopFilters)> = cores
        .iter()
        .map(|c| {
            (
                LoopFilters::new(&c.fwd.ff, &c.fwd.fb, c.fwd.lag()),
                LoopFilters::new(&c.rev.ff, &c.rev.fb, c.rev.lag()),
            )
        })
        .collect();
    {
        let mut lanes = Vec::with_capacity(2 * cores.len());
        for ((((core, st), c), (out, tr)), (lf, lr)) in cores
            .iter()
            .zip(&status)
            .zip(cs.iter_mut())
            .zip(outs.iter_mut().zip(&truth_ranges))
            .zip(&filters)
        {
            if st.is_err() || core.opts.tracking.mode != AdaptMode::Off {
                continue;
            }
            lanes.push(FixedLane {
                pass: Pass {
                    y: burst.y,
                    truth: &c.truth,
                    truth_range: tr.clone(),
                    range: burst.offset..len,
                },
                filters: lf,
                pll: core.make_loop(1.0),
                soft: &mut out.soft,
                labels: &mut out.labels,
                phase: &mut out.phase_rad,
            });
            if burst.offset > 0 {
                let rr = if core.opts.genie {
                    0..len
                } else {
                    len - burst.offset - nt..len - burst.offset
                };
                lanes.push(FixedLane {
                    pass: Pass {
                        y: yr,
                        truth: &c.tr,
                        truth_range: rr,
                        range: len - burst.offset - nt..len,
                    },
                    filters: lr,
                    pll: core.make_loop(-1.0),
                    soft: &mut c.soft,
                    labels: &mut c.labels,
                    phase: &mut c.phase,
                });
            }
        }
        if !lanes.is_empty() {
            run_fixed_lanes(&mut lanes, burst.slicer, pass);
        }
    }
    // The time-reversed halves back into place.
    if burst.offset > 0 {
        for ((st, c), out) in status.iter().zip(cs.iter()).zip(outs.iter_mut()) {
            if st.is_err() {
                continue;
            }
            for n in 0..burst.offset {
                out.soft[n] = c.soft[len - 1 - n];
                out.labels[n] = c.labels[len - 1 - n];
                out.phase_rad[n] = c.phase[len - 1 - n];
            }
        }
    }
    status
}

/// Per-core buffers of [`run_cores`].
#[derive(Default)]
struct CoreScratch {
    truth: Vec<Cf32>,
    tr: Vec<Cf32>,
    soft: Vec<Cf32>,
    labels: Vec<usize>,
    phase: Vec<f32>,
}

/// Clear a pass's outputs to `len` zeros (soft values, labels, phases).
fn reset_outputs(soft: &mut Vec<Cf32>, labels: &mut Vec<usize>, phase: &mut Vec<f32>, len: usize) {
    soft.clear();
    soft.resize(len, Cf32::new(0.0, 0.0));
    labels.clear();
    labels.resize(len, 0);
    phase.clear();
    phase.resize(len, 0.0);
}

/// Buffers of [`run_cores`] reused across runs (see there).
#[derive(Default)]
struct RunScratch {
    yr: Vec<Cf32>,
    cores: Vec<CoreScratch>,
    pass: Vec<engine::PassScratch>,
}

macro_rules! equaliser_type {
    ($(#[$m:meta])* $t:ident) => {
        $(#[$m])*
        #[derive(Debug, Clone)]
        pub struct $t {
            pub(crate) core: $crate::equalise::DfeCore,
            pub(crate) name: &'static str,
        }
        impl $crate::equalise::Equaliser for $t {
            fn name(&self) -> &'static str {
                self.name
            }
            fn filters(&self) -> &$crate::equalise::DfeFilters {
                &self.core.fwd
            }
            fn run_into(
                &mut self,
                burst: &$crate::equalise::BurstView<'_>,
                out: &mut $crate::equalise::EqualisedSymbols,
            ) -> Result<(), $crate::equalise::EqualiseError> {
                self.core.run_into(burst, out)
            }
        }
        impl $t {
            /// Filters used for the symbols before the training (time-reversed channel).
            pub fn reverse_filters(&self) -> &$crate::equalise::DfeFilters {
                &self.core.rev
            }
        }
    };
}
pub(crate) use equaliser_type;

equaliser_type!(
    /// Classic zero-forcing DFE ([`zf_dfe`]).
    ZfDfe
);
equaliser_type!(
    /// Finite-length MMSE-DFE ([`mmse_dfe`]), optionally with LMS/RLS tracking.
    MmseDfe
);

impl ZfDfe {
    /// Design from a channel model; `main = None` picks the strongest tap.
    ///
    /// # Errors
    /// See [`design_zf_dfe`].
    pub fn new(
        ch: &DesignInput<'_>,
        main: Option<usize>,
        min_main_snr: f64,
        opts: RunOptions,
    ) -> Result<Self, EqualiseError> {
        // The main tap index refers to the forward taps; reversed, it is mirrored.
        let l = ch.taps.len();
        let fwd = design_zf_dfe(ch, main, min_main_snr)?;
        let (rtaps, rpre) = reverse_channel(ch.taps, ch.pre);
        let rmain = main.map(|m| l - 1 - m.min(l - 1));
        let rev = design_zf_dfe(
            &DesignInput {
                taps: &rtaps,
                pre: rpre,
                ..*ch
            },
            rmain,
            min_main_snr,
        )?;
        Ok(ZfDfe {
            core: DfeCore { fwd, rev, opts },
            name: "zf-dfe",
        })
    }
}

impl MmseDfe {
    /// Design with `nf` feedforward and `nb` feedback taps; `delay = None`
    /// optimises Δ. The name is `"mmse-dfe"`, or `"mmse-dfe-lms"` /
    /// `"mmse-dfe-rls"` when `opts.tracking.mode` adapts.
    ///
    /// # Errors
    /// See [`design_mmse_dfe`].
    pub fn new(
        ch: &DesignInput<'_>,
        nf: usize,
        nb: usize,
        delay: Option<usize>,
        opts: RunOptions,
    ) -> Result<Self, EqualiseError> {
        let core = DfeCore::design(ch, opts, |c| {
            mmse_dfe::design_mmse_dfe_clamped(c, nf, nb, delay)
        })?;
        let name = match opts.tracking.mode {
            AdaptMode::Off => "mmse-dfe",
            AdaptMode::Lms => "mmse-dfe-lms",
            AdaptMode::Rls => "mmse-dfe-rls",
        };
        Ok(MmseDfe { core, name })
    }
}

/// Plain configuration of [`process_burst`].
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct BurstConfig {
    /// Channel fit.
    pub channel: ChannelFitConfig,
    /// Feedforward taps `Nf` of the MMSE-DFE and the linear MMSE equaliser (default 16).
    pub ff_taps: usize,
    /// Feedback taps `Nb` of the MMSE-DFE (default 8).
    pub fb_taps: usize,
    /// Decision delay Δ; `None` optimises it (default).
    pub delay: Option<usize>,
    /// ZF-DFE main tap (index into the taps); `None`: strongest (default).
    pub zf_main_tap: Option<usize>,
    /// ZF-DFE refusal threshold `|h_m|²·Es/σ²` (linear, default 10).
    pub zf_min_main_snr: f64,
    /// Decision-directed carrier refinement (on by default).
    pub carrier: CarrierConfig,
    /// LMS/RLS tracking (off by default); when on, an extra tracked MMSE-DFE runs.
    pub tracking: TrackingConfig,
    /// Run the classic ZF-DFE (default true). A caller that reports neither its
    /// symbols nor its filters can skip the pass; its [`EqualiserResult`] is then
    /// absent from [`BurstOutput::results`].
    #[serde(default = "yes")]
    pub run_zf_dfe: bool,
}

fn yes() -> bool {
    true
}

impl Default for BurstConfig {
    fn default() -> Self {
        BurstConfig {
            channel: ChannelFitConfig::default(),
            ff_taps: 16,
            fb_taps: 8,
            delay: None,
            zf_main_tap: None,
            zf_min_main_snr: zf_dfe::DEFAULT_MIN_MAIN_SNR,
            carrier: CarrierConfig::default(),
            tracking: TrackingConfig::default(),
            run_zf_dfe: true,
        }
    }
}

/// One equaliser's result inside a [`BurstOutput`].
#[derive(Debug, Clone, PartialEq)]
pub struct EqualiserResult {
    /// Equaliser name.
    pub name: &'static str,
    /// Filters and symbols, or why this equaliser refused (e.g. weak ZF main tap).
    pub outcome: Result<(DfeFilters, EqualisedSymbols), EqualiseError>,
}

/// Everything [`process_burst`] found for one burst.
#[derive(Debug, Clone, PartialEq)]
pub struct BurstOutput {
    /// Channel fit on the carrier-corrected samples.
    pub channel: ChannelEstimate,
    /// Carrier refinement figures.
    pub carrier: CarrierReport,
    /// Infinite-length bounds for the fitted channel at its input SNR
    /// `Es/σ²` (taps as fitted, not normalised).
    pub bounds: theory::TheoryBounds,
    /// Samples after the carrier correction (what the equalisers saw).
    pub corrected: Vec<Cf32>,
    /// One entry per equaliser, in the order zf-dfe (unless
    /// [`BurstConfig::run_zf_dfe`] is off), mmse-dfe, linear-mmse, tracked
    /// mmse-dfe (if on), genie (if known symbols were given).
    pub results: Vec<EqualiserResult>,
}

impl BurstOutput {
    /// The result of the equaliser called `name`, if it ran.
    pub fn get(&self, name: &str) -> Option<&EqualiserResult> {
        self.results.iter().find(|r| r.name == name)
    }
}

/// Fit the channel, refine the carrier, and run every equaliser on one burst.
///
/// # Errors
/// Channel-fit errors, and design errors of the MMSE-DFE needed for the carrier
/// refinement. A ZF-DFE refusal is reported in its [`EqualiserResult`] only.
pub fn process_burst(
    burst: &BurstView<'_>,
    cfg: &BurstConfig,
) -> Result<BurstOutput, EqualiseError> {
    let (corrected, channel, report) = carrier::refine_carrier(burst, cfg)?;
    let b = BurstView {
        y: &corrected,
        ..*burst
    };
    let ch = DesignInput {
        taps: &channel.taps,
        pre: channel.pre,
        noise_var: channel.noise_var,
        es: channel.es,
    };
    let opts = RunOptions {
        phase_loop: cfg.carrier.enabled.then_some(cfg.carrier.tracking_loop),
        ..RunOptions::default()
    };
    // Design every equaliser first, then run them all in one go so that their
    // fixed-filter passes are interleaved (see `run_cores`).
    let mut designs: Vec<(&'static str, Result<DfeCore, EqualiseError>)> = Vec::new();
    if cfg.run_zf_dfe {
        designs.push((
            "zf-dfe",
            ZfDfe::new(&ch, cfg.zf_main_tap, cfg.zf_min_main_snr, opts).map(|e| e.core),
        ));
    }
    let mmse = MmseDfe::new(&ch, cfg.ff_taps, cfg.fb_taps, cfg.delay, opts);
    // The genie uses the very filters of the MMSE-DFE (same channel, lengths and
    // delay rule): reuse the design instead of repeating it.
    let genie = mmse
        .as_ref()
        .map(|e| GenieDfe::from_design(&e.core))
        .map_err(Clone::clone);
    designs.push(("mmse-dfe", mmse.map(|e| e.core)));
    designs.push((
        "linear-mmse",
        LinearMmse::new(&ch, cfg.ff_taps, cfg.delay, opts).map(|e| e.core),
    ));
    if cfg.tracking.mode != AdaptMode::Off {
        let topts = RunOptions {
            phase_loop: Some(cfg.tracking.phase_loop),
            tracking: cfg.tracking,
            ..opts
        };
        let name = if cfg.tracking.mode == AdaptMode::Lms {
            "mmse-dfe-lms"
        } else {
            "mmse-dfe-rls"
        };
        designs.push((
            name,
            MmseDfe::new(&ch, cfg.ff_taps, cfg.fb_taps, cfg.delay, topts).map(|e| e.core),
        ));
    }
    if burst.known.is_some() {
        designs.push(("genie-mmse-dfe", genie.map(|e| e.core)));
    }
    let cores: Vec<&DfeCore> = designs
        .iter()
        .filter_map(|(_, d)| d.as_ref().ok())
        .collect();
    let mut outs = vec![EqualisedSymbols::default(); cores.len()];
    let mut runs = run_cores(&cores, &b, &mut outs).into_iter().zip(outs);
    let mut results = Vec::with_capacity(designs.len());
    for (name, design) in &designs {
        let outcome = match design {
            Ok(core) => match runs.next() {
                Some((Ok(()), s)) => Ok((core.fwd.clone(), s)),
                Some((Err(e), _)) => Err(e),
                // One run per successful design: cannot happen.
                None => Ok((core.fwd.clone(), EqualisedSymbols::default())),
            },
            Err(e) => Err(e.clone()),
        };
        results.push(EqualiserResult { name, outcome });
    }
    let bounds = theory::bounds(
        &channel.taps,
        channel.es / channel.noise_var,
        theory::DEFAULT_GRID,
    );
    Ok(BurstOutput {
        bounds,
        channel,
        carrier: report,
        corrected,
        results,
    })
}

impl Slicer for crate::signal::Constellation {
    #[inline]
    fn slice(&self, z: Cf32) -> usize {
        crate::signal::Constellation::slice(self, z)
    }
    #[inline]
    fn points(&self) -> &[Cf32] {
        crate::signal::Constellation::points(self)
    }
    fn as_constellation(&self) -> Option<&crate::signal::Constellation> {
        Some(self)
    }
}

#[cfg(test)]
mod tests;
