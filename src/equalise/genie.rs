//! Genie-aided MMSE-DFE: the same filters as the MMSE-DFE, but the feedback is
//! fed the true transmitted symbols, so its errors come from noise and residual
//! ISI only. Comparing its symbol errors with the real DFE's separates
//! noise-caused errors from propagated ones.
//!
//! Takes a channel model, `Nf`, `Nb`, an optional delay and run options; the
//! burst must carry the known symbols (indexed like `y`).

use super::mmse_dfe::DesignInput;
use super::{DfeCore, EqualiseError, RunOptions};

super::equaliser_type!(
    /// MMSE-DFE with the true symbols in its feedback.
    GenieDfe
);

impl GenieDfe {
    /// Design as [`super::MmseDfe::new`]; the run needs `BurstView::known`.
    ///
    /// # Errors
    /// See [`design_mmse_dfe`](super::design_mmse_dfe).
    pub fn new(
        ch: &DesignInput<'_>,
        nf: usize,
        nb: usize,
        delay: Option<usize>,
        opts: RunOptions,
    ) -> Result<Self, EqualiseError> {
        let opts = RunOptions {
            genie: true,
            ..opts
        };
        let core = DfeCore::design(ch, opts, |c| {
            super::mmse_dfe::design_mmse_dfe_clamped(c, nf, nb, delay)
        })?;
        Ok(GenieDfe {
            core,
            name: "genie-mmse-dfe",
        })
    }

    /// The genie of an MMSE-DFE design: the same filters (forward and
    /// time-reversed) and run options, with the true symbols fed back.
    pub(crate) fn from_design(core: &DfeCore) -> Self {
        let mut core = core.clone();
        core.opts.genie = true;
        GenieDfe {
            core,
            name: "genie-mmse-dfe",
        }
    }
}
