//! Synchroniser search throughput (samples/s), single thread and all threads, next to
//! a single rustfft 4096-point FFT on the same machine.
//!
//! Takes in: optional `SYNC_BENCH_SAMPLES` (default 134 217 728 = 1 GiB of cf32) and
//! `SYNC_BENCH_REPEATS` (default 3; the best run is reported), `SYNC_BENCH_CASES` (1 = only
//! the one-hypothesis case, 0 = no search cases), `SYNC_BENCH_BURSTS` (default 4000, 0 = skip:
//! bursts of the per-burst case, see `per_burst`). Gives out: a table on
//! stdout. The capture is built in memory: complex white noise (Es/N0 10 dB relative to
//! the bursts) with one QPSK burst (127-symbol training, sps 4, RRC β 0.25, 8-symbol
//! span) every 2^20 samples. Run with `cargo bench --bench sync`.
//!
//! File mode (`SYNC_BENCH_FILE=PATH`, used by `benches/sync_vs_scipy.sh`): the same
//! capture is written once to PATH as raw `cf32_le` (if PATH does not exist yet), with
//! the search reference beside it (`PATH.ref.cf32`, `PATH.ref.json`: head, threshold,
//! minimum spacing) for the numpy/scipy baseline (`benches/baseline/search.py`); then the
//! one-hypothesis search runs over the memory-mapped file (`Capture::open` +
//! `Synchroniser::search_chunked`, the path `analyse` takes), 1 thread and all threads,
//! and prints one `RESULT {json}` line per run (wall and CPU seconds, detected starts).
use std::io::Write;
use std::path::Path;
use std::time::Instant;

use iqaudit::signal::rrc::{rrc_taps, shape};
use iqaudit::sync::{SyncConfig, Synchroniser};
use iqaudit::{Capture, Cf32, OpenOptions, SampleFormat};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::StandardNormal;
use rayon::prelude::*;
use rustfft::FftPlanner;

const SPS: usize = 4;

fn qpsk(n: usize, rng: &mut ChaCha8Rng) -> Vec<Cf32> {
    let a = std::f32::consts::FRAC_1_SQRT_2;
    (0..n)
        .map(|_| {
            Cf32::new(
                if rng.gen() { a } else { -a },
                if rng.gen() { a } else { -a },
            )
        })
        .collect()
}

fn env_usize(key: &str, default: usize) -> usize {
    std::env::var(key)
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(default)
}

/// Process CPU time (user + system) in seconds from /proc/self/stat (Linux; 0 elsewhere).
fn cpu_seconds() -> f64 {
    let Ok(stat) = std::fs::read_to_string("/proc/self/stat") else {
        return 0.0;
    };
    let Some(rest) = stat.rsplit(')').next() else {
        return 0.0;
    };
    let f: Vec<&str> = rest.split_whitespace().collect();
    // Fields 14 and 15 of the whole line (utime, stime) are 12 and 13 after the ')'.
    let ticks: f64 = f.get(11).and_then(|v| v.parse().ok()).unwrap_or(0.0)
        + f.get(12).and_then(|v| v.parse().ok()).unwrap_or(0.0);
    ticks / 100.0
}

/// Best wall time over `repeats`, with the CPU time of that run.
fn best_of<T>(repeats: usize, mut f: impl FnMut() -> T) -> (f64, f64, T) {
    let mut best = (f64::INFINITY, 0.0);
    let mut out = None;
    for _ in 0..repeats {
        let c = cpu_seconds();
        let t = Instant::now();
        let r = f();
        let wall = t.elapsed().as_secs_f64();
        if wall < best.0 {
            best = (wall, cpu_seconds() - c);
        }
        out = Some(r);
    }
    (best.0, best.1, out.expect("at least one repeat"))
}

/// The bench capture: complex white noise with one burst every 2^20 samples, built in
/// parallel, block by block, deterministically.
fn build_capture(n: usize, taps: &[f32], training: &[Cf32]) -> Vec<Cf32> {
    const BLOCK: usize = 1 << 20;
    let mut x = vec![Cf32::new(0.0, 0.0); n];
    x.par_chunks_mut(BLOCK).enumerate().for_each(|(b, chunk)| {
        let mut rng = ChaCha8Rng::seed_from_u64(1000 + b as u64);
        let s = (0.1f64 / 2.0).sqrt();
        for v in chunk.iter_mut() {
            let a: f64 = rng.sample(StandardNormal);
            let c: f64 = rng.sample(StandardNormal);
            *v = Cf32::new((a * s) as f32, (c * s) as f32);
        }
        let mut symbols = qpsk(100, &mut rng);
        symbols.extend_from_slice(training);
        symbols.extend(qpsk(300, &mut rng));
        let burst = shape(&symbols, taps, SPS);
        let at = 5000;
        if at + burst.len() < chunk.len() {
            for (v, b) in chunk[at..].iter_mut().zip(&burst) {
                *v += *b;
            }
        }
    });
    x
}

