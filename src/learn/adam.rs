//! Adam (Kingma & Ba, ICLR 2015, Algorithm 1, with bias correction) over plain f32 parameter
//! slices (moments and arithmetic in f64), plus global gradient-norm clipping; the update runs in plain Rust after candle has
//! produced the gradients, vectorised by the run-time-chosen kernel path (`kernels`).

use super::kernels::{AdamK, KernelPath};

/// Adam hyperparameters.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct AdamParams {
    /// First-moment decay beta1. Default 0.9 (Kingma & Ba 2015).
    pub beta1: f64,
    /// Second-moment decay beta2. Default 0.999 (Kingma & Ba 2015).
    pub beta2: f64,
    /// Denominator epsilon. Default 1e-8 (Kingma & Ba 2015).
    pub epsilon: f64,
}

impl Default for AdamParams {
    fn default() -> Self {
        AdamParams {
            beta1: 0.9,
            beta2: 0.999,
            epsilon: 1e-8,
        }
    }
}

/// Adam state for a fixed list of parameter tensors.
#[derive(Clone, Debug)]
pub struct Adam {
    params: AdamParams,
    t: u64,
    m: Vec<Vec<f64>>,
    v: Vec<Vec<f64>>,
}

impl Adam {
    /// Zeroed moments for tensors of the given lengths.
    pub fn new(sizes: &[usize], params: AdamParams) -> Self {
        Adam {
            params,
            t: 0,
            m: sizes.iter().map(|&n| vec![0.0; n]).collect(),
            v: sizes.iter().map(|&n| vec![0.0; n]).collect(),
        }
    }

    /// Steps taken so far.
    pub fn steps(&self) -> u64 {
        self.t
    }

    /// One step with step size `lr`: `m = b1 m + (1-b1) g`, `v = b2 v + (1-b2) g^2`,
    /// `theta -= lr * m_hat / (sqrt(v_hat) + eps)` with `m_hat = m / (1 - b1^t)`,
    /// `v_hat = v / (1 - b2^t)`.
    pub fn step(&mut self, lr: f64, params: &mut [&mut [f32]], grads: &[Vec<f32>]) {
        assert_eq!(params.len(), self.m.len(), "Adam: tensor count changed");
        assert_eq!(grads.len(), self.m.len(), "Adam: gradient count mismatch");
        self.t += 1;
        let p = self.params;
        let c1 = 1.0 - p.beta1.powi(self.t as i32);
        let c2 = 1.0 - p.beta2.powi(self.t as i32);
        let k = AdamK {
            b1: p.beta1,
            b2: p.beta2,
            c1,
            c2,
            lr,
            eps: p.epsilon,
        };
        let path = KernelPath::active();
        for (((theta, g), m), v) in params
            .iter_mut()
            .zip(grads)
            .zip(&mut self.m)
            .zip(&mut self.v)
        {
            assert_eq!(theta.len(), g.len(), "Adam: gradient shape mismatch");
            path.adam(theta, g, m, v, &k);
        }
    }
}

/// L2 norm over all gradient tensors together (accumulated in f64: per tensor as 8 interleaved
/// partial sums, see [`KernelPath::sum_squares`], then over tensors in order).
pub fn global_norm(grads: &[Vec<f32>]) -> f64 {
    let path = KernelPath::active();
    grads
        .iter()
        .map(|g| path.sum_squares(g))
        .sum::<f64>()
        .sqrt()
}

/// Scale all gradients so their global norm is at most `max_norm` (0 disables); returns the
/// norm before clipping.
pub fn clip_global_norm(grads: &mut [Vec<f32>], max_norm: f64) -> f64 {
    let norm = global_norm(grads);
    if max_norm > 0.0 && norm > max_norm {
        let s = (max_norm / (norm + 1e-6)) as f32;
        scale_all(grads, s);
    }
    norm
}

/// Multiply every gradient by `s`.
pub(crate) fn scale_all<'a>(grads: impl IntoIterator<Item = &'a mut Vec<f32>>, s: f32) {
    let path = KernelPath::active();
    for g in grads {
        path.scale(g, s);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn two_steps_on_a_quadratic_match_algorithm_1() {
        // f(theta) = theta^2 / 2, gradient g = theta; theta_0 = 1, alpha = 0.1, defaults
        // beta1 = 0.9, beta2 = 0.999, eps = 1e-8 (Kingma & Ba 2015, Algorithm 1).
        let mut adam = Adam::new(&[1], AdamParams::default());
        let mut theta = [1.0f32];
        let g0 = vec![theta[0]];
        adam.step(0.1, &mut [&mut theta[..]], &[g0]);
        // Step 1: m = 0.1, v = 0.001, m_hat = 0.1/0.1 = 1, v_hat = 0.001/0.001 = 1,
        // theta_1 = 1 - 0.1 * 1/(1 + 1e-8) = 0.9 (up to 1e-9).
        assert!((theta[0] - 0.9).abs() < 1e-7, "{}", theta[0]);
        let g1 = theta[0] as f64;
        let grad = vec![theta[0]];
        adam.step(0.1, &mut [&mut theta[..]], &[grad]);
        // Step 2 by hand: m = 0.9*0.1 + 0.1*0.9 = 0.18; v = 0.999*0.001 + 0.001*0.81 = 0.001809;
        // m_hat = 0.18/(1-0.81) = 0.947368...; v_hat = 0.001809/(1-0.998001) = 0.904952...;
        // theta_2 = 0.9 - 0.1 * 0.947368/(0.951290 + 1e-8) = 0.800412...
        let m = 0.9 * 0.1 + 0.1 * g1;
        let v = 0.999 * 0.001 + 0.001 * g1 * g1;
        let m_hat = m / (1.0 - 0.9f64.powi(2));
        let v_hat = v / (1.0 - 0.999f64.powi(2));
        let expect = 0.9 - 0.1 * m_hat / (v_hat.sqrt() + 1e-8);
        assert!((expect - 0.800412).abs() < 1e-6);
        assert!((theta[0] as f64 - expect).abs() < 1e-6, "{}", theta[0]);
        assert_eq!(adam.steps(), 2);
    }

    #[test]
    fn clipping_scales_to_the_limit_and_reports_the_raw_norm() {
        // A 3-4-5 triangle: the norm of (3, 4) is 5 (Pythagoras).
        let mut g = vec![vec![3.0f32], vec![4.0]];
        let n = clip_global_norm(&mut g, 1.0);
        assert!((n - 5.0).abs() < 1e-12);
        assert!((global_norm(&g) - 1.0).abs() < 1e-5);
        assert!((g[0][0] / g[1][0] - 0.75).abs() < 1e-6);
    }
}
