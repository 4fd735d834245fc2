//! `iqaudit.Report` and `iqaudit.Burst`: an analysis report as Python objects.
//!
//! Takes in: the library's [`iqaudit::report::schema::Report`] (shared, never
//! copied per access) and the payload modulation (for the decisions). Gives
//! out: figures as attributes (the report JSON's names and units: %, dB, Hz,
//! ppm, samples, symbols), sections as dicts parsed from the report JSON, and
//! traces as numpy arrays built once per burst, on the first `report.bursts`,
//! straight from the Rust vectors (one copy; no per-element Python objects).

use std::path::PathBuf;
use std::sync::{Arc, OnceLock};

use iqaudit::report::schema::{BurstReport, Complex2, Report as ReportData, VerdictResult};
use iqaudit::{Cf32, Constellation, Modulation};
use numpy::ndarray::Array2;
use numpy::{Complex64, IntoPyArray, PyArray1};
use pyo3::exceptions::PyValueError;
use pyo3::prelude::*;

use crate::{to_py, OrRaise};

/// The analysis of one capture (what `iqaudit analyse --json` prints).
#[pyclass(frozen, module = "iqaudit", name = "Report")]
pub struct Report {
    data: Arc<ReportData>,
    constellation: Arc<Constellation>,
    bursts: OnceLock<Vec<Py<Burst>>>,
}

impl Report {
    /// Wrap a finished report; `modulation` is the profile's payload modulation.
    pub fn new(data: ReportData, modulation: Modulation) -> Report {
        Report {
            data: Arc::new(data),
            constellation: Arc::new(Constellation::new(modulation)),
            bursts: OnceLock::new(),
        }
    }

    fn json_bytes(&self) -> PyResult<Vec<u8>> {
        iqaudit::report::provenance::report_json(&self.data)
            .map_err(|e| iqaudit::Error::Io {
                path: PathBuf::from("<json>"),
                source: e.into(),
            })
            .or_raise()
    }
}

fn verdict_name(v: VerdictResult) -> &'static str {
    match v {
        VerdictResult::Pass => "pass",
        VerdictResult::Fail => "fail",
        VerdictResult::NoTraining => "no-training",
    }
}

#[pymethods]
impl Report {
    /// The report exactly as `iqaudit analyse --json` prints it (pretty JSON and
    /// a final newline); only `command` differs (see docs/python.md).
    fn to_json(&self) -> PyResult<String> {
        String::from_utf8(self.json_bytes()?).map_err(|e| PyValueError::new_err(e.to_string()))
    }

    /// The report JSON parsed into dicts and lists.
    fn to_dict(&self, py: Python<'_>) -> PyResult<Py<PyAny>> {
        to_py(py, &*self.data)
    }

    /// Write the report JSON to `path` atomically, as `--report` does (never
    /// over the capture, and with `input.path_from_report`, the capture's path
    /// from the report's folder, as `--report` records it);
    /// `iqaudit.recheck(path)` can then re-run it from any working directory.
    fn write_json(&self, path: PathBuf) -> PyResult<()> {
        let input = PathBuf::from(&self.data.input.path);
        iqaudit::atomic::ensure_not_an_input(&path, &[input.as_path()]).or_raise()?;
        iqaudit::atomic::ensure_replaceable(&path).or_raise()?;
        let folder = path.parent().unwrap_or(std::path::Path::new(""));
        let from_report = iqaudit::recheck::path_from_folder(folder, &input)
            .map(|p| p.to_string_lossy().into_owned());
        let json = if from_report == self.data.input.path_from_report {
            self.json_bytes()?
        } else {
            let mut data = (*self.data).clone();
            data.input.path_from_report = from_report;
            iqaudit::report::provenance::report_json(&data)
                .map_err(|e| iqaudit::Error::Io {
                    path: path.clone(),
                    source: e.into(),
                })
                .or_raise()?
        };
        iqaudit::atomic::write_atomic(&path, &json).or_raise()
    }

    /// The bursts in capture order, each a `Burst` (traces as numpy arrays).
    #[getter]
    fn bursts(&self, py: Python<'_>) -> PyResult<Vec<Py<Burst>>> {
        if let Some(b) = self.bursts.get() {
            return Ok(b.iter().map(|b| b.clone_ref(py)).collect());
        }
        let mut built = Vec::with_capacity(self.data.bursts.len());
        for i in 0..self.data.bursts.len() {
            built.push(Py::new(
                py,
                Burst::new(py, &self.data, i, &self.constellation)?,
            )?);
        }
        let out = built.iter().map(|b| b.clone_ref(py)).collect();
        // Another thread may have built them meanwhile: either list is the same.
        let _ = self.bursts.set(built);
        Ok(out)
    }

