//! Tests of the synthesiser against definitions: Es/N0 at the matched-filter
//! output, the truth file against the samples, the channel's main-tap
//! convention, the IQ-imbalance model and determinism.

use super::*;
use crate::profile::{example_profile, ExampleOptions, PayloadPosition};

/// The crane example profile with a given payload length and position.
fn profile(position: PayloadPosition, before: usize, after: usize, known: bool) -> ResolvedProfile {
    let mut p = example_profile(&ExampleOptions::default());
    p.payload.position = Some(position);
    match position {
        PayloadPosition::Both => {
            p.payload.length_symbols = None;
            p.payload.length_before_symbols = Some(before);
            p.payload.length_after_symbols = Some(after);
        }
        PayloadPosition::After => p.payload.length_symbols = Some(after),
        PayloadPosition::Before => p.payload.length_symbols = Some(before),
    }
    if !known {
        p.payload.known = None;
        p.limits.ser_max = None;
    }
    p.resolve().unwrap()
}

/// Slow reference matched filter: correlate with the unit-energy RRC pulse
/// centred on the (fractional) instant `t`, directly from the closed form.
fn mf_at(r: &[Cf32], t: f64, sps: usize, beta: f64, span: usize) -> Cf64 {
    let half = (span * sps).div_ceil(2) as f64;
    let energy: f64 = (0..=2 * (span * sps).div_ceil(2))
        .map(|m| crate::signal::rrc_impulse((m as f64 - half) / sps as f64, beta).powi(2))
        .sum();
    let g = 1.0 / energy.sqrt();
    let lo = (t - half).ceil().max(0.0) as usize;
    let hi = ((t + half).floor() as usize).min(r.len() - 1);
    (lo..=hi)
        .map(|n| {
            let p = g * crate::signal::rrc_impulse((n as f64 - t) / sps as f64, beta);
            Cf64::new(r[n].re as f64, r[n].im as f64) * p
        })
        .sum()
}

/// All symbols of a burst in order, from the truth (and profile for rules).
fn burst_symbols(truth: &GroundTruth, b: &TruthBurst) -> Vec<Cf64> {
    let prof = &truth.profile;
    let c = crate::signal::Constellation::new(b.payload.modulation);
    let pts = c.points();
    let lab = |l: &Option<Vec<u16>>| -> Vec<Cf32> {
        l.as_ref()
            .unwrap()
            .iter()
            .map(|&x| pts[x as usize])
            .collect()
    };
    let (before, after) = match prof.payload_symbols().unwrap() {
        Some(k) => (k.before, k.after),
        None => (lab(&b.payload.labels_before), lab(&b.payload.labels_after)),
    };
    let train = prof.training_symbols().unwrap();
    before
        .iter()
        .chain(&train)
        .chain(&after)
        .map(|c| Cf64::new(c.re as f64, c.im as f64))
        .collect()
}

#[test]
fn parse_taps_reads_real_imaginary_and_complex_forms() {
    let t = parse_taps("0.1, 1.0,0.4-0.2j, -0.3+0.5i, 2j, -j, 1e-2-1e-3j").unwrap();
    let want = [
        (0.1, 0.0),
        (1.0, 0.0),
        (0.4, -0.2),
        (-0.3, 0.5),
        (0.0, 2.0),
        (0.0, -1.0),
        (1e-2, -1e-3),
    ];
    assert_eq!(t.len(), want.len());
    for (a, (re, im)) in t.iter().zip(want) {
        assert_eq!((a.re, a.im), (re, im));
    }
    for badtext in ["", "1,,2", "0.4-0.2", "abc", "1+2jj", "nan", "0,0"] {
        assert!(parse_taps(badtext).is_err(), "{badtext:?} accepted");
    }
}

