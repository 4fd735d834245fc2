//! `analyse` holds bounded memory whatever the capture size and burst count.
//!
//! The design bounds checked here (no timing, no process-wide RSS figure that
//! other tests running beside could disturb):
//!
//! * plot traces (and the 129-point channel response) are kept only for the
//!   traced set — the first K bursts and the K worst by RMS EVM, ties to the
//!   lower index — so their number is at most 2K; the selection is checked
//!   against a sort of the report's own per-burst EVMs (the slow twin of the
//!   streaming selection) and is identical for 1 and 4 threads, also across the
//!   batch boundary (`analyse::BURST_BATCH`);
//! * `recheck` reproduces a report made with a non-default K, and `--plots`
//!   draws exactly the traced bursts;
//! * reading a memory-mapped capture from end to end leaves few of its pages
//!   mapped in the process (the mapping's own `Rss` in /proc/self/smaps, which
//!   no other test can change).
//!
//! Captures come from `iqaudit synth` with the end-to-end benchmark profile.

use std::path::{Path, PathBuf};

use iqaudit::analyse::{analyse_capture, AnalyseOptions, BURST_BATCH, MAX_TRACED_BURSTS};
use iqaudit::report::schema::{Report, ERROR_RUNS_KEPT};
use iqaudit::{load_profile, Capture, Cf32, OpenOptions, SampleFormat};

use crate::util::{iqaudit, stderr_of, tempdir};

fn e2e_profile() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("benches/e2e/profile.json")
}

/// A dense capture with `bursts` bursts (16-QAM, 1024-symbol payload).
fn dense_capture(dir: &Path, bursts: usize) -> PathBuf {
    let cap = dir.join("dense.cf32");
    let out = iqaudit()
        .args(["synth", "--profile"])
        .arg(e2e_profile())
        .arg("--out")
        .arg(&cap)
        .args(["--bursts", &bursts.to_string()])
        .args(["--gap", "200:400", "--channel", "1.0,0.4-0.2j,0.15"])
        .args(["--esn0-db", "24", "--seed", "11", "--no-sigmf"])
        .output()
        .unwrap();
    assert!(out.status.success(), "synth: {}", stderr_of(&out));
    cap
}

fn analyse_with_threads(cap: &Path, k: usize, threads: usize) -> Report {
    let profile = load_profile(&e2e_profile()).unwrap();
    let opts = AnalyseOptions {
        traced_bursts: Some(k),
        ..AnalyseOptions::default()
    };
    rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .unwrap()
        .install(|| analyse_capture(cap, &profile, &opts))
        .unwrap()
}

/// The slow twin of the streaming selection: sort every burst by (EVM
/// descending, index ascending), take K, add the first K. (Rule as documented
/// in docs/report.md; the sort is std's, the ordering common practice.)
fn expected_traced(r: &Report, k: usize) -> Vec<usize> {
    let mut by_badness: Vec<(f64, usize)> = r
        .bursts
        .iter()
        .map(|b| (b.metrics.evm_rms_percent, b.index))
        .collect();
    by_badness.sort_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1)));
    let mut set: std::collections::BTreeSet<usize> =
        by_badness.iter().take(k).map(|&(_, i)| i).collect();
    set.extend(0..k.min(r.bursts.len()));
    set.into_iter().collect()
}

fn traced(r: &Report) -> Vec<usize> {
    r.bursts
        .iter()
        .filter(|b| b.trace.is_some())
        .map(|b| b.index)
        .collect()
}

#[test]
fn a_capture_with_more_bursts_than_a_batch_keeps_traces_for_the_first_k_and_the_k_worst_only_for_any_thread_count(
) {
    let dir = tempdir();
    let n = BURST_BATCH + 44;
    let cap = dense_capture(dir.path(), n);
    let k = 5;
    let one = analyse_with_threads(&cap, k, 1);
    let four = analyse_with_threads(&cap, k, 4);
    // Same figures and the same selection whatever the thread count (product
    // contract: results identical for any --jobs).
    assert_eq!(one, four);
    // synth wrote n bursts (its truth file); all are found at 24 dB.
    assert_eq!(one.bursts.len(), n);
    let kept = traced(&one);
    assert!(kept.len() <= 2 * k, "{} traces kept", kept.len());
    assert_eq!(kept, expected_traced(&one, k));
    assert_eq!(one.provenance.traced_bursts, k);
    for b in &one.bursts {
        // The response is plot data too: present exactly with the trace.
        assert_eq!(b.trace.is_some(), b.channel.response_db.is_some());
        assert!(b.metrics.error_runs.len() <= ERROR_RUNS_KEPT);
        // The histogram covers every run, the list at most the cap.
        assert!(b.metrics.error_run_count() >= b.metrics.error_runs.len() as u64);
    }
}

#[test]
fn k_zero_keeps_no_trace_and_the_summary_is_unchanged() {
    let dir = tempdir();
    let cap = dense_capture(dir.path(), 12);
    let none = analyse_with_threads(&cap, 0, 2);
    let all = analyse_with_threads(&cap, 12, 2);
    assert!(traced(&none).is_empty());
    // K = 12 bursts: the first K are all of them.
    assert_eq!(traced(&all), (0..12).collect::<Vec<_>>());
    // The traces are plot data only: every figure of merit is the same.
    assert_eq!(none.summary, all.summary);
    assert_eq!(none.verdict, all.verdict);
    for (a, b) in none.bursts.iter().zip(&all.bursts) {
        assert_eq!(a.metrics, b.metrics);
        assert_eq!(a.channel.taps, b.channel.taps);
    }
}

