//! Equaliser throughput and design time (stable toolchain, no harness).
//!
//! Takes nothing; prints equalised symbols per second on one core for the
//! MMSE-DFE with Nf = 16, Nb = 8 on 16-QAM (phase loop off/on, LMS, RLS), the
//! time to design the MMSE-DFE filters (Δ optimised), the channel fit time, the
//! slicer alone per modulation, the per-burst infinite-length bounds, one
//! whole burst through `process_burst`, and the Viterbi MLSE
//! (`equalise::mlse`) for QPSK with memory 2 and 4 and 16-QAM with memory 2.
//! Run: `cargo bench --bench equalise`. Figures go to docs/performance.md.

use iqaudit::channel::{fit_channel, ChannelFitConfig, TapSpan};
use iqaudit::equalise::mlse::{Mlse, MlseBurst, MlseConfig, MlseScratch};
use iqaudit::equalise::mmse_dfe::{design_mmse_dfe, DesignInput};
use iqaudit::equalise::tracking::{AdaptMode, LoopConfig, TrackingConfig};
use iqaudit::equalise::{
    process_burst, theory, BurstConfig, BurstView, EqualisedSymbols, Equaliser, MmseDfe, RunOptions,
};
use iqaudit::{Cf32, Cf64, Constellation, Modulation};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::hint::black_box;
use std::time::Instant;

/// CPU time of this thread in seconds (Linux `/proc/thread-self/schedstat`,
/// first field = ns on CPU), so figures stay per core on a shared machine;
/// `None` elsewhere.
fn cpu_seconds() -> Option<f64> {
    let s = std::fs::read_to_string("/proc/thread-self/schedstat").ok()?;
    let ns: f64 = s.split_whitespace().next()?.parse().ok()?;
    Some(ns * 1e-9)
}

/// Run `f` `reps` times; returns seconds per call (CPU time when available, else wall).
fn time_per_call(reps: usize, mut f: impl FnMut()) -> (f64, &'static str) {
    let c0 = cpu_seconds();
    let t = Instant::now();
    for _ in 0..reps {
        f();
    }
    let wall = t.elapsed().as_secs_f64();
    match (c0, cpu_seconds()) {
        (Some(a), Some(b)) => ((b - a) / reps as f64, "cpu"),
        _ => (wall / reps as f64, "wall"),
    }
}

fn main() {
    let c = Constellation::new(Modulation::Qam16);
    let mut r = ChaCha8Rng::seed_from_u64(1);
    let n = 1_000_000usize;
    let ntrain = 255;
    let taps = [
        Cf64::new(0.1, 0.05),
        Cf64::new(1.0, 0.0),
        Cf64::new(0.4, -0.2),
        Cf64::new(0.15, 0.1),
        Cf64::new(-0.05, 0.02),
    ];
    let x: Vec<Cf32> = (0..n).map(|_| c.points()[r.gen_range(0..16)]).collect();
    let y: Vec<Cf32> = (0..n)
        .map(|k| {
            let mut acc = Cf64::new(0.0, 0.0);
            for (ci, h) in taps.iter().enumerate() {
                let idx = k as isize - (ci as isize - 1);
                if idx >= 0 && (idx as usize) < n {
                    let v = x[idx as usize];
                    acc += h * Cf64::new(v.re as f64, v.im as f64);
                }
            }
            let noise = Cf32::new(r.gen_range(-0.03..0.03), r.gen_range(-0.03..0.03));
            Cf32::new(acc.re as f32, acc.im as f32) + noise
        })
        .collect();
    let cfg = ChannelFitConfig {
        span: TapSpan::Fixed { pre: 1, post: 3 },
        ..ChannelFitConfig::default()
    };
    let reps = 200;
    let (fit_s, clock) = time_per_call(reps, || {
        black_box(fit_channel(&y, &x[..ntrain], 0, &cfg).expect("fit"));
    });
    let fit_us = fit_s * 1e6;
    let est = fit_channel(&y, &x[..ntrain], 0, &cfg).expect("fit");
    let ch = DesignInput {
        taps: &est.taps,
        pre: est.pre,
        noise_var: est.noise_var,
        es: est.es,
    };
    let (design_s, _) = time_per_call(reps, || {
        black_box(design_mmse_dfe(&ch, 16, 8, None).expect("design"));
    });
    let design_us = design_s * 1e6;
    println!("timing clock: {clock} time of this thread");
    println!("channel fit, {ntrain}-symbol training, 5 taps: {fit_us:.1} µs");
    println!(
        "MMSE-DFE design Nf=16 Nb=8, all {} delays: {design_us:.1} µs",
        16 + 5 - 1
    );

    let view = BurstView {
        y: &y,
        training: &x[..ntrain],
        offset: 0,
        slicer: &c,
        known: None,
    };
    let pll = LoopConfig {
        bandwidth: 0.002,
        damping: std::f64::consts::FRAC_1_SQRT_2,
    };
    let cases: [(&str, RunOptions, usize); 4] = [
        ("no loop, no tracking", RunOptions::default(), n),
        (
            "phase loop",
            RunOptions {
                phase_loop: Some(pll),
                ..RunOptions::default()
            },
            n,
        ),
        (
            "phase loop + LMS",
            RunOptions {
                phase_loop: Some(pll),
                tracking: TrackingConfig {
                    mode: AdaptMode::Lms,
                    ..TrackingConfig::default()
                },
                ..RunOptions::default()
            },
            n,
        ),
        (
            "phase loop + RLS",
            RunOptions {
                phase_loop: Some(pll),
                tracking: TrackingConfig {
                    mode: AdaptMode::Rls,
                    ..TrackingConfig::default()
                },
                ..RunOptions::default()
            },
            n / 10,
        ),
    ];
    // Slicer alone, per modulation: nearest-point label of noisy points (per core).
    let m = 1 << 20;
    for modulation in Modulation::ALL {
        let cm = Constellation::new(modulation);
        let pts: Vec<Cf32> = (0..m)
            .map(|_| {
                cm.points()[r.gen_range(0..cm.order())]
                    + Cf32::new(r.gen_range(-0.05..0.05), r.gen_range(-0.05..0.05))
            })
            .collect();
        let mut labels = vec![0usize; m];
        let (s, _) = time_per_call(10, || {
            cm.slice_into(&pts, &mut labels);
            black_box(&labels);
        });
        println!(
            "slicer {}: {:.0} M symbols/s",
            modulation.name(),
            m as f64 / s / 1e6
        );
    }
    // Infinite-length bounds computed per burst (adaptive grid: FFTs + logs).
    let snr = est.es / est.noise_var;
    let (s, _) = time_per_call(200, || {
        black_box(theory::bounds(&est.taps, snr, theory::DEFAULT_GRID));
    });
    let used = theory::grid_means(&est.taps, snr, theory::DEFAULT_GRID).grid;
    println!(
        "theory bounds per burst, adaptive grid (stopped at {used} of at most {} points): {:.1} µs",
        theory::DEFAULT_GRID,
        s * 1e6
    );

    // One whole burst as `analyse` runs it (channel fit, carrier refinement, the
    // ZF-DFE, MMSE-DFE, linear MMSE and genie passes, bounds): the e2e profile's
    // shape, 64 training + 1024 payload symbols after the training.
    let burst_len = 64 + 1024;
    let burst_view = BurstView {
        y: &y[..burst_len],
        training: &x[..64],
        offset: 0,
        slicer: &c,
        known: Some(&x[..burst_len]),
    };
    let burst_cfg = BurstConfig::default();
    let (s, _) = time_per_call(500, || {
        black_box(process_burst(&burst_view, &burst_cfg).expect("burst"));
    });
    println!(
        "process_burst, 64 training + 1024 payload symbols, 16QAM, known payload: {:.1} µs",
        s * 1e6
    );

    let mut out = EqualisedSymbols::default();
    for (name, opts, len) in cases {
        let v = BurstView {
            y: &y[..len],
            ..view
        };
        let mut eq = MmseDfe::new(&ch, 16, 8, None, opts).expect("design");
        eq.run_into(&v, &mut out).expect("run"); // warm-up, sizes `out`
        let (s, _) = time_per_call(5, || {
            eq.run_into(&v, &mut out).expect("run");
            black_box(&out);
        });
        let errors = (ntrain..len - 40)
            .filter(|&k| c.points()[out.labels[k]] != x[k])
            .count();
        println!(
            "MMSE-DFE Nf=16 Nb=8 16QAM, {name}: {:.2} M symbols/s ({errors} symbol errors in {})",
            len as f64 / s / 1e6,
            len - ntrain - 40
        );
    }
    mlse_throughput(&mut r);
}

