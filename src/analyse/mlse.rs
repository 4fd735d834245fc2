//! The Viterbi MLSE reference detector on one analysed burst (`metrics.mlse`).
//!
//! Takes the burst's equaliser output (the samples the equalisers saw and the
//! fitted channel), the frame layout and the reported equaliser's decisions;
//! gives the [`MlseReport`]: the detector run over the frame's symbols present
//! in the capture, compared on the payload present with the reported equaliser
//! and, with a known payload, the genie DFE; else the decision agreement.
//! Runs only when the profile turns it on (`equaliser.mlse.enabled`).

use super::plan::Plan;
use super::CONFIDENCE;
use crate::equalise::mlse::{Mlse, MlseBurst, MlseConfig, MlseScratch};
use crate::equalise::{BurstOutput, EqualisedSymbols};
use crate::report::metrics::{MlseDecisions, MlseReport, DFE_LOSS_FACTOR};
use crate::report::schema::{Warning, WarningCode};
use crate::Cf32;
use std::cell::RefCell;
use std::ops::Range;

/// Buffers reused burst after burst on one thread.
type Buffers = (MlseScratch, Vec<usize>, Vec<Cf32>);

/// `metrics.mlse` of one burst: the MLSE on `out.corrected` (the fitted DC
/// term removed) with `out.channel`, over `span` (indices of `out.corrected`;
/// the training inside), compared with the reported equaliser's decisions
/// `dfe` (and the genie's when `truth` is known) at the payload symbols
/// `present` (`(payload number, index)` pairs).
#[allow(clippy::too_many_arguments)]
pub(super) fn burst_mlse(
    cfg: &MlseConfig,
    out: &BurstOutput,
    plan: &Plan,
    offset: usize,
    span: Range<usize>,
    present: &[(usize, usize)],
    dfe: &EqualisedSymbols,
    truth: Option<&[usize]>,
) -> MlseReport {
    let ch = &out.channel;
    let memory = ch.taps.len().saturating_sub(1);
    let det = match Mlse::new(&ch.taps, ch.pre, &plan.constellation, cfg) {
        Ok(d) => d,
        Err(e) => return MlseReport::skipped(memory, e.to_string()),
    };
    // One set of buffers per thread (runs do not nest; should the set be in
    // use, a fresh one serves).
    thread_local! {
        static SCRATCH: RefCell<Buffers> = RefCell::new(Default::default());
    }
    let run = |bufs: &mut Buffers| {
        let (sc, labels, ybuf) = bufs;
        let y: &[Cf32] = match ch.dc {
            Some(d) => {
                let d = Cf32::new(d.re as f32, d.im as f32);
                ybuf.clear();
                ybuf.extend(out.corrected.iter().map(|v| v - d));
                ybuf
            }
            None => &out.corrected,
        };
        let burst = MlseBurst {
            y,
            training: &plan.training,
            offset,
            span: span.clone(),
        };
        if let Err(e) = det.detect_into(&burst, labels, sc) {
            return MlseReport::skipped(memory, format!("skipped ({e})"));
        }
        let take = |l: &[usize]| present.iter().map(|&(_, i)| l[i]).collect::<Vec<usize>>();
        let ml = take(labels);
        let df = take(&dfe.labels);
        let genie = truth
            .and_then(|_| out.get("genie-mmse-dfe"))
            .and_then(|r| r.outcome.as_ref().ok())
            .map(|(_, g)| take(&g.labels));
        MlseReport::compare(
            det.status(),
            det.describe(),
            memory,
            det.states(),
            det.state_memory(),
            det.traceback_depth(),
            &MlseDecisions {
                mlse: &ml,
                dfe: &df,
                genie: genie.as_deref(),
                truth,
            },
            CONFIDENCE,
        )
    };
    SCRATCH.with(|cell| match cell.try_borrow_mut() {
        Ok(mut b) => run(&mut b),
        Err(_) => run(&mut Default::default()),
    })
}

/// The `dfe-below-mlse` warning when the reported equaliser `name` lost more
/// than the stated margin to the MLSE ([`MlseReport::dfe_loses`]).
pub(super) fn mlse_warning(ml: &MlseReport, name: &str, warnings: &mut Vec<Warning>) {
    if !ml.dfe_loses() {
        return;
    }
    if let (Some(d), Some(m)) = (&ml.dfe_ser, &ml.ser) {
        warnings.push(Warning::new(
            WarningCode::DfeBelowMlse,
            format!(
                "{name} made {} symbol errors where the MLSE on the same channel made {} (more than {DFE_LOSS_FACTOR}×): a sequence detector would have done better on this burst",
                d.errors, m.errors
            ),
        ));
    }
}
