mod signal;
