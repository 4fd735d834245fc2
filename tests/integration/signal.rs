//! End-to-end use of the public `signal` API: PRBS bits → constellation →
//! RRC shaping → matched filter → slicing → bits, with no noise.

use iqaudit::signal::{
    matched_filter, prbs_bits, rrc_taps, shape, Constellation, Lfsr, Modulation, PrbsPattern,
};
use iqaudit::Cf32;

#[test]
fn prbs_payload_survives_rrc_shaping_and_matched_filtering_without_bit_errors() {
    // Source: Nyquist criterion for the RRC cascade (shared/REFERENCE-VALUES.md §5): with
    // β = 0.35, span 32, sps 4 the residual ISI per lag is < 1e-3 (measured in the unit
    // tests), far below half the 64-QAM minimum distance (1/√42 ≈ 0.154).
    for m in Modulation::ALL {
        let c = Constellation::new(m);
        let bps = c.bits_per_symbol();
        let n_sym = 300;
        let bits = prbs_bits(PrbsPattern::Prbs15, n_sym * bps);
        let mut sym = vec![Cf32::new(0.0, 0.0); n_sym];
        c.map_bits(&bits, &mut sym);
        // The LFSR's own symbol helper gives the same symbols.
        let mut sym2 = vec![Cf32::new(0.0, 0.0); n_sym];
        Lfsr::from_pattern(PrbsPattern::Prbs15).fill_symbols(&c, &mut sym2);
        assert_eq!(sym, sym2);

        let (sps, taps) = (4, rrc_taps(0.35, 32, 4));
        let rx = matched_filter(&shape(&sym, &taps, sps), &taps);
        let centre = (taps.len() - 1) / 2;
        let mut got = vec![0u8; n_sym * bps];
        for (k, out) in got.chunks_exact_mut(bps).enumerate() {
            let z = rx[k * sps + centre];
            assert!(
                (z - sym[k]).norm() < c.min_distance() / 4.0,
                "{m} symbol {k}"
            );
            c.label_to_bits(c.slice(z), out);
        }
        assert_eq!(got, bits, "{m}");
    }
}
