//! Built-in parametric shapes (stub, being written).
