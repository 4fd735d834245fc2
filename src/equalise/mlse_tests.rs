//! Tests of the Viterbi MLSE (and its reduced-state form) against slow
//! references (brute force over all sequences, a textbook full-memory Viterbi)
//! and against published error-rate figures (Proakis; Forney 1972).

use super::*;
use crate::channel::{ChannelFitConfig, TapSpan};
use crate::equalise::carrier::CarrierConfig;
use crate::equalise::{process_burst, BurstConfig, BurstView};
use crate::report::metrics::clopper_pearson;
use crate::signal::{Constellation, Modulation};
use crate::testutil::binomial_interval;
use crate::testutil::eqref::*;

/// Burst of `before` payload, `ntrain` training and `after` payload symbols
/// (training from `tc`, payload from `pc`) through `taps` (`pre` pre-cursor
/// taps), complex noise `E|n|² = var`. Returns (y, x, labels; training labels are
/// those of `tc`).
#[allow(clippy::too_many_arguments)]
fn burst(
    seed: u64,
    pc: &[Cf32],
    tc: &[Cf32],
    taps: &[Cf64],
    pre: usize,
    var: f64,
    before: usize,
    ntrain: usize,
    after: usize,
) -> (Vec<Cf32>, Vec<Cf32>, Vec<usize>) {
    let mut r = rng(seed);
    let (mut x, mut labels) = random_symbols(&mut r, pc, before + ntrain + after);
    let (t, tl) = random_symbols(&mut r, tc, ntrain);
    x[before..before + ntrain].copy_from_slice(&t);
    labels[before..before + ntrain].copy_from_slice(&tl);
    let y = convolve(&x, taps, pre)
        .into_iter()
        .map(|v| v + cgauss(&mut r, var))
        .collect();
    (y, x, labels)
}

fn random_taps(seed: u64, n: usize) -> Vec<Cf64> {
    let mut r = rng(seed);
    (0..n)
        .map(|k| {
            let v = cgauss(&mut r, 1.0);
            let w = if k == n / 2 { 1.0 } else { 0.5 };
            Cf64::new(v.re as f64 * w, v.im as f64 * w)
        })
        .collect()
}

/// Sum of squared residuals of the observations whose symbols all lie in `region`
/// (the detector's metric), for the symbols `x` (indexed like `y`).
fn sequence_metric(
    y: &[Cf32],
    taps: &[Cf64],
    pre: usize,
    region: &Range<usize>,
    x: &[Cf64],
) -> f64 {
    let l = taps.len() - 1;
    let mut sum = 0.0;
    for (n, yn) in y.iter().enumerate() {
        let newest = n + pre;
        if newest < region.start + l || newest >= region.end {
            continue;
        }
        let mut pred = Cf64::new(0.0, 0.0);
        for (c, h) in taps.iter().enumerate() {
            pred += h * x[newest - c];
        }
        sum += (Cf64::new(yn.re as f64, yn.im as f64) - pred).norm_sqr();
    }
    sum
}

/// Brute force: every sequence of constellation points over the unknown
/// symbols of `region` (the known ones fixed to `known`), the one with the
/// smallest [`sequence_metric`]; returns its labels for the unknown positions.
fn brute_force(
    y: &[Cf32],
    taps: &[Cf64],
    pre: usize,
    region: Range<usize>,
    known_at: usize,
    known: &[Cf32],
    points: &[Cf32],
) -> Vec<(usize, usize)> {
    let c64 = |v: Cf32| Cf64::new(v.re as f64, v.im as f64);
    let unknown: Vec<usize> = region
        .clone()
        .filter(|n| !(known_at..known_at + known.len()).contains(n))
        .collect();
    let m = points.len();
    let total = m.pow(unknown.len() as u32);
    let mut x = vec![Cf64::new(0.0, 0.0); y.len()];
    for (i, k) in known.iter().enumerate() {
        x[known_at + i] = c64(*k);
    }
    let mut best = (f64::INFINITY, 0usize);
    for code in 0..total {
        let mut v = code;
        for &n in &unknown {
            x[n] = c64(points[v % m]);
            v /= m;
        }
        let d = sequence_metric(y, taps, pre, &region, &x);
        if d < best.0 {
            best = (d, code);
        }
    }
    let mut v = best.1;
    unknown
        .iter()
        .map(|&n| {
            let l = v % m;
            v /= m;
            (n, l)
        })
        .collect()
}