/// Time one rustfft 4096-point forward FFT on one thread and print it.
fn fft_line(block: &[Cf32], repeats: usize) {
    let fft = FftPlanner::<f32>::new().plan_fft_forward(4096);
    let mut buf = block.to_vec();
    let mut scratch = vec![Cf32::new(0.0, 0.0); fft.get_inplace_scratch_len()];
    let reps = 20_000;
    let (secs, _, _) = best_of(repeats, || {
        for _ in 0..reps {
            fft.process_with_scratch(&mut buf, &mut scratch);
        }
    });
    let fft_sps = (reps * 4096) as f64 / secs;
    println!(
        "rustfft 4096-point forward FFT, 1 thread: {:.1} µs/FFT, {:.0} M samples/s",
        secs / reps as f64 * 1e6,
        fft_sps / 1e6
    );
}

/// Search the capture at `path` (written first if missing) through the memory map.
fn file_mode(path: &Path, n: usize, repeats: usize, taps: &[f32], training: &[Cf32]) {
    let s = Synchroniser::new(training, taps, SyncConfig::new(SPS, 1e6)).expect("valid settings");
    if !path.exists() {
        let t = Instant::now();
        let x = build_capture(n, taps, training);
        let mut w = std::io::BufWriter::new(std::fs::File::create(path).expect("create capture"));
        for v in &x {
            w.write_all(&v.re.to_le_bytes()).expect("write");
            w.write_all(&v.im.to_le_bytes()).expect("write");
        }
        w.flush().expect("flush");
        eprintln!(
            "wrote {n} samples to {} in {:.1} s",
            path.display(),
            t.elapsed().as_secs_f64()
        );
    }
    let mut r = std::io::BufWriter::new(
        std::fs::File::create(format!("{}.ref.cf32", path.display())).expect("create ref"),
    );
    for v in s.reference() {
        r.write_all(&v.re.to_le_bytes()).expect("write");
        r.write_all(&v.im.to_le_bytes()).expect("write");
    }
    r.flush().expect("flush");
    std::fs::write(
        format!("{}.ref.json", path.display()),
        format!(
            "{{\"head\": {}, \"threshold\": {}, \"min_spacing\": {}}}\n",
            s.reference_head(),
            s.threshold(),
            s.reference().len()
        ),
    )
    .expect("write ref.json");
    let opts = OpenOptions {
        format: Some(SampleFormat::Cf32Le),
        ..OpenOptions::default()
    };
    let cap = Capture::open(path, &opts).expect("open capture");
    let len = cap.len();
    let mut block = vec![Cf32::new(0.0, 0.0); 4096];
    cap.read_into(0, &mut block).expect("read");
    fft_line(&block, repeats);
    let all = rayon::current_num_threads();
    for threads in [1, all] {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .expect("thread pool");
        let (secs, cpu, found) = best_of(repeats, || {
            pool.install(|| {
                s.search_chunked(len, |st, out: &mut [Cf32]| {
                    cap.read_into(st, out).map(|_| ())
                })
                .expect("search")
            })
        });
        let starts: Vec<String> = found.iter().map(|d| d.start_sample.to_string()).collect();
        if threads == 1 {
            // Per-burst cost of what follows the search: refine (coarse CFO, timing,
            // channel-aware fine CFO) and extract_symbols of the whole frame.
            let src = iqaudit::sync::ChunkReader::new(len, |st, out: &mut [Cf32]| {
                cap.read_into(st, out).map(|_| ())
            });
            let mut y = vec![Cf32::new(0.0, 0.0); 100 + 127 + 300];
            let (rs, rcpu, _) = best_of(repeats, || {
                for d in &found {
                    let b = s.refine(&src, d).expect("refine");
                    s.extract_symbols(&src, &b, -100..427, &mut y)
                        .expect("extract");
                }
            });
            println!(
                "refine + extract_symbols (527 symbols), 1 thread: {:.0} µs per burst wall, {:.0} µs CPU ({} bursts)",
                rs / found.len().max(1) as f64 * 1e6,
                rcpu / found.len().max(1) as f64 * 1e6,
                found.len()
            );
        }
        println!(
            "RESULT {{\"method\": \"iqaudit\", \"threads\": {threads}, \"samples\": {len}, \"wall_s\": {secs}, \"cpu_s\": {cpu}, \"bursts\": {}, \"starts\": [{}]}}",
            found.len(),
            starts.join(", ")
        );
    }
}

