//! Tests of the equalisers against theory (REFERENCE-VALUES §7–9) and against
//! the slow references in `src/testutil.rs`.

use super::carrier::{derotate_into, estimate_training_cfo};
use super::theory::*;
use super::tracking::{AdaptMode, TrackingConfig};
use super::*;
use crate::channel::{fit_channel, TapSpan};
use crate::signal::{Constellation, Modulation};
use crate::testutil::eqref::*;

struct Sim {
    y: Vec<Cf32>,
    x: Vec<Cf32>,
    labels: Vec<usize>,
    offset: usize,
    ntrain: usize,
}

impl Sim {
    fn training(&self) -> &[Cf32] {
        &self.x[self.offset..self.offset + self.ntrain]
    }
    fn view<'a>(&'a self, y: &'a [Cf32], c: &'a Constellation, known: bool) -> BurstView<'a> {
        BurstView {
            y,
            training: self.training(),
            offset: self.offset,
            slicer: c,
            known: known.then_some(&self.x[..]),
        }
    }
    fn payload(&self) -> Vec<usize> {
        (0..self.x.len())
            .filter(|n| !(self.offset..self.offset + self.ntrain).contains(n))
            .collect()
    }
}

/// Burst of `before` payload, `ntrain` training and `after` payload symbols
/// through `taps` (pre-cursor count `pre`), noise `E|n|² = 10^(−snr_db/10)`
/// (unit-power symbols, so SNR = Es/σ² as in REFERENCE-VALUES §8).
#[allow(clippy::too_many_arguments)]
fn simulate(
    seed: u64,
    m: Modulation,
    taps: &[Cf64],
    pre: usize,
    snr_db: f64,
    before: usize,
    ntrain: usize,
    after: usize,
) -> Sim {
    let c = Constellation::new(m);
    let mut r = rng(seed);
    let (x, labels) = random_symbols(&mut r, c.points(), before + ntrain + after);
    let var = 10f64.powf(-snr_db / 10.0);
    let y = convolve(&x, taps, pre)
        .into_iter()
        .map(|v| v + cgauss(&mut r, var))
        .collect();
    Sim {
        y,
        x,
        labels,
        offset: before,
        ntrain,
    }
}

fn fixed(pre: usize, post: usize) -> crate::channel::ChannelFitConfig {
    crate::channel::ChannelFitConfig {
        span: TapSpan::Fixed { pre, post },
        ..Default::default()
    }
}

fn ser(out: &EqualisedSymbols, sim: &Sim, idx: &[usize]) -> (usize, usize) {
    let e = idx
        .iter()
        .filter(|&&n| out.labels[n] != sim.labels[n])
        .count();
    (e, idx.len())
}

fn design_input(e: &crate::channel::ChannelEstimate) -> DesignInput<'_> {
    DesignInput {
        taps: &e.taps,
        pre: e.pre,
        noise_var: e.noise_var,
        es: e.es,
    }
}

const PROAKIS_B: [f64; 3] = [0.407, 0.815, 0.407];
const PROAKIS_C: [f64; 5] = [0.227, 0.460, 0.688, 0.460, 0.227];
const PROAKIS_A: [f64; 11] = [
    0.04, -0.05, 0.07, -0.21, -0.50, 0.72, 0.36, 0.00, 0.21, 0.03, 0.07,
];

#[test]
fn integrated_salz_zf_le_and_mfb_match_the_reference_table_to_0_01_db() {
    // Source: shared/REFERENCE-VALUES.md §8 table (computed there with numpy;
    // formulas Salz 1973 / Cioffi EE379A), Proakis channels from §9.
    let rows: [(&[f64], f64, [f64; 5]); 9] = [
        (&PROAKIS_A, 10.0, [10.004, 9.853, 9.379, 9.184, 8.242]),
        (&PROAKIS_A, 20.0, [20.004, 19.265, 19.213, 19.184, 17.363]),
        (&PROAKIS_A, 30.0, [30.004, 29.192, 29.187, 29.184, 27.194]),
        (&PROAKIS_B, 10.0, [9.981, 7.772, 6.978, 2.622, 2.951]),
        (&PROAKIS_B, 20.0, [19.981, 15.281, 15.151, 12.622, 6.601]),
        (&PROAKIS_B, 30.0, [29.981, 23.936, 23.919, 22.622, 9.646]),
        (&PROAKIS_C, 10.0, [9.998, 6.024, 4.776, -2.225, -0.046]),
        (&PROAKIS_C, 20.0, [19.998, 12.052, 11.772, 7.775, 3.763]),
        (&PROAKIS_C, 30.0, [29.998, 19.857, 19.812, 17.775, 7.298]),
    ];
    for (taps, snr_db, want) in rows {
        let h = real_taps(taps);
        let snr = 10f64.powf(snr_db / 10.0);
        let s = salz_mmse_dfe_snr(&h, snr, DEFAULT_GRID);
        let got = [
            to_db(matched_filter_bound(&h, snr)),
            to_db(s.biased),
            to_db(s.unbiased),
            to_db(zf_dfe_snr(&h, snr, DEFAULT_GRID)),
            to_db(mmse_le_snr(&h, snr, DEFAULT_GRID).unbiased),
        ];
        let b = bounds(&h, snr, DEFAULT_GRID);
        let combined = [
            b.matched_filter_bound_db,
            b.mmse_dfe_biased_db,
            b.mmse_dfe_unbiased_db,
            b.zf_dfe_db,
            b.mmse_le_unbiased_db,
        ];
        assert_eq!(
            combined, got,
            "bounds() must agree with the single-figure functions"
        );
        for (k, (g, w)) in got.iter().zip(want).enumerate() {
            // The table has 3 decimals (rounding ±0.0005) → 0.01 dB is generous.
            assert!(
                (g - w).abs() < 0.01,
                "{} taps at {snr_db} dB, column {k}: {g:.4} vs {w}",
                taps.len()
            );
        }
    }
}

#[test]
fn zf_dfe_theory_equals_snr_times_h0_squared_for_a_minimum_phase_channel() {
    // Source: REFERENCE-VALUES §8 (ZF-DFE = SNR·|h0,min|², Jensen's formula);
    // [1, 0.5, 0.2] has zeros at |z| = √0.2 < 1, so it is its own minimum-phase form.
    let norm = (1.0f64 + 0.25 + 0.04).sqrt();
    let h = real_taps(&[1.0 / norm, 0.5 / norm, 0.2 / norm]);
    let snr = 100.0;
    let want = snr / (norm * norm);
    let got = zf_dfe_snr(&h, snr, DEFAULT_GRID);
    assert!((got / want - 1.0).abs() < 1e-9, "{got} vs {want}");
}

#[test]
fn zf_dfe_output_snr_matches_snr_times_main_tap_power() {
    // Source: REFERENCE-VALUES §8 (minimum-phase channel: ZF-DFE SNR = SNR·|h0|²).
    // Achieved SNR from 20000 symbols: relative sd of the error power 1/√20000,
    // i.e. 0.03 dB; tolerance 0.15 dB (≈ 5 sd, plus the estimation of h0 from
    // 2000 training symbols, ≈ 0.01 dB).
    let norm = (1.0f64 + 0.25 + 0.04).sqrt();
    let h = real_taps(&[1.0 / norm, 0.5 / norm, 0.2 / norm]);
    let sim = simulate(21, Modulation::Qpsk, &h, 0, 20.0, 0, 2000, 20_000);
    let c = Constellation::new(Modulation::Qpsk);
    let est = fit_channel(&sim.y, sim.training(), 0, &fixed(0, 2)).unwrap();
    let mut zf = ZfDfe::new(&design_input(&est), None, 10.0, RunOptions::default()).unwrap();
    let out = zf.run(&sim.view(&sim.y, &c, false)).unwrap();
    let idx = sim.payload();
    let mse: f64 = idx
        .iter()
        .map(|&n| (out.soft[n] - sim.x[n]).norm_sqr() as f64)
        .sum::<f64>()
        / idx.len() as f64;
    let want = to_db(100.0 / (norm * norm));
    assert!(
        (to_db(1.0 / mse) - want).abs() < 0.15,
        "achieved {:.3} dB, closed form {want:.3} dB",
        to_db(1.0 / mse)
    );
    assert!((zf.filters().predicted_snr_unbiased_db - want).abs() < 0.1);
}

