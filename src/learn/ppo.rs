//! The PPO loss on one minibatch in candle (clipped surrogate, value loss, entropy bonus) and its
//! gradients by autograd; the weights are copied in from the plain-Rust networks and the
//! gradients copied out for clipping and Adam.

use candle_core::{Device, Tensor, Var, D};

use super::activation::tanh_t;
use super::config::PpoConfig;
use super::gaussian::{entropy_t, log_prob_t};
use super::mlp::Mlp;
use super::policy::{Policy, LOG_STD_MAX, LOG_STD_MIN};

/// The per-sample clipped surrogate of Schulman et al. 2017, eq. 7:
/// `min(r A, clip(r, 1 - eps, 1 + eps) A)`.
pub fn clipped_surrogate(ratio: &Tensor, adv: &Tensor, eps: f64) -> candle_core::Result<Tensor> {
    let unclipped = ratio.mul(adv)?;
    let clipped = ratio.clamp(1.0 - eps, 1.0 + eps)?.mul(adv)?;
    unclipped.minimum(&clipped)
}

/// One minibatch, already gathered (row-major) and with advantages normalised if asked.
#[derive(Clone, Debug, Default)]
pub struct Minibatch {
    /// Rows.
    pub len: usize,
    /// Normalised observations, len x obs_dim.
    pub obs: Vec<f32>,
    /// Unclipped actions, len x act_dim.
    pub actions: Vec<f32>,
    /// Log-probabilities under the acting policy.
    pub old_log_probs: Vec<f32>,
    /// Advantages.
    pub advantages: Vec<f32>,
    /// Value targets.
    pub targets: Vec<f32>,
    /// Value predictions at rollout time (for the clipped value loss).
    pub old_values: Vec<f32>,
}

/// Loss parts and gradients of one minibatch.
#[derive(Clone, Debug)]
pub struct MinibatchResult {
    /// Clipped-surrogate loss (negated mean of eq. 7).
    pub policy_loss: f32,
    /// Half mean squared value error (clipped variant if configured).
    pub value_loss: f32,
    /// Mean entropy.
    pub entropy: f32,
    /// Probability ratios new/old per sample.
    pub ratios: Vec<f32>,
    /// Gradients of the policy tensors (network w0, b0, ..., then log std if learned apart).
    pub policy_grads: Vec<Vec<f32>>,
    /// Gradients of the value tensors (w0, b0, ...).
    pub value_grads: Vec<Vec<f32>>,
}

fn vars_of(m: &Mlp, dev: &Device) -> candle_core::Result<Vec<(Var, Var)>> {
    m.layers
        .iter()
        .map(|l| {
            Ok((
                Var::from_slice(&l.w, (l.n_out, l.n_in), dev)?,
                Var::from_slice(&l.b, l.n_out, dev)?,
            ))
        })
        .collect()
}

/// `x W^T + 1 b^T` per layer, tanh between layers. The bias enters as the outer product of a
/// ones column with `b` rather than a broadcast add, so its gradient `1^T grad` is a matrix
/// product too (candle's reduction over the batch axis is several times slower on CPU).
fn forward_t(x: &Tensor, layers: &[(Var, Var)]) -> candle_core::Result<Tensor> {
    let ones = Tensor::ones((x.dim(0)?, 1), x.dtype(), x.device())?;
    let mut h = x.clone();
    for (i, (w, b)) in layers.iter().enumerate() {
        let bias = ones.matmul(&b.unsqueeze(0)?)?;
        h = (h.matmul(&w.t()?)? + bias)?;
        if i + 1 < layers.len() {
            h = tanh_t(&h)?;
        }
    }
    Ok(h)
}

fn grads_of(
    grads: &candle_core::backprop::GradStore,
    vars: impl Iterator<Item = Var>,
) -> candle_core::Result<Vec<Vec<f32>>> {
    vars.map(|v| match grads.get(v.as_tensor()) {
        Some(g) => g.flatten_all()?.to_vec1::<f32>(),
        None => Ok(vec![0.0; v.elem_count()]),
    })
    .collect()
}

