//! The PPO loss on one minibatch in candle (clipped surrogate, value loss, entropy bonus) and its
//! gradients by autograd; the weights are copied in from the plain-Rust networks and the
//! gradients copied out for clipping and Adam.

use candle_core::{DType, Device, Tensor, Var, D};

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

/// Loss parts and gradients in f64 (from either dtype of the candle path).
#[derive(Clone, Debug)]
pub struct ExactResult {
    /// The minimised total `-L_clip + c1 L_value - c2 entropy`.
    pub total_loss: f64,
    /// Clipped-surrogate loss.
    pub policy_loss: f64,
    /// Value loss.
    pub value_loss: f64,
    /// Mean entropy.
    pub entropy: f64,
    /// Probability ratios.
    pub ratios: Vec<f64>,
    /// Policy gradients, as in [`MinibatchResult::policy_grads`].
    pub policy_grads: Vec<Vec<f64>>,
    /// Value gradients, as in [`MinibatchResult::value_grads`].
    pub value_grads: Vec<Vec<f64>>,
}

fn var(data: &[f32], shape: &[usize], dtype: DType, dev: &Device) -> candle_core::Result<Var> {
    Var::from_tensor(&Tensor::from_slice(data, shape, dev)?.to_dtype(dtype)?)
}

fn tensor(
    data: &[f32],
    shape: &[usize],
    dtype: DType,
    dev: &Device,
) -> candle_core::Result<Tensor> {
    Tensor::from_slice(data, shape, dev)?.to_dtype(dtype)
}

