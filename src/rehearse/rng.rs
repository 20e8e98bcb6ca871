//! The random stream of one simulated data set: SplitMix64 (Steele, Lea and Flood 2014,
//! "Fast splittable pseudorandom number generators", OOPSLA), seeded from (seed, replication)
//! so a replication's data do not depend on which thread simulates it or in what order.

use crate::random::{mix, SplitMix64, GOLDEN};

/// A SplitMix64 stream with the rehearsal's own uniform (53 bits on [0, 1)) and normal.
#[derive(Debug, Clone)]
pub struct Stream(SplitMix64);

impl Stream {
    /// The stream of replication `r` under `seed`.
    pub fn new(seed: u64, r: u64) -> Self {
        Stream(SplitMix64::new(mix(
            seed ^ mix(r.wrapping_add(1).wrapping_mul(GOLDEN))
        )))
    }

    /// Next 64 random bits.
    pub fn next_u64(&mut self) -> u64 {
        self.0.next_u64()
    }

    /// A uniform number in [0, 1) with 53 random bits.
    pub fn uniform(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
    }

    /// A uniform integer in 0..m (m ≥ 1), exactly uniform (Lemire 2019, "Fast random integer
    /// generation in an interval", ACM TOMACS 29(1)).
    pub fn below(&mut self, m: u64) -> u64 {
        self.0.below(m)
    }

    /// A standard normal draw.
    ///
    /// # Formula
    /// Box and Muller (1958, Ann. Math. Statist. 29(2)): z = √(−2 ln u₁) cos(2π u₂) with
    /// u₁ in (0, 1]; the sine partner is not kept, so every call uses two uniforms.
    pub fn normal(&mut self) -> f64 {
        let u1 = 1.0 - self.uniform();
        let u2 = self.uniform();
        (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn streams_depend_on_seed_and_replication_only() {
        let a: Vec<u64> = (0..4).map(|_| Stream::new(7, 3).next_u64()).collect();
        assert!(a.windows(2).all(|w| w[0] == w[1]));
        assert_ne!(Stream::new(7, 3).next_u64(), Stream::new(7, 4).next_u64());
        assert_ne!(Stream::new(7, 3).next_u64(), Stream::new(8, 3).next_u64());
    }

    #[test]
    fn normal_draws_have_mean_zero_and_unit_variance() {
        // 200,000 draws: the mean has standard error 1/√n ≈ 0.0022, the variance about
        // √(2/n) ≈ 0.0032 (normal moments); bounds at about 4.5 standard errors.
        let mut s = Stream::new(1, 0);
        let n = 200_000;
        let x: Vec<f64> = (0..n).map(|_| s.normal()).collect();
        let mean = x.iter().sum::<f64>() / n as f64;
        let var = x.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1) as f64;
        assert!(mean.abs() < 0.01, "mean {mean}");
        assert!((var - 1.0).abs() < 0.015, "variance {var}");
        // P(Z < 1.959963985) = 0.975 (standard normal table).
        let below = x.iter().filter(|v| **v < 1.959_963_985).count() as f64 / n as f64;
        assert!((below - 0.975).abs() < 0.0016, "share below 1.96: {below}");
    }
}