#[test]
fn esn0_measured_at_the_matched_filter_output_matches_the_request_within_a_tenth_of_a_db() {
    // Source: definition of Es/N0 (common practice): with unit-power symbols and
    // a unit-energy matched filter, Es/N0 = E|x|² / E|n|² at the symbol instants
    // (crate doc; REFERENCE-VALUES conventions). 1e5 symbols: the estimate's
    // relative standard deviation is 1/sqrt(1e5) = 0.3 % (0.014 dB), and the
    // span-32 pulse keeps truncation ISI below -60 dB, so 0.1 dB is a real test.
    for esn0_db in [10.0, 20.0] {
        let mut p = profile(PayloadPosition::After, 0, 100_000, false);
        p.pulse.span_symbols = 32;
        let mut spec = SynthSpec::new(p);
        spec.seed = 7;
        spec.esn0_db = Some(esn0_db);
        spec.timing = TimingOffset::Random;
        let out = run(&spec).unwrap();
        let b = &out.truth.bursts[0];
        let syms = burst_symbols(&out.truth, b);
        let instant = b.start_sample as f64 + b.timing_frac;
        let (mut err, mut sig_p) = (0.0, 0.0);
        for (k, x) in syms.iter().enumerate() {
            let z = mf_at(&out.samples, instant + (k * 4) as f64, 4, 0.25, 32) / b.amplitude;
            err += (z - x).norm_sqr();
            sig_p += x.norm_sqr();
        }
        let measured = 10.0 * (sig_p / err).log10();
        assert!(
            (measured - esn0_db).abs() < 0.1,
            "requested {esn0_db} dB, measured {measured:.3} dB"
        );
    }
}

#[test]
fn truth_file_agrees_with_the_noise_free_capture() {
    // Re-derive every symbol at the stated start_sample + timing_frac by
    // matched filtering, after removing the stated CFO and phase, and compare
    // with the truth's symbols. Tolerance 2e-3 (≈ −54 dB): what remains is the
    // ISI of the RRC truncated at ±16 symbols (span 32; at span 12 the
    // truncation ISI alone reaches ~0.03 for outer 16-QAM points) plus f32
    // rounding; a timing, phase or position error of the truth would give
    // errors of order 0.1 or more.
    let mut p = profile(PayloadPosition::Both, 40, 300, false);
    p.pulse.span_symbols = 32;
    let mut spec = SynthSpec::new(p);
    spec.seed = 3;
    spec.bursts = 3;
    spec.cfo_hz = 1234.5;
    spec.phase_rad = 0.7;
    spec.timing = TimingOffset::Random;
    spec.lead_gap_samples = 500;
    let out = run(&spec).unwrap();
    let fs = out.truth.sample_rate_hz;
    assert_eq!(out.truth.bursts.len(), 3);
    for b in &out.truth.bursts {
        assert!((-0.5..0.5).contains(&b.timing_frac));
        let syms = burst_symbols(&out.truth, b);
        let instant0 = b.start_sample as f64 + b.timing_frac;
        let first = instant0 - (b.payload.before_symbols * 4) as f64;
        let mut worst = 0f64;
        for (k, x) in syms.iter().enumerate() {
            let t = first + (k * 4) as f64;
            // Derotate around the instant: phase(t) = phase_rad + 2π·cfo·(t − instant0)/fs.
            let ph = b.phase_rad + 2.0 * std::f64::consts::PI * b.cfo_hz * (t - instant0) / fs;
            let z = mf_at(&out.samples, t, 4, 0.25, 32) * Cf64::from_polar(1.0, -ph) / b.amplitude;
            worst = worst.max((z - x).norm());
        }
        assert!(
            worst < 2e-3,
            "burst {}: worst symbol error {worst}",
            b.index
        );
    }
}