#[test]
fn viterbi_finds_the_same_sequence_as_a_brute_force_search_on_short_bursts() {
    // Reference: exhaustive search over all M^N payload sequences of the metric
    // the module doc defines (observations whose symbols all lie in the pass),
    // forward part and the part before the training separately. Noise is
    // strong enough (8 dB) that the sequences contain decision errors.
    let qpsk = qam_points(2);
    let bpsk = vec![Cf32::new(1.0, 0.0), Cf32::new(-1.0, 0.0)];
    let q16 = qam_points(4);
    // (points, training points, taps, pre, before, ntrain, after)
    type Case<'a> = (
        &'a [Cf32],
        &'a [Cf32],
        Vec<Cf64>,
        usize,
        usize,
        usize,
        usize,
    );
    let cases: Vec<Case<'_>> = vec![
        (&qpsk, &qpsk, random_taps(1, 3), 1, 0, 3, 7),
        (&qpsk, &qpsk, random_taps(2, 3), 0, 6, 2, 0),
        (&qpsk, &qpsk, random_taps(3, 3), 2, 4, 3, 5),
        (&bpsk, &bpsk, random_taps(4, 4), 1, 5, 4, 11),
        (&bpsk, &qpsk, random_taps(5, 2), 0, 9, 1, 9),
        (&q16, &qpsk, random_taps(6, 3), 1, 0, 4, 4),
        (&qpsk, &qpsk, random_taps(7, 1), 0, 3, 2, 6),
        (&qpsk, &qpsk, random_taps(8, 5), 2, 5, 5, 6),
    ];
    for (case, (pc, tc, taps, pre, before, nt, after)) in cases.into_iter().enumerate() {
        let (y, x, _) = burst(
            100 + case as u64,
            pc,
            tc,
            &taps,
            pre,
            0.16,
            before,
            nt,
            after,
        );
        let slicer = BruteSlicer(pc.to_vec());
        let det = Mlse::new(&taps, pre, &slicer, &MlseConfig::default()).unwrap();
        assert_eq!(det.mode(), MlseMode::Full);
        let training = &x[before..before + nt];
        let mb = MlseBurst {
            y: &y,
            training,
            offset: before,
            span: 0..y.len(),
        };
        let got = det.detect(&mb).unwrap();
        let fwd = brute_force(&y, &taps, pre, before..y.len(), before, training, pc);
        let bwd = brute_force(&y, &taps, pre, 0..before + nt, before, training, pc);
        for (n, want) in fwd.into_iter().chain(bwd) {
            assert_eq!(
                got[n], want,
                "case {case}: symbol {n} differs from brute force"
            );
        }
    }
}

/// Textbook Viterbi with full path memory (a `Vec` of symbol values per
/// survivor, no traceback ring, f64 metrics): the state is the last `mu`
/// symbols; taps beyond `mu` are cancelled from the survivor's own path (DDFSE
/// when `mu < L`). Returns labels for `start..end`; known symbols from `start`.
#[allow(clippy::too_many_arguments)]
fn textbook_viterbi(
    y: &[Cf32],
    taps: &[Cf64],
    pre: usize,
    points: &[Cf32],
    mu: usize,
    start: usize,
    end: usize,
    known: &[Cf32],
) -> Vec<usize> {
    let c64 = |v: Cf32| Cf64::new(v.re as f64, v.im as f64);
    let m = points.len();
    let l = taps.len() - 1;
    let states = m.pow(mu as u32);
    // Survivor: (metric, path values, path labels); state digits newest first.
    let mut surv: Vec<(f64, Vec<Cf64>, Vec<usize>)> =
        (0..states).map(|_| (0.0, Vec::new(), Vec::new())).collect();
    for t in start..end {
        let forced = t - start < known.len();
        let mut next: Vec<(f64, Vec<Cf64>, Vec<usize>)> = (0..states)
            .map(|_| (f64::INFINITY, Vec::new(), Vec::new()))
            .collect();
        for (s, (metric, path, labs)) in surv.iter().enumerate() {
            if !metric.is_finite() {
                continue;
            }
            for (a, pa) in points.iter().enumerate() {
                if forced && a != 0 {
                    continue;
                }
                let val = if forced {
                    c64(known[t - start])
                } else {
                    c64(*pa)
                };
                let mut bm = 0.0;
                if t >= start + l && t >= pre && t - pre < y.len() {
                    let mut pred = taps[0] * val;
                    for k in 1..=l {
                        pred += taps[k] * path[path.len() - k];
                    }
                    bm = (c64(y[t - pre]) - pred).norm_sqr();
                }
                let sp = (a + m * s) % states;
                if metric + bm < next[sp].0 {
                    let mut p = path.clone();
                    p.push(val);
                    let mut q = labs.clone();
                    q.push(a);
                    next[sp] = (metric + bm, p, q);
                }
            }
        }
        surv = next;
    }
    let best = surv
        .iter()
        .enumerate()
        .min_by(|a, b| a.1 .0.total_cmp(&b.1 .0))
        .map(|(i, _)| i)
        .unwrap();
    surv.swap_remove(best).2
}

