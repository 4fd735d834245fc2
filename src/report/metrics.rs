//! Figures of merit computed from equalised symbols.
//!
//! Takes equalised (soft) symbols `z`, reference symbols `s` (the known payload —
//! data-aided — or the decisions) and, when the payload is known, the decided and
//! true symbol labels. Gives EVM (RMS and peak), MER, symbol/bit error counts with
//! exact Clopper–Pearson intervals, and runs of consecutive decision errors;
//! [`payload_figures`] computes all of them for one burst's payload.
//!
//! Conventions (see the crate documentation):
//! * EVM RMS = `sqrt(Σ|z−s|² / Σ|s|²)`, i.e. normalised to the mean power of the
//!   reference symbols, as 3GPP TS 36.104 §6.5.2 / TS 38.101-2 Annex F define it;
//!   `evm_rms_percent = 100·EVM`, `evm_rms_db = 20·log10(EVM)`.
//! * Peak EVM = `max_k |z_k − s_k| / sqrt(mean |s|²)`, same normalisation.
//! * MER (ETSI TR 101 290) = `10·log10(Σ|s|² / Σ|z−s|²)` dB; with the same
//!   reference `mer_db = −evm_rms_db`.
//! * All sums are accumulated in `f64` in index order, so the figures are the same
//!   whatever the thread count of the caller.

use crate::Cf32;
use serde::{Deserialize, Serialize};
use statrs::distribution::{Beta, Continuous, ContinuousCDF, StudentsT};

/// EVM and MER of one block of symbols.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
pub struct EvmFigures {
    /// Number of symbols measured.
    pub symbols: usize,
    /// RMS EVM in percent of the RMS reference amplitude.
    pub evm_rms_percent: f64,
    /// RMS EVM in dB (`20·log10(EVM)`); `-inf` is reported as `null`.
    pub evm_rms_db: Option<f64>,
    /// Peak EVM in percent.
    pub evm_peak_percent: f64,
    /// Index (within the block) of the symbol with the peak error vector.
    pub evm_peak_index: usize,
    /// Modulation error ratio in dB; `null` when the error is exactly zero.
    pub mer_db: Option<f64>,
}

/// Error-vector sums, kept separately so blocks can be combined exactly.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct EvmAccumulator {
    n: usize,
    err_power: f64,
    ref_power: f64,
    peak_err_power: f64,
    peak_index: usize,
}

impl EvmAccumulator {
    /// Add the pairs `(z[k], s[k])`; `offset` is added to indices for the peak.
    ///
    /// # Panics
    /// If `z` and `s` have different lengths (a programmer error).
    pub fn add(&mut self, z: &[Cf32], s: &[Cf32], offset: usize) {
        assert_eq!(z.len(), s.len(), "EVM needs one reference per symbol");
        for (k, (zk, sk)) in z.iter().zip(s).enumerate() {
            let e = (f64::from(zk.re) - f64::from(sk.re)).powi(2)
                + (f64::from(zk.im) - f64::from(sk.im)).powi(2);
            let r = f64::from(sk.re).powi(2) + f64::from(sk.im).powi(2);
            self.err_power += e;
            self.ref_power += r;
            if e > self.peak_err_power {
                self.peak_err_power = e;
                self.peak_index = offset + k;
            }
        }
        self.n += z.len();
    }

    /// Combine with another accumulator that covers later symbols.
    pub fn merge(&mut self, other: &EvmAccumulator) {
        self.n += other.n;
        self.err_power += other.err_power;
        self.ref_power += other.ref_power;
        if other.peak_err_power > self.peak_err_power {
            self.peak_err_power = other.peak_err_power;
            self.peak_index = other.peak_index;
        }
    }

    /// The figures, or `None` when no symbol (or only zero-power references) was added.
    pub fn figures(&self) -> Option<EvmFigures> {
        if self.n == 0 || self.ref_power <= 0.0 {
            return None;
        }
        let ratio = self.err_power / self.ref_power;
        let evm = ratio.sqrt();
        let mean_ref = self.ref_power / self.n as f64;
        let finite = |x: f64| if x.is_finite() { Some(x) } else { None };
        Some(EvmFigures {
            symbols: self.n,
            evm_rms_percent: 100.0 * evm,
            evm_rms_db: finite(20.0 * evm.log10()),
            evm_peak_percent: 100.0 * (self.peak_err_power / mean_ref).sqrt(),
            evm_peak_index: self.peak_index,
            mer_db: finite(-10.0 * ratio.log10()),
        })
    }
}

/// EVM and MER of `z` against the reference `s` (see the module documentation).
///
/// Returns `None` for empty input or an all-zero reference.
///
/// # Panics
/// If `z` and `s` have different lengths.
pub fn evm(z: &[Cf32], s: &[Cf32]) -> Option<EvmFigures> {
    let mut acc = EvmAccumulator::default();
    acc.add(z, s, 0);
    acc.figures()
}

/// A count of errors out of a number of trials with its exact two-sided interval.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
pub struct ErrorRate {
    /// Number of errors.
    pub errors: u64,
    /// Number of trials (symbols or bits).
    pub trials: u64,
    /// `errors / trials`.
    pub rate: f64,
    /// Lower end of the Clopper–Pearson interval.
    pub ci_low: f64,
    /// Upper end of the Clopper–Pearson interval.
    pub ci_high: f64,
    /// Confidence level of the interval (e.g. 0.95).
    pub confidence: f64,
}

