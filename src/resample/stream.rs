//! Stream derivation and consumption, exactly as METHODS §10.2–10.3 fix them.
//!
//! The generator is PCG64 (XSL-RR 128/64) from the `rand_pcg` crate
//! (`Pcg64::from_seed`, implementation (b) of METHODS §10.1). Keys are mixed into a
//! 256-bit seed with SplitMix64's finaliser (Steele, Lea & Flood 2014). The ways of
//! consuming the stream (Lemire's bounded integers, Fisher–Yates, Rademacher bits,
//! uniform doubles) are written out here rather than taken from library helpers whose
//! algorithms may change between versions: they are part of the reproducibility contract.

use rand_core::{Rng, SeedableRng};
use rand_pcg::Pcg64;

/// Resamples per chunk: a fixed constant of the reproducibility contract (changing it
/// changes results). Resample b belongs to chunk ⌊b/256⌋.
pub const CHUNK: u64 = 256;

const GOLD: u64 = 0x9E37_79B9_7F4A_7C15;

/// Which kind of draws a stream feeds (METHODS §10.2 engine codes).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[repr(u64)]
pub enum Purpose {
    /// Permutations (shared by `permutation` and `studentized-permutation`).
    Permutation = 1,
    /// Stratified bootstrap resamples.
    Bootstrap = 2,
    /// Wild-bootstrap weights.
    WildWeights = 3,
    /// Bootstrap critical values of the trimmed engine.
    TrimmedBootstrap = 4,
    /// `plan` simulations.
    Plan = 5,
    /// Auxiliary draws (e.g. goodness-of-fit checks).
    Auxiliary = 6,
}

/// The key of one stream: (purpose, term, chunk, aux).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct StreamKey {
    /// Engine code (METHODS §10.2).
    pub purpose: Purpose,
    /// 0 = shared by all terms, else the 1-based canonical term index.
    pub term: u64,
    /// Chunk index ⌊b/CHUNK⌋.
    pub chunk: u64,
    /// Sub-stream, 0 unless needed.
    pub aux: u64,
}