#[test]
fn mmse_dfe_predicted_and_achieved_snr_approach_salz_on_proakis_b_and_c() {
    // Source: REFERENCE-VALUES §8 table, 20 dB: B 15.281/15.151, C 12.052/11.772
    // dB (biased/unbiased); finite-length MMSE-DFE (Al-Dhahir & Cioffi 1995)
    // converges to it as Nf grows and can never exceed it. Achieved SNR from
    // 20000 QPSK symbols has sd ≈ 0.03 dB; "never above" allows 0.1 dB.
    let c = Constellation::new(Modulation::Qpsk);
    for (taps, salz_b, salz_u) in [
        (&PROAKIS_B[..], 15.281, 15.151),
        (&PROAKIS_C[..], 12.052, 11.772),
    ] {
        let h = real_taps(taps);
        let l = h.len();
        let truth = DesignInput {
            taps: &h,
            pre: 0,
            noise_var: 0.01,
            es: 1.0,
        };
        let mut prev = f64::NEG_INFINITY;
        for nf in [4, 8, 16, 31, 45] {
            let f = design_mmse_dfe(&truth, nf, 8, None).unwrap();
            let (pb, pu) = (f.predicted_snr_biased_db, f.predicted_snr_unbiased_db);
            assert!(
                pb <= salz_b + 0.001 && pu <= salz_u + 0.001,
                "{l} taps Nf {nf}: {pb:.3}/{pu:.3} above Salz"
            );
            assert!(
                pu >= prev - 1e-9,
                "{l} taps: SNR fell from {prev} to {pu} at Nf {nf}"
            );
            prev = pu;
            if nf >= 31 {
                assert!(
                    salz_u - pu < 0.3 && salz_b - pb < 0.3,
                    "{l} taps Nf {nf}: {pb:.3}/{pu:.3} dB vs Salz {salz_b}/{salz_u}"
                );
            }
        }
        let sim = simulate(
            30 + l as u64,
            Modulation::Qpsk,
            &h,
            0,
            20.0,
            0,
            2000,
            20_000,
        );
        let est = fit_channel(&sim.y, sim.training(), 0, &fixed(0, l - 1)).unwrap();
        let mut eq = MmseDfe::new(&design_input(&est), 31, 8, None, RunOptions::default()).unwrap();
        let out = eq.run(&sim.view(&sim.y, &c, false)).unwrap();
        // Skip the tail whose feedforward window runs past the burst.
        let idx: Vec<usize> = sim
            .payload()
            .into_iter()
            .filter(|&n| n + 40 < sim.y.len())
            .collect();
        let mse: f64 = idx
            .iter()
            .map(|&n| (out.soft[n] - sim.x[n]).norm_sqr() as f64)
            .sum::<f64>()
            / idx.len() as f64;
        let achieved = to_db(1.0 / mse);
        assert!(
            achieved > salz_u - 0.3 && achieved < salz_u + 0.1,
            "{l} taps: achieved {achieved:.3} dB, predicted {:.3} dB, Salz unbiased {salz_u}",
            eq.filters().predicted_snr_unbiased_db
        );
    }
}

#[test]
fn mmse_dfe_design_matches_a_dense_wiener_hopf_solve() {
    // Reference: the joint normal equations R_UU·θ = r_Ux solved densely by LU
    // (src/testutil.rs), apply form ff = conj(w)/β, fb = conj(b)/β with
    // β = 1 − MSE/Es. Filters are stored in f32: tolerance 2e-5·(1 + |v|).
    let h = [
        Cf64::new(0.3, -0.2),
        Cf64::new(1.0, 0.1),
        Cf64::new(-0.2, 0.45),
        Cf64::new(0.1, 0.05),
    ];
    let ch = DesignInput {
        taps: &h,
        pre: 1,
        noise_var: 0.05,
        es: 1.0,
    };
    for (nf, nb, d) in [
        (1, 0, 0),
        (1, 1, 1),
        (2, 1, 2),
        (3, 2, 2),
        (7, 3, 4),
        (13, 0, 6),
        (16, 8, 10),
    ] {
        let f = design_mmse_dfe(&ch, nf, nb, Some(d)).unwrap();
        let (w, b, mse) = dense_wiener_hopf(&h, 0.05, 1.0, nf, nb, d);
        let beta = 1.0 - mse;
        for (r, (a, wv)) in f.ff.iter().zip(&w).enumerate() {
            let want = wv.conj() / beta;
            let got = Cf64::new(a.re as f64, a.im as f64);
            assert!(
                (got - want).norm() < 2e-5 * (1.0 + want.norm()),
                "Nf {nf} Nb {nb} Δ {d}: ff[{r}] {got} vs {want}"
            );
        }
        for (j, (a, bv)) in f.fb.iter().zip(&b).enumerate() {
            let want = bv.conj() / beta;
            let got = Cf64::new(a.re as f64, a.im as f64);
            assert!(
                (got - want).norm() < 2e-5 * (1.0 + want.norm()),
                "Nf {nf} Nb {nb} Δ {d}: fb[{j}] {got} vs {want}"
            );
        }
        assert!((f.predicted_snr_biased_db - to_db(1.0 / mse)).abs() < 1e-9);
    }
}

#[test]
fn dfe_loop_matches_the_textbook_loop_for_many_sizes_and_garbage_outputs() {
    // Reference: one-symbol-at-a-time loop (src/testutil.rs). Both f32 with a
    // different summation order: 1e-4 absolute on unit-power symbols.
    let c = Constellation::new(Modulation::Qam16);
    let h = [
        Cf64::new(0.2, 0.1),
        Cf64::new(1.0, 0.0),
        Cf64::new(0.4, -0.3),
        Cf64::new(0.1, 0.2),
    ];
    for (before, after, nf, nb) in [
        (0, 0, 1, 0),
        (0, 1, 3, 1),
        (3, 2, 16, 8),
        (7, 13, 5, 2),
        (13, 101, 16, 8),
        (2, 7, 31, 0),
    ] {
        let sim = simulate(
            40 + after as u64,
            Modulation::Qam16,
            &h,
            1,
            25.0,
            before,
            64,
            after,
        );
        let est = fit_channel(&sim.y, sim.training(), before, &fixed(1, 2)).unwrap();
        let mut eq =
            MmseDfe::new(&design_input(&est), nf, nb, None, RunOptions::default()).unwrap();
        let len = sim.y.len();
        let mut out = EqualisedSymbols {
            soft: vec![Cf32::new(f32::NAN, 7.0); 3],
            labels: vec![99; 5],
            phase_rad: vec![1.0; 2],
        };
        eq.run_into(&sim.view(&sim.y, &c, false), &mut out).unwrap();
        let mut truth = vec![Cf32::new(0.0, 0.0); len];
        truth[before..before + 64].copy_from_slice(sim.training());
        let f = eq.filters();
        let slow = textbook_dfe(
            &sim.y,
            &f.ff,
            &f.fb,
            f.lag(),
            &truth,
            before..before + 64,
            before,
            len,
            &c,
        );
        for (k, s) in slow.iter().enumerate() {
            let n = before + k;
            assert!(
                (out.soft[n] - s).norm() < 1e-4,
                "case {before}/{after}/{nf}/{nb}: first difference at n = {n}"
            );
        }
        // The part before the training is the textbook loop on the reversed burst.
        let yr: Vec<Cf32> = sim.y.iter().rev().cloned().collect();
        let tr: Vec<Cf32> = truth.iter().rev().cloned().collect();
        let rf = eq.reverse_filters();
        let s0 = len - before - 64;
        let slow = textbook_dfe(
            &yr,
            &rf.ff,
            &rf.fb,
            rf.lag(),
            &tr,
            s0..len - before,
            s0,
            len,
            &c,
        );
        for n in 0..before {
            assert!(
                (out.soft[n] - slow[len - 1 - n - s0]).norm() < 1e-4,
                "reverse case {before}: first difference at n = {n}"
            );
        }
    }
}