impl ErrorRate {
    /// Rate and exact (Clopper–Pearson, 1934) interval at the given confidence.
    /// `None` when `trials == 0`.
    pub fn new(errors: u64, trials: u64, confidence: f64) -> Option<ErrorRate> {
        if trials == 0 || errors > trials {
            return None;
        }
        let (lo, hi) = clopper_pearson(errors, trials, confidence);
        Some(ErrorRate {
            errors,
            trials,
            rate: errors as f64 / trials as f64,
            ci_low: lo,
            ci_high: hi,
            confidence,
        })
    }
}

/// An interval for the symbol error rate that holds when errors come in runs
/// (decision-feedback error propagation). Errors are counted as *events* —
/// each run of consecutive wrong decisions once, as error-event analyses of
/// DFE error propagation count them (Jeruchim, Balaban & Shanmugan,
/// *Simulation of Communication Systems*, 2nd ed., §11.2 on dependent errors —
/// from memory) — and the rate is events per symbol times the mean run length.
/// Both factors are uncertain, so the interval joins one interval for each by
/// the Bonferroni inequality (common practice: two intervals at 1 − α/2 each
/// hold together with probability ≥ 1 − α):
///
/// * the event rate: Clopper–Pearson for `E` events in `N` symbols at 1 − α/2;
/// * the mean run length `L̄ = errors/E`: Student's t interval
///   `L̄ ± t(1 − α/4; E − 1)·s/√E` at 1 − α/2, with `s` the sample standard
///   deviation of the run lengths, and never below 1;
///
/// giving `[CP_low·L_low, CP_high·L_high]`. When the run lengths do not spread
/// (fewer than two events, or every run as long) the run-length factor is
/// exact and the whole confidence goes to the event interval:
/// `[CP_low(E, N), CP_high(E, N)]·L̄` at `1 − α`. So independent errors (all
/// runs of length 1) give exactly the Clopper–Pearson interval, runs of one
/// length `L` widen it by about `√L`, and spread-out run lengths widen it more.
/// The t interval assumes the runs are independent and their mean near normal;
/// with a handful of very uneven runs it is an approximation.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
pub struct RunAwareRate {
    /// Error events (runs of consecutive wrong decisions).
    pub events: u64,
    /// Mean run length `errors / events` (1 when there are no errors).
    pub mean_run_length: f64,
    /// Sample standard deviation of the run lengths (0 with fewer than two runs).
    pub run_length_sd: f64,
    /// Lower end of the interval.
    pub ci_low: f64,
    /// Upper end of the interval.
    pub ci_high: f64,
    /// Confidence level (as the Clopper–Pearson interval beside it).
    pub confidence: f64,
}

impl RunAwareRate {
    /// The interval for `trials` symbols whose wrong decisions form the runs
    /// of `histogram` (entry `i` counts runs of length `i + 1`, as
    /// [`run_length_histogram`]); `None` when `trials == 0`, the runs hold
    /// more errors than there are symbols, or `confidence` is not in (0, 1).
    pub fn new(histogram: &[u64], trials: u64, confidence: f64) -> Option<RunAwareRate> {
        let events: u64 = histogram.iter().sum();
        let (mut errors, mut squares) = (0u64, 0f64);
        for (i, &h) in histogram.iter().enumerate() {
            let len = i as u64 + 1;
            errors = errors.checked_add(h.checked_mul(len)?)?;
            squares += h as f64 * (len as f64) * (len as f64);
        }
        if trials == 0 || errors > trials || !(confidence > 0.0 && confidence < 1.0) {
            return None;
        }
        let l = if events > 0 {
            errors as f64 / events as f64
        } else {
            1.0
        };
        let sd = if events >= 2 {
            let e = events as f64;
            ((squares - e * l * l).max(0.0) / (e - 1.0)).sqrt()
        } else {
            0.0
        };
        let alpha = 1.0 - confidence;
        let (lo, hi, l_lo, l_hi) = if sd > 0.0 {
            let (lo, hi) = clopper_pearson(events, trials, 1.0 - alpha / 2.0);
            let t = StudentsT::new(0.0, 1.0, events as f64 - 1.0)
                .map(|d| d.inverse_cdf(1.0 - alpha / 4.0))
                .unwrap_or(f64::NAN);
            let half = t * sd / (events as f64).sqrt();
            (lo, hi, (l - half).max(1.0), l + half)
        } else {
            let (lo, hi) = clopper_pearson(events, trials, confidence);
            (lo, hi, l, l)
        };
        Some(RunAwareRate {
            events,
            mean_run_length: l,
            run_length_sd: sd,
            ci_low: (lo * l_lo).min(1.0),
            ci_high: (hi * l_hi).min(1.0),
            confidence,
        })
    }
}

