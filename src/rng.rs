//! Deterministic pseudo-random numbers for the demo field, tests and benchmarks:
//! the same seed gives the same numbers on every run, with no dependency.

/// A small deterministic random-number generator: SplitMix64 (Steele, Lea & Flood
/// 2014) for uniform 64-bit words, Box–Muller (Box & Muller 1958) for normal deviates.
#[derive(Debug, Clone)]
pub struct Rng {
    state: u64,
    spare_normal: Option<f64>,
}

impl Rng {
    /// A generator for `seed` and a named stream; different names give independent
    /// sequences for the same seed (the name is hashed with 64-bit FNV-1a).
    pub fn new(seed: u64, stream: &str) -> Rng {
        // FNV-1a, 64-bit: offset basis 0xcbf29ce484222325, prime 0x100000001b3
        // (Fowler, Noll & Vo; common practice).
        let mut h: u64 = 0xcbf2_9ce4_8422_2325;
        for b in stream.bytes() {
            h ^= u64::from(b);
            h = h.wrapping_mul(0x0000_0100_0000_01b3);
        }
        let mut rng = Rng {
            state: seed ^ h,
            spare_normal: None,
        };
        // Discard one output so that nearby seeds start far apart.
        rng.next_u64();
        rng
    }

    /// The next 64-bit word (SplitMix64: golden-ratio increment 0x9e3779b97f4a7c15,
    /// then the two multiply–xorshift rounds of Steele, Lea & Flood 2014).
    pub fn next_u64(&mut self) -> u64 {
        self.state = self.state.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = self.state;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^ (z >> 31)
    }

    /// A uniform deviate in [0, 1) with 53 random bits.
    pub fn uniform(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
    }

    /// A uniform deviate in [`lo`, `hi`).
    pub fn range(&mut self, lo: f64, hi: f64) -> f64 {
        lo + (hi - lo) * self.uniform()
    }

    /// A uniform integer in [0, `n`); `n` must be positive.
    pub fn below(&mut self, n: usize) -> usize {
        ((self.uniform() * n as f64) as usize).min(n - 1)
    }

    /// A standard normal deviate (Box–Muller: r = √(−2 ln u₁), θ = 2π u₂, giving
    /// r cos θ and r sin θ; the second is kept for the next call).
    pub fn normal(&mut self) -> f64 {
        if let Some(z) = self.spare_normal.take() {
            return z;
        }
        let u1 = 1.0 - self.uniform(); // in (0, 1], so ln is finite
        let u2 = self.uniform();
        let r = (-2.0 * u1.ln()).sqrt();
        let (s, c) = (std::f64::consts::TAU * u2).sin_cos();
        self.spare_normal = Some(r * s);
        r * c
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn splitmix_streams_are_reproducible_and_distinct() {
        let mut a = Rng::new(7, "truth");
        let mut b = Rng::new(7, "truth");
        let mut c = Rng::new(7, "kos");
        let xa: Vec<u64> = (0..4).map(|_| a.next_u64()).collect();
        let xb: Vec<u64> = (0..4).map(|_| b.next_u64()).collect();
        let xc: Vec<u64> = (0..4).map(|_| c.next_u64()).collect();
        assert_eq!(xa, xb);
        assert_ne!(xa, xc);
    }

    #[test]
    fn splitmix_reference_value() {
        // SplitMix64 from state 0: the first output is 0xe220a8397b1dcdaf (the
        // published reference sequence of the algorithm, common practice).
        let mut rng = Rng {
            state: 0,
            spare_normal: None,
        };
        assert_eq!(rng.next_u64(), 0xe220_a839_7b1d_cdaf);
    }

    #[test]
    fn normal_deviates_have_unit_variance() {
        let mut rng = Rng::new(1, "normal");
        let n = 200_000;
        let (mut sum, mut sum2) = (0.0, 0.0);
        for _ in 0..n {
            let z = rng.normal();
            sum += z;
            sum2 += z * z;
        }
        let mean = sum / n as f64;
        let var = sum2 / n as f64 - mean * mean;
        // Standard errors: 1/√n = 0.0022 for the mean, √(2/n) = 0.0032 for the variance.
        assert!(mean.abs() < 0.01, "mean {mean}");
        assert!((var - 1.0).abs() < 0.015, "variance {var}");
    }

    #[test]
    fn uniform_stays_in_range() {
        let mut rng = Rng::new(3, "u");
        for _ in 0..10_000 {
            let u = rng.uniform();
            assert!((0.0..1.0).contains(&u));
            assert!(rng.below(5) < 5);
        }
    }
}