#[test]
fn linear_filtering_matches_direct_convolution() {
    // Reference: direct convolution (src/testutil.rs) of y with the feedforward
    // taps; f32 vs f64 accumulation: 1e-4 absolute.
    let c = Constellation::new(Modulation::Qpsk);
    let h = [Cf64::new(1.0, 0.0), Cf64::new(0.5, 0.5)];
    for after in [0usize, 1, 2, 17, 97] {
        let sim = simulate(50, Modulation::Qpsk, &h, 0, 20.0, 0, 32, after);
        let est = fit_channel(&sim.y, sim.training(), 0, &fixed(0, 1)).unwrap();
        let mut eq = LinearMmse::new(&design_input(&est), 9, None, RunOptions::default()).unwrap();
        let out = eq.run(&sim.view(&sim.y, &c, false)).unwrap();
        let f = eq.filters();
        assert!(f.lag() >= 0);
        let ff: Vec<Cf64> =
            f.ff.iter()
                .map(|v| Cf64::new(v.re as f64, v.im as f64))
                .collect();
        let direct = convolve(&sim.y, &ff, f.lag() as usize);
        for (n, (a, b)) in out.soft.iter().zip(&direct).enumerate() {
            assert!(
                (a - b).norm() < 1e-4,
                "len {}: first difference at {n}",
                sim.y.len()
            );
        }
    }
}

#[test]
fn on_awgn_with_one_tap_every_equaliser_is_the_slicer_within_the_binomial_interval() {
    // Source: Proakis square-QAM SER (REFERENCE-VALUES §7): 16QAM at 15 dB
    // SER = 1.778184e-2. 99 % interval: n·p ± 2.576·√(n·p·(1−p)) (normal
    // approximation; n·p ≈ 530 here).
    let p_ref = 1.778184e-2;
    let p = qam_ser(16, 10f64.powf(1.5));
    assert!(
        (p / p_ref - 1.0).abs() < 1e-4,
        "formula helper {p} vs table {p_ref}"
    );
    let h = [Cf64::new(0.8 * 0.3f64.cos(), 0.8 * 0.3f64.sin())];
    // Noise scaled so that |h|²/σ² = 15 dB.
    let sim = simulate(
        60,
        Modulation::Qam16,
        &[Cf64::new(1.0, 0.0)],
        0,
        15.0,
        0,
        1000,
        30_000,
    );
    let y: Vec<Cf32> = sim
        .y
        .iter()
        .map(|v| v * Cf32::new(h[0].re as f32, h[0].im as f32))
        .collect();
    let c = Constellation::new(Modulation::Qam16);
    let cfg = BurstConfig {
        channel: fixed(0, 0),
        tracking: TrackingConfig {
            mode: AdaptMode::Lms,
            ..TrackingConfig::default()
        },
        ..BurstConfig::default()
    };
    let out = process_burst(&sim.view(&y, &c, true), &cfg).unwrap();
    let idx = sim.payload();
    let n = idx.len() as f64;
    let (lo, hi) = (
        n * p - 2.576 * (n * p * (1.0 - p)).sqrt(),
        n * p + 2.576 * (n * p * (1.0 - p)).sqrt(),
    );
    for name in [
        "zf-dfe",
        "mmse-dfe",
        "linear-mmse",
        "mmse-dfe-lms",
        "genie-mmse-dfe",
    ] {
        let r = out.get(name).unwrap_or_else(|| panic!("{name} missing"));
        let (_, syms) = r.outcome.as_ref().unwrap();
        let (e, _) = ser(syms, &sim, &idx);
        assert!(
            (lo..=hi).contains(&(e as f64)),
            "{name}: {e} errors in {n}, 99 % interval [{lo:.0}, {hi:.0}]"
        );
    }
}

#[test]
fn dfe_errors_exceed_genie_errors_at_low_snr_and_agree_at_high_snr() {
    // Source: error propagation (Duttweiler, Mazo & Messerschmitt 1974 via
    // REFERENCE-VALUES §8): wrong decisions fed back can only add errors on
    // average; at high SNR there are no decision errors to propagate.
    let c = Constellation::new(Modulation::Qpsk);
    let h = real_taps(&PROAKIS_B);
    for (snr_db, low) in [(8.0, true), (30.0, false)] {
        let sim = simulate(70, Modulation::Qpsk, &h, 0, snr_db, 0, 500, 20_000);
        let cfg = BurstConfig {
            channel: fixed(0, 2),
            ..BurstConfig::default()
        };
        let out = process_burst(&sim.view(&sim.y, &c, true), &cfg).unwrap();
        let idx = sim.payload();
        let (dfe, _) = ser(
            &out.get("mmse-dfe").unwrap().outcome.as_ref().unwrap().1,
            &sim,
            &idx,
        );
        let (genie, _) = ser(
            &out.get("genie-mmse-dfe")
                .unwrap()
                .outcome
                .as_ref()
                .unwrap()
                .1,
            &sim,
            &idx,
        );
        if low {
            assert!(
                genie > 50 && dfe > genie,
                "{snr_db} dB: DFE {dfe} errors, genie {genie}"
            );
        } else {
            assert_eq!(dfe, genie, "{snr_db} dB: DFE {dfe} errors, genie {genie}");
        }
    }
}

#[test]
fn zf_dfe_on_a_weak_first_main_tap_fails_as_theory_predicts_while_mmse_dfe_does_not() {
    // Source: ZF-DFE output SNR = SNR·|h_m|² (REFERENCE-VALUES §8 with the main
    // tap forced to the weak first tap) and Proakis 16QAM SER (§7); error
    // propagation can only add errors, so the ZF SER must be at least the lower
    // 99 % bound of the formula's SER.
    let c = Constellation::new(Modulation::Qam16);
    let h = real_taps(&[0.4, 1.0]);
    let sim = simulate(80, Modulation::Qam16, &h, 0, 20.0, 0, 500, 20_000);
    let cfg = BurstConfig {
        channel: fixed(0, 1),
        zf_main_tap: Some(0),
        ..BurstConfig::default()
    };
    let out = process_burst(&sim.view(&sim.y, &c, false), &cfg).unwrap();
    let idx = sim.payload();
    let n = idx.len() as f64;
    let p = qam_ser(16, 100.0 * 0.16);
    let lo = n * p - 2.576 * (n * p * (1.0 - p)).sqrt();
    let (zf, _) = ser(
        &out.get("zf-dfe").unwrap().outcome.as_ref().unwrap().1,
        &sim,
        &idx,
    );
    let (mmse, _) = ser(
        &out.get("mmse-dfe").unwrap().outcome.as_ref().unwrap().1,
        &sim,
        &idx,
    );
    assert!(
        zf as f64 >= lo,
        "ZF-DFE {zf} errors, theory at least {lo:.0}"
    );
    assert!((mmse as f64) < 1e-3 * n, "MMSE-DFE {mmse} errors in {n}");
    // Weaker still: |h0|²/σ² = 0.04·100 = 4 < 10 → refused with a typed error.
    let h = real_taps(&[0.2, 1.0]);
    let sim = simulate(81, Modulation::Qam16, &h, 0, 20.0, 0, 500, 2000);
    let out = process_burst(&sim.view(&sim.y, &c, false), &cfg).unwrap();
    assert!(matches!(
        out.get("zf-dfe").unwrap().outcome,
        Err(EqualiseError::WeakMainTap { index: 0, .. })
    ));
    assert!(out.get("mmse-dfe").unwrap().outcome.is_ok());
}