fn vars_of(m: &Mlp, dtype: DType, dev: &Device) -> candle_core::Result<Vec<(Var, Var)>> {
    m.layers
        .iter()
        .map(|l| {
            Ok((
                var(&l.w, &[l.n_out, l.n_in], dtype, dev)?,
                var(&l.b, &[l.n_out], dtype, dev)?,
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
            // f32: the fast tanh the rollouts use; f64 (checks only): the exact tanh.
            h = if h.dtype() == DType::F32 {
                tanh_t(&h)?
            } else {
                h.tanh()?
            };
        }
    }
    Ok(h)
}

fn grads_of(
    grads: &candle_core::backprop::GradStore,
    vars: impl Iterator<Item = Var>,
) -> candle_core::Result<Vec<Vec<f64>>> {
    vars.map(|v| match grads.get(v.as_tensor()) {
        Some(g) => g.flatten_all()?.to_dtype(DType::F64)?.to_vec1::<f64>(),
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
    let r = loss_and_grads_in(policy, critic, mb, cfg, DType::F32)?;
    let to_f32 = |v: Vec<Vec<f64>>| -> Vec<Vec<f32>> {
        v.into_iter()
            .map(|t| t.into_iter().map(|x| x as f32).collect())
            .collect()
    };
    Ok(MinibatchResult {
        policy_loss: r.policy_loss as f32,
        value_loss: r.value_loss as f32,
        entropy: r.entropy as f32,
        ratios: r.ratios.into_iter().map(|x| x as f32).collect(),
        policy_grads: to_f32(r.policy_grads),
        value_grads: to_f32(r.value_grads),
    })
}

/// The same loss and gradients computed in `dtype` (F32 as the trainer's reference path, F64
/// with the exact tanh for finite-difference checks), returned in f64.
pub fn loss_and_grads_in(
    policy: &Policy,
    critic: &Mlp,
    mb: &Minibatch,
    cfg: &PpoConfig,
    dtype: DType,
) -> candle_core::Result<ExactResult> {
    let dev = Device::Cpu;
    let (n, o, a) = (mb.len, policy.obs_dim(), policy.act_dim());
    let obs = tensor(&mb.obs, &[n, o], dtype, &dev)?;
    let act = tensor(&mb.actions, &[n, a], dtype, &dev)?;
    let old_lp = tensor(&mb.old_log_probs, &[n], dtype, &dev)?;
    let adv = tensor(&mb.advantages, &[n], dtype, &dev)?;
    let tgt = tensor(&mb.targets, &[n], dtype, &dev)?;

    let actor = vars_of(&policy.actor, dtype, &dev)?;
    let critic_vars = vars_of(critic, dtype, &dev)?;
    let out = forward_t(&obs, &actor)?;
    let (mean, log_std, log_std_var) = if policy.log_std.is_empty() {
        let mean = out.narrow(1, 0, a)?;
        let ls = out.narrow(1, a, a)?.clamp(LOG_STD_MIN, LOG_STD_MAX)?;
        (mean, ls, None)
    } else {
        let v = var(&policy.log_std, &[a], dtype, &dev)?;
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
        let old_v = tensor(&mb.old_values, &[n], dtype, &dev)?;
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
    let scalar = |t: &Tensor| t.to_dtype(DType::F64)?.to_scalar::<f64>();
    Ok(ExactResult {
        total_loss: scalar(&total)?,
        policy_loss: scalar(&policy_loss)?,
        value_loss: scalar(&value_loss)?,
        entropy: scalar(&entropy)?,
        ratios: ratio.to_dtype(DType::F64)?.to_vec1()?,
        policy_grads: grads_of(&grads, actor_list)?,
        value_grads: grads_of(&grads, critic_list)?,
    })
}

/// Random PPO minibatches on small networks, shared by the gradient checks of both update paths.
#[cfg(test)]
pub(crate) mod cases {
    use rand::{Rng, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    use super::super::gaussian::{fill_standard_normal, log_prob};
    use super::super::normalize::ObsNormalizer;
    use super::*;

    /// One case: networks, a minibatch and the settings.
    pub struct Case {
        pub policy: Policy,
        pub critic: Mlp,
        pub mb: Minibatch,
        pub cfg: PpoConfig,
    }

    fn normals(rng: &mut ChaCha8Rng, n: usize, scale: f32) -> Vec<f32> {
        let mut v = vec![0.0; n];
        fill_standard_normal(rng, &mut v);
        v.iter_mut().for_each(|x| *x *= scale);
        v
    }

    /// A random case: `sizes` = (obs, hidden..., act); old log-probabilities are the current
    /// ones plus noise of std 0.3, so that some ratios fall outside the clip band on either side.
    pub fn random_case(
        seed: u64,
        sizes: &[usize],
        n: usize,
        state_dependent: bool,
        cfg: PpoConfig,
    ) -> Case {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let (o, a) = (sizes[0], *sizes.last().unwrap());
        let mut actor_sizes = sizes.to_vec();
        if state_dependent {
            *actor_sizes.last_mut().unwrap() = 2 * a;
        }
        let mut actor = Mlp::orthogonal(&actor_sizes, 1.4, 0.8, &mut rng);
        let mut critic_sizes = sizes.to_vec();
        *critic_sizes.last_mut().unwrap() = 1;
        let mut critic = Mlp::orthogonal(&critic_sizes, 1.4, 1.0, &mut rng);
        for l in actor.layers.iter_mut().chain(critic.layers.iter_mut()) {
            l.b = normals(&mut rng, l.b.len(), 0.2);
        }
        let log_std = if state_dependent {
            Vec::new()
        } else {
            normals(&mut rng, a, 0.3)
        };
        let policy = Policy {
            actor,
            log_std,
            act_dim: a,
            norm: ObsNormalizer::identity(o),
        };
        let obs = normals(&mut rng, n * o, 1.0);
        let mut actions = Vec::with_capacity(n * a);
        let mut old_log_probs = Vec::with_capacity(n);
        let mut old_values = Vec::with_capacity(n);
        for row in obs.chunks(o) {
            let mut out = vec![0.0f32; policy.actor.output_dim()];
            policy.actor.forward_alloc(row, &mut out);
            let ls: Vec<f32> = if state_dependent {
                out[a..]
                    .iter()
                    .map(|x| x.clamp(LOG_STD_MIN, LOG_STD_MAX))
                    .collect()
            } else {
                policy.log_std.clone()
            };
            let act: Vec<f32> = (0..a)
                .map(|j| out[j] + ls[j].exp() * normals(&mut rng, 1, 1.0)[0])
                .collect();
            old_log_probs.push(log_prob(&act, &out[..a], &ls) + normals(&mut rng, 1, 0.3)[0]);
            actions.extend(act);
            let mut v = [0.0f32];
            critic.forward_alloc(row, &mut v);
            old_values.push(v[0] + rng.gen_range(-0.5..0.5));
        }
        let mb = Minibatch {
            len: n,
            obs,
            actions,
            old_log_probs,
            advantages: normals(&mut rng, n, 1.0),
            targets: normals(&mut rng, n, 1.0),
            old_values,
        };
        Case {
            policy,
            critic,
            mb,
            cfg,
        }
    }

    /// Settings that switch every optional part of the loss on.
    pub fn full_loss() -> PpoConfig {
        PpoConfig {
            entropy_coef: 0.03,
            clip_value_loss: true,
            value_coef: 0.7,
            ..PpoConfig::default()
        }
    }
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
        let vars = vars_of(&m, DType::F32, &dev).unwrap();
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

    /// Every parameter of the policy and value networks (and the log std) as mutable f32s, in
    /// the order of the gradient vectors.
    fn params_mut(c: &mut cases::Case) -> Vec<&mut [f32]> {
        let mut v = c.policy.actor.tensors_mut();
        if !c.policy.log_std.is_empty() {
            v.push(&mut c.policy.log_std[..]);
        }
        v.extend(c.critic.tensors_mut());
        v
    }

    #[test]
    fn full_loss_gradient_matches_central_finite_differences() {
        // d f / d theta ~ (f(theta + h) - f(theta - h)) / 2h with O(h^2) error (central
        // difference; e.g. Nocedal & Wright, "Numerical Optimization", 2nd ed. 2006, eq. 8.2).
        // The loss is evaluated in f64 with the exact tanh (the candle path in F64); the step
        // actually taken is the f32 difference of the perturbed weight, so f32 weights do not
        // bias the quotient. Both std variants, clipped value loss and entropy bonus on.
        for (seed, sd) in [(11u64, false), (12, true)] {
            let mut c = cases::random_case(seed, &[3, 5, 4, 2], 6, sd, cases::full_loss());
            let exact = loss_and_grads_in(&c.policy, &c.critic, &c.mb, &c.cfg, DType::F64).unwrap();
            let analytic: Vec<f64> = exact
                .policy_grads
                .iter()
                .chain(&exact.value_grads)
                .flatten()
                .copied()
                .collect();
            let n_params: usize = params_mut(&mut c).iter().map(|t| t.len()).sum();
            assert_eq!(analytic.len(), n_params);
            let mut fd = Vec::with_capacity(n_params);
            let mut k = 0;
            while k < n_params {
                let (t, i) = {
                    let lens: Vec<usize> = params_mut(&mut c).iter().map(|t| t.len()).collect();
                    let mut rem = k;
                    let mut t = 0;
                    while rem >= lens[t] {
                        rem -= lens[t];
                        t += 1;
                    }
                    (t, rem)
                };
                let w0 = params_mut(&mut c)[t][i];
                let h = 1e-3f32;
                let mut eval = |w: f32| {
                    params_mut(&mut c)[t][i] = w;
                    loss_and_grads_in(&c.policy, &c.critic, &c.mb, &c.cfg, DType::F64)
                        .unwrap()
                        .total_loss
                };
                let (wp, wm) = (w0 + h, w0 - h);
                let d = (eval(wp) - eval(wm)) / (wp as f64 - wm as f64);
                params_mut(&mut c)[t][i] = w0;
                fd.push(d);
                k += 1;
            }
            let diff: f64 = fd
                .iter()
                .zip(&analytic)
                .map(|(a, b)| (a - b).powi(2))
                .sum::<f64>()
                .sqrt();
            let norm: f64 = analytic.iter().map(|x| x * x).sum::<f64>().sqrt();
            assert!(norm > 1e-3, "degenerate case: gradient norm {norm}");
            assert!(
                diff / norm < 1e-3,
                "state-dependent std {sd}: relative error {}",
                diff / norm
            );
            // And the case is not trivial: some ratios are clipped on each side.
            let ratios = &exact.ratios;
            assert!(
                ratios.iter().any(|&r| r > 1.2) && ratios.iter().any(|&r| r < 0.8),
                "{ratios:?}"
            );
        }
    }
}
