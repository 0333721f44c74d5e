//! `staged`: difficulty stages — how many obstacles are active, how far the goal may be from the start, how often
//! the goal jumps — advanced when the recent success rate passes a threshold.

use super::{
    build_from, check_unit, check_window, default_params, Curriculum, CurriculumInfo,
    CurriculumParams, EpisodeDraw, ParamError, SuccessWindow, MAX_STAGES,
};
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

/// Registry entry.
pub const INFO: CurriculumInfo = CurriculumInfo {
    name: "staged",
    meaning: "difficulty stages (obstacle count, goal distance, goal-jump rate) advanced when recent success passes a threshold",
    params: &[
        ("stages", "list of {obstacles, goal_distance (m), jump_rate (1/s)}, easiest first"),
        ("success_threshold", "recent success rate that advances a stage"),
        ("window", "episodes in the recent success rate"),
    ],
    defaults: default_params::<StagedParams>,
    build: build_from::<StagedParams>,
};

/// Parameters of `staged`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct StagedParams {
    /// The stages, easiest first (1 to `MAX_STAGES`). Default: `Staged::default_stages()` (three stages).
    pub stages: Vec<Stage>,
    /// Recent success rate that advances a stage, in [0, 1]. Default 0.7.
    pub success_threshold: f64,
    /// Episodes in the recent success rate. Default 40.
    pub window: usize,
}

impl Default for StagedParams {
    fn default() -> Self {
        StagedParams {
            stages: Staged::default_stages(),
            success_threshold: 0.7,
            window: 40,
        }
    }
}

impl CurriculumParams for StagedParams {
    fn validate(&self) -> Result<(), ParamError> {
        check_unit("success_threshold", self.success_threshold)?;
        check_window(self.window)?;
        if self.stages.is_empty() || self.stages.len() > MAX_STAGES {
            return Err(ParamError::new(
                "stages",
                format!("needs 1 to {MAX_STAGES} stages, got {}", self.stages.len()),
            ));
        }
        for (i, s) in self.stages.iter().enumerate() {
            if !(s.goal_distance.is_finite() && s.goal_distance > 0.0) {
                return Err(ParamError::new(
                    format!("stages[{i}].goal_distance"),
                    format!("must be > 0 m, got {}", s.goal_distance),
                ));
            }
            let max_rate = crate::sim::scenario::MAX_GOAL_JUMP_RATE;
            if !(s.jump_rate.is_finite() && (0.0..=max_rate).contains(&s.jump_rate)) {
                return Err(ParamError::new(
                    format!("stages[{i}].jump_rate"),
                    format!(
                        "must be in [0, {max_rate}] jumps per second, got {}",
                        crate::config::num(s.jump_rate)
                    ),
                ));
            }
        }
        Ok(())
    }
    fn build(self) -> Box<dyn Curriculum> {
        Box::new(Staged::new(
            self.stages,
            self.success_threshold,
            self.window,
        ))
    }
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
