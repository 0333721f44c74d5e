//! Random scenes: disc obstacles drawn from `[random]` (none overlapping the start pose, the goal region or
//! each other) and a random reachable, collision-free goal. Beside `scenario` rather than in it because the
//! goal is drawn by an environment (`env` depends on `scenario`, so `scenario` must not depend on `env`).

use super::arm::MAX_JOINTS;
use super::env::ArmEnv;
use super::geometry::{capsule_shape_distance, shape_shape_distance, Capsule, Shape};
use super::scenario::{Motion, Obstacle, Scenario};
use rand::Rng;

impl Scenario {
    /// A new scenario with random still disc obstacles drawn from `[random]` (none overlapping the start pose,
    /// the goal region or each other) and a random reachable, collision-free goal. Seeded by `rng`.
    /// Without a `[random]` table only the goal is redrawn.
    pub fn randomized<R: Rng>(&self, rng: &mut R) -> Scenario {
        let mut sc = self.clone();
        if let Some(r) = &self.random {
            sc.obstacles.clear();
            let count = rng.gen_range(r.obstacle_count[0]..=r.obstacle_count[1]);
            let mut caps = [Capsule {
                a: [0.0; 2],
                b: [0.0; 2],
                radius: 0.0,
            }; MAX_JOINTS];
            let nc = self.capsules(&self.start_q, &mut caps);
            let mut tries = 0;
            while sc.obstacles.len() < count && tries < 10_000 {
                tries += 1;
                let c = [
                    rng.gen_range(r.region_min[0]..=r.region_max[0]),
                    rng.gen_range(r.region_min[1]..=r.region_max[1]),
                ];
                let rad = rng.gen_range(r.obstacle_radius[0]..=r.obstacle_radius[1]);
                let s = Shape::Disc {
                    center: c,
                    radius: rad,
                };
                let clear_start = caps[..nc]
                    .iter()
                    .all(|cap| capsule_shape_distance(cap, &s) > 0.02);
                let clear_others = sc
                    .obstacles
                    .iter()
                    .all(|o| shape_shape_distance(&o.shape, &s) > 0.0);
                let clear_base = crate::sim::geometry::dist(c, [0.0, 0.0]) > rad + 0.1;
                if clear_start && clear_others && clear_base {
                    sc.obstacles.push(Obstacle {
                        shape: s,
                        motion: Motion::Still,
                    });
                }
            }
        }
        let env = ArmEnv::new(std::sync::Arc::new(sc.clone()));
        sc.goal = env.sample_goal(rng);
        sc
    }
}