#[test]
fn payload_before_the_training_is_equalised_time_reversed() {
    // Source: common practice (midamble frames); checked against the known
    // symbols: both sides must be decided as well as each other.
    let c = Constellation::new(Modulation::Qam16);
    let h = [
        Cf64::new(0.0, 0.25),
        Cf64::new(1.0, 0.0),
        Cf64::new(0.45, -0.2),
        Cf64::new(-0.2, 0.1),
    ];
    let sim = simulate(90, Modulation::Qam16, &h, 1, 25.0, 3000, 255, 3000);
    let cfg = BurstConfig {
        channel: fixed(1, 2),
        ..BurstConfig::default()
    };
    let out = process_burst(&sim.view(&sim.y, &c, false), &cfg).unwrap();
    let syms = &out.get("mmse-dfe").unwrap().outcome.as_ref().unwrap().1;
    let before: Vec<usize> = (20..3000).collect();
    let after: Vec<usize> = (3255..sim.y.len() - 20).collect();
    let e_before = evm(
        &before.iter().map(|&n| syms.soft[n]).collect::<Vec<_>>(),
        &before.iter().map(|&n| sim.x[n]).collect::<Vec<_>>(),
    );
    let e_after = evm(
        &after.iter().map(|&n| syms.soft[n]).collect::<Vec<_>>(),
        &after.iter().map(|&n| sim.x[n]).collect::<Vec<_>>(),
    );
    let (eb, _) = ser(syms, &sim, &before);
    let (ea, _) = ser(syms, &sim, &after);
    assert!(eb == 0 && ea == 0, "errors before {eb}, after {ea}");
    let (db_b, db_a) = (20.0 * e_before.log10(), 20.0 * e_after.log10());
    assert!(
        (db_b - db_a).abs() < 0.5,
        "EVM before {db_b:.2} dB, after {db_a:.2} dB"
    );
}

#[test]
fn carrier_refinement_removes_a_residual_cfo_over_a_long_payload() {
    // Source: the definition of EVM (REFERENCE-VALUES §6.1) and the CFO
    // convention of src/lib.rs. QPSK, 25 dB, 127-symbol training, 8000-symbol
    // payload, CFO 1e-3 cycles/symbol; the training-only estimate is the LS phase
    // slope over the training. Acceptance: within 0.5 dB of the no-CFO burst.
    let c = Constellation::new(Modulation::Qpsk);
    let h = [
        Cf64::new(1.0, 0.0),
        Cf64::new(0.35, -0.2),
        Cf64::new(0.15, 0.05),
    ];
    let sim = simulate(100, Modulation::Qpsk, &h, 0, 25.0, 0, 127, 8000);
    let nu = 1e-3;
    let mut rotated = vec![Cf32::new(0.0, 0.0); sim.y.len()];
    derotate_into(&sim.y, -nu, 0.0, &mut rotated);
    let cfg = BurstConfig {
        channel: fixed(0, 2),
        ..BurstConfig::default()
    };
    let nu_t = estimate_training_cfo(&rotated, sim.training(), 0, &cfg.channel).unwrap();
    let mut after_sync = vec![Cf32::new(0.0, 0.0); sim.y.len()];
    derotate_into(&rotated, nu_t, 0.0, &mut after_sync);
    let idx: Vec<usize> = (127..sim.y.len() - 20).collect();
    let evm_db = |y: &[Cf32], cfg: &BurstConfig| {
        let out = process_burst(&sim.view(y, &c, false), cfg).unwrap();
        let s = &out.get("mmse-dfe").unwrap().outcome.as_ref().unwrap().1;
        let z: Vec<Cf32> = idx.iter().map(|&n| s.soft[n]).collect();
        let x: Vec<Cf32> = idx.iter().map(|&n| sim.x[n]).collect();
        (20.0 * evm(&z, &x).log10(), out.carrier)
    };
    let (clean, _) = evm_db(&sim.y, &cfg);
    let (refined, rep) = evm_db(&after_sync, &cfg);
    let off = BurstConfig {
        carrier: carrier::CarrierConfig {
            enabled: false,
            ..Default::default()
        },
        ..cfg
    };
    let (training_only, _) = evm_db(&after_sync, &off);
    let msg = format!(
        "EVM no CFO {clean:.2} dB, refined {refined:.2} dB, training-only {training_only:.2} dB; \
         training estimate {nu_t:.3e}, refined correction {:.3e} cycles/symbol",
        rep.refined_cfo_cycles_per_symbol
    );
    eprintln!("{msg}");
    assert!((refined - clean).abs() < 0.5, "{msg}");
    assert!(training_only > clean + 3.0, "{msg}");
    assert!(
        (nu_t + rep.refined_cfo_cycles_per_symbol - nu).abs() < 2e-6,
        "{msg}"
    );
}

#[test]
fn lms_and_rls_tracking_follow_a_drifting_channel() {
    // Source: common practice (decision-directed adaptation; Haykin, Adaptive
    // Filter Theory). Taps drift across the burst: the main tap grows by 20 %
    // and the first post-cursor turns by 90°. Acceptance: tracking within 1 dB
    // of the static channel, no tracking visibly (≥ 3 dB) worse.
    let c = Constellation::new(Modulation::Qpsk);
    let (ntrain, npay) = (255usize, 8000usize);
    let total = ntrain + npay;
    let mut r = rng(110);
    let (x, _) = random_symbols(&mut r, c.points(), total);
    let var = 10f64.powf(-2.5);
    let taps_at = |n: usize, drift: bool| -> [Cf64; 3] {
        let t = if drift { n as f64 / total as f64 } else { 0.0 };
        [
            Cf64::new(1.0 + 0.2 * t, 0.0),
            Cf64::from_polar(0.4, std::f64::consts::FRAC_PI_2 * t),
            Cf64::new(0.2, 0.0),
        ]
    };
    let noise: Vec<Cf32> = (0..total).map(|_| cgauss(&mut r, var)).collect();
    let make = |drift: bool| -> Vec<Cf32> {
        (0..total)
            .map(|n| {
                let h = taps_at(n, drift);
                let mut acc = Cf64::new(0.0, 0.0);
                for (i, hv) in h.iter().enumerate() {
                    if n >= i {
                        acc += hv * Cf64::new(x[n - i].re as f64, x[n - i].im as f64);
                    }
                }
                Cf32::new(acc.re as f32, acc.im as f32) + noise[n]
            })
            .collect()
    };
    let idx: Vec<usize> = (ntrain..total - 20).collect();
    let run = |y: &[Cf32], mode: AdaptMode| -> f64 {
        let view = BurstView {
            y,
            training: &x[..ntrain],
            offset: 0,
            slicer: &c,
            known: None,
        };
        let cfg = BurstConfig {
            channel: fixed(0, 2),
            tracking: TrackingConfig {
                mode,
                lms_step: 0.1,
                rls_forgetting: 0.995,
                ..TrackingConfig::default()
            },
            ..BurstConfig::default()
        };
        let out = process_burst(&view, &cfg).unwrap();
        let name = match mode {
            AdaptMode::Off => "mmse-dfe",
            AdaptMode::Lms => "mmse-dfe-lms",
            AdaptMode::Rls => "mmse-dfe-rls",
        };
        let s = &out.get(name).unwrap().outcome.as_ref().unwrap().1;
        if std::env::var("EQDBG").is_ok() {
            for b in (0..total).step_by(500) {
                let e = evm(
                    &s.soft[b..(b + 500).min(total)],
                    &x[b..(b + 500).min(total)],
                );
                eprintln!("{name} block {b}: {:.2} dB", 20.0 * e.log10());
            }
        }
        let z: Vec<Cf32> = idx.iter().map(|&n| s.soft[n]).collect();
        let xs: Vec<Cf32> = idx.iter().map(|&n| x[n]).collect();
        20.0 * evm(&z, &xs).log10()
    };
    let static_db = run(&make(false), AdaptMode::Off);
    let drifting = make(true);
    let (off, lms, rls) = (
        run(&drifting, AdaptMode::Off),
        run(&drifting, AdaptMode::Lms),
        run(&drifting, AdaptMode::Rls),
    );
    let msg = format!("EVM static {static_db:.2} dB, drifting: no tracking {off:.2}, LMS {lms:.2}, RLS {rls:.2} dB");
    eprintln!("{msg}");
    assert!(lms < static_db + 1.0 && rls < static_db + 1.0, "{msg}");
    assert!(off > static_db + 3.0, "{msg}");
}

