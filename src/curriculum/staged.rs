//! `staged`: difficulty stages — how many obstacles are active, how far the goal may be from the start, how often
//! the goal jumps — advanced when the recent success rate passes a threshold.

use super::{Curriculum, EpisodeDraw, SuccessWindow};
use crate::sim::ArmEnv;
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};

/// One difficulty stage.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Stage {
    /// Active obstacles (the first this-many of the scenario's list).
    pub obstacles: usize,
    /// Largest effector distance from start to goal, m.
    pub goal_distance: f64,
    /// Random goal jumps per second.
    #[serde(default)]
    pub jump_rate: f64,
}

/// Staged curriculum.
#[derive(Clone, Debug)]
pub struct Staged {
    stages: Vec<Stage>,
    current: usize,
    threshold: f64,
    recent: SuccessWindow,
}

impl Staged {
    pub fn new(stages: Vec<Stage>, threshold: f64, window: usize) -> Self {
        Staged {
            stages,
            current: 0,
            threshold,
            recent: SuccessWindow::new(window),
        }
    }

    /// Three stages: near goals without obstacles, mid-range goals with two obstacles, the full task.
    pub fn default_stages() -> Vec<Stage> {
        vec![
            Stage {
                obstacles: 0,
                goal_distance: 0.25,
                jump_rate: 0.0,
            },
            Stage {
                obstacles: 2,
                goal_distance: 0.5,
                jump_rate: 0.0,
            },
            Stage {
                obstacles: usize::MAX,
                goal_distance: 100.0,
                jump_rate: 0.0,
            },
        ]
    }

    /// Index of the current stage.
    pub fn stage(&self) -> usize {
        self.current
    }
}

impl Curriculum for Staged {
    fn name(&self) -> &'static str {
        "staged"
    }

    fn draw(&mut self, env: &ArmEnv, _env_steps: u64, rng: &mut ChaCha8Rng) -> EpisodeDraw {
        let st = self.stages[self.current];
        let obstacles = st.obstacles.min(env.scenario().obstacles.len());
        let start = env.sample_start(rng);
        let ee = env.scenario().arm.effector(&start.q);
        let mut goal = env.sample_goal(rng);
        for _ in 0..500 {
            if crate::sim::geometry::dist(goal, ee) <= st.goal_distance {
                break;
            }
            goal = env.sample_goal(rng);
        }
        EpisodeDraw {
            start,
            goal,
            obstacles,
            jump_rate: st.jump_rate,
            start_on_path: false,
        }
    }

    fn feedback(&mut self, success: bool, _env_steps: u64) {
        self.recent.push(success);
        if let Some(rate) = self.recent.rate() {
            if rate >= self.threshold && self.current + 1 < self.stages.len() {
                self.current += 1;
                self.recent.clear();
            }
        }
    }

    fn level(&self) -> f64 {
        if self.stages.len() <= 1 {
            1.0
        } else {
            self.current as f64 / (self.stages.len() - 1) as f64
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn stages_advance_on_success() {
        let mut c = Staged::new(Staged::default_stages(), 0.5, 2);
        assert_eq!(c.level(), 0.0);
        c.feedback(true, 0);
        c.feedback(false, 0);
        assert_eq!(c.stage(), 1);
        c.feedback(false, 0);
        c.feedback(false, 0);
        assert_eq!(c.stage(), 1);
        c.feedback(true, 0);
        c.feedback(true, 0);
        assert_eq!(c.stage(), 2);
        assert_eq!(c.level(), 1.0);
    }
}
