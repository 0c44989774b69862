//! A small deterministic random-number generator for gauge noise:
//! splitmix64 to seed, xoshiro256** to draw, Box–Muller for normal deviates.
//!
//! Reproducible across platforms: the same seed gives the same sequence.

/// One step of splitmix64; used to expand a seed into generator state.
pub fn splitmix64(state: &mut u64) -> u64 {
    *state = state.wrapping_add(0x9e37_79b9_7f4a_7c15);
    let mut z = *state;
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    z ^ (z >> 31)
}

/// xoshiro256** generator with a cached second Box–Muller deviate.
#[derive(Debug, Clone, PartialEq)]
pub struct Rng {
    s: [u64; 4],
    spare: Option<f64>,
}

impl Rng {
    /// A generator for `seed` and an independent `stream` number (one stream
    /// per gauge, so that adding a gauge does not change the others' noise).
    pub fn new(seed: u64, stream: u64) -> Self {
        let mut sm = seed ^ stream.wrapping_mul(0xd1b5_4a32_d192_ed03);
        let mut s = [0u64; 4];
        for x in &mut s {
            *x = splitmix64(&mut sm);
        }
        // An all-zero state would stay zero; splitmix64 never yields four
        // zeros in a row, but guard anyway.
        if s == [0; 4] {
            s[0] = 1;
        }
        Rng { s, spare: None }
    }

    /// The next 64 random bits.
    pub fn next_u64(&mut self) -> u64 {
        let result = self.s[1].wrapping_mul(5).rotate_left(7).wrapping_mul(9);
        let t = self.s[1] << 17;
        self.s[2] ^= self.s[0];
        self.s[3] ^= self.s[1];
        self.s[1] ^= self.s[2];
        self.s[0] ^= self.s[3];
        self.s[2] ^= t;
        self.s[3] = self.s[3].rotate_left(45);
        result
    }

    /// Uniform in [0, 1), 53 bits.
    pub fn uniform(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
    }

    /// Standard normal deviate (Box–Muller: r = √(−2 ln u₁), θ = 2π u₂).
    pub fn normal(&mut self) -> f64 {
        if let Some(z) = self.spare.take() {
            return z;
        }
        // u1 in (0, 1] so that ln u1 is finite.
        let u1 = 1.0 - self.uniform();
        let u2 = self.uniform();
        let r = (-2.0 * u1.ln()).sqrt();
        let theta = std::f64::consts::TAU * u2;
        self.spare = Some(r * theta.sin());
        r * theta.cos()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn same_seed_same_stream() {
        let mut a = Rng::new(7, 1);
        let mut b = Rng::new(7, 1);
        for _ in 0..100 {
            assert_eq!(a.next_u64(), b.next_u64());
        }
        let mut c = Rng::new(7, 2);
        assert_ne!(Rng::new(7, 1).next_u64(), c.next_u64());
    }

    #[test]
    fn normal_has_unit_moments() {
        let mut r = Rng::new(42, 0);
        let n = 50_000;
        let xs: Vec<f64> = (0..n).map(|_| r.normal()).collect();
        let mean = xs.iter().sum::<f64>() / n as f64;
        let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / n as f64;
        assert!(mean.abs() < 0.02, "mean {mean}");
        assert!((var - 1.0).abs() < 0.03, "variance {var}");
        assert!(xs.iter().all(|x| x.is_finite()));
    }

    #[test]
    fn uniform_stays_in_unit_interval() {
        let mut r = Rng::new(0, 0);
        for _ in 0..10_000 {
            let u = r.uniform();
            assert!((0.0..1.0).contains(&u));
        }
    }
}