#[test]
fn symbol_spaced_channel_puts_the_main_tap_at_start_sample_and_pre_cursor_taps_before_it() {
    // Crate convention (src/lib.rs): y[k] = Σ_i h[i]·x[k−i], taps listed
    // h[−P..=Q], main tap at index P. The matched-filter output at symbol k must
    // equal that direct convolution of the truth symbols (slow reference).
    // 4500 symbols: the burst spans several synthesis blocks (BLOCK samples).
    let mut p = profile(PayloadPosition::After, 0, 4500, true);
    p.pulse.span_symbols = 32;
    let mut spec = SynthSpec::new(p);
    let taps = parse_taps("0.2-0.1j,1.0,0.45+0.3j,-0.2").unwrap();
    spec.channel = Some(ChannelSpec {
        taps: taps.clone(),
        main_index: 1,
        spacing: TapSpacing::Symbol,
        drift_hz: 0.0,
    });
    spec.timing = TimingOffset::Fixed(0.25);
    let out = run(&spec).unwrap();
    let b = &out.truth.bursts[0];
    let x = burst_symbols(&out.truth, b);
    let instant = b.start_sample as f64 + b.timing_frac;
    let mut worst = 0f64;
    for k in 0..x.len() {
        let mut want = Cf64::new(0.0, 0.0);
        for (t, h) in taps.iter().enumerate() {
            let i = t as isize - 1; // h[i], i = t − P
            let src = k as isize - i;
            if src >= 0 && (src as usize) < x.len() {
                want += h * x[src as usize];
            }
        }
        let z = mf_at(&out.samples, instant + (k * 4) as f64, 4, 0.25, 32) / b.amplitude;
        worst = worst.max((z - want).norm());
    }
    // Tolerance: truncation ISI as above, times Σ|h| ≈ 2.
    assert!(worst < 4e-3, "worst {worst}");
}

#[test]
fn iq_imbalance_and_dc_follow_the_documented_k1_k2_model() {
    // y = K1·x + K2·x* + dc, K1 = (1 + g·e^{−jφ})/2, K2 = (1 − g·e^{jφ})/2
    // (common receiver IQ-imbalance model). Compared sample by sample with the
    // same capture made without the imbalance; tolerance = f32 rounding.
    let p = profile(PayloadPosition::After, 0, 100, true);
    let mut spec = SynthSpec::new(p);
    spec.esn0_db = Some(25.0);
    spec.seed = 11;
    let clean = run(&spec).unwrap().samples;
    spec.iq_gain_db = 1.0;
    spec.iq_phase_deg = 5.0;
    spec.dc_offset = [0.01, -0.02];
    let skewed = run(&spec).unwrap().samples;
    let g = 10f64.powf(1.0 / 20.0);
    let phi = 5f64.to_radians();
    let k1 = (Cf64::new(1.0, 0.0) + Cf64::from_polar(g, -phi)) / 2.0;
    let k2 = (Cf64::new(1.0, 0.0) - Cf64::from_polar(g, phi)) / 2.0;
    for (a, b) in clean.iter().zip(&skewed) {
        let x = Cf64::new(a.re as f64, a.im as f64);
        let want = k1 * x + k2 * x.conj() + Cf64::new(0.01, -0.02);
        assert!((want - Cf64::new(b.re as f64, b.im as f64)).norm() < 1e-6);
    }
}

#[test]
fn the_level_sets_the_mean_power_of_the_noise_free_burst() {
    // dBFS convention of src/lib.rs: |x|² = 1 is 0 dBFS. Unit-power symbols
    // through a unit-energy pulse at 4 sps give 1/4 per sample before scaling;
    // tolerance 0.1 dB for the burst edges and a finite random payload.
    let p = profile(PayloadPosition::After, 0, 5000, false);
    let mut spec = SynthSpec::new(p);
    spec.level_dbfs = -20.0;
    let out = run(&spec).unwrap();
    let b = &out.truth.bursts[0];
    let s = &out.samples[b.first_sample as usize..b.end_sample as usize];
    let mean: f64 = s.iter().map(|x| x.norm_sqr() as f64).sum::<f64>() / s.len() as f64;
    let db = 10.0 * mean.log10();
    assert!((db + 20.0).abs() < 0.1, "{db}");
}

