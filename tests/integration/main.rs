mod profile;
mod sample_captures;
mod signal;
mod synth;
