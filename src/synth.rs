//! Synthetic phrase tables of realistic shape, for benchmarks (to be written).