#[test]
fn the_textbook_viterbi_agrees_with_brute_force_before_it_checks_the_fast_one() {
    // Chain of trust: the slow full-memory Viterbi equals the exhaustive search
    // on short bursts, so it can then check the fast detector on long ones.
    let qpsk = qam_points(2);
    for seed in 0..6u64 {
        let taps = random_taps(20 + seed, 3);
        let (y, x, _) = burst(200 + seed, &qpsk, &qpsk, &taps, 1, 0.2, 0, 2, 6);
        let slow = textbook_viterbi(&y, &taps, 1, &qpsk, 2, 0, y.len(), &x[..2]);
        let bf = brute_force(&y, &taps, 1, 0..y.len(), 0, &x[..2], &qpsk);
        for (n, want) in bf {
            assert_eq!(slow[n], want, "seed {seed}: symbol {n}");
        }
    }
}

#[test]
fn fast_viterbi_and_ddfse_match_the_textbook_viterbi_on_long_bursts() {
    // Reference: `textbook_viterbi` (full path memory, f64). The fast detector
    // keeps `D + D/2` rows of survivors and f32 metrics; at 14 dB the survivors
    // merge within a few symbols, so the decisions must be identical. Cases
    // cover block tracebacks (bursts ≫ D, and a forced short D = 4), the
    // reduced-state detector (state limit 16 on QPSK memory 4: μ = 2), a 16-QAM
    // payload after a QPSK training, and a part before the training.
    let qpsk = qam_points(2);
    let q16 = qam_points(4);
    type Case<'a> = (&'a [Cf32], usize, usize, Option<usize>, usize);
    let cases: Vec<Case<'_>> = vec![
        // (points, taps, state limit, traceback, before)
        (&qpsk, 3, 4096, None, 0),
        (&qpsk, 3, 4096, Some(4), 0),
        (&qpsk, 5, 16, None, 0),
        (&qpsk, 5, 16, Some(6), 300),
        (&q16, 3, 4096, None, 200),
        (&qpsk, 1, 4096, None, 50),
    ];
    for (case, (pc, ntaps, max_states, depth, before)) in cases.into_iter().enumerate() {
        let taps = random_taps(40 + case as u64, ntaps);
        let pre = ntaps / 2;
        let var = 10f64.powf(-1.4) * taps.iter().map(|h| h.norm_sqr()).sum::<f64>();
        let var = if pc.len() == 16 { var / 4.0 } else { var };
        let (y, x, labels) = burst(
            300 + case as u64,
            pc,
            &qpsk,
            &taps,
            pre,
            var,
            before,
            40,
            1500,
        );
        let cfg = MlseConfig {
            max_states,
            traceback_depth: depth,
            ..MlseConfig::default()
        };
        let slicer = BruteSlicer(pc.to_vec());
        let det = Mlse::new(&taps, pre, &slicer, &cfg).unwrap();
        let mu = det.state_memory();
        if max_states < 4096 {
            assert_eq!(det.mode(), MlseMode::ReducedState);
            assert_eq!(mu, 2);
        }
        let tr = &x[before..before + 40];
        let mb = MlseBurst {
            y: &y,
            training: tr,
            offset: before,
            span: 0..y.len(),
        };
        let mut out = vec![7usize; 3];
        let mut sc = MlseScratch::default();
        // Twice with the same scratch: the second run starts from dirty buffers.
        det.detect_into(&mb, &mut out, &mut sc).unwrap();
        det.detect_into(&mb, &mut out, &mut sc).unwrap();
        let fwd = textbook_viterbi(&y, &taps, pre, pc, mu, before, y.len(), tr);
        for (k, want) in fwd.iter().enumerate().skip(40) {
            let n = before + k;
            assert_eq!(out[n], *want, "case {case}: first difference at {n}");
        }
        if before > 0 {
            let yr: Vec<Cf32> = y.iter().rev().cloned().collect();
            let (rt, rp) = reverse_channel(&taps, pre);
            let trr: Vec<Cf32> = tr.iter().rev().cloned().collect();
            let s = y.len() - before - 40;
            let bwd = textbook_viterbi(&yr, &rt, rp, pc, mu, s, y.len(), &trr);
            for n in 0..before {
                assert_eq!(
                    out[n],
                    bwd[y.len() - 1 - n - s],
                    "case {case}: before, at {n}"
                );
            }
        }
        // Few errors at 14 dB: the detector decides sensibly at all.
        let errors = (0..y.len())
            .filter(|n| !(before..before + 40).contains(n) && out[*n] != labels[*n])
            .count();
        assert!(errors * 20 < y.len(), "case {case}: {errors} errors");
    }
}