    /// "pass", "fail" or "no-training".
    #[getter]
    fn verdict(&self) -> &'static str {
        verdict_name(self.data.verdict.result)
    }

    /// True when the verdict is "pass".
    #[getter]
    fn passed(&self) -> bool {
        self.data.verdict.result == VerdictResult::Pass
    }

    /// The command line's exit code for this report: 0 pass, 1 a limit failed,
    /// 3 no training block found.
    #[getter]
    fn exit_code(&self) -> i32 {
        match self.data.verdict.result {
            VerdictResult::Pass => 0,
            VerdictResult::Fail => 1,
            VerdictResult::NoTraining => 3,
        }
    }

    /// Number of bursts analysed (`summary.bursts`).
    #[getter]
    fn burst_count(&self) -> usize {
        self.data.summary.bursts
    }

    /// RMS EVM over all bursts, % (`summary.evm_rms_percent`).
    #[getter]
    fn evm_rms_percent(&self) -> Option<f64> {
        self.data.summary.evm_rms_percent
    }

    /// Worst burst's RMS EVM, % (`summary.evm_worst_percent`).
    #[getter]
    fn evm_worst_percent(&self) -> Option<f64> {
        self.data.summary.evm_worst_percent
    }

    /// MER over all bursts, dB (`summary.mer_db`).
    #[getter]
    fn mer_db(&self) -> Option<f64> {
        self.data.summary.mer_db
    }

    /// Pooled symbol error rate (`summary.ser.rate`); None without a known payload.
    #[getter]
    fn ser(&self) -> Option<f64> {
        self.data.summary.ser.as_ref().map(|r| r.rate)
    }

    /// Pooled bit error rate (`summary.ber.rate`); None without a known payload.
    #[getter]
    fn ber(&self) -> Option<f64> {
        self.data.summary.ber.as_ref().map(|r| r.rate)
    }

    /// Largest |CFO| over the bursts, Hz (`summary.cfo_abs_max_hz`).
    #[getter]
    fn cfo_abs_max_hz(&self) -> Option<f64> {
        self.data.summary.cfo_abs_max_hz
    }

    /// Mean sample-clock offset, ppm (`summary.sco_mean_ppm`).
    #[getter]
    fn sco_mean_ppm(&self) -> Option<f64> {
        self.data.summary.sco_mean_ppm
    }

    /// Largest |sample-clock offset|, ppm (`summary.sco_abs_max_ppm`).
    #[getter]
    fn sco_abs_max_ppm(&self) -> Option<f64> {
        self.data.summary.sco_abs_max_ppm
    }

    /// Longest run of consecutive symbol errors (`summary.longest_error_run`).
    #[getter]
    fn longest_error_run(&self) -> usize {
        self.data.summary.longest_error_run
    }

    /// Report schema name, e.g. "iqaudit.report/5".
    #[getter]
    fn schema(&self) -> &str {
        &self.data.schema
    }

    /// The recorded command line (see docs/python.md).
    #[getter]
    fn command(&self) -> Vec<String> {
        self.data.command.clone()
    }

    /// `summary` as a dict (every summary figure, with SER/BER intervals).
    #[getter]
    fn summary(&self, py: Python<'_>) -> PyResult<Py<PyAny>> {
        to_py(py, &self.data.summary)
    }

    /// `verdict.checks`: a list of dicts {limit, threshold, measured, pass, margin}.
    #[getter]
    fn checks(&self, py: Python<'_>) -> PyResult<Py<PyAny>> {
        to_py(py, &self.data.verdict.checks)
    }

    /// `warnings`: a list of dicts {code, message}.
    #[getter]
    fn warnings(&self, py: Python<'_>) -> PyResult<Py<PyAny>> {
        to_py(py, &self.data.warnings)
    }

    /// `input` as a dict (path, size, SHA-256, format, rate, samples).
    #[getter]
    fn input(&self, py: Python<'_>) -> PyResult<Py<PyAny>> {
        to_py(py, &self.data.input)
    }

    /// `profile`: the resolved profile as a dict.
    #[getter]
    fn profile(&self, py: Python<'_>) -> PyResult<Py<PyAny>> {
        to_py(py, &self.data.profile)
    }

    /// `capture`: the capture views as a dict, or None.
    #[getter]
    fn capture(&self, py: Python<'_>) -> PyResult<Py<PyAny>> {
        to_py(py, &self.data.capture)
    }

    /// `provenance` as a dict (profile digest, overrides, threshold, traced bursts).
    #[getter]
    fn provenance(&self, py: Python<'_>) -> PyResult<Py<PyAny>> {
        to_py(py, &self.data.provenance)
    }

    /// `tool` as a dict {name, version}.
    #[getter]
    fn tool(&self, py: Python<'_>) -> PyResult<Py<PyAny>> {
        to_py(py, &self.data.tool)
    }

    fn __len__(&self) -> usize {
        self.data.bursts.len()
    }

    fn __repr__(&self) -> String {
        format!(
            "<iqaudit.Report {}: {} burst(s), verdict {}>",
            self.data.input.path,
            self.data.bursts.len(),
            verdict_name(self.data.verdict.result)
        )
    }
}

