//! Episode metrics: what one episode did (success, contact, return, smoothness, clearance, path deviation,
//! replans), the running sums that collect them step by step without allocating, and the means over a set
//! of evaluation episodes that become a row of evaluations.csv.

use crate::sim::{StepReport, MAX_JOINTS};

/// RMS over joints and samples: sqrt(sum of squares / (samples * joints)). The one definition of "RMS joint
/// acceleration" and "RMS jerk" in termwise (evaluations, replay, the controller checks): the root mean
/// square of every per-joint sample, so an arm moving each joint alike scores the same whatever its joint
/// count. (Summing over joints instead gives the RMS of the acceleration vector's Euclidean norm, sqrt(n)
/// times larger for equal joints; runs have always reported the per-joint figure.)
pub fn rms_per_joint(sum_sq: f64, samples: f64, joints: f64) -> f64 {
    (sum_sq / (samples * joints)).sqrt()
}

/// Metrics of one finished episode.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct EpisodeMetrics {
    /// Clean success: the goal region was reached and no contact happened in the episode.
    pub success: bool,
    /// The goal region was reached (contact allowed).
    pub reached: bool,
    /// Some step of the episode had the arm in contact (obstacle, boundary or itself).
    pub collided: bool,
    /// Time at which the goal was reached, s (None when it was not).
    pub time_to_goal: Option<f64>,
    /// Undiscounted sum of rewards.
    pub ret: f64,
    /// Per-term sums, in the composer's order.
    pub terms: Vec<f64>,
    pub steps: usize,
    /// RMS joint acceleration over steps and joints, rad/s^2.
    pub rms_acc: f64,
    /// Largest |joint acceleration|, rad/s^2.
    pub peak_acc: f64,
    /// RMS joint jerk (finite difference of the per-step accelerations), rad/s^3.
    pub rms_jerk: f64,
    /// Effector path length, m.
    pub path_length: f64,
    /// Smallest signed clearance seen, m.
    pub min_clearance: f64,
    /// Mean effector distance from the reference path, m.
    pub path_deviation: f64,
    /// Replans after scenario events.
    pub replans: usize,
    /// Plans that fell back to the straight line.
    pub fallbacks: usize,
    /// Fraction of the reference paths handed to the episode (at the start and at every renewal) whose
    /// joint-space polyline touches an obstacle (`plan::learned::path_collides`).
    pub reference_collisions: f64,
}

/// Running sums for `EpisodeMetrics` (no allocation per step).
#[derive(Clone, Debug, Default)]
pub(crate) struct Accum {
    pub(crate) sum_sq_acc: f64,
    pub(crate) peak_acc: f64,
    pub(crate) sum_sq_jerk: f64,
    pub(crate) jerk_samples: usize,
    pub(crate) prev_ddq: Option<[f64; MAX_JOINTS]>,
    pub(crate) path_length: f64,
    pub(crate) min_clearance: f64,
    pub(crate) sum_dev: f64,
    pub(crate) steps: usize,
    pub(crate) ret: f64,
    pub(crate) replans: usize,
    pub(crate) fallbacks: usize,
    /// Reference paths handed over, and how many of them touch an obstacle.
    pub(crate) references: usize,
    pub(crate) colliding_references: usize,
    pub(crate) collided: bool,
    pub(crate) time_to_goal: Option<f64>,
}

impl Accum {
    /// Add one control step (`dt` s, `n` joints) with reward `r` and effector distance `deviation` from the
    /// reference path.
    pub(crate) fn record(&mut self, now: &StepReport, n: usize, dt: f64, r: f64, deviation: f64) {
        for i in 0..n {
            self.sum_sq_acc += now.ddq[i] * now.ddq[i];
            self.peak_acc = self.peak_acc.max(now.ddq[i].abs());
        }
        if let Some(p) = self.prev_ddq {
            for i in 0..n {
                let j = (now.ddq[i] - p[i]) / dt;
                self.sum_sq_jerk += j * j;
            }
            self.jerk_samples += 1;
        }
        self.prev_ddq = Some(now.ddq);
        self.path_length += crate::sim::geometry::dist(now.ee, now.ee_prev);
        self.min_clearance = self.min_clearance.min(now.min_clearance);
        self.sum_dev += deviation;
        self.steps += 1;
        self.ret += r;
        self.collided |= now.collided;
        if now.reached_goal && self.time_to_goal.is_none() {
            self.time_to_goal = Some(now.t);
        }
    }