/// SplitMix64's finaliser (a bijection on u64).
pub fn fin(mut z: u64) -> u64 {
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// The four mixed words o_0..o_3 of a key (METHODS §10.2).
fn mixed_words(seed: u64, key: StreamKey) -> [u64; 4] {
    let mut h = seed;
    for w in [key.purpose as u64, key.term, key.chunk, key.aux] {
        h = fin((h ^ w).wrapping_add(GOLD));
    }
    let mut x = h;
    let mut o = [0u64; 4];
    for word in &mut o {
        x = x.wrapping_add(GOLD);
        *word = fin(x);
    }
    o
}

/// PCG state and increment of a key: state = (o_0 << 64) | o_1, inc = ((o_2 << 64) | o_3) | 1.
pub fn state_and_increment(seed: u64, key: StreamKey) -> (u128, u128) {
    let o = mixed_words(seed, key);
    let state = ((o[0] as u128) << 64) | o[1] as u128;
    let inc = (((o[2] as u128) << 64) | o[3] as u128) | 1;
    (state, inc)
}

/// The 32 seed bytes for `Pcg64::from_seed`: LE(o_1) ‖ LE(o_0) ‖ LE(o_3) ‖ LE(o_2), so that
/// the crate's state and increment words are those of [`state_and_increment`].
pub fn seed_bytes(seed: u64, key: StreamKey) -> [u8; 32] {
    let o = mixed_words(seed, key);
    let mut bytes = [0u8; 32];
    for (i, w) in [o[1], o[0], o[3], o[2]].iter().enumerate() {
        bytes[i * 8..(i + 1) * 8].copy_from_slice(&w.to_le_bytes());
    }
    bytes
}

/// A random stream for one key.
pub struct Stream {
    rng: Pcg64,
}

impl Stream {
    /// The stream of `key` under `seed`.
    pub fn new(seed: u64, key: StreamKey) -> Stream {
        Stream { rng: Pcg64::from_seed(seed_bytes(seed, key)) }
    }

    /// Next raw 64-bit output.
    #[inline]
    pub fn next_u64(&mut self) -> u64 {
        self.rng.next_u64()
    }

    /// Uniform integer in [0, s) by Lemire's (2019) nearly divisionless method. `s ≥ 1`.
    #[inline]
    pub fn bounded(&mut self, s: u64) -> u64 {
        let mut x = self.next_u64();
        let mut m = (x as u128) * (s as u128);
        let mut l = m as u64;
        if l < s {
            let t = s.wrapping_neg() % s;
            while l < t {
                x = self.next_u64();
                m = (x as u128) * (s as u128);
                l = m as u64;
            }
        }
        (m >> 64) as u64
    }

    /// Fisher–Yates/Durstenfeld shuffle of `a` in place: for k = len−1 down to 1,
    /// j = bounded(k + 1), swap `a[k]` and `a[j]`.
    #[inline]
    pub fn shuffle<T>(&mut self, a: &mut [T]) {
        for k in (1..a.len()).rev() {
            let j = self.bounded(k as u64 + 1) as usize;
            a.swap(k, j);
        }
    }

    /// Uniform double in [0, 1): (next() >> 11)·2⁻⁵³.
    #[inline]
    pub fn uniform(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
    }

    /// Uniform double in the open interval (0, 1): ((next() >> 11) + ½)·2⁻⁵³, safe for
    /// `ln`.
    #[inline]
    pub fn open_uniform(&mut self) -> f64 {
        ((self.next_u64() >> 11) as f64 + 0.5) * (1.0 / (1u64 << 53) as f64)
    }

    /// Fills `signs` with Rademacher weights ±1: v_i = +1 when bit (i mod 64) of the
    /// ⌊i/64⌋-th output word is 1 (least significant bit first).
    pub fn rademacher(&mut self, signs: &mut [f64]) {
        for block in signs.chunks_mut(64) {
            let word = self.next_u64();
            for (bit, v) in block.iter_mut().enumerate() {
                *v = if (word >> bit) & 1 == 1 { 1.0 } else { -1.0 };
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Test vectors: METHODS §10.3 (seed 42), computed there with numpy's PCG64.
    const SEED: u64 = 42;

    fn key(purpose: Purpose, term: u64, chunk: u64, aux: u64) -> StreamKey {
        StreamKey { purpose, term, chunk, aux }
    }

    #[test]
    fn splitmix_sanity() {
        assert_eq!(fin(GOLD), 0xe220a8397b1dcdaf);
    }

    #[test]
    fn derived_states_match_the_vectors() {
        let cases = [
            (
                key(Purpose::Permutation, 0, 0, 0),
                0x50678b12ce3229b2a2f0d42a8a8957c3u128,
                0xedf528c2fb861d433694c362449e717bu128,
            ),
            (
                key(Purpose::Permutation, 1, 0, 0),
                0x312c49d9abd12794c6ffe2886f4f7a37,
                0x7767120834b5915d35ccd69fd640a60b,
            ),
            (
                key(Purpose::Permutation, 0, 0, 1),
                0x12ffb0cd5f34cbbaeb5e4946420b3ee5,
                0x56deb4a0b0532ef16e3a1c2c2a4e725f,
            ),
            (key(Purpose::Bootstrap, 5, 3, 0), 0x458e068533cd61aaa7a37b0b8a894c51, 0xd33ea77287ab99d9011134fc0e40ea11),
        ];
        for (k, state, inc) in cases {
            assert_eq!(state_and_increment(SEED, k), (state, inc), "{k:?}");
        }
    }

    #[test]
    fn rand_pcg_seeding_matches_the_vector() {
        // METHODS §10.3, implementation (b): seed bytes and first outputs for key (1,0,0,0).
        let k = key(Purpose::Permutation, 0, 0, 0);
        let hex: String = seed_bytes(SEED, k).iter().map(|b| format!("{b:02x}")).collect();
        assert_eq!(hex, "c357898a2ad4f0a2b22932ce128b67507a719e4462c39436431d86fbc228f5ed");
        let mut s = Stream::new(SEED, k);
        assert_eq!(s.next_u64(), 0x955941f8f80bc037);
        assert_eq!(s.next_u64(), 0x725177015ab72a94);
    }

    /// The PCG64 step-then-output of METHODS §10.1 (implementation (a)), to check the
    /// vectors that were computed with numpy's raw state semantics.
    fn pcg_a(state: &mut u128, inc: u128) -> u64 {
        const MULT: u128 = 0x2360ED051FC65DA44385DF649FCCF645;
        *state = state.wrapping_mul(MULT).wrapping_add(inc);
        let rot = (*state >> 122) as u32;
        (((*state >> 64) as u64) ^ (*state as u64)).rotate_right(rot)
    }

    #[test]
    fn raw_state_outputs_match_numpy_vectors() {
        let cases = [
            (key(Purpose::Permutation, 0, 0, 0), [0xb08d6f98c4479457u64, 0x54f8a4955b10aa8f]),
            (key(Purpose::Permutation, 1, 0, 0), [0xa760f3bc3de87e86, 0x325e2bca0551d406]),
            (key(Purpose::Permutation, 0, 0, 1), [0xac220fd18bac3998, 0x1c5b8ef4c9fe6d34]),
            (key(Purpose::Bootstrap, 5, 3, 0), [0xb930e57007b6a88c, 0x77344838f4192311]),
        ];
        for (k, outs) in cases {
            let (mut st, inc) = state_and_increment(SEED, k);
            assert_eq!([pcg_a(&mut st, inc), pcg_a(&mut st, inc)], outs, "{k:?}");
        }
    }

    #[test]
    fn rand_pcg_is_implementation_a_after_one_extra_step() {
        // Property: from_seed does state ← (state + inc)·mult + inc before the first
        // output, so stream (b) equals stream (a) started from that state.
        let k = key(Purpose::Bootstrap, 5, 3, 0);
        let (st, inc) = state_and_increment(SEED, k);
        let mut a_state = st.wrapping_add(inc);
        pcg_a(&mut a_state, inc);
        let mut s = Stream::new(SEED, k);
        for _ in 0..5 {
            assert_eq!(s.next_u64(), pcg_a(&mut a_state, inc));
        }
    }

    /// A stream in the style of implementation (a), for the consumption vectors.
    struct StreamA {
        state: u128,
        inc: u128,
    }

    impl StreamA {
        fn new(k: StreamKey) -> Self {
            let (state, inc) = state_and_increment(SEED, k);
            StreamA { state, inc }
        }
        fn next(&mut self) -> u64 {
            pcg_a(&mut self.state, self.inc)
        }
        fn bounded(&mut self, s: u64) -> u64 {
            // Same Lemire algorithm as Stream::bounded, on the (a) generator.
            let mut x = self.next();
            let mut m = (x as u128) * (s as u128);
            let mut l = m as u64;
            if l < s {
                let t = s.wrapping_neg() % s;
                while l < t {
                    x = self.next();
                    m = (x as u128) * (s as u128);
                    l = m as u64;
                }
            }
            (m >> 64) as u64
        }
    }

    #[test]
    fn consumption_algorithms_match_the_vectors() {
        // bounded(7) ×8 from key (2,5,3,0): 5, 3, 6, 2, 3, 2, 5, 5.
        let mut s = StreamA::new(key(Purpose::Bootstrap, 5, 3, 0));
        let draws: Vec<u64> = (0..8).map(|_| s.bounded(7)).collect();
        assert_eq!(draws, vec![5, 3, 6, 2, 3, 2, 5, 5]);
        // Fisher–Yates of 0..9 with key (1,0,0,0): [3, 7, 5, 8, 0, 4, 9, 1, 2, 6].
        let mut s = StreamA::new(key(Purpose::Permutation, 0, 0, 0));
        let mut a: Vec<u64> = (0..10).collect();
        for k in (1..10).rev() {
            let j = s.bounded(k + 1) as usize;
            a.swap(k as usize, j);
        }
        assert_eq!(a, vec![3, 7, 5, 8, 0, 4, 9, 1, 2, 6]);
        // Rademacher bits 0..15 of the first output of key (3,0,0,0): − − − + − − − + − − − + + + + +.
        let mut s = StreamA::new(key(Purpose::WildWeights, 0, 0, 0));
        let word = s.next();
        let signs: String = (0..16).map(|b| if (word >> b) & 1 == 1 { '+' } else { '-' }).collect();
        assert_eq!(signs, "---+---+---+++++");
        // Uniform doubles from a fresh generator of key (3,0,0,0).
        let mut s = StreamA::new(key(Purpose::WildWeights, 0, 0, 0));
        let u: Vec<f64> = (0..3).map(|_| (s.next() >> 11) as f64 * (1.0 / (1u64 << 53) as f64)).collect();
        assert_eq!(u, vec![0.7917807706558867, 0.8196559326523388, 0.5253034781411409]);
    }

    #[test]
    fn stream_methods_use_the_same_algorithms() {
        // Property: Stream's shuffle, rademacher and uniform consume the stream exactly as
        // the spelled-out algorithms above (checked on the (b) generator against itself).
        let k = key(Purpose::Permutation, 0, 0, 0);
        let mut a = Stream::new(SEED, k);
        let mut b = Stream::new(SEED, k);
        let mut v: Vec<u32> = (0..10).collect();
        a.shuffle(&mut v);
        let mut w: Vec<u32> = (0..10).collect();
        for kk in (1..10u64).rev() {
            let j = b.bounded(kk + 1) as usize;
            w.swap(kk as usize, j);
        }
        assert_eq!(v, w);
        let mut signs = vec![0.0; 70];
        a.rademacher(&mut signs);
        let w0 = b.next_u64();
        let w1 = b.next_u64();
        for (i, s) in signs.iter().enumerate() {
            let word = if i < 64 { w0 } else { w1 };
            assert_eq!(*s, if (word >> (i % 64)) & 1 == 1 { 1.0 } else { -1.0 });
        }
    }
}
