//! Score quantization codebooks (being written).