#[test]
fn a_nan_sample_in_the_payload_spoils_only_its_neighbourhood() {
    // Robustness (the brief: never panic on any input): a NaN sample may spoil
    // the symbols whose feedforward window contains it, but the phase loop and
    // the LMS/RLS taps must not stay poisoned.
    let c = Constellation::new(Modulation::Qpsk);
    let h = [Cf64::new(1.0, 0.0), Cf64::new(0.3, 0.2)];
    let mut sim = simulate(120, Modulation::Qpsk, &h, 0, 25.0, 0, 127, 3000);
    sim.y[1000] = Cf32::new(f32::NAN, f32::INFINITY);
    for mode in [AdaptMode::Off, AdaptMode::Lms, AdaptMode::Rls] {
        let cfg = BurstConfig {
            channel: fixed(0, 1),
            tracking: TrackingConfig {
                mode,
                ..TrackingConfig::default()
            },
            ..BurstConfig::default()
        };
        let out = process_burst(&sim.view(&sim.y, &c, false), &cfg).unwrap();
        for r in &out.results {
            let s = &r.outcome.as_ref().unwrap().1;
            let late: Vec<usize> = (1200..sim.y.len() - 20).collect();
            let (e, _) = ser(s, &sim, &late);
            assert!(
                s.soft[1200..].iter().all(|z| z.re.is_finite()) && e == 0,
                "{} ({mode:?}): {e} late errors",
                r.name
            );
        }
    }
}

#[test]
fn a_fitted_dc_offset_is_removed_before_equalisation() {
    // Source: the widely-linear/DC model of the channel module; a DC of 0.3
    // on unit-power 16QAM would cause decision errors if left in.
    let c = Constellation::new(Modulation::Qam16);
    let h = [Cf64::new(1.0, 0.0), Cf64::new(0.3, -0.1)];
    let mut sim = simulate(130, Modulation::Qam16, &h, 0, 25.0, 0, 255, 3000);
    sim.y.iter_mut().for_each(|v| *v += Cf32::new(0.3, -0.2));
    let idx = sim.payload();
    for dc_offset in [false, true] {
        let cfg = BurstConfig {
            channel: crate::channel::ChannelFitConfig {
                dc_offset,
                ..fixed(0, 1)
            },
            ..BurstConfig::default()
        };
        let out = process_burst(&sim.view(&sim.y, &c, false), &cfg).unwrap();
        let (e, _) = ser(
            &out.get("mmse-dfe").unwrap().outcome.as_ref().unwrap().1,
            &sim,
            &idx,
        );
        if dc_offset {
            assert_eq!(e, 0, "DC fitted: {e} errors");
        } else {
            assert!(e > 100, "DC ignored: only {e} errors");
        }
    }
}

/// Slow reference for the adaptive integrals: the former fixed grid — `|H|²` on
/// all `n` points at once, each mean a plain sum divided by `n`.
fn fixed_grid_bounds(taps: &[Cf64], snr: f64, n: usize) -> [f64; 3] {
    let p = power_response(taps, n);
    let k = p.len() as f64;
    let salz = (p.iter().map(|v| (1.0 + snr * v).ln()).sum::<f64>() / k).exp();
    let zf = if p.iter().any(|v| *v <= 0.0) {
        0.0
    } else {
        snr * (p.iter().map(|v| v.ln()).sum::<f64>() / k).exp()
    };
    let le = 1.0 / (p.iter().map(|v| 1.0 / (1.0 + snr * v)).sum::<f64>() / k);
    [to_db(salz), to_db(zf), to_db(le - 1.0)]
}

fn test_channels() -> Vec<(String, Vec<Cf64>)> {
    let mut out = vec![
        ("proakis a".to_string(), real_taps(&PROAKIS_A)),
        ("proakis b".to_string(), real_taps(&PROAKIS_B)),
        ("proakis c".to_string(), real_taps(&PROAKIS_C)),
        (
            "e2e profile".to_string(),
            vec![
                Cf64::new(1.0, 0.0),
                Cf64::new(0.4, -0.2),
                Cf64::new(0.15, 0.0),
            ],
        ),
        // A zero at radius 0.99 (slow ZF convergence) and one at 0.999 (the grid
        // runs to its maximum).
        ("zero at 0.99".to_string(), real_taps(&[1.0, -0.99])),
        ("zero at 0.999".to_string(), real_taps(&[1.0, -0.999])),
        // An exact zero at ω = π, a point of every even grid.
        ("exact null".to_string(), real_taps(&[1.0, 1.0])),
    ];
    let mut r = rng(99);
    for len in [1usize, 2, 3, 5, 13, 31] {
        let taps: Vec<Cf64> = (0..len)
            .map(|_| {
                let c = cgauss(&mut r, 1.0);
                Cf64::new(c.re as f64, c.im as f64)
            })
            .collect();
        out.push((format!("random {len} taps"), taps));
    }
    out
}

#[test]
fn adaptive_bounds_match_the_fixed_dense_grid_to_1e_9_db() {
    // Source: common practice (periodic trapezoid rule, spectrally accurate for
    // analytic periodic integrands; Trefethen & Weideman, SIAM Review 56(3)
    // 2014). Reference: the former fixed 65 536-point grid. The adaptive grid
    // stops when successive log means agree to GRID_TOL = 1e-12 (4.3e-12 dB);
    // rounding in sums of 65 536 terms is ≈ 1e-12 relative; 1e-9 dB leaves
    // margin for both and is far below the 0.01 dB the figures are read at.
    for (name, h) in test_channels() {
        for snr_db in [-10.0, 0.0, 10.0, 20.0, 30.0, 45.0, 60.0] {
            let snr = 10f64.powf(snr_db / 10.0);
            let b = bounds(&h, snr, DEFAULT_GRID);
            let got = [b.mmse_dfe_biased_db, b.zf_dfe_db, b.mmse_le_unbiased_db];
            let want = fixed_grid_bounds(&h, snr, DEFAULT_GRID);
            for (k, (g, w)) in got.iter().zip(want).enumerate() {
                let ok = if w.is_finite() {
                    (g - w).abs() < 1e-9
                } else {
                    *g == w
                };
                assert!(ok, "{name} at {snr_db} dB, figure {k}: {g} vs {w}");
            }
            assert!(
                (b.mmse_dfe_unbiased_db - to_db(10f64.powf(want[0] / 10.0) - 1.0)).abs() < 1e-9
            );
        }
    }
}

#[test]
fn adaptive_grid_stops_early_for_smooth_integrands_and_runs_to_the_cap_near_a_null() {
    // Source: common practice (trapezoid error ∝ ρ^−n with ρ the distance of the
    // nearest singularity from the unit circle): for the e2e channel (zeros well
    // inside the circle) at 30 dB the start grid plus one doubling suffices; for a
    // zero at radius 0.999 the ln|H|² estimates still move at 32 768 points
    // (0.999^32768 ≈ 6e-15 relative, above the tolerance after the n-fold sums).
    let e2e = [
        Cf64::new(1.0, 0.0),
        Cf64::new(0.4, -0.2),
        Cf64::new(0.15, 0.0),
    ];
    let m = grid_means(&e2e, 1000.0, DEFAULT_GRID);
    assert!(m.grid <= 4 * START_GRID, "grid {}", m.grid);
    let m = grid_means(&real_taps(&[1.0, -0.999]), 1000.0, DEFAULT_GRID);
    assert_eq!(m.grid, DEFAULT_GRID);
    // A maximum below the start grid is a fixed grid (raised to the tap count).
    assert_eq!(grid_means(&e2e, 1000.0, 64).grid, 64);
    assert_eq!(grid_means(&e2e, 1000.0, 2).grid, 3);
    // No taps: |H|² = 0 everywhere, constant integrands agree after one doubling.
    let m = grid_means(&[], 1000.0, DEFAULT_GRID);
    assert_eq!((m.grid, m.log_power, m.inv_1p), (2 * START_GRID, None, 1.0));
}

