//! Geodesic areas (being written).
