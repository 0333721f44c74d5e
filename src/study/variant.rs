//! What a variant's settings make of the task: its episode, the observation its policy sees and the arm it
//! drives (the last two are recorded in checkpoints and checked by `replay`).

use super::experiment::{fnv1a_hex, Experiment, VariantSpec};
use crate::task::{observation::arm_obs_dim, Episode};

impl VariantSpec {
    /// A fresh episode of the task under this variant's scenario, reward, planner, discount and observation.
    pub fn episode(&self) -> Episode {
        Episode::new(
            self.scenario.clone(),
            &self.reward,
            &self.plan,
            self.learner.gamma,
            &self.observation,
            &self.waypoints,
        )
    }

    /// The observation this variant's policy sees: its length and a description of its layout.
    pub fn observation_layout(&self) -> (usize, String) {
        let ep = self.episode();
        let (sim, all) = (arm_obs_dim(&ep.sim), ep.obs_dim());
        let n = self.scenario.n();
        let mut path = if self.observation.waypoints {
            format!(" + {} waypoints x 2", self.plan.waypoints)
        } else {
            " (observation.waypoints = false)".into()
        };
        if self.observation.joint_waypoints {
            path += &format!(" + {} joint waypoints x {n}", self.plan.waypoints);
        }
        if self.observation.clearance {
            path += &format!(" + link clearances and their gradient ({})", 2 * n);
        }
        (
            all,
            format!("{all} values: {n}-joint arm, goal and obstacles ({sim}){path}"),
        )
    }

    /// The arm this variant's policy drives, as recorded in checkpoints.
    pub fn arm_description(&self) -> String {
        let sc = &self.scenario;
        let lengths: Vec<String> = sc
            .arm
            .links
            .iter()
            .map(|l| format!("{}", l.length))
            .collect();
        let control = match sc.control {
            crate::sim::ControlMode::Torque => "torque",
            crate::sim::ControlMode::Acceleration => "acceleration",
        };
        format!(
            "{} joints, link lengths [{}] m, {control} control",
            sc.n(),
            lengths.join(", ")
        )
    }
}

impl Experiment {
    /// Identifies everything that determines a run's results.
    pub fn config_hash(&self, v: &VariantSpec, seed: u64) -> String {
        let exp = self;
        let st = &exp.study;
        let settings = format!(
            "{}|{}|{}|{}|{}|{}",
            st.budget,
            exp.eval_every(),
            st.eval_episodes,
            st.eval_seed,
            seed,
            env!("CARGO_PKG_VERSION")
        );
        // A learned waypoint source's model is part of the configuration (its folder name is not enough: a
        // rebuilt model must make the runs that used the old one stale). Without one the hash is unchanged.
        match &v.waypoints.model {
            None => fnv1a_hex(&[
                st.name.as_bytes(),
                v.name.as_bytes(),
                v.merged.as_bytes(),
                settings.as_bytes(),
            ]),
            Some(m) => fnv1a_hex(&[
                st.name.as_bytes(),
                v.name.as_bytes(),
                v.merged.as_bytes(),
                settings.as_bytes(),
                m.digest().as_bytes(),
            ]),
        }
    }
}
