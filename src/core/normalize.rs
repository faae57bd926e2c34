//! Name normalization (being written).
