//! The one pseudo-random generator of the crate: seeded, the same on every
//! machine (randomized norm bounds, Lanczos starts, synthetic instances).

/// splitmix64, a small fixed pseudo-random generator.
///
/// # References
/// Steele, Lea & Flood, "Fast splittable pseudorandom number generators",
/// OOPSLA 2014.
#[derive(Debug, Clone)]
pub struct Rng(pub u64);

impl Rng {
    /// Next 64 random bits.
    pub fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// Uniform in [0, 1).
    pub fn uniform(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 / (1u64 << 53) as f64
    }

    /// Uniform in [a, b).
    pub fn range(&mut self, a: f64, b: f64) -> f64 {
        a + (b - a) * self.uniform()
    }

    /// Uniform index below `n`.
    pub fn below(&mut self, n: usize) -> usize {
        (self.uniform() * n as f64) as usize % n.max(1)
    }

    /// A random unit vector in R^p.
    pub fn unit_vector(&mut self, p: usize) -> Vec<f64> {
        loop {
            let v: Vec<f64> = (0..p).map(|_| self.range(-1.0, 1.0)).collect();
            let n = v.iter().map(|x| x * x).sum::<f64>().sqrt();
            if n > 0.2 {
                return v.into_iter().map(|x| x / n).collect();
            }
        }
    }
}