#[test]
fn power_response_matches_a_direct_dft_for_many_sizes_and_shifts() {
    // Source: definition of the DTFT, |Σ h_m e^{−jωm}|² evaluated term by term.
    // Tolerance 1e-12 relative to Σ|h|² (f64 FFT rounding ≈ 1e-15·log n).
    let mut r = rng(5);
    for (len, n) in [
        (0usize, 1usize),
        (1, 1),
        (1, 7),
        (2, 2),
        (3, 13),
        (5, 64),
        (13, 13),
        (13, 97),
        (31, 512),
    ] {
        let taps: Vec<Cf64> = (0..len)
            .map(|_| {
                let c = cgauss(&mut r, 1.0);
                Cf64::new(c.re as f64, c.im as f64)
            })
            .collect();
        let energy: f64 = taps.iter().map(|h| h.norm_sqr()).sum::<f64>().max(1.0);
        for shift in [0.0, 0.5] {
            let mut buf = vec![Cf64::new(0.0, 0.0); n];
            power_response_shifted(&taps, shift, &mut buf);
            for (k, v) in buf.iter().enumerate() {
                let w = 2.0 * std::f64::consts::PI * (k as f64 + shift) / n as f64;
                let h: Cf64 = taps
                    .iter()
                    .enumerate()
                    .map(|(m, t)| t * Cf64::from_polar(1.0, -w * m as f64))
                    .sum();
                assert!(
                    (v.re - h.norm_sqr()).abs() < 1e-12 * energy && v.im == 0.0,
                    "len {len} n {n} shift {shift} k {k}: {} vs {}",
                    v.re,
                    h.norm_sqr()
                );
            }
        }
        assert_eq!(power_response(&taps, n).len(), n.max(len).max(1));
    }
}

#[test]
fn band_mmse_design_matches_the_dense_solve_over_sizes_delays_and_feedback_lengths() {
    // Reference: the dense joint Wiener–Hopf solve (src/testutil.rs, LU on the
    // full covariance; Al-Dhahir & Cioffi 1995 normal equations). Delays whose
    // feedback window runs past the last column make the dense joint system
    // singular and are skipped there (the band design simply drops those
    // columns). Filters are stored in f32: tolerance 2e-5·(1 + |v|); the SNR is
    // f64 on both sides: 1e-9 dB.
    let mut r = rng(17);
    for l in [1usize, 2, 3, 5, 13] {
        let taps: Vec<Cf64> = (0..l)
            .map(|_| {
                let c = cgauss(&mut r, 1.0);
                Cf64::new(c.re as f64, c.im as f64)
            })
            .collect();
        for nf in [1usize, 2, 3, 7, 16] {
            for nb in [0usize, 1, 8] {
                let ch = DesignInput {
                    taps: &taps,
                    pre: 0,
                    noise_var: 0.03,
                    es: 1.5,
                };
                let ncol = nf + l - 1;
                let mut best_ref = f64::NEG_INFINITY;
                for d in 0..ncol {
                    let f = design_mmse_dfe(&ch, nf, nb, Some(d)).unwrap();
                    if d + nb >= ncol {
                        continue;
                    }
                    let (w, b, mse) = dense_wiener_hopf(&taps, 0.03, 1.5, nf, nb, d);
                    let beta = 1.0 - mse / 1.5;
                    let close = |got: &Cf32, want: Cf64| {
                        (Cf64::new(got.re as f64, got.im as f64) - want).norm()
                            < 2e-5 * (1.0 + want.norm())
                    };
                    for (a, wv) in f.ff.iter().zip(&w) {
                        assert!(
                            close(a, wv.conj() / beta),
                            "L {l} Nf {nf} Nb {nb} Δ {d}: ff"
                        );
                    }
                    for (a, bv) in f.fb.iter().zip(&b) {
                        assert!(
                            close(a, bv.conj() / beta),
                            "L {l} Nf {nf} Nb {nb} Δ {d}: fb"
                        );
                    }
                    let want_db = to_db(1.5 / mse);
                    assert!(
                        (f.predicted_snr_biased_db - want_db).abs() < 1e-9,
                        "L {l} Nf {nf} Nb {nb} Δ {d}: {} vs {want_db}",
                        f.predicted_snr_biased_db
                    );
                    best_ref = best_ref.max(want_db);
                }
                // The optimised delay is at least as good as every checked delay.
                let f = design_mmse_dfe(&ch, nf, nb, None).unwrap();
                assert!(f.predicted_snr_biased_db >= best_ref - 1e-9);
            }
        }
    }
    // Zero noise and an all-zero channel: the system is the zero matrix at every
    // delay (common practice: a Cholesky factorisation needs a positive pivot).
    let ch = DesignInput {
        taps: &[Cf64::new(0.0, 0.0), Cf64::new(0.0, 0.0)],
        pre: 0,
        noise_var: 0.0,
        es: 1.0,
    };
    assert!(matches!(
        design_mmse_dfe(&ch, 3, 3, None),
        Err(EqualiseError::SingularDesign { .. })
    ));
}

#[test]
fn the_genie_reuses_exactly_the_mmse_dfe_design() {
    // Source: definition (the genie is the MMSE-DFE with true symbols fed back).
    let h = [
        Cf64::new(0.2, 0.1),
        Cf64::new(1.0, 0.0),
        Cf64::new(0.4, -0.2),
    ];
    let ch = DesignInput {
        taps: &h,
        pre: 1,
        noise_var: 0.01,
        es: 1.0,
    };
    let opts = RunOptions::default();
    let g = GenieDfe::new(&ch, 16, 8, None, opts).unwrap();
    let m = MmseDfe::new(&ch, 16, 8, None, opts).unwrap();
    let r = GenieDfe::from_design(&m.core);
    assert_eq!(g.filters(), r.filters());
    assert_eq!(g.reverse_filters(), r.reverse_filters());
    assert_eq!((g.core.opts, g.name), (r.core.opts, r.name));
}

#[test]
fn reused_pass_buffers_give_the_same_symbols_as_a_first_run() {
    // Source: definition (buffers are reset before use). A long genie burst with
    // payload on both sides of the training leaves stale data in every
    // per-thread buffer; a shorter burst must then equalise exactly as on a
    // fresh thread.
    let h = [
        Cf64::new(1.0, 0.0),
        Cf64::new(0.4, -0.2),
        Cf64::new(0.15, 0.0),
    ];
    let c = Constellation::new(Modulation::Qam16);
    let long = simulate(31, Modulation::Qam16, &h, 0, 25.0, 700, 64, 900);
    let short = simulate(32, Modulation::Qam16, &h, 0, 25.0, 40, 64, 300);
    let cfg = BurstConfig {
        channel: fixed(0, 2),
        ..BurstConfig::default()
    };
    let fresh = {
        let y = short.y.clone();
        let x = short.x.clone();
        let train = short.training().to_vec();
        let offset = short.offset;
        std::thread::spawn(move || {
            let c = Constellation::new(Modulation::Qam16);
            let v = BurstView {
                y: &y,
                training: &train,
                offset,
                slicer: &c,
                known: Some(&x),
            };
            process_burst(&v, &cfg).unwrap().results
        })
        .join()
        .unwrap()
    };
    process_burst(&long.view(&long.y, &c, true), &cfg).unwrap();
    let again = process_burst(&short.view(&short.y, &c, true), &cfg).unwrap();
    assert_eq!(again.results, fresh);
}

#[test]
fn skipping_the_zf_dfe_leaves_every_other_result_unchanged() {
    // Source: definition (the equalisers are independent given the channel fit).
    let h = [
        Cf64::new(1.0, 0.0),
        Cf64::new(0.4, -0.2),
        Cf64::new(0.15, 0.0),
    ];
    let c = Constellation::new(Modulation::Qam16);
    let sim = simulate(33, Modulation::Qam16, &h, 0, 25.0, 100, 64, 500);
    let on = BurstConfig {
        channel: fixed(0, 2),
        ..BurstConfig::default()
    };
    let off = BurstConfig {
        run_zf_dfe: false,
        ..on
    };
    let a = process_burst(&sim.view(&sim.y, &c, true), &on).unwrap();
    let b = process_burst(&sim.view(&sim.y, &c, true), &off).unwrap();
    assert!(a.get("zf-dfe").is_some() && b.get("zf-dfe").is_none());
    let rest: Vec<_> = a
        .results
        .iter()
        .filter(|r| r.name != "zf-dfe")
        .cloned()
        .collect();
    assert_eq!(rest, b.results);
    assert_eq!(
        (a.channel, a.carrier, a.bounds, a.corrected),
        (b.channel, b.carrier, b.bounds, b.corrected)
    );
}