/// One burst of a report: its figures, and its traces as numpy arrays.
#[pyclass(frozen, module = "iqaudit", name = "Burst")]
pub struct Burst {
    data: Arc<ReportData>,
    i: usize,
    /// Channel taps h[-P] … h[Q], complex128, shape (taps,).
    #[pyo3(get)]
    taps: Py<PyAny>,
    /// |h[k]| relative to the main tap, dB, float64, shape (taps,).
    #[pyo3(get)]
    taps_db: Py<PyAny>,
    /// Feed-forward equaliser coefficients, complex128, shape (feedforward_taps,).
    #[pyo3(get)]
    feedforward: Py<PyAny>,
    /// Feedback equaliser coefficients, complex128, shape (feedback_taps,).
    #[pyo3(get)]
    feedback: Py<PyAny>,
    /// Channel frequency response `[f cycles/symbol, |H(f)| dB]`, float64,
    /// shape (129, 2); None without a trace.
    #[pyo3(get)]
    response_db: Option<Py<PyAny>>,
    /// Equalised payload symbols of the trace (decimated, evenly spread),
    /// complex128, shape (n,); None without a trace.
    #[pyo3(get)]
    equalised: Option<Py<PyAny>>,
    /// Payload symbol number of each point of `equalised`, int64, shape (n,).
    #[pyo3(get)]
    equalised_index: Option<Py<PyAny>>,
    /// The constellation point nearest each point of `equalised` (the hard
    /// decision), complex128, shape (n,).
    #[pyo3(get)]
    decisions: Option<Py<PyAny>>,
    /// Payload symbol numbers of wrong decisions among `equalised`, int64, shape (w,).
    #[pyo3(get)]
    wrong: Option<Py<PyAny>>,
    /// RMS EVM over consecutive blocks `[first symbol, evm %]`, float64, shape (b, 2).
    #[pyo3(get)]
    evm_blocks: Option<Py<PyAny>>,
    /// Sync metric around the burst `[sample offset from start_sample, metric]`,
    /// float64, shape (m, 2).
    #[pyo3(get)]
    sync_trace: Option<Py<PyAny>>,
    /// Consecutive equalised payload symbols from the first on (for the eye),
    /// complex128, shape (e,).
    #[pyo3(get)]
    eye_equalised: Option<Py<PyAny>>,
    /// Matched-filter eye: one row per symbol, complex128, shape
    /// (rows, 2·points_per_symbol + 1); None when not computed.
    #[pyo3(get)]
    eye_matched: Option<Py<PyAny>>,
}

fn complex(py: Python<'_>, v: &[Complex2]) -> Py<PyAny> {
    let c: Vec<Complex64> = v.iter().map(|&[re, im]| Complex64::new(re, im)).collect();
    PyArray1::from_vec(py, c).into_any().unbind()
}

fn floats(py: Python<'_>, v: &[f64]) -> Py<PyAny> {
    PyArray1::from_slice(py, v).into_any().unbind()
}

fn indices(py: Python<'_>, v: impl Iterator<Item = usize>) -> Py<PyAny> {
    let i: Vec<i64> = v.map(|x| x as i64).collect();
    PyArray1::from_vec(py, i).into_any().unbind()
}

fn pairs(py: Python<'_>, v: &[[f64; 2]]) -> PyResult<Py<PyAny>> {
    let flat: Vec<f64> = v.iter().flatten().copied().collect();
    let a = Array2::from_shape_vec((v.len(), 2), flat)
        .map_err(|e| PyValueError::new_err(e.to_string()))?;
    Ok(a.into_pyarray(py).into_any().unbind())
}

