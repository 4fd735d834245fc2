//! The `iqaudit._iqaudit` extension module: Python functions over the iqaudit
//! library (analyse, info, synth, recheck, profile new/check).
//!
//! Takes in: Python paths (str or `os.PathLike`) and keyword options named like
//! the command line's. Gives out: a [`report::Report`] object (figures as
//! attributes, traces as numpy arrays), or plain dicts parsed from exactly the
//! JSON the command line prints. Every library error becomes one Python
//! exception, `iqaudit.IqauditError`, whose message is the command line's
//! one-line message (without the `iqaudit: ` prefix) and whose `exit_code` is
//! the command line's exit code for that error (2 usage or input, 4 analysis
//! failed). The GIL is released while a capture is read or analysed.

#![deny(missing_docs)]

use std::path::{Path, PathBuf};

use iqaudit::analyse::{analyse_capture, profile_path_for, AnalyseOptions};
use iqaudit::capture::stats::{capture_stats, info_report, StatsOptions};
use iqaudit::profile::{example_profile, load_profile, load_profile_with, ExampleOptions};
use iqaudit::synth::{synth_files, SynthRequest, TapSpacing, TimingOffset};
use iqaudit::{Capture, CaptureError, Error, Modulation, OpenOptions, SampleFormat};
use pyo3::exceptions::PyException;
use pyo3::prelude::*;

mod report;

pyo3::create_exception!(
    _iqaudit,
    IqauditError,
    PyException,
    "An iqaudit error: the message is the command line's one-line message (without \
     its `iqaudit: ` prefix); `exit_code` is the command line's exit code for it \
     (2 bad usage or unreadable input, 4 the capture was read but its analysis failed)."
);

/// The command line's exit code for a library error (`cli::exit_code`): 4 for
/// an analysis that failed on a capture that was read, else 2.
fn exit_code_of(e: &Error) -> i32 {
    if matches!(e, Error::Analysis { .. }) {
        4
    } else {
        2
    }
}

/// The Python exception for a library error: the command line's message
/// (control characters escaped as there) and its exit code.
pub(crate) fn py_err(e: Error) -> PyErr {
    let code = exit_code_of(&e);
    let message = iqaudit::text::escape_controls(&e.to_string());
    raise(message, code)
}

/// An `IqauditError` with `message` and `exit_code`.
fn raise(message: String, code: i32) -> PyErr {
    let err = IqauditError::new_err(message);
    Python::attach(|py| {
        // Setting an attribute on a fresh exception instance cannot fail in
        // practice; if it did, the exception still carries its message.
        let _ = err.value(py).setattr("exit_code", code);
    });
    err
}

fn usage(message: String) -> PyErr {
    py_err(Error::Usage { message })
}

/// A library `Result` as a Python one.
pub(crate) trait OrRaise<T> {
    /// Map the error to [`IqauditError`].
    fn or_raise(self) -> PyResult<T>;
}

impl<T, E: Into<Error>> OrRaise<T> for Result<T, E> {
    fn or_raise(self) -> PyResult<T> {
        self.map_err(|e| py_err(e.into()))
    }
}

/// Parse Python-side JSON text into Python objects (`json.loads`).
pub(crate) fn json_to_py(py: Python<'_>, text: &str) -> PyResult<Py<PyAny>> {
    Ok(py.import("json")?.call_method1("loads", (text,))?.unbind())
}

/// `serde_json::to_string_pretty(v)` (what the command line prints) as Python objects.
pub(crate) fn to_py<T: serde::Serialize>(py: Python<'_>, v: &T) -> PyResult<Py<PyAny>> {
    let text = serde_json::to_string(v).map_err(|e| {
        py_err(Error::Io {
            path: PathBuf::from("<json>"),
            source: e.into(),
        })
    })?;
    json_to_py(py, &text)
}

/// A `--format` value as the command line parses it (an error names `path`).
fn parse_format(name: Option<&str>, path: &Path) -> PyResult<Option<SampleFormat>> {
    match name {
        None => Ok(None),
        Some(name) => name
            .parse::<SampleFormat>()
            .map(Some)
            .map_err(|e| {
                Error::from(CaptureError::BadFormatName {
                    path: path.to_path_buf(),
                    found: e.found,
                    accepted: e.accepted,
                })
            })
            .or_raise(),
    }
}

fn check_rate(opt: &str, hz: Option<f64>) -> PyResult<()> {
    if let Some(v) = hz {
        iqaudit::limits::check_rate_hz(v).map_err(|expected| {
            usage(format!(
                "{opt}: expected {expected}, found {}",
                iqaudit::limits::show_number(v)
            ))
        })?;
    }
    Ok(())
}

