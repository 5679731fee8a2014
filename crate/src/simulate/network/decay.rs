//! exp(-x) for the membrane's decay, table-driven (Tang 1989, ACM TOMS 15:144): with N = 128,
//! -x = k ln 2 / N + r and exp(-x) = 2^(k/N) exp(r), where 2^(j/N) comes from a table and
//! exp(r) from its Taylor polynomial to r^5 (|r| <= ln 2 / 256, so the first term left out
//! is below 4e-17).
//!
//! It uses only IEEE-754 additions, multiplications and bit operations, in a fixed order, so
//! it gives the same bits natively and in wasm, as `libm` does, at about a third of its cost;
//! every synaptic arrival needs one. Within 2 ulp of `libm::exp` (checked below).

/// The table of 2^(j/128), j = 0..128, built once with `libm::exp2`.
pub(crate) struct DecayTable {
    powers: [f64; N],
}

const N: usize = 128;
/// N / ln 2.
const INV_LN2_N: f64 = 184.664_965_233_787_3;
/// ln 2 / N split into a high part with trailing zero bits (so k * hi is exact) and the rest
/// (the same split as musl's exp).
const LN2_N_HI: f64 = f64::from_bits(0x3f76_2e42_fefa_0000);
const LN2_N_LO: f64 = f64::from_bits(0x3d0c_f79a_bc9e_3b3a);
/// Adding and subtracting 1.5 * 2^52 rounds to the nearest integer.
const ROUNDER: f64 = 6_755_399_441_055_744.0;

impl DecayTable {
    pub(crate) fn new() -> Self {
        let mut powers = [0.0; N];
        for (j, p) in powers.iter_mut().enumerate() {
            *p = libm::exp2(j as f64 / N as f64);
        }
        DecayTable { powers }
    }

    /// exp(-x) for x >= 0 (and for any x the `libm` answer outside [0, 700]).
    #[inline]
    pub(crate) fn exp_neg(&self, x: f64) -> f64 {
        if !(0.0..=700.0).contains(&x) {
            return libm::exp(-x);
        }
        let y = -x * INV_LN2_N;
        let kf = (y + ROUNDER) - ROUNDER;
        let k = kf as i64;
        let r = (-x - kf * LN2_N_HI) - kf * LN2_N_LO;
        let p = r + r * r * (0.5 + r * (1.0 / 6.0 + r * (1.0 / 24.0 + r * (1.0 / 120.0))));
        let t = self.powers[(k & (N as i64 - 1)) as usize];
        let m = k >> 7; // floor(k / N); m >= -1010 for x <= 700, so the result is normal
        let mantissa = t + t * p;
        f64::from_bits((mantissa.to_bits() as i64 + (m << 52)) as u64)
    }
}

#[cfg(test)]
mod tests {
    #![allow(clippy::unwrap_used)]
    use super::*;

    /// Against `libm::exp` (a port of musl's, itself within 1 ulp of the true value).
    #[test]
    fn matches_libm_within_two_ulp() {
        let table = DecayTable::new();
        let mut worst = 0.0f64;
        for i in 0..2_000_000u64 {
            // Dense near 0 (short gaps between inputs) and spread out to 700.
            let x = if i % 2 == 0 {
                i as f64 * 1e-7
            } else {
                i as f64 * 3.5e-4
            };
            let ours = table.exp_neg(x);
            let reference = libm::exp(-x);
            let ulp = f64::from_bits(reference.to_bits() + 1) - reference;
            worst = worst.max((ours - reference).abs() / ulp);
        }
        assert!(worst <= 2.0, "worst error {worst} ulp");
        assert_eq!(table.exp_neg(0.0), 1.0);
        assert_eq!(table.exp_neg(f64::INFINITY), 0.0);
    }
}