#[test]
fn recheck_reproduces_a_report_made_with_traced_bursts_and_plots_draw_only_the_traced_bursts() {
    let dir = tempdir();
    let cap = dense_capture(dir.path(), 20);
    let report = dir.path().join("r.json");
    let plots = dir.path().join("plots");
    let out = iqaudit()
        .arg("analyse")
        .arg(&cap)
        .arg("--profile")
        .arg(e2e_profile())
        .args(["--traced-bursts", "3", "--report"])
        .arg(&report)
        .arg("--plots")
        .arg(&plots)
        .output()
        .unwrap();
    assert!(
        matches!(out.status.code(), Some(0) | Some(1)),
        "{}",
        stderr_of(&out)
    );
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.contains("plot traces kept for"), "{text}");
    let r: Report = serde_json::from_slice(&std::fs::read(&report).unwrap()).unwrap();
    let kept = traced(&r);
    assert_eq!(kept, expected_traced(&r, 3));
    let mut drawn: Vec<usize> = std::fs::read_dir(&plots)
        .unwrap()
        .filter_map(|e| {
            let name = e.unwrap().file_name().into_string().unwrap();
            name.strip_prefix("burst-")?
                .strip_suffix("-constellation.svg")?
                .parse()
                .ok()
        })
        .collect();
    drawn.sort_unstable();
    assert_eq!(drawn, kept);
    let again = iqaudit().arg("recheck").arg(&report).output().unwrap();
    assert_eq!(again.status.code(), Some(0), "{}", stderr_of(&again));
}

#[test]
fn a_traced_burst_count_above_the_cap_is_refused() {
    let dir = tempdir();
    let cap = dense_capture(dir.path(), 2);
    let profile = load_profile(&e2e_profile()).unwrap();
    let opts = AnalyseOptions {
        traced_bursts: Some(MAX_TRACED_BURSTS + 1),
        ..AnalyseOptions::default()
    };
    let err = analyse_capture(&cap, &profile, &opts).unwrap_err();
    assert!(err.to_string().contains("--traced-bursts"), "{err}");
}

/// `Rss` of the mapping in /proc/self/smaps that contains `addr`, KiB
/// (proc(5): each mapping's header line is `lo-hi perms …`, followed by fields
/// such as `Rss:       N kB` — from memory).
#[cfg(target_os = "linux")]
fn mapping_rss_kib(addr: usize) -> Option<u64> {
    let smaps = std::fs::read_to_string("/proc/self/smaps").ok()?;
    let mut inside = false;
    for line in smaps.lines() {
        let first = line.split_whitespace().next().unwrap_or("");
        if let Some((lo, hi)) = first.split_once('-') {
            if let (Ok(lo), Ok(hi)) = (usize::from_str_radix(lo, 16), usize::from_str_radix(hi, 16))
            {
                inside = (lo..hi).contains(&addr);
                continue;
            }
        }
        if inside {
            if let Some(v) = line.strip_prefix("Rss:") {
                return v.split_whitespace().next()?.parse().ok();
            }
        }
    }
    None
}

#[test]
#[cfg(target_os = "linux")]
fn reading_a_mapped_capture_end_to_end_leaves_few_of_its_pages_mapped() {
    let dir = tempdir();
    let p = dir.path().join("ramp.cf32");
    let samples = 4usize << 20; // 32 MiB of cf32
    let mut bytes = Vec::with_capacity(samples * 8);
    for i in 0..samples {
        bytes.extend_from_slice(&(i as f32).to_le_bytes());
        bytes.extend_from_slice(&(-(i as f32)).to_le_bytes());
    }
    std::fs::write(&p, &bytes).unwrap();
    let opts = OpenOptions {
        format: Some(SampleFormat::Cf32Le),
        ..OpenOptions::default()
    };
    let c = Capture::open_mapped(&p, &opts).unwrap();
    assert_eq!(c.access_path(), "mmap");
    let addr = c.as_cf32_slice().unwrap().as_ptr() as usize;
    let mut buf = vec![Cf32::new(0.0, 0.0); 1 << 17];
    let mut start = 0;
    while start < samples {
        let n = buf.len().min(samples - start);
        c.read_into(start, &mut buf[..n]).unwrap();
        // The values survive the release: compare with the bytes as written
        // (f32::from_le_bytes, independent of the decoder).
        for (j, s) in buf[..n].iter().enumerate() {
            let o = (start + j) * 8;
            let re = f32::from_le_bytes(bytes[o..o + 4].try_into().unwrap());
            let im = f32::from_le_bytes(bytes[o + 4..o + 8].try_into().unwrap());
            assert_eq!((s.re, s.im), (re, im), "sample {}", start + j);
        }
        start += n;
    }
    // Read again a range already released: same bytes (the page cache keeps them).
    c.read_into(12_345, &mut buf[..1000]).unwrap();
    assert_eq!(buf[0], Cf32::new(12_345.0, -12_345.0));
    // Small reads (burst analysis) are released in bulk by their caller.
    c.release_samples(12_345, 13_345);
    let rss = mapping_rss_kib(addr).expect("the capture's mapping in /proc/self/smaps");
    // Without the release the mapping would hold all 32 768 KiB (the file was
    // just written, so every page is cached and every read maps it); with it,
    // at most the release windows around the last read remain.
    assert!(rss <= 1024, "{rss} KiB of the 32 MiB capture still mapped");
}
