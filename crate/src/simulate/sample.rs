//! Random draws that give the same numbers on every platform: ChaCha8 for the bits, `libm`
//! for the transcendental functions (the platform's own `ln` and `cos` may differ in the last
//! bit between native code and wasm).

use rand::Rng;
use rand_chacha::ChaCha8Rng;

/// Uniform on [0, 1).
pub(crate) fn uniform(rng: &mut ChaCha8Rng) -> f64 {
    rng.random::<f64>()
}

/// Exponential with the given mean (inversion: -mean ln U).
pub(crate) fn exponential(rng: &mut ChaCha8Rng, mean: f64) -> f64 {
    -mean * libm::log(1.0 - uniform(rng))
}

/// Standard normal (Box-Muller; Box & Muller 1958, Ann. Math. Stat. 29:610).
pub(crate) fn normal(rng: &mut ChaCha8Rng) -> f64 {
    let u1 = 1.0 - uniform(rng);
    let u2 = uniform(rng);
    libm::sqrt(-2.0 * libm::log(u1)) * libm::cos(std::f64::consts::TAU * u2)
}

/// Poisson count with the given mean, by counting unit-rate exponential gaps (Knuth, TAOCP
/// vol. 2, sec. 3.4.1); meant for the small means of spikes per burst.
pub(crate) fn poisson(rng: &mut ChaCha8Rng, mean: f64) -> usize {
    let mut count = 0;
    let mut total = exponential(rng, 1.0);
    while total < mean && count < 10_000 {
        count += 1;
        total += exponential(rng, 1.0);
    }
    count
}
