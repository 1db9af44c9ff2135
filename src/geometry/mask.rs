//! Mask images (stub, being written).
