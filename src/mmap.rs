//! Memory-mapping (being written).
