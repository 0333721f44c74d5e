//! The environment interface the learner steps: other modules (the arm simulator with a reward
//! composer and a curriculum) implement it; the learner owns a batch of them.

/// One environment instance; owns its own seeded RNG. Actions are in [-1, 1]^act_dim (the learner
/// clips its sample to that box; the env scales to physical limits).
///
/// ```
/// use termwise::learn::{Environment, Transition};
/// /// A 1-D integrator: the observation is the position, the goal is zero.
/// struct Line { x: f32, t: u32 }
/// impl Environment for Line {
///     fn obs_dim(&self) -> usize { 1 }
///     fn act_dim(&self) -> usize { 1 }
///     fn reset(&mut self, obs: &mut [f32]) { self.x = 1.0; self.t = 0; obs[0] = self.x; }
///     fn step(&mut self, action: &[f32], obs: &mut [f32]) -> Transition {
///         self.x += 0.1 * action[0];
///         self.t += 1;
///         obs[0] = self.x;
///         Transition { reward: -self.x.abs(), terminated: self.x.abs() < 0.05, truncated: self.t >= 50 }
///     }
/// }
/// ```
pub trait Environment: Send {
    /// Length of the observation vector.
    fn obs_dim(&self) -> usize;
    /// Length of the action vector.
    fn act_dim(&self) -> usize;
    /// Start a new episode and write its first observation.
    fn reset(&mut self, obs: &mut [f32]);
    /// Apply one action, write the next observation (the final one when the episode ends).
    fn step(&mut self, action: &[f32], obs: &mut [f32]) -> Transition;
}

/// What one environment step reports back.
#[derive(Clone, Copy, Debug)]
pub struct Transition {
    /// Reward of this step.
    pub reward: f32,
    /// The episode reached a terminal state (goal reached, collision): no value after it.
    pub terminated: bool,
    /// The episode was cut by a time limit: the state is not terminal, so the learner bootstraps
    /// from the value of the final observation (Pardo et al., ICML 2018).
    pub truncated: bool,
}