/// Exact two-sided Clopper–Pearson interval for `k` successes in `n` trials:
/// `[B(α/2; k, n−k+1), B(1−α/2; k+1, n−k)]` with `B` the beta quantile and
/// `α = 1 − confidence`; the lower end is 0 when `k = 0`, the upper 1 when `k = n`.
///
/// # Panics
/// If `n == 0`, `k > n` or `confidence` is not in (0, 1).
pub fn clopper_pearson(k: u64, n: u64, confidence: f64) -> (f64, f64) {
    assert!(n > 0 && k <= n, "Clopper–Pearson needs 0 <= k <= n, n > 0");
    assert!(confidence > 0.0 && confidence < 1.0);
    let alpha = 1.0 - confidence;
    let (kf, nf) = (k as f64, n as f64);
    // Closed forms where one shape is 1 (Beta(1, b): CDF 1 − (1−x)^b; Beta(a, 1):
    // CDF x^a). They are exact, and the iterative inverse is very slow for the
    // shapes of a large capture (b in the millions: minutes per call).
    let lo = if k == 0 {
        0.0
    } else if k == n {
        (alpha / 2.0).powf(1.0 / nf)
    } else {
        beta_quantile(alpha / 2.0, kf, nf - kf + 1.0)
    };
    let hi = if k == n {
        1.0
    } else if k == 0 {
        -((alpha / 2.0).ln() / nf).exp_m1()
    } else {
        beta_quantile(1.0 - alpha / 2.0, kf + 1.0, nf - kf)
    };
    (lo, hi)
}

/// Beta quantile: safeguarded Newton iteration on statrs' regularised incomplete
/// beta function (the CDF), started at the mean and kept inside a bracket that
/// every CDF evaluation narrows (a step that leaves it is replaced by a bisection
/// step, geometric while the lower end is above 0, so tiny quantiles are reached in
/// few steps). statrs' own inverse CDF is not used: it is good to only about 1e-7
/// relative for very skewed shapes and takes minutes for the shapes of a large
/// capture (b in the millions).
fn beta_quantile(p: f64, a: f64, b: f64) -> f64 {
    let Ok(d) = Beta::new(a, b) else {
        // Unreachable for the positive shapes built above; keep a defined value.
        return f64::NAN;
    };
    let (mut lo, mut hi) = (0.0f64, 1.0f64);
    let mut x = a / (a + b);
    for _ in 0..200 {
        let c = d.cdf(x) - p;
        if c == 0.0 {
            return x;
        }
        if c > 0.0 {
            hi = x;
        } else {
            lo = x;
        }
        let pdf = d.pdf(x);
        let newton = x - c / pdf;
        let next = if pdf.is_finite() && pdf > 0.0 && newton > lo && newton < hi {
            newton
        } else if lo > 0.0 {
            (lo * hi).sqrt()
        } else {
            hi / 16.0
        };
        if (next - x).abs() <= 1e-15 * x || next == lo || next == hi {
            return next;
        }
        x = next;
    }
    x
}

/// One run of consecutive decision errors.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, schemars::JsonSchema)]
pub struct ErrorRun {
    /// Index of the first wrong symbol, counted in payload symbols.
    pub start: usize,
    /// Number of consecutive wrong symbols.
    pub length: usize,
}

/// Runs of consecutive `true` values in `wrong` (a run ends at the first correct
/// symbol), in order of their start.
pub fn error_runs(wrong: impl IntoIterator<Item = bool>) -> Vec<ErrorRun> {
    let mut runs = Vec::new();
    let mut current: Option<ErrorRun> = None;
    for (k, w) in wrong.into_iter().enumerate() {
        match (&mut current, w) {
            (Some(run), true) => run.length += 1,
            (None, true) => {
                current = Some(ErrorRun {
                    start: k,
                    length: 1,
                })
            }
            (Some(run), false) => {
                runs.push(*run);
                current = None;
            }
            (None, false) => {}
        }
    }
    if let Some(run) = current {
        runs.push(run);
    }
    runs
}

/// Histogram of run lengths: entry `i` counts runs of length `i + 1`.
pub fn run_length_histogram(runs: &[ErrorRun]) -> Vec<u64> {
    let longest = runs.iter().map(|r| r.length).max().unwrap_or(0);
    let mut hist = vec![0u64; longest];
    for r in runs {
        hist[r.length - 1] += 1;
    }
    hist
}

/// How much decision feedback multiplied the errors: the DFE's symbol errors
/// against the errors of the same DFE fed the true symbols (the genie).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
pub struct ErrorPropagation {
    /// Symbol errors of the decision-fed equaliser.
    pub dfe_errors: u64,
    /// Symbol errors of the same equaliser fed the true symbols.
    pub genie_errors: u64,
    /// `dfe_errors − genie_errors` (negative values are possible by chance).
    pub propagated_errors: i64,
    /// `dfe_errors / genie_errors`; `null` when the genie made no error.
    pub multiplication: Option<f64>,
}

impl ErrorPropagation {
    /// Compare the two error counts.
    pub fn new(dfe_errors: u64, genie_errors: u64) -> ErrorPropagation {
        ErrorPropagation {
            dfe_errors,
            genie_errors,
            propagated_errors: dfe_errors as i64 - genie_errors as i64,
            multiplication: if genie_errors == 0 {
                None
            } else {
                Some(dfe_errors as f64 / genie_errors as f64)
            },
        }
    }
}