#[test]
fn on_a_one_tap_channel_mlse_is_the_slicer_within_the_binomial_interval() {
    // Source: Proakis square-QAM SER (REFERENCE-VALUES §7): 16QAM at 15 dB,
    // SER 1.778184e-2; exact 99 % binomial acceptance interval (testutil).
    // With no memory the ML sequence is the symbol-by-symbol nearest point of
    // y/h: the labels must also equal the slicer's (f32 rounding may flip a
    // point sitting on a decision boundary: at most 1 in 10⁴ allowed).
    let p_ref = 1.778184e-2;
    assert!((qam_ser(16, 10f64.powf(1.5)) / p_ref - 1.0).abs() < 1e-4);
    let c = Constellation::new(Modulation::Qam16);
    let h = Cf64::from_polar(0.8, 0.3);
    let var = 0.64 * 10f64.powf(-1.5);
    let (y, x, labels) = burst(9, c.points(), c.points(), &[h], 0, var, 0, 100, 40_000);
    let det = Mlse::new(&[h], 0, &c, &MlseConfig::default()).unwrap();
    assert_eq!(det.states(), 16);
    let out = det
        .detect(&MlseBurst {
            y: &y,
            training: &x[..100],
            offset: 0,
            span: 0..y.len(),
        })
        .unwrap();
    let hf = Cf32::new(h.re as f32, h.im as f32);
    let n = y.len() - 100;
    let errors = (100..y.len()).filter(|&k| out[k] != labels[k]).count() as u64;
    let differ = (100..y.len())
        .filter(|&k| out[k] != c.slice(y[k] / hf))
        .count();
    let (lo, hi) = binomial_interval(n as u64, p_ref, 0.99);
    assert!(
        (lo..=hi).contains(&errors),
        "{errors} errors in {n}, 99 % interval [{lo}, {hi}]"
    );
    assert!(
        differ * 10_000 <= n,
        "{differ} labels differ from the slicer"
    );
}

