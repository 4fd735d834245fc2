mod batch;
mod signal;
