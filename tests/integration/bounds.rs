//! The report's theory bounds and the SER limit judged on its upper bound (#19).

use crate::util::{analyse_json, iqaudit, stderr_of, tempdir};
use serde_json::Value;
use std::path::{Path, PathBuf};

fn profile(dir: &Path, upper: Option<bool>) -> PathBuf {
    let out = iqaudit()
        .args(["profile", "new", "--modulation", "qpsk"])
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", stderr_of(&out));
    let mut p: Value = serde_json::from_slice(&out.stdout).unwrap();
    p["capture"]["format"] = "cf32_le".into();
    p["limits"]["ser_max"] = 1e-3.into();
    if let Some(u) = upper {
        p["limits"]["ser_max_on_upper_bound"] = u.into();
    }
    let path = dir.join(format!("p-{upper:?}.json"));
    std::fs::write(&path, serde_json::to_vec_pretty(&p).unwrap()).unwrap();
    path
}

fn analyse(dir: &Path, prof: &Path, extra: &[&str]) -> (Value, Option<i32>) {
    let cap = dir.join("b.cf32");
    let out = iqaudit()
        .args(["synth", "--profile"])
        .arg(prof)
        .args(["--bursts", "1", "--seed", "4", "--no-sigmf", "--out"])
        .arg(&cap)
        .args(extra)
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", stderr_of(&out));
    let (rep, code, _) = analyse_json(prof, &cap, &[]);
    (rep, code)
}

#[test]
fn a_flat_channel_has_every_bound_at_the_matched_filter_bound_and_a_dispersive_one_orders_them() {
    // Without ISI the matched-filter bound, Salz's MMSE-DFE (unbiased), the
    // ZF-DFE and the linear MMSE all equal the input SNR times |h|² (Salz 1973;
    // common practice). On Proakis' channel B [0.407, 0.815, 0.407] (Proakis,
    // Digital Communications, §10.1) they order MFB ≥ MMSE-DFE ≥ ZF-DFE and
    // MMSE-DFE ≥ linear MMSE, and no equaliser beats the MFB.
    let dir = tempdir();
    let p = profile(dir.path(), None);
    let (rep, _) = analyse(dir.path(), &p, &["--esn0-db", "30"]);
    let t = &rep["bursts"][0]["equaliser"]["theory"];
    let f = |k: &str| t[k].as_f64().unwrap();
    let mfb = f("matched_filter_bound_db");
    for k in ["mmse_dfe_unbiased_db", "zf_dfe_db", "mmse_le_unbiased_db"] {
        // The fitted channel carries estimation noise in its small taps; 0.05 dB.
        assert!((f(k) - mfb).abs() < 0.05, "{k}: {} against {mfb}", f(k));
    }
    let (rep, _) = analyse(
        dir.path(),
        &p,
        &["--esn0-db", "30", "--channel", "0.407,0.815,0.407"],
    );
    let b = &rep["bursts"][0];
    let t = &b["equaliser"]["theory"];
    let f = |k: &str| t[k].as_f64().unwrap_or(f64::NEG_INFINITY);
    assert!(f("matched_filter_bound_db") >= f("mmse_dfe_unbiased_db"));
    assert!(f("mmse_dfe_unbiased_db") >= f("zf_dfe_db"));
    assert!(f("mmse_dfe_unbiased_db") >= f("mmse_le_unbiased_db"));
    let achieved = b["equaliser"]["achieved_snr_db"].as_f64().unwrap();
    assert!(
        achieved <= f("matched_filter_bound_db") + 0.5,
        "{achieved} against {t}"
    );
}

#[test]
fn ser_max_on_the_upper_bound_fails_an_error_free_burst_too_short_to_show_it() {
    // 0 errors in 1024 symbols: the 95 % Clopper–Pearson upper bound is
    // 1 − 0.025^(1/1024) = 3.6e-3 > 1e-3 (closed form), so the limit passes on
    // the point estimate and fails on the upper bound.
    let dir = tempdir();
    for (upper, want) in [(None, Some(0)), (Some(true), Some(1))] {
        let p = profile(dir.path(), upper);
        let (rep, code) = analyse(dir.path(), &p, &["--esn0-db", "30"]);
        assert_eq!(rep["summary"]["ser"]["errors"], 0);
        let hi = rep["summary"]["ser_run_aware"]["ci_high"].as_f64().unwrap();
        assert!((hi - 3.596e-3).abs() < 1e-5, "{hi}");
        assert_eq!(code, want, "upper {upper:?}: {}", rep["verdict"]);
    }
}