/// Per-burst cost after the search, on a dense capture shaped like the end-to-end dense
/// profile (`benches/e2e/profile.json`: 64-symbol QPSK training, 1024 payload symbols
/// after it, sps 4, RRC β 0.25 span 8; a 3-tap symbol-spaced channel, Es/N0 20 dB,
/// one burst every 4700 samples): `refine` alone, then `extract_symbols` of the frame
/// (training and payload ± 8 symbols), 1 thread, best of `repeats`.
fn per_burst(bursts: usize, repeats: usize, taps: &[f32]) {
    const TRAIN: usize = 64;
    const PAYLOAD: usize = 1024;
    const SPACING: usize = 4700;
    let training = qpsk(TRAIN, &mut ChaCha8Rng::seed_from_u64(9));
    let mut rng = ChaCha8Rng::seed_from_u64(10);
    let n = bursts * SPACING + 2000;
    let s = (0.01f64 / 2.0).sqrt();
    let mut x: Vec<Cf32> = (0..n)
        .map(|_| {
            let a: f64 = rng.sample(StandardNormal);
            let c: f64 = rng.sample(StandardNormal);
            Cf32::new((a * s) as f32, (c * s) as f32)
        })
        .collect();
    let channel = [
        Cf32::new(0.85, 0.0),
        Cf32::new(0.3, -0.2),
        Cf32::new(0.1, 0.05),
    ];
    for b in 0..bursts {
        let mut symbols = training.clone();
        symbols.extend(qpsk(PAYLOAD, &mut rng));
        let through: Vec<Cf32> = (0..symbols.len())
            .map(|k| {
                channel
                    .iter()
                    .enumerate()
                    .filter(|(i, _)| *i <= k)
                    .map(|(i, h)| symbols[k - i] * *h)
                    .sum()
            })
            .collect();
        let burst = shape(&through, taps, SPS);
        for (v, p) in x[1000 + b * SPACING..].iter_mut().zip(&burst) {
            *v += *p;
        }
    }
    let cfg = SyncConfig {
        max_cfo_hz: 0.0,
        ..SyncConfig::new(SPS, 1e6)
    };
    let s = Synchroniser::new(&training, taps, cfg).expect("valid settings");
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .expect("thread pool");
    let found = pool.install(|| s.search(&x).expect("search"));
    // Each timed run makes PASSES passes over all bursts, so the CPU time (read in
    // 10 ms ticks) spans many ticks.
    const PASSES: usize = 5;
    let (rs, rcpu, synced) = best_of(repeats, || {
        pool.install(|| {
            let mut out = Vec::new();
            for _ in 0..PASSES {
                out = found
                    .iter()
                    .map(|d| s.refine(&x[..], d).expect("refine"))
                    .collect::<Vec<_>>();
            }
            out
        })
    });
    let frame = -8..(TRAIN + PAYLOAD + 8) as i64;
    let mut y = vec![Cf32::new(0.0, 0.0); (frame.end - frame.start) as usize];
    let (es, ecpu, _) = best_of(repeats, || {
        pool.install(|| {
            for _ in 0..PASSES {
                for b in &synced {
                    s.extract_symbols(&x[..], b, frame.clone(), &mut y)
                        .expect("extract");
                }
            }
        })
    });
    let per = |v: f64| v / (PASSES * found.len().max(1)) as f64 * 1e6;
    println!(
        "per burst (dense e2e shape, {} of {bursts} bursts found), 1 thread: refine {:.1} µs wall / {:.1} µs CPU, extract_symbols ({} symbols) {:.1} µs wall / {:.1} µs CPU",
        found.len(),
        per(rs),
        per(rcpu),
        y.len(),
        per(es),
        per(ecpu)
    );
}

fn main() {
    let n = env_usize("SYNC_BENCH_SAMPLES", 1 << 27);
    let repeats = env_usize("SYNC_BENCH_REPEATS", 3).max(1);
    let taps = rrc_taps(0.25, 8, SPS);
    let training = qpsk(127, &mut ChaCha8Rng::seed_from_u64(7));

    let bursts = env_usize("SYNC_BENCH_BURSTS", 4000);
    if bursts > 0 {
        per_burst(bursts, repeats, &taps);
    }
    if env_usize("SYNC_BENCH_CASES", 2) == 0 {
        return;
    }

    if let Ok(path) = std::env::var("SYNC_BENCH_FILE") {
        file_mode(Path::new(&path), n, repeats, &taps, &training);
        return;
    }
    let t = Instant::now();
    let x = build_capture(n, &taps, &training);
    eprintln!("built {n} samples in {:.1} s", t.elapsed().as_secs_f64());

    fft_line(&x[..4096], repeats);

    let all = rayon::current_num_threads();
    for &(label, max_cfo_hz) in &[
        ("1 hypothesis (max_cfo 0)", 0.0),
        ("7 hypotheses (max_cfo 1 % of Rs)", 2500.0),
    ] {
        let cfg = SyncConfig {
            max_cfo_hz,
            ..SyncConfig::new(SPS, 1e6)
        };
        let s = Synchroniser::new(&training, &taps, cfg).expect("valid settings");
        for threads in [1, all] {
            let pool = rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .expect("thread pool");
            let (secs, cpu, found) =
                best_of(repeats, || pool.install(|| s.search(&x).expect("search")));
            println!(
                "search, {label}, {threads} thread(s): {:.0} M samples/s wall, {:.0} M samples per CPU-second ({} bursts, {:.2} s wall, {:.2} s CPU, {} samples)",
                n as f64 / secs / 1e6,
                n as f64 / cpu.max(1e-9) / 1e6,
                found.len(),
                secs,
                cpu,
                n
            );
        }
    }
}
