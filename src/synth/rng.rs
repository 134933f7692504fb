//! The synthesizer's own pseudo-random numbers: SplitMix64 for seeding and xoshiro256** for the
//! stream. Written here rather than taken from a crate so that the bytes of every generated scene
//! depend only on `--seed` and this file, never on a dependency's version.
//!
//! Invariant: a scene's stream depends only on (seed, scene index), so scene k is the same
//! whether 60 or 2,000 scenes are generated and whichever thread renders it.

/// One SplitMix64 step: advances `state` and returns a well-mixed 64-bit value.
///
/// # References
/// Steele, Lea, Flood: "Fast splittable pseudorandom number generators", OOPSLA 2014.
pub fn splitmix64(state: &mut u64) -> u64 {
    *state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
    let mut z = *state;
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// xoshiro256** generator.
///
/// # References
/// Blackman, Vigna: "Scrambled linear pseudorandom number generators", ACM TOMS 47(4), 2021.
#[derive(Debug, Clone)]
pub struct Rng {
    s: [u64; 4],
}

impl Rng {
    /// A generator whose whole state comes from SplitMix64 seeded with `seed`.
    pub fn new(seed: u64) -> Rng {
        let mut sm = seed;
        let s = [
            splitmix64(&mut sm),
            splitmix64(&mut sm),
            splitmix64(&mut sm),
            splitmix64(&mut sm),
        ];
        // SplitMix64 never yields four zero words from one seed, but keep the guarantee explicit.
        if s == [0; 4] {
            return Rng { s: [1, 2, 3, 4] };
        }
        Rng { s }
    }

    /// The independent stream for one numbered item (a scene) under a run seed.
    pub fn for_stream(seed: u64, index: u64) -> Rng {
        let mut sm = seed ^ 0x5EED_5CE7_E000_0000;
        let a = splitmix64(&mut sm);
        let mut si = index.wrapping_mul(0xD1B5_4A32_D192_ED03) ^ a;
        Rng::new(splitmix64(&mut si))
    }

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

    /// Uniform in [0, 1) with 53 random bits.
    pub fn unit(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
    }

    /// Uniform in [lo, hi).
    pub fn range(&mut self, lo: f64, hi: f64) -> f64 {
        lo + (hi - lo) * self.unit()
    }

    /// Uniform integer in `lo..=hi` (Lemire's multiply-and-reject, so no modulo bias).
    /// Returns `lo` when `hi < lo`.
    pub fn int(&mut self, lo: u32, hi: u32) -> u32 {
        if hi <= lo {
            return lo;
        }
        let span = u64::from(hi - lo) + 1;
        loop {
            let m = u128::from(self.next_u64()) * u128::from(span);
            let low = m as u64;
            if low >= span.wrapping_neg() % span {
                return lo + (m >> 64) as u32;
            }
        }
    }

    /// True with probability `p` (p ≤ 0 never, p ≥ 1 always).
    pub fn chance(&mut self, p: f64) -> bool {
        self.unit() < p
    }

    /// Index drawn with the given non-negative weights; 0 when they sum to zero.
    pub fn weighted(&mut self, weights: &[f64]) -> usize {
        let total: f64 = weights.iter().filter(|w| **w > 0.0).sum();
        if weights.is_empty() || total <= 0.0 {
            return 0;
        }
        let mut x = self.unit() * total;
        for (i, w) in weights.iter().enumerate() {
            if *w > 0.0 {
                if x < *w {
                    return i;
                }
                x -= w;
            }
        }
        weights.iter().rposition(|w| *w > 0.0).unwrap_or(0)
    }

    /// A uniformly chosen index below `n`; 0 when `n` is 0.
    pub fn index(&mut self, n: usize) -> usize {
        if n == 0 {
            return 0;
        }
        self.int(0, (n - 1).min(u32::MAX as usize) as u32) as usize
    }

    /// Fisher–Yates shuffle.
    pub fn shuffle<T>(&mut self, items: &mut [T]) {
        for i in (1..items.len()).rev() {
            let j = self.index(i + 1);
            items.swap(i, j);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn splitmix_reference_values() {
        // The widely published SplitMix64 test vector: first outputs for seed 1234567.
        let mut s = 1_234_567u64;
        assert_eq!(splitmix64(&mut s), 6_457_827_717_110_365_317);
        assert_eq!(splitmix64(&mut s), 3_203_168_211_198_807_973);
    }

    #[test]
    fn streams_are_reproducible_and_distinct() {
        let a: Vec<u64> = (0..4).map(|_| Rng::for_stream(7, 3).next_u64()).collect();
        assert!(a.windows(2).all(|w| w[0] == w[1]));
        assert_ne!(
            Rng::for_stream(7, 3).next_u64(),
            Rng::for_stream(7, 4).next_u64()
        );
        assert_ne!(
            Rng::for_stream(7, 3).next_u64(),
            Rng::for_stream(8, 3).next_u64()
        );
    }

    #[test]
    fn int_stays_in_range_and_hits_both_ends() {
        let mut r = Rng::new(1);
        let mut seen = [false; 5];
        for _ in 0..1000 {
            let v = r.int(3, 7);
            assert!((3..=7).contains(&v));
            seen[(v - 3) as usize] = true;
        }
        assert!(seen.iter().all(|s| *s));
        assert_eq!(r.int(5, 2), 5);
        assert_eq!(r.index(0), 0);
    }

    #[test]
    fn unit_in_half_open_interval() {
        let mut r = Rng::new(99);
        for _ in 0..10_000 {
            let u = r.unit();
            assert!((0.0..1.0).contains(&u));
        }
    }
}
