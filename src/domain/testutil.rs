//! Test helpers shared by the domain's property tests: a small deterministic pseudo-random
//! generator (xorshift64*), so every run draws the same cases and a failure can be replayed.
//!
//! Test-only; owns no engineering.

/// xorshift64* (Vigna 2016). Deterministic for a given seed; never seeded from the clock.
pub struct Rng(u64);

impl Rng {
    /// A generator from a non-zero seed (zero is replaced, since xorshift sticks at zero).
    pub fn new(seed: u64) -> Self {
        Rng(if seed == 0 {
            0x9E37_79B9_7F4A_7C15
        } else {
            seed
        })
    }

    /// The next 64 random bits.
    pub fn next_u64(&mut self) -> u64 {
        let mut x = self.0;
        x ^= x >> 12;
        x ^= x << 25;
        x ^= x >> 27;
        self.0 = x;
        x.wrapping_mul(0x2545_F491_4F6C_DD1D)
    }

    /// Uniform in [0, 1).
    pub fn unit(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 / (1u64 << 53) as f64
    }

    /// Uniform in [lo, hi).
    pub fn range(&mut self, lo: f64, hi: f64) -> f64 {
        lo + (hi - lo) * self.unit()
    }

    /// Log-uniform in [lo, hi) (both > 0), for permeabilities and other wide-ranging values.
    pub fn log_range(&mut self, lo: f64, hi: f64) -> f64 {
        (lo.ln() + (hi.ln() - lo.ln()) * self.unit()).exp()
    }

    /// Uniform integer in [lo, hi].
    pub fn int(&mut self, lo: usize, hi: usize) -> usize {
        lo + (self.next_u64() % (hi - lo + 1) as u64) as usize
    }
}

/// Relative closeness: |a − b| ≤ tol·|b| (or ≤ tol when b is zero).
pub fn rel_close(a: f64, b: f64, tol: f64) -> bool {
    let scale = if b == 0.0 { 1.0 } else { b.abs() };
    (a - b).abs() <= tol * scale
}

/// Absolute closeness: |a − b| ≤ tol.
pub fn close(a: f64, b: f64, tol: f64) -> bool {
    (a - b).abs() <= tol
}
