//! One rollout: every environment stepped for rollout_steps with the current policy, observations normalised,
//! rewards scaled, finished episodes reported to the observer.

use super::*;

impl Trainer {
    pub(super) fn value_of(critic: &Mlp, norm_obs: &[f32], sc: &mut Scratch) -> f32 {
        let mut v = [0.0f32];
        critic.forward(norm_obs, &mut sc.s0, &mut sc.s1, &mut v);
        v[0]
    }

    pub(super) fn rollout(
        &mut self,
        observer: &mut dyn Observer,
    ) -> Result<RolloutTally, LearnError> {
        let (o_dim, a_dim) = (self.obs_dim, self.act_dim);
        let width = self.policy.actor.max_width().max(self.critic.max_width());
        let mut sc = Scratch::new(o_dim, width, self.policy.actor.output_dim());
        let mut log_std = vec![0.0f32; a_dim];
        let mut noise = vec![0.0f32; a_dim];
        let mut sample = vec![0.0f32; a_dim];
        let mut clipped = vec![0.0f32; a_dim];
        let mut final_norm = vec![0.0f32; o_dim];
        let mut tally = RolloutTally::default();
        let n_env = self.cfg.num_envs;
        let out_dim = self.policy.actor.output_dim();
        self.step_obs.resize(n_env * o_dim, 0.0);
        self.step_actor.prepare(&self.policy.actor);
        self.step_critic.prepare(&self.critic);
        for t in 0..self.cfg.rollout_steps {
            // Normalise every environment's observation (the statistics stay frozen during the
            // rollout), then run the policy and value networks over all of them in one batch.
            for e in 0..n_env {
                let raw = &self.raw_obs[e * o_dim..(e + 1) * o_dim];
                if raw.iter().any(|x| !x.is_finite()) {
                    return Err(LearnError::Diverged {
                        iteration: self.iteration,
                        reason: format!("environment {e} returned a non-finite observation"),
                    });
                }
                if self.cfg.normalize_obs {
                    self.obs_stats.push(raw);
                }
                let norm = &mut self.step_obs[e * o_dim..(e + 1) * o_dim];
                self.policy.norm.apply(raw, norm);
                let i = self.buf.index(e, t);
                self.buf.obs[i * o_dim..(i + 1) * o_dim].copy_from_slice(norm);
            }
            let means = self
                .step_actor
                .run_prepared(&self.policy.actor, &self.step_obs, n_env);
            let values = self
                .step_critic
                .run_prepared(&self.critic, &self.step_obs, n_env);
            for e in 0..n_env {
                let i = self.buf.index(e, t);
                let raw = &mut self.raw_obs[e * o_dim..(e + 1) * o_dim];
                let out = &means[e * out_dim..(e + 1) * out_dim];
                self.policy.log_std_into(out, &mut log_std);
                let value = values[e];
                fill_standard_normal(&mut self.rng, &mut noise);
                for k in 0..a_dim {
                    let std = log_std[k].exp();
                    tally.std_sum += std as f64;
                    sample[k] = out[k] + std * noise[k];
                    clipped[k] = sample[k].clamp(-1.0, 1.0);
                }
                self.buf.log_probs[i] = log_prob(&sample, &out[..a_dim], &log_std);
                self.buf.actions[i * a_dim..(i + 1) * a_dim].copy_from_slice(&sample);
                self.buf.values[i] = value;
                let tr = self.envs[e].step(&clipped, raw);
                let done = tr.terminated || tr.truncated;
                self.env_steps += 1;
                self.ep_return[e] += tr.reward as f64;
                self.ep_len[e] += 1;
                self.buf.rewards[i] = match &mut self.reward_scaler {
                    Some(s) => s.scale(e, tr.reward, done),
                    None => tr.reward,
                };
                self.buf.terminated[i] = tr.terminated;
                self.buf.truncated[i] = tr.truncated && !tr.terminated;
                self.buf.cut_values[i] = 0.0;
                if self.buf.truncated[i] {
                    // Time limit: bootstrap from V(final observation) (Pardo et al. 2018).
                    if raw.iter().any(|x| !x.is_finite()) {
                        return Err(LearnError::Diverged {
                            iteration: self.iteration,
                            reason: format!("environment {e} returned a non-finite observation"),
                        });
                    }
                    self.policy.norm.apply(raw, &mut final_norm);
                    self.buf.cut_values[i] = Self::value_of(&self.critic, &final_norm, &mut sc);
                }
                if done {
                    let ep = EpisodeEnd {
                        env_index: e,
                        raw_return: self.ep_return[e],
                        length: self.ep_len[e],
                        terminated: tr.terminated,
                        env_steps: self.env_steps,
                    };
                    tally.episodes += 1;
                    tally.return_sum += ep.raw_return;
                    tally.length_sum += ep.length as f64;
                    tally.terminated += tr.terminated as u64;
                    observer.on_episode(&ep);
                    self.ep_return[e] = 0.0;
                    self.ep_len[e] = 0;
                    self.envs[e].reset(raw);
                }
            }
        }
        for e in 0..self.cfg.num_envs {
            let raw = &self.raw_obs[e * o_dim..(e + 1) * o_dim];
            self.policy.norm.apply(raw, &mut final_norm);
            self.buf.last_values[e] = Self::value_of(&self.critic, &final_norm, &mut sc);
        }
        Ok(tally)
    }
}
