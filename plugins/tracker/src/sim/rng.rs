//! Seeded pseudo-random numbers for the simulator's noise and tach jitter.
//!
//! A recording must be reproducible from its seed on every platform and independent of how it is
//! cut into blocks, so the generator is written here rather than taken from a crate whose stream
//! could change between versions. Each consumer (the tach, each channel) owns its own stream, seeded
//! from the user's seed and a stream number, so adding a channel does not change the others.

/// SplitMix64 (Steele, Lea & Flood, "Fast splittable pseudorandom number generators", OOPSLA 2014):
/// used only to expand a seed into the state of the main generator.
#[derive(Clone, Debug)]
pub(crate) struct SplitMix64(u64);

impl SplitMix64 {
    pub(crate) fn new(seed: u64) -> Self {
        Self(seed)
    }

    pub(crate) fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
}

/// xoshiro256++ (Blackman & Vigna, "Scrambled linear pseudorandom number generators", ACM TOMS 2021)
/// with a Gaussian sampler by the polar form of the Box-Muller transform (Marsaglia's method, no
/// trigonometric call per sample).
#[derive(Clone, Debug)]
pub(crate) struct Rng {
    s: [u64; 4],
    spare: Option<f64>,
}

impl Rng {
    /// Stream `stream` of the generator seeded by `seed`.
    pub(crate) fn new(seed: u64, stream: u64) -> Self {
        let mut sm = SplitMix64::new(seed ^ stream.wrapping_mul(0xD1B5_4A32_D192_ED03));
        let mut s = [0u64; 4];
        for word in &mut s {
            *word = sm.next_u64();
        }
        if s == [0; 4] {
            // The all-zero state is the one fixed point of xoshiro; SplitMix64 never yields four zeros
            // in a row in practice, but keep the invariant explicit.
            s[0] = 1;
        }
        Self { s, spare: None }
    }

    #[inline]
    pub(crate) fn next_u64(&mut self) -> u64 {
        let [s0, s1, s2, s3] = self.s;
        let result = s0.wrapping_add(s3).rotate_left(23).wrapping_add(s0);
        let t = s1 << 17;
        let mut s = [s0, s1, s2 ^ s0, s3 ^ s1];
        s[1] ^= s[2];
        s[0] ^= s[3];
        s[2] ^= t;
        s[3] = s[3].rotate_left(45);
        self.s = s;
        result
    }

    /// Uniform in [0, 1), 53 random bits.
    #[inline]
    pub(crate) fn uniform(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
    }

    /// Standard normal deviate (mean 0, variance 1).
    #[inline]
    pub(crate) fn gaussian(&mut self) -> f64 {
        if let Some(g) = self.spare.take() {
            return g;
        }
        loop {
            let u = 2.0 * self.uniform() - 1.0;
            let v = 2.0 * self.uniform() - 1.0;
            let s = u * u + v * v;
            if s > 0.0 && s < 1.0 {
                let k = (-2.0 * s.ln() / s).sqrt();
                self.spare = Some(v * k);
                return u * k;
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn splitmix_matches_reference_output() {
        // First output of SplitMix64 seeded with 0 (reference implementation by S. Vigna,
        // splitmix64.c; value from memory).
        let mut sm = SplitMix64::new(0);
        assert_eq!(sm.next_u64(), 0xE220_A839_7B1D_CDAF);
    }

    #[test]
    fn gaussian_has_unit_variance_and_streams_differ() {
        // Moments of a standard normal (common practice): mean 0, variance 1, fourth moment 3.
        let mut rng = Rng::new(7, 1);
        let n = 200_000;
        let (mut m1, mut m2, mut m4) = (0.0, 0.0, 0.0);
        for _ in 0..n {
            let g = rng.gaussian();
            m1 += g;
            m2 += g * g;
            m4 += g * g * g * g;
        }
        let nf = n as f64;
        assert!((m1 / nf).abs() < 0.01, "mean {}", m1 / nf);
        assert!((m2 / nf - 1.0).abs() < 0.01, "variance {}", m2 / nf);
        assert!((m4 / nf - 3.0).abs() < 0.06, "fourth moment {}", m4 / nf);

        let mut a = Rng::new(7, 1);
        let mut b = Rng::new(7, 2);
        let same = (0..64).filter(|_| a.next_u64() == b.next_u64()).count();
        assert_eq!(same, 0);
    }
}
