//! iqaudit integration tests: one binary, one module per topic.
//!
//! Takes in: committed vectors under tests/vectors and tests/data, and captures
//! generated in per-test temporary directories. Gives out: pass/fail.

mod analyse;
mod any_rate;
mod bad_input;
mod bad_inputs;
mod batch;
mod batch_cli;
mod batch_kill;
mod bounded_memory;
mod bounds;
mod capture_formats;
mod carrier;
mod cli_conventions;
mod clock;
mod fuzz_seeds;
mod info_cli;
mod large_capture;
mod profile;
mod receiver;
mod recheck_outputs;
mod sample_captures;
mod schemas;
mod segments;
mod sidecars;
mod sigmf_library;
mod sigmf_reference;
mod signal;
mod sync;
mod synth;
mod timing;
mod util;
mod wav_edges;
