//! A 2 GiB capture is processed in bounded memory.
//!
//! The design bound: `info` works through fixed chunks (`StatsOptions::chunk_samples`,
//! independent of the file size) and a fixed number of Welch segments; the file
//! itself is only memory-mapped. The check: run `iqaudit info` on a 2 GiB sparse
//! cf32 file as a child process and watch its anonymous (heap) memory, `RssAnon`
//! in /proc/PID/status, while it runs. File-backed pages of the map are page
//! cache, shared and reclaimable, so VmHWM (which includes them) is not the
//! right figure. Sampling can only miss a high value, never invent one, so the
//! check cannot fail spuriously. Linux only.

use std::time::Duration;

use iqaudit::capture::stats::StatsOptions;

use crate::util::tempdir;

fn rss_anon_kib(pid: u32) -> Option<u64> {
    let s = std::fs::read_to_string(format!("/proc/{pid}/status")).ok()?;
    s.lines()
        .find(|l| l.starts_with("RssAnon:"))?
        .split_whitespace()
        .nth(1)?
        .parse()
        .ok()
}

#[test]
#[cfg(target_os = "linux")]
fn a_2_gib_sparse_cf32_capture_is_analysed_in_bounded_memory() {
    let dir = tempdir();
    let p = dir.path().join("sparse.cf32");
    let len: u64 = 2 << 30;
    std::fs::File::create(&p).unwrap().set_len(len).unwrap();
    let opts = StatsOptions::default();
    // Design bound: the per-worker buffer does not grow with the file.
    assert!(opts.chunk_samples * 8 <= 1 << 20);
    let mut cmd = std::process::Command::new(assert_cmd::cargo::cargo_bin("iqaudit"));
    let child = cmd
        .arg("info")
        .arg(&p)
        .arg("--json")
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    let pid = child.id();
    let watcher = std::thread::spawn(move || {
        let mut peak = 0;
        while let Some(kib) = rss_anon_kib(pid) {
            peak = peak.max(kib);
            std::thread::sleep(Duration::from_millis(5));
        }
        peak
    });
    let out = child.wait_with_output().unwrap();
    let peak_kib = watcher.join().unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let j: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(j["samples"], len / 8);
    assert_eq!(j["mean_power_dbfs"], serde_json::Value::Null); // all zeros
    assert_eq!(j["psd_segments_averaged"], opts.welch_max_segments);
    // 2 GiB file vs a 128 MiB heap bound (actual use is a few MiB).
    assert!(
        peak_kib < 128 * 1024,
        "anonymous memory peaked at {peak_kib} KiB"
    );
}