/// Viterbi MLSE symbols per second (per core) on random bursts through a
/// channel of `memory + 1` taps, at a SNR with few decision errors.
fn mlse_throughput(r: &mut ChaCha8Rng) {
    let n = 50_000usize;
    for (modulation, memory) in [
        (Modulation::Qpsk, 2usize),
        (Modulation::Qpsk, 4),
        (Modulation::Qam16, 2),
    ] {
        let c = Constellation::new(modulation);
        let m = c.order();
        let taps: Vec<Cf64> = (0..=memory)
            .map(|k| {
                if k == 0 {
                    Cf64::new(1.0, 0.0)
                } else {
                    Cf64::new(0.5 / k as f64, 0.2 / k as f64)
                }
            })
            .collect();
        let x: Vec<Cf32> = (0..n).map(|_| c.points()[r.gen_range(0..m)]).collect();
        let y: Vec<Cf32> = (0..n)
            .map(|k| {
                let mut acc = Cf64::new(0.0, 0.0);
                for (i, h) in taps.iter().enumerate() {
                    if k >= i {
                        let v = x[k - i];
                        acc += h * Cf64::new(v.re as f64, v.im as f64);
                    }
                }
                let noise = Cf32::new(r.gen_range(-0.03..0.03), r.gen_range(-0.03..0.03));
                Cf32::new(acc.re as f32, acc.im as f32) + noise
            })
            .collect();
        let det = Mlse::new(&taps, 0, &c, &MlseConfig::default()).expect("plan");
        let burst = MlseBurst {
            y: &y,
            training: &x[..64],
            offset: 0,
            span: 0..n,
        };
        let mut out = Vec::new();
        let mut sc = MlseScratch::default();
        det.detect_into(&burst, &mut out, &mut sc).expect("run"); // warm-up
        let reps = if det.states() > 64 { 2 } else { 10 };
        let (s, _) = time_per_call(reps, || {
            det.detect_into(&burst, &mut out, &mut sc).expect("run");
            black_box(&out);
        });
        let errors = (64..n).filter(|&k| c.points()[out[k]] != x[k]).count();
        println!(
            "MLSE {} memory {memory} ({} states): {:.3} M symbols/s ({errors} symbol errors in {})",
            modulation.name(),
            det.states(),
            n as f64 / s / 1e6,
            n - 64
        );
    }
}
