//! One PPO update: epochs of shuffled minibatches gathered from the rollout, the clipped objective's
//! gradients (fused path or candle reference path), gradient clipping and Adam steps.

use super::*;

impl Trainer {
    pub(super) fn learning_rate(&self) -> f64 {
        let frac = if self.cfg.lr_decay_steps > 0 {
            (1.0 - self.env_steps as f64 / self.cfg.lr_decay_steps as f64).max(0.0)
        } else {
            1.0
        };
        self.cfg.learning_rate * frac
    }

    pub(super) fn gather(&self, idx: &[usize], mb: &mut Minibatch) {
        let (o, a) = (self.obs_dim, self.act_dim);
        let b = &self.buf;
        let n = idx.len();
        mb.len = n;
        // Sized once (every minibatch but a short last one has the same length); every element is
        // overwritten below, a field at a time.
        mb.obs.resize(n * o, 0.0);
        mb.actions.resize(n * a, 0.0);
        for (v, src) in [
            (&mut mb.old_log_probs, &b.log_probs),
            (&mut mb.advantages, &b.advantages),
            (&mut mb.targets, &b.targets),
            (&mut mb.old_values, &b.values),
        ] {
            v.resize(n, 0.0);
            v.iter_mut().zip(idx).for_each(|(x, &i)| *x = src[i]);
        }
        for (row, &i) in mb.obs.chunks_exact_mut(o).zip(idx) {
            row.copy_from_slice(&b.obs[i * o..(i + 1) * o]);
        }
        // An action row is one or two values: a plain loop, not a `memcpy` call per row.
        for (row, &i) in mb.actions.chunks_exact_mut(a).zip(idx) {
            for (x, &y) in row.iter_mut().zip(&b.actions[i * a..(i + 1) * a]) {
                *x = y;
            }
        }
        if self.cfg.normalize_advantages && idx.len() > 1 {
            let n = idx.len() as f64;
            let m = mb.advantages.iter().map(|&x| x as f64).sum::<f64>() / n;
            let v = mb
                .advantages
                .iter()
                .map(|&x| (x as f64 - m).powi(2))
                .sum::<f64>()
                / n;
            let inv = 1.0 / (v.sqrt() + 1e-8);
            for x in &mut mb.advantages {
                *x = ((*x as f64 - m) * inv) as f32;
            }
        }
    }

    pub(super) fn update(&mut self, lr: f64) -> Result<IterationStats, LearnError> {
        let n = self.buf.len();
        let mut perm = std::mem::take(&mut self.perm);
        perm.clear();
        perm.extend(0..n);
        let mut mb = std::mem::take(&mut self.minibatch);
        let mut r = std::mem::replace(&mut self.result, fused::empty_result());
        let mut s = IterationStats::default();
        let eps = self.cfg.clip_epsilon as f32;
        let (mut steps, mut samples) = (0u64, 0u64);
        for _ in 0..self.cfg.epochs {
            perm.shuffle(&mut self.rng);
            for chunk in perm.chunks(self.cfg.minibatch_size) {
                self.gather(chunk, &mut mb);
                if self.cfg.fused_update {
                    fused::loss_and_grads_into(
                        &self.policy,
                        &self.critic,
                        &mb,
                        &self.cfg,
                        &mut self.fused_ws,
                        &mut r,
                    );
                } else {
                    r = loss_and_grads(&self.policy, &self.critic, &mb, &self.cfg)?;
                }
                let diverged = |what: &str| LearnError::Diverged {
                    iteration: self.iteration,
                    reason: format!("non-finite {what}"),
                };
                if !(r.policy_loss.is_finite() && r.value_loss.is_finite() && r.entropy.is_finite())
                {
                    return Err(diverged("loss"));
                }
                let (pn, vn) = self.clip_grads(&mut r.policy_grads, &mut r.value_grads);
                if !(pn.is_finite() && vn.is_finite()) {
                    return Err(diverged("gradient"));
                }
                self.policy_opt.step(
                    lr,
                    &mut policy_tensors_mut(&mut self.policy),
                    &r.policy_grads,
                );
                self.value_opt
                    .step(lr, &mut self.critic.tensors_mut(), &r.value_grads);
                steps += 1;
                s.policy_loss += r.policy_loss as f64;
                s.value_loss += r.value_loss as f64;
                s.entropy += r.entropy as f64;
                s.policy_grad_norm += pn;
                s.value_grad_norm += vn;
                for &ratio in &r.ratios {
                    s.approx_kl += ((ratio - 1.0) - ratio.ln()) as f64;
                    s.clip_fraction += ((ratio - 1.0).abs() > eps) as u64 as f64;
                }
                samples += r.ratios.len() as u64;
            }
        }
        let policy_ok =
            self.policy.actor.all_finite() && self.policy.log_std.iter().all(|x| x.is_finite());
        if !(policy_ok && self.critic.all_finite()) {
            return Err(LearnError::Diverged {
                iteration: self.iteration,
                reason: "non-finite weights after the update".into(),
            });
        }
        let k = steps as f64;
        s.policy_loss /= k;
        s.value_loss /= k;
        s.entropy /= k;
        s.policy_grad_norm /= k;
        s.value_grad_norm /= k;
        s.approx_kl /= samples as f64;
        s.clip_fraction /= samples as f64;
        self.perm = perm;
        self.minibatch = mb;
        self.result = r;
        Ok(s)
    }

    /// Clip the gradients (separately per network, or jointly); returns the raw norms.
    pub(super) fn clip_grads(&self, pg: &mut [Vec<f32>], vg: &mut [Vec<f32>]) -> (f64, f64) {
        let max = self.cfg.max_grad_norm;
        if self.cfg.separate_grad_clip {
            (clip_global_norm(pg, max), clip_global_norm(vg, max))
        } else {
            let (pn, vn) = (global_norm(pg), global_norm(vg));
            let joint = (pn * pn + vn * vn).sqrt();
            if max > 0.0 && joint > max {
                let s = (max / (joint + 1e-6)) as f32;
                scale_all(pg.iter_mut().chain(vg.iter_mut()), s);
            }
            (pn, vn)
        }
    }
}