#[test]
fn same_seed_gives_identical_samples_and_another_seed_does_not() {
    let p = profile(PayloadPosition::After, 0, 300, false);
    let mut spec = SynthSpec::new(p);
    spec.bursts = 2;
    spec.esn0_db = Some(15.0);
    spec.timing = TimingOffset::Random;
    spec.seed = 42;
    let a = run(&spec).unwrap();
    let b = run(&spec).unwrap();
    assert!(a
        .samples
        .iter()
        .zip(&b.samples)
        .all(|(x, y)| x.re.to_bits() == y.re.to_bits() && x.im.to_bits() == y.im.to_bits()));
    assert_eq!(a.truth, b.truth);
    spec.seed = 43;
    let c = run(&spec).unwrap();
    assert_ne!(
        a.truth.bursts[0].payload.labels_after,
        c.truth.bursts[0].payload.labels_after
    );
}

#[test]
fn bad_options_are_rejected_with_the_option_named() {
    let p = profile(PayloadPosition::After, 0, 30, true);
    let mut spec = SynthSpec::new(p.clone());
    spec.bursts = 0;
    assert!(run(&spec).unwrap_err().to_string().starts_with("--bursts"));
    let mut spec = SynthSpec::new(p.clone());
    spec.timing = TimingOffset::Fixed(0.5);
    assert!(run(&spec)
        .unwrap_err()
        .to_string()
        .starts_with("--timing-frac"));
    let mut spec = SynthSpec::new(p.clone());
    spec.channel = Some(ChannelSpec {
        taps: vec![Cf64::new(1.0, 0.0)],
        main_index: 1,
        spacing: TapSpacing::Sample,
        drift_hz: 0.0,
    });
    assert!(run(&spec)
        .unwrap_err()
        .to_string()
        .starts_with("--channel-main"));
    let mut spec = SynthSpec::new(p);
    spec.esn0_db = Some(f64::NAN);
    assert!(run(&spec).unwrap_err().to_string().starts_with("--esn0-db"));
}

#[test]
fn zero_offset_burst_equals_signal_shape_of_the_truth_symbols() {
    // The synthesiser's own fractional-delay pulse must reduce, at timing 0,
    // to signal::shape with signal::rrc_taps (the crate's reference shaping).
    // Tolerance 1e-5: f32 taps in shape versus f64 here, relative to a peak of ~1.
    // 5000 symbols = 20 000+ samples: more than one synthesis block (BLOCK).
    let p = profile(PayloadPosition::Before, 5000, 0, false);
    let mut spec = SynthSpec::new(p);
    spec.level_dbfs = -6.0;
    spec.seed = 5;
    let out = run(&spec).unwrap();
    let b = &out.truth.bursts[0];
    let x: Vec<Cf32> = burst_symbols(&out.truth, b)
        .iter()
        .map(|c| Cf32::new(c.re as f32, c.im as f32))
        .collect();
    let taps = crate::signal::rrc_taps(0.25, 12, 4);
    let shaped = crate::signal::shape(&x, &taps, 4);
    let s = &out.samples[b.first_sample as usize..b.end_sample as usize];
    assert_eq!(shaped.len(), s.len());
    for (n, (a, z)) in shaped.iter().zip(s).enumerate() {
        let want = Cf64::new(a.re as f64, a.im as f64) * b.amplitude;
        let got = Cf64::new(z.re as f64, z.im as f64);
        assert!((want - got).norm() < 1e-5, "sample {n}: {want} vs {got}");
    }
}