/// One burst's payload as the equalisers left it, in payload order (the input
/// of [`payload_figures`]).
#[derive(Debug, Clone, Copy)]
pub struct PayloadDecisions<'a> {
    /// Equalised (soft) symbols of the reported equaliser.
    pub soft: &'a [Cf32],
    /// Its decided constellation labels, one per soft symbol.
    pub labels: &'a [usize],
    /// The payload symbol number of each (what runs and error lists count in).
    pub numbers: &'a [usize],
    /// The symbols sent, when the payload is known.
    pub known: Option<&'a [Cf32]>,
    /// Labels of the MMSE-DFE fed its own decisions and of the same DFE fed
    /// the true symbols (the genie), when both ran: their error counts give
    /// the error propagation.
    pub dfe_and_genie: Option<(&'a [usize], &'a [usize])>,
}

/// The figures of one burst's payload (see [`payload_figures`]).
#[derive(Debug, Clone, PartialEq)]
pub struct PayloadFigures {
    /// The reference symbols: the known payload, else the decided points.
    pub reference: Vec<Cf32>,
    /// EVM and MER against `reference`; `None` without symbols.
    pub evm: Option<EvmFigures>,
    /// Symbol errors (known payload only).
    pub ser: Option<ErrorRate>,
    /// Bit errors through the constellation's labelling (known payload only).
    pub ber: Option<ErrorRate>,
    /// Runs of consecutive symbol errors, starts in payload symbol numbers.
    pub runs: Vec<ErrorRun>,
    /// Payload symbol numbers of the wrong decisions.
    pub wrong: Vec<usize>,
    /// DFE against genie DFE symbol errors (known payload, both ran).
    pub propagation: Option<ErrorPropagation>,
}

/// Every per-burst figure that compares decisions with a reference: EVM and
/// MER against the known payload (else the decisions), and with a known
/// payload the symbol and bit errors with `confidence` intervals, the error
/// runs and the error propagation. A true symbol's label is the slicer's label
/// of the noise-free point, so this works for any constellation.
///
/// # Panics
/// When the slices of `d` differ in length (a programmer error).
pub fn payload_figures(
    d: &PayloadDecisions<'_>,
    constellation: &crate::signal::Constellation,
    confidence: f64,
) -> PayloadFigures {
    let n = d.soft.len();
    assert!(
        d.labels.len() == n && d.numbers.len() == n,
        "payload slices differ in length"
    );
    let reference: Vec<Cf32> = match d.known {
        Some(k) => k.to_vec(),
        None => d
            .labels
            .iter()
            .map(|&l| constellation.points()[l])
            .collect(),
    };
    let mut acc = EvmAccumulator::default();
    acc.add(d.soft, &reference, 0);
    let mut fig = PayloadFigures {
        evm: acc.figures(),
        reference,
        ser: None,
        ber: None,
        runs: Vec::new(),
        wrong: Vec::new(),
        propagation: None,
    };
    let Some(known) = d.known else {
        return fig;
    };
    let truth: Vec<usize> = known.iter().map(|s| constellation.slice(*s)).collect();
    let errors = |labels: &[usize]| -> u64 {
        labels.iter().zip(&truth).filter(|(a, b)| a != b).count() as u64
    };
    let wrong: Vec<bool> = d.labels.iter().zip(&truth).map(|(a, b)| a != b).collect();
    let bit_errors: u64 = d
        .labels
        .iter()
        .zip(&truth)
        .map(|(a, b)| u64::from((a ^ b).count_ones()))
        .sum();
    let bits = n as u64 * constellation.bits_per_symbol() as u64;
    fig.ser = ErrorRate::new(errors(d.labels), n as u64, confidence);
    fig.ber = ErrorRate::new(bit_errors, bits, confidence);
    fig.runs = error_runs(wrong.iter().copied())
        .into_iter()
        .map(|mut r| {
            r.start = d.numbers[r.start];
            r
        })
        .collect();
    fig.wrong = wrong
        .iter()
        .zip(d.numbers)
        .filter(|(w, _)| **w)
        .map(|(_, &k)| k)
        .collect();
    fig.propagation = d
        .dfe_and_genie
        .map(|(dfe, genie)| ErrorPropagation::new(errors(dfe), errors(genie)));
    fig
}

/// How often two detectors took the same decision over the same symbols.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
pub struct Agreement {
    /// Symbols compared.
    pub symbols: u64,
    /// Symbols on which both decided the same point.
    pub agree: u64,
    /// `agree / symbols`; `null` for no symbol.
    pub rate: Option<f64>,
}

impl Agreement {
    /// Count the equal labels of `a` and `b` (same length).
    pub fn of(a: impl IntoIterator<Item = usize>, b: impl IntoIterator<Item = usize>) -> Agreement {
        let (mut n, mut same) = (0u64, 0u64);
        for (x, y) in a.into_iter().zip(b) {
            n += 1;
            same += u64::from(x == y);
        }
        Agreement {
            symbols: n,
            agree: same,
            rate: (n > 0).then(|| same as f64 / n as f64),
        }
    }
}

/// The margin of the `dfe-below-mlse` warning: the DFE made more than this
/// factor times the MLSE's symbol errors …
pub const DFE_LOSS_FACTOR: f64 = 2.0;
/// … and at least this many errors, and the two 95 % Clopper–Pearson
/// intervals are disjoint (common practice, as for the error-propagation
/// warning's factor 2 and 10 errors).
pub const DFE_LOSS_MIN_ERRORS: u64 = 10;

