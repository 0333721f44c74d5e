//! Generalized advantage estimation (Schulman et al., ICLR 2016, eq. 16) over one environment's
//! rollout segment, with terminal states and time-limit cuts told apart (Pardo et al., ICML 2018).

/// One environment's rollout segment, step by step (all slices of equal length).
#[derive(Clone, Copy, Debug)]
pub struct Segment<'a> {
    /// Reward r_t received after the action at step t.
    pub rewards: &'a [f32],
    /// Value estimate V(s_t) of the observation at step t.
    pub values: &'a [f32],
    /// The episode ended in a terminal state at step t: nothing follows it.
    pub terminated: &'a [bool],
    /// The episode was cut by a time limit at step t (and not terminated).
    pub truncated: &'a [bool],
    /// V(final observation) at a truncated step, bootstrapped in place of the next value; read
    /// only where `truncated` is set.
    pub cut_values: &'a [f32],
    /// V(s_T) of the observation after the last step (the rollout end is also a cut).
    pub last_value: f32,
}

/// Write the GAE(gamma, lambda) advantages and the value targets `advantage + value` of every
/// step. `delta_t = r_t + gamma * V_next - V(s_t)`, where V_next is 0 after a terminal state, the
/// value of the final observation after a time-limit cut, and V(s_{t+1}) otherwise;
/// `A_t = delta_t + gamma * lambda * A_{t+1}`, restarted after every episode end (eq. 16).
pub fn advantages(seg: &Segment, gamma: f32, lambda: f32, adv: &mut [f32], targets: &mut [f32]) {
    let n = seg.rewards.len();
    assert!(
        seg.values.len() == n
            && seg.terminated.len() == n
            && seg.truncated.len() == n
            && seg.cut_values.len() == n
            && adv.len() == n
            && targets.len() == n,
        "GAE segment slices must have equal length"
    );
    let mut next_adv = 0.0f32;
    let mut next_value = seg.last_value;
    for t in (0..n).rev() {
        let (boot, carry) = if seg.terminated[t] {
            (0.0, 0.0)
        } else if seg.truncated[t] {
            (seg.cut_values[t], 0.0)
        } else {
            (next_value, 1.0)
        };
        let delta = seg.rewards[t] + gamma * boot - seg.values[t];
        let a = delta + gamma * lambda * carry * next_adv;
        adv[t] = a;
        targets[t] = a + seg.values[t];
        next_adv = a;
        next_value = seg.values[t];
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // A hand-worked sequence: terminal at t = 1, time-limit cut at t = 3 (V(final) = 3.0),
    // rollout end after t = 4 (V(s_5) = 4.0), gamma = 0.9.
    const R: [f32; 5] = [1.0, 0.0, 2.0, -1.0, 0.5];
    const V: [f32; 5] = [0.5, 1.0, -0.5, 2.0, 1.5];
    const TERM: [bool; 5] = [false, true, false, false, false];
    const TRUNC: [bool; 5] = [false, false, false, true, false];
    const CUT: [f32; 5] = [0.0, 0.0, 0.0, 3.0, 0.0];

    fn run(lambda: f32) -> ([f32; 5], [f32; 5]) {
        let seg = Segment {
            rewards: &R,
            values: &V,
            terminated: &TERM,
            truncated: &TRUNC,
            cut_values: &CUT,
            last_value: 4.0,
        };
        let (mut a, mut g) = ([0.0; 5], [0.0; 5]);
        advantages(&seg, 0.9, lambda, &mut a, &mut g);
        (a, g)
    }

    fn close(a: &[f32], b: &[f32]) {
        for (x, y) in a.iter().zip(b) {
            assert!((x - y).abs() < 1e-5, "{a:?} vs {b:?}");
        }
    }

    #[test]
    fn lambda_zero_gives_one_step_td_residuals() {
        // Schulman et al. 2016, section 3: GAE(gamma, 0) = delta_t = r_t + gamma V(s_{t+1}) - V(s_t).
        let (a, _) = run(0.0);
        close(
            &a,
            &[
                1.0 + 0.9 * 1.0 - 0.5,  // 1.4
                0.0 - 1.0,              // terminal: no bootstrap
                2.0 + 0.9 * 2.0 + 0.5,  // 4.3
                -1.0 + 0.9 * 3.0 - 2.0, // cut: bootstrap V(final) = 3 (Pardo et al. 2018)
                0.5 + 0.9 * 4.0 - 1.5,  // rollout end: bootstrap V(s_5) = 4
            ],
        );
    }

    #[test]
    fn lambda_one_gives_discounted_returns_minus_values() {
        // Schulman et al. 2016, section 3: GAE(gamma, 1) = sum_l gamma^l r_{t+l} - V(s_t),
        // with the bootstrap values closing each cut segment.
        let g4 = 0.5 + 0.9 * 4.0;
        let g3 = -1.0 + 0.9 * 3.0;
        let g2 = 2.0 + 0.9 * g3;
        let g1 = 0.0;
        let g0 = 1.0 + 0.9 * g1;
        let (a, targets) = run(1.0);
        close(&a, &[g0 - 0.5, g1 - 1.0, g2 + 0.5, g3 - 2.0, g4 - 1.5]);
        close(&targets, &[g0, g1, g2, g3, g4]);
    }

    #[test]
    fn intermediate_lambda_is_the_discounted_sum_of_residuals() {
        // Eq. 16: A_t = sum_l (gamma lambda)^l delta_{t+l}, summed within an episode.
        let gl = 0.9 * 0.5;
        let d = [1.4f32, -1.0, 4.3, -0.3, 2.6];
        let (a, _) = run(0.5);
        close(&a, &[d[0] + gl * d[1], d[1], d[2] + gl * d[3], d[3], d[4]]);
    }
}