/// Error events `ε` (BPSK, entries in {0, ±2}, first and last non-zero, no run of
/// `L` or more zeros inside) of length up to `max_len`: `(d²(ε), weight)` with
/// `d²(ε) = Σ_k |(h∗ε)_k|²` (Forney 1972) and weight `w(ε)·π(ε)` (symbol errors
/// times the probability `2^−w` that the data allow the event).
fn bpsk_error_events(h: &[f64], max_len: usize) -> Vec<(f64, f64)> {
    let l = h.len() - 1;
    let mut out = Vec::new();
    for len in 1..=max_len {
        let inner = len.saturating_sub(2);
        let ends = if len == 1 { 2 } else { 4 };
        for code in 0..ends * 3usize.pow(inner as u32) {
            let mut e = vec![0f64; len];
            let mut v = code;
            e[0] = if v % 2 == 0 { 2.0 } else { -2.0 };
            v /= 2;
            if len > 1 {
                e[len - 1] = if v % 2 == 0 { 2.0 } else { -2.0 };
                v /= 2;
                for item in e.iter_mut().take(len - 1).skip(1) {
                    *item = [0.0, 2.0, -2.0][v % 3];
                    v /= 3;
                }
            }
            let mut zeros = 0;
            let mut simple = true;
            for &x in &e {
                zeros = if x == 0.0 { zeros + 1 } else { 0 };
                if l > 0 && zeros >= l {
                    simple = false;
                }
            }
            if !simple {
                continue;
            }
            let d2: f64 = (0..len + l)
                .map(|k| {
                    (0..=l)
                        .filter(|&i| k >= i && k - i < len)
                        .map(|i| h[i] * e[k - i])
                        .sum::<f64>()
                        .powi(2)
                })
                .sum();
            let w = e.iter().filter(|&&x| x != 0.0).count();
            out.push((d2, w as f64 * 0.5f64.powi(w as i32)));
        }
    }
    out
}

#[test]
fn error_events_of_proakis_b_give_the_published_minimum_distance() {
    // Source: REFERENCE-VALUES §12 (Forney 1972; computed there by brute force
    // over events up to 8 symbols): channel B d²_min = 2.6569 (event +2, −2),
    // matched-filter bound 4·Σh² = 3.9821; channel C d²_min = 1.2624.
    let ev = bpsk_error_events(&PROAKIS_B, 8);
    let dmin = ev.iter().map(|e| e.0).fold(f64::INFINITY, f64::min);
    assert!((dmin - 2.6569).abs() < 1e-4, "{dmin}");
    let single = ev[0].0;
    assert!((single - 3.9821).abs() < 1e-4, "{single}");
    let evc = bpsk_error_events(&[0.227, 0.460, 0.688, 0.460, 0.227], 8);
    let dminc = evc.iter().map(|e| e.0).fold(f64::INFINITY, f64::min);
    assert!((dminc - 1.2624).abs() < 1e-4, "{dminc}");
}

const PROAKIS_B: [f64; 3] = [0.407, 0.815, 0.407];

/// Forney's bounds on the per-dimension symbol error rate of the MLSE for
/// antipodal symbols of amplitude `amp` on the real channel `h`, noise `σ²` per
/// real dimension: lower `K_L·Q(d_min/2σ)` (`K_L` the probability that an
/// event at `d_min` covering a given symbol is allowed by the data, here
/// events (±2, ∓2): ¾, by enumeration), upper the union bound
/// `Σ_ε w(ε)·π(ε)·Q(d(ε)/2σ)` over events up to 12 symbols (the terms of
/// longer events fall as `n·2^−n`).
fn forney_bounds(h: &[f64], amp: f64, sigma2: f64) -> (f64, f64) {
    let ev = bpsk_error_events(h, 12);
    let dmin2 = ev.iter().map(|e| e.0).fold(f64::INFINITY, f64::min);
    let q = |d2: f64| q_func((d2 * amp * amp).sqrt() / (2.0 * sigma2.sqrt()));
    let upper: f64 = ev.iter().map(|(d2, w)| w * q(*d2)).sum();
    // K_L by enumeration of (x[k−1], x[k], x[k+1]): an event (+2, −2) or
    // (−2, +2) covering k is allowed when a neighbour differs from x[k].
    let allowed = (0..8u32)
        .filter(|v| {
            let b = |i: u32| (v >> i) & 1;
            b(0) != b(1) || b(1) != b(2)
        })
        .count() as f64
        / 8.0;
    (allowed * q(dmin2), upper)
}

