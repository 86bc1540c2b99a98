//! A small deterministic generator for property-style unit tests (test builds only).

/// Marsaglia's xorshift64 (shifts 13, 7, 17): G. Marsaglia, "Xorshift RNGs", Journal of
/// Statistical Software 8(14), 2003. Each call returns the next state; `seed` must not be 0.
pub fn xorshift(seed: u64) -> impl FnMut() -> u64 {
    let mut state = seed;
    move || {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        state
    }
}
