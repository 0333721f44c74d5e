//! The diagonal Gaussian policy distribution: log-density and entropy in closed form (plain Rust
//! for rollouts, candle tensors for the update) and standard-normal sampling from the run's RNG.

use candle_core::{Tensor, D};
use rand::Rng;

/// ln(2 pi) / 2.
pub const HALF_LN_2PI: f64 = 0.918_938_533_204_672_8;

/// Log-density of `x` under N(mean, diag(exp(log_std))^2), summed over components:
/// `sum_i [ -((x_i - mu_i)/sigma_i)^2 / 2 - ln sigma_i - ln(2 pi)/2 ]`.
pub fn log_prob(x: &[f32], mean: &[f32], log_std: &[f32]) -> f32 {
    let mut s = 0.0f64;
    for ((&xi, &mi), &li) in x.iter().zip(mean).zip(log_std) {
        let z = (xi as f64 - mi as f64) * (-(li as f64)).exp();
        s += -0.5 * z * z - li as f64 - HALF_LN_2PI;
    }
    s as f32
}

/// Differential entropy of the diagonal Gaussian: `sum_i [ ln sigma_i + (1 + ln 2 pi)/2 ]`.
pub fn entropy(log_std: &[f32]) -> f32 {
    log_std
        .iter()
        .map(|&l| l as f64 + 0.5 + HALF_LN_2PI)
        .sum::<f64>() as f32
}

/// Per-row log-density (shape (B,)) of actions (B, A) under means (B, A) and log standard
/// deviations broadcastable to (B, A) — the same formula as [`log_prob`], in candle ops so the
/// update can differentiate it.
pub fn log_prob_t(act: &Tensor, mean: &Tensor, log_std: &Tensor) -> candle_core::Result<Tensor> {
    let z = act
        .broadcast_sub(mean)?
        .broadcast_mul(&log_std.neg()?.exp()?)?;
    let per = (z.sqr()? * -0.5)?.broadcast_sub(log_std)?;
    per.sum(D::Minus1)?
        .affine(1.0, -HALF_LN_2PI * act.dim(D::Minus1)? as f64)
}

/// Mean entropy over the batch; `log_std` is (A,) or (B, A).
pub fn entropy_t(log_std: &Tensor) -> candle_core::Result<Tensor> {
    let a = log_std.dim(D::Minus1)? as f64;
    let per_row = log_std.sum(D::Minus1)?;
    let mean = if per_row.rank() == 0 {
        per_row
    } else {
        per_row.mean_all()?
    };
    mean.affine(1.0, a * (0.5 + HALF_LN_2PI))
}

/// Fill `out` with independent standard-normal samples (Box & Muller, "A Note on the Generation
/// of Random Normal Deviates", Ann. Math. Stat. 1958), two per pair of uniforms.
pub fn fill_standard_normal<R: Rng>(rng: &mut R, out: &mut [f32]) {
    let mut chunks = out.chunks_mut(2);
    for c in &mut chunks {
        let u1: f64 = 1.0 - rng.gen::<f64>(); // (0, 1], so ln(u1) is finite
        let u2: f64 = rng.gen::<f64>();
        let r = (-2.0 * u1.ln()).sqrt();
        let th = std::f64::consts::TAU * u2;
        c[0] = (r * th.cos()) as f32;
        if c.len() > 1 {
            c[1] = (r * th.sin()) as f32;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use candle_core::Device;
    use rand::SeedableRng;

    #[test]
    fn log_prob_matches_closed_form() {
        // Standard normal density at 0: ln(1/sqrt(2 pi)) = -0.9189385332 (any statistics
        // textbook, the normal pdf).
        assert!((log_prob(&[0.0], &[0.0], &[0.0]) + 0.918_938_5).abs() < 1e-6);
        // N(1, 2^2) at x = 2: ln pdf = -ln 2 - ln(2 pi)/2 - (1/2)^2/2 = -1.7370857..., and a
        // second independent component N(0,1) at x = 1 adds -1/2 - 0.9189385.
        let expect = -(2f64.ln()) - HALF_LN_2PI - 0.125 + (-0.5 - HALF_LN_2PI);
        let got = log_prob(&[2.0, 1.0], &[1.0, 0.0], &[2f32.ln(), 0.0]);
        assert!((got as f64 - expect).abs() < 1e-6, "{got} vs {expect}");
        // The candle version agrees.
        let dev = Device::Cpu;
        let act = Tensor::new(&[[2.0f32, 1.0]], &dev).unwrap();
        let mean = Tensor::new(&[[1.0f32, 0.0]], &dev).unwrap();
        let ls = Tensor::new(&[2f32.ln(), 0.0], &dev).unwrap();
        let t: Vec<f32> = log_prob_t(&act, &mean, &ls).unwrap().to_vec1().unwrap();
        assert!((t[0] as f64 - expect).abs() < 1e-5);
    }

    #[test]
    fn entropy_matches_closed_form() {
        // Entropy of N(mu, sigma^2) is ln(sigma sqrt(2 pi e)) (Cover & Thomas, "Elements of
        // Information Theory", 2nd ed., example 8.1.2): sigma = 1 gives 1.4189385.
        assert!((entropy(&[0.0]) - 1.418_938_5).abs() < 1e-6);
        let s: f64 = 0.5;
        let expect =
            (s * (2.0 * std::f64::consts::PI * std::f64::consts::E).sqrt()).ln() + 1.418_938_533;
        assert!((entropy(&[s.ln() as f32, 0.0]) as f64 - expect).abs() < 1e-6);
        let ls = Tensor::new(&[s.ln() as f32, 0.0], &Device::Cpu).unwrap();
        let t: f32 = entropy_t(&ls).unwrap().to_scalar().unwrap();
        assert!((t as f64 - expect).abs() < 1e-5);
    }

    #[test]
    fn box_muller_samples_have_unit_moments() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(3);
        let mut x = vec![0.0f32; 200_001];
        fill_standard_normal(&mut rng, &mut x);
        let n = x.len() as f64;
        let mean = x.iter().map(|&v| v as f64).sum::<f64>() / n;
        let var = x.iter().map(|&v| (v as f64 - mean).powi(2)).sum::<f64>() / n;
        // Standard errors: 1/sqrt(n) = 0.0022 for the mean, sqrt(2/n) = 0.0032 for the variance.
        assert!(mean.abs() < 0.01, "{mean}");
        assert!((var - 1.0).abs() < 0.015, "{var}");
    }
}
