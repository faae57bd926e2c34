//! Name matching (being written).