#[test]
fn interleaved_passes_give_bit_identical_symbols_to_each_equaliser_run_alone() {
    // Source: definition (the lanes of `run_cores` share nothing but the input).
    // Every equaliser type, the phase loop on, an adapting core among fixed
    // ones and a genie that must fail (no known symbols) while the others run;
    // training first (forward lanes only: one core alone takes the single-lane
    // path, all together the interleaved one) and in the middle (time-reversed
    // lanes too, ending long before the forward ones).
    for before in [0, 150] {
        interleaving_case(before);
    }
}

fn interleaving_case(before: usize) {
    let h = [
        Cf64::new(0.15, 0.1),
        Cf64::new(1.0, 0.0),
        Cf64::new(0.4, -0.2),
    ];
    let c = Constellation::new(Modulation::Qam16);
    let sim = simulate(34, Modulation::Qam16, &h, 1, 22.0, before, 64, 700);
    let est = fit_channel(&sim.y, sim.training(), sim.offset, &fixed(1, 1)).unwrap();
    let ch = design_input(&est);
    let opts = RunOptions {
        phase_loop: Some(tracking::LoopConfig {
            bandwidth: 0.01,
            damping: std::f64::consts::FRAC_1_SQRT_2,
        }),
        initial_freq_cycles_per_symbol: 1e-4,
        ..RunOptions::default()
    };
    let lms = RunOptions {
        tracking: TrackingConfig {
            mode: AdaptMode::Lms,
            ..TrackingConfig::default()
        },
        ..opts
    };
    let zf = ZfDfe::new(&ch, None, 1.0, opts).unwrap();
    let mmse = MmseDfe::new(&ch, 8, 3, None, opts).unwrap();
    let lin = LinearMmse::new(&ch, 8, None, opts).unwrap();
    let tracked = MmseDfe::new(&ch, 8, 3, None, lms).unwrap();
    let genie = GenieDfe::from_design(&mmse.core);
    let cores = [&zf.core, &mmse.core, &lin.core, &tracked.core, &genie.core];
    for known in [true, false] {
        let view = sim.view(&sim.y, &c, known);
        let mut outs = vec![EqualisedSymbols::default(); cores.len()];
        let status = run_cores(&cores, &view, &mut outs);
        for (k, core) in cores.iter().enumerate() {
            let mut alone = EqualisedSymbols::default();
            let want = core.run_into(&view, &mut alone);
            assert_eq!(status[k], want, "core {k}, known {known}, before {before}");
            if want.is_ok() {
                // Bit for bit (`PartialEq` on f32 would also accept 0.0 == −0.0).
                let bits = |s: &EqualisedSymbols| {
                    let f = |v: &Cf32| (v.re.to_bits(), v.im.to_bits());
                    (
                        s.soft.iter().map(f).collect::<Vec<_>>(),
                        s.labels.clone(),
                        s.phase_rad.iter().map(|p| p.to_bits()).collect::<Vec<_>>(),
                    )
                };
                assert_eq!(
                    bits(&outs[k]),
                    bits(&alone),
                    "core {k}, known {known}, before {before}"
                );
            }
        }
        assert_eq!(status[4].is_ok(), known);
    }
}

/// Textbook DFE with the second-order phase loop: one symbol at a time, the
/// feedforward sum straight from the apply form, the loop stepped by
/// `PhaseLoop::update` with the detector `Im(z·d*)/|d|²`.
#[allow(clippy::too_many_arguments)]
fn textbook_dfe_with_loop(
    y: &[Cf32],
    f: &DfeFilters,
    truth: &[Cf32],
    truth_range: std::ops::Range<usize>,
    start: usize,
    mut pll: tracking::PhaseLoop,
    c: &Constellation,
) -> Vec<(Cf32, f32)> {
    let mut d = vec![Cf32::new(0.0, 0.0); y.len()];
    for n in truth_range.clone().filter(|&n| n < start) {
        d[n] = truth[n];
    }
    let mut out = Vec::new();
    for n in start..y.len() {
        let mut acc = Cf32::new(0.0, 0.0);
        for (r, w) in f.ff.iter().enumerate() {
            let k = n as isize + f.lag() - r as isize;
            if k >= 0 && (k as usize) < y.len() {
                acc += w * y[k as usize];
            }
        }
        let mut z = acc * pll.phasor().conj();
        for (j, b) in f.fb.iter().enumerate() {
            if let Some(k) = n.checked_sub(j + 1) {
                z -= b * d[k];
            }
        }
        d[n] = if truth_range.contains(&n) {
            truth[n]
        } else {
            c.decide(z)
        };
        out.push((z, pll.phase as f32));
        let e = (z * d[n].conj()).im / d[n].norm_sqr();
        pll.update(e);
    }
    out
}

#[test]
fn dfe_loop_with_the_phase_loop_matches_the_textbook_loop() {
    // Reference: the one-symbol-at-a-time loop above. Both f32 with a different
    // feedforward summation order: 1e-4 absolute on unit-power symbols and on
    // the loop phase (decisions agree at 30 dB, so the loops see the same errors).
    let c = Constellation::new(Modulation::Qam16);
    let h = [
        Cf64::new(0.2, 0.1),
        Cf64::new(1.0, 0.0),
        Cf64::new(0.4, -0.3),
    ];
    let cfg = tracking::LoopConfig {
        bandwidth: 0.01,
        damping: std::f64::consts::FRAC_1_SQRT_2,
    };
    for (after, nf, nb) in [(1, 1, 0), (37, 8, 3), (300, 16, 8), (301, 5, 0)] {
        let sim = simulate(
            60 + after as u64,
            Modulation::Qam16,
            &h,
            1,
            30.0,
            0,
            64,
            after,
        );
        let est = fit_channel(&sim.y, sim.training(), 0, &fixed(1, 1)).unwrap();
        let opts = RunOptions {
            phase_loop: Some(cfg),
            initial_freq_cycles_per_symbol: 2e-4,
            ..RunOptions::default()
        };
        let mut eq = MmseDfe::new(&design_input(&est), nf, nb, None, opts).unwrap();
        let out = eq.run(&sim.view(&sim.y, &c, false)).unwrap();
        let mut pll = tracking::PhaseLoop::new(&cfg);
        pll.freq = 2.0 * std::f64::consts::PI * 2e-4;
        let mut truth = vec![Cf32::new(0.0, 0.0); sim.y.len()];
        truth[..64].copy_from_slice(sim.training());
        let slow = textbook_dfe_with_loop(&sim.y, eq.filters(), &truth, 0..64, 0, pll, &c);
        for (n, (z, p)) in slow.iter().enumerate() {
            assert!(
                (out.soft[n] - z).norm() < 1e-4 && (out.phase_rad[n] - p).abs() < 1e-4,
                "case {after}/{nf}/{nb}: first difference at n = {n}"
            );
        }
    }
}

#[test]
fn anchored_derotation_matches_a_sin_cos_per_sample() {
    // Slow twin of `derotate_into`: one f64 sin_cos per sample (the former code).
    // Tolerance 2e-7 on unit-magnitude samples: the f32 rounding of the phasor
    // (2⁻²⁴ ≈ 6e-8 per component) plus the f64 recurrence error between anchors
    // (≈ 32 steps × a few 2⁻⁵³); in practice almost every output is identical.
    // Source: common practice (fast path against the plain formula).
    let slow = |y: &[Cf32], nu: f64, phase: f64| -> Vec<Cf32> {
        y.iter()
            .enumerate()
            .map(|(n, v)| {
                let a = -(2.0 * std::f64::consts::PI * nu * n as f64 + phase);
                v * Cf32::new(a.cos() as f32, a.sin() as f32)
            })
            .collect()
    };
    let (mut same, mut total) = (0usize, 0usize);
    for &nu in &[0.0, 1e-6, -3.7e-3, 0.01, 0.25, -0.4999] {
        for &phase in &[0.0, -2.5, 1.0e3] {
            for n in [0usize, 1, 31, 32, 33, 97, 1124] {
                let y: Vec<Cf32> = (0..n)
                    .map(|k| Cf32::from_polar(1.0, k as f32 * 0.37))
                    .collect();
                let mut fast = vec![Cf32::new(f32::NAN, 0.0); n];
                derotate_into(&y, nu, phase, &mut fast);
                for (k, (a, want)) in fast.iter().zip(slow(&y, nu, phase)).enumerate() {
                    assert!(
                        (a - want).norm() <= 2e-7,
                        "nu={nu} phase={phase} n={n} k={k}: {a} vs {want}"
                    );
                    same += usize::from(*a == want);
                    total += 1;
                }
            }
        }
    }
    // Informative bound, far from the 1-in-10⁶ expected: at most 1 % differ.
    assert!(same * 100 >= total * 99, "{same} of {total} identical");
}