/// Run `f` in a pool of `threads` workers (checked as `--jobs` is), or in
/// rayon's global pool; results are the same for any thread count.
fn in_pool<T: Send>(
    threads: Option<usize>,
    f: impl FnOnce() -> Result<T, Error> + Send,
) -> Result<T, Error> {
    match threads {
        None => f(),
        Some(n) => {
            let n = iqaudit::limits::check_jobs(n).map_err(|message| Error::Usage { message })?;
            rayon::ThreadPoolBuilder::new()
                .num_threads(n)
                .build()
                .map_err(|e| Error::Usage {
                    message: format!("--jobs {n}: cannot start the worker threads ({e})"),
                })?
                .install(f)
        }
    }
}

/// The command line that would make the same report (recorded in `command`):
/// `iqaudit analyse CAPTURE --profile P` and the options given.
fn equivalent_command(
    capture: &Path,
    profile: &Path,
    format: Option<&str>,
    sample_rate: Option<f64>,
    threads: Option<usize>,
    traced_bursts: Option<usize>,
    allow_outside_symbols: bool,
) -> Vec<String> {
    let mut argv: Vec<String> = vec![
        "iqaudit".into(),
        "analyse".into(),
        capture.to_string_lossy().into_owned(),
        "--profile".into(),
        profile.to_string_lossy().into_owned(),
    ];
    if let Some(f) = format {
        argv.extend(["--format".into(), f.to_string()]);
    }
    if let Some(hz) = sample_rate {
        argv.extend(["--sample-rate".into(), format!("{hz}")]);
    }
    if let Some(n) = threads {
        argv.extend(["--jobs".into(), n.to_string()]);
    }
    if let Some(k) = traced_bursts {
        argv.extend(["--traced-bursts".into(), k.to_string()]);
    }
    if allow_outside_symbols {
        argv.push("--allow-outside-symbols".into());
    }
    argv
}

/// Analyse one capture as `iqaudit analyse` does and return its `Report`.
///
/// `profile` defaults to CAPTURE.profile.json beside the capture. `traced_bursts`
/// (default 8, at most 1000, 0 none) keeps plot traces for the first K bursts and
/// the K worst by RMS EVM. `threads` is the command line's `--jobs` (results are
/// identical for any value). `hash_input=False` skips the SHA-256 of the capture
/// (the report's `input.sha256` is then ""). The GIL is released meanwhile.
#[pyfunction]
#[pyo3(signature = (capture, profile=None, *, format=None, sample_rate=None, threads=None,
                    traced_bursts=None, allow_outside_symbols=false, hash_input=true))]
#[allow(clippy::too_many_arguments)]
fn analyse(
    py: Python<'_>,
    capture: PathBuf,
    profile: Option<PathBuf>,
    format: Option<String>,
    sample_rate: Option<f64>,
    threads: Option<usize>,
    traced_bursts: Option<usize>,
    allow_outside_symbols: bool,
    hash_input: bool,
) -> PyResult<report::Report> {
    let profile_path = profile_path_for(&capture, profile.as_deref()).or_raise()?;
    let fmt = parse_format(format.as_deref(), &capture)?;
    check_rate("--sample-rate", sample_rate)?;
    let command = equivalent_command(
        &capture,
        &profile_path,
        format.as_deref(),
        sample_rate,
        threads,
        traced_bursts,
        allow_outside_symbols,
    );
    let (report, modulation) = py
        .detach(|| {
            if let Some(n) = threads {
                iqaudit::limits::check_jobs(n).map_err(|message| Error::Usage { message })?;
            }
            let resolved = load_profile_with(&profile_path, allow_outside_symbols)?;
            let opts = AnalyseOptions {
                format: fmt,
                sample_rate_hz: sample_rate,
                command,
                input_sha256: None,
                traced_bursts,
                skip_input_hash: !hash_input,
            };
            let report = in_pool(threads, || analyse_capture(&capture, &resolved, &opts))?;
            Ok::<_, Error>((report, resolved.payload.modulation))
        })
        .or_raise()?;
    Ok(report::Report::new(report, modulation))
}

/// What is in a capture, as the dict `iqaudit info --json` prints (schema
/// iqaudit.info/2). A `profile` supplies its `capture` section (format, sample
/// rate, I/Q swap, unsigned zero point) as defaults; the keyword options
/// override it as the command line's options do.
#[pyfunction]
#[pyo3(signature = (capture, profile=None, *, format=None, sample_rate=None, swap_iq=None,
                    unsigned_zero=None, center_freq=None, threads=None))]