/// Build the PPO loss (eq. 9 of Schulman et al. 2017 with the surrogate of eq. 7, as a loss to
/// minimise: `-L_clip + c1 L_value - c2 entropy`) for `mb` and differentiate it.
pub fn loss_and_grads(
    policy: &Policy,
    critic: &Mlp,
    mb: &Minibatch,
    cfg: &PpoConfig,
) -> candle_core::Result<MinibatchResult> {
    let dev = Device::Cpu;
    let (n, o, a) = (mb.len, policy.obs_dim(), policy.act_dim());
    let obs = Tensor::from_slice(&mb.obs, (n, o), &dev)?;
    let act = Tensor::from_slice(&mb.actions, (n, a), &dev)?;
    let old_lp = Tensor::from_slice(&mb.old_log_probs, n, &dev)?;
    let adv = Tensor::from_slice(&mb.advantages, n, &dev)?;
    let tgt = Tensor::from_slice(&mb.targets, n, &dev)?;

    let actor = vars_of(&policy.actor, &dev)?;
    let critic_vars = vars_of(critic, &dev)?;
    let out = forward_t(&obs, &actor)?;
    let (mean, log_std, log_std_var) = if policy.log_std.is_empty() {
        let mean = out.narrow(1, 0, a)?;
        let ls = out.narrow(1, a, a)?.clamp(LOG_STD_MIN, LOG_STD_MAX)?;
        (mean, ls, None)
    } else {
        let v = Var::from_slice(&policy.log_std, a, &dev)?;
        (out, v.as_tensor().clone(), Some(v))
    };
    let logp = log_prob_t(&act, &mean, &log_std)?;
    let ratio = (logp - old_lp)?.exp()?;
    let surrogate = clipped_surrogate(&ratio, &adv, cfg.clip_epsilon)?;
    let policy_loss = surrogate.mean_all()?.neg()?;
    let entropy = entropy_t(&log_std)?;

    let values = forward_t(&obs, &critic_vars)?.squeeze(D::Minus1)?;
    let sq = (&values - &tgt)?.sqr()?;
    let per_sample = if cfg.clip_value_loss {
        let old_v = Tensor::from_slice(&mb.old_values, n, &dev)?;
        let eps = cfg.clip_epsilon;
        let clipped_v = (&old_v + (&values - &old_v)?.clamp(-eps, eps)?)?;
        sq.maximum(&(clipped_v - &tgt)?.sqr()?)?
    } else {
        sq
    };
    let value_loss = (per_sample.mean_all()? * 0.5)?;

    let total =
        ((&policy_loss + (&value_loss * cfg.value_coef)?)? - (&entropy * cfg.entropy_coef)?)?;
    let grads = total.backward()?;
    let actor_list = actor
        .iter()
        .flat_map(|(w, b)| [w.clone(), b.clone()])
        .chain(log_std_var);
    let critic_list = critic_vars.iter().flat_map(|(w, b)| [w.clone(), b.clone()]);
    Ok(MinibatchResult {
        policy_loss: policy_loss.to_scalar()?,
        value_loss: value_loss.to_scalar()?,
        entropy: entropy.to_scalar()?,
        ratios: ratio.to_vec1()?,
        policy_grads: grads_of(&grads, actor_list)?,
        value_grads: grads_of(&grads, critic_list)?,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn clipped_surrogate_matches_worked_numbers_of_eq_7() {
        // Schulman et al. 2017, eq. 7 and Figure 1, eps = 0.2:
        // r = 1.5, A = +2: min(3.0, 1.2 * 2 = 2.4) = 2.4 (clipped above 1 + eps, A > 0);
        // r = 0.5, A = -1: min(-0.5, 0.8 * -1 = -0.8) = -0.8 (clipped below 1 - eps, A < 0);
        // r = 1.1, A = +1: inside the band, 1.1;
        // r = 0.5, A = +1: min(0.5, 0.8) = 0.5 (the pessimistic bound keeps the unclipped term);
        // r = 1.5, A = -1: min(-1.5, -1.2) = -1.5.
        let dev = Device::Cpu;
        let r = Tensor::new(&[1.5f32, 0.5, 1.1, 0.5, 1.5], &dev).unwrap();
        let adv = Tensor::new(&[2.0f32, -1.0, 1.0, 1.0, -1.0], &dev).unwrap();
        let s: Vec<f32> = clipped_surrogate(&r, &adv, 0.2).unwrap().to_vec1().unwrap();
        let expect = [2.4f32, -0.8, 1.1, 0.5, -1.5];
        for (x, y) in s.iter().zip(expect) {
            assert!((x - y).abs() < 1e-6, "{s:?}");
        }
    }

    #[test]
    fn candle_forward_matches_the_fused_forward() {
        // The rollout (plain Rust) and the update (candle) must compute the same network, or
        // the first-epoch probability ratios would not be 1 (Schulman et al. 2017, eq. 6 needs
        // pi_old to be the acting policy).
        use rand::SeedableRng;
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(2);
        let m = Mlp::orthogonal(&[7, 16, 16, 3], 1.4, 1.0, &mut rng);
        let x: Vec<f32> = (0..5 * 7)
            .map(|i| ((i * 37 % 11) as f32 - 5.0) * 0.3)
            .collect();
        let dev = Device::Cpu;
        let vars = vars_of(&m, &dev).unwrap();
        let t = forward_t(&Tensor::from_slice(&x, (5, 7), &dev).unwrap(), &vars).unwrap();
        let got: Vec<Vec<f32>> = t.to_vec2().unwrap();
        for (row, g) in x.chunks(7).zip(got) {
            let mut y = [0.0f32; 3];
            m.forward_alloc(row, &mut y);
            for (a, b) in y.iter().zip(&g) {
                assert!((a - b).abs() < 1e-5, "{y:?} vs {g:?}");
            }
        }
    }

    #[test]
    fn clipped_samples_have_no_policy_gradient() {
        // Where the clipped term is the minimum, d/dr of eq. 7 is zero (Schulman et al. 2017,
        // section 3); inside the band it is A.
        let dev = Device::Cpu;
        let r = Var::new(&[1.5f32, 1.1], &dev).unwrap();
        let adv = Tensor::new(&[2.0f32, 3.0], &dev).unwrap();
        let s = clipped_surrogate(r.as_tensor(), &adv, 0.2)
            .unwrap()
            .sum_all()
            .unwrap();
        let g: Vec<f32> = s
            .backward()
            .unwrap()
            .get(r.as_tensor())
            .unwrap()
            .to_vec1()
            .unwrap();
        assert_eq!(g[0], 0.0);
        assert!((g[1] - 3.0).abs() < 1e-6);
    }
}