#[test]
fn drifting_taps_turn_at_the_drift_rate_relative_to_the_main_tap() {
    // Model of the module doc: h[t](n) = h[t]·exp(j2π·drift·(n − instant)/fs)
    // for every tap but the main one. At 50 Hz over 1000 symbols (4 ms) the
    // post-cursor tap turns by 1.26 rad, so a model without the drift misses
    // by ~0.5; the reference below rotates the taps at each symbol instant.
    // Tolerance 5e-3: the drift within one pulse (±16 symbols, ±0.02 rad,
    // largely cancelling in the symmetric matched filter) plus truncation ISI.
    let mut p = profile(PayloadPosition::After, 0, 1000, true);
    p.pulse.span_symbols = 32;
    let mut spec = SynthSpec::new(p);
    let taps = parse_taps("0.15j,1.0,0.45-0.2j").unwrap();
    let drift = 50.0;
    spec.channel = Some(ChannelSpec {
        taps: taps.clone(),
        main_index: 1,
        spacing: TapSpacing::Symbol,
        drift_hz: drift,
    });
    let out = run(&spec).unwrap();
    let b = &out.truth.bursts[0];
    let fs = out.truth.sample_rate_hz;
    let x = burst_symbols(&out.truth, b);
    let instant = b.start_sample as f64 + b.timing_frac;
    let mut worst = 0f64;
    for k in 0..x.len() {
        let t_k = (k * 4) as f64; // samples since the first training symbol
        let mut want = Cf64::new(0.0, 0.0);
        for (t, h) in taps.iter().enumerate() {
            let src = k as isize - (t as isize - 1);
            if src < 0 || src as usize >= x.len() {
                continue;
            }
            let rot = if t == 1 {
                Cf64::new(1.0, 0.0)
            } else {
                Cf64::from_polar(1.0, 2.0 * std::f64::consts::PI * drift * t_k / fs)
            };
            want += h * rot * x[src as usize];
        }
        let z = mf_at(&out.samples, instant + t_k, 4, 0.25, 32) / b.amplitude;
        worst = worst.max((z - want).norm());
    }
    assert!(worst < 5e-3, "worst {worst}");
}

#[test]
fn an_output_named_for_another_raw_format_than_the_profile_is_refused() {
    // Common practice: a raw capture's extension names its layout (the reader
    // infers the format from it), so a name contradicting the content is an error.
    let mut p = profile(PayloadPosition::After, 0, 16, true);
    p.capture.format = Some(SampleFormat::Ci16Le);
    let err = default_container(Path::new("x.cf32"), &p).unwrap_err();
    let msg = err.to_string();
    assert!(msg.starts_with("--out"), "{msg}");
    assert!(msg.contains("ci16_le") && msg.contains("cf32_le"), "{msg}");
    // Matching, unknown or WAV extensions are fine.
    assert_eq!(
        default_container(Path::new("x.ci16"), &p).unwrap(),
        Container::Raw(SampleFormat::Ci16Le)
    );
    assert_eq!(
        default_container(Path::new("x.iq"), &p).unwrap(),
        Container::Raw(SampleFormat::Ci16Le)
    );
    assert_eq!(
        default_container(Path::new("x.wav"), &p).unwrap(),
        Container::Wav(WavEncoding::Pcm16)
    );
    p.capture.format = None;
    assert_eq!(
        default_container(Path::new("x.cu8"), &p).unwrap(),
        Container::Raw(SampleFormat::Cu8)
    );
}

/// The option a refused spec names (every refusal happens in
/// `SynthSpec::validate`, before anything is generated).
fn refused(edit: impl FnOnce(&mut SynthSpec)) -> String {
    let mut spec = SynthSpec::new(profile(PayloadPosition::After, 0, 30, true));
    spec.sample_rate_hz = Some(1e6);
    edit(&mut spec);
    match spec.validate() {
        Err(SynthError::InvalidOption { option, .. }) => option,
        Err(SynthError::TooLarge { .. }) => "size".to_string(),
        Err(SynthError::Profile(_)) => "profile".to_string(),
        other => panic!("expected a refusal, got {other:?}"),
    }
}

/// One edit of a spec.
type Edit = Box<dyn FnOnce(&mut SynthSpec)>;