#[allow(clippy::too_many_arguments)]
fn info(
    py: Python<'_>,
    capture: PathBuf,
    profile: Option<PathBuf>,
    format: Option<String>,
    sample_rate: Option<f64>,
    swap_iq: Option<bool>,
    unsigned_zero: Option<String>,
    center_freq: Option<f64>,
    threads: Option<usize>,
) -> PyResult<Py<PyAny>> {
    let mut fmt = parse_format(format.as_deref(), &capture)?;
    check_rate("--sample-rate", sample_rate)?;
    if let Some(f) = center_freq {
        if !(f > 0.0 && iqaudit::limits::check_frequency_hz(f).is_ok()) {
            return Err(usage(format!(
                "--center-freq: expected a finite number in (0, 1e12], found {}",
                iqaudit::limits::show_number(f)
            )));
        }
    }
    let mut zero = match unsigned_zero.as_deref() {
        None => None,
        Some(s) => Some(s.parse::<iqaudit::UnsignedZero>().map_err(usage)?),
    };
    let mut rate = sample_rate;
    let mut swap = swap_iq.unwrap_or(false);
    if let Some(p) = &profile {
        let resolved = load_profile(p).or_raise()?;
        fmt = fmt.or(resolved.capture.format);
        rate = rate.or(resolved.capture.sample_rate_hz);
        swap = swap_iq.unwrap_or(resolved.capture.swap_iq);
        zero = zero.or(resolved.capture.unsigned_zero);
    }
    let opts = OpenOptions {
        format: fmt,
        sample_rate_hz: rate,
        swap_iq: swap,
        unsigned_zero: zero.unwrap_or_default(),
    };
    let report = py
        .detach(|| {
            in_pool(threads, || {
                let cap = Capture::open(&capture, &opts)?;
                let stats_opts = StatsOptions::default();
                let stats = capture_stats(&cap, &stats_opts, &|_| {})?;
                let mut report = info_report(&cap, &stats, &stats_opts);
                if let Some(f) = center_freq {
                    report.set_center_freq(&stats, &stats_opts, f);
                }
                Ok(report)
            })
        })
        .or_raise()?;
    to_py(py, &report)
}

fn parse_spacing(s: &str) -> PyResult<TapSpacing> {
    match s {
        "symbol" => Ok(TapSpacing::Symbol),
        "sample" => Ok(TapSpacing::Sample),
        _ => Err(usage(format!(
            "--channel-spacing: expected symbol or sample, found {s}"
        ))),
    }
}

/// A `timing_frac` value: a number or the string "random".
fn parse_timing(v: &Bound<'_, PyAny>) -> PyResult<TimingOffset> {
    if let Ok(s) = v.extract::<String>() {
        if s == "random" {
            return Ok(TimingOffset::Random);
        }
        return Err(usage(format!(
            "--timing-frac: expected a fraction in [-0.5, 0.5) or \"random\", found {s}"
        )));
    }
    Ok(TimingOffset::Fixed(v.extract::<f64>()?))
}

/// Write a test capture with known ground truth, as `iqaudit synth` does (the
/// options are its options, `--` dropped and `-` written `_`); returns
/// `(capture_path, truth)` with the truth as the dict written to
/// OUT.truth.json. `channel` is the taps' text ("0.1,1.0,0.4-0.2j") or a
/// sequence of complex numbers.
#[pyfunction]
#[pyo3(signature = (profile, out, *, format=None, sample_rate=None, bursts=1, seed=0,
                    channel=None, channel_main=None, channel_spacing="symbol", drift_hz=0.0,
                    esn0_db=None, cfo_hz=0.0, phase_deg=0.0, timing_frac=None, dc=None,
                    iq_gain_db=0.0, iq_phase_deg=0.0, sco_ppm=0.0, level_dbfs=-12.0,
                    gap=(1000, 3000), lead_gap=0, no_sigmf=false),
       text_signature = "(profile, out, *, format=None, sample_rate=None, bursts=1, seed=0, \
                         channel=None, channel_main=None, channel_spacing='symbol', drift_hz=0.0, \
                         esn0_db=None, cfo_hz=0.0, phase_deg=0.0, timing_frac=0.0, dc=None, \
                         iq_gain_db=0.0, iq_phase_deg=0.0, sco_ppm=0.0, level_dbfs=-12.0, \
                         gap=(1000, 3000), lead_gap=0, no_sigmf=False)")]
