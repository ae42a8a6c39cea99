//! The two random generators behind latent sampling.
//!
//! - [`philox4x64_10`]: the portable, counter-based generator Philox4x64-10 (Salmon, Moraes, Dror
//!   and Shaw, "Parallel Random Numbers: As Easy as 1, 2, 3", SC 2011). A block is a pure function
//!   of a 256-bit counter and a 128-bit key, so latent `i` can be computed alone, in any order, on
//!   any thread or target. Checked against NumPy's `numpy.random.Philox`.
//! - [`Mt19937`]: Matsumoto and Nishimura's Mersenne Twister (1998) with `init_genrand` seeding and
//!   NumPy's legacy `RandomState` transforms (53-bit doubles and the Marsaglia polar Gaussian), so
//!   that latents drawn in a notebook with `numpy.random.RandomState(seed).standard_normal` are
//!   reproduced bit for bit.
//!
//! Only integer arithmetic and IEEE 754 basic operations plus `libm` are used, so every target
//! (x86-64, aarch64, wasm32) gives the same bits.

/// Philox4x64 multipliers (Random123, `PHILOX_M4x64_0` and `PHILOX_M4x64_1`).
const PHILOX_M0: u64 = 0xD2E7_470E_E14C_6C93;
const PHILOX_M1: u64 = 0xCA5A_8263_9512_1157;
/// Philox4x64 Weyl key increments (golden ratio and sqrt(3) - 1, Random123 `PHILOX_W64_0/1`).
const PHILOX_W0: u64 = 0x9E37_79B9_7F4A_7C15;
const PHILOX_W1: u64 = 0xBB67_AE85_84CA_A73B;

#[inline]
fn mulhilo(a: u64, b: u64) -> (u64, u64) {
    let p = u128::from(a) * u128::from(b);
    ((p >> 64) as u64, p as u64)
}

/// One Philox4x64 block with 10 rounds: four 64-bit outputs for a counter and a key.
///
/// ```
/// // Random123's known-answer test for a zero counter and key.
/// let out = genloom::latent::philox4x64_10([0; 4], [0; 2]);
/// assert_eq!(out[0], 0x16554d9eca36314c);
/// ```
pub fn philox4x64_10(counter: [u64; 4], key: [u64; 2]) -> [u64; 4] {
    let mut c = counter;
    let mut k = key;
    for round in 0..10 {
        if round > 0 {
            k[0] = k[0].wrapping_add(PHILOX_W0);
            k[1] = k[1].wrapping_add(PHILOX_W1);
        }
        let (hi0, lo0) = mulhilo(PHILOX_M0, c[0]);
        let (hi1, lo1) = mulhilo(PHILOX_M1, c[2]);
        c = [hi1 ^ c[1] ^ k[0], lo1, hi0 ^ c[3] ^ k[1], lo0];
    }
    c
}

/// The stream of 64-bit words for one latent row: blocks `(b, row, 0, 0)` under key
/// `(seed, stream)` for `b = 0, 1, 2, ...`, four words a block, in order.
#[derive(Debug, Clone)]
pub(crate) struct RowStream {
    key: [u64; 2],
    row: u64,
    block: u64,
    buf: [u64; 4],
    pos: usize,
}

impl RowStream {
    pub(crate) fn new(seed: u64, stream: u64, row: u64) -> RowStream {
        RowStream { key: [seed, stream], row, block: 0, buf: [0; 4], pos: 4 }
    }

    pub(crate) fn next_u64(&mut self) -> u64 {
        if self.pos == 4 {
            self.buf = philox4x64_10([self.block, self.row, 0, 0], self.key);
            self.block = self.block.wrapping_add(1);
            self.pos = 0;
        }
        let v = self.buf[self.pos];
        self.pos += 1;
        v
    }

    /// Uniform in [0, 1) with 53 random bits.
    pub(crate) fn next_unit(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 * (1.0 / 9_007_199_254_740_992.0)
    }

    /// The next pair of standard normals by the Box-Muller transform (Box and Muller, 1958):
    /// `u1` in (0, 1], `u2` in [0, 1), `r = sqrt(-2 ln u1)`, `theta = 2 pi u2`.
    pub(crate) fn next_gaussian_pair(&mut self) -> (f64, f64) {
        let u1 = ((self.next_u64() >> 11) + 1) as f64 * (1.0 / 9_007_199_254_740_992.0);
        let u2 = self.next_unit();
        let r = libm::sqrt(-2.0 * libm::log(u1));
        let theta = 2.0 * core::f64::consts::PI * u2;
        (r * libm::cos(theta), r * libm::sin(theta))
    }
}

