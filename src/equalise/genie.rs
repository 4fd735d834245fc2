//! Genie-aided MMSE-DFE: the same filters as the MMSE-DFE, but the feedback is
//! fed the true transmitted symbols, so its errors come from noise and residual
//! ISI only. Comparing its symbol errors with the real DFE's separates
//! noise-caused errors from propagated ones.
//!
//! Takes a channel model, `Nf`, `Nb`, an optional delay and run options; the
//! burst must carry the known symbols (indexed like `y`).

use super::mmse_dfe::{design_mmse_dfe, DesignInput};
use super::{DfeCore, EqualiseError, RunOptions};

super::equaliser_type!(
    /// MMSE-DFE with the true symbols in its feedback.
    GenieDfe
);

impl GenieDfe {
    /// Design as [`super::MmseDfe::new`]; the run needs `BurstView::known`.
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
        let opts = RunOptions {
            genie: true,
            ..opts
        };
        let core = DfeCore::design(ch, opts, |c| {
            design_mmse_dfe(
                c,
                nf,
                nb,
                delay.map(|d| d.min((nf + c.taps.len()).saturating_sub(2))),
            )
        })?;
        Ok(GenieDfe {
            core,
            name: "genie-mmse-dfe",
        })
    }
}
