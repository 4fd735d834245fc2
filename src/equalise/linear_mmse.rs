//! Linear MMSE equaliser: the MMSE-DFE design of [`super::mmse_dfe`] with no
//! feedback taps (`Nb = 0`), same feedforward span and delay search, output
//! scaled to be unbiased; predicted SNR from the same design.
//!
//! Takes a channel model ([`DesignInput`]), `Nf` and an optional delay; gives a
//! [`LinearMmse`] equaliser.

use super::mmse_dfe::DesignInput;
use super::{DfeCore, EqualiseError, RunOptions};

super::equaliser_type!(
    /// Linear MMSE equaliser (no feedback).
    LinearMmse
);

impl LinearMmse {
    /// Design with `nf` feedforward taps; `delay = None` optimises Δ.
    ///
    /// # Errors
    /// See [`design_mmse_dfe`](super::design_mmse_dfe).
    pub fn new(
        ch: &DesignInput<'_>,
        nf: usize,
        delay: Option<usize>,
        opts: RunOptions,
    ) -> Result<Self, EqualiseError> {
        let core = DfeCore::design(ch, opts, |c| {
            super::mmse_dfe::design_mmse_dfe_clamped(c, nf, 0, delay)
        })?;
        Ok(LinearMmse {
            core,
            name: "linear-mmse",
        })
    }
}
