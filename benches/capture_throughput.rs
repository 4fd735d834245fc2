//! Capture throughput benchmark (not a test; run with `cargo bench --bench capture_throughput`).
//!
//! Takes in: optional arguments `SIZE_MIB` (default 1024), `DIR` (default the
//! system temp dir) and `FORMATS` (comma-separated, default every raw format).
//! Gives out: a table on stdout, in samples per second, of (1) a plain page-cache
//! read of each file, (2) conversion to `Cf32` through `Capture::read_into` on one
//! thread, in wall time and per CPU-second of that thread, and as a share of a
//! memory-mapped pass over a cached `cf32_le` file of the same size (the
//! reference rate of issue #2), (3) the whole `info`
//! computation (`capture_stats` + `info_report`) on all threads, and (4) the
//! SHA-256 of the file as `analyse` computes it (bytes per second).
//! Files are filled with pseudo-random codes and read once before timing so
//! every figure is a warm page-cache figure; each figure is the best of three runs. Record results in docs/performance.md.

use std::io::{Read, Write};
use std::path::Path;
use std::time::Instant;

use iqaudit::capture::stats::{capture_stats, info_report, StatsOptions};
use iqaudit::{Capture, Cf32, OpenOptions, SampleFormat};

fn fill(path: &Path, bytes: u64, format: SampleFormat) {
    let mut f = std::io::BufWriter::new(std::fs::File::create(path).unwrap());
    let mut state = 0x9E37_79B9_7F4A_7C15u64;
    let mut buf = vec![0u8; 1 << 20];
    let mut left = bytes;
    while left > 0 {
        for word in buf.chunks_exact_mut(8) {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            let v = match format {
                // Two f32 components in [-0.5, 0.5): finite floats.
                SampleFormat::Cf32Le => {
                    let a = ((state >> 40) as f32 / 16_777_216.0) - 0.5;
                    let b = (((state >> 8) & 0xFF_FFFF) as f32 / 16_777_216.0) - 0.5;
                    let mut w = [0u8; 8];
                    w[..4].copy_from_slice(&a.to_le_bytes());
                    w[4..].copy_from_slice(&b.to_le_bytes());
                    u64::from_le_bytes(w)
                }
                SampleFormat::Cf32Be => {
                    let a = ((state >> 40) as f32 / 16_777_216.0) - 0.5;
                    let b = (((state >> 8) & 0xFF_FFFF) as f32 / 16_777_216.0) - 0.5;
                    let mut w = [0u8; 8];
                    w[..4].copy_from_slice(&a.to_be_bytes());
                    w[4..].copy_from_slice(&b.to_be_bytes());
                    u64::from_le_bytes(w)
                }
                // One f64 component per word, in [-0.5, 0.5).
                SampleFormat::Cf64Le => {
                    (((state >> 11) as f64 / 9_007_199_254_740_992.0) - 0.5).to_bits()
                }
                _ => state,
            };
            word.copy_from_slice(&v.to_le_bytes());
        }
        let n = left.min(buf.len() as u64) as usize;
        f.write_all(&buf[..n]).unwrap();
        left -= n as u64;
    }
    f.flush().unwrap();
}

fn plain_read(path: &Path) -> f64 {
    let mut f = std::fs::File::open(path).unwrap();
    let mut buf = vec![0u8; 1 << 20];
    let t = Instant::now();
    let mut total = 0u64;
    let mut x = 0u8;
    loop {
        let n = f.read(&mut buf).unwrap();
        if n == 0 {
            break;
        }
        x ^= buf[n - 1];
        total += n as u64;
    }
    std::hint::black_box(x);
    total as f64 / t.elapsed().as_secs_f64()
}

/// The reference rate: one pass over a memory-mapped, cached `cf32_le`
/// file through the zero-copy view (every sample read once, summed in 16 f32
/// lanes so the adds are not the bottleneck). Samples per second.
fn mmap_pass(cap: &Capture) -> f64 {
    let v = cap
        .as_cf32_slice()
        .expect("a cf32_le capture has a zero-copy view");
    let t = Instant::now();
    let mut acc = [0.0f32; 16];
    let mut blocks = v.chunks_exact(8);
    for b in &mut blocks {
        for (k, s) in b.iter().enumerate() {
            acc[2 * k] += s.re;
            acc[2 * k + 1] += s.im;
        }
    }
    for s in blocks.remainder() {
        acc[0] += s.re + s.im;
    }
    std::hint::black_box(acc);
    v.len() as f64 / t.elapsed().as_secs_f64()
}

fn convert(cap: &Capture) -> f64 {
    let mut out = vec![Cf32::default(); 1 << 16];
    let t = Instant::now();
    let mut start = 0;
    let mut acc = 0.0f32;
    while start < cap.len() {
        let n = out.len().min(cap.len() - start);
        cap.read_into(start, &mut out[..n]).unwrap();
        acc += out[n - 1].re;
        start += n;
    }
    std::hint::black_box(acc);
    cap.len() as f64 / t.elapsed().as_secs_f64()
}

