//! Potential-based shaping keeps the optimal policy (Ng, Harada & Russell, "Policy invariance under reward
//! transformations", ICML 1999, Theorem 1): checked by value iteration on small tabular MDPs built here (a
//! gridworld with terminal cells and a random MDP), using termwise's own shaping function, for random
//! potentials; and a non-potential bonus of the same size that does change the policy (so the check can fail).
// Tabular value iteration indexes Q by state and action, mirroring the Bellman equation.
#![allow(clippy::needless_range_loop)]

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use termwise::reward::terms::potential::shaping;

/// A finite MDP: transitions[s][a] = [(s', probability)], reward(s, a, s'), terminal states absorb with value 0.
struct Mdp {
    n_states: usize,
    n_actions: usize,
    transitions: Vec<Vec<Vec<(usize, f64)>>>,
    reward: Box<dyn Fn(usize, usize, usize) -> f64>,
    terminal: Vec<bool>,
    gamma: f64,
}

impl Mdp {
    /// Optimal action values by value iteration (Bellman optimality backup until the change is < 1e-13).
    fn q_values(&self, extra: &dyn Fn(usize, usize, usize) -> f64) -> Vec<Vec<f64>> {
        let mut v = vec![0.0; self.n_states];
        let mut q = vec![vec![0.0; self.n_actions]; self.n_states];
        for _ in 0..100_000 {
            let mut change: f64 = 0.0;
            for s in 0..self.n_states {
                if self.terminal[s] {
                    continue;
                }
                for a in 0..self.n_actions {
                    q[s][a] = self.transitions[s][a]
                        .iter()
                        .map(|&(s2, p)| {
                            let cont = if self.terminal[s2] { 0.0 } else { v[s2] };
                            p * ((self.reward)(s, a, s2) + extra(s, a, s2) + self.gamma * cont)
                        })
                        .sum();
                }
                let best = q[s].iter().cloned().fold(f64::NEG_INFINITY, f64::max);
                change = change.max((best - v[s]).abs());
                v[s] = best;
            }
            if change < 1e-13 {
                return q;
            }
        }
        panic!("value iteration did not converge");
    }
}

/// The set of greedy actions in each non-terminal state (ties within 1e-9 included).
fn greedy_sets(mdp: &Mdp, q: &[Vec<f64>]) -> Vec<Vec<usize>> {
    (0..mdp.n_states)
        .map(|s| {
            if mdp.terminal[s] {
                return vec![];
            }
            let best = q[s].iter().cloned().fold(f64::NEG_INFINITY, f64::max);
            (0..mdp.n_actions)
                .filter(|&a| q[s][a] >= best - 1e-9)
                .collect()
        })
        .collect()
}

/// 6 x 6 gridworld, deterministic moves (up, down, left, right; blocked moves stay), walls inside, a goal
/// cell (terminal, +10 on entry) and a pit (terminal, -10); every step costs 1.
fn gridworld(gamma: f64) -> Mdp {
    const W: usize = 6;
    let walls = [(1, 1), (1, 2), (1, 3), (3, 2), (3, 3), (3, 4), (4, 4)];
    let goal = 5 * W + 5;
    let pit = 2 * W + 4;
    let idx = |x: usize, y: usize| y * W + x;
    let n = W * W;
    let mut transitions = vec![vec![vec![]; 4]; n];
    for y in 0..W {
        for x in 0..W {
            for (a, (dx, dy)) in [(0i32, 1i32), (0, -1), (-1, 0), (1, 0)].iter().enumerate() {
                let nx = x as i32 + dx;
                let ny = y as i32 + dy;
                let blocked = nx < 0
                    || ny < 0
                    || nx >= W as i32
                    || ny >= W as i32
                    || walls.contains(&(nx as usize, ny as usize));
                let to = if blocked {
                    idx(x, y)
                } else {
                    idx(nx as usize, ny as usize)
                };
                transitions[idx(x, y)][a] = vec![(to, 1.0)];
            }
        }
    }
    let mut terminal = vec![false; n];
    terminal[goal] = true;
    terminal[pit] = true;
    let reward = Box::new(move |_s: usize, _a: usize, s2: usize| {
        -1.0 + if s2 == goal {
            10.0
        } else if s2 == pit {
            -10.0
        } else {
            0.0
        }
    });
    Mdp {
        n_states: n,
        n_actions: 4,
        transitions,
        reward,
        terminal,
        gamma,
    }
}

