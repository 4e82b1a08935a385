//! Deterministic normal deviates (xorshift64 + Box–Muller) for synthetic
//! data with noise, shared by the fit tests and the fit benchmark so both
//! draw the same sequence from the same seed.

/// A xorshift64 generator; the state is the seed (must not be 0).
pub struct Noise(pub u64);

impl Noise {
    /// A uniform deviate in [0, 1).
    pub fn uniform(&mut self) -> f64 {
        let mut x = self.0;
        x ^= x << 13;
        x ^= x >> 7;
        x ^= x << 17;
        self.0 = x;
        (x >> 11) as f64 / (1u64 << 53) as f64
    }

    /// A standard normal deviate.
    pub fn normal(&mut self) -> f64 {
        let u1 = self.uniform().max(1e-300);
        let u2 = self.uniform();
        (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
    }
}
