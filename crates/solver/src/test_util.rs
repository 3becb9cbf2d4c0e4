//! Helpers shared by the unit tests.

/// A repeatable uniform generator on [0, 1) (xorshift64, 53 bits), so that
/// randomised tests see the same cases on every machine.
pub(crate) fn uniform(mut seed: u64) -> impl FnMut() -> f64 {
    move || {
        seed ^= seed << 13;
        seed ^= seed >> 7;
        seed ^= seed << 17;
        (seed >> 11) as f64 / (1u64 << 53) as f64
    }
}
