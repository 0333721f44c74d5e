//! The Gaussian policy as used for acting: the policy-mean network, its log standard deviation
//! (a learned vector, or a second head of the network), and the frozen observation
//! normalisation. Evaluation and replay use [`Policy::act_deterministic`].

use super::mlp::{Mlp, LANES};
use super::normalize::ObsNormalizer;

/// Bounds on a state-dependent log standard deviation (std from 0.0067 to 7.4 in action units;
/// common practice to keep the density finite).
pub const LOG_STD_MIN: f32 = -5.0;
/// See [`LOG_STD_MIN`].
pub const LOG_STD_MAX: f32 = 2.0;

/// A Gaussian policy over actions in [-1, 1]^act_dim.
#[derive(Clone, Debug, PartialEq)]
pub struct Policy {
    pub(crate) actor: Mlp,
    /// State-independent log std (length act_dim); empty when the network outputs it.
    pub(crate) log_std: Vec<f32>,
    pub(crate) act_dim: usize,
    pub(crate) norm: ObsNormalizer,
}

/// Reusable buffers for one forward pass.
#[derive(Clone, Debug)]
pub(crate) struct Scratch {
    pub s0: Vec<f32>,
    pub s1: Vec<f32>,
    pub out: Vec<f32>,
    pub norm_obs: Vec<f32>,
}

impl Scratch {
    pub fn new(obs_dim: usize, width: usize, out: usize) -> Self {
        Scratch {
            s0: vec![0.0; width],
            s1: vec![0.0; width],
            out: vec![0.0; out],
            norm_obs: vec![0.0; obs_dim],
        }
    }
}

/// Reusable buffers for [`Policy::act_deterministic_rows`].
#[derive(Clone, Debug, Default)]
pub struct RowsScratch {
    norm: Vec<f32>,
    xt: Vec<[f32; LANES]>,
    s0: Vec<[f32; LANES]>,
    s1: Vec<[f32; LANES]>,
    out: Vec<[f32; LANES]>,
}

impl Policy {
    /// Observation length the policy expects.
    pub fn obs_dim(&self) -> usize {
        self.actor.input_dim()
    }

    /// Action length the policy produces.
    pub fn act_dim(&self) -> usize {
        self.act_dim
    }

    /// True when the log std is a second output head.
    pub fn state_dependent_std(&self) -> bool {
        self.log_std.is_empty()
    }

    /// The policy-mean network.
    pub fn network(&self) -> &Mlp {
        &self.actor
    }

    /// The frozen observation normalisation.
    pub fn normalizer(&self) -> &ObsNormalizer {
        &self.norm
    }

    /// The log std for one row `out` of the policy network's output: its clamped second head
    /// (state-dependent std) or the learned parameter vector.
    pub(crate) fn log_std_into(&self, out: &[f32], log_std_out: &mut [f32]) {
        if self.log_std.is_empty() {
            for (d, &l) in log_std_out.iter_mut().zip(&out[self.act_dim..]) {
                *d = l.clamp(LOG_STD_MIN, LOG_STD_MAX);
            }
        } else {
            log_std_out.copy_from_slice(&self.log_std);
        }
    }

    /// The deterministic action for a raw (physical) observation: normalise with the frozen
    /// statistics, take the Gaussian mean, clip to [-1, 1].
    pub fn act_deterministic(&self, obs: &[f32], action_out: &mut [f32]) {
        assert_eq!(obs.len(), self.obs_dim(), "observation length");
        assert_eq!(action_out.len(), self.act_dim, "action length");
        let mut s = Scratch::new(
            self.obs_dim(),
            self.actor.max_width(),
            self.actor.output_dim(),
        );
        let mut norm = std::mem::take(&mut s.norm_obs);
        self.norm.apply(obs, &mut norm);
        let Scratch { s0, s1, out, .. } = &mut s;
        self.actor.forward(&norm, s0, s1, out);
        for (a, &m) in action_out.iter_mut().zip(out.iter()) {
            *a = m.clamp(-1.0, 1.0);
        }
    }