/// Each field the library checks, refused by `validate` (and so by `run`)
/// with a typed error naming it, not only by the command line. Ranges: this
/// project's (docs/robustness.md rule 5; fs/2 is the Nyquist limit, common
/// practice); the size cap is `limits::MAX_SYNTH_SAMPLES`.
#[test]
fn the_library_refuses_every_absurd_field_with_a_typed_error_naming_it() {
    let ch = |taps: Vec<Cf64>, drift_hz: f64| ChannelSpec {
        taps,
        main_index: 0,
        spacing: TapSpacing::Symbol,
        drift_hz,
    };
    let one = Cf64::new(1.0, 0.0);
    let cases: Vec<(&str, Edit)> = vec![
        (
            "--sample-rate",
            Box::new(|s| s.sample_rate_hz = Some(1e300)),
        ),
        (
            "--sample-rate",
            Box::new(|s| s.sample_rate_hz = Some(f64::NAN)),
        ),
        ("--sample-rate", Box::new(|s| s.sample_rate_hz = Some(0.5))),
        ("--bursts", Box::new(|s| s.bursts = 0)),
        ("size", Box::new(|s| s.bursts = 100_000_000)),
        ("size", Box::new(|s| s.bursts = usize::MAX)),
        ("size", Box::new(|s| s.lead_gap_samples = 1 << 40)),
        ("size", Box::new(|s| s.gap_samples = (0, usize::MAX))),
        ("--gap", Box::new(|s| s.gap_samples = (10, 9))),
        ("--esn0-db", Box::new(|s| s.esn0_db = Some(f64::NAN))),
        ("--esn0-db", Box::new(|s| s.esn0_db = Some(-1e300))),
        ("--esn0-db", Box::new(|s| s.esn0_db = Some(201.0))),
        ("--level-dbfs", Box::new(|s| s.level_dbfs = 41.0)),
        ("--level-dbfs", Box::new(|s| s.level_dbfs = f64::INFINITY)),
        ("--iq-gain-db", Box::new(|s| s.iq_gain_db = 400.0)),
        ("--iq-phase-deg", Box::new(|s| s.iq_phase_deg = 90.0)),
        ("--iq-phase-deg", Box::new(|s| s.iq_phase_deg = f64::NAN)),
        ("--phase-deg", Box::new(|s| s.phase_rad = 7.0)),
        ("--phase-deg", Box::new(|s| s.phase_rad = f64::NAN)),
        ("--dc", Box::new(|s| s.dc_offset = [1e300, 0.0])),
        ("--dc", Box::new(|s| s.dc_offset = [0.0, -1.5])),
        ("--cfo-hz", Box::new(|s| s.cfo_hz = 5e5)),
        ("--cfo-hz", Box::new(|s| s.cfo_hz = f64::NEG_INFINITY)),
        ("--sco-ppm", Box::new(|s| s.sco_ppm = 2e4)),
        (
            "--timing-frac",
            Box::new(|s| s.timing = TimingOffset::Fixed(f64::NAN)),
        ),
        (
            "--channel",
            Box::new(move |s| s.channel = Some(ch(vec![Cf64::new(1e300, 0.0)], 0.0))),
        ),
        (
            "--channel",
            Box::new(move |s| s.channel = Some(ch(vec![Cf64::new(1e-9, 0.0)], 0.0))),
        ),
        (
            "--channel",
            Box::new(move |s| s.channel = Some(ch(vec![Cf64::new(f64::NAN, 0.0)], 0.0))),
        ),
        (
            "--channel-main",
            Box::new(move |s| s.channel = Some(ch(vec![], 0.0))),
        ),
        (
            "--drift-hz",
            Box::new(move |s| s.channel = Some(ch(vec![one, one], 6e5))),
        ),
        (
            "--drift-hz",
            Box::new(move |s| s.channel = Some(ch(vec![one, one], f64::NAN))),
        ),
        ("profile", Box::new(|s| s.profile.pulse.rolloff = 0.0)),
    ];
    for (want, edit) in cases {
        assert_eq!(refused(edit), want);
    }
    // The boundaries themselves are accepted.
    let mut spec = SynthSpec::new(profile(PayloadPosition::After, 0, 30, true));
    spec.sample_rate_hz = Some(1e6);
    spec.phase_rad = 360f64.to_radians();
    spec.level_dbfs = 40.0;
    spec.dc_offset = [1.0, -1.0];
    spec.esn0_db = Some(-100.0);
    assert_eq!(spec.validate().unwrap(), 1e6);
    // `run` makes the same check.
    spec.bursts = 0;
    assert!(matches!(run(&spec), Err(SynthError::InvalidOption { .. })));
}
