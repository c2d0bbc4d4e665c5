//! FITS binary tables (placeholder: being written).
