//! Integration tests of the analysis crate, one module per analysis.