/// The Viterbi MLSE reference detector on one burst, beside the DFE.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct MlseReport {
    /// `full` (Viterbi over all `M^L` states), `reduced-state` (DDFSE over
    /// `M^μ` states, not maximum likelihood) or `skipped`.
    pub status: String,
    /// One line, e.g. `viterbi, 16^2 = 256 states` or `skipped (16^4 states, limit 4096)`.
    pub detail: String,
    /// Channel memory `L` (fitted taps − 1).
    pub channel_memory: usize,
    /// Trellis states `M^μ`; `null` when skipped.
    pub states: Option<usize>,
    /// Symbols of state `μ`; `null` when skipped.
    pub state_memory: Option<usize>,
    /// Traceback depth, symbols; `null` when skipped.
    pub traceback_depth: Option<usize>,
    /// MLSE symbol errors and SER with its 95 % interval; `null` when the payload
    /// is unknown or the detector skipped.
    pub ser: Option<ErrorRate>,
    /// The reported equaliser's SER (= `metrics.ser`), for the comparison.
    pub dfe_ser: Option<ErrorRate>,
    /// The genie MMSE-DFE's SER (true symbols fed back); `null` when unknown.
    pub genie_ser: Option<ErrorRate>,
    /// DFE symbol errors minus MLSE symbol errors (negative is possible by chance).
    pub dfe_excess_errors: Option<i64>,
    /// Unknown payload: how often the DFE's and the MLSE's decisions agree;
    /// `null` with a known payload (the SERs say more) or when skipped.
    pub agreement: Option<Agreement>,
}

/// Per-payload-symbol labels for [`MlseReport::compare`] (all the same length).
pub struct MlseDecisions<'a> {
    /// The MLSE's decisions.
    pub mlse: &'a [usize],
    /// The reported equaliser's decisions.
    pub dfe: &'a [usize],
    /// The genie MMSE-DFE's decisions, when it ran.
    pub genie: Option<&'a [usize]>,
    /// The true labels, when the payload is known.
    pub truth: Option<&'a [usize]>,
}

impl MlseReport {
    /// The report of a burst on which the detector could not run.
    pub fn skipped(channel_memory: usize, detail: String) -> MlseReport {
        MlseReport {
            status: "skipped".into(),
            detail,
            channel_memory,
            states: None,
            state_memory: None,
            traceback_depth: None,
            ser: None,
            dfe_ser: None,
            genie_ser: None,
            dfe_excess_errors: None,
            agreement: None,
        }
    }

    /// The comparison for a detector that ran: SERs with `confidence`
    /// intervals when `d.truth` is known, else the DFE/MLSE agreement.
    /// `status`, `detail`, `channel_memory`, `states`, `state_memory` and
    /// `traceback_depth` describe the detector (see the fields).
    #[allow(clippy::too_many_arguments)]
    pub fn compare(
        status: &str,
        detail: String,
        channel_memory: usize,
        states: usize,
        state_memory: usize,
        traceback_depth: usize,
        d: &MlseDecisions<'_>,
        confidence: f64,
    ) -> MlseReport {
        let n = d.mlse.len() as u64;
        let count =
            |a: &[usize], t: &[usize]| a.iter().zip(t).filter(|(x, y)| x != y).count() as u64;
        let (ser, dfe_ser, genie_ser, excess, agreement) = match d.truth {
            Some(t) => {
                let (me, de) = (count(d.mlse, t), count(d.dfe, t));
                (
                    ErrorRate::new(me, n, confidence),
                    ErrorRate::new(de, n, confidence),
                    d.genie
                        .and_then(|g| ErrorRate::new(count(g, t), n, confidence)),
                    Some(de as i64 - me as i64),
                    None,
                )
            }
            None => (
                None,
                None,
                None,
                None,
                Some(Agreement::of(d.mlse.iter().copied(), d.dfe.iter().copied())),
            ),
        };
        MlseReport {
            status: status.into(),
            detail,
            channel_memory,
            states: Some(states),
            state_memory: Some(state_memory),
            traceback_depth: Some(traceback_depth),
            ser,
            dfe_ser,
            genie_ser,
            dfe_excess_errors: excess,
            agreement,
        }
    }