#[allow(clippy::too_many_arguments)]
fn synth(
    py: Python<'_>,
    profile: PathBuf,
    out: PathBuf,
    format: Option<String>,
    sample_rate: Option<f64>,
    bursts: u64,
    seed: u64,
    channel: Option<Bound<'_, PyAny>>,
    channel_main: Option<usize>,
    channel_spacing: &str,
    drift_hz: f64,
    esn0_db: Option<f64>,
    cfo_hz: f64,
    phase_deg: f64,
    timing_frac: Option<Bound<'_, PyAny>>,
    dc: Option<(f64, f64)>,
    iq_gain_db: f64,
    iq_phase_deg: f64,
    sco_ppm: f64,
    level_dbfs: f64,
    gap: (usize, usize),
    lead_gap: usize,
    no_sigmf: bool,
) -> PyResult<(PathBuf, Py<PyAny>)> {
    let channel = match channel {
        None => None,
        Some(c) => match c.extract::<String>() {
            Ok(s) => Some(s),
            Err(_) => {
                let taps: Vec<num_complex::Complex64> = c.extract()?;
                let parts: Vec<String> = taps
                    .iter()
                    .map(|t| {
                        if t.im < 0.0 {
                            format!("{:e}{:e}j", t.re, t.im)
                        } else {
                            format!("{:e}+{:e}j", t.re, t.im)
                        }
                    })
                    .collect();
                Some(parts.join(","))
            }
        },
    };
    let req = SynthRequest {
        profile,
        out: out.clone(),
        format,
        sample_rate_hz: sample_rate,
        bursts,
        seed,
        channel,
        channel_main,
        channel_spacing: parse_spacing(channel_spacing)?,
        drift_hz,
        esn0_db,
        cfo_hz,
        phase_deg,
        timing: match timing_frac {
            None => TimingOffset::Fixed(0.0),
            Some(v) => parse_timing(&v)?,
        },
        dc: dc.map(|(i, q)| [i, q]),
        iq_gain_db,
        iq_phase_deg,
        sco_ppm,
        level_dbfs,
        gap,
        lead_gap,
        no_sigmf,
    };
    let command = format!("iqaudit.synth({})", req.out.display());
    let (truth, _container) = py.detach(|| synth_files(&req, Some(command))).or_raise()?;
    Ok((out, to_py(py, &truth)?))
}

/// Re-run the analysis recorded in a report file and compare every figure, as
/// `iqaudit recheck --json` does; returns its dict (schema iqaudit.recheck/1:
/// `reproduces`, `figures_compared`, `differences_total`, `differences`, …).
#[pyfunction]
#[pyo3(signature = (report_path, *, allow_outside_symbols=false, threads=None))]
fn recheck(
    py: Python<'_>,
    report_path: PathBuf,
    allow_outside_symbols: bool,
    threads: Option<usize>,
) -> PyResult<Py<PyAny>> {
    let doc = py
        .detach(|| {
            in_pool(threads, || {
                let r = iqaudit::recheck::recheck_with(
                    &report_path,
                    allow_outside_symbols,
                    &|_: &[PathBuf]| {},
                )?;
                Ok(r.document(&report_path))
            })
        })
        .or_raise()?;
    to_py(py, &doc)
}

/// The example link profile `iqaudit profile new` prints, as a dict.
#[pyfunction]
#[pyo3(signature = (*, modulation="16qam", sps=4, symbol_rate=250_000.0, rolloff=0.25,
                    payload_symbols=1024))]
fn profile_new(
    py: Python<'_>,
    modulation: &str,
    sps: u32,
    symbol_rate: f64,
    rolloff: f64,
    payload_symbols: u64,
) -> PyResult<Py<PyAny>> {
    let modulation = modulation
        .parse::<Modulation>()
        .map_err(|e| usage(format!("--modulation: {e}")))?;
    if sps == 0 {
        return Err(usage("--sps: expected at least 1, found 0".into()));
    }
    check_rate("--symbol-rate", Some(symbol_rate))?;
    if !(rolloff > 0.0 && rolloff <= 1.0) {
        return Err(usage(format!(
            "--rolloff: expected a roll-off in (0, 1], found {}",
            iqaudit::limits::show_number(rolloff)
        )));
    }
    if payload_symbols == 0 {
        return Err(usage(
            "--payload-symbols: expected at least 1, found 0".into(),
        ));
    }
    let p = example_profile(&ExampleOptions {
        modulation,
        samples_per_symbol: sps,
        symbol_rate_hz: symbol_rate,
        rolloff,
        payload_symbols: payload_symbols as usize,
    });
    to_py(py, &p)
}

/// Validate a link profile and return it with every default filled in, the
/// dict `iqaudit profile check` prints.
#[pyfunction]
fn profile_check(py: Python<'_>, path: PathBuf) -> PyResult<Py<PyAny>> {
    let r = load_profile(&path).or_raise()?;
    to_py(py, &r)
}

/// The extension module.
#[pymodule]
fn _iqaudit(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add("IqauditError", m.py().get_type::<IqauditError>())?;
    m.add("__version__", env!("CARGO_PKG_VERSION"))?;
    m.add_function(wrap_pyfunction!(analyse, m)?)?;
    m.add_function(wrap_pyfunction!(info, m)?)?;
    m.add_function(wrap_pyfunction!(synth, m)?)?;
    m.add_function(wrap_pyfunction!(recheck, m)?)?;
    m.add_function(wrap_pyfunction!(profile_new, m)?)?;
    m.add_function(wrap_pyfunction!(profile_check, m)?)?;
    m.add_class::<report::Report>()?;
    m.add_class::<report::Burst>()?;
    Ok(())
}