#[test]
fn bpsk_and_qpsk_on_proakis_b_follow_forneys_minimum_distance_bounds() {
    // Source: Forney 1972 (bounds K_L·Q(d_min/2σ) ≤ P_s ≲ union bound), d²_min
    // of channel B = 2.6569 for ±1 symbols (REFERENCE-VALUES §12, recomputed in
    // `error_events_of_proakis_b_give_the_published_minimum_distance`). QPSK
    // on a real channel is two independent antipodal channels of amplitude 1/√2:
    // P_s = 2p − p². The Monte-Carlo 99 % Clopper–Pearson interval must meet
    // [lower, upper] at each SNR. True taps (no fit): this checks the detector.
    let bpsk = vec![Cf32::new(1.0, 0.0), Cf32::new(-1.0, 0.0)];
    let qpsk = qam_points(2);
    let h = real_taps(&PROAKIS_B);
    for (pc, snr_db, n) in [
        (&bpsk, 9.0, 200_000usize),
        (&bpsk, 10.0, 400_000),
        (&qpsk, 12.0, 200_000),
        (&qpsk, 13.0, 400_000),
    ] {
        let var = 10f64.powf(-snr_db / 10.0);
        let (y, x, labels) = burst(500 + n as u64, pc, pc, &h, 0, var, 0, 64, n);
        let det = Mlse::new(&h, 0, &BruteSlicer(pc.clone()), &MlseConfig::default()).unwrap();
        let out = det
            .detect(&MlseBurst {
                y: &y,
                training: &x[..64],
                offset: 0,
                span: 0..y.len(),
            })
            .unwrap();
        let errors = (64..y.len()).filter(|&k| out[k] != labels[k]).count() as u64;
        let (lo, hi) = clopper_pearson(errors, n as u64, 0.99);
        let (amp, dims) = if pc.len() == 2 {
            (1.0, 1)
        } else {
            (std::f64::consts::FRAC_1_SQRT_2, 2)
        };
        let (pl, pu) = forney_bounds(&PROAKIS_B, amp, var / 2.0);
        let (pl, pu) = if dims == 2 {
            (2.0 * pl - pl * pl, 2.0 * pu - pu * pu)
        } else {
            (pl, pu)
        };
        assert!(
            hi >= pl && lo <= pu,
            "M={} at {snr_db} dB: SER {:.3e} [{lo:.3e}, {hi:.3e}] outside Forney [{pl:.3e}, {pu:.3e}]",
            pc.len(),
            errors as f64 / n as f64
        );
        assert!(errors >= 20, "too few errors ({errors}) to test anything");
    }
}

#[test]
fn mlse_beats_the_genie_dfe_which_beats_the_dfe_on_proakis_b() {
    // Source: MLSE is optimal for the sequence (Forney 1972), and the genie
    // DFE's error-free feedback can only help (Duttweiler, Mazo & Messerschmitt
    // 1974, REFERENCE-VALUES §8). Checked wherever the 99 % Clopper–Pearson
    // intervals of the two counts are disjoint; at least one pair must separate
    // at every SNR here. Fitted channel and the samples the equalisers saw, as
    // `analyse` gives them to the detector.
    let c = Constellation::new(Modulation::Qpsk);
    let h = real_taps(&PROAKIS_B);
    for snr_db in [10.0, 13.0, 16.0] {
        let var = 10f64.powf(-snr_db / 10.0);
        let (y, x, labels) = burst(600, c.points(), c.points(), &h, 0, var, 0, 500, 60_000);
        let view = BurstView {
            y: &y,
            training: &x[..500],
            offset: 0,
            slicer: &c,
            known: Some(&x),
        };
        let cfg = BurstConfig {
            channel: ChannelFitConfig {
                span: TapSpan::Fixed { pre: 0, post: 2 },
                ..Default::default()
            },
            // No carrier offset is simulated, and the decision-directed
            // refinement can lock a spurious slope at 10 dB on this channel;
            // the MLSE has no phase loop of its own (module doc).
            carrier: CarrierConfig {
                enabled: false,
                ..CarrierConfig::default()
            },
            ..BurstConfig::default()
        };
        let out = process_burst(&view, &cfg).unwrap();
        let count = |name: &str| {
            let (_, s) = out.get(name).unwrap().outcome.as_ref().unwrap();
            (500..y.len()).filter(|&k| s.labels[k] != labels[k]).count() as u64
        };
        let (dfe, genie) = (count("mmse-dfe"), count("genie-mmse-dfe"));
        let det = Mlse::new(
            &out.channel.taps,
            out.channel.pre,
            &c,
            &MlseConfig::default(),
        )
        .unwrap();
        let m = det
            .detect(&MlseBurst {
                y: &out.corrected,
                training: &x[..500],
                offset: 0,
                span: 0..y.len(),
            })
            .unwrap();
        let mlse = (500..y.len()).filter(|&k| m[k] != labels[k]).count() as u64;
        let n = (y.len() - 500) as u64;
        let ci = |k: u64| clopper_pearson(k, n, 0.99);
        let mut separated = 0;
        for ((a, an), (b, bn)) in [
            ((mlse, "mlse"), (genie, "genie")),
            ((genie, "genie"), (dfe, "dfe")),
            ((mlse, "mlse"), (dfe, "dfe")),
        ] {
            let (ia, ib) = (ci(a), ci(b));
            if ia.1 < ib.0 || ib.1 < ia.0 {
                separated += 1;
                assert!(a < b, "{snr_db} dB: {an} {a} vs {bn} {b} errors in {n}");
            }
        }
        assert!(
            separated > 0,
            "{snr_db} dB: no count separates ({mlse}/{genie}/{dfe})"
        );
    }
}

