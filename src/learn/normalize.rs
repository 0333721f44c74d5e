//! Running observation statistics (Welford's algorithm, in f64) and the frozen f32 snapshot the
//! policy applies, plus reward scaling by a running standard deviation of the discounted return.

/// Running mean and variance of a vector stream by Welford's update (Welford, Technometrics
/// 1962; Knuth, TAOCP vol. 2, 3rd ed., section 4.2.2), kept in f64.
#[derive(Clone, Debug, PartialEq)]
pub struct RunningMoments {
    count: u64,
    mean: Vec<f64>,
    m2: Vec<f64>,
}

impl RunningMoments {
    /// Empty statistics for vectors of length `dim`.
    pub fn new(dim: usize) -> Self {
        RunningMoments {
            count: 0,
            mean: vec![0.0; dim],
            m2: vec![0.0; dim],
        }
    }

    /// Rebuild from stored count, mean and population variance (used by checkpoints).
    pub fn from_parts(count: u64, mean: Vec<f64>, var: &[f64]) -> Self {
        let m2 = var.iter().map(|v| v * count as f64).collect();
        RunningMoments { count, mean, m2 }
    }

    /// Add one sample.
    pub fn push(&mut self, x: &[f32]) {
        self.count += 1;
        let n = self.count as f64;
        for ((m, s), &xi) in self.mean.iter_mut().zip(self.m2.iter_mut()).zip(x) {
            let xi = xi as f64;
            let d = xi - *m;
            *m += d / n;
            *s += d * (xi - *m);
        }
    }

    /// Add one f64 sample (scalar streams and exact-precision checks).
    pub fn push_f64(&mut self, x: &[f64]) {
        self.count += 1;
        let n = self.count as f64;
        for ((m, s), &xi) in self.mean.iter_mut().zip(self.m2.iter_mut()).zip(x) {
            let d = xi - *m;
            *m += d / n;
            *s += d * (xi - *m);
        }
    }

    /// Number of samples seen.
    pub fn count(&self) -> u64 {
        self.count
    }

    /// Per-component mean (zeros before the first sample).
    pub fn mean(&self) -> &[f64] {
        &self.mean
    }

    /// Population variance (denominator n); ones before the first sample.
    pub fn variance(&self) -> Vec<f64> {
        if self.count == 0 {
            return vec![1.0; self.mean.len()];
        }
        self.m2.iter().map(|s| s / self.count as f64).collect()
    }

    /// Sample variance (denominator n - 1), as NIST StRD certifies it; NaN below two samples.
    pub fn sample_variance(&self) -> Vec<f64> {
        let d = self.count as f64 - 1.0;
        self.m2
            .iter()
            .map(|s| if d > 0.0 { s / d } else { f64::NAN })
            .collect()
    }
}

/// Frozen observation normalisation in f32: `clip((x - mean) / sqrt(var + 1e-8), ±clip)`.
/// Applied unchanged during a whole iteration (rollout and update) and by a saved policy.
#[derive(Clone, Debug, PartialEq)]
pub struct ObsNormalizer {
    pub(crate) mean: Vec<f32>,
    pub(crate) inv_std: Vec<f32>,
    pub(crate) clip: f32,
}

/// Added to the variance before the square root so constant components do not divide by zero
/// (common practice).
const VAR_EPS: f64 = 1e-8;

impl ObsNormalizer {
    /// The identity map (used when normalisation is off).
    pub fn identity(dim: usize) -> Self {
        ObsNormalizer {
            mean: vec![0.0; dim],
            inv_std: vec![1.0; dim],
            clip: f32::INFINITY,
        }
    }

    /// Freeze the current running statistics.
    pub fn from_moments(m: &RunningMoments, clip: f64) -> Self {
        ObsNormalizer {
            mean: m.mean().iter().map(|&x| x as f32).collect(),
            inv_std: m
                .variance()
                .iter()
                .map(|&v| (1.0 / (v + VAR_EPS).sqrt()) as f32)
                .collect(),
            clip: clip as f32,
        }
    }

    /// Observation length.
    pub fn dim(&self) -> usize {
        self.mean.len()
    }

    /// Clip bound (infinite for the identity).
    pub fn clip(&self) -> f32 {
        self.clip
    }

    /// Write the normalised `raw` into `out`.
    #[inline]
    pub fn apply(&self, raw: &[f32], out: &mut [f32]) {
        for (((o, &x), &m), &s) in out.iter_mut().zip(raw).zip(&self.mean).zip(&self.inv_std) {
            *o = ((x - m) * s).clamp(-self.clip, self.clip);
        }
    }
}

