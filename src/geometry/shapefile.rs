//! Shape files (stub, being written).
