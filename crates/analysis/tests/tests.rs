//! Integration tests of the analysis crate, one module per analysis.

// Sweeps: same bits for any thread count and for merged shards, the buck's
// CCM/DCM conversion ratios over a duty sweep, Monte Carlo statistics,
// failing corners, bad input, and the committed JSON Schema.
mod sweep;