/// Reward scaling: rewards are divided by the running standard deviation of the discounted
/// return `R_t = gamma * R_{t-1} + r_t` of each environment (reset at episode ends), then
/// clipped (common practice for PPO on continuous control).
#[derive(Clone, Debug)]
pub struct RewardScaler {
    returns: Vec<f64>,
    moments: RunningMoments,
    gamma: f64,
    clip: f64,
}

impl RewardScaler {
    /// One running return per environment.
    pub fn new(num_envs: usize, gamma: f64, clip: f64) -> Self {
        RewardScaler {
            returns: vec![0.0; num_envs],
            moments: RunningMoments::new(1),
            gamma,
            clip,
        }
    }

    /// Scale the reward of environment `env`; `done` resets its running return afterwards.
    pub fn scale(&mut self, env: usize, reward: f32, done: bool) -> f32 {
        let r = &mut self.returns[env];
        *r = *r * self.gamma + reward as f64;
        self.moments.push_f64(&[*r]);
        let std = (self.moments.variance()[0] + VAR_EPS).sqrt();
        if done {
            *r = 0.0;
        }
        let scaled = if self.moments.count() < 2 {
            reward as f64
        } else {
            reward as f64 / std
        };
        scaled.clamp(-self.clip, self.clip) as f32
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// NIST StRD univariate dataset NumAcc4: 10000000.2, then 500 pairs (10000000.1,
    /// 10000000.3); certified mean 10000000.2 and sample std. dev. 0.1 (NIST Statistical
    /// Reference Datasets, univariate summary statistics, certified values; see
    /// /work/shared/reference/nist-strd-univariate.md).
    fn numacc4() -> Vec<f64> {
        let mut v = vec![10000000.2];
        for _ in 0..500 {
            v.push(10000000.1);
            v.push(10000000.3);
        }
        v
    }

    #[test]
    fn welford_matches_nist_numacc4_and_two_pass() {
        let data = numacc4();
        let mut m = RunningMoments::new(1);
        for &x in &data {
            m.push_f64(&[x]);
        }
        // Two-pass reference: mean first, then the sum of squared deviations.
        let n = data.len() as f64;
        let mean2 = data.iter().sum::<f64>() / n;
        let var2 = data.iter().map(|x| (x - mean2).powi(2)).sum::<f64>() / (n - 1.0);
        let sd = m.sample_variance()[0].sqrt();
        // Certified values (NIST StRD NumAcc4).
        assert!((m.mean()[0] - 10000000.2).abs() / 10000000.2 < 1e-14);
        assert!((sd - 0.1).abs() / 0.1 < 1e-7, "sd {sd}");
        assert!((m.sample_variance()[0] - var2).abs() / var2 < 1e-7);
        assert!((m.mean()[0] - mean2).abs() < 1e-7);
    }

    #[test]
    fn welford_vector_matches_two_pass_on_numacc3_shifted_columns() {
        // NIST StRD NumAcc3 (certified mean 1000000.2, sd 0.1) in column 0, NumAcc2 (mean 1.2,
        // sd 0.1) in column 1.
        let mut m = RunningMoments::new(2);
        m.push_f64(&[1000000.2, 1.2]);
        for _ in 0..500 {
            m.push_f64(&[1000000.1, 1.1]);
            m.push_f64(&[1000000.3, 1.3]);
        }
        let sv = m.sample_variance();
        assert!((m.mean()[0] - 1000000.2).abs() < 1e-8);
        assert!((sv[0].sqrt() - 0.1).abs() < 1e-9);
        assert!((m.mean()[1] - 1.2).abs() < 1e-14);
        assert!((sv[1].sqrt() - 0.1).abs() < 1e-13);
    }

    #[test]
    fn normalizer_standardises_and_clips() {
        let mut m = RunningMoments::new(2);
        for x in [[1.0f32, 10.0], [3.0, 10.0]] {
            m.push(&x);
        }
        // mean (2, 10), population var (1, 0).
        let n = ObsNormalizer::from_moments(&m, 5.0);
        let mut out = [0.0f32; 2];
        n.apply(&[4.0, 10.0], &mut out);
        assert!((out[0] - 2.0).abs() < 1e-6);
        assert_eq!(out[1], 0.0);
        n.apply(&[100.0, 10.0], &mut out);
        assert_eq!(out[0], 5.0);
    }
}