#[test]
fn too_many_states_skip_or_fall_back_to_the_reduced_state_detector() {
    // 16-QAM with memory 4: 16^4 = 65536 > 4096 states.
    let c = Constellation::new(Modulation::Qam16);
    let taps = random_taps(70, 5);
    let d = Mlse::new(&taps, 2, &c, &MlseConfig::default()).unwrap();
    assert_eq!(
        (d.mode(), d.state_memory(), d.states()),
        (MlseMode::ReducedState, 3, 4096)
    );
    let off = MlseConfig {
        reduced_state: false,
        ..MlseConfig::default()
    };
    let e = Mlse::new(&taps, 2, &c, &off).unwrap_err();
    assert_eq!(e.to_string(), "skipped (16^4 states, limit 4096)");
    let bad = [Cf64::new(f64::NAN, 0.0), Cf64::new(1.0, 0.0)];
    assert_eq!(
        Mlse::new(&bad, 0, &c, &off).unwrap_err(),
        MlseSkip::NonFinite
    );
    // Bounded memory: the scratch stays within what scratch_len states.
    let (y, x, _) = burst(71, c.points(), c.points(), &taps, 2, 0.01, 100, 30, 5000);
    let mut sc = MlseScratch::default();
    let mut out = Vec::new();
    d.detect_into(
        &MlseBurst {
            y: &y,
            training: &x[100..130],
            offset: 100,
            span: 0..y.len(),
        },
        &mut out,
        &mut sc,
    )
    .unwrap();
    let used = 4
        * (sc.metric.capacity() + sc.next.capacity() + sc.r_re.capacity() + sc.r_im.capacity())
        + sc.tb.capacity()
        + sc.reg.capacity()
        + sc.reg_next.capacity()
        + 8 * sc.yr.capacity()
        + 8 * sc.known_r.capacity()
        + 8 * sc.rev_labels.capacity();
    assert!(
        used <= d.scratch_len(y.len()),
        "{used} > {}",
        d.scratch_len(y.len())
    );
}

#[test]
fn a_bad_layout_is_an_error_and_a_nan_sample_does_not_spread() {
    let c = Constellation::new(Modulation::Qpsk);
    let taps = random_taps(80, 3);
    let d = Mlse::new(&taps, 1, &c, &MlseConfig::default()).unwrap();
    let (mut y, x, labels) = burst(81, c.points(), c.points(), &taps, 1, 0.003, 0, 20, 400);
    let bad = MlseBurst {
        y: &y,
        training: &x[..20],
        offset: 10,
        span: 0..25,
    };
    assert!(matches!(d.detect(&bad), Err(MlseError::Layout { .. })));
    y[200] = Cf32::new(f32::NAN, 0.0);
    let out = d
        .detect(&MlseBurst {
            y: &y,
            training: &x[..20],
            offset: 0,
            span: 0..y.len(),
        })
        .unwrap();
    let errors = (20..y.len()).filter(|&k| out[k] != labels[k]).count();
    assert!(errors <= 3, "{errors} errors around one NaN sample");
}
