//! Seeded random draws for Monte Carlo: a PCG generator (`rand_pcg::Pcg64`, seeded through
//! `SeedableRng::seed_from_u64`), uniform numbers from its 53 high bits, and a polar
//! Box–Muller normal through `libm`, so a seed gives the same sequence natively and in wasm.

use rand_core::{Rng, SeedableRng};
use rand_pcg::Pcg64;

use super::Distribution;

/// Redraws allowed for a truncated normal before falling back to the edge (the chance of
/// needing more than a few is about 0.0027^k).
const MAX_REDRAWS: usize = 64;

/// The generator and the spare normal of the last Box–Muller pair.
#[derive(Debug, Clone)]
pub struct Sampler {
    rng: Pcg64,
    spare_normal: Option<f64>,
}

impl Sampler {
    pub fn new(seed: u64) -> Sampler {
        Sampler { rng: Pcg64::seed_from_u64(seed), spare_normal: None }
    }

    /// Uniform in [0, 1), a multiple of 2^−53.
    pub fn unit(&mut self) -> f64 {
        (self.rng.next_u64() >> 11) as f64 * (1.0 / 9_007_199_254_740_992.0)
    }

    /// Uniform in [−1, 1).
    pub fn symmetric(&mut self) -> f64 {
        2.0 * self.unit() - 1.0
    }

    /// Standard normal by Marsaglia's polar form of the Box–Muller transform (G. Marsaglia,
    /// T. A. Bray, *A convenient method for generating normal variables*, SIAM Review 6,
    /// 1964): no trigonometry, both values of each pair used. The rejection loop is bounded;
    /// its chance of running out is (1 − π/4)^64.
    pub fn standard_normal(&mut self) -> f64 {
        if let Some(z) = self.spare_normal.take() {
            return z;
        }
        for _ in 0..MAX_REDRAWS {
            let u = self.symmetric();
            let v = self.symmetric();
            let s = u * u + v * v;
            if s > 0.0 && s < 1.0 {
                let factor = (-2.0 * libm::log(s) / s).sqrt();
                self.spare_normal = Some(v * factor);
                return u * factor;
            }
        }
        0.0
    }

    /// A position within a tolerance band, −1 (low edge) to +1 (high edge).
    pub fn position(&mut self, distribution: Distribution) -> f64 {
        match distribution {
            Distribution::Uniform => self.symmetric(),
            Distribution::Normal => {
                for _ in 0..MAX_REDRAWS {
                    let z = self.standard_normal();
                    if z.abs() <= 3.0 {
                        return z / 3.0;
                    }
                }
                0.0
            }
        }
    }

    /// `nominal·(1 + tolerance·position)`.
    pub fn toleranced(&mut self, nominal: f64, tolerance: f64, distribution: Distribution) -> f64 {
        nominal * (1.0 + tolerance * self.position(distribution))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn draws_stay_in_their_band_and_have_the_expected_moments() {
        // Uniform on [−1, 1]: mean 0, variance 1/3; the 3σ-truncated normal: variance
        // (1/9)·(1 − 6φ(3)/(2Φ(3) − 1)) ≈ 0.1081 (truncated-normal moments, common practice).
        let n = 200_000;
        for (distribution, variance) in [(Distribution::Uniform, 1.0 / 3.0), (Distribution::Normal, 0.1081)] {
            let mut s = Sampler::new(7);
            let xs: Vec<f64> = (0..n).map(|_| s.position(distribution)).collect();
            assert!(xs.iter().all(|x| (-1.0..=1.0).contains(x)));
            let mean = xs.iter().sum::<f64>() / n as f64;
            let var = xs.iter().map(|x| (x - mean) * (x - mean)).sum::<f64>() / n as f64;
            assert!(mean.abs() < 0.005, "{distribution:?} mean {mean}");
            assert!((var - variance).abs() < 0.005, "{distribution:?} variance {var}");
        }
    }
}
