//! Pruning filters over source-grouped phrase pairs (to be written).