/// CPU time of this thread in seconds (Linux `/proc/thread-self/schedstat`, first
/// field = ns on CPU); 0 where unavailable (the caller then falls back to wall time).
fn thread_cpu_seconds() -> f64 {
    std::fs::read_to_string("/proc/thread-self/schedstat")
        .ok()
        .and_then(|s| s.split_whitespace().next()?.parse::<f64>().ok())
        .map_or(0.0, |ns| ns * 1e-9)
}

fn main() {
    let args: Vec<String> = std::env::args()
        .skip(1)
        .filter(|a| a != "--bench")
        .collect();
    let mib: u64 = args.first().and_then(|s| s.parse().ok()).unwrap_or(1024);
    let dir = args
        .get(1)
        .map(std::path::PathBuf::from)
        .unwrap_or_else(std::env::temp_dir);
    // Formats: the third argument (comma-separated names), default every raw format.
    let formats: Vec<SampleFormat> = match args.get(2) {
        Some(list) => list
            .split(',')
            .map(|n| n.parse().expect("a sample format name"))
            .collect(),
        None => vec![
            SampleFormat::Ci8,
            SampleFormat::Cu8,
            SampleFormat::Ci16Le,
            SampleFormat::Ci16Be,
            SampleFormat::Cf32Le,
            SampleFormat::Cf32Be,
            SampleFormat::Cf64Le,
        ],
    };
    // The reference of issue #2: a memory-mapped pass over a cached cf32 file of
    // the same size, one thread.
    let ref_path = dir.join("iqaudit-bench-reference.cf32");
    fill(&ref_path, mib << 20, SampleFormat::Cf32Le);
    let ref_cap = Capture::open(
        &ref_path,
        &OpenOptions {
            format: Some(SampleFormat::Cf32Le),
            ..OpenOptions::default()
        },
    )
    .unwrap();
    mmap_pass(&ref_cap); // fault the map in
    let reference = (0..5).map(|_| mmap_pass(&ref_cap)).fold(0.0f64, f64::max);
    drop(ref_cap);
    let _ = std::fs::remove_file(&ref_path);
    println!(
        "reference: memory-mapped pass over a cached {mib} MiB cf32_le file, 1 thread: {:.0} M samples/s",
        reference / 1e6
    );
    println!("| file | size | plain read (M samples/s) | read_into, 1 thread (M samples/s) | read_into per CPU-second (M samples) | read_into / mmap cf32 pass | info, {} threads (M samples/s) | SHA-256 of the file, 1 thread (MB/s) |", rayon::current_num_threads());
    println!("|---|---|---|---|---|---|---|---|");
    for format in formats {
        let path = dir.join(format!("iqaudit-bench.{}", format.name()));
        fill(&path, mib << 20, format);
        let bps = format.bytes_per_sample() as f64;
        plain_read(&path); // warm the page cache
                           // Best of three for every figure: the machine may be shared.
        let best = |f: &dyn Fn() -> f64| (0..3).map(|_| f()).fold(0.0f64, f64::max);
        let read = best(&|| plain_read(&path)) / bps;
        let opts = OpenOptions {
            format: Some(format),
            ..OpenOptions::default()
        };
        let cap = Capture::open(&path, &opts).unwrap();
        convert(&cap); // fault the map in
        let conv = best(&|| convert(&cap));
        // The same conversion timed in CPU time of this thread (per core).
        let conv_cpu = best(&|| {
            let c0 = thread_cpu_seconds();
            let w = convert(&cap);
            let wall = cap.len() as f64 / w;
            let cpu = thread_cpu_seconds() - c0;
            cap.len() as f64 / if cpu > 0.0 { cpu } else { wall }
        });
        let sha = best(&|| {
            let t = Instant::now();
            std::hint::black_box(iqaudit::report::provenance::sha256_file(&path).unwrap());
            (cap.len() as f64 * bps) / t.elapsed().as_secs_f64()
        });
        let so = StatsOptions::default();
        let info = best(&|| {
            let t = Instant::now();
            let st = capture_stats(&cap, &so, &|_| {}).unwrap();
            std::hint::black_box(info_report(&cap, &st, &so));
            cap.len() as f64 / t.elapsed().as_secs_f64()
        });
        println!(
            "| {} | {} MiB | {:.0} | {:.0} | {:.0} | {:.0} % | {:.0} | {:.0} |",
            format.name(),
            mib,
            read / 1e6,
            conv / 1e6,
            conv_cpu / 1e6,
            100.0 * conv / reference,
            info / 1e6,
            sha / 1e6
        );
        drop(cap);
        let _ = std::fs::remove_file(&path);
    }
}