/// A source of Gaussian values in order, with the pair's second value kept for the next call.
#[derive(Debug, Clone)]
pub(crate) struct PortableGaussian {
    stream: RowStream,
    spare: Option<f64>,
}

impl PortableGaussian {
    pub(crate) fn new(seed: u64, stream: u64, row: u64) -> PortableGaussian {
        PortableGaussian { stream: RowStream::new(seed, stream, row), spare: None }
    }

    pub(crate) fn next(&mut self) -> f64 {
        if let Some(v) = self.spare.take() {
            return v;
        }
        let (a, b) = self.stream.next_gaussian_pair();
        self.spare = Some(b);
        a
    }
}

/// The Mersenne Twister MT19937 with NumPy's legacy `RandomState` transforms.
#[derive(Clone)]
pub struct Mt19937 {
    mt: Box<[u32; 624]>,
    index: usize,
    gauss: Option<f64>,
}

impl std::fmt::Debug for Mt19937 {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Mt19937").field("index", &self.index).finish_non_exhaustive()
    }
}

impl Mt19937 {
    /// Seeds with `init_genrand(seed)`, as `numpy.random.RandomState(seed)` does for an integer
    /// seed below 2^32.
    pub fn new(seed: u32) -> Mt19937 {
        let mut mt = Box::new([0u32; 624]);
        mt[0] = seed;
        for i in 1..624 {
            mt[i] = 1_812_433_253u32.wrapping_mul(mt[i - 1] ^ (mt[i - 1] >> 30)).wrapping_add(i as u32);
        }
        Mt19937 { mt, index: 624, gauss: None }
    }

    fn twist(&mut self) {
        const UPPER: u32 = 0x8000_0000;
        const LOWER: u32 = 0x7fff_ffff;
        const MATRIX_A: u32 = 0x9908_b0df;
        for i in 0..624 {
            let y = (self.mt[i] & UPPER) | (self.mt[(i + 1) % 624] & LOWER);
            let mut v = self.mt[(i + 397) % 624] ^ (y >> 1);
            if y & 1 != 0 {
                v ^= MATRIX_A;
            }
            self.mt[i] = v;
        }
        self.index = 0;
    }

    /// The next 32-bit output (`genrand_int32`).
    pub fn next_u32(&mut self) -> u32 {
        if self.index >= 624 {
            self.twist();
        }
        let mut y = self.mt[self.index];
        self.index += 1;
        y ^= y >> 11;
        y ^= (y << 7) & 0x9d2c_5680;
        y ^= (y << 15) & 0xefc6_0000;
        y ^= y >> 18;
        y
    }

    /// A double in [0, 1) from two outputs (`genrand_res53`, NumPy's `random_sample`).
    pub fn next_f64(&mut self) -> f64 {
        let a = (self.next_u32() >> 5) as f64;
        let b = (self.next_u32() >> 6) as f64;
        (a * 67_108_864.0 + b) / 9_007_199_254_740_992.0
    }

    /// A standard normal by NumPy's legacy Gaussian (Marsaglia polar method, the second value
    /// of each accepted pair kept for the next call), as in `RandomState.standard_normal`.
    pub fn next_gaussian(&mut self) -> f64 {
        if let Some(g) = self.gauss.take() {
            return g;
        }
        loop {
            let x1 = 2.0 * self.next_f64() - 1.0;
            let x2 = 2.0 * self.next_f64() - 1.0;
            let r2 = x1 * x1 + x2 * x2;
            if r2 < 1.0 && r2 != 0.0 {
                let f = libm::sqrt(-2.0 * super::crlog::ln(r2) / r2);
                self.gauss = Some(f * x1);
                return f * x2;
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn mt19937_reference_outputs() {
        // C++ standard [rand.predef]: the 10000th output of a default-constructed std::mt19937
        // (seed 5489) is 4123659995; the first is 3499211612 (Matsumoto and Nishimura's mt19937ar.c).
        let mut mt = Mt19937::new(5489);
        assert_eq!(mt.next_u32(), 3_499_211_612);
        for _ in 1..9999 {
            mt.next_u32();
        }
        assert_eq!(mt.next_u32(), 4_123_659_995);
    }

    #[test]
    fn row_stream_is_independent_of_other_rows() {
        let mut a = RowStream::new(7, 0, 3);
        let first: Vec<u64> = (0..9).map(|_| a.next_u64()).collect();
        let mut b = RowStream::new(7, 0, 3);
        let again: Vec<u64> = (0..9).map(|_| b.next_u64()).collect();
        assert_eq!(first, again);
        let mut c = RowStream::new(7, 0, 4);
        assert_ne!(first[0], c.next_u64());
    }
}
