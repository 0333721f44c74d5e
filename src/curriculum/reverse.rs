//! `reverse`: starts spread out from the goal. Each episode draws a collision-free goal configuration and starts
//! within a joint-space radius of it; the radius widens whenever the recent success rate passes a threshold
//! (after Florensa, Held, Wulfmeier, Zhang, Abbeel, "Reverse Curriculum Generation for Reinforcement
//! Learning", CoRL 2017, simplified to a growing ball instead of random-walk expansion).

use super::{
    build_from, check_unit, check_window, default_params, Curriculum, CurriculumInfo,
    CurriculumParams, EpisodeDraw, ParamError, SuccessWindow,
};
use crate::sim::{ArmEnv, ArmState, MAX_JOINTS};
use rand::Rng;
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};

/// Registry entry.
pub const INFO: CurriculumInfo = CurriculumInfo {
    name: "reverse",
    meaning: "starts within a joint-space radius of the goal configuration, widening when recent success passes a threshold (Florensa et al. 2017)",
    params: &[
        ("start_radius", "initial radius, rad"),
        ("radius_step", "radius added per widening, rad"),
        ("max_radius", "largest radius, rad"),
        ("success_threshold", "recent success rate that widens the radius"),
        ("window", "episodes in the recent success rate"),
    ],
    defaults: default_params::<ReverseParams>,
    build: build_from::<ReverseParams>,
};

/// Parameters of `reverse`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct ReverseParams {
    /// Initial joint-space radius around the goal configuration, rad. Default 0.3.
    pub start_radius: f64,
    /// Radius added each time the recent success rate passes the threshold, rad. Default 0.3.
    pub radius_step: f64,
    /// Largest radius, rad (then starts are uniform in the ball). Default 3.0.
    pub max_radius: f64,
    /// Recent success rate that widens the radius, in [0, 1]. Default 0.7.
    pub success_threshold: f64,
    /// Episodes in the recent success rate. Default 40.
    pub window: usize,
}

impl Default for ReverseParams {
    fn default() -> Self {
        ReverseParams {
            start_radius: 0.3,
            radius_step: 0.3,
            max_radius: 3.0,
            success_threshold: 0.7,
            window: 40,
        }
    }
}

impl CurriculumParams for ReverseParams {
    fn validate(&self) -> Result<(), ParamError> {
        check_unit("success_threshold", self.success_threshold)?;
        for (k, x) in [
            ("start_radius", self.start_radius),
            ("radius_step", self.radius_step),
            ("max_radius", self.max_radius),
        ] {
            if !(x.is_finite() && x > 0.0) {
                return Err(ParamError::new(
                    k,
                    format!("must be a finite number > 0 (rad), got {x}"),
                ));
            }
        }
        if self.start_radius > self.max_radius {
            return Err(ParamError::new(
                "start_radius",
                format!(
                    "start_radius ({}) must be <= max_radius ({})",
                    self.start_radius, self.max_radius
                ),
            ));
        }
        check_window(self.window)
    }
    fn build(self) -> Box<dyn Curriculum> {
        Box::new(Reverse::new(
            self.start_radius,
            self.radius_step,
            self.max_radius,
            self.success_threshold,
            self.window,
        ))
    }
}

/// Reverse curriculum over a joint-space ball around the goal configuration.
#[derive(Clone, Debug)]
pub struct Reverse {
    radius: f64,
    r0: f64,
    step: f64,
    max: f64,
    threshold: f64,
    recent: SuccessWindow,
}

impl Reverse {
    pub fn new(
        start_radius: f64,
        radius_step: f64,
        max_radius: f64,
        threshold: f64,
        window: usize,
    ) -> Self {
        Reverse {
            radius: start_radius,
            r0: start_radius,
            step: radius_step,
            max: max_radius,
            threshold,
            recent: SuccessWindow::new(window),
        }
    }

    /// Current radius, rad.
    pub fn radius(&self) -> f64 {
        self.radius
    }
}

impl Curriculum for Reverse {
    fn name(&self) -> &'static str {
        "reverse"
    }

    fn draw(&mut self, env: &ArmEnv, _env_steps: u64, rng: &mut ChaCha8Rng) -> EpisodeDraw {
        let n = env.n();
        let links = &env.scenario().arm.links;
        for _ in 0..1000 {
            let qg = env.sample_config(rng);
            if !env.config_free(&qg) {
                continue;
            }
            // Uniform in the n-ball of the current radius: a Gaussian direction times r * u^(1/n).
            let mut dir = [0.0; MAX_JOINTS];
            let mut norm = 0.0;
            for d in dir.iter_mut().take(n) {
                let (u1, u2): (f64, f64) = (rng.gen::<f64>().max(1e-300), rng.gen());
                *d = (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos();
                norm += *d * *d;
            }
            let norm = norm.sqrt().max(1e-12);
            let r = self.radius * rng.gen::<f64>().powf(1.0 / n as f64);
            let mut q = qg;
            for i in 0..n {
                q[i] = (qg[i] + r * dir[i] / norm).clamp(links[i].q_min, links[i].q_max);
            }
            if !env.config_free(&q) {
                continue;
            }
            return EpisodeDraw {
                start: ArmState::at_rest(&q[..n]),
                goal: env.scenario().arm.effector(&qg),
                obstacles: env.scenario().obstacles.len(),
                jump_rate: env.scenario().events.goal_jump_rate,
                start_on_path: false,
            };
        }
        super::full_task_draw(env, rng)
    }

    fn feedback(&mut self, success: bool, _env_steps: u64) {
        self.recent.push(success);
        if let Some(rate) = self.recent.rate() {
            if rate >= self.threshold && self.radius < self.max {
                self.radius = (self.radius + self.step).min(self.max);
                self.recent.clear();
            }
        }
    }

    fn level(&self) -> f64 {
        if self.max <= self.r0 {
            1.0
        } else {
            (self.radius - self.r0) / (self.max - self.r0)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn radius_widens_only_on_sustained_success() {
        let mut c = Reverse::new(0.3, 0.2, 0.7, 0.75, 4);
        for s in [true, true, true, false] {
            c.feedback(s, 0);
        }
        assert_eq!(c.radius(), 0.5); // 3 of 4 = 0.75 passes
        for s in [true, false, true, false] {
            c.feedback(s, 0);
        }
        assert_eq!(c.radius(), 0.5); // 0.5 does not
        for _ in 0..8 {
            c.feedback(true, 0);
        }
        assert_eq!(c.radius(), 0.7); // capped at max
        assert_eq!(c.level(), 1.0);
    }
}