/// A random MDP: 12 states, 4 actions, each (s, a) leading to 3 random successors with random
/// probabilities, rewards uniform in [-1, 1] per (s, a, s'); no terminal states.
fn random_mdp(rng: &mut ChaCha8Rng, gamma: f64) -> Mdp {
    let (n, na) = (12, 4);
    let mut transitions = vec![vec![vec![]; na]; n];
    for row in transitions.iter_mut() {
        for cell in row.iter_mut() {
            let w: Vec<f64> = (0..3).map(|_| rng.gen_range(0.05..1.0)).collect();
            let tot: f64 = w.iter().sum();
            *cell = w.iter().map(|wi| (rng.gen_range(0..n), wi / tot)).collect();
        }
    }
    let table: Vec<f64> = (0..n * na * n).map(|_| rng.gen_range(-1.0..1.0)).collect();
    Mdp {
        n_states: n,
        n_actions: na,
        transitions,
        reward: Box::new(move |s, a, s2| table[(s * na + a) * n + s2]),
        terminal: vec![false; n],
        gamma,
    }
}

/// Check invariance for one MDP and one potential: same greedy action sets, and the shaped optimal action
/// values equal Q*(s, a) - Phi(s) (Ng et al. 1999, proof of Theorem 1).
fn assert_invariant(mdp: &Mdp, phi: &[f64]) {
    let base = mdp.q_values(&|_, _, _| 0.0);
    let term = &mdp.terminal;
    let g = mdp.gamma;
    let shaped = mdp.q_values(&|s, _a, s2| shaping(g, phi[s], phi[s2], term[s2]));
    assert_eq!(greedy_sets(mdp, &base), greedy_sets(mdp, &shaped));
    for s in (0..mdp.n_states).filter(|&s| !mdp.terminal[s]) {
        for a in 0..mdp.n_actions {
            let expect = base[s][a] - phi[s];
            assert!(
                (shaped[s][a] - expect).abs() < 1e-7,
                "Q'({s},{a}) = {} but Q - Phi = {expect}",
                shaped[s][a]
            );
        }
    }
}

#[test]
fn potential_shaping_keeps_gridworld_policy_for_random_potentials() {
    // Ng, Harada & Russell, ICML 1999, Theorem 1 (sufficiency): F = gamma Phi(s') - Phi(s) keeps optimal policies.
    let mut rng = ChaCha8Rng::seed_from_u64(1999);
    for &gamma in &[0.9, 0.99] {
        let mdp = gridworld(gamma);
        for _ in 0..20 {
            let phi: Vec<f64> = (0..mdp.n_states)
                .map(|_| rng.gen_range(-20.0..20.0))
                .collect();
            assert_invariant(&mdp, &phi);
        }
    }
}

#[test]
fn potential_shaping_keeps_random_mdp_policy_for_random_potentials() {
    // Ng, Harada & Russell, ICML 1999, Theorem 1, on stochastic transitions.
    let mut rng = ChaCha8Rng::seed_from_u64(7);
    for _ in 0..10 {
        let mdp = random_mdp(&mut rng, 0.9);
        for _ in 0..10 {
            let phi: Vec<f64> = (0..mdp.n_states)
                .map(|_| rng.gen_range(-5.0..5.0))
                .collect();
            assert_invariant(&mdp, &phi);
        }
    }
}

#[test]
fn non_potential_bonus_of_same_size_changes_the_policy() {
    // Constructed case (the failure mode Ng et al. 1999 describe in their introduction, from memory: a bonus
    // for entering a state that is not paid back on leaving creates a rewarding loop). Phi = c at one cell X near the start,
    // 0 elsewhere. The potential term pays gamma*c on entering X and -c on leaving; the non-potential bonus
    // pays the same gamma*c on every step that ends in X and never charges for leaving.
    let gamma = 0.95;
    let mdp = gridworld(gamma);
    let x_cell = 1; // cell (1, 0), next to the start
    let c = 10.0;
    let phi: Vec<f64> = (0..mdp.n_states)
        .map(|s| if s == x_cell { c } else { 0.0 })
        .collect();
    let base = mdp.q_values(&|_, _, _| 0.0);
    let term = &mdp.terminal;
    let shaped = mdp.q_values(&|s, _a, s2| shaping(gamma, phi[s], phi[s2], term[s2]));
    let bonus = mdp.q_values(&|_s, _a, s2| if s2 == x_cell { gamma * c } else { 0.0 });
    let (gb, gs, gx) = (
        greedy_sets(&mdp, &base),
        greedy_sets(&mdp, &shaped),
        greedy_sets(&mdp, &bonus),
    );
    assert_eq!(gb, gs, "potential shaping must keep the policy");
    assert_ne!(gb, gx, "the non-potential bonus must change the policy");
    // In X the bonus policy bounces against the bottom wall to stay in X (action 1 = down, blocked).
    assert!(gx[x_cell].contains(&1) && !gb[x_cell].contains(&1));
}
