//! What a batch tells the person watching it (stderr only).
//!
//! Takes in: start/finish events from the workers. Gives out: either indicatif
//! bars on a terminal (one overall bar — files done/total, bytes processed,
//! throughput, ETA — and one line per worker naming its current file), or one
//! plain line per capture (`path: outcome [done/total]`), or nothing until the
//! final line (`--quiet`). Failures are always `path: problem` lines (except
//! when quiet). The final line is printed whatever the mode.
//!
//! Every event takes a short lock only around writing a line; no lock is held
//! while a capture is being analysed.

use super::summary::{RowVerdict, SummaryRow};
use indicatif::{MultiProgress, ProgressBar, ProgressDrawTarget, ProgressStyle};
use std::io::{IsTerminal, Write};
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::Mutex;
use std::time::Duration;

/// How the batch reports progress on stderr.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum ProgressMode {
    /// Bars when stderr is a terminal (and `TERM` is not `dumb`), lines otherwise.
    #[default]
    Auto,
    /// Always bars (hidden by indicatif when stderr is not a terminal).
    Bars,
    /// One line per capture.
    Lines,
    /// Only the final line.
    Quiet,
}

/// Most worker lines drawn under the overall bar; further workers are not shown.
pub const MAX_WORKER_LINES: usize = 16;

pub(crate) struct Progress {
    total_files: u64,
    done: AtomicU64,
    kind: Kind,
}

enum Kind {
    Bars {
        multi: MultiProgress,
        main: ProgressBar,
        workers: Vec<ProgressBar>,
    },
    Lines(Mutex<Box<dyn Write + Send>>),
    Quiet(Mutex<Box<dyn Write + Send>>),
}

impl Progress {
    pub(crate) fn new(
        mode: ProgressMode,
        total_files: u64,
        total_bytes: u64,
        workers: usize,
        sink: Box<dyn Write + Send>,
    ) -> Progress {
        let mode = match mode {
            ProgressMode::Auto => {
                let dumb = std::env::var_os("TERM").is_some_and(|t| t == "dumb");
                if std::io::stderr().is_terminal() && !dumb {
                    ProgressMode::Bars
                } else {
                    ProgressMode::Lines
                }
            }
            m => m,
        };
        let kind = match mode {
            ProgressMode::Bars => {
                let multi = MultiProgress::with_draw_target(ProgressDrawTarget::stderr());
                let main = multi.add(ProgressBar::new(total_bytes));
                if let Ok(style) = ProgressStyle::with_template(
                    "{prefix:>15} [{bar:32}] {binary_bytes}/{binary_total_bytes}  {binary_bytes_per_sec}  eta {eta}",
                ) {
                    main.set_style(style.progress_chars("#>-"));
                }
                main.set_prefix(format!("0/{total_files} files"));
                main.enable_steady_tick(Duration::from_millis(250));
                let shown = workers.clamp(1, MAX_WORKER_LINES);
                let style = ProgressStyle::with_template("{prefix:>15} {wide_msg}").ok();
                let workers = (0..shown)
                    .map(|i| {
                        let b = multi.add(ProgressBar::new_spinner());
                        if let Some(s) = &style {
                            b.set_style(s.clone());
                        }
                        b.set_prefix(format!("worker {}", i + 1));
                        b.set_message("idle");
                        b
                    })
                    .collect();
                Kind::Bars {
                    multi,
                    main,
                    workers,
                }
            }
            ProgressMode::Quiet => Kind::Quiet(Mutex::new(sink)),
            _ => Kind::Lines(Mutex::new(sink)),
        };
        Progress {
            total_files,
            done: AtomicU64::new(0),
            kind,
        }
    }

    /// A worker (rayon thread index) starts on `rel`.
    pub(crate) fn start(&self, worker: Option<usize>, rel: &str) {
        if let Kind::Bars { workers, .. } = &self.kind {
            if let Some(b) = worker.and_then(|w| workers.get(w)) {
                b.set_message(rel.to_string());
            }
        }
    }

    /// A capture is finished (analysed, reused or failed).
    pub(crate) fn finish(&self, worker: Option<usize>, row: &SummaryRow, reused: bool) {
        let done = self.done.fetch_add(1, Ordering::SeqCst) + 1;
        let failed = matches!(row.verdict, RowVerdict::Unreadable | RowVerdict::Error);
        match &self.kind {
            Kind::Bars {
                multi,
                main,
                workers,
            } => {
                main.inc(row.bytes);
                main.set_prefix(format!("{done}/{} files", self.total_files));
                if let Some(b) = worker.and_then(|w| workers.get(w)) {
                    b.set_message("idle");
                }
                if failed {
                    let _ = multi.println(failure_line(row));
                }
            }
            Kind::Lines(sink) => {
                let line = if failed {
                    failure_line(row)
                } else {
                    format!(
                        "{} [{done}/{}]",
                        outcome_line(row, reused),
                        self.total_files
                    )
                };
                write_line(sink, &line);
            }
            Kind::Quiet(_) => {}
        }
    }

    /// Print a line whatever the mode (hints and the final line).
    pub(crate) fn line(&self, text: &str) {
        match &self.kind {
            Kind::Bars { multi, .. } => {
                let _ = multi.println(text);
            }
            Kind::Lines(sink) | Kind::Quiet(sink) => write_line(sink, text),
        }
    }

    /// Print a hint, except when quiet.
    pub(crate) fn hint(&self, text: &str) {
        if !matches!(self.kind, Kind::Quiet(_)) {
            self.line(text);
        }
    }

    /// Remove the bars (before the final line).
    pub(crate) fn clear(&self) {
        if let Kind::Bars { main, workers, .. } = &self.kind {
            for w in workers {
                w.finish_and_clear();
            }
            main.finish_and_clear();
        }
    }
}

fn write_line(sink: &Mutex<Box<dyn Write + Send>>, line: &str) {
    if let Ok(mut w) = sink.lock() {
        // stderr going away is no reason to stop the batch.
        let _ = writeln!(w, "{line}");
        let _ = w.flush();
    }
}

/// `path: problem`.
pub(crate) fn failure_line(row: &SummaryRow) -> String {
    format!("{}: {}", row.path, row.error.as_deref().unwrap_or("failed"))
}

/// `path: pass, 3 bursts, EVM 2.31 % rms (worst 3.02 %)`.
pub(crate) fn outcome_line(row: &SummaryRow, reused: bool) -> String {
    let mut s = format!("{}: {}", row.path, row.verdict.as_str());
    if let Some(b) = row.bursts {
        s.push_str(&format!(", {b} burst{}", if b == 1 { "" } else { "s" }));
    }
    if let (Some(e), Some(w)) = (row.evm_rms_percent, row.evm_worst_percent) {
        s.push_str(&format!(", EVM {e:.2} % rms (worst {w:.2} %)"));
    }
    match row.ser {
        Some(0.0) => s.push_str(", SER 0"),
        Some(ser) => s.push_str(&format!(", SER {ser:.2e}")),
        None => {}
    }
    if reused {
        s.push_str(" (report up to date, not re-run)");
    }
    s
}