fn rows(py: Python<'_>, v: &[Vec<Complex2>], width: usize) -> PyResult<Py<PyAny>> {
    let mut flat = Vec::with_capacity(v.len() * width);
    for row in v {
        if row.len() != width {
            return Err(PyValueError::new_err(format!(
                "eye_matched: a trace of {} points where {width} were expected",
                row.len()
            )));
        }
        flat.extend(row.iter().map(|&[re, im]| Complex64::new(re, im)));
    }
    let a = Array2::from_shape_vec((v.len(), width), flat)
        .map_err(|e| PyValueError::new_err(e.to_string()))?;
    Ok(a.into_pyarray(py).into_any().unbind())
}

impl Burst {
    fn new(
        py: Python<'_>,
        data: &Arc<ReportData>,
        i: usize,
        constellation: &Constellation,
    ) -> PyResult<Burst> {
        let b = &data.bursts[i];
        let trace = b.trace.as_ref();
        let equalised = trace.map(|t| {
            let c: Vec<Complex64> = t
                .constellation
                .iter()
                .map(|p| Complex64::new(p[1], p[2]))
                .collect();
            PyArray1::from_vec(py, c).into_any().unbind()
        });
        let decisions = trace.map(|t| {
            let c: Vec<Complex64> = t
                .constellation
                .iter()
                .map(|p| {
                    let d = constellation.decide(Cf32::new(p[1] as f32, p[2] as f32));
                    Complex64::new(f64::from(d.re), f64::from(d.im))
                })
                .collect();
            PyArray1::from_vec(py, c).into_any().unbind()
        });
        let eye_matched = match trace.and_then(|t| t.eye_matched.as_ref()) {
            Some(e) => Some(rows(py, &e.traces, 2 * e.points_per_symbol + 1)?),
            None => None,
        };
        Ok(Burst {
            data: Arc::clone(data),
            i,
            taps: complex(py, &b.channel.taps),
            taps_db: floats(py, &b.channel.taps_db),
            feedforward: complex(py, &b.equaliser.feedforward),
            feedback: complex(py, &b.equaliser.feedback),
            response_db: match &b.channel.response_db {
                Some(r) => Some(pairs(py, r)?),
                None => None,
            },
            equalised,
            equalised_index: trace
                .map(|t| indices(py, t.constellation.iter().map(|p| p[0] as usize))),
            decisions,
            wrong: trace.map(|t| indices(py, t.wrong.iter().copied())),
            evm_blocks: match trace {
                Some(t) => Some(pairs(py, &t.evm_blocks)?),
                None => None,
            },
            sync_trace: match trace {
                Some(t) => Some(pairs(py, &t.sync_metric)?),
                None => None,
            },
            eye_equalised: trace.map(|t| complex(py, &t.eye_equalised)),
            eye_matched,
        })
    }

    fn b(&self) -> &BurstReport {
        &self.data.bursts[self.i]
    }
}

#[pymethods]
impl Burst {
    /// Burst number in the capture, from 0.
    #[getter]
    fn index(&self) -> usize {
        self.b().index
    }

    /// Capture sample of the first training symbol (main-tap path).
    #[getter]
    fn start_sample(&self) -> u64 {
        self.b().start_sample
    }

    /// Fractional timing of the first training symbol, samples.
    #[getter]
    fn timing_frac_samples(&self) -> f64 {
        self.b().timing_frac_samples
    }

    /// Position of the correlation peak, samples.
    #[getter]
    fn correlation_peak_samples(&self) -> f64 {
        self.b().correlation_peak_samples
    }

    /// Normalised sync metric at the detection.
    #[getter]
    fn sync_metric(&self) -> f64 {
        self.b().sync_metric
    }

    /// Carrier frequency offset, Hz (final estimate).
    #[getter]
    fn cfo_hz(&self) -> f64 {
        self.b().cfo_hz
    }

    /// CFO from the training alone, Hz.
    #[getter]
    fn cfo_training_hz(&self) -> f64 {
        self.b().cfo_training_hz
    }

    /// CFO in ppm of the centre frequency; None without one.
    #[getter]
    fn cfo_ppm(&self) -> Option<f64> {
        self.b().cfo_ppm
    }

    /// Centre frequency of the burst's capture segment, Hz; None when unknown.
    #[getter]
    fn center_freq_hz(&self) -> Option<f64> {
        self.b().center_freq_hz
    }

    /// Carrier phase at the first training symbol, radians.
    #[getter]
    fn phase_rad(&self) -> f64 {
        self.b().phase_rad
    }

    /// Received burst power, dBFS.
    #[getter]
    fn received_power_dbfs(&self) -> Option<f64> {
        self.b().received_power_dbfs
    }

    /// Sample-clock offset, ppm; None when not measured.
    #[getter]
    fn sco_ppm(&self) -> Option<f64> {
        self.b().sco_ppm
    }