    /// The metrics so far of an episode of an `n`-joint arm whose reward terms summed to `terms`.
    pub(crate) fn metrics(&self, n: usize, terms: &[f64]) -> EpisodeMetrics {
        let n = n as f64;
        let steps = self.steps.max(1) as f64;
        EpisodeMetrics {
            success: self.time_to_goal.is_some() && !self.collided,
            reached: self.time_to_goal.is_some(),
            collided: self.collided,
            time_to_goal: self.time_to_goal,
            ret: self.ret,
            terms: terms.to_vec(),
            steps: self.steps,
            rms_acc: rms_per_joint(self.sum_sq_acc, steps, n),
            peak_acc: self.peak_acc,
            rms_jerk: if self.jerk_samples > 0 {
                rms_per_joint(self.sum_sq_jerk, self.jerk_samples as f64, n)
            } else {
                0.0
            },
            path_length: self.path_length,
            min_clearance: self.min_clearance,
            path_deviation: self.sum_dev / steps,
            replans: self.replans,
            fallbacks: self.fallbacks,
            reference_collisions: self.colliding_references as f64 / self.references.max(1) as f64,
        }
    }
}

/// Means over a set of evaluation episodes (the columns of evaluations.csv and term_contributions.csv).
#[derive(Clone, Debug, Default, PartialEq)]
pub struct EvalSummary {
    /// Fraction of episodes with clean success (goal reached, no contact).
    pub success_rate: f64,
    /// Fraction of episodes that reached the goal, contact allowed.
    pub reached_rate: f64,
    pub mean_return: f64,
    /// Mean over episodes that reached the goal (contact allowed), s (NaN when none did).
    pub time_to_goal: f64,
    pub collision_rate: f64,
    /// Mean episode length, control steps.
    pub episode_steps: f64,
    pub rms_joint_acc: f64,
    pub peak_joint_acc: f64,
    pub rms_jerk: f64,
    pub path_length: f64,
    pub min_clearance: f64,
    pub path_deviation: f64,
    pub replans: f64,
    pub planner_fallbacks: f64,
    /// Mean over episodes of the fraction of their reference paths that touch an obstacle.
    pub reference_collisions: f64,
    pub terms: Vec<f64>,
}

impl EvalSummary {
    /// Average episode metrics.
    pub fn from_episodes(eps: &[EpisodeMetrics]) -> EvalSummary {
        let n = eps.len().max(1) as f64;
        let mean = |f: &dyn Fn(&EpisodeMetrics) -> f64| eps.iter().map(f).sum::<f64>() / n;
        let succ: Vec<f64> = eps.iter().filter_map(|e| e.time_to_goal).collect();
        let n_terms = eps.first().map(|e| e.terms.len()).unwrap_or(0);
        EvalSummary {
            success_rate: mean(&|e| e.success as u8 as f64),
            reached_rate: mean(&|e| e.reached as u8 as f64),
            mean_return: mean(&|e| e.ret),
            time_to_goal: if succ.is_empty() {
                f64::NAN
            } else {
                succ.iter().sum::<f64>() / succ.len() as f64
            },
            collision_rate: mean(&|e| e.collided as u8 as f64),
            episode_steps: mean(&|e| e.steps as f64),
            rms_joint_acc: mean(&|e| e.rms_acc),
            peak_joint_acc: mean(&|e| e.peak_acc),
            rms_jerk: mean(&|e| e.rms_jerk),
            path_length: mean(&|e| e.path_length),
            min_clearance: eps
                .iter()
                .map(|e| e.min_clearance)
                .fold(f64::INFINITY, f64::min),
            path_deviation: mean(&|e| e.path_deviation),
            replans: mean(&|e| e.replans as f64),
            planner_fallbacks: mean(&|e| e.fallbacks as f64),
            reference_collisions: mean(&|e| e.reference_collisions),
            terms: (0..n_terms).map(|k| mean(&|e| e.terms[k])).collect(),
        }
    }
}

impl EvalSummary {
    /// The row of evaluations.csv for this summary at `env_steps` with curriculum level `level`.
    pub fn row(&self, env_steps: u64, level: f64) -> crate::results::EvalRow {
        crate::results::EvalRow {
            env_steps,
            success_rate: self.success_rate,
            reached_rate: self.reached_rate,
            collision_rate: self.collision_rate,
            mean_return: self.mean_return,
            time_to_goal: self.time_to_goal,
            episode_steps: self.episode_steps,
            rms_joint_acc: self.rms_joint_acc,
            peak_joint_acc: self.peak_joint_acc,
            rms_jerk: self.rms_jerk,
            path_length: self.path_length,
            min_clearance: self.min_clearance,
            path_deviation: self.path_deviation,
            replans: self.replans,
            planner_fallbacks: self.planner_fallbacks,
            reference_collisions: self.reference_collisions,
            curriculum_level: level,
        }
    }
}