    /// [`Policy::act_deterministic`] for several observations at once (`obs` row-major, one row per
    /// observation; `actions` row-major out), with the same bits as calling it row by row: the rows go
    /// through the network [`LANES`] at a time ([`Mlp::forward_lanes`]).
    pub fn act_deterministic_rows(&self, obs: &[f32], actions: &mut [f32], sc: &mut RowsScratch) {
        let (od, ad) = (self.obs_dim(), self.act_dim);
        assert_eq!(obs.len() % od, 0, "observation rows");
        assert_eq!(actions.len(), obs.len() / od * ad, "action rows");
        sc.norm.resize(od, 0.0);
        sc.xt.resize(od, [0.0; LANES]);
        sc.s0.resize(self.actor.max_width(), [0.0; LANES]);
        sc.s1.resize(self.actor.max_width(), [0.0; LANES]);
        sc.out.resize(self.actor.output_dim(), [0.0; LANES]);
        for (obs, actions) in obs.chunks(LANES * od).zip(actions.chunks_mut(LANES * ad)) {
            // Lanes without a row compute on zeros, and their outputs are not read.
            sc.xt.fill([0.0; LANES]);
            for (l, row) in obs.chunks_exact(od).enumerate() {
                self.norm.apply(row, &mut sc.norm);
                for (x, &v) in sc.xt.iter_mut().zip(&sc.norm) {
                    x[l] = v;
                }
            }
            self.actor
                .forward_lanes(&sc.xt, &mut sc.s0, &mut sc.s1, &mut sc.out);
            for (l, a) in actions.chunks_exact_mut(ad).enumerate() {
                for (a, m) in a.iter_mut().zip(&sc.out) {
                    *a = m[l].clamp(-1.0, 1.0);
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::learn::gaussian::fill_standard_normal;
    use rand::SeedableRng;

    // No outside source: a cross-check of two orderings of the same arithmetic. Acting for many rows at once
    // must give each row the bits acting for it alone gives, for row counts that fill no, one and several
    // groups of `LANES` and leave partial ones, with a normalisation that clips.
    #[test]
    fn acting_for_rows_together_gives_the_bits_of_acting_for_each_alone() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(3);
        let (od, ad) = (45, 2);
        let mut mean = vec![0.0f32; od];
        fill_standard_normal(&mut rng, &mut mean);
        let policy = Policy {
            actor: Mlp::orthogonal(&[od, 64, 64, ad], 1.4, 0.5, &mut rng),
            log_std: vec![-0.5; ad],
            act_dim: ad,
            norm: ObsNormalizer {
                mean,
                inv_std: (0..od).map(|i| 0.5 + (i % 7) as f32 * 0.3).collect(),
                clip: 3.0,
            },
        };
        let mut sc = RowsScratch::default();
        for rows in [1usize, 7, 8, 9, 30] {
            let mut obs = vec![0.0f32; rows * od];
            fill_standard_normal(&mut rng, &mut obs);
            obs.iter_mut().step_by(3).for_each(|v| *v *= 4.0);
            let mut together = vec![0.0f32; rows * ad];
            policy.act_deterministic_rows(&obs, &mut together, &mut sc);
            let mut clipped = 0;
            for (r, (o, t)) in obs
                .chunks_exact(od)
                .zip(together.chunks_exact(ad))
                .enumerate()
            {
                let mut alone = vec![0.0f32; ad];
                policy.act_deterministic(o, &mut alone);
                for (a, b) in alone.iter().zip(t) {
                    assert_eq!(a.to_bits(), b.to_bits(), "{rows} rows, row {r}");
                    clipped += (a.abs() == 1.0) as usize;
                }
            }
            assert!(
                clipped < rows * ad,
                "every action clipped: the check would see only +-1"
            );
        }
    }
}
