//! The sampling instant and tap window chosen for the equaliser (#15, item 2), end to
//! end on `synth --seed` captures: on asymmetric channels the burst is timed where the
//! profile's tap window holds the sampled response, not at the correlation peak; the
//! output SNR then meets the finite-length MMSE-DFE theory; energy left outside the
//! window is reported.

use std::path::Path;

use nalgebra::{DMatrix, DVector};
use num_complex::Complex64 as C;
use serde_json::Value;

use crate::util::{iqaudit, stderr_of, tempdir};

/// `iqaudit profile new --modulation 16qam` with `capture.format = cf32_le`, edited.
fn profile(dir: &Path, name: &str, edit: impl Fn(&mut Value)) -> std::path::PathBuf {
    let out = iqaudit()
        .args(["profile", "new", "--modulation", "16qam"])
        .output()
        .unwrap();
    assert!(out.status.success(), "profile new: {}", stderr_of(&out));
    let mut v: Value = serde_json::from_slice(&out.stdout).unwrap();
    v["capture"]["format"] = Value::from("cf32_le");
    edit(&mut v);
    let p = dir.join(format!("{name}.json"));
    std::fs::write(&p, serde_json::to_string_pretty(&v).unwrap()).unwrap();
    p
}

/// Synthesise and analyse; returns the bursts of the report.
fn bursts(dir: &Path, p: &Path, name: &str, args: &[&str]) -> Vec<Value> {
    let cap = dir.join(name);
    let out = iqaudit()
        .args(["synth", "--profile"])
        .arg(p)
        .arg("--out")
        .arg(&cap)
        .args(args)
        .output()
        .unwrap();
    assert!(out.status.success(), "synth: {}", stderr_of(&out));
    let out = iqaudit()
        .arg("analyse")
        .arg(&cap)
        .arg("--profile")
        .arg(p)
        .arg("--json")
        .output()
        .unwrap();
    let report: Value = serde_json::from_slice(&out.stdout)
        .unwrap_or_else(|e| panic!("no JSON ({e}): {}", stderr_of(&out)));
    report["bursts"].as_array().unwrap().clone()
}

