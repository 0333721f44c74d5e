//! The Gaussian policy as used for acting: the policy-mean network, its log standard deviation
//! (a learned vector, or a second head of the network), and the frozen observation
//! normalisation. Evaluation and replay use [`Policy::act_deterministic`].

use super::mlp::Mlp;
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
}
