//! Polygon overlay (being written).