    /// Whether the DFE loses more than the stated margin to the MLSE
    /// ([`DFE_LOSS_FACTOR`], [`DFE_LOSS_MIN_ERRORS`], disjoint intervals).
    pub fn dfe_loses(&self) -> bool {
        match (&self.dfe_ser, &self.ser) {
            (Some(d), Some(m)) => {
                d.errors >= DFE_LOSS_MIN_ERRORS
                    && d.errors as f64 > DFE_LOSS_FACTOR * m.errors as f64
                    && d.ci_low > m.ci_high
            }
            _ => false,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // The run-aware interval reduces to Clopper–Pearson when every error is a
    // run of its own, and for runs of length L is L times the Clopper–Pearson
    // interval of the events (its definition); Clopper–Pearson itself is checked
    // against scipy below. 0 errors in 1024: 1 − 0.025^(1/1024) = 3.596e-3
    // (closed form of the Beta(1, n) quantile).
    #[test]
    fn the_run_aware_interval_counts_runs_once() {
        let cp = ErrorRate::new(12, 10_000, 0.95).unwrap();
        // 12 runs of length 1: exactly Clopper–Pearson.
        let same = RunAwareRate::new(&[12], 10_000, 0.95).unwrap();
        assert_eq!((same.ci_low, same.ci_high), (cp.ci_low, cp.ci_high));
        assert_eq!(same.run_length_sd, 0.0);
        // 3 runs of length 4: CP over 3 events, times 4.
        let runs = RunAwareRate::new(&[0, 0, 0, 3], 10_000, 0.95).unwrap();
        let (lo, hi) = clopper_pearson(3, 10_000, 0.95);
        assert_eq!(runs.mean_run_length, 4.0);
        assert!((runs.ci_low - 4.0 * lo).abs() < 1e-15 && (runs.ci_high - 4.0 * hi).abs() < 1e-15);
        assert!(runs.ci_high > cp.ci_high && runs.ci_low < cp.ci_low);
        let none = RunAwareRate::new(&[], 1024, 0.95).unwrap();
        assert!((none.ci_high - 3.596e-3).abs() < 1e-6, "{}", none.ci_high);
        assert!(RunAwareRate::new(&[0, 60], 100, 0.95).is_none());
        assert!(RunAwareRate::new(&[1], 0, 0.95).is_none());
    }

    #[test]
    fn spread_run_lengths_widen_the_interval_by_the_bonferroni_join_of_two_intervals() {
        // Runs of lengths 1, 1, 2 and 8 (12 errors, 4 events, mean 3, sample
        // sd √(((1−3)²·2 + (2−3)² + (8−3)²)/3) = √(34/3) ≈ 3.367). Student t
        // quantile t(0.9875; 3): scipy.stats.t.ppf(0.9875, 3) =
        // 4.176534846104503. Event interval: CP(4, 10 000) at 97.5 %.
        let r = RunAwareRate::new(&[2, 1, 0, 0, 0, 0, 0, 1], 10_000, 0.95).unwrap();
        assert_eq!(r.events, 4);
        assert_eq!(r.mean_run_length, 3.0);
        let sd = (34.0f64 / 3.0).sqrt();
        assert!((r.run_length_sd - sd).abs() < 1e-12);
        let (lo, hi) = clopper_pearson(4, 10_000, 0.975);
        let half = 4.176534846104503 * sd / 2.0;
        assert!((r.ci_high - hi * (3.0 + half)).abs() < 1e-6 * r.ci_high);
        assert!(
            (r.ci_low - lo * 1.0).abs() < 1e-15,
            "the run factor never goes below 1"
        );
        // Wider than the interval that takes the mean run length as known.
        let (lo0, hi0) = clopper_pearson(4, 10_000, 0.95);
        assert!(r.ci_high > 3.0 * hi0 && r.ci_low < 3.0 * lo0);
    }

    #[test]
    fn payload_figures_count_symbol_and_bit_errors_runs_and_propagation_by_their_definitions() {
        // Worked by hand from the definitions (common practice): two adjacent
        // wrong QPSK decisions, one off by one bit and one by two bits, make
        // one run of length 2, 2 symbol errors and 3 bit errors.
        use crate::signal::{Constellation, Modulation};
        let c = Constellation::new(Modulation::Qpsk);
        let truth = [0usize, 1, 2, 3, 0, 1];
        let known: Vec<Cf32> = truth.iter().map(|&t| c.points()[t]).collect();
        let truth: Vec<usize> = known.iter().map(|s| c.slice(*s)).collect();
        let mut labels = truth.clone();
        labels[2] ^= 1;
        labels[3] ^= 3;
        let numbers = [10usize, 11, 12, 13, 14, 15];
        let genie = truth.clone();
        let d = PayloadDecisions {
            soft: &known,
            labels: &labels,
            numbers: &numbers,
            known: Some(&known),
            dfe_and_genie: Some((&labels, &genie)),
        };
        let f = payload_figures(&d, &c, 0.95);
        let ser = f.ser.unwrap();
        assert_eq!((ser.errors, ser.trials), (2, 6));
        let ber = f.ber.unwrap();
        assert_eq!((ber.errors, ber.trials), (3, 12));
        assert_eq!(
            f.runs,
            vec![ErrorRun {
                start: 12,
                length: 2
            }]
        );
        assert_eq!(f.wrong, vec![12, 13]);
        let p = f.propagation.unwrap();
        assert_eq!((p.dfe_errors, p.genie_errors), (2, 0));
        // Soft symbols on the sent points: no error vector at all.
        assert_eq!(f.evm.unwrap().evm_rms_percent, 0.0);
        // Without a known payload the decisions are the reference.
        let blind = PayloadDecisions {
            known: None,
            dfe_and_genie: None,
            ..d
        };
        let f = payload_figures(&blind, &c, 0.95);
        assert!(f.ser.is_none() && f.runs.is_empty());
        assert_eq!(f.reference[2], c.points()[labels[2]]);
    }

    fn c(re: f32, im: f32) -> Cf32 {
        Cf32::new(re, im)
    }

    #[test]
    fn evm_of_a_hand_worked_block_matches_the_definition() {
        // Hand-computed from the 3GPP form sqrt(Σ|z−s|²/Σ|s|²) (TS 36.104 §6.5.2):
        // errors 0.1 and 0.2j on two unit-power QPSK points → sqrt((0.01+0.04)/2).
        let h = std::f32::consts::FRAC_1_SQRT_2;
        let s = [c(h, h), c(-h, h)];
        let z = [c(h + 0.1, h), c(-h, h + 0.2)];
        let f = evm(&z, &s).unwrap();
        let expect = (0.05f64 / 2.0).sqrt();
        assert!((f.evm_rms_percent / 100.0 - expect).abs() < 1e-6);
        // MER = −EVM in dB with the same reference (ETSI TR 101 290 identity).
        assert!((f.mer_db.unwrap() + f.evm_rms_db.unwrap()).abs() < 1e-9);
        assert_eq!(f.evm_peak_index, 1);
        assert!((f.evm_peak_percent - 20.0).abs() < 1e-4);
    }

    #[test]
    fn evm_of_nothing_is_none_and_perfect_symbols_have_no_db_value() {
        assert!(evm(&[], &[]).is_none());
        let s = [c(1.0, 0.0)];
        let f = evm(&s, &s).unwrap();
        assert_eq!(f.evm_rms_percent, 0.0);
        assert_eq!(f.evm_rms_db, None);
        assert_eq!(f.mer_db, None);
    }

    #[test]
    fn accumulating_in_blocks_gives_the_same_figures_as_one_pass() {
        let s: Vec<Cf32> = (0..50).map(|k| c((k % 3) as f32 - 1.0, 1.0)).collect();
        let z: Vec<Cf32> = s
            .iter()
            .enumerate()
            .map(|(k, v)| v + c(0.01 * (k % 7) as f32, -0.02))
            .collect();
        let whole = evm(&z, &s).unwrap();
        let mut a = EvmAccumulator::default();
        a.add(&z[..20], &s[..20], 0);
        let mut b = EvmAccumulator::default();
        b.add(&z[20..], &s[20..], 20);
        a.merge(&b);
        let parts = a.figures().unwrap();
        assert!((whole.evm_rms_percent - parts.evm_rms_percent).abs() < 1e-12);
        assert_eq!(whole.evm_peak_index, parts.evm_peak_index);
    }

    #[test]
    fn error_runs_split_at_every_correct_symbol() {
        let w = [
            false, true, true, false, true, false, false, true, true, true,
        ];
        let runs = error_runs(w);
        assert_eq!(
            runs,
            vec![
                ErrorRun {
                    start: 1,
                    length: 2
                },
                ErrorRun {
                    start: 4,
                    length: 1
                },
                ErrorRun {
                    start: 7,
                    length: 3
                },
            ]
        );
        assert_eq!(run_length_histogram(&runs), vec![1, 1, 1]);
        assert!(error_runs([false; 4]).is_empty());
    }

    #[test]
    fn clopper_pearson_edges_are_zero_and_one() {
        let (lo, hi) = clopper_pearson(0, 10, 0.95);
        assert_eq!(lo, 0.0);
        // Known closed form for k = 0: 1 − (α/2)^(1/n) (common practice).
        assert!((hi - (1.0 - 0.025f64.powf(0.1))).abs() < 1e-9);
        let (lo, hi) = clopper_pearson(10, 10, 0.95);
        assert_eq!(hi, 1.0);
        assert!((lo - 0.025f64.powf(0.1)).abs() < 1e-9);
    }
}

#[cfg(test)]
mod reference_vectors {
    //! Checks against tests/vectors/metrics.json, written by
    //! tests/vectors/make_metric_vectors.py with numpy/scipy (versions inside the file).
    use super::*;
    use serde_json::Value;

    fn vectors() -> Value {
        serde_json::from_str(include_str!("../../tests/vectors/metrics.json"))
            .expect("committed vector file parses")
    }

    #[test]
    fn clopper_pearson_of_a_large_capture_matches_scipy_and_returns_promptly() {
        // Source: scipy 1.17.1 scipy.stats.beta.ppf, n = 8 192 000 trials (the bit
        // count of 2000 bursts of 1024 16-QAM symbols): k = 0 → high =
        // beta.ppf(0.975, 1, n); k = n → low = beta.ppf(0.025, n, 1). Tolerance 1e-9
        // relative, as for the committed vectors. (The iterative inverse took minutes
        // per call at this n; the closed forms are instant.)
        let n = 8_192_000;
        let (lo, hi) = clopper_pearson(0, n, 0.95);
        assert_eq!(lo, 0.0);
        assert!((hi - 4.503025663522864e-07).abs() <= 1e-9 * 4.503025663522864e-07);
        let (lo, hi) = clopper_pearson(n, n, 0.95);
        assert_eq!(hi, 1.0);
        assert!((lo - 0.9999995496974337).abs() <= 1e-9);
    }

    #[test]
    fn clopper_pearson_with_a_few_errors_in_millions_of_trials_matches_scipy() {
        // Source: scipy 1.17.1 scipy.stats.beta.ppf(0.025, k, n−k+1) and
        // beta.ppf(0.975, k+1, n−k), n = 8 192 000. Tolerance 1e-8 relative: at these
        // shapes statrs' regularised incomplete beta (the function the Newton
        // iteration inverts) agrees with scipy's to about 1.5e-9.
        let n = 8_192_000;
        for (k, want_lo, want_hi) in [
            (5u64, 1.981795197273692e-07, 1.4243563636479417e-06),
            (300, 3.259396931028248e-05, 4.100834821805589e-05),
        ] {
            let (lo, hi) = clopper_pearson(k, n, 0.95);
            assert!((lo - want_lo).abs() <= 1e-8 * want_lo, "k={k}: low {lo}");
            assert!((hi - want_hi).abs() <= 1e-8 * want_hi, "k={k}: high {hi}");
        }
    }

    #[test]
    fn clopper_pearson_matches_scipy_beta_quantiles() {
        // Source: scipy.stats.beta.ppf (Clopper & Pearson, Biometrika 26(4), 1934).
        // Tolerance 1e-9 relative: both sides evaluate the same regularised incomplete beta.
        for case in vectors()["clopper_pearson"].as_array().unwrap() {
            let k = case["k"].as_u64().unwrap();
            let n = case["n"].as_u64().unwrap();
            let conf = case["confidence"].as_f64().unwrap();
            let (lo, hi) = clopper_pearson(k, n, conf);
            let (elo, ehi) = (
                case["low"].as_f64().unwrap(),
                case["high"].as_f64().unwrap(),
            );
            assert!(
                (lo - elo).abs() <= 1e-9 * elo.max(1e-12) + 1e-15,
                "k={k} n={n}: low {lo} vs scipy {elo}"
            );
            assert!(
                (hi - ehi).abs() <= 1e-9 * ehi.max(1e-12) + 1e-15,
                "k={k} n={n}: high {hi} vs scipy {ehi}"
            );
        }
    }

    #[test]
    fn evm_and_mer_match_an_independent_numpy_computation() {
        // Source: numpy evaluation of the 3GPP TS 36.104 EVM and ETSI TR 101 290 MER definitions
        // on a seeded 16-QAM block; both sides accumulate in double precision.
        let v = vectors();
        let ex = &v["evm_example"];
        let pts = |key: &str| -> Vec<Cf32> {
            ex[key]
                .as_array()
                .unwrap()
                .iter()
                .map(|p| Cf32::new(p[0].as_f64().unwrap() as f32, p[1].as_f64().unwrap() as f32))
                .collect()
        };
        let f = evm(&pts("z"), &pts("s")).unwrap();
        let close = |a: f64, b: f64| (a - b).abs() < 1e-9 * b.abs().max(1.0);
        assert!(close(
            f.evm_rms_percent,
            ex["evm_rms_percent"].as_f64().unwrap()
        ));
        assert!(close(
            f.evm_rms_db.unwrap(),
            ex["evm_rms_db"].as_f64().unwrap()
        ));
        assert!(close(f.mer_db.unwrap(), ex["mer_db"].as_f64().unwrap()));
        assert!(close(
            f.evm_peak_percent,
            ex["evm_peak_percent"].as_f64().unwrap()
        ));
        assert_eq!(
            f.evm_peak_index as u64,
            ex["evm_peak_index"].as_u64().unwrap()
        );
    }

    #[test]
    fn the_mlse_comparison_counts_errors_and_agreement_by_hand() {
        // Hand-counted: truth 0 1 2 3 0 1; mlse wrong at 1 symbol, dfe at 3, genie at 2.
        let truth = [0, 1, 2, 3, 0, 1];
        let mlse = [0, 1, 2, 3, 0, 2];
        let dfe = [1, 1, 0, 3, 0, 2];
        let genie = [0, 1, 0, 3, 0, 2];
        let d = MlseDecisions {
            mlse: &mlse,
            dfe: &dfe,
            genie: Some(&genie),
            truth: Some(&truth),
        };
        let r = MlseReport::compare("full", "x".into(), 2, 16, 2, 64, &d, 0.95);
        assert_eq!(r.ser.map(|e| e.errors), Some(1));
        assert_eq!(r.dfe_ser.map(|e| e.errors), Some(3));
        assert_eq!(r.genie_ser.map(|e| e.errors), Some(2));
        assert_eq!(r.dfe_excess_errors, Some(2));
        assert!(r.agreement.is_none());
        // Too few errors for the warning.
        assert!(!r.dfe_loses());
        let blind = MlseDecisions {
            truth: None,
            genie: None,
            ..d
        };
        let a = MlseReport::compare("full", "x".into(), 2, 16, 2, 64, &blind, 0.95)
            .agreement
            .unwrap();
        // mlse vs dfe agree at indices 1, 3, 4, 5.
        assert_eq!((a.symbols, a.agree, a.rate), (6, 4, Some(4.0 / 6.0)));
    }

    #[test]
    fn the_dfe_loss_warning_needs_the_factor_the_count_and_disjoint_intervals() {
        let rep = |dfe: u64, mlse: u64| MlseReport {
            ser: ErrorRate::new(mlse, 10_000, 0.95),
            dfe_ser: ErrorRate::new(dfe, 10_000, 0.95),
            ..MlseReport::skipped(2, String::new())
        };
        assert!(rep(100, 10).dfe_loses());
        assert!(!rep(100, 60).dfe_loses(), "factor below 2");
        assert!(!rep(9, 0).dfe_loses(), "fewer than 10 errors");
        // 12 against 5: factor 2.4 but the 95 % intervals overlap.
        assert!(!rep(12, 5).dfe_loses());
    }
}
