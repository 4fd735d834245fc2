mod profile;
mod signal;
mod synth;