/// Periodogram maximiser of `Σ_t u_t·e^{−j2πνt}` on a grid of step `step`
/// around `centre` (± `span`), refined by a finer grid: the ML single-tone
/// frequency estimator of Rife & Boorstyn (1974), evaluated by brute force as
/// the slow reference of the training slope.
fn periodogram_reference(u: &[(f64, Cf64, f64)], centre: f64, span: f64) -> f64 {
    let power = |nu: f64| -> f64 {
        u.iter()
            .map(|(t, v, _)| v * Cf64::from_polar(1.0, -2.0 * std::f64::consts::PI * nu * t))
            .sum::<Cf64>()
            .norm_sqr()
    };
    let (mut best, mut step, mut lo, mut hi) = (centre, span / 200.0, centre - span, centre + span);
    for _ in 0..4 {
        let mut b = (f64::NEG_INFINITY, best);
        let mut nu = lo;
        while nu <= hi {
            let p = power(nu);
            if p > b.0 {
                b = (p, nu);
            }
            nu += step;
        }
        best = b.1;
        lo = best - 2.0 * step;
        hi = best + 2.0 * step;
        step /= 50.0;
    }
    best
}

#[test]
fn the_training_slope_does_not_slip_on_a_spectral_null() {
    // Source: Rife & Boorstyn (1974), the Cramér–Rao bound of a single-tone
    // frequency estimate, σ² = 6/((2π)²·SNR·M(M²−1)); Proakis (Digital
    // Communications) channel [0.407, 0.815, 0.407], whose output of the
    // training nearly vanishes on +,−,+ symbol runs. 200 trials, QPSK, 64
    // training symbols, 25 dB, ν = 3e-4 cycles/symbol. Acceptance: RMS error
    // within 1.5× the bound, no trial beyond 5σ (an unwrapping slip is a whole
    // cycle over the window, thousands of σ), and each estimate within 1σ of
    // the brute-force periodogram maximiser on the same products.
    let h = [
        Cf64::new(0.407, 0.0),
        Cf64::new(0.815, 0.0),
        Cf64::new(0.407, 0.0),
    ];
    let nu = 3e-4;
    let cfg = fixed(1, 1);
    let (mut sq, mut worst, mut n, mut sigma) = (0.0, 0.0f64, 0, 0.0);
    for trial in 0..200 {
        let sim = simulate(400 + trial, Modulation::Qpsk, &h, 1, 25.0, 0, 64, 8);
        let mut rotated = vec![Cf32::new(0.0, 0.0); sim.y.len()];
        derotate_into(&sim.y, -nu, 0.0, &mut rotated);
        let ch = crate::channel::fit_channel(&rotated, sim.training(), 0, &cfg).unwrap();
        let est = carrier::training_phase_slope(&rotated, sim.training(), 0, &ch);
        // Products with the fitted channel for the reference, the true
        // channel's output power for the bound.
        let t = sim.training();
        let products = |taps: &[Cf64]| -> Vec<(f64, Cf64, f64)> {
            (1..t.len() - 1)
                .map(|k| {
                    let yh: Cf64 = (0..3)
                        .map(|i| {
                            taps[i] * Cf64::new(t[k + 1 - i].re as f64, t[k + 1 - i].im as f64)
                        })
                        .sum();
                    let y = Cf64::new(rotated[k].re as f64, rotated[k].im as f64);
                    (k as f64, y * yh.conj(), yh.norm_sqr())
                })
                .collect()
        };
        let u = products(&ch.taps);
        let truth = products(&h);
        let p = truth.iter().map(|x| x.2).sum::<f64>() / truth.len() as f64;
        sigma = carrier::frequency_crb_sigma(p / 10f64.powf(-2.5), u.len());
        let reference = periodogram_reference(&u, nu, 0.01);
        assert!(
            (est - reference).abs() < sigma,
            "trial {trial}: estimate {est:.3e}, periodogram {reference:.3e}, σ {sigma:.2e}"
        );
        sq += (est - nu).powi(2);
        worst = worst.max((est - nu).abs());
        n += 1;
    }
    let rms = (sq / n as f64).sqrt();
    eprintln!("training slope: RMS error {rms:.3e}, worst {worst:.3e}, CRB σ {sigma:.3e}");
    assert!(rms < 1.5 * sigma, "RMS {rms:.3e} against σ {sigma:.3e}");
    assert!(
        worst < 5.0 * sigma,
        "worst {worst:.3e} against σ {sigma:.3e}"
    );
}

#[test]
fn a_refinement_that_runs_away_is_rejected_and_the_training_estimate_kept() {
    // Source: the acceptance rule of the carrier module (6 Cramér–Rao σ of the
    // training estimate, Rife & Boorstyn 1974). The payload alone turns at 0.02
    // cycles/symbol (as if its decisions were misread), the training not at all:
    // the decision-directed line fit follows the payload, lands hundreds of σ
    // away and must be rejected, the training estimate kept.
    let c = Constellation::new(Modulation::Qpsk);
    let h = [Cf64::new(1.0, 0.0), Cf64::new(0.3, 0.1)];
    let sim = simulate(77, Modulation::Qpsk, &h, 0, 25.0, 0, 64, 2000);
    let mut y = sim.y.clone();
    for (n, v) in y.iter_mut().enumerate().skip(64) {
        let p = Cf64::from_polar(1.0, 2.0 * std::f64::consts::PI * 0.02 * (n - 64) as f64);
        *v *= Cf32::new(p.re as f32, p.im as f32);
    }
    let cfg = BurstConfig {
        channel: fixed(0, 1),
        ..BurstConfig::default()
    };
    let out = process_burst(&sim.view(&y, &c, false), &cfg).unwrap();
    let rep = out.carrier;
    let rejected = rep.rejected_cfo_cycles_per_symbol;
    assert!(
        rejected.is_some_and(|r| (r - rep.training_cfo_cycles_per_symbol).abs()
            > cfg.carrier.max_sigmas * rep.training_sigma_cycles_per_symbol),
        "{rep:?}"
    );
    assert_eq!(
        rep.refined_cfo_cycles_per_symbol, rep.training_cfo_cycles_per_symbol,
        "{rep:?}"
    );
    // And a clean burst of the same kind is accepted.
    let clean = process_burst(&sim.view(&sim.y, &c, false), &cfg).unwrap();
    assert_eq!(
        clean.carrier.rejected_cfo_cycles_per_symbol, None,
        "{:?}",
        clean.carrier
    );
}

#[test]
fn decision_reliability_is_the_two_point_posterior() {
    // Source: Bayes' rule for two equiprobable points at distance dmin in
    // complex Gaussian noise of variance σ²: P(d | z) = 1/(1 + exp(−(|z−d'|² −
    // |z−d|²)/σ²)); at z halfway it is ½, at z = d it is 1/(1 + e^{−dmin²/σ²}).
    let (dmin, var) = (2.0f64, 0.5f64);
    let r_mid = carrier::decision_reliability(1.0, dmin, var);
    assert!((r_mid - 0.5).abs() < 1e-12, "{r_mid}");
    let r0 = carrier::decision_reliability(0.0, dmin, var);
    let direct = 1.0 / (1.0 + (-(dmin * dmin) / var).exp());
    assert!((r0 - direct).abs() < 1e-12, "{r0} vs {direct}");
}
