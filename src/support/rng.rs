//! A small seeded random number generator for the planning simulations:
//! xoshiro256** seeded through SplitMix64, with normal deviates by the
//! Box–Muller transform. Written here so that the simulation's stream is
//! fixed by this file alone (no dependency's version can change it).

/// SplitMix64 (Steele, Lea & Flood 2014, *OOPSLA*; the constants of Vigna's
/// public-domain C version at prng.di.unimi.it), used to expand one 64-bit
/// seed into the 256-bit state of [`Xoshiro256StarStar`].
///
/// # Formula
/// s ← s + 0x9E3779B97F4A7C15; z = s; z ← (z ⊕ z≫30)·0xBF58476D1CE4E5B9;
/// z ← (z ⊕ z≫27)·0x94D049BB133111EB; output z ⊕ z≫31 (all mod 2⁶⁴).
#[derive(Debug, Clone)]
pub struct SplitMix64(u64);

impl SplitMix64 {
    /// A generator starting from `seed`.
    pub fn new(seed: u64) -> Self {
        SplitMix64(seed)
    }

    /// The next 64-bit output.
    pub fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
}

/// xoshiro256** (Blackman & Vigna 2021, *ACM Trans. Math. Softw.* 47:36).
///
/// # Formula
/// output = rotl(s₁·5, 7)·9; t = s₁≪17; s₂ ⊕= s₀; s₃ ⊕= s₁; s₁ ⊕= s₂;
/// s₀ ⊕= s₃; s₂ ⊕= t; s₃ = rotl(s₃, 45).
#[derive(Debug, Clone)]
pub struct Xoshiro256StarStar {
    s: [u64; 4],
    spare_normal: Option<f64>,
}

impl Xoshiro256StarStar {
    /// A generator with the state given directly (must not be all zero).
    pub fn from_state(s: [u64; 4]) -> Self {
        Xoshiro256StarStar {
            s,
            spare_normal: None,
        }
    }

    /// A generator whose state is four SplitMix64 outputs from `seed`.
    pub fn seed_from_u64(seed: u64) -> Self {
        let mut sm = SplitMix64::new(seed);
        Self::from_state([sm.next_u64(), sm.next_u64(), sm.next_u64(), sm.next_u64()])
    }

    /// The next 64-bit output.
    pub fn next_u64(&mut self) -> u64 {
        let s = &mut self.s;
        let result = s[1].wrapping_mul(5).rotate_left(7).wrapping_mul(9);
        let t = s[1] << 17;
        s[2] ^= s[0];
        s[3] ^= s[1];
        s[1] ^= s[2];
        s[0] ^= s[3];
        s[2] ^= t;
        s[3] = s[3].rotate_left(45);
        result
    }

    /// A uniform deviate in the open interval (0, 1): the top 53 bits plus
    /// one half, times 2⁻⁵³.
    pub fn next_open01(&mut self) -> f64 {
        ((self.next_u64() >> 11) as f64 + 0.5) * (1.0 / (1u64 << 53) as f64)
    }

    /// A standard normal deviate by the Box–Muller transform (Box & Muller
    /// 1958, *Ann. Math. Statist.* 29:610): with u₁, u₂ uniform on (0, 1),
    /// √(−2 ln u₁)·cos(2πu₂) and √(−2 ln u₁)·sin(2πu₂) are independent N(0, 1);
    /// the second is kept for the next call.
    pub fn next_normal(&mut self) -> f64 {
        if let Some(z) = self.spare_normal.take() {
            return z;
        }
        let u1 = self.next_open01();
        let u2 = self.next_open01();
        let r = (-2.0 * u1.ln()).sqrt();
        let a = 2.0 * std::f64::consts::PI * u2;
        self.spare_normal = Some(r * a.sin());
        r * a.cos()
    }
}

/// The generator of block `b` of a simulation with seed `seed`:
/// xoshiro256** seeded (through SplitMix64) from SplitMix64(seed)₁ ⊕ b, the
/// first SplitMix64 output of the seed exclusive-or the block index.
pub fn block_rng(seed: u64, block: u64) -> Xoshiro256StarStar {
    let mixed = SplitMix64::new(seed).next_u64();
    Xoshiro256StarStar::seed_from_u64(mixed ^ block)
}

/// xorshift64* (Vigna 2016, *ACM TOMS* 42:30; the multiplier of the
/// paper), the small generator of the seeded property-style tests that draw
/// invented files and numbers (`input::table_pieces`, `sites::pieces`,
/// `sites::plain`): one stream for all of them, fixed by this file.
#[cfg(test)]
pub(crate) struct TestDraws(pub u64);

#[cfg(test)]
impl TestDraws {
    /// A draw from 0..n (n > 0; the top 31 bits, reduced modulo n).
    pub fn below(&mut self, n: u64) -> u64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        (self.0.wrapping_mul(0x2545_F491_4F6C_DD1D) >> 33) % n
    }

    /// True with probability `per_thousand` / 1000.
    pub fn chance(&mut self, per_thousand: u64) -> bool {
        self.below(1000) < per_thousand
    }

    /// One of `items`, each as likely.
    pub fn pick<'a>(&mut self, items: &[&'a str]) -> &'a str {
        items[self.below(items.len() as u64) as usize]
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Reference vectors printed by tests/reference/power_values.py, a plain
    // Python transcription of Vigna's C reference code.
    #[test]
    fn splitmix64_reference_vector() {
        let mut g = SplitMix64::new(1_234_567);
        let want = [
            6457827717110365317u64,
            3203168211198807973,
            9817491932198370423,
            4593380528125082431,
            16408922859458223821,
        ];
        for w in want {
            assert_eq!(g.next_u64(), w);
        }
    }

    #[test]
    fn xoshiro_reference_vectors() {
        let mut g = Xoshiro256StarStar::from_state([1, 2, 3, 4]);
        let want = [
            11520u64,
            0,
            1509978240,
            1215971899390074240,
            1216172134540287360,
            607988272756665600,
        ];
        for w in want {
            assert_eq!(g.next_u64(), w);
        }
        let mut g = Xoshiro256StarStar::seed_from_u64(42);
        for w in [
            1546998764402558742u64,
            6990951692964543102,
            12544586762248559009,
        ] {
            assert_eq!(g.next_u64(), w);
        }
    }

    #[test]
    fn normal_deviates_have_mean_0_and_variance_1() {
        let mut g = Xoshiro256StarStar::seed_from_u64(7);
        let n = 200_000;
        let xs: Vec<f64> = (0..n).map(|_| g.next_normal()).collect();
        let mean = xs.iter().sum::<f64>() / n as f64;
        let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1) as f64;
        // Five standard errors: SE(mean) = 1/√n, SE(var) ≈ √(2/n).
        assert!(mean.abs() < 5.0 / (n as f64).sqrt(), "{mean}");
        assert!((var - 1.0).abs() < 5.0 * (2.0 / n as f64).sqrt(), "{var}");
        // Consecutive deviates (the two halves of a Box–Muller pair among
        // them) are uncorrelated: SE of a correlation ≈ 1/√n.
        let lag1 = xs
            .windows(2)
            .map(|w| (w[0] - mean) * (w[1] - mean))
            .sum::<f64>()
            / ((n - 1) as f64 * var);
        assert!(lag1.abs() < 5.0 / (n as f64).sqrt(), "{lag1}");
    }
}