    /// True when the capture ends inside the burst.
    #[getter]
    fn truncated(&self) -> bool {
        self.b().truncated
    }

    /// Payload symbols of the burst.
    #[getter]
    fn payload_symbols(&self) -> usize {
        self.b().payload_symbols
    }

    /// Symbols the metrics were measured over.
    #[getter]
    fn symbols(&self) -> usize {
        self.b().metrics.symbols
    }

    /// Reference of the metrics: "known" payload or "decisions".
    #[getter]
    fn reference(&self) -> &str {
        &self.b().metrics.reference
    }

    /// RMS EVM, %.
    #[getter]
    fn evm_rms_percent(&self) -> f64 {
        self.b().metrics.evm_rms_percent
    }

    /// RMS EVM, dB.
    #[getter]
    fn evm_rms_db(&self) -> Option<f64> {
        self.b().metrics.evm_rms_db
    }

    /// Peak EVM, %.
    #[getter]
    fn evm_peak_percent(&self) -> f64 {
        self.b().metrics.evm_peak_percent
    }

    /// Payload symbol of the peak EVM.
    #[getter]
    fn evm_peak_symbol(&self) -> usize {
        self.b().metrics.evm_peak_symbol
    }

    /// Modulation error ratio, dB.
    #[getter]
    fn mer_db(&self) -> Option<f64> {
        self.b().metrics.mer_db
    }

    /// RMS phase error, degrees.
    #[getter]
    fn phase_error_rms_deg(&self) -> Option<f64> {
        self.b().metrics.phase_error_rms_deg
    }

    /// Symbol error rate (`metrics.ser.rate`); None without a known payload.
    #[getter]
    fn ser(&self) -> Option<f64> {
        self.b().metrics.ser.as_ref().map(|r| r.rate)
    }

    /// Symbol errors (`metrics.ser.errors`); None without a known payload.
    #[getter]
    fn symbol_errors(&self) -> Option<u64> {
        self.b().metrics.ser.as_ref().map(|r| r.errors)
    }

    /// Bit error rate (`metrics.ber.rate`); None without a known payload.
    #[getter]
    fn ber(&self) -> Option<f64> {
        self.b().metrics.ber.as_ref().map(|r| r.rate)
    }

    /// Bit errors (`metrics.ber.errors`); None without a known payload.
    #[getter]
    fn bit_errors(&self) -> Option<u64> {
        self.b().metrics.ber.as_ref().map(|r| r.errors)
    }

    /// SNR of the channel fit on the training, dB.
    #[getter]
    fn snr_db(&self) -> f64 {
        self.b().channel.snr_db
    }

    /// Noise variance of the channel fit.
    #[getter]
    fn noise_variance(&self) -> f64 {
        self.b().channel.noise_variance
    }

    /// RMS delay spread of the channel, symbols.
    #[getter]
    fn delay_spread_symbols(&self) -> f64 {
        self.b().channel.delay_spread_symbols
    }

    /// Index of the main tap h[0] in `taps`.
    #[getter]
    fn main_index(&self) -> usize {
        self.b().channel.main_index
    }

    /// True when the burst carries a trace (the traced set, see `traced_bursts`).
    #[getter]
    fn has_trace(&self) -> bool {
        self.b().trace.is_some()
    }

    /// `metrics` as a dict (EVM, MER, SER/BER with intervals, error runs, …).
    #[getter]
    fn metrics(&self, py: Python<'_>) -> PyResult<Py<PyAny>> {
        to_py(py, &self.b().metrics)
    }

    /// `channel` as a dict.
    #[getter]
    fn channel(&self, py: Python<'_>) -> PyResult<Py<PyAny>> {
        to_py(py, &self.b().channel)
    }

    /// `equaliser` as a dict.
    #[getter]
    fn equaliser(&self, py: Python<'_>) -> PyResult<Py<PyAny>> {
        to_py(py, &self.b().equaliser)
    }

    /// `warnings` of this burst: a list of dicts {code, message}.
    #[getter]
    fn warnings(&self, py: Python<'_>) -> PyResult<Py<PyAny>> {
        to_py(py, &self.b().warnings)
    }

    /// The burst as in the report JSON (a dict; `trace` as lists).
    fn to_dict(&self, py: Python<'_>) -> PyResult<Py<PyAny>> {
        to_py(py, self.b())
    }

    fn __repr__(&self) -> String {
        let b = self.b();
        format!(
            "<iqaudit.Burst {} at sample {}: EVM {:.3} %, CFO {:.1} Hz>",
            b.index, b.start_sample, b.metrics.evm_rms_percent, b.cfo_hz
        )
    }
}