fn codes(b: &Value) -> Vec<String> {
    b["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|w| w["code"].as_str().unwrap().to_string())
        .collect()
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    let n = v.len();
    if n % 2 == 1 {
        v[n / 2]
    } else {
        0.5 * (v[n / 2 - 1] + v[n / 2])
    }
}

/// Root-raised-cosine pulse at `t` symbols, closed form (Proakis, Digital
/// Communications, the square-root raised-cosine spectrum's impulse response; the
/// `|4βt| = 1` limit from the same formula by l'Hôpital).
fn rrc(beta: f64, t: f64) -> f64 {
    use std::f64::consts::PI;
    if t.abs() < 1e-12 {
        1.0 - beta + 4.0 * beta / PI
    } else if ((4.0 * beta * t).abs() - 1.0).abs() < 1e-9 {
        beta / 2f64.sqrt()
            * ((1.0 + 2.0 / PI) * (PI / (4.0 * beta)).sin()
                + (1.0 - 2.0 / PI) * (PI / (4.0 * beta)).cos())
    } else {
        ((PI * t * (1.0 - beta)).sin() + 4.0 * beta * t * (PI * t * (1.0 + beta)).cos())
            / (PI * t * (1.0 - (4.0 * beta * t).powi(2)))
    }
}

/// The transmit and receive RRC (span `span` symbols, `sps` samples per symbol, unit
/// energy, truncated) convolved and sampled at the symbol instants: the noise-free
/// symbol-spaced response of the link, centre at index `(len − 1)/2`.
fn sampled_rc(beta: f64, span: usize, sps: usize) -> Vec<f64> {
    let half = (span * sps / 2) as i64;
    let p: Vec<f64> = (-half..=half)
        .map(|i| rrc(beta, i as f64 / sps as f64))
        .collect();
    let e: f64 = p.iter().map(|v| v * v).sum();
    let p: Vec<f64> = p.iter().map(|v| v / e.sqrt()).collect();
    let mut g = vec![0.0; 2 * p.len() - 1];
    for (i, a) in p.iter().enumerate() {
        for (j, b) in p.iter().enumerate() {
            g[i + j] += a * b;
        }
    }
    let c = (g.len() - 1) / 2;
    let first = c % sps;
    g[first..].iter().step_by(sps).copied().collect()
}

/// Finite-length MMSE-DFE unbiased output SNR (dB) for symbol-spaced channel `h`,
/// unit-power symbols, noise variance `s2`, `nf` feedforward and `nb` feedback taps,
/// best decision delay: the linear MMSE estimate of `x[k−Δ]` from the `nf` received
/// samples and the `nb` past symbols fed back (assumed right), by its normal
/// equations solved densely (Al-Dhahir & Cioffi, IEEE Trans. Commun. 1995: the
/// finite-length MMSE-DFE), `SNR = 1/MSE − 1`.
fn finite_mmse_dfe_db(h: &[C], s2: f64, nf: usize, nb: usize) -> f64 {
    let l = h.len();
    let ncol = nf + l - 1;
    let mut best = f64::NEG_INFINITY;
    for d in 0..ncol {
        if d + nb >= ncol {
            continue;
        }
        let rows = nf + nb;
        let a = DMatrix::<C>::from_fn(rows, ncol, |r, c| {
            if r < nf {
                if c >= r && c < r + l {
                    h[c - r]
                } else {
                    C::new(0.0, 0.0)
                }
            } else if c == d + 1 + (r - nf) {
                C::new(1.0, 0.0)
            } else {
                C::new(0.0, 0.0)
            }
        });
        let mut cov = &a * a.adjoint();
        for i in 0..nf {
            cov[(i, i)] += C::new(s2, 0.0);
        }
        let r = DVector::<C>::from_fn(rows, |i, _| a[(i, d)]);
        let Some(w) = cov.lu().solve(&r) else {
            continue;
        };
        let mse = 1.0 - r.dotc(&w).re;
        best = best.max(1.0 / mse - 1.0);
    }
    10.0 * best.log10()
}

/// Salz's infinite-length MMSE-DFE unbiased SNR (dB): `exp(mean ln(1 + SNR·|H(ω)|²)) − 1`
/// (Salz, BSTJ 52(8), 1973), the mean over 4096 equally spaced frequencies (direct DFT).
fn salz_db(h: &[C], snr: f64) -> f64 {
    let n = 4096;
    let m: f64 = (0..n)
        .map(|k| {
            let w = std::f64::consts::TAU * k as f64 / n as f64;
            let hw: C = h
                .iter()
                .enumerate()
                .map(|(i, t)| t * C::from_polar(1.0, -w * i as f64))
                .sum();
            (1.0 + snr * hw.norm_sqr()).ln()
        })
        .sum::<f64>()
        / n as f64;
    10.0 * (m.exp() - 1.0).log10()
}

fn convolve(h: &[C], g: &[f64]) -> Vec<C> {
    let mut out = vec![C::new(0.0, 0.0); h.len() + g.len() - 1];
    for (i, a) in h.iter().enumerate() {
        for (j, b) in g.iter().enumerate() {
            out[i + j] += a * b;
        }
    }
    out
}

#[test]
fn on_asymmetric_channels_the_output_snr_meets_the_finite_length_theory() {
    // Acceptance of #15 item 2: on [1, 0.5, 0.2] and [1, 0.6−0.2j, 0.3] at 25 and 30 dB
    // with the example profile's window (1 pre, 3 post; Nf 8, Nb 3) the median
    // achieved output SNR (MER against the known payload) is within 0.5 dB of the
    // finite-length MMSE-DFE theory (Al-Dhahir & Cioffi 1995, computed here densely)
    // for the true link sampled at the symbol instants — the channel convolved with
    // the example profile's truncated RRC pair (β 0.25, 12 symbols, Proakis' closed
    // form) — and within 1 dB of Salz's infinite-length bound (Salz 1973) for the
    // channel. Before the instant was chosen for the window (timing on the
    // correlation peak) [1, 0.5, 0.2] reached 21.8 dB at 25 dB and 23.7 dB at 30 dB.
    // No burst of these clean captures warns of energy outside the window or of a
    // weak main tap.
    let dir = tempdir();
    let p = profile(dir.path(), "p", |_| {});
    let rc = sampled_rc(0.25, 12, 4);
    let channels: [(&str, Vec<C>); 2] = [
        (
            "1,0.5,0.2",
            vec![C::new(1.0, 0.0), C::new(0.5, 0.0), C::new(0.2, 0.0)],
        ),
        (
            "1,0.6-0.2j,0.3",
            vec![C::new(1.0, 0.0), C::new(0.6, -0.2), C::new(0.3, 0.0)],
        ),
    ];
    for (spec, h) in &channels {
        let link = convolve(h, &rc);
        for esn0 in [25.0f64, 30.0] {
            let s2 = 10f64.powf(-esn0 / 10.0);
            let b = bursts(
                dir.path(),
                &p,
                "c.cf32",
                &[
                    "--esn0-db",
                    &esn0.to_string(),
                    "--bursts",
                    "40",
                    "--seed",
                    "11",
                    "--channel",
                    spec,
                ],
            );
            assert!(b.len() >= 38, "{spec} {esn0}: {} bursts", b.len());
            let mer = median(
                b.iter()
                    .map(|x| x["metrics"]["mer_db"].as_f64().unwrap())
                    .collect(),
            );
            let theory = finite_mmse_dfe_db(&link, s2, 8, 3);
            let salz = salz_db(h, 1.0 / s2);
            assert!(
                mer > theory - 0.5 && mer > salz - 1.0,
                "{spec} at {esn0} dB: median MER {mer:.2} dB, finite-length theory {theory:.2} dB, Salz {salz:.2} dB"
            );
            for x in &b {
                let c = codes(x);
                assert!(
                    !c.iter()
                        .any(|c| c == "energy-outside-window" || c == "main-tap-weak"),
                    "{spec} at {esn0} dB, burst {}: {c:?}",
                    x["index"]
                );
            }
        }
    }
}

#[test]
fn a_noise_free_capture_reaches_the_pulse_truncation_floor() {
    // Noise-free, [1, 0.5, 0.2], example profile: the only impairment left is the ISI
    // of the truncated RRC pair (12 symbols, β 0.25), whose symbol-spaced response
    // (Proakis' closed form, convolved here) has main²/ISI = 38.3 dB before any
    // equalisation; the MER must reach that floor (less 0.5 dB), far above the 25 dB
    // that timing on the correlation peak gave (#15).
    let rc = sampled_rc(0.25, 12, 4);
    let c = (rc.len() - 1) / 2;
    let isi: f64 = rc
        .iter()
        .enumerate()
        .filter(|(i, _)| *i != c)
        .map(|(_, v)| v * v)
        .sum();
    let floor = 10.0 * (rc[c] * rc[c] / isi).log10();
    assert!((floor - 38.3).abs() < 0.1, "floor {floor}");
    let dir = tempdir();
    let p = profile(dir.path(), "p", |_| {});
    let b = bursts(
        dir.path(),
        &p,
        "n.cf32",
        &["--bursts", "8", "--seed", "3", "--channel", "1,0.5,0.2"],
    );
    assert_eq!(b.len(), 8);
    for x in &b {
        let mer = x["metrics"]["mer_db"].as_f64().unwrap();
        assert!(mer > floor - 0.5, "burst {}: MER {mer:.2} dB", x["index"]);
    }
}

#[test]
fn energy_outside_the_window_is_reported_with_its_fraction() {
    // A channel longer than the window ([1, 0.5, 0.4, 0.3] against 1 pre- and 1
    // post-cursor tap) at 30 dB: whatever the instant, the last tap (−10.5 dB, far
    // above the noise) falls outside, so every burst warns and states the fraction
    // (≈ 0.09/1.5 = 6 % of the energy: definition). Clean captures stay silent (the
    // test above).
    let dir = tempdir();
    let p = profile(dir.path(), "p", |v| {
        v["channel_fit"]["post_cursor_taps"] = Value::from(1)
    });
    let b = bursts(
        dir.path(),
        &p,
        "w.cf32",
        &[
            "--esn0-db",
            "30",
            "--bursts",
            "6",
            "--seed",
            "4",
            "--channel",
            "1,0.5,0.4,0.3",
        ],
    );
    assert_eq!(b.len(), 6);
    for x in &b {
        let w: Vec<&Value> = x["warnings"]
            .as_array()
            .unwrap()
            .iter()
            .filter(|w| w["code"] == "energy-outside-window")
            .collect();
        assert_eq!(w.len(), 1, "burst {}: {:?}", x["index"], x["warnings"]);
        let msg = w[0]["message"].as_str().unwrap();
        let pct: f64 = msg.split(' ').next().unwrap().parse().unwrap();
        assert!(pct > 2.0 && pct < 15.0, "{msg}");
        // The report gives both instants.
        let peak = x["correlation_peak_samples"].as_f64().unwrap();
        let chosen =
            x["start_sample"].as_f64().unwrap() + x["timing_frac_samples"].as_f64().unwrap();
        assert!((peak - chosen).abs() <= 6.5, "peak {peak} chosen {chosen}");
    }
}
